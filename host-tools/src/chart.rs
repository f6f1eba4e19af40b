//! The chart renderer: one run of a log as a picture (PNG or SVG), three
//! panels over a shared axis of rig time. It sits at the end of the host's
//! data flow, after the log ([`crate::store`]); `heatbound chart` and
//! `heatbound demo` call [`write_chart`].
//!
//! ```text
//! LOG.sqlite --store::Log::frames (paged)--> Hello / Summary / Event
//!   --> RigClock (u32 ms, wrap-safe) --> MinMax decimators, alarm Spans, event Marks
//!   --> plotters (bitmap or SVG backend, vendored DejaVu Sans via ab_glyph) --> PATH
//! ```
//!
//! The panels: the figure of merit (η, or COP in reverse modes) with its
//! Carnot bound, each with a ±k·u band; the entropy generation rate σ̇ with
//! its band and the zero line of the second law; the heat-weighted hot-side
//! mean temperature and the T0 the device used. Time spans where a
//! second-law alarm is active are shaded, and every alarm event is a thin
//! vertical line.
//!
//! Memory is bounded by what is drawn, not by the run: every series goes
//! through a [`MinMax`] decimator of at most [`MAX_BUCKETS`] buckets (the
//! least and greatest value of each, so a one-summary spike stays visible),
//! alarm spans are coalesced past [`MAX_SPANS`], and event lines are thinned
//! past [`MAX_MARKS_PER_RULE`] per rule (their counts stay exact). No
//! missing or non-finite value reaches the drawing: a missing value breaks
//! the line instead.
use std::fs::File;
use std::io::IsTerminal as _;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use crate::store::{Log, RunId, StoreError};
use heatbound::alarm::{EventKind, RuleId};
use heatbound::config::Mode;
use heatbound::wire::{EventFrame, Frame, Hello, Summary};
use plotters::coord::Shift;
use plotters::coord::types::RangedCoordf64;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::FontStyle;

/// The picture's size, pixels (the SVG's too).
pub const SIZE_PX: (u32, u32) = (1400, 1000);

/// At most this many buckets per series, so at most twice as many points drawn.
pub const MAX_BUCKETS: usize = 2000;

/// At most this many shaded alarm spans; closer ones are joined past it.
pub const MAX_SPANS: usize = 2000;

/// At most this many event lines drawn per rule; every event is still counted.
pub const MAX_MARKS_PER_RULE: usize = 500;

/// Runs with more summaries than this show a progress bar while they are read
/// (when stderr is a terminal).
const PROGRESS_MIN_SUMMARIES: u64 = 20_000;

/// Frames between progress-bar updates.
const PROGRESS_EVERY: u64 = 4096;

/// The coverage factor assumed when the run has no Hello (DESIGN §4 default).
const DEFAULT_COVERAGE: f64 = 2.0;

/// The alarm bits of the two second-law rules.
const SECOND_LAW_BITS: u8 =
    (1 << RuleId::BeyondCarnot.index()) | (1 << RuleId::NegativeEntropyProduction.index());

/// The vendored font (`host-tools/assets/DejaVuSans.ttf`, licence beside it).
static FONT_TTF: &[u8] = include_bytes!("../assets/DejaVuSans.ttf");

/// What went wrong drawing a chart.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ChartError {
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
    #[error("{path}: run {run}: no summaries to chart")]
    NoSummaries {
        /// The log.
        path: PathBuf,
        /// The run.
        run: RunId,
    },
    /// No run of the log has summaries (or it has no runs).
    #[error("{path}: no run in the log has summaries to chart")]
    NothingToChart {
        /// The log.
        path: PathBuf,
    },
    /// The output's extension names no format this tool writes.
    #[error("{path}: --out: {reason}")]
    Format {
        /// The output path.
        path: PathBuf,
        /// What is wrong with it.
        reason: String,
    },
    /// The output path is the log itself.
    #[error("{path}: --out: that is the log itself; choose another name")]
    OverwritesLog {
        /// The output path.
        path: PathBuf,
    },
    /// The picture cannot be written where `--out` says.
    #[error("{path}: cannot write: {source}")]
    Write {
        /// The output path.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// Plotting or encoding the picture failed.
    #[error("{path}: cannot draw the chart: {reason}")]
    Draw {
        /// The output path.
        path: PathBuf,
        /// The drawing backend's error.
        reason: String,
    },
    /// The built-in font was rejected: a defect of this build.
    #[error("the built-in chart font (assets/DejaVuSans.ttf) cannot be loaded")]
    Font,
}

/// The picture formats `--out` can name.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    /// PNG, by the bitmap backend.
    Png,
    /// SVG, text kept as text.
    Svg,
}

impl Format {
    /// The format named by `out`'s extension (any case).
    pub fn of(out: &Path) -> Result<Format, ChartError> {
        let bad = |reason: String| ChartError::Format {
            path: out.to_path_buf(),
            reason,
        };
        let Some(ext) = out.extension() else {
            return Err(bad("no extension; name a .png or .svg file".into()));
        };
        let ext = ext.to_string_lossy();
        match ext.to_ascii_lowercase().as_str() {
            "png" => Ok(Format::Png),
            "svg" => Ok(Format::Svg),
            _ => Err(bad(format!(
                "unknown picture format {ext:?}; name a .png or .svg file"
            ))),
        }
    }
}

/// The default output: the log's name with `.png`, beside it
/// (`heatbound-demo.sqlite` → `heatbound-demo.png`).
pub fn default_out(log: &Path) -> PathBuf {
    log.with_extension("png")
}

/// What [`write_chart`] drew.
#[derive(Clone, Debug, PartialEq)]
pub struct Drawn {
    /// The picture written.
    pub out: PathBuf,
    /// The run drawn.
    pub run: RunId,
    /// Summaries read.
    pub summaries: u64,
    /// Rig time of the first and last summary, seconds.
    pub t_s: (f64, f64),
}

impl Drawn {
    /// The one-line report: `chart: PATH (run R, S summaries, t = A–B s)`.
    pub fn line(&self) -> String {
        format!(
            "chart: {} (run {}, {} summaries, t = {:.1}–{:.1} s)",
            self.out.display(),
            self.run,
            self.summaries,
            self.t_s.0,
            self.t_s.1
        )
    }
}

/// Draws run `run` (default: the latest with summaries) of the log at `log`
/// into `out`, PNG or SVG by its extension. Shows a progress bar on a
/// terminal for long runs.
pub fn write_chart(log: &Path, run: Option<RunId>, out: &Path) -> Result<Drawn, ChartError> {
    let format = Format::of(out)?;
    if same_file(log, out) {
        return Err(ChartError::OverwritesLog {
            path: out.to_path_buf(),
        });
    }
    // The OS's own words for a missing or unreadable file, before SQLite's.
    let open_err = |source| ChartError::Open {
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
    let info = match run {
        Some(id) => {
            let Some(info) = runs.iter().find(|r| r.id == id) else {
                let held = match (runs.first(), runs.last()) {
                    (Some(a), Some(b)) if a.id == b.id => format!("it holds run {}", a.id),
                    (Some(a), Some(b)) => format!("it holds runs {} to {}", a.id, b.id),
                    _ => "it holds no runs".to_string(),
                };
                return Err(ChartError::NoSuchRun {
                    path: log.to_path_buf(),
                    run: id,
                    held,
                });
            };
            if info.summaries == 0 {
                return Err(ChartError::NoSummaries {
                    path: log.to_path_buf(),
                    run: id,
                });
            }
            info
        }
        None => runs.iter().rev().find(|r| r.summaries > 0).ok_or_else(|| {
            ChartError::NothingToChart {
                path: log.to_path_buf(),
            }
        })?,
    };

    let progress = (info.summaries > PROGRESS_MIN_SUMMARIES && std::io::stderr().is_terminal())
        .then(|| {
            let bar = indicatif::ProgressBar::new(info.summaries);
            if let Ok(style) = indicatif::ProgressStyle::with_template(
                "{msg} {wide_bar} {pos}/{len} summaries ({eta})",
            ) {
                bar.set_style(style);
            }
            bar.set_message(format!("chart run {}", info.id));
            bar
        });
    let mut data = ChartData::new(info.id);
    let mut frames = 0u64;
    let read = (|| {
        for stored in store.frames(info.id)? {
            data.push(&stored?.frame);
            frames += 1;
            if let Some(bar) = &progress
                && frames.is_multiple_of(PROGRESS_EVERY)
            {
                bar.set_position(data.summaries);
            }
        }
        Ok::<_, StoreError>(())
    })();
    if let Some(bar) = progress {
        bar.finish_and_clear();
    }
    read?;
    let Some(t_s) = data.span_s() else {
        return Err(ChartError::NoSummaries {
            path: log.to_path_buf(),
            run: info.id,
        });
    };

    register_font()?;
    // Written beside the target and renamed over it, so a reader (or a
    // browser refreshing the picture) never sees half a file.
    let partial = partial_path(out, format);
    let result = render(&data, format, &partial, out).and_then(|()| {
        std::fs::rename(&partial, out).map_err(|source| ChartError::Write {
            path: out.to_path_buf(),
            source,
        })
    });
    if result.is_err() {
        let _ = std::fs::remove_file(&partial);
    }
    result?;
    Ok(Drawn {
        out: out.to_path_buf(),
        run: info.id,
        summaries: data.summaries,
        t_s,
    })
}

/// A hidden name beside `out` with the same extension (the bitmap encoder
/// picks its format by extension): `dir/.name.partial-PID.png`.
fn partial_path(out: &Path, format: Format) -> PathBuf {
    let stem = out
        .file_stem()
        .map_or_else(|| "chart".into(), |s| s.to_string_lossy());
    let ext = match format {
        Format::Png => "png",
        Format::Svg => "svg",
    };
    out.with_file_name(format!(".{stem}.partial-{}.{ext}", std::process::id()))
}

/// Draws `data` into the file `path`; errors name `out`, the file the user asked for.
fn render(data: &ChartData, format: Format, path: &Path, out: &Path) -> Result<(), ChartError> {
    let write_err = |source| ChartError::Write {
        path: out.to_path_buf(),
        source,
    };
    let draw_err = |reason: String| ChartError::Draw {
        path: out.to_path_buf(),
        reason,
    };
    match format {
        Format::Png => {
            // The OS's own words for an unwritable place, before the encoder's.
            File::create(path).map_err(write_err)?;
            let root = BitMapBackend::new(path, SIZE_PX).into_drawing_area();
            draw(&root, data).map_err(|e| draw_err(e.to_string()))?;
            root.present().map_err(|e| draw_err(e.to_string()))?;
        }
        Format::Svg => {
            let mut text = String::new();
            {
                let root = SVGBackend::with_string(&mut text, SIZE_PX).into_drawing_area();
                draw(&root, data).map_err(|e| draw_err(e.to_string()))?;
                root.present().map_err(|e| draw_err(e.to_string()))?;
            }
            std::fs::write(path, text).map_err(write_err)?;
        }
    }
    Ok(())
}

/// Whether `a` and `b` name the same file (the same path, or both exist and
/// resolve to one).
fn same_file(a: &Path, b: &Path) -> bool {
    a == b
        || matches!(
            (std::fs::canonicalize(a), std::fs::canonicalize(b)),
            (Ok(x), Ok(y)) if x == y
        )
}

/// Registers the vendored font as plotters' "sans-serif", once.
fn register_font() -> Result<(), ChartError> {
    static REGISTERED: OnceLock<bool> = OnceLock::new();
    let ok = *REGISTERED.get_or_init(|| {
        plotters::style::register_font("sans-serif", FontStyle::Normal, FONT_TTF).is_ok()
    });
    if ok { Ok(()) } else { Err(ChartError::Font) }
}

// ---------------------------------------------------------------------------
// Time

/// Rig time in seconds from the device's wrapping `u32` millisecond clock.
///
/// The first time read sets the origin (`t_ms / 1000`); each later summary
/// adds the wrapping difference to the one before, so the roll-over at
/// 2^32 ms (49.7 days) is invisible. A difference that is negative as an
/// `i32` is the clock going back (a controller restart): the axis then
/// stays where it was and carries on from there.
#[derive(Clone, Copy, Debug, Default)]
pub struct RigClock {
    last: Option<(u32, f64)>,
}

impl RigClock {
    /// The time of a summary at `t_ms`, seconds; moves the clock on.
    pub fn advance(&mut self, t_ms: u32) -> f64 {
        let t_s = self.peek(t_ms).max(self.last.map_or(f64::MIN, |(_, s)| s));
        self.last = Some((t_ms, t_s));
        t_s
    }

    /// The time of an event at `t_ms`, seconds, placed against the latest
    /// summary (events fall between summaries); moves the clock only if it
    /// has no origin yet.
    pub fn place(&mut self, t_ms: u32) -> f64 {
        match self.last {
            Some(_) => self.peek(t_ms),
            None => self.advance(t_ms),
        }
    }

    fn peek(&self, t_ms: u32) -> f64 {
        match self.last {
            None => f64::from(t_ms) / 1000.0,
            // The signed reading of the wrapping difference: back or forward.
            Some((raw, s)) => s + f64::from(t_ms.wrapping_sub(raw) as i32) / 1000.0,
        }
    }
}

// ---------------------------------------------------------------------------
// Decimation

/// One bucket: the extremes of the values that fell into it.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Bucket {
    first_t: f64,
    last_t: f64,
    /// Time and value of the least value (of the lower edge, for a band).
    lo: (f64, f64),
    /// Time and value of the greatest value (of the upper edge, for a band).
    hi: (f64, f64),
    /// A missing value came just before this bucket: the line breaks here.
    break_before: bool,
}

impl Bucket {
    fn new(t: f64, lo: f64, hi: f64, break_before: bool) -> Bucket {
        Bucket {
            first_t: t,
            last_t: t,
            lo: (t, lo),
            hi: (t, hi),
            break_before,
        }
    }

    fn add(&mut self, t: f64, lo: f64, hi: f64) {
        self.last_t = t;
        if lo < self.lo.1 {
            self.lo = (t, lo);
        }
        if hi > self.hi.1 {
            self.hi = (t, hi);
        }
    }

    /// This bucket and the next as one; a break between them is bridged.
    fn merge(mut self, next: &Bucket) -> Bucket {
        self.last_t = next.last_t;
        if next.lo.1 < self.lo.1 {
            self.lo = next.lo;
        }
        if next.hi.1 > self.hi.1 {
            self.hi = next.hi;
        }
        self
    }
}

/// Min/max decimation of one series, in bounded memory.
///
/// Points go into buckets of `per_bucket` consecutive summaries (missing
/// values count too, so all series of a chart share their buckets). When
/// `cap` buckets have closed, neighbours are merged pairwise and buckets
/// hold twice as many summaries from then on. Each bucket keeps its least
/// and greatest value with their times, so a drawn line passes through
/// every extreme however long the run: at most `2 × cap` points.
///
/// A missing or non-finite value closes the bucket and breaks the line; a
/// break inside a later merged bucket is bridged (it is narrower than a
/// bucket by then).
#[derive(Clone, Debug)]
pub struct MinMax {
    cap: usize,
    per_bucket: u64,
    /// Summaries counted into the current bucket slot.
    filled: u64,
    closed: Vec<Bucket>,
    open: Option<Bucket>,
    pending_break: bool,
}

impl MinMax {
    /// An empty decimator of at most `cap` buckets (at least 2).
    pub fn new(cap: usize) -> MinMax {
        let cap = cap.max(2);
        MinMax {
            cap,
            per_bucket: 1,
            filled: 0,
            closed: Vec::with_capacity(cap.min(MAX_BUCKETS)),
            open: None,
            pending_break: false,
        }
    }

    /// Adds a value at `t` (`None` when missing).
    pub fn push(&mut self, t: f64, value: Option<f64>) {
        self.push_range(t, value.map(|v| (v, v)));
    }

    /// Adds a band `(lo, hi)` at `t` (`None` when missing).
    pub fn push_range(&mut self, t: f64, range: Option<(f64, f64)>) {
        if self.filled >= self.per_bucket {
            self.close();
            self.filled = 0;
        }
        self.filled += 1;
        match range.filter(|&(lo, hi)| t.is_finite() && lo.is_finite() && hi.is_finite()) {
            None => {
                self.close();
                self.pending_break = true;
            }
            Some((lo, hi)) => {
                let (lo, hi) = if lo <= hi { (lo, hi) } else { (hi, lo) };
                match &mut self.open {
                    Some(b) => b.add(t, lo, hi),
                    None => {
                        let brk = std::mem::take(&mut self.pending_break);
                        self.open = Some(Bucket::new(t, lo, hi, brk));
                    }
                }
            }
        }
    }

    fn close(&mut self) {
        let Some(b) = self.open.take() else {
            return;
        };
        self.closed.push(b);
        if self.closed.len() >= self.cap {
            let merged: Vec<Bucket> = self
                .closed
                .chunks(2)
                .filter_map(|pair| pair.iter().copied().reduce(|a, b| a.merge(&b)))
                .collect();
            self.closed = merged;
            self.per_bucket = self.per_bucket.saturating_mul(2);
        }
    }

    fn buckets(&self) -> impl Iterator<Item = &Bucket> {
        self.closed.iter().chain(self.open.as_ref())
    }

    /// The least and greatest value kept, if any.
    pub fn extent(&self) -> Option<(f64, f64)> {
        self.buckets().fold(None, |acc, b| match acc {
            None => Some((b.lo.1, b.hi.1)),
            Some((lo, hi)) => Some((lo.min(b.lo.1), hi.max(b.hi.1))),
        })
    }

    /// The line to draw: segments split at missing values, each bucket's
    /// minimum and maximum in time order.
    pub fn line(&self) -> Vec<Vec<(f64, f64)>> {
        let mut segments: Vec<Vec<(f64, f64)>> = Vec::new();
        for b in self.buckets() {
            if b.break_before || segments.is_empty() {
                segments.push(Vec::new());
            }
            let Some(seg) = segments.last_mut() else {
                continue;
            };
            let (first, second) = if b.lo.0 <= b.hi.0 {
                (b.lo, b.hi)
            } else {
                (b.hi, b.lo)
            };
            seg.push(first);
            if second != first {
                seg.push(second);
            }
        }
        segments
    }

    /// The band to draw: segments of `(t, lower, upper)`, each bucket's
    /// envelope held from its first to its last time.
    pub fn band(&self) -> Vec<Vec<(f64, f64, f64)>> {
        let mut segments: Vec<Vec<(f64, f64, f64)>> = Vec::new();
        for b in self.buckets() {
            if b.break_before || segments.is_empty() {
                segments.push(Vec::new());
            }
            let Some(seg) = segments.last_mut() else {
                continue;
            };
            seg.push((b.first_t, b.lo.1, b.hi.1));
            if b.last_t > b.first_t {
                seg.push((b.last_t, b.lo.1, b.hi.1));
            }
        }
        segments
    }
}

/// Time spans where a condition held, coalesced to at most `cap`.
#[derive(Clone, Debug)]
pub struct Spans {
    cap: usize,
    spans: Vec<(f64, f64)>,
    /// Start and latest time of the span still open.
    open: Option<(f64, f64)>,
}

impl Spans {
    /// No spans yet; at most `cap` (at least 2) are kept.
    pub fn new(cap: usize) -> Spans {
        Spans {
            cap: cap.max(2),
            spans: Vec::new(),
            open: None,
        }
    }

    /// The condition at summary time `t`. A span runs from its first summary
    /// to the first summary without it (or the last with it, at the end).
    pub fn push(&mut self, t: f64, active: bool) {
        match (active, self.open) {
            (true, None) => self.open = Some((t, t)),
            (true, Some((start, _))) => self.open = Some((start, t)),
            (false, Some((start, _))) => {
                self.open = None;
                self.spans.push((start, t));
                if self.spans.len() >= self.cap {
                    self.coalesce();
                }
            }
            (false, None) => {}
        }
    }

    /// Joins every pair of neighbours no further apart than the median gap,
    /// which at least halves the count of distinct gaps.
    fn coalesce(&mut self) {
        let mut gaps: Vec<f64> = self.spans.windows(2).map(|w| w[1].0 - w[0].1).collect();
        if gaps.is_empty() {
            return;
        }
        let mid = gaps.len() / 2;
        let (_, median, _) = gaps.select_nth_unstable_by(mid, f64::total_cmp);
        let median = *median;
        let mut out: Vec<(f64, f64)> = Vec::with_capacity(self.spans.len() / 2 + 1);
        for &(a, b) in &self.spans {
            match out.last_mut() {
                Some(last) if a - last.1 <= median => last.1 = last.1.max(b),
                _ => out.push((a, b)),
            }
        }
        self.spans = out;
    }

    /// The spans, the open one included.
    pub fn all(&self) -> Vec<(f64, f64)> {
        self.spans.iter().copied().chain(self.open).collect()
    }
}

/// The events of one rule: exact counts, and the times of those drawn.
#[derive(Clone, Debug, Default)]
struct Marks {
    counts: [u64; 3],
    /// Every `stride`-th event is kept; doubled when `kept` is full.
    stride: u64,
    seen: u64,
    kept: Vec<(f64, EventKind)>,
}

impl Marks {
    fn push(&mut self, t: f64, kind: EventKind) {
        self.counts[kind_index(kind)] += 1;
        let stride = self.stride.max(1);
        if self.seen.is_multiple_of(stride) {
            self.kept.push((t, kind));
            if self.kept.len() >= MAX_MARKS_PER_RULE {
                let mut i = 0;
                self.kept.retain(|_| {
                    i += 1;
                    i % 2 == 1
                });
                self.stride = stride * 2;
            }
        }
        self.seen += 1;
    }

    fn total(&self) -> u64 {
        self.counts.iter().sum()
    }
}

fn kind_index(kind: EventKind) -> usize {
    match kind {
        EventKind::Raised => 0,
        EventKind::Cleared => 1,
        _ => 2,
    }
}

// ---------------------------------------------------------------------------
// What is drawn

/// Everything the picture needs from one run, in bounded memory.
struct ChartData {
    run: RunId,
    hello: Option<Hello>,
    clock: RigClock,
    summaries: u64,
    first_t: Option<f64>,
    last_t: f64,
    performance: MinMax,
    performance_band: MinMax,
    bound: MinMax,
    bound_band: MinMax,
    entropy_rate: MinMax,
    entropy_band: MinMax,
    hot_mean: MinMax,
    ambient: MinMax,
    second_law: Spans,
    /// Every alarm bit seen set in some summary.
    alarms_seen: u8,
    events: [Marks; RuleId::COUNT],
}

impl ChartData {
    fn new(run: RunId) -> ChartData {
        let series = || MinMax::new(MAX_BUCKETS);
        ChartData {
            run,
            hello: None,
            clock: RigClock::default(),
            summaries: 0,
            first_t: None,
            last_t: 0.0,
            performance: series(),
            performance_band: series(),
            bound: series(),
            bound_band: series(),
            entropy_rate: series(),
            entropy_band: series(),
            hot_mean: series(),
            ambient: series(),
            second_law: Spans::new(MAX_SPANS),
            alarms_seen: 0,
            events: Default::default(),
        }
    }

    fn push(&mut self, frame: &Frame) {
        match frame {
            Frame::Hello(h) => {
                // The first Hello names the run; later ones repeat it.
                self.hello.get_or_insert(*h);
            }
            Frame::Summary(s) => self.summary(s),
            Frame::Event(e) => self.event(e),
            Frame::Reply(_) => {}
        }
    }

    fn coverage(&self) -> f64 {
        self.hello
            .map(|h| f64::from(h.coverage_factor))
            .filter(|k| k.is_finite() && *k > 0.0)
            .unwrap_or(DEFAULT_COVERAGE)
    }

    fn summary(&mut self, s: &Summary) {
        let t = self.clock.advance(s.t_ms);
        let k = self.coverage();
        self.performance.push(t, value(s.performance));
        self.performance_band
            .push_range(t, band(s.performance, s.u_performance, k));
        self.bound.push(t, value(s.bound));
        self.bound_band.push_range(t, band(s.bound, s.u_bound, k));
        self.entropy_rate.push(t, value(s.entropy_rate_w_per_k));
        self.entropy_band
            .push_range(t, band(s.entropy_rate_w_per_k, s.u_entropy_rate_w_per_k, k));
        self.hot_mean.push(t, value(s.hot_mean_k));
        self.ambient.push(t, value(s.ambient_k));
        self.second_law.push(t, s.alarms & SECOND_LAW_BITS != 0);
        self.alarms_seen |= s.alarms;
        self.summaries += 1;
        self.first_t.get_or_insert(t);
        self.last_t = t;
    }

    fn event(&mut self, e: &EventFrame) {
        let t = self.clock.place(e.event.t_ms);
        if let Some(marks) = self.events.get_mut(e.event.rule.index()) {
            marks.push(t, e.event.kind);
        }
    }

    /// Rig time of the first and last summary.
    fn span_s(&self) -> Option<(f64, f64)> {
        self.first_t.map(|a| (a, self.last_t))
    }
}

/// A figure as a finite f64, if present.
fn value(x: Option<f32>) -> Option<f64> {
    x.map(f64::from).filter(|v| v.is_finite())
}

/// `x ± k·u`, if both are present and finite.
fn band(x: Option<f32>, u: Option<f32>, k: f64) -> Option<(f64, f64)> {
    let x = value(x)?;
    let half = k * value(u)?.abs();
    half.is_finite().then_some((x - half, x + half))
}

// ---------------------------------------------------------------------------
// Drawing

/// Colours: our own, picked for contrast on white and for telling apart in
/// grey print (dark blue, copper, violet, brick, green).
mod palette {
    use plotters::style::RGBColor;
    pub const INK: RGBColor = RGBColor(0x22, 0x26, 0x2e);
    pub const MUTED: RGBColor = RGBColor(0x5c, 0x63, 0x70);
    pub const GRID: RGBColor = RGBColor(0xe4, 0xe7, 0xec);
    pub const GRID_BOLD: RGBColor = RGBColor(0xc8, 0xcd, 0xd5);
    pub const PERFORMANCE: RGBColor = RGBColor(0x1d, 0x4e, 0x89);
    pub const BOUND: RGBColor = RGBColor(0xb8, 0x5c, 0x1a);
    pub const ENTROPY: RGBColor = RGBColor(0x5e, 0x3a, 0x8c);
    pub const HOT: RGBColor = RGBColor(0xa8, 0x2a, 0x2a);
    pub const AMBIENT: RGBColor = RGBColor(0x2f, 0x7d, 0x4f);
    pub const ALARM: RGBColor = RGBColor(0xf0, 0xb4, 0x29);

    /// The colour of a rule's event lines, by rule index.
    pub const RULES: [RGBColor; 6] = [
        RGBColor(0xd0, 0x21, 0x3c), // beyond_carnot
        RGBColor(0x9b, 0x2f, 0xae), // negative_entropy_production
        RGBColor(0x00, 0x9c, 0xab), // near_carnot
        RGBColor(0x6b, 0x8e, 0x23), // energy_balance
        RGBColor(0x6d, 0x4c, 0x2f), // over_temperature
        RGBColor(0x4a, 0x55, 0x68), // sensor_fault
    ];
}

/// Alpha of the uncertainty bands and of the alarm shading.
const BAND_ALPHA: f64 = 0.22;
const ALARM_ALPHA: f64 = 0.30;

/// Pixel layout.
const HEADER_PX: u32 = 70;
const FOOTER_PX: u32 = 96;
const LEGEND_PX: u32 = 290;
const Y_LABEL_PX: u32 = 96;
const X_LABEL_PX: u32 = 34;
const X_LABEL_LAST_PX: u32 = 52;

type DrawResult<DB> = Result<(), DrawingAreaErrorKind<<DB as DrawingBackend>::ErrorType>>;

/// One line (with an optional band) of a panel.
struct Trace<'a> {
    label: String,
    band_label: Option<String>,
    colour: RGBColor,
    line: &'a MinMax,
    band: Option<&'a MinMax>,
}

/// One panel: its axis title, its traces and its furniture.
struct PanelSpec<'a> {
    y_desc: String,
    traces: Vec<Trace<'a>>,
    zero_line: Option<String>,
    shade_alarms: bool,
    /// Only the bottom panel names the time axis.
    x_desc: bool,
}

/// The words for the figure of merit and its bound in `mode` (unknown
/// without a Hello).
fn merit_words(mode: Option<Mode>) -> (&'static str, &'static str, &'static str) {
    match mode {
        Some(Mode::Engine) => (
            "efficiency η, Carnot η_C",
            "η = W/Q_in",
            "η_C = 1 − T_c/T_h",
        ),
        Some(Mode::HeatPump) => (
            "COP, Carnot COP",
            "COP_heating = Q_hot/W",
            "Carnot COP = T_h/(T_h − T_c)",
        ),
        Some(Mode::Cooler) => (
            "COP, Carnot COP",
            "COP_cooling = Q_cold/W",
            "Carnot COP = T_c/(T_h − T_c)",
        ),
        _ => (
            "performance, bound",
            "performance (η or COP)",
            "Carnot bound",
        ),
    }
}

fn draw<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, data: &ChartData) -> DrawResult<DB> {
    root.fill(&WHITE)?;
    let (_, height) = root.dim_in_pixel();
    let (header, rest) = root.split_vertically(HEADER_PX);
    let (body, footer) = rest.split_vertically(height.saturating_sub(HEADER_PX + FOOTER_PX));

    let (t0, t1) = data.span_s().unwrap_or((0.0, 1.0));
    let x_range = padded_x(t0, t1);
    let k = data.coverage();
    let k_text = format_k(k);
    let (merit_desc, merit_label, bound_label) = merit_words(data.hello.map(|h| h.mode));
    let band_words = format!("± k·u, k = {k_text}");

    draw_header(&header, data, t0, t1, &k_text)?;

    let panels = [
        PanelSpec {
            y_desc: merit_desc.to_string(),
            traces: vec![
                Trace {
                    label: merit_label.to_string(),
                    band_label: Some(band_words.clone()),
                    colour: palette::PERFORMANCE,
                    line: &data.performance,
                    band: Some(&data.performance_band),
                },
                Trace {
                    label: bound_label.to_string(),
                    band_label: Some(band_words.clone()),
                    colour: palette::BOUND,
                    line: &data.bound,
                    band: Some(&data.bound_band),
                },
            ],
            zero_line: None,
            shade_alarms: true,
            x_desc: false,
        },
        PanelSpec {
            y_desc: "entropy generation Ṡ_gen (W/K)".to_string(),
            traces: vec![Trace {
                label: "Ṡ_gen, entropy generation rate".to_string(),
                band_label: Some(band_words),
                colour: palette::ENTROPY,
                line: &data.entropy_rate,
                band: Some(&data.entropy_band),
            }],
            zero_line: Some("zero: below it by more than k·u breaks the second law".to_string()),
            shade_alarms: true,
            x_desc: false,
        },
        PanelSpec {
            y_desc: "temperature (K)".to_string(),
            traces: vec![
                Trace {
                    label: "T_h, heat-weighted hot-side mean".to_string(),
                    band_label: None,
                    colour: palette::HOT,
                    line: &data.hot_mean,
                    band: None,
                },
                Trace {
                    label: "T0, ambient used by the device".to_string(),
                    band_label: None,
                    colour: palette::AMBIENT,
                    line: &data.ambient,
                    band: None,
                },
            ],
            zero_line: None,
            shade_alarms: false,
            x_desc: true,
        },
    ];
    // The bottom panel also carries the time axis title.
    let body_h = body.dim_in_pixel().1;
    let each = (body_h.saturating_sub(X_LABEL_LAST_PX - X_LABEL_PX)) / 3;
    let (p1, rest) = body.split_vertically(each);
    let (p2, p3) = rest.split_vertically(each);
    for (area, spec) in [p1, p2, p3].iter().zip(&panels) {
        draw_panel(area, spec, data, x_range.clone())?;
    }
    draw_footer(&footer, data)?;
    Ok(())
}

/// The union of two value ranges.
fn widen(a: Option<(f64, f64)>, b: Option<(f64, f64)>) -> Option<(f64, f64)> {
    match (a, b) {
        (Some((a0, a1)), Some((b0, b1))) => Some((a0.min(b0), a1.max(b1))),
        (a, None) => a,
        (None, b) => b,
    }
}

/// The time range, widened when the run is a single instant.
fn padded_x(t0: f64, t1: f64) -> std::ops::Range<f64> {
    if t1 > t0 { t0..t1 } else { t0 - 0.5..t0 + 0.5 }
}

/// A value range with a margin of 6 %, never empty.
fn padded_y(lo: f64, hi: f64) -> std::ops::Range<f64> {
    let span = hi - lo;
    let pad = if span > 0.0 && span.is_finite() {
        span * 0.06
    } else {
        (hi.abs() * 0.05).max(1e-3)
    };
    let (a, b) = (lo - pad, hi + pad);
    if a.is_finite() && b.is_finite() && b > a {
        a..b
    } else {
        -1.0..1.0
    }
}

fn format_k(k: f64) -> String {
    if (k - k.round()).abs() < 1e-6 {
        format!("{k:.0}")
    } else {
        format!("{k:.2}")
    }
}

fn font(size: f64) -> TextStyle<'static> {
    ("sans-serif", size).into_font().color(&palette::INK)
}

fn draw_header<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    data: &ChartData,
    t0: f64,
    t1: f64,
    k_text: &str,
) -> DrawResult<DB> {
    let who = match &data.hello {
        Some(h) => {
            let (a, b, c) = h.firmware_version;
            format!("rig {} · firmware {a}.{b}.{c}", h.rig_id)
        }
        None => "rig unknown (no Hello in this run)".to_string(),
    };
    let title = format!(
        "{who} · run {} · t = {t0:.1}–{t1:.1} s ({})",
        data.run,
        duration_words(t1 - t0)
    );
    area.draw_text(&title, &font(27.0), (24, 12))?;
    let mode = data.hello.map_or_else(
        || "mode unknown".to_string(),
        |h| format!("{} mode", h.mode.as_str().replace('_', " ")),
    );
    let kept = data.performance.per_bucket;
    let drawn = if kept > 1 {
        format!("decimated to the min and max of every {kept} summaries")
    } else {
        "every summary drawn".to_string()
    };
    let sub = format!(
        "{mode} · {} summaries, {drawn} · bands ± k·u with k = {k_text}{}",
        data.summaries,
        if data.hello.is_none() {
            " (assumed)"
        } else {
            ""
        }
    );
    area.draw_text(&sub, &font(17.0).color(&palette::MUTED), (24, 44))?;
    Ok(())
}

/// "10.0 min", "2.5 h", "3.1 days".
fn duration_words(s: f64) -> String {
    if s < 120.0 {
        format!("{s:.0} s")
    } else if s < 7200.0 {
        format!("{:.1} min", s / 60.0)
    } else if s < 172_800.0 {
        format!("{:.1} h", s / 3600.0)
    } else {
        format!("{:.1} days", s / 86_400.0)
    }
}

fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    spec: &PanelSpec<'_>,
    data: &ChartData,
    x_range: std::ops::Range<f64>,
) -> DrawResult<DB> {
    let (width, _) = area.dim_in_pixel();
    let (plot_area, legend_area) = area.split_horizontally(width.saturating_sub(LEGEND_PX));

    let mut extent: Option<(f64, f64)> = None;
    for t in &spec.traces {
        extent = widen(extent, t.line.extent());
        extent = widen(extent, t.band.and_then(MinMax::extent));
    }
    let has_data = extent.is_some();
    if spec.zero_line.is_some() {
        extent = widen(extent, Some((0.0, 0.0)));
    }
    let (lo, hi) = extent.unwrap_or((0.0, 1.0));
    let y_range = padded_y(lo, hi);

    let mut chart = ChartBuilder::on(&plot_area)
        .margin_top(8)
        .margin_right(12)
        .margin_left(8)
        .x_label_area_size(if spec.x_desc {
            X_LABEL_LAST_PX
        } else {
            X_LABEL_PX
        })
        .y_label_area_size(Y_LABEL_PX)
        .build_cartesian_2d(x_range.clone(), y_range.clone())?;
    let mut mesh = chart.configure_mesh();
    mesh.x_labels(14)
        .y_labels(6)
        .max_light_lines(1)
        .x_label_formatter(&tick)
        .y_label_formatter(&tick)
        .label_style(font(15.0))
        .axis_desc_style(font(16.0))
        .axis_style(palette::MUTED)
        .bold_line_style(palette::GRID_BOLD)
        .light_line_style(palette::GRID)
        .y_desc(spec.y_desc.as_str());
    if spec.x_desc {
        mesh.x_desc("rig time (s)");
    }
    mesh.draw()?;

    let (y0, y1) = (y_range.start, y_range.end);
    if spec.shade_alarms {
        let style = palette::ALARM.mix(ALARM_ALPHA).filled();
        chart.draw_series(
            data.second_law
                .all()
                .into_iter()
                .map(|(a, b)| Rectangle::new([(a, y0), (b, y1)], style)),
        )?;
    }
    for t in &spec.traces {
        if let Some(band) = t.band {
            let style = t.colour.mix(BAND_ALPHA).filled();
            for seg in band.band() {
                let mut points: Vec<(f64, f64)> = seg.iter().map(|&(x, _, up)| (x, up)).collect();
                points.extend(seg.iter().rev().map(|&(x, low, _)| (x, low)));
                if seg.len() == 1 {
                    // A lone point: a short bar, so the band still shows.
                    chart.draw_series(std::iter::once(PathElement::new(
                        points,
                        t.colour.mix(0.5).stroke_width(3),
                    )))?;
                } else {
                    chart.draw_series(std::iter::once(Polygon::new(points, style)))?;
                }
            }
        }
    }
    if spec.zero_line.is_some() {
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(x_range.start, 0.0), (x_range.end, 0.0)],
            palette::INK.stroke_width(1),
        )))?;
    }
    draw_event_lines(&mut chart, data, y0, y1)?;
    for t in &spec.traces {
        for seg in t.line.line() {
            if seg.len() == 1 {
                chart.draw_series(seg.iter().map(|&p| Circle::new(p, 2, t.colour.filled())))?;
            } else {
                chart.draw_series(LineSeries::new(seg, t.colour.stroke_width(2)))?;
            }
        }
    }
    if !has_data {
        let (w, h) = plot_area.dim_in_pixel();
        plot_area.draw_text(
            "no values in this run",
            &font(18.0).color(&palette::MUTED),
            (w as i32 / 2 - 80, h as i32 / 2),
        )?;
    }

    // The legend, beside the panel.
    let line_h = 22;
    let mut y = 14;
    let swatch = |area: &DrawingArea<DB, Shift>, y: i32, style: ShapeStyle, filled: bool| {
        if filled {
            area.draw(&Rectangle::new([(10, y - 6), (38, y + 6)], style))
        } else {
            area.draw(&PathElement::new(vec![(10, y), (38, y)], style))
        }
    };
    let text = font(15.0);
    for t in &spec.traces {
        swatch(&legend_area, y, t.colour.stroke_width(3), false)?;
        legend_area.draw_text(&t.label, &text, (46, y - 8))?;
        y += line_h;
        if let Some(b) = &t.band_label {
            swatch(&legend_area, y, t.colour.mix(BAND_ALPHA).filled(), true)?;
            legend_area.draw_text(b, &text, (46, y - 8))?;
            y += line_h;
        }
    }
    if let Some(z) = &spec.zero_line {
        swatch(&legend_area, y, palette::INK.stroke_width(1), false)?;
        let parts = wrap(z, 30);
        for (i, part) in parts.iter().enumerate() {
            legend_area.draw_text(part, &text, (46, y - 8 + 18 * i as i32))?;
        }
        y += line_h + 18 * (parts.len().saturating_sub(1) as i32);
    }
    if spec.shade_alarms {
        swatch(
            &legend_area,
            y,
            palette::ALARM.mix(ALARM_ALPHA + 0.2).filled(),
            true,
        )?;
        legend_area.draw_text("second-law alarm active", &text, (46, y - 8))?;
        y += 18;
        legend_area.draw_text(
            "(beyond_carnot or",
            &text.color(&palette::MUTED),
            (46, y - 8),
        )?;
        y += 18;
        legend_area.draw_text(
            "negative_entropy_production)",
            &text.color(&palette::MUTED),
            (46, y - 8),
        )?;
    }
    Ok(())
}

/// A tick label: the value to six decimals, trailing zeros trimmed
/// (`0.30000000000000004` → `0.3`, `50.0` → `50`).
fn tick(v: &f64) -> String {
    let text = format!("{v:.6}");
    let text = text.trim_end_matches('0').trim_end_matches('.');
    if text == "-0" {
        "0".to_string()
    } else {
        text.to_string()
    }
}

/// Splits `text` at spaces into lines of at most about `width` characters.
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    for word in text.split(' ') {
        match lines.last_mut() {
            Some(line) if line.chars().count() + 1 + word.chars().count() <= width => {
                line.push(' ');
                line.push_str(word);
            }
            _ => lines.push(word.to_string()),
        }
    }
    lines
}

/// One thin vertical line per kept event: solid for raised, dashed for
/// cleared, dotted for acknowledged, in the rule's colour.
fn draw_event_lines<DB: DrawingBackend>(
    chart: &mut ChartContext<'_, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>,
    data: &ChartData,
    y0: f64,
    y1: f64,
) -> DrawResult<DB> {
    for (i, marks) in data.events.iter().enumerate() {
        let colour = palette::RULES.get(i).copied().unwrap_or(palette::MUTED);
        for &(t, kind) in &marks.kept {
            let points = [(t, y0), (t, y1)];
            match kind {
                EventKind::Raised => {
                    chart.draw_series(std::iter::once(PathElement::new(
                        points.to_vec(),
                        colour.stroke_width(2),
                    )))?;
                }
                EventKind::Cleared => {
                    chart.draw_series(std::iter::once(DashedPathElement::new(
                        points,
                        8,
                        5,
                        colour.stroke_width(2),
                    )))?;
                }
                _ => {
                    chart.draw_series(std::iter::once(DashedPathElement::new(
                        points,
                        2,
                        4,
                        colour.stroke_width(2),
                    )))?;
                }
            }
        }
    }
    Ok(())
}

/// A rule's events as words for the legend: their times when few, else counts.
fn event_words(rule: RuleId, marks: &Marks) -> String {
    const NAMES: [&str; 3] = ["raised", "cleared", "acknowledged"];
    if marks.total() <= 3 && marks.kept.len() as u64 == marks.total() {
        let times: Vec<String> = marks
            .kept
            .iter()
            .map(|&(t, kind)| format!("{} {t:.1} s", NAMES[kind_index(kind)]))
            .collect();
        format!("{}: {}", rule.as_str(), times.join(", "))
    } else {
        let counts: Vec<String> = marks
            .counts
            .iter()
            .zip(NAMES)
            .filter(|(n, _)| **n > 0)
            .map(|(n, name)| format!("{n} {name}"))
            .collect();
        format!("{}: {}", rule.as_str(), counts.join(", "))
    }
}

fn draw_footer<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    data: &ChartData,
) -> DrawResult<DB> {
    let (width, _) = area.dim_in_pixel();
    let text = font(15.0);
    let muted = font(15.0).color(&palette::MUTED);
    let x0 = 24;
    let mut y = 6;
    area.draw_text(
        "alarm events, drawn as vertical lines: solid = raised, dashed = cleared, dotted = acknowledged",
        &muted,
        (x0, y),
    )?;
    y += 22;
    let mut x = x0;
    let mut any = false;
    for (rule, marks) in RuleId::ALL.iter().zip(&data.events) {
        if marks.total() == 0 {
            continue;
        }
        any = true;
        let words = event_words(*rule, marks);
        let (w, _) = area.estimate_text_size(&words, &text)?;
        let item_w = 34 + w as i32 + 28;
        if x > x0 && x + item_w > width as i32 - 12 {
            x = x0;
            y += 20;
        }
        let colour = palette::RULES
            .get(rule.index())
            .copied()
            .unwrap_or(palette::MUTED);
        area.draw(&PathElement::new(
            vec![(x + 4, y + 8), (x + 26, y + 8)],
            colour.stroke_width(3),
        ))?;
        area.draw_text(&words, &text, (x + 34, y))?;
        x += item_w;
    }
    if !any {
        area.draw_text("no alarm events in this run", &text, (x0, y))?;
    }
    let active: Vec<&str> = RuleId::ALL
        .iter()
        .filter(|r| data.alarms_seen & (1 << r.index()) != 0)
        .map(|r| r.as_str())
        .collect();
    if !active.is_empty() {
        y += 20;
        area.draw_text(
            &format!("alarms active at some time: {}", active.join(", ")),
            &muted,
            (x0, y),
        )?;
    }
    let caution = "heatbound's alarms are monitoring aids, not a safety interlock: keep hardwired \
cut-outs, relief devices and guards in place.";
    let (_, h) = area.dim_in_pixel();
    area.draw_text(
        caution,
        &font(15.0).color(&palette::HOT),
        (x0, h as i32 - 24),
    )?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn min_max_buckets_keep_the_extremes_and_bound_the_points() {
        // 864,000 summaries (ten days at one a second) with one spike up and
        // one down in the middle of long flat stretches.
        let mut d = MinMax::new(MAX_BUCKETS);
        let n = 864_000u32;
        for i in 0..n {
            let v = match i {
                400_001 => 50.0,
                600_003 => -7.0,
                _ => (f64::from(i) * 0.001).sin(),
            };
            d.push(f64::from(i), Some(v));
        }
        let points: usize = d.line().iter().map(Vec::len).sum();
        assert!(points <= 2 * MAX_BUCKETS, "{points} points");
        assert!(
            points > MAX_BUCKETS / 2,
            "{points} points: too few to show the run"
        );
        let all: Vec<(f64, f64)> = d.line().concat();
        assert!(
            all.contains(&(400_001.0, 50.0)),
            "the upward spike was lost"
        );
        assert!(
            all.contains(&(600_003.0, -7.0)),
            "the downward spike was lost"
        );
        assert_eq!(d.extent(), Some((-7.0, 50.0)));
        // In time order, first and last summary kept.
        assert!(all.windows(2).all(|w| w[0].0 < w[1].0));
        assert_eq!(all.first().map(|p| p.0), Some(0.0));
        assert_eq!(all.last().map(|p| p.0), Some(f64::from(n - 1)));
    }

    #[test]
    fn a_short_series_is_drawn_point_for_point() {
        let mut d = MinMax::new(MAX_BUCKETS);
        let values = [1.0, 3.0, 2.0, 5.0];
        for (i, v) in values.iter().enumerate() {
            d.push(i as f64, Some(*v));
        }
        assert_eq!(
            d.line(),
            vec![vec![(0.0, 1.0), (1.0, 3.0), (2.0, 2.0), (3.0, 5.0)]]
        );
    }

    #[test]
    fn missing_and_non_finite_values_break_the_line_and_never_reach_it() {
        let mut d = MinMax::new(16);
        d.push(0.0, Some(1.0));
        d.push(1.0, Some(2.0));
        d.push(2.0, None);
        d.push(3.0, Some(f64::NAN));
        d.push(4.0, Some(f64::INFINITY));
        d.push(5.0, Some(4.0));
        d.push(6.0, Some(5.0));
        let line = d.line();
        assert_eq!(
            line,
            vec![vec![(0.0, 1.0), (1.0, 2.0)], vec![(5.0, 4.0), (6.0, 5.0)]]
        );
        assert!(
            line.concat()
                .iter()
                .all(|(t, v)| t.is_finite() && v.is_finite())
        );
        assert_eq!(d.extent(), Some((1.0, 5.0)));
        let mut empty = MinMax::new(16);
        empty.push(0.0, None);
        assert!(empty.line().is_empty());
        assert_eq!(empty.extent(), None);
    }

    #[test]
    fn a_band_keeps_its_envelope_and_is_bounded() {
        let mut d = MinMax::new(100);
        for i in 0..10_000 {
            let x = f64::from(i);
            let half = if i == 5_000 { 9.0 } else { 0.5 };
            d.push_range(x, Some((1.0 - half, 1.0 + half)));
        }
        let band = d.band();
        let points: usize = band.iter().map(Vec::len).sum();
        assert!(points <= 200, "{points}");
        let all = band.concat();
        assert!(all.iter().any(|&(_, lo, hi)| lo == -8.0 && hi == 10.0));
        assert_eq!(d.extent(), Some((-8.0, 10.0)));
    }

    #[test]
    fn the_clock_runs_through_the_u32_wrap() {
        let mut clock = RigClock::default();
        let start = u32::MAX - 1_499; // 1.5 s before the roll-over
        let t: Vec<f64> = (0..5u32)
            .map(|i| clock.advance(start.wrapping_add(i * 1000)))
            .collect();
        let t0 = f64::from(start) / 1000.0;
        for (i, ti) in t.iter().enumerate() {
            assert!((ti - (t0 + i as f64)).abs() < 1e-6, "{t:?}");
        }
        // An event between the last two summaries, sent after the last.
        let e = clock.place(start.wrapping_add(3500));
        assert!((e - (t0 + 3.5)).abs() < 1e-6, "{e}");
        // Placing an event does not move the clock.
        let next = clock.advance(start.wrapping_add(5000));
        assert!((next - (t0 + 5.0)).abs() < 1e-6, "{next}");
    }

    #[test]
    fn a_restart_does_not_run_the_clock_backwards() {
        let mut clock = RigClock::default();
        assert_eq!(clock.advance(100_000), 100.0);
        assert_eq!(clock.advance(101_000), 101.0);
        // The controller restarted: its clock is back near zero.
        assert_eq!(clock.advance(1_000), 101.0);
        assert_eq!(clock.advance(2_000), 102.0);
    }

    #[test]
    fn an_event_before_any_summary_sets_the_origin() {
        let mut clock = RigClock::default();
        assert_eq!(clock.place(4_000), 4.0);
        assert_eq!(clock.advance(5_000), 5.0);
    }

    #[test]
    fn alarm_spans_are_exact_when_few_and_bounded_when_many() {
        let mut s = Spans::new(MAX_SPANS);
        for (t, on) in [
            (0.0, false),
            (1.0, true),
            (2.0, true),
            (3.0, false),
            (4.0, true),
        ] {
            s.push(t, on);
        }
        assert_eq!(s.all(), vec![(1.0, 3.0), (4.0, 4.0)]);

        // A flapping alarm: on and off every other summary for ten days.
        let mut s = Spans::new(64);
        for i in 0..864_000u32 {
            s.push(f64::from(i), i % 2 == 0);
        }
        let all = s.all();
        assert!(all.len() <= 64, "{}", all.len());
        assert_eq!(all.first().map(|s| s.0), Some(0.0));
        assert!(all.last().is_some_and(|s| s.1 >= 863_998.0));
        assert!(all.windows(2).all(|w| w[0].1 <= w[1].0));
    }

    #[test]
    fn event_marks_count_everything_and_keep_a_bounded_few() {
        let mut m = Marks::default();
        for i in 0..10_000u32 {
            let kind = if i % 2 == 0 {
                EventKind::Raised
            } else {
                EventKind::Cleared
            };
            m.push(f64::from(i), kind);
        }
        assert_eq!(m.counts, [5_000, 5_000, 0]);
        assert!(m.kept.len() < MAX_MARKS_PER_RULE);
        assert!(m.kept.len() > MAX_MARKS_PER_RULE / 4);
        assert_eq!(
            event_words(RuleId::BeyondCarnot, &m),
            "beyond_carnot: 5000 raised, 5000 cleared"
        );
        let mut few = Marks::default();
        few.push(500.4, EventKind::Raised);
        assert_eq!(
            event_words(RuleId::BeyondCarnot, &few),
            "beyond_carnot: raised 500.4 s"
        );
    }

    #[test]
    fn bands_skip_missing_and_non_finite_uncertainties() {
        let (lo, hi) = band(Some(0.5), Some(0.01), 2.0).unwrap_or((f64::NAN, f64::NAN));
        assert!(
            (lo - 0.48).abs() < 1e-7 && (hi - 0.52).abs() < 1e-7,
            "{lo} {hi}"
        );
        // A negative uncertainty (never sent, but not trusted) widens the same way.
        assert_eq!(band(Some(0.5), Some(-0.25), 2.0), Some((0.0, 1.0)));
        assert_eq!(band(Some(0.5), None, 2.0), None);
        assert_eq!(band(None, Some(0.01), 2.0), None);
        assert_eq!(band(Some(f32::NAN), Some(0.01), 2.0), None);
        assert_eq!(band(Some(0.5), Some(f32::INFINITY), 2.0), None);
    }

    #[test]
    fn the_output_format_comes_from_the_extension() {
        assert_eq!(Format::of(Path::new("a.png")).ok(), Some(Format::Png));
        assert_eq!(Format::of(Path::new("dir/a.SVG")).ok(), Some(Format::Svg));
        for bad in ["a.jpg", "a", "a.png.txt"] {
            let err = Format::of(Path::new(bad)).err().map(|e| e.to_string());
            assert!(
                err.as_deref()
                    .is_some_and(|e| e.starts_with(&format!("{bad}: --out: "))),
                "{bad}: {err:?}"
            );
        }
        assert_eq!(
            default_out(Path::new("logs/heatbound-demo.sqlite")),
            PathBuf::from("logs/heatbound-demo.png")
        );
    }

    #[test]
    fn tick_labels_are_short() {
        assert_eq!(tick(&0.300_000_000_000_000_04), "0.3");
        assert_eq!(tick(&50.0), "50");
        assert_eq!(tick(&-0.0), "0");
        assert_eq!(tick(&-0.000_000_1), "0");
        assert_eq!(tick(&0.05), "0.05");
        assert_eq!(tick(&864_000.0), "864000");
    }

    #[test]
    fn value_ranges_are_never_empty_or_non_finite() {
        assert_eq!(padded_y(0.0, 1.0), -0.06..1.06);
        let flat = padded_y(300.0, 300.0);
        assert!(flat.start < 300.0 && flat.end > 300.0);
        let zero = padded_y(0.0, 0.0);
        assert!(zero.start < 0.0 && zero.end > 0.0);
        let huge = padded_y(-f64::MAX, f64::MAX);
        assert!(huge.start.is_finite() && huge.end.is_finite() && huge.end > huge.start);
        assert_eq!(padded_x(5.0, 5.0), 4.5..5.5);
    }
}
