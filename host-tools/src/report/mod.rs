//! The report engine: one run, from a log or a recorded CSV file, as a
//! self-contained HTML page a bench engineer hands over. It sits at the end
//! of the host's data flow, beside the chart; `heatbound report` and
//! `heatbound demo` call it.
//!
//! ```text
//! LOG.sqlite --audit::audit_log--> checks       --+
//!            --store frames------> Hello, Summaries, Events, commands
//!                 --tiles (windows end to end)--> run totals, steady periods
//!                 --Integrals::budget----------> uncertainty budgets
//!            --chart::svg_chart--> the chart    --+--> Report --html--> report.html
//! FILE.csv   --replay (one pass)--> totals, budgets, alarms               --+
//!              \--each row--> the controller's summaries --> temporary log  |
//!                   --> the log's steady scan and chart::svg_chart         --+
//! ```
//!
//! The page has no network reference at all: the style is inline, the font
//! (the chart's DejaVu Sans) is a `data:` URL, the chart is inline SVG, and
//! a Content-Security-Policy forbids the browser every load but those. It
//! prints: A4, the chart on a landscape page of its own.
//!
//! A log's run totals add up windows that meet end to end ([`tiles`]): a
//! Summary carries its window, not the run. A CSV replay has the run's own
//! integrals, sensitivities included, so its budget is exact and signed.
//! Its steady periods and chart are a log's: the summaries a controller
//! running the configuration would have sent from the file's samples. The
//! page says so.
use std::path::{Path, PathBuf};

use crate::chart::ChartError;
use crate::replay::ReplayError;
use crate::store::StoreError;

mod budget;
pub mod format;
mod from_csv;
mod from_log;
mod html;
mod sections;
mod summaries;
pub mod tiles;

pub use budget::{BudgetRow, BudgetTable};
pub use from_csv::{DEFAULT_SUMMARY_PERIOD_MS, from_csv};
pub use from_log::from_log;
pub use html::{GENERATOR, render};

/// What went wrong making a report.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReportError {
    /// The input cannot be opened.
    #[error("{}: cannot open: {source}", path.display())]
    Open {
        /// The input.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// The log cannot be read.
    #[error(transparent)]
    Store(#[from] StoreError),
    /// The log's run could not be audited.
    #[error(transparent)]
    Audit(#[from] crate::audit::LogAuditError),
    /// The chart could not be drawn.
    #[error(transparent)]
    Chart(#[from] ChartError),
    /// The CSV file could not be replayed.
    #[error(transparent)]
    Replay(#[from] ReplayError),
    /// The controller that makes a CSV file's summaries cannot run the
    /// configuration.
    #[error("the controller cannot run this configuration: {0}")]
    Controller(#[source] heatbound::monitor::MonitorError),
    /// The temporary log of a CSV file's summaries cannot be made.
    #[error("cannot make a temporary directory for the summaries: {source}")]
    Temporary {
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// `--run` names a run the log does not hold.
    #[error("{}: --run {run}: no such run in the log ({held})", path.display())]
    NoSuchRun {
        /// The log.
        path: PathBuf,
        /// The run asked for.
        run: i64,
        /// Which runs it holds, in words.
        held: String,
    },
    /// The run has no summaries, so there is nothing to report.
    #[error("{}: run {run}: no summaries to report on", path.display())]
    NoSummaries {
        /// The log.
        path: PathBuf,
        /// The run.
        run: i64,
    },
    /// No run of the log has summaries.
    #[error("{}: no run in the log has summaries to report on", path.display())]
    NothingToReport {
        /// The log.
        path: PathBuf,
    },
    /// `--out` names one of the report's inputs.
    #[error("{}: --out: that is the report's input; choose another name", path.display())]
    OverwritesInput {
        /// The output path.
        path: PathBuf,
    },
    /// `--out` names an existing file that no heatbound report wrote.
    #[error(
        "{}: exists and is not a heatbound report ({what}); it is left untouched: name a new file or an earlier report",
        path.display()
    )]
    NotOurs {
        /// The output path.
        path: PathBuf,
        /// What it seems to be.
        what: &'static str,
    },
    /// The report cannot be written.
    #[error("{}: cannot write: {source}", path.display())]
    Write {
        /// The output path.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
}

/// What the report was made from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    /// A log database: the controller's own record.
    Log,
    /// A recorded CSV file, replayed on the host.
    Csv,
}

/// A label and its value, as the page shows them.
#[derive(Clone, Debug, PartialEq)]
pub struct Fact {
    /// The label.
    pub label: String,
    /// The value, in words.
    pub value: String,
}

impl Fact {
    fn new(label: impl Into<String>, value: impl Into<String>) -> Fact {
        Fact {
            label: label.into(),
            value: value.into(),
        }
    }
}

/// A check's outcome.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outcome {
    /// It passed.
    Pass,
    /// It failed.
    Fail,
    /// It does not apply to this input.
    NotApplicable,
}

/// One check of the verdict.
#[derive(Clone, Debug, PartialEq)]
pub struct Check {
    /// Its name.
    pub name: String,
    /// Its outcome.
    pub outcome: Outcome,
    /// What it checked and found, in one sentence.
    pub summary: String,
    /// The first findings, if any.
    pub details: Vec<String>,
}

/// The verdict section.
#[derive(Clone, Debug, PartialEq)]
pub struct Verdict {
    /// Whether the record can be trusted (a log) or the readings are
    /// consistent (a replay); `None` when nothing could be judged.
    pub pass: Option<bool>,
    /// The verdict in a few words.
    pub headline: String,
    /// What the verdict rests on.
    pub basis: String,
    /// The checks.
    pub checks: Vec<Check>,
}

/// One line of the run totals.
#[derive(Clone, Debug, PartialEq)]
pub struct TotalRow {
    /// What it is.
    pub quantity: String,
    /// Its symbol.
    pub symbol: String,
    /// Its value, with its unit.
    pub value: String,
    /// The expanded uncertainty `U = k·u`, with its unit, or `—`.
    pub expanded: String,
    /// `U` relative to the value, or empty.
    pub relative: String,
    /// How it was found, when that needs saying.
    pub note: String,
}

/// The run totals.
#[derive(Clone, Debug, PartialEq)]
pub struct Totals {
    /// The figures, as the monitor works them out from the run's integrals.
    pub figures: heatbound::monitor::Metrics<f64>,
    /// The coverage factor of every `U`.
    pub k: f64,
    /// The lines.
    pub rows: Vec<TotalRow>,
    /// What the totals cover, and how they were found.
    pub notes: Vec<String>,
}

/// One steady period.
#[derive(Clone, Debug, PartialEq)]
pub struct SteadyPeriod {
    /// When the steady flag came on, device time.
    pub from: String,
    /// When it was last on, device time.
    pub to: String,
    /// When it came on, the host's time (UTC); empty for a CSV file,
    /// whose own times are in `from` and `to`.
    pub wall: String,
    /// How long the figures' windows span.
    pub length: String,
    /// Summaries with the flag on.
    pub summaries: u64,
    /// Mean hot-side temperature, K.
    pub t_h: String,
    /// Mean cold-side temperature.
    pub t_c: String,
    /// Mean heat in, W.
    pub heat_in: String,
    /// Mean work, W.
    pub work: String,
    /// η (or COP) ± U.
    pub performance: String,
    /// η_C (or COP_C) ± U.
    pub bound: String,
    /// Margin ± U.
    pub margin: String,
    /// σ̇ ± U.
    pub entropy_rate: String,
}

/// The steady periods section.
#[derive(Clone, Debug, PartialEq)]
pub struct Steady {
    /// The share of the run's time that was steady.
    pub fraction: Option<f64>,
    /// The periods, in time order (at most [`MAX_PERIODS`]).
    pub periods: Vec<SteadyPeriod>,
    /// Periods left out past [`MAX_PERIODS`].
    pub more: usize,
    /// What the section can and cannot show, when that needs saying.
    pub note: Option<String>,
}

/// At most this many steady periods are listed (the longest are kept).
pub const MAX_PERIODS: usize = 60;

/// What a timeline row is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RowKind {
    /// An alarm raised.
    Raised,
    /// An alarm cleared.
    Cleared,
    /// An alarm acknowledged.
    Acknowledged,
    /// A command sent to the controller.
    Command,
}

/// One row of the alarm timeline.
#[derive(Clone, Debug, PartialEq)]
pub struct AlarmRow {
    /// The device's time, as `watch` printed it.
    pub device_time: String,
    /// The host's time (UTC), if known.
    pub wall_time: String,
    /// The rule (or the command).
    pub rule: String,
    /// What happened.
    pub kind: RowKind,
    /// The rule's severity, or the command's origin.
    pub severity: String,
    /// The diagnosis at a raise, or what became of a command.
    pub detail: String,
}

/// At most this many timeline rows are listed.
pub const MAX_ALARM_ROWS: usize = 400;

/// The alarms section.
#[derive(Clone, Debug, PartialEq)]
pub struct Alarms {
    /// Per rule: how often raised, and for how long active.
    pub per_rule: Vec<Fact>,
    /// The timeline (at most [`MAX_ALARM_ROWS`]).
    pub rows: Vec<AlarmRow>,
    /// Rows left out past [`MAX_ALARM_ROWS`].
    pub more: usize,
    /// What the section can and cannot show, when that needs saying.
    pub note: Option<String>,
}

/// The charts section.
#[derive(Clone, Debug, PartialEq)]
pub enum Chart {
    /// The chart as SVG, with a caption.
    Svg {
        /// The SVG element, ready to inline.
        svg: String,
        /// What it shows.
        caption: String,
    },
    /// No chart, and why.
    None(String),
}

/// A report, ready to render.
#[derive(Clone, Debug, PartialEq)]
pub struct Report {
    /// What it was made from.
    pub kind: Kind,
    /// The page's title.
    pub title: String,
    /// The input's name, as given.
    pub input: String,
    /// The header: rig, firmware, configuration, time span, counts.
    pub facts: Vec<Fact>,
    /// Losses and gaps.
    pub losses: Vec<Fact>,
    /// The verdict.
    pub verdict: Verdict,
    /// The run totals.
    pub totals: Totals,
    /// The uncertainty budgets: performance, bound, margin, σ̇.
    pub budgets: Vec<BudgetTable>,
    /// What the budgets rest on.
    pub budget_notes: Vec<String>,
    /// The steady periods.
    pub steady: Steady,
    /// The alarms.
    pub alarms: Alarms,
    /// The chart.
    pub chart: Chart,
}

/// What [`write()`] wrote.
#[derive(Clone, Debug, PartialEq)]
pub struct Written {
    /// The file.
    pub out: PathBuf,
    /// Its size, bytes.
    pub bytes: u64,
}

impl Written {
    /// The one-line report: `report: PATH (N KiB)`.
    pub fn line(&self) -> String {
        format!(
            "report: {} ({} KiB)",
            self.out.display(),
            self.bytes.div_ceil(1024)
        )
    }
}

/// The default output: the input's name with `.html`, beside it.
pub fn default_out(input: &Path) -> PathBuf {
    input.with_extension("html")
}

/// Whether `a` and `b` name the same file.
fn same_file(a: &Path, b: &Path) -> bool {
    a == b
        || matches!(
            (std::fs::canonicalize(a), std::fs::canonicalize(b)),
            (Ok(x), Ok(y)) if x == y
        )
}

/// Checks that `out` may take a report: it is none of `inputs`, and it is
/// missing, empty, or a report heatbound wrote (its generator tag in the
/// first few KiB). Anything else is refused and left as it is.
///
/// ```
/// use heatbound_host::report::check_target;
/// let dir = tempfile::tempdir().unwrap();
/// let notes = dir.path().join("notes.html");
/// std::fs::write(&notes, "<p>my notes</p>").unwrap();
/// assert!(check_target(&notes, &[]).is_err());
/// assert!(check_target(&dir.path().join("new.html"), &[]).is_ok());
/// ```
pub fn check_target(out: &Path, inputs: &[&Path]) -> Result<(), ReportError> {
    use std::io::Read as _;
    if inputs.iter().any(|i| same_file(i, out)) {
        return Err(ReportError::OverwritesInput {
            path: out.to_path_buf(),
        });
    }
    let not_ours = |what| ReportError::NotOurs {
        path: out.to_path_buf(),
        what,
    };
    let file = match std::fs::File::open(out) {
        Ok(f) => f,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(()),
        Err(source) => {
            return Err(ReportError::Write {
                path: out.to_path_buf(),
                source,
            });
        }
    };
    if file.metadata().is_ok_and(|m| m.is_dir()) {
        return Err(not_ours("a directory"));
    }
    let mut head = Vec::with_capacity(4096);
    file.take(4096)
        .read_to_end(&mut head)
        .map_err(|source| ReportError::Write {
            path: out.to_path_buf(),
            source,
        })?;
    if head.is_empty() {
        return Ok(());
    }
    let text = String::from_utf8_lossy(&head);
    if text.contains(&format!("<meta name=\"generator\" content=\"{GENERATOR}")) {
        Ok(())
    } else if text
        .trim_start()
        .to_ascii_lowercase()
        .starts_with("<!doctype html")
    {
        Err(not_ours("another HTML page"))
    } else {
        Err(not_ours("not an HTML page"))
    }
}

/// Renders `report` and writes it to `out`, after [`check_target`] with
/// `inputs`. Written beside `out` and renamed over it, so a browser never
/// shows half a page.
pub fn write(report: &Report, out: &Path, inputs: &[&Path]) -> Result<Written, ReportError> {
    check_target(out, inputs)?;
    let page = render(report);
    let name = out
        .file_name()
        .map_or_else(|| "report".into(), |n| n.to_string_lossy());
    let partial = out.with_file_name(format!(".{name}.partial-{}", std::process::id()));
    let write_err = |source| ReportError::Write {
        path: out.to_path_buf(),
        source,
    };
    let result = std::fs::write(&partial, page.as_bytes())
        .and_then(|()| std::fs::rename(&partial, out))
        .map_err(write_err);
    if result.is_err() {
        let _ = std::fs::remove_file(&partial);
    }
    result?;
    Ok(Written {
        out: out.to_path_buf(),
        bytes: u64::try_from(page.len()).unwrap_or(u64::MAX),
    })
}
