//! The replay engine: a recorded run (CSV) streamed through the host's
//! monitor and the alarms, and its report (the run totals, the final window
//! and the alarm timeline) as text or JSON. It is the offline branch of the
//! data flow; `heatbound analyze` calls [`replay_file`].
//!
//! Data flow (DESIGN.md §2, offline branch):
//!
//! ```text
//! FILE.csv --(csv, one reused ByteRecord)--> Columns (header, checked once)
//!          --> Sample<f64> per row --> Monitor<4096, f64>::push --> AlarmSet::update
//!          --> Replay (counts, events, final metrics) --> table or JSON
//! rig.toml --(toml)--> RigFile --validate--> RigConfig
//! ```
//!
//! The replay streams: rows are never collected, so memory does not grow
//! with the file's length; only alarm events (few) are kept. Errors name the
//! file, the line (the header is line 1) and the column on one line.
use std::fmt::Write as _;
use std::fs::File;
use std::io::Read;
use std::path::Path;

use heatbound::alarm::{AlarmSet, Event, EventKind, TimeToLimit, time_to_limit};
use heatbound::config::{Mode, RigConfig};
use heatbound::diagnosis::Tracker;
use heatbound::monitor::{Metrics, Monitor, MonitorError, Sample};
use serde::Serialize;

use crate::diagnosis_report::DiagnosisJson;
use crate::rigfile::one_line;

/// Capacity of the host monitor's window, in samples. `window_samples` in
/// `rig.toml` may not exceed it.
pub const WINDOW_CAPACITY: usize = 4096;

/// Rows between progress updates: keeps the bar off the per-row path (on
/// 2 million rows, about 120 updates, each a lock and a clock read).
const PROGRESS_EVERY_ROWS: u64 = 1 << 14;
// Columns

/// What was wrong with the CSV file. Each variant's text starts with its
/// place in the file (the file name is added by the caller).
#[derive(Debug, thiserror::Error)]
pub enum CsvError {
    /// The file could not be opened or read.
    #[error("cannot read the file: {0}")]
    Read(#[source] std::io::Error),
    /// The CSV layer failed (bad UTF-8 in the header, I/O during reading).
    #[error("line {line}: {message}")]
    Csv {
        /// Line in the file.
        line: u64,
        /// What the CSV reader said.
        message: String,
    },
    /// The configuration does not fit the host monitor.
    #[error("configuration: {0}")]
    Config(#[from] MonitorError),
    /// The file has no header line.
    #[error("line 1: the file is empty: expected a header naming the columns")]
    NoHeader,
    /// A required column is not in the header.
    #[error("line 1, column {column}: missing required column (the header has: {found})")]
    MissingColumn {
        /// The missing column, e.g. `heat_in_w` or `hot_c or hot_k`.
        column: &'static str,
        /// The header as found.
        found: String,
    },
    /// Two header columns describe the same channel.
    #[error("line 1, column {column}: {why}")]
    Contradictory {
        /// The column.
        column: String,
        /// Why it contradicts another.
        why: String,
    },
    /// A field is not a number.
    #[error("line {line}, column {column}: cannot parse \"{text}\" as a number")]
    Number {
        /// Line in the file.
        line: u64,
        /// Column name.
        column: &'static str,
        /// The field as written.
        text: String,
    },
    /// A row has fewer fields than the header needs.
    #[error(
        "line {line}, column {column}: missing (the row has {fields} fields, the column is number {position})"
    )]
    ShortRow {
        /// Line in the file.
        line: u64,
        /// Column name.
        column: &'static str,
        /// Fields in the row.
        fields: usize,
        /// 1-based position of the column.
        position: usize,
    },
    /// `time_s` is empty or not finite.
    #[error("line {line}, column time_s: no time (\"{text}\"): the row cannot be placed in time")]
    NoTime {
        /// Line in the file.
        line: u64,
        /// The field as written.
        text: String,
    },
    /// `time_s` does not increase.
    #[error(
        "line {line}, column time_s: time {time_s} s does not increase (previous row: {previous_s} s)"
    )]
    TimeNotIncreasing {
        /// Line in the file.
        line: u64,
        /// This row's time.
        time_s: f64,
        /// The previous row's time.
        previous_s: f64,
    },
}

/// A temperature column and its scale.
#[derive(Clone, Copy, Debug)]
struct Temperature {
    index: usize,
    name: &'static str,
    /// Added to the reading to give kelvin: 273.15 for °C, 0 for K.
    offset_k: f64,
}

/// The header, checked: where each channel is.
#[derive(Clone, Debug)]
struct Columns {
    time: usize,
    hot: Temperature,
    cold: Temperature,
    heat_in: usize,
    work: usize,
    heat_out: Option<usize>,
    hot2: Option<Temperature>,
    unused: Vec<UnusedColumn>,
}

impl Columns {
    fn parse(header: &csv::ByteRecord) -> Result<Self, CsvError> {
        let names: Vec<String> = header
            .iter()
            .map(|f| String::from_utf8_lossy(f).trim().to_string())
            .collect();
        let find = |name: &str| -> Result<Option<usize>, CsvError> {
            let mut hits = names
                .iter()
                .enumerate()
                .filter(|(_, n)| n.as_str() == name)
                .map(|(i, _)| i);
            let first = hits.next();
            if hits.next().is_some() {
                return Err(CsvError::Contradictory {
                    column: name.to_string(),
                    why: "the column appears twice".to_string(),
                });
            }
            Ok(first)
        };
        // The header as quoted back: each name and the whole list bounded,
        // control bytes escaped (a damaged file may have a huge first line).
        let found = || {
            let list: Vec<String> = names
                .iter()
                .take(MAX_LISTED_COLUMNS)
                .map(|n| crate::term::excerpt(n, 40))
                .collect();
            let more = names.len().saturating_sub(MAX_LISTED_COLUMNS);
            let mut text = list.join(", ");
            if more > 0 {
                text.push_str(&format!(" and {more} more"));
            }
            text
        };
        let required = |name: &'static str| -> Result<usize, CsvError> {
            find(name)?.ok_or_else(|| CsvError::MissingColumn {
                column: name,
                found: found(),
            })
        };
        let temperature = |c: &'static str,
                           k: &'static str,
                           either: &'static str|
         -> Result<Temperature, CsvError> {
            match (find(c)?, find(k)?) {
                (Some(_), Some(_)) => Err(CsvError::Contradictory {
                    column: k.to_string(),
                    why: format!("both {c} and {k} are given: give one"),
                }),
                (Some(index), None) => Ok(Temperature {
                    index,
                    name: c,
                    offset_k: heatbound::ZERO_CELSIUS_K,
                }),
                (None, Some(index)) => Ok(Temperature {
                    index,
                    name: k,
                    offset_k: 0.0,
                }),
                (None, None) => Err(CsvError::MissingColumn {
                    column: either,
                    found: found(),
                }),
            }
        };
        Ok(Self {
            time: required("time_s")?,
            hot: temperature("hot_c", "hot_k", "hot_c or hot_k")?,
            cold: temperature("cold_c", "cold_k", "cold_c or cold_k")?,
            heat_in: required("heat_in_w")?,
            work: required("work_w")?,
            heat_out: find("heat_out_w")?,
            hot2: match (find("hot2_c")?, find("hot2_k")?) {
                (None, None) => None,
                _ => Some(temperature("hot2_c", "hot2_k", "hot2_c or hot2_k")?),
            },
            unused: unused_columns(&names),
        })
    }
}

/// Every column name the replay reads.
const KNOWN_COLUMNS: [&str; 10] = [
    "time_s",
    "hot_c",
    "hot_k",
    "hot2_c",
    "hot2_k",
    "cold_c",
    "cold_k",
    "heat_in_w",
    "work_w",
    "heat_out_w",
];

/// Header names quoted back in an error, at most.
const MAX_LISTED_COLUMNS: usize = 24;

/// The header's columns that nothing reads, each with the reason; a name
/// that differs from a known one only in case or blanks says which it
/// resembles (`heat_out_W` is not `heat_out_w`, and would silently turn
/// heat out from measured to inferred).
fn unused_columns(names: &[String]) -> Vec<UnusedColumn> {
    names
        .iter()
        .filter(|n| !KNOWN_COLUMNS.contains(&n.as_str()))
        .take(MAX_LISTED_COLUMNS)
        .map(|n| {
            let folded: String = n
                .to_lowercase()
                .chars()
                .filter(|c| !c.is_whitespace())
                .collect();
            let why = match KNOWN_COLUMNS.iter().find(|k| **k == folded) {
                Some(k) => {
                    format!("not read: did you mean {k}? (column names are exact, lower case)")
                }
                None => "not a column heatbound reads".to_string(),
            };
            UnusedColumn {
                name: crate::term::excerpt(n, 40),
                why,
            }
        })
        .collect()
}

/// A header column the replay did not use, and why.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct UnusedColumn {
    /// The column's name, as quoted back.
    pub name: String,
    /// Why it was not used.
    pub why: String,
}

/// Line numbers of invalid rows kept for the report, at most.
const INVALID_LINES_KEPT: usize = 5;

/// A field, trimmed of ASCII blanks, or the short-row error.
#[inline]
fn field<'r>(
    record: &'r csv::ByteRecord,
    index: usize,
    column: &'static str,
    line: u64,
) -> Result<&'r [u8], CsvError> {
    match record.get(index) {
        Some(f) => Ok(f.trim_ascii()),
        None => Err(CsvError::ShortRow {
            line,
            column,
            fields: record.len(),
            position: index + 1,
        }),
    }
}

/// Exact powers of ten: every one up to 1e22 is representable in f64.
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Plain decimals (`-12.345`, no exponent) with at most 15 significant
/// digits and 22 decimals, the shape every logger writes, parsed without the
/// general float parser. Clinger's fast path: the digits as an integer below
/// 2^53 and the power of ten are both exact, so one IEEE division gives the
/// correctly rounded value, the same as `str::parse`. Anything else is `None`.
#[inline]
fn fast_decimal(bytes: &[u8]) -> Option<f64> {
    let (negative, digits) = match bytes.split_first() {
        Some((b'-', rest)) => (true, rest),
        Some((b'+', rest)) => (false, rest),
        _ => (false, bytes),
    };
    let mut mantissa: u64 = 0;
    let mut count = 0usize;
    let mut decimals = 0usize;
    let mut seen_point = false;
    for &b in digits {
        match b {
            b'0'..=b'9' => {
                mantissa = mantissa * 10 + u64::from(b - b'0');
                count += 1;
                decimals += usize::from(seen_point);
                if count > 15 {
                    return None;
                }
            }
            b'.' if !seen_point => seen_point = true,
            _ => return None,
        }
    }
    if count == 0 || decimals >= POW10.len() {
        return None;
    }
    let magnitude = mantissa as f64 / POW10[decimals];
    Some(if negative { -magnitude } else { magnitude })
}

/// A reading: empty or `NaN` (any case) is an invalid sample, NaN; anything
/// else must parse as a number.
#[inline]
fn reading(bytes: &[u8], column: &'static str, line: u64) -> Result<f64, CsvError> {
    if bytes.is_empty() {
        return Ok(f64::NAN);
    }
    if let Some(x) = fast_decimal(bytes) {
        return Ok(x);
    }
    // `str::parse::<f64>` accepts "nan" in any case, exponents, and
    // "inf"/"infinity", which the monitor then counts as invalid (not finite).
    std::str::from_utf8(bytes)
        .ok()
        .and_then(|s| s.parse::<f64>().ok())
        .ok_or_else(|| CsvError::Number {
            line,
            column,
            text: crate::term::excerpt(&String::from_utf8_lossy(bytes), 40),
        })
}

// ---------------------------------------------------------------------------
// Replay

/// An alarm event with the time of the row that caused it.
#[derive(Clone, Debug)]
pub struct TimedEvent {
    /// `time_s` of the row, exactly as in the file.
    pub t_s: f64,
    /// The event (its `t_ms` is relative to the first row).
    pub event: Event,
    /// For a second-law or energy-balance alarm raised: the diagnosis of
    /// the window at that moment.
    pub diagnosis: Option<Box<DiagnosisJson>>,
}

/// Everything a replay found.
#[derive(Clone, Debug)]
pub struct Replay {
    /// Engine, heat pump or cooler.
    pub mode: Mode,
    /// Coverage factor k for expanded uncertainties.
    pub coverage_factor: f64,
    /// Data rows.
    pub samples: u64,
    /// Rows the monitor skipped as invalid.
    pub invalid_samples: u64,
    /// The line numbers of the first few invalid rows (the header is line 1).
    pub invalid_lines: Vec<u64>,
    /// Header columns nothing read, and why.
    pub unused_columns: Vec<UnusedColumn>,
    /// Last `time_s` − first `time_s`, seconds.
    pub duration_s: f64,
    /// Integration restarts after gaps.
    pub restarts: u64,
    /// Whether heat out was measured (`None` if no valid sample).
    pub heat_out_measured: Option<bool>,
    /// Run totals.
    pub totals: Metrics<f64>,
    /// Final window.
    pub window: Metrics<f64>,
    /// Valid samples in the final window.
    pub window_samples: usize,
    /// Fraction of integrated time that was steady.
    pub steady_fraction: Option<f64>,
    /// Whether the run was steady at its end.
    pub steady_at_end: bool,
    /// Alarm timeline.
    pub events: Vec<TimedEvent>,
    /// Whether a second hot sensor was read (`None` if no valid sample).
    pub hot2_measured: Option<bool>,
    /// The diagnosis of the final window.
    pub diagnosis: DiagnosisJson,
    /// When each limit is projected to be crossed, from the trend of the
    /// last windows (see `heatbound::alarm::time_to_limit`).
    pub time_to_limit: TimeToLimit<f64>,
}

/// Milliseconds since the first row, on the monitor's wrapping `u32` clock.
#[inline]
fn offset_ms(t_s: f64, first_s: f64) -> u32 {
    let ms = ((t_s - first_s) * 1000.0).round();
    // Wrapping is intended: the monitor handles the 49.7-day roll-over.
    (ms as u64 % (1u64 << 32)) as u32
}

/// A CSV file that cannot be replayed: its name, with what was wrong (and
/// where in the file) as the source.
#[derive(Debug, thiserror::Error)]
#[error("{file}")]
pub struct ReplayError {
    /// The file's name as given.
    pub file: String,
    /// What was wrong, with its line and column.
    #[source]
    pub problem: CsvError,
}

/// Replays `path` with `config`; errors carry the file name.
pub fn replay_file(path: &Path, config: &RigConfig) -> Result<Replay, ReplayError> {
    replay_file_with_progress(path, config, None)
}

/// [`replay_file`], moving `progress` (if any) to the bytes of the file
/// read so far, every few thousand rows; the caller makes, shows and
/// finishes the bar.
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound_host::replay::replay_file_with_progress;
/// let dir = tempfile::tempdir().unwrap();
/// let csv = dir.path().join("run.csv");
/// std::fs::write(&csv, "time_s,hot_c,cold_c,heat_in_w,work_w\n0,500,25,400,40\n1,500,25,400,40\n").unwrap();
/// let bar = indicatif::ProgressBar::hidden();
/// let replay = replay_file_with_progress(&csv, &RigConfig::default(), Some(&bar)).unwrap();
/// assert_eq!(replay.samples, 2);
/// assert_eq!(bar.position(), std::fs::metadata(&csv).unwrap().len());
/// ```
pub fn replay_file_with_progress(
    path: &Path,
    config: &RigConfig,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<Replay, ReplayError> {
    let name = path.display().to_string();
    let file = File::open(path).map_err(|e| ReplayError {
        file: name.clone(),
        problem: CsvError::Read(e),
    })?;
    if let Some(bar) = progress
        && let Ok(meta) = file.metadata()
    {
        bar.set_length(meta.len());
    }
    replay(file, config, progress).map_err(|problem| ReplayError {
        file: name,
        problem,
    })
}

/// Stack of the thread a replay runs on: the monitor of a
/// [`WINDOW_CAPACITY`]-sample window is some hundreds of KiB, built before it
/// is boxed, which an unoptimised build keeps on the stack more than once.
const REPLAY_STACK_BYTES: usize = 64 << 20;

/// Replays CSV from `input` through a fresh monitor and alarm set;
/// `progress`, if given, is moved to the bytes read every 16,384 rows and
/// at the end, never per row. Runs on a thread of its own, with the stack
/// the monitor needs, whatever the caller's thread has.
pub fn replay<R: Read + Send>(
    input: R,
    config: &RigConfig,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<Replay, CsvError> {
    std::thread::scope(|scope| {
        let worker = std::thread::Builder::new()
            .name("replay".into())
            .stack_size(REPLAY_STACK_BYTES)
            .spawn_scoped(scope, || replay_here(input, config, progress))
            .map_err(CsvError::Read)?;
        worker.join().unwrap_or_else(|_| {
            Err(CsvError::Read(std::io::Error::other(
                "the replay stopped unexpectedly (a bug in heatbound: please report it)",
            )))
        })
    })
}

fn replay_here<R: Read>(
    input: R,
    config: &RigConfig,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<Replay, CsvError> {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .buffer_capacity(1 << 16)
        .from_reader(input);
    let header = reader.byte_headers().map_err(|e| csv_error(&e, 1))?;
    if header.is_empty() || (header.len() == 1 && header[0].trim_ascii().is_empty()) {
        return Err(CsvError::NoHeader);
    }
    let cols = Columns::parse(header)?;

    // ~450 KiB with a 4096-sample window: on the heap, not the stack.
    let mut monitor: Box<Monitor<WINDOW_CAPACITY, f64>> = Box::new(Monitor::new(config)?);
    let mut alarms = AlarmSet::new(config);
    let mut tracker = Tracker::<f64>::new(config);
    let mut last_t_ms = 0u32;
    let mut events = Vec::new();
    let mut record = csv::ByteRecord::new();
    let mut first_s: Option<f64> = None;
    let mut last_s = 0.0_f64;
    let mut rows = 0u64;
    let mut invalid_lines: Vec<u64> = Vec::new();

    loop {
        let more = reader
            .read_byte_record(&mut record)
            .map_err(|e| csv_error(&e, 0))?;
        if !more {
            break;
        }
        let line = record.position().map_or(0, |p| p.line());
        // A blank line is not a row (the csv reader already skips most).
        if record.len() == 1 && record[0].trim_ascii().is_empty() {
            continue;
        }
        let time_text = field(&record, cols.time, "time_s", line)?;
        let t_s = reading(time_text, "time_s", line)?;
        if !t_s.is_finite() {
            return Err(CsvError::NoTime {
                line,
                text: crate::term::excerpt(&String::from_utf8_lossy(time_text), 40),
            });
        }
        let first = match first_s {
            None => *first_s.insert(t_s),
            Some(first) => {
                if t_s <= last_s {
                    return Err(CsvError::TimeNotIncreasing {
                        line,
                        time_s: t_s,
                        previous_s: last_s,
                    });
                }
                first
            }
        };
        let hot = reading(
            field(&record, cols.hot.index, cols.hot.name, line)?,
            cols.hot.name,
            line,
        )?;
        let cold = reading(
            field(&record, cols.cold.index, cols.cold.name, line)?,
            cols.cold.name,
            line,
        )?;
        let heat_in_w = reading(
            field(&record, cols.heat_in, "heat_in_w", line)?,
            "heat_in_w",
            line,
        )?;
        let work_w = reading(field(&record, cols.work, "work_w", line)?, "work_w", line)?;
        let heat_out_w = match cols.heat_out {
            Some(i) => Some(reading(
                field(&record, i, "heat_out_w", line)?,
                "heat_out_w",
                line,
            )?),
            None => None,
        };
        last_s = t_s;
        rows += 1;

        let sample = Sample {
            t_ms: offset_ms(t_s, first),
            t_hot_k: hot + cols.hot.offset_k,
            t_cold_k: cold + cols.cold.offset_k,
            heat_in_w,
            work_w,
            heat_out_w,
            t_hot2_k: match cols.hot2 {
                Some(c) => Some(
                    reading(field(&record, c.index, c.name, line)?, c.name, line)? + c.offset_k,
                ),
                None => None,
            },
        };
        // Invalid samples go in too: the sensor_fault rule needs them.
        let invalid_before = monitor.invalid_samples();
        monitor.push(&sample);
        tracker.observe(&monitor, sample.t_ms);
        last_t_ms = sample.t_ms;
        if monitor.invalid_samples() != invalid_before && invalid_lines.len() < INVALID_LINES_KEPT {
            invalid_lines.push(line);
        }
        for event in alarms.update(sample.t_ms, &monitor.alarm_inputs()) {
            let diagnosis =
                (event.kind == EventKind::Raised && event.rule.is_consistency()).then(|| {
                    Box::new(DiagnosisJson::new(
                        &tracker.diagnose(&monitor, sample.t_ms),
                        tracker.ua(),
                    ))
                });
            events.push(TimedEvent {
                t_s,
                event,
                diagnosis,
            });
        }
        if let Some(bar) = progress
            && rows.is_multiple_of(PROGRESS_EVERY_ROWS)
        {
            bar.set_position(reader.position().byte());
        }
    }

    if let Some(bar) = progress {
        bar.set_position(reader.position().byte());
    }
    Ok(Replay {
        mode: config.mode,
        coverage_factor: config.coverage_factor,
        samples: rows,
        invalid_samples: monitor.invalid_samples(),
        invalid_lines,
        unused_columns: cols.unused.clone(),
        duration_s: first_s.map_or(0.0, |first| last_s - first),
        restarts: monitor.restarts(),
        heat_out_measured: monitor.heat_out_measured(),
        totals: monitor.totals_metrics(),
        window: monitor.window_metrics(),
        window_samples: monitor.window_samples(),
        steady_fraction: monitor.steady_fraction(),
        steady_at_end: monitor.is_steady(),
        events,
        hot2_measured: monitor.hot2_measured(),
        diagnosis: DiagnosisJson::new(&tracker.diagnose(&monitor, last_t_ms), tracker.ua()),
        time_to_limit: time_to_limit(
            &monitor.trends(),
            config.alarms.hot_max_k,
            config.coverage_factor,
        ),
    })
}

/// A csv-crate error on one line (its own position when it has one).
fn csv_error(err: &csv::Error, default_line: u64) -> CsvError {
    let line = err.position().map_or(default_line, |p| p.line());
    let message = match err.kind() {
        csv::ErrorKind::Io(e) => format!("cannot read the file: {e}"),
        csv::ErrorKind::Utf8 { err, .. } => format!("field {} is not valid UTF-8", err.field() + 1),
        _ => one_line(&err.to_string()),
    };
    CsvError::Csv { line, message }
}

// ---------------------------------------------------------------------------
// JSON

/// The figures shared by `totals` and `window` (DESIGN.md §5), in order.
#[derive(Serialize)]
struct FiguresJson {
    heat_in_j: f64,
    work_j: f64,
    heat_out_j: f64,
    balance_residual_j: Option<f64>,
    efficiency: Option<f64>,
    hot_mean_k: Option<f64>,
    cold_mean_k: Option<f64>,
    carnot_efficiency: Option<f64>,
    curzon_ahlborn_efficiency: Option<f64>,
    carnot_margin: Option<f64>,
    second_law_efficiency: Option<f64>,
    entropy_generated_j_per_k: Option<f64>,
    exergy_destroyed_j: Option<f64>,
}

impl FiguresJson {
    fn new(m: &Metrics<f64>) -> Self {
        Self {
            heat_in_j: m.heat_in_j,
            work_j: m.work_j,
            heat_out_j: m.heat_out_j,
            balance_residual_j: m.balance_residual_j,
            efficiency: m.efficiency,
            hot_mean_k: m.hot_mean_k,
            cold_mean_k: m.cold_mean_k,
            carnot_efficiency: m.carnot_efficiency,
            curzon_ahlborn_efficiency: m.curzon_ahlborn_efficiency,
            carnot_margin: m.carnot_margin,
            second_law_efficiency: m.second_law_efficiency,
            entropy_generated_j_per_k: m.entropy_generated_j_per_k,
            exergy_destroyed_j: m.exergy_destroyed_j,
        }
    }
}

/// `totals`: the shared figures, then the additions.
#[derive(Serialize)]
struct TotalsJson {
    #[serde(flatten)]
    figures: FiguresJson,
    entropy_rate_w_per_k: Option<f64>,
    cop: Option<f64>,
    carnot_cop: Option<f64>,
    mode: &'static str,
    heat_out_measured: Option<bool>,
}

/// `window`: the shared figures, the standard uncertainties (k = 1), then
/// the additions.
#[derive(Serialize)]
struct WindowJson {
    #[serde(flatten)]
    figures: FiguresJson,
    u_efficiency: Option<f64>,
    u_carnot_efficiency: Option<f64>,
    u_carnot_margin: Option<f64>,
    entropy_rate_w_per_k: Option<f64>,
    cop: Option<f64>,
    carnot_cop: Option<f64>,
    mode: &'static str,
    heat_out_measured: Option<bool>,
    u_entropy_rate_w_per_k: Option<f64>,
    u_entropy_generated_j_per_k: Option<f64>,
    u_balance_residual_j: Option<f64>,
    u_cop: Option<f64>,
    u_carnot_cop: Option<f64>,
    samples: usize,
    duration_s: f64,
}

/// One alarm event.
#[derive(Serialize)]
struct AlarmJson {
    t_s: f64,
    rule: &'static str,
    event: &'static str,
    severity: &'static str,
    /// Second-law and energy-balance raises only.
    #[serde(skip_serializing_if = "Option::is_none")]
    diagnosis: Option<DiagnosisJson>,
}

/// The whole `--json` document (DESIGN.md §5, then the additions).
#[derive(Serialize)]
struct ReportJson {
    samples: u64,
    invalid_samples: u64,
    duration_s: f64,
    totals: TotalsJson,
    window: WindowJson,
    steady_fraction: Option<f64>,
    alarms: Vec<AlarmJson>,
    coverage_factor: f64,
    restarts: u64,
    steady_at_end: bool,
    invalid_lines: Vec<u64>,
    unused_columns: Vec<UnusedColumn>,
    hot2_measured: Option<bool>,
    diagnosis: DiagnosisJson,
    time_to_limit_s: TimeToLimitJson,
}

/// `time_to_limit_s`: seconds until each limit is reached at the trend of
/// the last windows; `null` when no crossing is projected.
#[derive(Serialize)]
struct TimeToLimitJson {
    /// The Carnot margin reaching 0.
    carnot_bound: Option<f64>,
    /// The hot side reaching `alarms.hot_max_k`.
    hot_max: Option<f64>,
}

/// Where the invalid rows are: `; first at lines 7, 9` (with `…` when
/// there are more than the lines kept).
fn invalid_where(lines: &[u64], count: u64) -> String {
    if lines.is_empty() {
        return String::new();
    }
    let list: Vec<String> = lines.iter().map(u64::to_string).collect();
    let more = if count > lines.len() as u64 {
        ", …"
    } else {
        ""
    };
    let word = if lines.len() == 1 && count == 1 {
        "line"
    } else {
        "first at lines"
    };
    format!("; {word} {}{more}", list.join(", "))
}

impl Replay {
    /// The report as pretty-printed JSON.
    pub fn json_text(&self) -> Result<String, serde_json::Error> {
        serde_json::to_string_pretty(&self.json())
    }

    fn json(&self) -> ReportJson {
        let (t, w) = (&self.totals, &self.window);
        ReportJson {
            samples: self.samples,
            invalid_samples: self.invalid_samples,
            invalid_lines: self.invalid_lines.clone(),
            unused_columns: self.unused_columns.clone(),
            duration_s: self.duration_s,
            totals: TotalsJson {
                figures: FiguresJson::new(t),
                entropy_rate_w_per_k: t.entropy_rate_w_per_k,
                cop: t.cop,
                carnot_cop: t.carnot_cop,
                mode: self.mode.as_str(),
                heat_out_measured: self.heat_out_measured,
            },
            window: WindowJson {
                figures: FiguresJson::new(w),
                u_efficiency: w.u_efficiency,
                u_carnot_efficiency: w.u_carnot_efficiency,
                u_carnot_margin: w.u_carnot_margin,
                entropy_rate_w_per_k: w.entropy_rate_w_per_k,
                cop: w.cop,
                carnot_cop: w.carnot_cop,
                mode: self.mode.as_str(),
                heat_out_measured: self.heat_out_measured,
                u_entropy_rate_w_per_k: w.u_entropy_rate_w_per_k,
                u_entropy_generated_j_per_k: w.u_entropy_generated_j_per_k,
                u_balance_residual_j: w.u_balance_residual_j,
                u_cop: w.u_cop,
                u_carnot_cop: w.u_carnot_cop,
                samples: self.window_samples,
                duration_s: w.duration_s,
            },
            steady_fraction: self.steady_fraction,
            alarms: self
                .events
                .iter()
                .map(|e| AlarmJson {
                    t_s: e.t_s,
                    rule: e.event.rule.as_str(),
                    event: e.event.kind.as_str(),
                    severity: e.event.severity.as_str(),
                    diagnosis: e.diagnosis.as_deref().cloned(),
                })
                .collect(),
            coverage_factor: self.coverage_factor,
            restarts: self.restarts,
            steady_at_end: self.steady_at_end,
            hot2_measured: self.hot2_measured,
            diagnosis: self.diagnosis.clone(),
            time_to_limit_s: TimeToLimitJson {
                carnot_bound: self.time_to_limit.carnot_bound_s.filter(|t| t.is_finite()),
                hot_max: self.time_to_limit.hot_max_s.filter(|t| t.is_finite()),
            },
        }
    }
}

// ---------------------------------------------------------------------------
// Text report

const NA: &str = "n/a";

fn energy(j: f64) -> String {
    if j.abs() >= 1.0e4 {
        format!("{:.3} kJ", j / 1000.0)
    } else {
        format!("{j:.1} J")
    }
}

fn opt_energy(j: Option<f64>) -> String {
    j.map_or_else(|| NA.to_string(), energy)
}

fn percent(x: Option<f64>) -> String {
    x.map_or_else(|| NA.to_string(), |x| format!("{:.2} %", 100.0 * x))
}

fn plain(x: Option<f64>, digits: usize, unit: &str) -> String {
    x.map_or_else(|| NA.to_string(), |x| format!("{x:.digits$}{unit}"))
}

fn kelvin(x: Option<f64>) -> String {
    x.map_or_else(
        || NA.to_string(),
        |k| format!("{k:.2} K ({:.2} °C)", k - heatbound::ZERO_CELSIUS_K),
    )
}

/// `value ± k·u`, in percent for efficiencies or plain for COPs.
fn with_u(x: Option<f64>, u: Option<f64>, k: f64, as_percent: bool) -> String {
    let scale = if as_percent { 100.0 } else { 1.0 };
    let unit = if as_percent { " %" } else { "" };
    let Some(x) = x else { return NA.to_string() };
    match u {
        Some(u) => format!("{:.2}{unit} ± {:.2}{unit}", scale * x, scale * k * u),
        None => format!("{:.2}{unit} ± {NA}", scale * x),
    }
}

impl Replay {
    /// The readable report for `file`, the safety note at its end.
    pub fn text(&self, file: &str) -> String {
        let mut out = String::new();
        let reverse = self.mode.is_reverse();
        let measured = match self.heat_out_measured {
            Some(true) => "heat out measured",
            Some(false) => "heat out inferred as Q_in − W",
            None => "no valid sample",
        };
        let t = &self.totals;
        let w = &self.window;
        let k = self.coverage_factor;
        let row = |out: &mut String, label: &str, value: String| {
            let _ = writeln!(out, "  {label:<34} {value}");
        };

        let _ = writeln!(out, "Run: {file}");
        row(&mut out, "mode", format!("{} ({measured})", self.mode));
        row(
            &mut out,
            "samples",
            format!(
                "{} ({} invalid, skipped{})",
                self.samples,
                self.invalid_samples,
                invalid_where(&self.invalid_lines, self.invalid_samples)
            ),
        );
        for c in &self.unused_columns {
            row(
                &mut out,
                "column not used",
                format!("{}: {}", c.name, c.why),
            );
        }
        row(
            &mut out,
            "duration",
            format!(
                "{:.1} s ({:.1} min)",
                self.duration_s,
                self.duration_s / 60.0
            ),
        );
        row(
            &mut out,
            "integrated time",
            format!(
                "{:.1} s, {} restart(s) after gaps",
                t.duration_s, self.restarts
            ),
        );

        let _ = writeln!(out, "\nRun totals");
        row(&mut out, "heat in Q_in", energy(t.heat_in_j));
        row(&mut out, "work W", energy(t.work_j));
        row(&mut out, "heat out Q_out", energy(t.heat_out_j));
        row(
            &mut out,
            "energy-balance residual Q_loss",
            opt_energy(t.balance_residual_j),
        );
        if reverse {
            row(&mut out, "COP", plain(t.cop, 3, ""));
            row(&mut out, "Carnot COP", plain(t.carnot_cop, 3, ""));
        } else {
            row(&mut out, "efficiency η", percent(t.efficiency));
            row(&mut out, "Carnot bound η_C", percent(t.carnot_efficiency));
            row(
                &mut out,
                "Curzon–Ahlborn η_CA",
                percent(t.curzon_ahlborn_efficiency),
            );
        }
        row(&mut out, "Carnot margin", plain(t.carnot_margin, 4, ""));
        row(
            &mut out,
            "second-law efficiency",
            percent(t.second_law_efficiency),
        );
        row(&mut out, "hot-side mean T_h", kelvin(t.hot_mean_k));
        row(&mut out, "cold-side mean T_c", kelvin(t.cold_mean_k));
        row(
            &mut out,
            "entropy generated S_gen",
            plain(t.entropy_generated_j_per_k, 3, " J/K"),
        );
        row(
            &mut out,
            "exergy destroyed T0·S_gen",
            opt_energy(t.exergy_destroyed_j),
        );

        let _ = writeln!(
            out,
            "\nFinal window ({} samples, {:.1} s; ± expanded uncertainty k·u, k = {k})",
            self.window_samples, w.duration_s
        );
        if reverse {
            row(&mut out, "COP", with_u(w.cop, w.u_cop, k, false));
            row(
                &mut out,
                "Carnot COP",
                with_u(w.carnot_cop, w.u_carnot_cop, k, false),
            );
            row(
                &mut out,
                "Carnot margin",
                with_u(w.carnot_margin, w.u_carnot_margin, k, false),
            );
        } else {
            row(
                &mut out,
                "efficiency η",
                with_u(w.efficiency, w.u_efficiency, k, true),
            );
            row(
                &mut out,
                "Carnot bound η_C",
                with_u(w.carnot_efficiency, w.u_carnot_efficiency, k, true),
            );
            row(
                &mut out,
                "Carnot margin η_C − η",
                with_u(w.carnot_margin, w.u_carnot_margin, k, true),
            );
        }
        row(
            &mut out,
            "second-law efficiency",
            percent(w.second_law_efficiency),
        );
        row(&mut out, "hot-side mean T_h", kelvin(w.hot_mean_k));
        row(&mut out, "cold-side mean T_c", kelvin(w.cold_mean_k));
        row(
            &mut out,
            "entropy production σ̇",
            plain(w.entropy_rate_w_per_k, 4, " W/K"),
        );
        row(
            &mut out,
            "energy-balance residual Q_loss",
            opt_energy(w.balance_residual_j),
        );

        let _ = writeln!(out, "\nSteady state");
        row(
            &mut out,
            "steady fraction of integrated time",
            percent(self.steady_fraction),
        );
        row(
            &mut out,
            "steady at the end",
            (if self.steady_at_end { "yes" } else { "no" }).to_string(),
        );

        let _ = writeln!(out, "\nAlarms");
        if self.events.is_empty() {
            let _ = writeln!(out, "  no alarms");
        } else {
            let _ = writeln!(
                out,
                "  {:>12}  {:<28} {:<13} severity",
                "time_s", "rule", "event"
            );
            for e in &self.events {
                let (rule, kind) = (e.event.rule.as_str(), e.event.kind.as_str());
                let _ = writeln!(
                    out,
                    "  {:>12.3}  {rule:<28} {kind:<13} {}",
                    e.t_s, e.event.severity
                );
                if let Some(d) = &e.diagnosis {
                    let _ = writeln!(out, "  {:>12}  diagnosis then: {}", "", d.reason);
                }
            }
        }

        let _ = writeln!(out, "\nDiagnosis of the final window");
        let _ = writeln!(out, "  {}", self.diagnosis.reason);
        for c in &self.diagnosis.candidates {
            let _ = writeln!(
                out,
                "  - {:<9} bias {:>10} ({:.1} u){}",
                c.channel,
                if c.bias_unit == "K" {
                    format!("{:+.2} K", c.bias)
                } else {
                    format!("{:+.2} %", 100.0 * c.bias)
                },
                c.bias_over_u,
                if c.explains { ", explains" } else { "" }
            );
        }
        if let Some(ua) = &self.diagnosis.ua {
            let _ = writeln!(
                out,
                "  UA {:.4} ± {:.4} W/K ({})",
                ua.w_per_k, ua.u_w_per_k, ua.source
            );
        }
        let when = |t: Option<f64>| match t {
            Some(t) => format!("{t:.0} s"),
            None => "not projected".to_string(),
        };
        let _ = writeln!(
            out,
            "\nTime to a limit (trend of the last windows)\n  Carnot bound: {}; hot_max_k: {}",
            when(self.time_to_limit.carnot_bound_s),
            when(self.time_to_limit.hot_max_s)
        );
        let _ = writeln!(out, "\n{}", crate::term::SAFETY_NOTE);
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fast_decimal_agrees_with_the_standard_parser() {
        let cases = [
            "0",
            "-0",
            "+1.5",
            "12.",
            ".5",
            "326.85",
            "26.85",
            "-0.18",
            "1799.003",
            "400.71",
            "0.00001",
            "123456789012345",
            "9007199254740.993",
            "0.1234567890123456789012",
        ];
        for text in cases {
            let expected: f64 = text.parse().unwrap();
            match fast_decimal(text.as_bytes()) {
                Some(x) => assert_eq!(x.to_bits(), expected.to_bits(), "{text}"),
                None => assert!(text.len() > 16, "{text} should take the fast path"),
            }
            assert_eq!(
                reading(text.as_bytes(), "x", 2).unwrap().to_bits(),
                expected.to_bits(),
                "{text}"
            );
        }
        for text in ["", "-", ".", "1.2.3", "1e3", "nan", "12.x", "1 2"] {
            assert_eq!(fast_decimal(text.as_bytes()), None, "{text}");
        }
        assert!(reading(b"NaN", "x", 2).unwrap().is_nan());
        assert!(reading(b"", "x", 2).unwrap().is_nan());
        assert_eq!(reading(b"1e3", "x", 2).unwrap(), 1000.0);
        assert!(reading(b"12.x", "x", 2).is_err());
    }
}
