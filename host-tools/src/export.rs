//! The export engine: one run of the log as a CSV file for spreadsheets and
//! other tools, one row per Summary, with the host's wall-clock time and the
//! controller's clock, the alarm and fault bit masks spelled out as named
//! 0/1 columns, and the units in the column names (docs/export.md).
//!
//! ```text
//! heatbound-log.sqlite --store::Log::open_read--> frames of a run
//!     --> Summary rows (figures as frame_json names them) --> FILE.csv (export)
//! ```
//!
//! A figure that is not available (no heat in, so no η; a NULL of the log)
//! is an empty cell, never NaN or infinity. The file is written beside its
//! target and renamed over it, so no reader sees half a file, and an
//! existing file is replaced only when asked.
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use heatbound::alarm::RuleId;
use heatbound::monitor::Channel;
use heatbound::wire::{Frame, Summary};

use crate::store::{Log, RunId, RunInfo, StoreError};

/// Summaries between progress updates.
const PROGRESS_EVERY: u64 = 4096;

/// What went wrong exporting a run.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ExportError {
    /// The log file cannot be opened.
    #[error("{path}: cannot open: {source}")]
    Open {
        /// The log.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// The log cannot be read (not a log, a newer schema, a bad row, SQLite).
    #[error(transparent)]
    Store(#[from] StoreError),
    /// `--run` names a run the log does not hold.
    #[error("{path}: --run {run}: no such run in the log ({held})")]
    NoSuchRun {
        /// The log.
        path: PathBuf,
        /// The run asked for.
        run: RunId,
        /// Which runs it does hold, as words.
        held: String,
    },
    /// The run asked for has no summaries.
    #[error("{path}: run {run}: no summaries to export")]
    NoSummaries {
        /// The log.
        path: PathBuf,
        /// The run.
        run: RunId,
    },
    /// No run of the log has summaries (or it has no runs).
    #[error("{path}: no run in the log has summaries to export")]
    NothingToExport {
        /// The log.
        path: PathBuf,
    },
    /// The output path is the log itself.
    #[error("{path}: --out: that is the log itself; choose another name")]
    OverwritesLog {
        /// The output path.
        path: PathBuf,
    },
    /// The output exists and replacing it was not asked for.
    #[error("{path}: --out: the file exists; give --force to replace it")]
    Exists {
        /// The output path.
        path: PathBuf,
    },
    /// The file cannot be written where `--out` says.
    #[error("{path}: cannot write: {source}")]
    Write {
        /// The output path.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
}

/// The run an export takes, and how it was chosen.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Chosen {
    /// The run.
    pub run: RunInfo,
    /// Whether `--run` named it (else it is the latest with summaries).
    pub named: bool,
}

impl Chosen {
    /// What the command says on stderr: `run 3 of 3 runs, the latest with
    /// summaries (--run N for another): 1800 summaries`.
    pub fn line(&self, runs: usize) -> String {
        let how = if self.named {
            "as --run asked".to_string()
        } else {
            "the latest with summaries (--run N for another)".to_string()
        };
        let plural = if runs == 1 { "" } else { "s" };
        format!(
            "run {} of {runs} run{plural}, {how}: {} summaries",
            self.run.id, self.run.summaries
        )
    }
}

/// Opens the log at `log` read-only and picks the run: `run`, or the latest
/// with summaries. Returns the log, the run and how many runs it holds.
pub fn choose_run(log: &Path, run: Option<RunId>) -> Result<(Log, Chosen, usize), ExportError> {
    // The OS's own words for a missing or unreadable file, before SQLite's.
    let open_err = |source| ExportError::Open {
        path: log.to_path_buf(),
        source,
    };
    let file = File::open(log).map_err(open_err)?;
    if file.metadata().map_err(open_err)?.is_dir() {
        return Err(open_err(std::io::Error::other("is a directory")));
    }
    drop(file);
    let store = Log::open_read(log)?;
    let runs = store.runs()?;
    let chosen = match run {
        Some(id) => {
            let Some(info) = runs.iter().find(|r| r.id == id) else {
                let held = match (runs.first(), runs.last()) {
                    (Some(a), Some(b)) if a.id == b.id => format!("it holds run {}", a.id),
                    (Some(a), Some(b)) => format!("it holds runs {} to {}", a.id, b.id),
                    _ => "it holds no runs".to_string(),
                };
                return Err(ExportError::NoSuchRun {
                    path: log.to_path_buf(),
                    run: id,
                    held,
                });
            };
            if info.summaries == 0 {
                return Err(ExportError::NoSummaries {
                    path: log.to_path_buf(),
                    run: id,
                });
            }
            Chosen {
                run: info.clone(),
                named: true,
            }
        }
        None => Chosen {
            run: runs
                .iter()
                .rev()
                .find(|r| r.summaries > 0)
                .cloned()
                .ok_or_else(|| ExportError::NothingToExport {
                    path: log.to_path_buf(),
                })?,
            named: false,
        },
    };
    Ok((store, chosen, runs.len()))
}

/// The columns of an export, in order (docs/export.md).
///
/// ```
/// let header = heatbound_host::export::header();
/// assert_eq!(&header[..4], ["run_id", "seq", "host_time_utc", "rig_time_s"]);
/// assert!(header.iter().any(|c| c == "alarm_beyond_carnot"));
/// assert!(header.iter().any(|c| c == "fault_stale"));
/// ```
pub fn header() -> Vec<String> {
    let mut columns: Vec<String> = FIGURES.iter().map(|c| (*c).to_string()).collect();
    columns.extend(RuleId::ALL.iter().map(|r| format!("alarm_{}", r.as_str())));
    columns.extend(Channel::ALL.iter().map(|c| format!("fault_{}", c.name())));
    columns.push("fault_stale".to_string());
    columns
}

/// The columns before the alarm and fault bits.
const FIGURES: [&str; 35] = [
    "run_id",
    "seq",
    "host_time_utc",
    "rig_time_s",
    "mode",
    "duration_s",
    "heat_in_j",
    "work_j",
    "heat_out_j",
    "heat_in_w",
    "work_w",
    "heat_out_w",
    "entropy_in_j_per_k",
    "entropy_out_j_per_k",
    "hot_mean_k",
    "cold_mean_k",
    "ambient_k",
    "performance",
    "bound",
    "margin",
    "entropy_rate_w_per_k",
    "u_performance",
    "u_bound",
    "u_margin",
    "u_entropy_rate_w_per_k",
    "hot_temperature_integral_k_s",
    "hot_pair_integral_k_s",
    "steady",
    "heat_out_measured",
    "trip_active",
    "any_fault",
    "hot2_measured",
    "verdict",
    "suspect",
    "suspect_bias",
];

/// A figure as a cell: its shortest text that reads back as the same
/// number, or empty when there is none (never NaN or infinity).
fn f32_cell(x: Option<f32>) -> String {
    x.filter(|x| x.is_finite())
        .map_or_else(String::new, |x| x.to_string())
}

fn bit(b: bool) -> String {
    String::from(if b { "1" } else { "0" })
}

/// Host time, Unix ms, as ISO 8601 UTC to the millisecond.
fn utc(host_ms: i64) -> String {
    jiff::Timestamp::from_millisecond(host_ms)
        .map(|t| {
            // Always three decimals, so the column sorts as text too.
            t.strftime("%Y-%m-%dT%H:%M:%S%.3fZ").to_string()
        })
        .unwrap_or_default()
}

/// The cells of one summary, received at `host_ms`, of run `run_id`, in the
/// order of [`header`].
///
/// ```
/// use heatbound::wire::Summary;
/// let s = Summary { seq: 4, t_ms: 1500, duration_s: 2.0, heat_in_j: 1000.0, work_j: 300.0,
///                   entropy_in_j_per_k: 2.0, ..Summary::default() };
/// let cells = heatbound_host::export::row(7, 1_700_000_000_250, &s);
/// let header = heatbound_host::export::header();
/// let cell = |name: &str| &cells[header.iter().position(|h| h == name).unwrap()];
/// assert_eq!(cell("host_time_utc"), "2023-11-14T22:13:20.250Z");
/// assert_eq!(cell("rig_time_s"), "1.5");
/// assert_eq!(cell("heat_in_w"), "500");
/// assert_eq!(cell("performance"), "0.3");
/// assert_eq!(cell("cold_mean_k"), ""); // no heat out: no T_c
/// ```
pub fn row(run_id: RunId, host_ms: i64, s: &Summary) -> Vec<String> {
    // Derived figures in single precision, as the summary's own: each one
    // IEEE operation on the logged values, so the cell is exact to them.
    let mean_w = |j: f32| (s.duration_s > 0.0).then(|| j / s.duration_s);
    let cold_mean_k = (s.entropy_out_j_per_k > 0.0).then(|| s.heat_out_j / s.entropy_out_j_per_k);
    let (performance, bound) = (s.performance(), s.bound());
    let margin = match (performance, bound) {
        (Some(p), Some(b)) => Some(b - p),
        _ => None,
    };
    let f = |x: f32| f32_cell(Some(x));
    let mut cells = vec![
        run_id.to_string(),
        s.seq.to_string(),
        utc(host_ms),
        (f64::from(s.t_ms) / 1000.0).to_string(),
        s.status.mode.as_str().to_string(),
        f(s.duration_s),
        f(s.heat_in_j),
        f(s.work_j),
        f(s.heat_out_j),
        f32_cell(mean_w(s.heat_in_j)),
        f32_cell(mean_w(s.work_j)),
        f32_cell(mean_w(s.heat_out_j)),
        f(s.entropy_in_j_per_k),
        f(s.entropy_out_j_per_k),
        f32_cell(s.hot_mean_k()),
        f32_cell(cold_mean_k),
        f32_cell(s.ambient_k),
        f32_cell(performance),
        f32_cell(bound),
        f32_cell(margin),
        f32_cell(s.entropy_rate_w_per_k),
        f32_cell(s.u_performance),
        f32_cell(s.u_bound),
        f32_cell(s.u_margin),
        f32_cell(s.u_entropy_rate_w_per_k),
        f(s.hot_temperature_integral_k_s),
        f32_cell(s.status.hot2_measured.then_some(s.hot_pair_integral_k_s)),
        bit(s.status.steady),
        bit(s.status.heat_out_measured),
        bit(s.status.trip_active),
        bit(s.status.any_fault),
        bit(s.status.hot2_measured),
        match s.verdict.consistent {
            Some(true) => "consistent".to_string(),
            Some(false) => "inconsistent".to_string(),
            None => String::new(),
        },
        s.verdict
            .suspect
            .map_or_else(String::new, |c| c.name().to_string()),
        f32_cell(s.verdict.bias),
    ];
    cells.extend(
        RuleId::ALL
            .iter()
            .map(|r| bit(s.alarms & (1 << r.index()) != 0)),
    );
    cells.extend(Channel::ALL.iter().map(|c| bit(s.faults.has(*c))));
    cells.push(bit(s.faults.stale));
    cells
}

/// Whether two paths name the same file.
fn same_file(a: &Path, b: &Path) -> bool {
    a == b
        || matches!(
            (std::fs::canonicalize(a), std::fs::canonicalize(b)),
            (Ok(x), Ok(y)) if x == y
        )
}

/// The file written before it is renamed over `out`: beside it, hidden.
fn partial_path(out: &Path) -> PathBuf {
    let name = out
        .file_name()
        .map_or_else(|| "export.csv".into(), |s| s.to_string_lossy());
    out.with_file_name(format!(".{name}.partial-{}", std::process::id()))
}

/// Writes every summary of `chosen`'s run in `store` (the log at `log`) to
/// `out`, one row each, in receive order; refuses an existing `out` unless
/// `force`, and the log itself always. Moves `progress` (if any) to the
/// summaries written every few thousand rows. Returns the rows written.
///
/// ```
/// use heatbound::wire::{Frame, Summary};
/// use heatbound_host::export::{choose_run, export_run};
/// use heatbound_host::store::Log;
/// let dir = tempfile::tempdir().unwrap();
/// let db = dir.path().join("log.sqlite");
/// let mut log = Log::open(&db).unwrap();
/// let run = log.begin_run("file:capture.bin", 1_700_000_000_000).unwrap();
/// for seq in 0..3u16 {
///     let s = Summary { seq, t_ms: 1000 * u32::from(seq), ..Summary::default() };
///     log.insert_frame(run, 1_700_000_000_000 + i64::from(seq), &Frame::Summary(s)).unwrap();
/// }
/// log.end_run(run, 1_700_000_001_000).unwrap();
/// drop(log);
///
/// let out = dir.path().join("run.csv");
/// let (store, chosen, _) = choose_run(&db, None).unwrap();
/// assert_eq!(export_run(&store, &db, &chosen, &out, false, None).unwrap(), 3);
/// assert_eq!(std::fs::read_to_string(&out).unwrap().lines().count(), 4);
/// // Once written, the file is not replaced unless asked.
/// assert!(export_run(&store, &db, &chosen, &out, false, None).is_err());
/// assert!(export_run(&store, &db, &chosen, &out, true, None).is_ok());
/// ```
pub fn export_run(
    store: &Log,
    log: &Path,
    chosen: &Chosen,
    out: &Path,
    force: bool,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<u64, ExportError> {
    if same_file(log, out) {
        return Err(ExportError::OverwritesLog {
            path: out.to_path_buf(),
        });
    }
    if !force && std::fs::symlink_metadata(out).is_ok() {
        return Err(ExportError::Exists {
            path: out.to_path_buf(),
        });
    }
    let write_err = |source| ExportError::Write {
        path: out.to_path_buf(),
        source,
    };
    let partial = partial_path(out);
    let written = (|| {
        let file = File::create(&partial).map_err(write_err)?;
        let mut csv = csv::Writer::from_writer(BufWriter::new(file));
        let csv_err = |e: csv::Error| write_err(std::io::Error::other(e.to_string()));
        csv.write_record(header()).map_err(csv_err)?;
        let mut rows = 0u64;
        for stored in store.frames(chosen.run.id)? {
            let stored = stored?;
            if let Frame::Summary(s) = &stored.frame {
                csv.write_record(row(chosen.run.id, stored.host_ms, s))
                    .map_err(csv_err)?;
                rows += 1;
                if let Some(bar) = progress
                    && rows.is_multiple_of(PROGRESS_EVERY)
                {
                    bar.set_position(rows);
                }
            }
        }
        let mut inner = csv
            .into_inner()
            .map_err(|e| write_err(std::io::Error::other(e.to_string())))?;
        inner.flush().map_err(write_err)?;
        inner
            .into_inner()
            .map_err(|e| write_err(std::io::Error::other(e.to_string())))?
            .sync_all()
            .map_err(write_err)?;
        if let Some(bar) = progress {
            bar.set_position(rows);
        }
        Ok(rows)
    })();
    let result = written.and_then(|rows| {
        // With --force a file another process made meanwhile is replaced
        // too; without it, the check above stands (rename replaces).
        std::fs::rename(&partial, out).map_err(write_err)?;
        Ok(rows)
    });
    if result.is_err() {
        let _ = std::fs::remove_file(&partial);
    }
    result
}
