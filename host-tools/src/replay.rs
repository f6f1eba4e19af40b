//! The replay engine: a recorded run (CSV) streamed through the host's
//! monitor and the alarms, and its report (the run totals, the final window
//! and the alarm timeline) as text or JSON. It is the offline branch of the
//! data flow; `heatbound analyze` calls [`replay_file_with`].
//!
//! Data flow (DESIGN.md §2, offline branch):
//!
//! ```text
//! FILE.csv --(preamble skipped, blank runs as tabs: [csv] only)
//!          --(csv, one reused ByteRecord)--> Columns (header, checked once)
//!          --> cells to s, K, W --> Sample<f64> per row --> Monitor<4096, f64>::push
//!          --> AlarmSet::update --> Replay (counts, events, final metrics) --> table or JSON
//!          \--each Row--> a follower, if any (the report's controller: replay_file_following)
//! rig.toml --(toml)--> RigFile --validate--> RigConfig
//!          \--[csv]--> CsvLayout (crate::csv_layout)
//! ```
//!
//! Without a `[csv]` table the file is heatbound's own layout (`time_s`,
//! `hot_c`, …); with one, any logger's, as the table maps it.
//!
//! The replay streams: rows are never collected, so memory does not grow
//! with the file's length; only alarm events (few) are kept. Errors name the
//! file, the line (the file's own: the header is line 1, or the first after
//! a preamble) and the column on one line.
use std::fmt::Write as _;
use std::fs::File;
use std::io::Read;
use std::path::Path;
use std::rc::Rc;

use heatbound::alarm::{AlarmSet, Event, EventKind, TimeToLimit, time_to_limit};
use heatbound::config::{Mode, RigConfig};
use heatbound::diagnosis::Tracker;
use heatbound::monitor::{Integrals, Metrics, Monitor, MonitorError, Sample};
use serde::Serialize;

use crate::csv_layout::{CsvLayout, Delimiter, TimeCellError};
use crate::diagnosis_report::DiagnosisJson;
use crate::rigfile::one_line;

mod columns;
mod input;

pub use columns::ReadColumn;
use columns::{Columns, Numbers};

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
    #[error("line {line}: the file is empty: expected a header naming the columns")]
    NoHeader {
        /// Where the header should be (after the lines `[csv]` skips).
        line: u64,
    },
    /// The file ends before the lines `[csv]` skips are over.
    #[error(
        "line {line}: the file ends within the {skip} lines before the header that csv.skip_lines names"
    )]
    ShortPreamble {
        /// The line the file ends on.
        line: u64,
        /// `csv.skip_lines`.
        skip: u32,
    },
    /// A required column is not in the header.
    #[error(
        "line {line}, column {column}: missing required column (the header has: {found}){hint}"
    )]
    MissingColumn {
        /// The header's line.
        line: u64,
        /// The missing column, e.g. `heat_in_w`, `hot_c or hot_k` or
        /// `"P_Heizer" (csv.heat_in.column)`.
        column: String,
        /// The header as found.
        found: String,
        /// What may be wrong besides, with a leading separator, or empty.
        hint: String,
    },
    /// Two header columns describe the same channel.
    #[error("line {line}, column {column}: {why}")]
    Contradictory {
        /// The header's line.
        line: u64,
        /// The column.
        column: String,
        /// Why it contradicts another.
        why: String,
    },
    /// A field is not a number.
    #[error("line {line}, column {column}: cannot parse \"{text}\" as a number{hint}")]
    Number {
        /// Line in the file.
        line: u64,
        /// Column name.
        column: String,
        /// The field as written.
        text: String,
        /// A likely cause, with a leading separator, or empty.
        hint: &'static str,
    },
    /// A row has fewer fields than the header needs.
    #[error(
        "line {line}, column {column}: missing (the row has {fields} fields, the column is number {position})"
    )]
    ShortRow {
        /// Line in the file.
        line: u64,
        /// Column name.
        column: String,
        /// Fields in the row.
        fields: usize,
        /// 1-based position of the column.
        position: usize,
    },
    /// The time is empty or not finite.
    #[error("line {line}, column {column}: no time (\"{text}\"): the row cannot be placed in time")]
    NoTime {
        /// Line in the file.
        line: u64,
        /// The time column's name.
        column: String,
        /// The field as written.
        text: String,
    },
    /// A timestamp that cannot be read (`[csv]` time units `iso8601` and
    /// `excel_days`).
    #[error("line {line}, column {column}: cannot read \"{text}\" as a time: {why}")]
    Time {
        /// Line in the file.
        line: u64,
        /// The time column's name.
        column: String,
        /// The field as written.
        text: String,
        /// Why not.
        why: TimeCellError,
    },
    /// The time does not increase.
    #[error(
        "line {line}, column {column}: time {time} does not increase (previous row: {previous}){hint}"
    )]
    TimeNotIncreasing {
        /// Line in the file.
        line: u64,
        /// The time column's name.
        column: String,
        /// This row's time: seconds (`12.5 s`), or UTC for a time of day.
        time: String,
        /// The previous row's time, likewise.
        previous: String,
        /// A likely cause, with a leading separator, or empty.
        hint: &'static str,
    },
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

/// Exact powers of ten: every one up to 1e22 is representable in f64.
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Plain decimals (`-12.345`, no exponent) with at most 15 significant
/// digits and 22 decimals, the shape every logger writes, parsed without the
/// general float parser; `point` is the decimal mark (`.`, or `,` with
/// `[csv] decimal = ","`). Clinger's fast path: the digits as an integer
/// below 2^53 and the power of ten are both exact, so one IEEE division
/// gives the correctly rounded value, the same as `str::parse`. Anything
/// else is `None`.
#[inline]
fn fast_decimal(bytes: &[u8], point: u8) -> Option<f64> {
    // One copy per mark, each with its mark a constant.
    if point == b'.' {
        fast_decimal_with::<b'.'>(bytes)
    } else {
        fast_decimal_with::<b','>(bytes)
    }
}

#[inline(always)]
fn fast_decimal_with<const POINT: u8>(bytes: &[u8]) -> Option<f64> {
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
            _ if b == POINT && !seen_point => seen_point = true,
            _ => return None,
        }
    }
    if count == 0 || decimals >= POW10.len() {
        return None;
    }
    let magnitude = mantissa as f64 / POW10[decimals];
    Some(if negative { -magnitude } else { magnitude })
}

/// A reading: empty or `NaN` (any case) is an invalid sample, NaN, and so
/// are `-` and `n/a` with a `[csv]` table; anything else must parse as a
/// number, with the table's decimal mark.
#[inline]
fn reading(bytes: &[u8], numbers: Numbers, column: &str, line: u64) -> Result<f64, CsvError> {
    if bytes.is_empty() {
        return Ok(f64::NAN);
    }
    if let Some(x) = fast_decimal(bytes, numbers.point) {
        return Ok(x);
    }
    general_reading(bytes, numbers, column, line)
}

/// The longest number a decimal-comma cell may hold (longer is no reading).
const MAX_NUMBER_BYTES: usize = 64;

/// [`reading`] off the fast path: words, exponents, long mantissas.
fn general_reading(
    bytes: &[u8],
    numbers: Numbers,
    column: &str,
    line: u64,
) -> Result<f64, CsvError> {
    if numbers.words && (bytes == b"-" || bytes.eq_ignore_ascii_case(b"n/a")) {
        return Ok(f64::NAN);
    }
    // `str::parse::<f64>` accepts "nan" in any case, exponents, and
    // "inf"/"infinity", which the monitor then counts as invalid (not finite).
    let parse = |b: &[u8]| std::str::from_utf8(b).ok()?.parse::<f64>().ok();
    let parsed = if numbers.point == b'.' {
        parse(bytes)
    } else if bytes.contains(&b'.') || bytes.len() > MAX_NUMBER_BYTES {
        None
    } else {
        let mut copy = [0u8; MAX_NUMBER_BYTES];
        let copy = &mut copy[..bytes.len()];
        copy.copy_from_slice(bytes);
        for b in copy.iter_mut() {
            if *b == numbers.point {
                *b = b'.';
            }
        }
        parse(copy)
    };
    parsed.ok_or_else(|| CsvError::Number {
        line,
        column: column.to_string(),
        text: crate::term::excerpt(&String::from_utf8_lossy(bytes), 40),
        hint: match numbers.point {
            b'.' if bytes.contains(&b',') => "; a decimal comma? (csv.decimal = \",\" in rig.toml)",
            b',' if bytes.contains(&b'.') => {
                "; the decimal mark is a comma here (csv.decimal = \",\")"
            }
            _ => "",
        },
    })
}

// ---------------------------------------------------------------------------
// Replay

/// An alarm event with the time of the row that caused it.
#[derive(Clone, Debug)]
pub struct TimedEvent {
    /// The row's time, seconds: `time_s` exactly as in the file; with a
    /// `[csv]` table, the time column in seconds (Unix seconds for
    /// `iso8601` and `excel_days`).
    pub t_s: f64,
    /// The event (its `t_ms` is relative to the first row).
    pub event: Event,
    /// For a second-law or energy-balance alarm raised: the diagnosis of
    /// the window at that moment.
    pub diagnosis: Option<Box<DiagnosisJson>>,
}

/// One row as the replay hands it to its monitor, for a caller that
/// follows the replay ([`replay_file_following`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Row {
    /// The row's time, seconds, as in [`TimedEvent::t_s`].
    pub t_s: f64,
    /// Whether `t_s` is Unix seconds (`[csv]` time `iso8601` or
    /// `excel_days`) rather than seconds of the logger's own clock.
    pub unix_time: bool,
    /// The sample pushed: its `t_ms` counts from the first row, invalid
    /// readings are NaN.
    pub sample: Sample<f64>,
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
    /// With a `[csv]` table: which column each channel was read from, in
    /// which unit (empty without one).
    pub read_columns: Vec<ReadColumn>,
    /// Whether the times are Unix seconds (`[csv]` time `iso8601` or
    /// `excel_days`) rather than seconds of the logger's own clock.
    pub unix_time: bool,
    /// Last time − first time, seconds.
    pub duration_s: f64,
    /// Integration restarts after gaps.
    pub restarts: u64,
    /// Whether heat out was measured (`None` if no valid sample).
    pub heat_out_measured: Option<bool>,
    /// Run totals.
    pub totals: Metrics<f64>,
    /// The run's own integrals behind [`Replay::totals`], sensitivities
    /// included: [`Integrals::budget`] of them gives the signed
    /// sensitivity coefficients that the totals' uncertainties combine.
    pub totals_integrals: Integrals<f64>,
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
    replay_file_with(path, config, None, None)
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
    replay_file_with(path, config, None, progress)
}

/// [`replay_file_with_progress`] for a file laid out as `layout` says (the
/// `[csv]` table of `rig.toml`); `None` is the default layout.
///
/// ```
/// use heatbound_host::replay::replay_file_with;
/// use heatbound_host::rigfile::rig_from_text;
/// let dir = tempfile::tempdir().unwrap();
/// let csv = dir.path().join("logger.csv");
/// std::fs::write(&csv, "Logger 7\nZeit;T1;T2;P;W\n0;500,0;25,0;0,4;40\n1;500,0;25,0;0,4;40\n").unwrap();
/// let rig = rig_from_text(r#"
///     [csv]
///     delimiter = ";"
///     decimal = ","
///     skip_lines = 1
///     time = { column = "Zeit", unit = "s" }
///     hot = { column = "T1", unit = "degC" }
///     cold = { column = "T2", unit = "degC" }
///     heat_in = { column = "P", unit = "kW" }
///     work = { column = "W", unit = "W" }
/// "#, "rig.toml").unwrap();
/// let replay = replay_file_with(&csv, &rig.config, rig.csv.as_ref(), None).unwrap();
/// assert_eq!(replay.samples, 2);
/// assert_eq!(replay.totals.heat_in_j, 400.0);
/// ```
pub fn replay_file_with(
    path: &Path,
    config: &RigConfig,
    layout: Option<&CsvLayout>,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<Replay, ReplayError> {
    replay_file_following(path, config, layout, progress, |_: &Row| {})
}

/// [`replay_file_with`], handing every row to `follow` as it is pushed to
/// the monitor, in file order (blank lines are no row). `follow` runs on
/// the replay's own thread, so whatever it builds stays as flat in memory
/// as the replay, if it keeps no rows.
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound_host::replay::{Row, replay_file_following};
/// let dir = tempfile::tempdir().unwrap();
/// let csv = dir.path().join("run.csv");
/// std::fs::write(&csv, "time_s,hot_c,cold_c,heat_in_w,work_w\n5,500,25,400,40\n6,500,25,400,40\n").unwrap();
/// let mut times = Vec::new();
/// let replay = replay_file_following(&csv, &RigConfig::default(), None, None, |r: &Row| {
///     times.push((r.t_s, r.sample.t_ms));
/// }).unwrap();
/// assert_eq!(times, [(5.0, 0), (6.0, 1000)]);
/// assert_eq!(replay.totals_integrals.heat_in_j, 400.0);
/// ```
pub fn replay_file_following(
    path: &Path,
    config: &RigConfig,
    layout: Option<&CsvLayout>,
    progress: Option<&indicatif::ProgressBar>,
    follow: impl FnMut(&Row) + Send,
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
    replay_following(file, config, layout, progress, follow).map_err(|problem| ReplayError {
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
    replay_with(input, config, None, progress)
}

/// [`replay`] of input laid out as `layout` says (`None`: the default layout).
pub fn replay_with<R: Read + Send>(
    input: R,
    config: &RigConfig,
    layout: Option<&CsvLayout>,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<Replay, CsvError> {
    replay_following(input, config, layout, progress, |_: &Row| {})
}

/// [`replay_with`], handing every row to `follow` (see
/// [`replay_file_following`]).
fn replay_following<R: Read + Send>(
    input: R,
    config: &RigConfig,
    layout: Option<&CsvLayout>,
    progress: Option<&indicatif::ProgressBar>,
    follow: impl FnMut(&Row) + Send,
) -> Result<Replay, CsvError> {
    std::thread::scope(|scope| {
        let worker = std::thread::Builder::new()
            .name("replay".into())
            .stack_size(REPLAY_STACK_BYTES)
            .spawn_scoped(scope, || {
                replay_here(input, config, layout, progress, follow)
            })
            .map_err(CsvError::Read)?;
        worker.join().unwrap_or_else(|_| {
            Err(CsvError::Read(std::io::Error::other(
                "the replay stopped unexpectedly (a bug in heatbound: please report it)",
            )))
        })
    })
}

/// A time as an error message shows it: seconds, or UTC for a time of day.
fn shown_time(t_s: f64, unix: bool) -> String {
    if unix {
        unix_time_text(t_s)
    } else {
        format!("{t_s} s")
    }
}

/// Unix seconds as ISO 8601 UTC, to the millisecond.
fn unix_time_text(t_s: f64) -> String {
    #[allow(clippy::cast_possible_truncation)]
    let ms = (t_s * 1000.0).round() as i64;
    jiff::Timestamp::from_millisecond(ms).map_or_else(
        |_| format!("{t_s} s"),
        |t| t.strftime("%Y-%m-%dT%H:%M:%S%.3fZ").to_string(),
    )
}

fn replay_here<'a, R: Read + 'a>(
    input: R,
    config: &RigConfig,
    layout: Option<&CsvLayout>,
    progress: Option<&indicatif::ProgressBar>,
    follow: impl FnMut(&Row),
) -> Result<Replay, CsvError> {
    let mut builder = csv::ReaderBuilder::new();
    builder
        .has_headers(true)
        .flexible(true)
        .delimiter(layout.map_or(b',', |l| l.delimiter.byte()))
        .buffer_capacity(1 << 16);
    let skip = layout.map_or(0, |l| l.skip_lines);
    let blanks = layout.is_some_and(|l| l.delimiter == Delimiter::Blanks);
    if skip == 0 && !blanks {
        // The file as it is, straight into the CSV reader.
        let reader = builder.from_reader(input);
        return replay_rows(
            reader,
            |r| r.position().byte(),
            0,
            config,
            layout,
            progress,
            follow,
        );
    }
    // The bytes the CSV reader sees: after the preamble, blank runs as tabs.
    let mut input: Box<dyn Read + 'a> = Box::new(input);
    let (mut skipped_lines, mut skipped_bytes) = (0u32, 0u64);
    if skip > 0 {
        let mut buffered = std::io::BufReader::new(input);
        (skipped_lines, skipped_bytes) =
            input::skip_lines(&mut buffered, skip).map_err(CsvError::Read)?;
        if skipped_lines < skip {
            return Err(CsvError::ShortPreamble {
                line: u64::from(skipped_lines) + 1,
                skip,
            });
        }
        input = Box::new(buffered);
    }
    let blanks_read = blanks.then(Rc::<std::cell::Cell<u64>>::default);
    if let Some(counter) = &blanks_read {
        input = Box::new(input::Blanks::new(input, Rc::clone(counter)));
    }
    let bytes_read = |reader: &csv::Reader<Box<dyn Read + 'a>>| {
        skipped_bytes
            + blanks_read
                .as_ref()
                .map_or_else(|| reader.position().byte(), |c| c.get())
    };
    replay_rows(
        builder.from_reader(input),
        bytes_read,
        u64::from(skipped_lines),
        config,
        layout,
        progress,
        follow,
    )
}

/// The replay proper, from the header on: `line_offset` lines were read
/// before the reader's first, and `bytes_read` says how far into the file
/// the reader is, for progress; `follow` sees every row as it is pushed.
// Each argument is one of the replay's inputs; a struct would only name them again.
#[allow(clippy::too_many_arguments)]
fn replay_rows<R: Read>(
    mut reader: csv::Reader<R>,
    bytes_read: impl Fn(&csv::Reader<R>) -> u64,
    line_offset: u64,
    config: &RigConfig,
    layout: Option<&CsvLayout>,
    progress: Option<&indicatif::ProgressBar>,
    mut follow: impl FnMut(&Row),
) -> Result<Replay, CsvError> {
    let header_line = line_offset + 1;
    let header = reader
        .byte_headers()
        .map_err(|e| csv_error(&e, header_line, line_offset))?;
    if header.is_empty() || (header.len() == 1 && header[0].trim_ascii().is_empty()) {
        return Err(CsvError::NoHeader { line: header_line });
    }
    let cols = Columns::parse(header, layout, header_line)?;
    let unix_time = cols.time.unit.is_absolute();
    let fold_hint = if cols.time.unit.zoned() {
        "; local time without an offset: did the clocks go back an hour? (write zone offsets, or name a zone without daylight saving time)"
    } else {
        ""
    };

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
            .map_err(|e| csv_error(&e, 0, line_offset))?;
        if !more {
            break;
        }
        let line = record.position().map_or(0, |p| p.line()) + line_offset;
        // A blank line is not a row (the csv reader already skips most).
        if record.len() == 1 && record[0].trim_ascii().is_empty() {
            continue;
        }
        let t_s = cols.time(&record, line)?;
        let first = match first_s {
            None => *first_s.insert(t_s),
            Some(first) => {
                if t_s <= last_s {
                    return Err(CsvError::TimeNotIncreasing {
                        line,
                        column: cols.time.cell.name.clone(),
                        time: shown_time(t_s, unix_time),
                        previous: shown_time(last_s, unix_time),
                        hint: fold_hint,
                    });
                }
                first
            }
        };
        let t_hot_k = cols.temperature(&cols.hot, &record, line)?;
        let t_cold_k = cols.temperature(&cols.cold, &record, line)?;
        let heat_in_w = cols.power(&cols.heat_in, &record, line)?;
        let work_w = cols.power(&cols.work, &record, line)?;
        let heat_out_w = match &cols.heat_out {
            Some(c) => Some(cols.power(c, &record, line)?),
            None => None,
        };
        last_s = t_s;
        rows += 1;

        let sample = Sample {
            t_ms: offset_ms(t_s, first),
            t_hot_k,
            t_cold_k,
            heat_in_w,
            work_w,
            heat_out_w,
            t_hot2_k: match &cols.hot2 {
                Some(c) => Some(cols.temperature(c, &record, line)?),
                None => None,
            },
        };
        // Invalid samples go in too: the sensor_fault rule needs them.
        let invalid_before = monitor.invalid_samples();
        monitor.push(&sample);
        follow(&Row {
            t_s,
            unix_time,
            sample,
        });
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
            bar.set_position(bytes_read(&reader));
        }
    }

    if let Some(bar) = progress {
        bar.set_position(bytes_read(&reader));
    }
    Ok(Replay {
        mode: config.mode,
        coverage_factor: config.coverage_factor,
        samples: rows,
        invalid_samples: monitor.invalid_samples(),
        invalid_lines,
        unused_columns: cols.unused.clone(),
        read_columns: cols.read.clone(),
        unix_time,
        duration_s: first_s.map_or(0.0, |first| last_s - first),
        restarts: monitor.restarts(),
        heat_out_measured: monitor.heat_out_measured(),
        totals: monitor.totals_metrics(),
        totals_integrals: monitor.totals_integrals(),
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

/// A csv-crate error on one line (its own position when it has one, after
/// the `line_offset` lines of a skipped preamble).
fn csv_error(err: &csv::Error, default_line: u64, line_offset: u64) -> CsvError {
    let line = err
        .position()
        .map_or(default_line, |p| p.line() + line_offset);
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
    /// With a `[csv]` table only: where each channel was read.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    columns: Vec<ReadColumn>,
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
            columns: self.read_columns.clone(),
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
        for c in &self.read_columns {
            row(
                &mut out,
                &format!("{} read from", c.channel),
                format!("{} ({})", c.column, c.unit),
            );
        }
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
            // A time of day (Unix seconds) reads as UTC, to the millisecond.
            let width = if self.unix_time { 24 } else { 12 };
            let _ = writeln!(
                out,
                "  {:>width$}  {:<28} {:<13} severity",
                if self.unix_time {
                    "time (UTC)"
                } else {
                    "time_s"
                },
                "rule",
                "event"
            );
            for e in &self.events {
                let (rule, kind) = (e.event.rule.as_str(), e.event.kind.as_str());
                let time = if self.unix_time {
                    unix_time_text(e.t_s)
                } else {
                    format!("{:.3}", e.t_s)
                };
                let _ = writeln!(
                    out,
                    "  {time:>width$}  {rule:<28} {kind:<13} {}",
                    e.event.severity
                );
                if let Some(d) = &e.diagnosis {
                    let _ = writeln!(out, "  {:>width$}  diagnosis then: {}", "", d.reason);
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
            match fast_decimal(text.as_bytes(), b'.') {
                Some(x) => assert_eq!(x.to_bits(), expected.to_bits(), "{text}"),
                None => assert!(text.len() > 16, "{text} should take the fast path"),
            }
            assert_eq!(
                reading(text.as_bytes(), POINT, "x", 2).unwrap().to_bits(),
                expected.to_bits(),
                "{text}"
            );
            // The same number with a decimal comma, on both paths.
            let comma = text.replace('.', ",");
            if let Some(x) = fast_decimal(comma.as_bytes(), b',') {
                assert_eq!(x.to_bits(), expected.to_bits(), "{comma}");
            }
            assert_eq!(
                reading(comma.as_bytes(), COMMA, "x", 2).unwrap().to_bits(),
                expected.to_bits(),
                "{comma}"
            );
        }
        for text in ["", "-", ".", "1.2.3", "1e3", "nan", "12.x", "1 2", "1,5"] {
            assert_eq!(fast_decimal(text.as_bytes(), b'.'), None, "{text}");
        }
        assert_eq!(fast_decimal(b"1.5", b','), None);
        assert!(reading(b"NaN", POINT, "x", 2).unwrap().is_nan());
        assert!(reading(b"", POINT, "x", 2).unwrap().is_nan());
        assert_eq!(reading(b"1e3", POINT, "x", 2).unwrap(), 1000.0);
        assert_eq!(reading(b"1,5e3", COMMA, "x", 2).unwrap(), 1500.0);
        assert!(reading(b"12.x", POINT, "x", 2).is_err());
        // Words are invalid samples only with a [csv] table.
        for word in ["-", "n/a", "N/A", "NaN"] {
            assert!(reading(word.as_bytes(), COMMA, "x", 2).unwrap().is_nan());
        }
        assert!(reading(b"-", POINT, "x", 2).is_err());
        assert!(reading(b"n/a", POINT, "x", 2).is_err());
        // A decimal point where a comma is the mark is no number.
        let err = reading(b"1.5", COMMA, "x", 2).unwrap_err().to_string();
        assert!(err.contains("decimal mark is a comma"), "{err}");
        let err = reading(b"1,5", POINT, "x", 2).unwrap_err().to_string();
        assert!(err.contains("csv.decimal"), "{err}");
    }

    #[test]
    fn short_decimals_agree_with_the_standard_parser_byte_for_byte() {
        // Every text of up to 5 bytes from these, and longer ones around
        // the 8-byte boundary of the word-at-a-time path.
        let alphabet = b"0159.,-+ex";
        let mut texts: Vec<Vec<u8>> = vec![Vec::new()];
        let mut level = vec![Vec::new()];
        for _ in 0..5 {
            level = level
                .iter()
                .flat_map(|t: &Vec<u8>| {
                    alphabet.iter().map(move |&b| {
                        let mut t = t.clone();
                        t.push(b);
                        t
                    })
                })
                .collect();
            texts.extend(level.iter().cloned());
        }
        for base in ["12345678", "1234.567", ".1234567", "1234567.", "0.000001"] {
            for cut in 0..=base.len() {
                for sign in ["", "-", "+"] {
                    for tail in ["", "9", "9.", "99", ".9"] {
                        texts.push(format!("{sign}{}{tail}", &base[..cut]).into_bytes());
                    }
                }
            }
        }
        for text in &texts {
            for point in [b'.', b','] {
                let with_point: Vec<u8> = text
                    .iter()
                    .map(|&b| {
                        if b == point {
                            b'.'
                        } else if b == b'.' {
                            b'?'
                        } else {
                            b
                        }
                    })
                    .collect();
                let plain = with_point
                    .iter()
                    .all(|&b| b.is_ascii_digit() || b == b'.' || b == b'-' || b == b'+');
                let expected = std::str::from_utf8(&with_point)
                    .ok()
                    .filter(|_| plain)
                    .and_then(|s| s.parse::<f64>().ok());
                let got = fast_decimal(text, point);
                let shown = String::from_utf8_lossy(text);
                match got {
                    Some(x) => assert_eq!(
                        Some(x.to_bits()),
                        expected.map(f64::to_bits),
                        "{shown} with mark {}",
                        point as char
                    ),
                    // Every plain decimal the standard parser reads is
                    // on the fast path, up to 16 bytes.
                    None => assert!(
                        expected.is_none() || text.len() > 16,
                        "{shown} with mark {} should take the fast path",
                        point as char
                    ),
                }
            }
        }
    }

    const POINT: Numbers = Numbers {
        point: b'.',
        words: false,
    };
    const COMMA: Numbers = Numbers {
        point: b',',
        words: true,
    };
}
