//! The `rig.toml` loader: reads the rig configuration a command was given,
//! validates it into a [`RigConfig`] and places every error at its line and
//! column. It sits at the start of the data flow, beside the inputs:
//! `analyze`, `audit` and `simulate` load their configuration here.
//!
//! ```text
//! rig.toml --(toml)--> RigFile --validate--> RigConfig --> replay, audit, sil
//! ```
use std::fs::File;
use std::io::Read;
use std::path::Path;

use heatbound::config::{ConfigError, RigConfig, RigFile};
use heatbound::monitor::MonitorError;

use crate::replay::WINDOW_CAPACITY;

/// A configuration that cannot be used: which file (or the built-in
/// configuration), with what was wrong as its source.
#[derive(Debug, thiserror::Error)]
#[error("{file}")]
pub struct RigFileError {
    /// The file's name as given, or `built-in configuration`.
    pub file: String,
    /// What was wrong, with its place in the file.
    #[source]
    pub problem: Problem,
}

/// What was wrong with `rig.toml`; each text starts with its place in the
/// file (`line L, column C: `) when it has one.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Problem {
    /// The file cannot be read.
    #[error("cannot read the file: {0}")]
    Read(#[source] std::io::Error),
    /// The file is not TOML, or a value has the wrong type.
    #[error("{at}{message}")]
    Toml {
        /// Where, or empty.
        at: String,
        /// What the TOML reader said, on one line.
        message: String,
    },
    /// A value is out of range.
    #[error("{at}{source}")]
    Invalid {
        /// Where, or empty.
        at: String,
        /// The range check that failed.
        #[source]
        source: ConfigError,
    },
    /// The configuration does not fit the host monitor.
    #[error("{0}")]
    Monitor(String),
    /// The built-in configuration does not validate.
    #[error(transparent)]
    BuiltIn(ConfigError),
    /// The built-in configuration does not fit the host monitor.
    #[error(transparent)]
    BuiltInMonitor(MonitorError),
}

/// `line L, column C: ` for a byte offset into `text`.
fn place(text: &str, offset: usize) -> String {
    // An offset inside a multibyte character counts from that character.
    let mut end = offset.min(text.len());
    while !text.is_char_boundary(end) {
        end -= 1;
    }
    let before = text.get(..end).unwrap_or(text);
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    format!("line {line}, column {column}: ")
}

/// Collapses a possibly multi-line message to one line.
pub(crate) fn one_line(message: &str) -> String {
    message.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// Where a dotted key (`alarms.hot_max_k`) is written in `text`, if it is.
fn locate_key(text: &str, dotted: &str) -> Option<usize> {
    let doc = toml::de::DeTable::parse(text).ok()?;
    let mut segments = dotted.split('.');
    let first = segments.next()?;
    let (_, mut value) = doc
        .get_ref()
        .iter()
        .find(|(k, _)| k.get_ref().as_ref() == first)?;
    for seg in segments {
        value = value.get_ref().get(seg)?;
    }
    Some(value.span().start)
}

/// Reads and validates `rig.toml`, or the defaults without one.
///
/// ```
/// let config = heatbound_host::rigfile::load_config(None).unwrap();
/// assert!(config.window_samples > 0);
/// ```
pub fn load_config(path: Option<&Path>) -> Result<RigConfig, RigFileError> {
    let Some(path) = path else {
        let built_in = |problem| RigFileError {
            file: "built-in configuration".to_owned(),
            problem,
        };
        let config = RigFile::default()
            .validate()
            .map_err(|e| built_in(Problem::BuiltIn(e)))?;
        check_capacity(&config).map_err(|e| built_in(Problem::BuiltInMonitor(e)))?;
        return Ok(config);
    };
    let name = path.display().to_string();
    let mut text = String::new();
    if let Err(e) = File::open(path).and_then(|mut f| f.read_to_string(&mut text)) {
        return Err(RigFileError {
            file: name,
            problem: Problem::Read(e),
        });
    }
    config_from_text(&text, &name)
}

/// Checks the text of a `rig.toml`; `name` is how errors refer to the file.
///
/// ```
/// let config = heatbound_host::rigfile::config_from_text("", "rig.toml").unwrap();
/// assert!(config.window_samples > 0);
/// ```
pub fn config_from_text(text: &str, name: &str) -> Result<RigConfig, RigFileError> {
    let load = || -> Result<RigConfig, Problem> {
        let file: RigFile = toml::from_str(text).map_err(|e| Problem::Toml {
            at: e.span().map(|s| place(text, s.start)).unwrap_or_default(),
            message: one_line(e.message()),
        })?;
        let config = file.validate().map_err(|source| {
            let at = match source {
                ConfigError::OutOfRange { key, .. } => {
                    locate_key(text, key).map(|o| place(text, o))
                }
                _ => None,
            };
            Problem::Invalid {
                at: at.unwrap_or_default(),
                source,
            }
        })?;
        check_capacity(&config).map_err(|e| {
            let at = locate_key(text, "window_samples")
                .map(|o| place(text, o))
                .unwrap_or_default();
            Problem::Monitor(format!("{at}{e}"))
        })?;
        Ok(config)
    };
    load().map_err(|problem| RigFileError {
        file: name.to_owned(),
        problem,
    })
}

/// The host monitor's window holds at most [`WINDOW_CAPACITY`] samples.
fn check_capacity(config: &RigConfig) -> Result<(), MonitorError> {
    if config.window_samples as usize > WINDOW_CAPACITY {
        return Err(MonitorError::WindowTooLong {
            window_samples: config.window_samples,
            capacity: WINDOW_CAPACITY,
        });
    }
    Ok(())
}

// ---------------------------------------------------------------------------

#[cfg(test)]
mod place_tests {
    use super::place;

    #[test]
    fn an_offset_inside_a_multibyte_character_does_not_panic() {
        let text = "[rig]\nname = \"Wärme\"\n";
        for offset in 0..=text.len() + 3 {
            let at = place(text, offset);
            assert!(at.starts_with("line "), "{at}");
        }
        assert_eq!(
            place(text, text.find('ä').unwrap() + 1),
            "line 2, column 10: "
        );
    }
}
