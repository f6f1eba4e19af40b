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
