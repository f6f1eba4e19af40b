//! What every command prints beside its output: the safety note. It sits at
//! the very end of the data flow, where reports reach the terminal; the
//! `heatbound` binary's help text carries it too.

/// Cautions printed beside reports and in the help text.
pub const SAFETY_NOTE: &str = "Caution: heat-engine rigs have hot surfaces, pressurised parts, \
rotating parts and electric heaters. heatbound alarms are monitoring aids, not a safety-rated \
interlock: keep hardwired cut-outs, relief devices and guards in place, and follow local codes \
and licensed practice.";

/// An error and its causes as one line for a bench engineer: each cause
/// once (a cause whose words the message already holds is not repeated),
/// SQLite's result codes turned into what they mean for the log, and
/// without the OS's `(os error N)` numbers.
pub fn error_line(err: &(dyn std::error::Error + 'static)) -> String {
    let mut line = err.to_string();
    let mut cause = err.source();
    let mut current: &(dyn std::error::Error + 'static) = err;
    if let Some(words) = sqlite_words(current) {
        line = words.to_string();
        cause = None;
    }
    while let Some(c) = cause {
        current = c;
        let text = c.to_string();
        match sqlite_words(c) {
            Some(words) => {
                if !text.is_empty() && line.contains(&text) {
                    line = line.replace(&text, words);
                } else {
                    line.push_str(": ");
                    line.push_str(words);
                }
                // What lies below SQLite's error is its raw code.
                break;
            }
            None if line.contains(&text) => {}
            None => {
                line.push_str(": ");
                line.push_str(&text);
            }
        }
        cause = current.source();
    }
    strip_os_error(&line)
}

/// What an SQLite failure means for a heatbound log, when it is one.
fn sqlite_words(e: &(dyn std::error::Error + 'static)) -> Option<&'static str> {
    use rusqlite::ErrorCode as C;
    let code = match e.downcast_ref::<rusqlite::Error>() {
        Some(rusqlite::Error::SqliteFailure(f, _)) => f.code,
        Some(_) => return None,
        None => e.downcast_ref::<rusqlite::ffi::Error>()?.code,
    };
    Some(match code {
        C::NotADatabase => "not an SQLite database (not a heatbound log, or damaged)",
        C::DatabaseCorrupt => "the database is damaged",
        C::CannotOpen => "cannot open the file: its folder is missing, or not readable or writable",
        C::PermissionDenied => "permission denied",
        C::ReadOnly => "the file or its folder is read-only",
        C::DatabaseBusy | C::DatabaseLocked => {
            "the log is locked by another program; try again when it has finished"
        }
        C::DiskFull => "the disk is full",
        C::SystemIoFailure => "the disk could not be read or written",
        C::ConstraintViolation => "the log holds rows that contradict its own schema",
        _ => "the log could not be read or written",
    })
}

/// `text` without the ` (os error N)` that Rust's I/O errors append.
fn strip_os_error(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut rest = text;
    while let Some(i) = rest.find(" (os error ") {
        out.push_str(rest.get(..i).unwrap_or(""));
        let tail = rest.get(i..).unwrap_or("");
        match tail.find(')') {
            Some(j) => rest = tail.get(j + 1..).unwrap_or(""),
            None => {
                rest = "";
            }
        }
    }
    out.push_str(rest);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Debug, thiserror::Error)]
    #[error("run.sqlite: cannot open: {0}")]
    struct Wrapped(#[source] std::io::Error);

    #[test]
    fn each_cause_once_and_no_os_numbers() {
        let io = std::io::Error::from_raw_os_error(2);
        let e = anyhow::Error::new(Wrapped(io));
        let line = error_line(e.as_ref());
        assert_eq!(line.matches("No such file").count(), 1, "{line}");
        assert!(!line.contains("os error"), "{line}");
    }

    #[test]
    fn sqlite_codes_become_words() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("notes.sqlite");
        std::fs::write(&path, vec![b'x'; 4096]).unwrap();
        let conn = rusqlite::Connection::open(&path).unwrap();
        let err = conn
            .pragma_query_value(None, "user_version", |r| r.get::<_, i64>(0))
            .unwrap_err();
        let e = anyhow::Error::new(err).context("notes.sqlite: cannot read the log");
        let line = error_line(e.as_ref());
        assert!(line.contains("not an SQLite database"), "{line}");
        assert!(!line.contains("Error code"), "{line}");
        assert_eq!(line.matches("not a database").count(), 0, "{line}");
    }
}

/// Text from the user's input, fit to quote in a message: control bytes
/// escaped (`\n`, `\u{1b}`), cut to `max` characters with the count of
/// what was left out, so a damaged file cannot flood the terminal.
pub fn excerpt(text: &str, max: usize) -> String {
    let mut out = String::new();
    let mut chars = text.chars();
    for (shown, c) in chars.by_ref().enumerate() {
        if shown >= max {
            let rest = 1 + chars.count();
            out.push_str(&format!("… ({rest} more characters)"));
            return out;
        }
        if c.is_control() {
            out.extend(c.escape_default());
        } else {
            out.push(c);
        }
    }
    out
}

#[cfg(test)]
mod excerpt_tests {
    use super::excerpt;

    #[test]
    fn control_bytes_are_escaped_and_long_text_is_cut() {
        assert_eq!(excerpt("a\u{1b}[2Jb\n", 80), "a\\u{1b}[2Jb\\n");
        let long = "x".repeat(50_000_000 / 1000);
        let e = excerpt(&long, 100);
        assert!(e.len() < 200, "{}", e.len());
        assert!(e.ends_with("(49900 more characters)"), "{e}");
    }
}

/// The OS's message without the `(os error N)` that Rust appends.
///
/// ```
/// let e = std::io::Error::from_raw_os_error(2);
/// assert_eq!(heatbound_host::term::os_words(&e), "No such file or directory");
/// ```
pub fn os_words(e: &std::io::Error) -> String {
    let text = e.to_string();
    match text.find(" (os error") {
        Some(i) => text.get(..i).unwrap_or(&text).to_string(),
        None => text,
    }
}

/// Inputs at least this large get their progress bar at once; a job on a
/// smaller input shows one only if it is still running after
/// [`PROGRESS_AFTER`].
pub const PROGRESS_MIN_BYTES: u64 = 1 << 20;

/// How long a job on a small input runs before its progress bar appears.
pub const PROGRESS_AFTER: std::time::Duration = std::time::Duration::from_secs(1);

/// What a progress bar counts, which decides how its figures read.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum Counting {
    /// Bytes of an input file (shown in KiB, MiB, GiB).
    Bytes,
    /// Rows of a table.
    Rows,
    /// Frames of a capture or a log.
    Frames,
}

/// The look of a bar that counts `counting`: label, phase (the bar's
/// prefix), bar, done of total, throughput and time left.
///
/// ```
/// use heatbound_host::term::{Counting, progress_style};
/// let bar = indicatif::ProgressBar::hidden();
/// bar.set_style(progress_style(Counting::Rows));
/// ```
pub fn progress_style(counting: Counting) -> indicatif::ProgressStyle {
    let figures = match counting {
        Counting::Bytes => "{binary_bytes}/{binary_total_bytes} ({binary_bytes_per_sec}",
        Counting::Rows => "{human_pos}/{human_len} rows ({per_sec:0}",
        Counting::Frames => "{human_pos}/{human_len} frames ({per_sec:0}",
    };
    let template = format!("{{msg}} {{prefix}} {{wide_bar}} {figures}, {{eta}} left)");
    indicatif::ProgressStyle::with_template(&template)
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar())
}

/// A progress bar on stderr for a job over `len` units of what `counting`
/// names, reading an input of `input_bytes` bytes; `label` leads the line
/// and the prefix names the phase (`reading`, `checking`: the engines
/// that have phases set it).
///
/// An input of at least [`PROGRESS_MIN_BYTES`] shows the bar at once; a
/// smaller one only if the job is still running after [`PROGRESS_AFTER`],
/// so quick jobs never flash one. indicatif draws nothing when stderr is
/// not a terminal, and stdout is never touched. The engines only move the
/// bar; the command finishes it (`finish_and_clear`) before it prints.
///
/// ```
/// use heatbound_host::term::{Counting, progress_bar};
/// let bar = progress_bar("analyze run.csv", 4096, Counting::Bytes, 4096);
/// bar.set_position(2048);
/// assert_eq!(bar.position(), 2048);
/// bar.finish_and_clear();
/// ```
pub fn progress_bar(
    label: &str,
    len: u64,
    counting: Counting,
    input_bytes: u64,
) -> indicatif::ProgressBar {
    use indicatif::{ProgressBar, ProgressDrawTarget};
    let bar = ProgressBar::with_draw_target(Some(len), ProgressDrawTarget::hidden())
        .with_style(progress_style(counting))
        .with_message(label.to_string())
        .with_prefix(match counting {
            Counting::Bytes | Counting::Rows => "reading",
            Counting::Frames => "checking",
        })
        // An error that ends the job early leaves no bar behind.
        .with_finish(indicatif::ProgressFinish::AndClear);
    if input_bytes >= PROGRESS_MIN_BYTES {
        bar.set_draw_target(ProgressDrawTarget::stderr());
    } else {
        let later = bar.downgrade();
        // A bar the job has finished (or dropped) by then stays hidden. If
        // no thread can be had, the small job simply shows no bar.
        let _ = std::thread::Builder::new()
            .name("progress".into())
            .spawn(move || {
                std::thread::sleep(PROGRESS_AFTER);
                if let Some(bar) = later.upgrade()
                    && !bar.is_finished()
                {
                    bar.set_draw_target(ProgressDrawTarget::stderr());
                }
            });
    }
    bar
}

/// How to run `heatbound` with `words` (a subcommand and its arguments)
/// from here, as a line that works when pasted into a shell: `heatbound …`
/// when `heatbound` is on `PATH`; else, under `cargo run`, the same `cargo
/// run` (its profile, and `--manifest-path` outside the workspace); else
/// this executable's path. Words a shell would split or expand are quoted.
///
/// ```
/// let hint = heatbound_host::term::how_to_run(&["audit", "my run.sqlite"]);
/// assert!(hint.ends_with(" audit 'my run.sqlite'"), "{hint}");
/// ```
pub fn how_to_run(words: &[&str]) -> String {
    how_to_run_as(&Invocation::current(), words)
}

/// How this process was started, as far as [`how_to_run`] needs it.
#[derive(Clone, Debug, Default)]
struct Invocation {
    /// An executable `heatbound` is on `PATH`.
    on_path: bool,
    /// `cargo run` started us: the package's folder (`CARGO_MANIFEST_DIR`).
    manifest_dir: Option<std::path::PathBuf>,
    /// This executable.
    exe: Option<std::path::PathBuf>,
    /// The working folder.
    cwd: Option<std::path::PathBuf>,
}

impl Invocation {
    fn current() -> Self {
        let on_path = std::env::var_os("PATH").is_some_and(|path| {
            std::env::split_paths(&path).any(|dir| is_executable(&dir.join("heatbound")))
        });
        // Cargo sets these for the program it runs; only our own package's
        // folder counts (a test harness of another crate sets its own).
        let manifest_dir = std::env::var_os("CARGO_MANIFEST_DIR")
            .filter(|_| std::env::var_os("CARGO_PKG_NAME").is_some_and(|n| n == "heatbound-host"))
            .map(std::path::PathBuf::from);
        Invocation {
            on_path,
            manifest_dir,
            exe: std::env::current_exe().ok(),
            cwd: std::env::current_dir().ok(),
        }
    }
}

/// Whether `path` is a file someone may execute.
fn is_executable(path: &std::path::Path) -> bool {
    match std::fs::metadata(path) {
        #[cfg(unix)]
        Ok(m) => {
            use std::os::unix::fs::PermissionsExt as _;
            m.is_file() && m.permissions().mode() & 0o111 != 0
        }
        #[cfg(not(unix))]
        Ok(m) => m.is_file(),
        Err(_) => false,
    }
}

/// [`how_to_run`] for a given invocation.
fn how_to_run_as(inv: &Invocation, words: &[&str]) -> String {
    let mut line: Vec<String> = Vec::new();
    match (&inv.manifest_dir, &inv.exe) {
        _ if inv.on_path => line.push("heatbound".into()),
        (Some(dir), Some(exe)) if cargo_profile(exe).is_some() => {
            line.extend(["cargo", "run"].map(String::from));
            match cargo_profile(exe) {
                Some("debug") | None => {}
                Some("release") => line.push("--release".into()),
                Some(other) => line.extend(["--profile".into(), shell_word(other)]),
            }
            line.extend(["-p", "heatbound-host"].map(String::from));
            // `cargo run -p` finds the workspace from anywhere inside it.
            let inside = match (&inv.cwd, dir.parent()) {
                (Some(cwd), Some(workspace)) => cwd.starts_with(workspace),
                _ => false,
            };
            if !inside {
                line.push("--manifest-path".into());
                line.push(shell_word(&dir.join("Cargo.toml").to_string_lossy()));
            }
            line.push("--".into());
        }
        (_, Some(exe)) => {
            let shown = match inv.cwd.as_ref().and_then(|cwd| exe.strip_prefix(cwd).ok()) {
                Some(rel) => std::path::Path::new(".").join(rel),
                None => exe.clone(),
            };
            line.push(shell_word(&shown.to_string_lossy()));
        }
        (_, None) => line.push("heatbound".into()),
    }
    line.extend(words.iter().map(|w| shell_word(w)));
    line.join(" ")
}

/// The cargo profile whose folder holds `exe` (`target/release/heatbound`,
/// `target/x86_64-unknown-linux-gnu/debug/heatbound`), if it is in one.
fn cargo_profile(exe: &std::path::Path) -> Option<&str> {
    let profile_dir = exe.parent()?;
    let name = profile_dir.file_name()?.to_str()?;
    let target = profile_dir.parent()?;
    // `target/PROFILE/` or `target/TRIPLE/PROFILE/`: either way a `target`
    // folder (or CARGO_TARGET_DIR, which holds the profile folders) sits
    // above; `deps` and `examples` are not where `cargo run` puts the binary.
    if matches!(name, "deps" | "examples" | "build" | "incremental") {
        return None;
    }
    let marked = |dir: &std::path::Path| dir.join("CACHEDIR.TAG").is_file();
    if marked(target) || target.parent().is_some_and(marked) {
        Some(name)
    } else {
        None
    }
}

/// `word` as a shell reads it back: bare when it holds only characters no
/// shell treats specially, else in single quotes.
fn shell_word(word: &str) -> String {
    let plain = !word.is_empty()
        && word
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "_-./:=@%+,".contains(c));
    if plain {
        word.to_string()
    } else {
        format!("'{}'", word.replace('\'', r"'\''"))
    }
}

#[cfg(test)]
mod how_to_run_tests {
    use super::{Invocation, how_to_run_as, shell_word};
    use std::path::PathBuf;

    /// A fake cargo target folder holding `PROFILE/heatbound`.
    fn target_with(profile: &str) -> (tempfile::TempDir, PathBuf) {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("target");
        std::fs::create_dir_all(target.join(profile)).unwrap();
        std::fs::write(
            target.join("CACHEDIR.TAG"),
            "Signature: 8a477f597d28d172789f06886806bc55",
        )
        .unwrap();
        let exe = target.join(profile).join("heatbound");
        (dir, exe)
    }

    #[test]
    fn on_path_it_is_plain_heatbound() {
        let inv = Invocation {
            on_path: true,
            ..Invocation::default()
        };
        assert_eq!(
            how_to_run_as(&inv, &["audit", "heatbound-demo.sqlite"]),
            "heatbound audit heatbound-demo.sqlite"
        );
    }

    #[test]
    fn under_cargo_run_it_is_the_same_cargo_run() {
        let (dir, exe) = target_with("release");
        let workspace = dir.path().to_path_buf();
        let mut inv = Invocation {
            on_path: false,
            manifest_dir: Some(workspace.join("host-tools")),
            exe: Some(exe),
            cwd: Some(workspace.clone()),
        };
        assert_eq!(
            how_to_run_as(&inv, &["chart", "heatbound-demo.sqlite"]),
            "cargo run --release -p heatbound-host -- chart heatbound-demo.sqlite"
        );
        // From outside the workspace, cargo needs the manifest.
        inv.cwd = Some(PathBuf::from("/"));
        let hint = how_to_run_as(&inv, &["audit", "x.sqlite"]);
        assert!(
            hint.starts_with("cargo run --release -p heatbound-host --manifest-path "),
            "{hint}"
        );
        assert!(
            hint.ends_with("host-tools/Cargo.toml -- audit x.sqlite"),
            "{hint}"
        );

        let (dir, exe) = target_with("debug");
        inv.exe = Some(exe);
        inv.cwd = Some(dir.path().to_path_buf());
        inv.manifest_dir = Some(dir.path().join("host-tools"));
        assert_eq!(
            how_to_run_as(&inv, &["audit", "x.sqlite"]),
            "cargo run -p heatbound-host -- audit x.sqlite"
        );
        let (dir, exe) = target_with("firmware");
        inv.exe = Some(exe);
        inv.cwd = Some(dir.path().to_path_buf());
        inv.manifest_dir = Some(dir.path().join("host-tools"));
        assert_eq!(
            how_to_run_as(&inv, &["audit", "x.sqlite"]),
            "cargo run --profile firmware -p heatbound-host -- audit x.sqlite"
        );
    }

    #[test]
    fn otherwise_it_is_this_executable() {
        let (dir, exe) = target_with("release");
        let inv = Invocation {
            on_path: false,
            manifest_dir: None,
            exe: Some(exe.clone()),
            cwd: Some(dir.path().to_path_buf()),
        };
        assert_eq!(
            how_to_run_as(&inv, &["audit", "a b.sqlite"]),
            "./target/release/heatbound audit 'a b.sqlite'"
        );
        let elsewhere = Invocation {
            cwd: Some(PathBuf::from("/nonexistent-cwd")),
            ..inv
        };
        let hint = how_to_run_as(&elsewhere, &["audit", "x"]);
        assert!(hint.starts_with('/') || hint.starts_with("'/"), "{hint}");
        assert!(
            hint.ends_with("/target/release/heatbound audit x"),
            "{hint}"
        );
    }

    #[test]
    fn words_are_quoted_for_a_shell() {
        assert_eq!(shell_word("run-1.sqlite"), "run-1.sqlite");
        assert_eq!(shell_word(""), "''");
        assert_eq!(shell_word("it's $HOME"), r"'it'\''s $HOME'");
        assert_eq!(shell_word("a*b"), "'a*b'");
    }
}

/// Days since 1970-01-01 as a proleptic Gregorian (year, month, day): the
/// era-of-400-years `civil_from_days` conversion (common practice), in
/// saturating arithmetic, since a crafted log may hold any time.
///
/// ```
/// use heatbound_host::term::civil_from_days;
/// // POSIX.1-2017 §4.16: day 0 is 1970-01-01; day 19 675 is 2023-11-14
/// // (Unix time 1 700 000 000 s, as `date -u -d @1700000000` prints it).
/// assert_eq!(civil_from_days(0), (1970, 1, 1));
/// assert_eq!(civil_from_days(19_675), (2023, 11, 14));
/// assert_eq!(civil_from_days(-1), (1969, 12, 31));
/// ```
pub fn civil_from_days(days: i64) -> (i64, u32, u32) {
    let z = days.saturating_add(719_468);
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    // Both in range by construction: day 1..=31, month 1..=12.
    let day = u32::try_from(doy - (153 * mp + 2) / 5 + 1).unwrap_or(1);
    let month = u32::try_from(if mp < 10 { mp + 3 } else { mp - 9 }).unwrap_or(1);
    let year = yoe
        .saturating_add(era.saturating_mul(400))
        .saturating_add(i64::from(month <= 2));
    (year, month, day)
}
