//! The `rig.toml` loader: reads the rig configuration a command was given,
//! validates it into a [`RigConfig`] and places every error at its line and
//! column. It sits at the start of the data flow, beside the inputs:
//! `analyze`, `audit` and `simulate` load their configuration here.
//!
//! ```text
//! rig.toml --(toml)--> RigFile --validate--> RigConfig --> replay, audit, sil
//!          \--[csv]--> CsvFile --validate--> CsvLayout --> replay (analyze)
//! ```
//!
//! The `[csv]` table is the host's alone (the layout of a logger's files,
//! [`crate::csv_layout`]): it is taken out of the document before the rest
//! becomes a core [`RigFile`], and checked on its own, so every command
//! accepts a `rig.toml` that has one and only `analyze` reads it.
use std::fs::File;
use std::io::Read;
use std::path::Path;

use heatbound::config::{ConfigError, RigConfig, RigFile};
use heatbound::monitor::MonitorError;
use serde::Deserialize as _;
use toml::de::{DeTable, DeValue, Deserializer};

use crate::csv_layout::{CsvConfigError, CsvFile, CsvLayout};
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
    /// The `[csv]` table is not usable.
    #[error("{at}{source}")]
    Csv {
        /// Where, or empty.
        at: String,
        /// What is wrong, naming the key.
        #[source]
        source: CsvConfigError,
    },
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

/// A `rig.toml` read whole: the rig's configuration, and the layout of its
/// logger's CSV files when the file has a `[csv]` table.
#[derive(Clone, Debug)]
pub struct RigToml {
    /// The validated configuration.
    pub config: RigConfig,
    /// The `[csv]` table, validated; `None` without one.
    pub csv: Option<CsvLayout>,
}

/// Reads and validates `rig.toml`, or the defaults without one.
///
/// ```
/// let config = heatbound_host::rigfile::load_config(None).unwrap();
/// assert!(config.window_samples > 0);
/// ```
pub fn load_config(path: Option<&Path>) -> Result<RigConfig, RigFileError> {
    load_rig(path).map(|rig| rig.config)
}

/// Reads and validates `rig.toml` with its `[csv]` table, or the defaults
/// (and no table) without one.
///
/// ```
/// let rig = heatbound_host::rigfile::load_rig(None).unwrap();
/// assert!(rig.csv.is_none());
/// ```
pub fn load_rig(path: Option<&Path>) -> Result<RigToml, RigFileError> {
    let Some(path) = path else {
        let built_in = |problem| RigFileError {
            file: "built-in configuration".to_owned(),
            problem,
        };
        let config = RigFile::default()
            .validate()
            .map_err(|e| built_in(Problem::BuiltIn(e)))?;
        check_capacity(&config).map_err(|e| built_in(Problem::BuiltInMonitor(e)))?;
        return Ok(RigToml { config, csv: None });
    };
    let name = path.display().to_string();
    let mut text = String::new();
    if let Err(e) = File::open(path).and_then(|mut f| f.read_to_string(&mut text)) {
        return Err(RigFileError {
            file: name,
            problem: Problem::Read(e),
        });
    }
    rig_from_text(&text, &name)
}

/// Checks the text of a `rig.toml`; `name` is how errors refer to the file.
///
/// ```
/// let config = heatbound_host::rigfile::config_from_text("", "rig.toml").unwrap();
/// assert!(config.window_samples > 0);
/// ```
pub fn config_from_text(text: &str, name: &str) -> Result<RigConfig, RigFileError> {
    rig_from_text(text, name).map(|rig| rig.config)
}

/// Checks the text of a `rig.toml` with its `[csv]` table; `name` is how
/// errors refer to the file.
///
/// ```
/// let text = "mode = \"engine\"\n[csv]\ndelimiter = \";\"\n";
/// let rig = heatbound_host::rigfile::rig_from_text(text, "rig.toml").unwrap();
/// assert!(rig.csv.is_some());
/// let err = heatbound_host::rigfile::rig_from_text("[csv]\ndecimal = \"x\"\n", "rig.toml")
///     .unwrap_err();
/// assert!(heatbound_host::term::error_line(&err).contains("line 2, column 11: `csv.decimal`"));
/// ```
pub fn rig_from_text(text: &str, name: &str) -> Result<RigToml, RigFileError> {
    let load = || -> Result<RigToml, Problem> {
        let toml_problem = |e: toml::de::Error| Problem::Toml {
            at: e.span().map(|s| place(text, s.start)).unwrap_or_default(),
            message: one_line(e.message()),
        };
        let mut root = DeTable::parse(text).map_err(toml_problem)?;
        let csv = root.get_mut().remove("csv");
        let file = RigFile::deserialize(Deserializer::from(root)).map_err(toml_problem)?;
        let csv = match csv {
            None => None,
            Some(value) => {
                let span = value.span();
                let DeValue::Table(table) = value.into_inner() else {
                    return Err(Problem::Toml {
                        at: place(text, span.start),
                        message: "`csv` must be a table: [csv] followed by its keys".to_owned(),
                    });
                };
                let raw = CsvFile::deserialize(Deserializer::from(toml::Spanned::new(span, table)))
                    .map_err(toml_problem)?;
                // A missing key is placed at the table that lacks it.
                let near = |key: &str| {
                    let mut key = key;
                    loop {
                        if let Some(offset) = locate_key(text, key) {
                            return place(text, offset);
                        }
                        match key.rsplit_once('.') {
                            Some((parent, _)) => key = parent,
                            None => return String::new(),
                        }
                    }
                };
                Some(CsvLayout::validate(&raw).map_err(|source| Problem::Csv {
                    at: near(source.key()),
                    source,
                })?)
            }
        };
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
        Ok(RigToml { config, csv })
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
