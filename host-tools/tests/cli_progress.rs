//! Progress bars on the long jobs (`analyze`, `audit`, `watch --input`):
//! the engines move the bar they are handed to the end of their input, the
//! bar reads as it should when drawn, and with pipes (no terminal) nothing
//! extra appears: stdout is exactly the report, stderr stays empty, the
//! exit codes are those of the report.
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};

use assert_cmd::Command;
use heatbound::config::RigConfig;
use heatbound_host::audit::{self, Input, LogFacts};
use heatbound_host::capture;
use heatbound_host::ingest::{Ingest, LineStyle};
use heatbound_host::link::{self, Bounds, End};
use heatbound_host::replay;
use heatbound_host::store::Log;
use heatbound_host::term::{self, Counting};
use indicatif::{ProgressBar, ProgressDrawTarget, TermLike};
use tempfile::TempDir;

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// A recorded run of `rows` rows at 1 Hz (smooth, invented demo data),
/// larger than 1 MB from about 25,000 rows.
fn run_csv(dir: &TempDir, rows: u32) -> PathBuf {
    let mut text = String::from("time_s,hot_c,cold_c,heat_in_w,work_w,heat_out_w\n");
    for i in 0..rows {
        let x = f64::from(i);
        let _ = writeln!(
            text,
            "{i},{:.2},{:.3},{:.2},{:.2},{:.2}",
            550.0 + 5.0 * (x / 300.0).sin(),
            25.0 + (x / 700.0).cos(),
            400.0 + 2.0 * (x / 50.0).sin(),
            40.0 + 0.5 * (x / 90.0).cos(),
            310.0 + 3.0 * (x / 200.0).sin()
        );
    }
    let path = dir.path().join(format!("run-{rows}.csv"));
    std::fs::write(&path, text).expect("write the CSV");
    path
}

/// A simulated capture of `duration_s` seconds at 1 Hz (a summary per second).
fn capture_file(dir: &TempDir, duration_s: u32) -> PathBuf {
    let path = dir.path().join(format!("sim-{duration_s}.bin"));
    heatbound()
        .args(["simulate", "--rate-hz", "1", "--duration-s"])
        .arg(duration_s.to_string())
        .arg("--out")
        .arg(&path)
        .assert()
        .success();
    path
}

/// The capture at `capture` logged into a fresh `log.sqlite` by `watch`.
fn log_of(dir: &TempDir, capture: &Path) -> PathBuf {
    let db = dir.path().join("log.sqlite");
    heatbound()
        .args(["watch", "--quiet", "--input"])
        .arg(capture)
        .arg("--db")
        .arg(&db)
        .assert()
        .success();
    db
}

/// Runs heatbound with `args`; returns (exit code, stdout, stderr).
fn run(args: &[&std::ffi::OsStr]) -> (i32, String, String) {
    let out = heatbound().args(args).output().expect("run heatbound");
    (
        out.status.code().expect("an exit status"),
        String::from_utf8(out.stdout).expect("UTF-8 stdout"),
        String::from_utf8(out.stderr).expect("UTF-8 stderr"),
    )
}

/// Nothing of a bar: no carriage returns, no escape sequences.
fn no_bar(text: &str) {
    assert!(!text.contains('\r') && !text.contains('\u{1b}'), "{text:?}");
}

#[test]
fn analyze_prints_the_same_report_with_a_pipe() {
    let dir = tempfile::tempdir().unwrap();
    let csv = run_csv(&dir, 30_000);
    assert!(std::fs::metadata(&csv).unwrap().len() > term::PROGRESS_MIN_BYTES);
    let expected = replay::replay_file(&csv, &RigConfig::default()).expect("replay");
    let name = csv.display().to_string();

    let (code, stdout, stderr) = run(&["analyze".as_ref(), csv.as_os_str()]);
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(stdout, expected.text(&name));
    assert_eq!(stderr, "", "a hidden bar writes nothing");

    let (code, stdout, stderr) = run(&["analyze".as_ref(), csv.as_os_str(), "--json".as_ref()]);
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(stdout, format!("{}\n", expected.json_text().unwrap()));
    assert_eq!(stderr, "");
}

#[test]
fn analyze_errors_stay_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let csv = run_csv(&dir, 30_000);
    let mut text = std::fs::read_to_string(&csv).unwrap();
    text.push_str("30000,oops,25,400,40,310\n");
    std::fs::write(&csv, text).unwrap();
    let (code, stdout, stderr) = run(&["analyze".as_ref(), csv.as_os_str()]);
    assert_eq!(code, 2);
    assert_eq!(stdout, "");
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.contains("line 30002, column hot_c"), "{stderr}");
    no_bar(&stderr);
}

#[test]
fn audit_of_a_capture_and_of_its_log_prints_the_same_report_with_a_pipe() {
    let dir = tempfile::tempdir().unwrap();
    let cap = capture_file(&dir, 20_000);
    assert!(std::fs::metadata(&cap).unwrap().len() > term::PROGRESS_MIN_BYTES);
    let config = RigConfig::default();

    let (frames, decoder) = capture::read_capture(&cap).unwrap();
    let report = audit::audit(
        &Input {
            frames: &frames,
            decoder,
            link_errors: &[],
        },
        &config,
    );
    let expected = format!(
        "{}{}\n",
        report.text(&cap.display().to_string()),
        term::SAFETY_NOTE
    );
    let (code, stdout, stderr) = run(&["audit".as_ref(), cap.as_os_str()]);
    assert_eq!(code, i32::from(!report.trustworthy), "{stderr}");
    assert_eq!(stdout, expected);
    assert_eq!(stderr, "");

    let db = log_of(&dir, &cap);
    let report = capture::audit_database(&db, None, &config).unwrap();
    let expected = format!(
        "{}{}\n",
        report.text(&db.display().to_string()),
        term::SAFETY_NOTE
    );
    let (code, stdout, stderr) = run(&["audit".as_ref(), db.as_os_str()]);
    assert_eq!(code, i32::from(!report.trustworthy), "{stderr}");
    assert_eq!(stdout, expected);
    assert_eq!(stderr, "");
}

#[test]
fn the_engines_move_the_bar_to_the_end_of_their_input() {
    let dir = tempfile::tempdir().unwrap();
    let config = RigConfig::default();

    // analyze: bytes of the CSV.
    let csv = run_csv(&dir, 40_000);
    let size = std::fs::metadata(&csv).unwrap().len();
    let bar = ProgressBar::hidden();
    let replay = replay::replay_file_with_progress(&csv, &config, Some(&bar)).unwrap();
    assert_eq!(replay.samples, 40_000);
    assert_eq!((bar.position(), bar.length()), (size, Some(size)));

    // audit of a capture: bytes decoded, then frames checked.
    let cap = capture_file(&dir, 6_000);
    let size = std::fs::metadata(&cap).unwrap().len();
    let bar = ProgressBar::hidden();
    let (frames, decoder) = capture::read_capture_with_progress(&cap, Some(&bar)).unwrap();
    assert_eq!((bar.position(), bar.length()), (size, Some(size)));
    let n = frames.len() as u64;
    assert!(n > 6_000, "{n} frames");
    let bar = ProgressBar::hidden();
    let input = Input {
        frames: &frames,
        decoder,
        link_errors: &[],
    };
    let with_bar = audit::audit_with_progress(&input, &LogFacts::default(), &config, Some(&bar));
    assert_eq!((bar.position(), bar.length()), (n, Some(n)));
    assert_eq!(bar.prefix(), "checking");
    let without = audit::audit(&input, &config);
    assert_eq!(
        serde_json::to_value(&with_bar).unwrap(),
        serde_json::to_value(&without).unwrap(),
        "the bar changes nothing in the report"
    );

    // audit of a log: frames read, then checked.
    let db = log_of(&dir, &cap);
    let bar = ProgressBar::hidden();
    let report = capture::audit_database_with_progress(&db, None, &config, Some(&bar)).unwrap();
    assert!(report.trustworthy);
    assert_eq!((bar.position(), bar.length()), (n, Some(n)));
    assert_eq!(bar.prefix(), "checking");
}

#[test]
fn watch_input_moves_a_bar_wrapped_around_the_file() {
    // `watch --input FILE` reads through link::read_to_end; a bar wrapped
    // around the file (indicatif's wrap_read) follows the bytes read.
    let dir = tempfile::tempdir().unwrap();
    let cap = capture_file(&dir, 3_000);
    let size = std::fs::metadata(&cap).unwrap().len();
    let log = Log::open(&dir.path().join("w.sqlite")).unwrap();
    let mut ingest = Ingest::new(log, "file:cap", link::now_ms(), LineStyle::Quiet).unwrap();
    let bar = ProgressBar::hidden();
    bar.set_length(size);
    let file = std::fs::File::open(&cap).unwrap();
    let mut lines = 0usize;
    let end = link::read_to_end(
        &mut ingest,
        &Bounds::default(),
        bar.wrap_read(file),
        None,
        "file:cap",
        None,
        |_| lines += 1,
    )
    .unwrap();
    assert_eq!(end, End::Eof);
    assert_eq!(bar.position(), size);
    let totals = ingest.finish(link::now_ms()).unwrap();
    assert_eq!(totals.summaries, 3_000);
}

/// A terminal that keeps what is drawn on it.
#[derive(Clone, Debug, Default)]
struct Screen(Arc<Mutex<String>>);

impl Screen {
    fn text(&self) -> String {
        self.0.lock().unwrap().clone()
    }
}

impl TermLike for Screen {
    fn width(&self) -> u16 {
        120
    }
    fn move_cursor_up(&self, _: usize) -> std::io::Result<()> {
        Ok(())
    }
    fn move_cursor_down(&self, _: usize) -> std::io::Result<()> {
        Ok(())
    }
    fn move_cursor_right(&self, _: usize) -> std::io::Result<()> {
        Ok(())
    }
    fn move_cursor_left(&self, _: usize) -> std::io::Result<()> {
        Ok(())
    }
    fn write_line(&self, s: &str) -> std::io::Result<()> {
        let mut t = self.0.lock().unwrap();
        t.push_str(s);
        t.push('\n');
        Ok(())
    }
    fn write_str(&self, s: &str) -> std::io::Result<()> {
        self.0.lock().unwrap().push_str(s);
        Ok(())
    }
    fn clear_line(&self) -> std::io::Result<()> {
        self.0.lock().unwrap().push_str("<clear>");
        Ok(())
    }
    fn flush(&self) -> std::io::Result<()> {
        Ok(())
    }
}

/// What a bar counting `counting`, at `pos` of `len`, draws.
fn drawn(counting: Counting, label: &str, prefix: &str, pos: u64, len: u64) -> String {
    let screen = Screen::default();
    let bar = ProgressBar::with_draw_target(
        Some(len),
        ProgressDrawTarget::term_like(Box::new(screen.clone())),
    )
    .with_style(term::progress_style(counting))
    .with_message(label.to_string())
    .with_prefix(prefix.to_string());
    bar.set_position(pos);
    bar.force_draw();
    screen.text()
}

#[test]
fn a_drawn_bar_shows_the_job_the_phase_the_figures_and_the_time_left() {
    let bytes = drawn(
        Counting::Bytes,
        "analyze run.csv",
        "reading",
        1 << 20,
        2 << 20,
    );
    assert!(bytes.contains("analyze run.csv reading "), "{bytes}");
    assert!(bytes.contains("1.00 MiB/2.00 MiB ("), "{bytes}");
    assert!(
        bytes.contains("/s, ") && bytes.contains(" left)"),
        "{bytes}"
    );

    let frames = drawn(
        Counting::Frames,
        "audit log.sqlite",
        "checking",
        1_000,
        2_000,
    );
    assert!(frames.contains("audit log.sqlite checking "), "{frames}");
    assert!(frames.contains("1,000/2,000 frames ("), "{frames}");

    let rows = drawn(Counting::Rows, "x", "reading", 5, 10);
    assert!(rows.contains("5/10 rows ("), "{rows}");
    // Half done: the bar is half filled.
    let bar: String = rows
        .chars()
        .skip_while(|c| *c != '█' && *c != '░')
        .take_while(|c| *c == '█' || *c == '░')
        .collect();
    let full = bar.chars().filter(|c| *c == '█').count();
    assert!(
        !bar.is_empty() && full * 2 <= bar.chars().count() + 1,
        "{rows}"
    );
}

#[test]
fn a_bar_is_finished_clean_and_a_small_job_shows_none() {
    // Without a terminal on stderr (as here), every bar stays hidden.
    let small = term::progress_bar("audit tiny.bin", 10, Counting::Bytes, 10);
    assert!(small.is_hidden());
    small.set_position(10);
    small.finish_and_clear();
    std::thread::sleep(term::PROGRESS_AFTER + std::time::Duration::from_millis(100));
    assert!(small.is_finished());
    assert!(small.is_hidden(), "a finished bar is never revealed");

    let big = term::progress_bar(
        "analyze big.csv",
        term::PROGRESS_MIN_BYTES,
        Counting::Bytes,
        term::PROGRESS_MIN_BYTES,
    );
    assert_eq!(big.prefix(), "reading");
    assert_eq!(big.length(), Some(term::PROGRESS_MIN_BYTES));
    drop(big);
}
