//! The chart renderer: one run of a log as a picture (PNG or SVG), four
//! panels over a shared time axis. It sits at the end of the host's data
//! flow, after the log ([`crate::store`]); `heatbound chart` and
//! `heatbound demo` call [`write_chart_with`] and [`write_chart`].
//!
//! ```text
//! LOG.sqlite --store::Log::outages, ::frames (paged)--> Hello / Summary / Event
//!   --> Timeline: the device clock (u32 ms, wrap-safe, sessions joined after
//!       restarts) or the host's clock (UTC); breaks: outages, restarts, new runs, gaps
//!   --> MinMax decimators (cut at every break), alarm Spans, event Marks, break Markers
//!   --> plotters (bitmap or SVG backend, vendored DejaVu Sans via ab_glyph) --> PATH
//! ```
//!
//! The panels: the figure of merit (η, or COP in reverse modes) with its
//! Carnot bound, each with a ±k·u band; the entropy generation rate Ṡ_gen
//! with its band and the zero line of the second law; the heat-weighted hot-
//! and cold-side mean temperatures and the T0 the device used; the mean
//! powers of each window (Q_in, W and Q_out over its duration). Time spans
//! where a second-law alarm is active are shaded, and every alarm event is a
//! thin vertical line, set a few pixels beside another that would hide it.
//!
//! The record is never drawn more continuous than it is. A link outage (the
//! log's `outages`), a controller restart (the summary sequence going back, a
//! Hello from a new boot session, the device clock going back), a run started
//! on command (the Hello's run counter changing) and summaries missing from
//! the sequence each break every line; the first three are marked on the time
//! axis. On the device clock, the session after a restart is placed after
//! the one before it, as far on as the host's clock says the controller was
//! away; the legend gives every alarm's time as the device sent it, as
//! `heatbound watch` printed it, with its session when there are several.
//!
//! Memory is bounded by what is drawn, not by the run: every series goes
//! through a [`MinMax`] decimator of at most [`MAX_BUCKETS`] buckets (the
//! least and greatest value of each, so a one-summary spike stays visible),
//! alarm spans are coalesced past [`MAX_SPANS`], and event lines and break
//! marks are thinned past [`MAX_MARKS_PER_RULE`] and [`MAX_MARKERS`] (their
//! counts stay exact). No missing or non-finite value reaches the drawing: a
//! missing value breaks the line instead.
//!
//! The bitmap backend sets each glyph at its pen position without the
//! glyph's left side bearing (plotters 0.3.7, `FontDataInternal::draw` with
//! ab_glyph), which opened gaps inside words ("firm ware"); text is set here
//! glyph by glyph where ab_glyph's metrics put each glyph instead. The SVG
//! keeps its text as text.
use std::collections::BTreeSet;
use std::fs::File;
use std::io::IsTerminal as _;
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use crate::store::{Log, OutageRow, RunId, StoreError, Stored};
use heatbound::alarm::{EventKind, RuleId};
use heatbound::config::Mode;
use heatbound::wire::{EventFrame, Frame, Hello, Link, LinkTracker, Summary};
use plotters::coord::Shift;
use plotters::coord::ranged1d::BoldPoints;
use plotters::coord::types::RangedCoordf64;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::FontStyle;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// The picture's size, pixels (the SVG's too).
pub const SIZE_PX: (u32, u32) = (1400, 1000);

/// At most this many buckets per series, so at most twice as many points drawn.
pub const MAX_BUCKETS: usize = 2000;

/// At most this many shaded alarm spans; closer ones are joined past it.
pub const MAX_SPANS: usize = 2000;

/// At most this many event lines drawn per rule; every event is still counted.
pub const MAX_MARKS_PER_RULE: usize = 500;

/// At most this many outage, restart and new-run marks drawn; every one is
/// still counted.
pub const MAX_MARKERS: usize = 500;

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

/// An event more than this (ms) before the latest summary's device time is
/// from a clock that started again: the controller restarted. Events go out
/// as they happen, never behind the summary sent before them; a minute
/// leaves room for a log that holds them a little late.
const EVENT_BACK_MS: i32 = 60_000;

/// The vendored font (`host-tools/assets/DejaVuSans.ttf`, licence beside it);
/// the report embeds it too, so its page and its chart share one font.
pub(crate) static FONT_TTF: &[u8] = include_bytes!("../assets/DejaVuSans.ttf");

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
    /// The output path holds a file that `chart` did not draw.
    #[error(
        "{path}: --out: the file exists and is not a chart heatbound drew; choose another name, or move it away first"
    )]
    NotOurs {
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

/// The clock of the time axis.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Clock {
    /// The device's sample time (`t_ms`, as `heatbound watch` prints it),
    /// in seconds, minutes, hours or days by the run's length; sessions
    /// after a controller restart are placed after the one before.
    #[default]
    Device,
    /// The host's receive time (`host_ms`), as UTC date and time.
    Wall,
}

/// What [`write_chart_with`] draws.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct ChartOptions {
    /// The run (default: the latest that has summaries).
    pub run: Option<RunId>,
    /// The clock of the time axis.
    pub clock: Clock,
}

/// Counts of what broke a run's record.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Breaks {
    /// Link outages (rows of the log's `outages`).
    pub outages: u64,
    /// Controller restarts.
    pub restarts: u64,
    /// Runs started on command (the Hello's run counter changed).
    pub new_runs: u64,
    /// Times the device clock went back with no restart seen.
    pub clock_back: u64,
    /// Gaps in the summary sequence.
    pub gaps: u64,
    /// Summaries missing in those gaps.
    pub missing: u64,
}

impl Breaks {
    /// The non-zero counts in words: `["1 outage", "2 restarts"]`.
    fn words(&self) -> Vec<String> {
        let mut out = Vec::new();
        for (n, one, many) in [
            (self.outages, "outage", "outages"),
            (self.restarts, "restart", "restarts"),
            (self.new_runs, "new run", "new runs"),
            (
                self.clock_back,
                "device clock going back",
                "device clock goings back",
            ),
            (self.gaps, "gap", "gaps"),
        ] {
            if n > 0 {
                out.push(format!("{n} {}", if n == 1 { one } else { many }));
            }
        }
        out
    }
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
    /// Time of the first and last summary on the device clock's axis,
    /// seconds (the device's own while no restart intervened).
    pub t_s: (f64, f64),
    /// What broke the record.
    pub breaks: Breaks,
}

impl Drawn {
    /// The one-line report: `chart: PATH (run R, S summaries, t = A–B s)`,
    /// with the breaks after a semicolon when there are any.
    pub fn line(&self) -> String {
        let breaks = self.breaks.words();
        format!(
            "chart: {} (run {}, {} summaries, t = {:.1}–{:.1} s{})",
            self.out.display(),
            self.run,
            self.summaries,
            self.t_s.0,
            self.t_s.1,
            if breaks.is_empty() {
                String::new()
            } else {
                format!("; {}", breaks.join(", "))
            }
        )
    }
}

/// Draws run `run` (default: the latest with summaries) of the log at `log`
/// into `out`, PNG or SVG by its extension, against the device clock: as
/// [`write_chart_with`] with [`Clock::Device`].
pub fn write_chart(log: &Path, run: Option<RunId>, out: &Path) -> Result<Drawn, ChartError> {
    write_chart_with(
        log,
        &ChartOptions {
            run,
            clock: Clock::Device,
        },
        out,
    )
}

/// Draws the run `options.run` names (default: the latest with summaries)
/// of the log at `log` into `out`, PNG or SVG by its extension, against the
/// clock `options.clock`. Shows a progress bar on a terminal for long runs.
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound::wire::{Frame, Hello, RigId, Summary};
/// use heatbound_host::chart::{ChartOptions, Clock, write_chart_with};
/// use heatbound_host::store::Log;
///
/// let dir = tempfile::tempdir().expect("a temporary directory");
/// let path = dir.path().join("log.sqlite");
/// let mut log = Log::open(&path).expect("a new log");
/// let t0 = 1_700_000_000_000; // host time, Unix ms
/// let run = log.begin_run("file:capture.bin", t0).expect("a run");
/// let rig = RigId::new("bench-1").expect("a rig id");
/// let hello = Hello::from_config(rig, (1, 0, 0), 100, &RigConfig::default());
/// log.insert_frame(run, t0, &Frame::Hello(hello)).expect("logged");
/// for seq in 0..3u16 {
///     let t_ms = 1000 * (u32::from(seq) + 1);
///     // η = W/Q_in = 0.3.
///     let s = Summary { seq, t_ms, duration_s: 1.0, heat_in_j: 1000.0, work_j: 300.0,
///                       entropy_in_j_per_k: 1000.0 / 600.0, ..Summary::default() };
///     log.insert_frame(run, t0 + i64::from(t_ms), &Frame::Summary(s)).expect("logged");
/// }
/// log.end_run(run, t0 + 4000).expect("closed");
/// drop(log);
///
/// let out = dir.path().join("chart.svg");
/// let options = ChartOptions { run: None, clock: Clock::Wall };
/// let drawn = write_chart_with(&path, &options, &out).expect("drawn");
/// assert_eq!(drawn.summaries, 3);
/// assert!(std::fs::read_to_string(&out).expect("the SVG").contains("UTC"));
/// ```
pub fn write_chart_with(
    log: &Path,
    options: &ChartOptions,
    out: &Path,
) -> Result<Drawn, ChartError> {
    let format = Format::of(out)?;
    if same_file(log, out) {
        return Err(ChartError::OverwritesLog {
            path: out.to_path_buf(),
        });
    }
    check_out(out)?;
    let (data, run, t_s) = load(log, options)?;
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
        run,
        summaries: data.summaries,
        t_s,
        breaks: data.timeline.breaks,
    })
}

/// A chart drawn as SVG text, for a page that embeds it (`heatbound report`).
#[derive(Clone, Debug, PartialEq)]
pub struct SvgChart {
    /// The SVG document, [`SIZE_PX`] with a `viewBox`; its text is text,
    /// in the font family `sans-serif`.
    pub svg: String,
    /// The run drawn.
    pub run: RunId,
    /// Summaries read.
    pub summaries: u64,
    /// Time of the first and last summary on the device clock's axis, s.
    pub t_s: (f64, f64),
    /// What broke the record.
    pub breaks: Breaks,
}

/// Draws the run `options.run` names (default: the latest with summaries)
/// of the log at `log` as SVG text, exactly as [`write_chart_with`] draws
/// an `.svg` file, without writing anything.
///
/// ```
/// use heatbound::wire::{Frame, Summary};
/// use heatbound_host::chart::{ChartOptions, svg_chart};
/// use heatbound_host::store::Log;
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("log.sqlite");
/// let mut log = Log::open(&path).unwrap();
/// let run = log.begin_run("file:capture.bin", 1_700_000_000_000).unwrap();
/// for seq in 0..3u16 {
///     let s = Summary { seq, t_ms: 1000 * (u32::from(seq) + 1), duration_s: 1.0,
///                       heat_in_j: 1000.0, work_j: 300.0, ..Summary::default() };
///     log.insert_frame(run, 1_700_000_000_000 + i64::from(seq), &Frame::Summary(s)).unwrap();
/// }
/// log.end_run(run, 1_700_000_004_000).unwrap();
/// drop(log);
/// let chart = svg_chart(&path, &ChartOptions::default()).unwrap();
/// assert!(chart.svg.starts_with("<svg") && chart.summaries == 3);
/// ```
pub fn svg_chart(log: &Path, options: &ChartOptions) -> Result<SvgChart, ChartError> {
    let (data, run, t_s) = load(log, options)?;
    register_font()?;
    let mut text = String::new();
    {
        let root = SVGBackend::with_string(&mut text, SIZE_PX).into_drawing_area();
        let draw_err = |e: &dyn std::fmt::Display| ChartError::Draw {
            path: log.to_path_buf(),
            reason: e.to_string(),
        };
        draw(&root, &data, Ink { glyphs: None }).map_err(|e| draw_err(&e))?;
        root.present().map_err(|e| draw_err(&e))?;
    }
    Ok(SvgChart {
        svg: text,
        run,
        summaries: data.summaries,
        t_s,
        breaks: data.timeline.breaks,
    })
}

/// Reads the run `options` names from the log at `log`: the chart's data,
/// the run, and its span on the device clock's axis.
fn load(log: &Path, options: &ChartOptions) -> Result<(ChartData, RunId, (f64, f64)), ChartError> {
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
    let info = match options.run {
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
    let mut data = ChartData::new(info.id, options.clock, store.outages(info.id)?);
    let mut frames = 0u64;
    let read = (|| {
        for stored in store.frames(info.id)? {
            data.push(&stored?);
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
    data.finish();
    let Some(t_s) = data.device_span_s() else {
        return Err(ChartError::NoSummaries {
            path: log.to_path_buf(),
            run: info.id,
        });
    };
    Ok((data, info.id, t_s))
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
            // Glyph by glyph: the bitmap backend drops each glyph's bearing.
            let ink = Ink {
                glyphs: glyphs::metrics(),
            };
            draw(&root, data, ink).map_err(|e| draw_err(e.to_string()))?;
            root.present().map_err(|e| draw_err(e.to_string()))?;
            drop(root);
            let png = std::fs::read(path).map_err(write_err)?;
            let marked = marked_png(&png)
                .ok_or_else(|| draw_err("the encoder wrote no PNG header".into()))?;
            std::fs::write(path, marked).map_err(write_err)?;
        }
        Format::Svg => {
            let mut text = String::new();
            {
                let root = SVGBackend::with_string(&mut text, SIZE_PX).into_drawing_area();
                draw(&root, data, Ink { glyphs: None }).map_err(|e| draw_err(e.to_string()))?;
                root.present().map_err(|e| draw_err(e.to_string()))?;
            }
            std::fs::write(path, format!("<!-- {MARK} -->\n{text}")).map_err(write_err)?;
        }
    }
    Ok(())
}

/// What marks a picture as drawn here: the text of a PNG `tEXt` chunk
/// (keyword `Software`) right after the header, and an SVG's first line.
const MARK: &str = "heatbound chart";

/// The PNG signature (ISO/IEC 15948 §5.2).
const PNG_SIGNATURE: [u8; 8] = [0x89, b'P', b'N', b'G', 0x0d, 0x0a, 0x1a, 0x0a];

/// Where the chunk after the header starts: signature, then the IHDR chunk
/// (length, type, 13 bytes of data, CRC).
const AFTER_IHDR: usize = 8 + 4 + 4 + 13 + 4;

/// The `tEXt` chunk's data: keyword, a NUL, the text (ISO/IEC 15948 §11.3.4.3).
fn mark_text() -> Vec<u8> {
    let mut data = b"Software\0".to_vec();
    data.extend_from_slice(MARK.as_bytes());
    data
}

/// Refuses to replace a file `chart` did not draw: only a missing file, an
/// empty one, or a picture that carries the mark `chart` leaves in every
/// picture it draws may be written over. [`write_chart_with`] checks this
/// itself; a caller that draws at the end of a long job checks first.
pub fn check_out(out: &Path) -> Result<(), ChartError> {
    use std::io::Read as _;
    let not_ours = || ChartError::NotOurs {
        path: out.to_path_buf(),
    };
    let mut file = match File::open(out) {
        Ok(f) => f,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(()),
        Err(source) => {
            return Err(ChartError::Write {
                path: out.to_path_buf(),
                source,
            });
        }
    };
    if file.metadata().is_ok_and(|m| m.is_dir()) {
        return Err(not_ours());
    }
    let mut head = Vec::with_capacity(128);
    if file.by_ref().take(128).read_to_end(&mut head).is_err() {
        return Err(not_ours());
    }
    let mark = mark_text();
    let png_ours = head.starts_with(&PNG_SIGNATURE)
        && head.get(AFTER_IHDR + 4..AFTER_IHDR + 8) == Some(b"tEXt".as_slice())
        && head
            .get(AFTER_IHDR + 8..)
            .is_some_and(|d| d.starts_with(&mark));
    let svg_ours = head.starts_with(format!("<!-- {MARK}").as_bytes());
    if head.is_empty() || png_ours || svg_ours {
        Ok(())
    } else {
        Err(not_ours())
    }
}

/// The PNG `png` with the [`MARK`] chunk put right after its header;
/// `None` if it does not start with a PNG header.
fn marked_png(png: &[u8]) -> Option<Vec<u8>> {
    if !png.starts_with(&PNG_SIGNATURE) || png.get(12..16) != Some(b"IHDR".as_slice()) {
        return None;
    }
    let data = mark_text();
    let mut chunk = Vec::with_capacity(data.len() + 12);
    chunk.extend_from_slice(&u32::try_from(data.len()).ok()?.to_be_bytes());
    chunk.extend_from_slice(b"tEXt");
    chunk.extend_from_slice(&data);
    // The CRC covers the type and the data (ISO/IEC 15948 §5.3).
    let crc = crc32fast::hash(chunk.get(4..)?);
    chunk.extend_from_slice(&crc.to_be_bytes());
    let mut out = Vec::with_capacity(png.len() + chunk.len());
    out.extend_from_slice(png.get(..AFTER_IHDR)?);
    out.extend_from_slice(&chunk);
    out.extend_from_slice(png.get(AFTER_IHDR..)?);
    Some(out)
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
// Text

/// Horizontal metrics of the built-in font, to set text glyph by glyph on
/// the bitmap backend.
///
/// plotters 0.3.7 draws each glyph's outline starting at the pen position,
/// dropping the left side bearing that ab_glyph's pixel bounds begin at, so
/// a glyph with a wide bearing (`m`, `n`, `i`, `r`: 2 px at 27 px) sits too
/// far left of one with a narrow one (`w`, `f`: 0–1 px), and a word falls
/// apart ("firm ware"). [`Metrics::layout`] gives each glyph's ink position
/// as ab_glyph sets it (advance, kerning, the outline's left edge, scaled
/// by the pixel height of ascender − descender); the caller draws every
/// glyph on its own there.
mod glyphs {
    use std::sync::OnceLock;

    use ab_glyph::{Font, FontRef, GlyphId};

    /// One glyph of a line of text as set.
    #[derive(Clone, Copy, Debug, PartialEq)]
    pub(super) struct Set {
        /// The character.
        pub c: char,
        /// The pixel column, from the line's start, where its bitmap goes
        /// (its outline's pixel bounds as ab_glyph rasterises it at the
        /// origin, moved to its pen position); `None` for a glyph with no
        /// outline (a space).
        pub ink_x: Option<i32>,
    }

    /// The metrics of one font.
    pub(super) struct Metrics {
        font: FontRef<'static>,
    }

    /// The built-in font's metrics, read once; `None` if the font does not
    /// parse (then text is drawn whole).
    pub(super) fn metrics() -> Option<&'static Metrics> {
        static METRICS: OnceLock<Option<Metrics>> = OnceLock::new();
        METRICS
            .get_or_init(|| {
                FontRef::try_from_slice(super::FONT_TTF)
                    .ok()
                    .filter(|f| f.height_unscaled() > 0.0)
                    .map(|font| Metrics { font })
            })
            .as_ref()
    }

    impl Metrics {
        /// The glyph of `c` (0, the missing glyph, if none).
        pub(super) fn glyph(&self, c: char) -> u16 {
            self.font.glyph_id(c).0
        }

        /// The advance width of glyph `g`, font units.
        pub(super) fn advance(&self, g: u16) -> f64 {
            f64::from(self.font.h_advance_unscaled(GlyphId(g)))
        }

        /// The left edge of glyph `g`'s outline (xMin), font units; `None`
        /// for a glyph without one.
        pub(super) fn x_min(&self, g: u16) -> Option<i16> {
            self.font
                .outline(GlyphId(g))
                .map(|o| o.bounds.min.x.round() as i16)
        }

        /// The kerning between glyphs `a` and `b`, font units.
        pub(super) fn kern(&self, a: u16, b: u16) -> i16 {
            self.font.kern_unscaled(GlyphId(a), GlyphId(b)).round() as i16
        }

        /// Pixels per font unit at `size_px` (ab_glyph's scale).
        pub(super) fn scale(&self, size_px: f64) -> f64 {
            size_px / f64::from(self.font.height_unscaled())
        }

        /// `text` set at `size_px`: each glyph where ab_glyph would put its
        /// ink (pen position plus left side bearing, with kerning), and the
        /// line's advance width, pixels.
        pub(super) fn layout(&self, text: &str, size_px: f64) -> (Vec<Set>, f64) {
            let s = self.scale(size_px);
            let mut pen = 0.0;
            let mut prev = None;
            let mut out = Vec::with_capacity(text.len());
            for c in text.chars() {
                let g = self.glyph(c);
                if let Some(p) = prev {
                    pen += f64::from(self.kern(p, g)) * s;
                }
                // ab_glyph rasterises the outline into pixel bounds that
                // begin at floor(xMin·s), the fraction inside the first
                // column: the bitmap goes at the pen, rounded, plus that floor.
                let ink_x = self
                    .x_min(g)
                    .map(|x| pen.round() as i32 + (f64::from(x) * s).floor() as i32);
                out.push(Set { c, ink_x });
                pen += self.advance(g) * s;
                prev = Some(g);
            }
            (out, pen)
        }
    }
}

/// How text is set: whole, as the backend sets it (the SVG keeps text as
/// text), or glyph by glyph with the font's metrics (the bitmap).
#[derive(Clone, Copy)]
struct Ink {
    glyphs: Option<&'static glyphs::Metrics>,
}

/// The width of `text` at `size_px`, pixels (as plotters estimates it).
fn text_width(text: &str, size_px: f64) -> f64 {
    match glyphs::metrics() {
        Some(m) => m.layout(text, size_px).1,
        None => text.chars().count() as f64 * size_px * 0.55,
    }
}

/// Draws `text` on `area` at `pos` with `anchor`; `vertical` turns it to read
/// upwards (an axis title beside the axis).
fn put<DB: DrawingBackend>(
    ink: Ink,
    area: &DrawingArea<DB, Shift>,
    text: &str,
    style: &TextStyle<'_>,
    pos: (i32, i32),
    anchor: (HPos, VPos),
    vertical: bool,
) -> DrawResult<DB> {
    let transform = if vertical {
        FontTransform::Rotate270
    } else {
        FontTransform::None
    };
    let Some(metrics) = ink.glyphs else {
        let style = style.pos(Pos::new(anchor.0, anchor.1)).transform(transform);
        return area.draw_text(text, &style, pos);
    };
    let size = style.font.get_size();
    let (set, width) = metrics.layout(text, size);
    // As the backend anchors a whole line (plotters_backend's draw_text).
    let width = width as i32;
    let height = (size / 1.24) as i32;
    let dx = match anchor.0 {
        HPos::Left => 0,
        HPos::Center => -width / 2,
        HPos::Right => -width,
    };
    let dy = match anchor.1 {
        VPos::Top => 0,
        VPos::Center => -height / 2,
        VPos::Bottom => -height,
    };
    let one = style
        .pos(Pos::new(HPos::Left, VPos::Top))
        .transform(transform);
    let mut buf = [0u8; 4];
    for glyph in set {
        let Some(x) = glyph.ink_x else {
            continue;
        };
        let along = x + dx;
        // Rotate270 maps a line's (x, y) to (y, -x).
        let (ox, oy) = if vertical { (dy, -along) } else { (along, dy) };
        area.draw_text(
            glyph.c.encode_utf8(&mut buf),
            &one,
            (pos.0 + ox, pos.1 + oy),
        )?;
    }
    Ok(())
}

// ---------------------------------------------------------------------------
// Time

/// What broke the record at a place on the time axis.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum BreakKind {
    /// The link was down.
    Outage,
    /// The controller restarted (a new boot session).
    Restart,
    /// A run started on command (the Hello's run counter changed).
    NewRun,
    /// The device clock went back with no other sign of a restart.
    ClockBack,
}

/// A mark on the time axis: from `x0` to `x1` (an outage), or at `x0`.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Marker {
    x0: f64,
    x1: f64,
    kind: BreakKind,
    /// An outage: how long the link was down, ms (`None`: it never came
    /// back). A restart: the session it began. A new run: the run counter.
    value: Option<i64>,
}

/// Every `stride`-th item of a stream, at most `cap`: the stride doubles
/// (and every other item kept goes) when `cap` is reached.
#[derive(Clone, Debug)]
struct Thinned<T> {
    cap: usize,
    stride: u64,
    seen: u64,
    kept: Vec<T>,
}

impl<T> Thinned<T> {
    fn new(cap: usize) -> Thinned<T> {
        Thinned {
            cap: cap.max(2),
            stride: 1,
            seen: 0,
            kept: Vec::new(),
        }
    }

    fn push(&mut self, item: T) {
        if self.seen.is_multiple_of(self.stride) {
            self.kept.push(item);
            if self.kept.len() >= self.cap {
                let mut i = 0usize;
                self.kept.retain(|_| {
                    i += 1;
                    i % 2 == 1
                });
                self.stride = self.stride.saturating_mul(2);
            }
        }
        self.seen += 1;
    }

    /// Whether every item pushed is kept.
    fn complete(&self) -> bool {
        self.kept.len() as u64 == self.seen
    }
}

/// Where and when a frame was placed: its time on the device clock's axis
/// and on the host's, s, and its host receive time, ms.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Placed {
    dev_x: f64,
    wall_x: f64,
    host_ms: i64,
}

/// One stretch of the device clock: a boot session, until it restarts.
#[derive(Clone, Copy, Debug)]
struct Segment {
    /// Device-axis time of its latest summary (or of the frame that opened
    /// it), s, and that frame's raw `t_ms`.
    x: f64,
    raw: u32,
}

/// Where a summary goes.
#[derive(Clone, Copy, Debug, PartialEq)]
struct SummaryAt {
    /// On the chart's axis, s (device axis or Unix time).
    x: f64,
    /// On the device clock's axis, s.
    dev_x: f64,
    /// The record broke since the summary before: start a new line.
    broken: bool,
}

/// Where an event goes.
#[derive(Clone, Copy, Debug, PartialEq)]
struct EventAt {
    x: f64,
    /// Its boot session, from 1.
    session: u32,
    /// Its place on the device clock's axis is not its device time (a later
    /// session, or past a wrap of the clock).
    shifted: bool,
}

/// Places frames on the time axis in receive order, and finds where the
/// record breaks: outages, restarts, new runs, sequence gaps.
///
/// On the device clock, the first session is the device's time
/// (`t_ms / 1000`, unwrapped through the 2^32 ms roll-over). A restart opens
/// a new session: its device time 0 (the controller's boot) is placed after
/// the latest frame before it by as much as the host's clock says passed
/// beyond the new session's own age (none when the host's times tell
/// nothing, as for a capture read from a file), so sessions never overlap
/// and a long absence shows as one. On the host's clock, every frame is at
/// its receive time.
struct Timeline {
    clock: Clock,
    link: LinkTracker,
    hello: Option<Hello>,
    seg: Option<Segment>,
    /// The latest frame placed (summary or event).
    last: Option<Placed>,
    last_summary: Option<Placed>,
    /// Boot sessions so far, from 1.
    session: u32,
    /// Times the device clock wrapped.
    wraps: u64,
    /// A Hello from a new boot session came: the next timed frame opens it.
    restart_pending: bool,
    /// A session was opened since the latest summary (its restart counted).
    opened_since_summary: bool,
    /// The next summary starts a new line.
    break_pending: bool,
    /// The run's outages by start, and the next one not yet placed.
    outages: Vec<OutageRow>,
    next_outage: usize,
    markers: Thinned<Marker>,
    breaks: Breaks,
}

fn ms_to_s(ms: i64) -> f64 {
    ms as f64 / 1000.0
}

impl Timeline {
    fn new(clock: Clock, mut outages: Vec<OutageRow>) -> Timeline {
        outages.sort_by_key(|o| (o.started_host_ms, o.id));
        Timeline {
            clock,
            link: LinkTracker::new(),
            hello: None,
            seg: None,
            last: None,
            last_summary: None,
            session: 1,
            wraps: 0,
            restart_pending: false,
            opened_since_summary: false,
            break_pending: false,
            outages,
            next_outage: 0,
            markers: Thinned::new(MAX_MARKERS),
            breaks: Breaks::default(),
        }
    }

    fn axis(&self, p: Placed) -> f64 {
        match self.clock {
            Clock::Device => p.dev_x,
            Clock::Wall => p.wall_x,
        }
    }

    /// Sessions were joined or the clock wrapped: the device axis is not
    /// the device's time everywhere.
    fn joined(&self) -> bool {
        self.session > 1 || self.breaks.clock_back > 0
    }

    fn hello(&mut self, h: &Hello) {
        self.link.observe(&Frame::Hello(*h));
        if let Some(prev) = self.hello {
            if h.session != prev.session {
                // A new boot: its clock starts again.
                self.restart_pending = true;
            } else if h.run != prev.run && !self.restart_pending {
                // A run started on command, at the window boundary after
                // the latest summary; the device clock runs on.
                self.breaks.new_runs += 1;
                self.break_pending = true;
                if let Some(p) = self.last_summary.or(self.last) {
                    let x = self.axis(p);
                    self.markers.push(Marker {
                        x0: x,
                        x1: x,
                        kind: BreakKind::NewRun,
                        value: Some(i64::from(h.run)),
                    });
                }
            }
        }
        self.hello = Some(*h);
    }

    /// Opens a session of the device clock at a frame of device time `t_ms`
    /// received at `host_ms` (`kind` `None`: the first); returns the frame's
    /// device-axis time.
    fn open(&mut self, kind: Option<BreakKind>, host_ms: i64, t_ms: u32) -> f64 {
        let t = f64::from(t_ms) / 1000.0;
        let dev_x = match (kind, self.last) {
            (Some(kind), Some(prev)) => {
                // The boot, after the frame before by the host's time beyond
                // the new session's own age.
                let away = ms_to_s(host_ms.saturating_sub(prev.host_ms));
                let lead = (away - t).max(0.0);
                let boot = Placed {
                    dev_x: prev.dev_x + lead,
                    wall_x: prev.wall_x + lead,
                    host_ms,
                };
                self.mark_boot(kind, self.axis(boot));
                boot.dev_x + t
            }
            (Some(kind), None) => {
                // Nothing placed before it: the boot is the axis's start.
                self.mark_boot(
                    kind,
                    match self.clock {
                        Clock::Device => t,
                        Clock::Wall => ms_to_s(host_ms),
                    },
                );
                t
            }
            (None, _) => t,
        };
        if kind.is_some() {
            self.opened_since_summary = true;
            self.break_pending = true;
        }
        self.seg = Some(Segment {
            x: dev_x,
            raw: t_ms,
        });
        dev_x
    }

    fn mark_boot(&mut self, kind: BreakKind, x: f64) {
        let value = match kind {
            BreakKind::Restart => {
                self.session = self.session.saturating_add(1);
                self.breaks.restarts += 1;
                Some(i64::from(self.session))
            }
            _ => {
                self.breaks.clock_back += 1;
                None
            }
        };
        self.markers.push(Marker {
            x0: x,
            x1: x,
            kind,
            value,
        });
    }

    fn summary(&mut self, host_ms: i64, s: &Summary) -> SummaryAt {
        let link = self.link.observe(&Frame::Summary(*s));
        if std::mem::take(&mut self.restart_pending) {
            self.open(Some(BreakKind::Restart), host_ms, s.t_ms);
        }
        match link {
            Link::Restart if !self.opened_since_summary => {
                self.open(Some(BreakKind::Restart), host_ms, s.t_ms);
            }
            Link::Gap { missing } => {
                self.breaks.gaps += 1;
                self.breaks.missing = self.breaks.missing.saturating_add(u64::from(missing));
                self.break_pending = true;
            }
            _ => {}
        }
        let dev_x = match self.seg {
            None => self.open(None, host_ms, s.t_ms),
            Some(seg) => {
                // The wrapping difference read as signed: back or forward.
                let d = s.t_ms.wrapping_sub(seg.raw) as i32;
                if d < 0 {
                    self.open(Some(BreakKind::ClockBack), host_ms, s.t_ms)
                } else {
                    if s.t_ms < seg.raw {
                        self.wraps += 1;
                    }
                    seg.x + f64::from(d) / 1000.0
                }
            }
        };
        let placed = Placed {
            dev_x,
            wall_x: ms_to_s(host_ms),
            host_ms,
        };
        if let Some(seg) = &mut self.seg {
            seg.x = dev_x;
            seg.raw = s.t_ms;
        }
        let x = self.axis(placed);
        self.outages_until(host_ms, x);
        let broken = std::mem::take(&mut self.break_pending) && self.last_summary.is_some();
        self.last_summary = Some(placed);
        self.last = Some(placed);
        self.opened_since_summary = false;
        SummaryAt { x, dev_x, broken }
    }

    fn event(&mut self, host_ms: i64, e: &EventFrame) -> EventAt {
        let t_ms = e.event.t_ms;
        if std::mem::take(&mut self.restart_pending) {
            self.open(Some(BreakKind::Restart), host_ms, t_ms);
        }
        let dev_x = match self.seg {
            None => self.open(None, host_ms, t_ms),
            Some(seg) => {
                let d = t_ms.wrapping_sub(seg.raw) as i32;
                if d < -EVENT_BACK_MS {
                    self.open(Some(BreakKind::Restart), host_ms, t_ms)
                } else {
                    // Events do not move the clock: they fall between summaries.
                    seg.x + f64::from(d) / 1000.0
                }
            }
        };
        // On the host's clock, where the host received it (as its summaries).
        let placed = Placed {
            dev_x,
            wall_x: ms_to_s(host_ms),
            host_ms,
        };
        self.last = Some(placed);
        EventAt {
            x: self.axis(placed),
            session: self.session,
            shifted: (dev_x - f64::from(t_ms) / 1000.0).abs() > 1e-6,
        }
    }

    /// Places the outages that began by `host_ms`, the receive time of a
    /// summary at `x`: each one breaks the line before it.
    fn outages_until(&mut self, host_ms: i64, x: f64) {
        while let Some(o) = self.outages.get(self.next_outage) {
            if o.started_host_ms > host_ms {
                break;
            }
            let (start, end) = (o.started_host_ms, o.ended_host_ms);
            self.next_outage += 1;
            self.breaks.outages += 1;
            self.break_pending = true;
            let (x0, x1) = match self.clock {
                Clock::Wall => {
                    let x0 = ms_to_s(start);
                    (x0, end.map_or(x, ms_to_s).max(x0))
                }
                Clock::Device => {
                    // Device time runs on through an outage: place it by the
                    // host's times against the summaries either side.
                    let x0 = match self.last_summary {
                        Some(p) => {
                            p.dev_x
                                + ms_to_s(start.saturating_sub(p.host_ms))
                                    .clamp(0.0, (x - p.dev_x).max(0.0))
                        }
                        None => x - ms_to_s(host_ms.saturating_sub(start)).max(0.0),
                    };
                    let x1 = match end {
                        Some(e) if e <= host_ms => {
                            x - ms_to_s(host_ms.saturating_sub(e)).clamp(0.0, (x - x0).max(0.0))
                        }
                        _ => x,
                    };
                    (x0, x1.max(x0))
                }
            };
            self.markers.push(Marker {
                x0,
                x1,
                kind: BreakKind::Outage,
                value: end.map(|e| e.saturating_sub(start)),
            });
        }
    }

    /// Places the outages after the last summary.
    fn finish(&mut self) {
        while let Some(o) = self.outages.get(self.next_outage) {
            let (start, end) = (o.started_host_ms, o.ended_host_ms);
            self.next_outage += 1;
            self.breaks.outages += 1;
            let x0 = match (self.clock, self.last_summary) {
                (Clock::Wall, _) => ms_to_s(start),
                (Clock::Device, Some(p)) => {
                    p.dev_x + ms_to_s(start.saturating_sub(p.host_ms)).max(0.0)
                }
                (Clock::Device, None) => continue,
            };
            let x1 = end.map_or(x0, |e| x0 + ms_to_s(e.saturating_sub(start)).max(0.0));
            self.markers.push(Marker {
                x0,
                x1,
                kind: BreakKind::Outage,
                value: end.map(|e| e.saturating_sub(start)),
            });
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
    /// The record broke just before this bucket (see [`MinMax::cut`]).
    hard_before: bool,
    /// The record broke inside this bucket (buckets merged across a cut):
    /// its extremes are drawn as points, joined to nothing.
    hard_inside: bool,
}

impl Bucket {
    fn new(t: f64, lo: f64, hi: f64, break_before: bool, hard_before: bool) -> Bucket {
        Bucket {
            first_t: t,
            last_t: t,
            lo: (t, lo),
            hi: (t, hi),
            break_before,
            hard_before,
            hard_inside: false,
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

    /// This bucket and the next as one; a missing value between them is
    /// bridged, a cut is kept as `hard_inside`.
    fn merge(mut self, next: &Bucket) -> Bucket {
        self.last_t = next.last_t;
        if next.lo.1 < self.lo.1 {
            self.lo = next.lo;
        }
        if next.hi.1 > self.hi.1 {
            self.hi = next.hi;
        }
        self.hard_inside |= next.hard_inside || next.hard_before;
        self
    }

    /// Its two extremes in time order (one if they coincide).
    fn extremes(&self) -> ((f64, f64), Option<(f64, f64)>) {
        let (first, second) = if self.lo.0 <= self.hi.0 {
            (self.lo, self.hi)
        } else {
            (self.hi, self.lo)
        };
        (first, (second != first).then_some(second))
    }
}

/// Neighbours merged pairwise; with `keep_cuts`, never across a cut.
fn merge_pairs(buckets: &[Bucket], keep_cuts: bool) -> Vec<Bucket> {
    let mut out = Vec::with_capacity(buckets.len() / 2 + 1);
    let mut i = 0;
    while let Some(a) = buckets.get(i) {
        match buckets.get(i + 1) {
            Some(b) if !(keep_cuts && b.hard_before) => {
                out.push(a.merge(b));
                i += 2;
            }
            _ => {
                out.push(*a);
                i += 1;
            }
        }
    }
    out
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
/// bucket by then). A break of the record ([`MinMax::cut`]: an outage, a
/// restart) is never bridged: buckets are not merged across it while the
/// cap allows, and a bucket merged across one anyway is drawn as its two
/// extremes, joined to nothing.
#[derive(Clone, Debug)]
pub struct MinMax {
    cap: usize,
    per_bucket: u64,
    /// Summaries counted into the current bucket slot.
    filled: u64,
    closed: Vec<Bucket>,
    open: Option<Bucket>,
    pending_break: bool,
    pending_cut: bool,
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
            pending_cut: false,
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
                        let cut = std::mem::take(&mut self.pending_cut);
                        let brk = std::mem::take(&mut self.pending_break) || cut;
                        self.open = Some(Bucket::new(t, lo, hi, brk, cut));
                    }
                }
            }
        }
    }

    /// The record breaks here (an outage, a restart, a new run, missing
    /// summaries): the line ends, and the next value starts a new one.
    pub fn cut(&mut self) {
        self.close();
        self.filled = 0;
        self.pending_cut = true;
    }

    fn close(&mut self) {
        let Some(b) = self.open.take() else {
            return;
        };
        self.closed.push(b);
        if self.closed.len() >= self.cap {
            let kept = merge_pairs(&self.closed, true);
            // Too many cuts to halve around them: merge across some.
            self.closed = if kept.len() > self.cap * 3 / 4 {
                merge_pairs(&self.closed, false)
            } else {
                kept
            };
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

    /// The line to draw: segments split at missing values and cuts, each
    /// bucket's minimum and maximum in time order.
    pub fn line(&self) -> Vec<Vec<(f64, f64)>> {
        let mut segments: Vec<Vec<(f64, f64)>> = Vec::new();
        let mut fresh = true;
        for b in self.buckets() {
            let (first, second) = b.extremes();
            if b.hard_inside {
                segments.push(vec![first]);
                segments.extend(second.map(|p| vec![p]));
                fresh = true;
                continue;
            }
            if b.break_before || fresh {
                segments.push(Vec::new());
                fresh = false;
            }
            if let Some(seg) = segments.last_mut() {
                seg.push(first);
                seg.extend(second);
            }
        }
        segments
    }

    /// The band to draw: segments of `(t, lower, upper)`, each bucket's
    /// envelope held from its first to its last time.
    pub fn band(&self) -> Vec<Vec<(f64, f64, f64)>> {
        let mut segments: Vec<Vec<(f64, f64, f64)>> = Vec::new();
        let mut fresh = true;
        for b in self.buckets() {
            if b.hard_inside {
                segments.push(vec![(b.first_t, b.lo.1, b.hi.1)]);
                if b.last_t > b.first_t {
                    segments.push(vec![(b.last_t, b.lo.1, b.hi.1)]);
                }
                fresh = true;
                continue;
            }
            if b.break_before || fresh {
                segments.push(Vec::new());
                fresh = false;
            }
            if let Some(seg) = segments.last_mut() {
                seg.push((b.first_t, b.lo.1, b.hi.1));
                if b.last_t > b.first_t {
                    seg.push((b.last_t, b.lo.1, b.hi.1));
                }
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
    /// to the first summary without it (or the last with it, at the end or
    /// at a [`Spans::cut`]).
    pub fn push(&mut self, t: f64, active: bool) {
        match (active, self.open) {
            (true, None) => self.open = Some((t, t)),
            (true, Some((start, _))) => self.open = Some((start, t)),
            (false, Some((start, _))) => {
                self.open = None;
                self.close((start, t));
            }
            (false, None) => {}
        }
    }

    /// The record breaks here: an open span ends at its latest summary (no
    /// one knows what held while nothing came).
    pub fn cut(&mut self) {
        if let Some(span) = self.open.take() {
            self.close(span);
        }
    }

    fn close(&mut self, span: (f64, f64)) {
        self.spans.push(span);
        if self.spans.len() >= self.cap {
            self.coalesce();
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

/// One alarm event as placed.
#[derive(Clone, Copy, Debug, PartialEq)]
struct EventMark {
    /// On the chart's axis.
    x: f64,
    kind: EventKind,
    /// The device time it carried, ms (what `heatbound watch` printed).
    t_ms: u32,
    /// Its boot session, from 1.
    session: u32,
    /// Its place on the device axis is not its device time.
    shifted: bool,
}

/// The events of one rule: exact counts, and the times of those drawn.
#[derive(Clone, Debug)]
struct Marks {
    counts: [u64; 3],
    kept: Thinned<EventMark>,
}

impl Default for Marks {
    fn default() -> Marks {
        Marks {
            counts: [0; 3],
            kept: Thinned::new(MAX_MARKS_PER_RULE),
        }
    }
}

impl Marks {
    fn push(&mut self, mark: EventMark) {
        self.counts[kind_index(mark.kind)] += 1;
        self.kept.push(mark);
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
    clock: Clock,
    hello: Option<Hello>,
    timeline: Timeline,
    summaries: u64,
    /// Axis time and device-axis time of the first summary, and of the last.
    first: Option<(f64, f64)>,
    last: (f64, f64),
    performance: MinMax,
    performance_band: MinMax,
    bound: MinMax,
    bound_band: MinMax,
    entropy_rate: MinMax,
    entropy_band: MinMax,
    hot_mean: MinMax,
    cold_mean: MinMax,
    ambient: MinMax,
    heat_in_w: MinMax,
    work_w: MinMax,
    heat_out_w: MinMax,
    second_law: Spans,
    /// Every alarm bit seen set in some summary.
    alarms_seen: u8,
    events: [Marks; RuleId::COUNT],
}

impl ChartData {
    fn new(run: RunId, clock: Clock, outages: Vec<OutageRow>) -> ChartData {
        let series = || MinMax::new(MAX_BUCKETS);
        ChartData {
            run,
            clock,
            hello: None,
            timeline: Timeline::new(clock, outages),
            summaries: 0,
            first: None,
            last: (0.0, 0.0),
            performance: series(),
            performance_band: series(),
            bound: series(),
            bound_band: series(),
            entropy_rate: series(),
            entropy_band: series(),
            hot_mean: series(),
            cold_mean: series(),
            ambient: series(),
            heat_in_w: series(),
            work_w: series(),
            heat_out_w: series(),
            second_law: Spans::new(MAX_SPANS),
            alarms_seen: 0,
            events: Default::default(),
        }
    }

    fn push(&mut self, stored: &Stored) {
        match &stored.frame {
            Frame::Hello(h) => {
                // The first Hello names the run; later ones repeat it.
                self.hello.get_or_insert(*h);
                self.timeline.hello(h);
            }
            Frame::Summary(s) => self.summary(stored.host_ms, s),
            Frame::Event(e) => self.event(stored.host_ms, e),
            Frame::Reply(_) => {}
        }
    }

    /// Places what came after the last summary.
    fn finish(&mut self) {
        self.timeline.finish();
    }

    fn coverage(&self) -> f64 {
        self.hello
            .map(|h| f64::from(h.coverage_factor))
            .filter(|k| k.is_finite() && *k > 0.0)
            .unwrap_or(DEFAULT_COVERAGE)
    }

    fn cut(&mut self) {
        for series in [
            &mut self.performance,
            &mut self.performance_band,
            &mut self.bound,
            &mut self.bound_band,
            &mut self.entropy_rate,
            &mut self.entropy_band,
            &mut self.hot_mean,
            &mut self.cold_mean,
            &mut self.ambient,
            &mut self.heat_in_w,
            &mut self.work_w,
            &mut self.heat_out_w,
        ] {
            series.cut();
        }
        self.second_law.cut();
    }

    fn summary(&mut self, host_ms: i64, s: &Summary) {
        let at = self.timeline.summary(host_ms, s);
        if at.broken {
            self.cut();
        }
        let t = at.x;
        let k = self.coverage();
        self.performance.push(t, value(s.performance()));
        self.performance_band
            .push_range(t, band(s.performance(), s.u_performance, k));
        self.bound.push(t, value(s.bound()));
        self.bound_band.push_range(t, band(s.bound(), s.u_bound, k));
        self.entropy_rate.push(t, value(s.entropy_rate_w_per_k));
        self.entropy_band
            .push_range(t, band(s.entropy_rate_w_per_k, s.u_entropy_rate_w_per_k, k));
        self.hot_mean.push(t, value(s.hot_mean_k()));
        self.cold_mean
            .push(t, ratio(s.heat_out_j, s.entropy_out_j_per_k));
        self.ambient.push(t, value(s.ambient_k));
        self.heat_in_w.push(t, ratio(s.heat_in_j, s.duration_s));
        self.work_w.push(t, ratio(s.work_j, s.duration_s));
        self.heat_out_w.push(t, ratio(s.heat_out_j, s.duration_s));
        self.second_law.push(t, s.alarms & SECOND_LAW_BITS != 0);
        self.alarms_seen |= s.alarms;
        self.summaries += 1;
        self.first.get_or_insert((t, at.dev_x));
        self.last = (t, at.dev_x);
    }

    fn event(&mut self, host_ms: i64, e: &EventFrame) {
        let at = self.timeline.event(host_ms, e);
        if let Some(marks) = self.events.get_mut(e.event.rule.index()) {
            marks.push(EventMark {
                x: at.x,
                kind: e.event.kind,
                t_ms: e.event.t_ms,
                session: at.session,
                shifted: at.shifted,
            });
        }
    }

    /// Axis time of the first and last summary.
    fn span(&self) -> Option<(f64, f64)> {
        self.first.map(|(a, _)| (a, self.last.0))
    }

    /// Device-axis time of the first and last summary.
    fn device_span_s(&self) -> Option<(f64, f64)> {
        self.first.map(|(_, a)| (a, self.last.1))
    }
}

/// A figure as a finite f64, if present.
fn value(x: Option<f32>) -> Option<f64> {
    x.map(f64::from).filter(|v| v.is_finite())
}

/// `num / den` when `den > 0` and the quotient is finite: the heat-weighted
/// T_c (`heat_out_j / entropy_out_j_per_k`), a window's mean power
/// (`J / duration_s`).
fn ratio(num: f32, den: f32) -> Option<f64> {
    let (num, den) = (f64::from(num), f64::from(den));
    (den > 0.0).then(|| num / den).filter(|v| v.is_finite())
}

/// `x ± k·u`, if both are present and finite.
fn band(x: Option<f32>, u: Option<f32>, k: f64) -> Option<(f64, f64)> {
    let x = value(x)?;
    let half = k * value(u)?.abs();
    half.is_finite().then_some((x - half, x + half))
}

// ---------------------------------------------------------------------------
// The time axis

/// The unit of the device clock's axis, chosen from the run's length.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum TimeUnit {
    Seconds,
    Minutes,
    Hours,
    Days,
}

impl TimeUnit {
    /// Seconds up to half an hour, minutes up to ten hours, hours up to
    /// three days, days beyond.
    fn for_span(span_s: f64) -> TimeUnit {
        if span_s <= 1800.0 {
            TimeUnit::Seconds
        } else if span_s <= 36_000.0 {
            TimeUnit::Minutes
        } else if span_s <= 259_200.0 {
            TimeUnit::Hours
        } else {
            TimeUnit::Days
        }
    }

    fn seconds(self) -> f64 {
        match self {
            TimeUnit::Seconds => 1.0,
            TimeUnit::Minutes => 60.0,
            TimeUnit::Hours => 3600.0,
            TimeUnit::Days => 86_400.0,
        }
    }

    fn symbol(self) -> &'static str {
        match self {
            TimeUnit::Seconds => "s",
            TimeUnit::Minutes => "min",
            TimeUnit::Hours => "h",
            TimeUnit::Days => "days",
        }
    }

    /// Tick steps of one unit and more, in the unit (steps below one are
    /// decimal).
    fn steps(self) -> &'static [f64] {
        match self {
            TimeUnit::Seconds => &[1.0, 2.0, 5.0, 10.0, 20.0, 30.0, 60.0, 120.0, 300.0],
            TimeUnit::Minutes => &[1.0, 2.0, 5.0, 10.0, 15.0, 20.0, 30.0, 60.0, 120.0],
            TimeUnit::Hours => &[1.0, 2.0, 3.0, 6.0, 12.0, 24.0, 48.0],
            TimeUnit::Days => &[1.0, 2.0, 5.0, 7.0, 14.0, 28.0, 50.0, 100.0],
        }
    }

    /// Decimals that tell apart two times a tenth of a tick step apart.
    fn decimals(self) -> usize {
        match self {
            TimeUnit::Seconds => 1,
            TimeUnit::Minutes | TimeUnit::Hours => 2,
            TimeUnit::Days => 3,
        }
    }
}

/// Tick steps of the host's clock, s: each divides a day or is whole days.
const WALL_STEPS_S: [f64; 22] = [
    1.0,
    2.0,
    5.0,
    10.0,
    15.0,
    30.0,
    60.0,
    120.0,
    300.0,
    600.0,
    900.0,
    1800.0,
    3600.0,
    7200.0,
    10_800.0,
    21_600.0,
    43_200.0,
    86_400.0,
    172_800.0,
    432_000.0,
    604_800.0,
    1_209_600.0,
];

/// The least step of `steps` (after the decimal ones below them, then ten
/// times the last, and so on) that cuts `span` into at most `max_ticks`.
fn nice_step(span: f64, max_ticks: f64, steps: &[f64]) -> f64 {
    const BELOW: [f64; 9] = [0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5];
    if let Some(&s) = BELOW.iter().chain(steps).find(|&&s| span / s <= max_ticks) {
        return s;
    }
    let mut s = steps.last().copied().unwrap_or(1.0);
    while span / s > max_ticks && s.is_finite() {
        s *= 10.0;
    }
    s
}

/// The multiples of `step` within `range` (at most 64).
fn multiples(range: &Range<f64>, step: f64) -> Vec<f64> {
    let mut out = Vec::new();
    if !(step > 0.0 && step.is_finite()) {
        return out;
    }
    let mut k = (range.start / step).ceil();
    while out.len() < 64 {
        let t = k * step;
        if !t.is_finite() || t > range.end + step * 1e-9 {
            break;
        }
        out.push(t);
        k += 1.0;
    }
    out
}

/// A date and time of day, UTC.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Utc {
    year: i64,
    month: u32,
    day: u32,
    hour: u32,
    minute: u32,
    second: u32,
}

impl Utc {
    /// The UTC date and time of Unix time `epoch_s` (whole seconds, floor),
    /// within years ±9999.
    fn of(epoch_s: f64) -> Utc {
        const LIMIT: f64 = 253_402_300_799.0; // 9999-12-31T23:59:59Z
        let secs = epoch_s.floor().clamp(-LIMIT, LIMIT) as i64;
        let (days, rem) = (secs.div_euclid(86_400), secs.rem_euclid(86_400));
        let (year, month, day) = crate::term::civil_from_days(days);
        Utc {
            year,
            month,
            day,
            hour: (rem / 3600) as u32,
            minute: (rem / 60 % 60) as u32,
            second: (rem % 60) as u32,
        }
    }

    fn date(&self) -> String {
        format!("{:04}-{:02}-{:02}", self.year, self.month, self.day)
    }

    fn hm(&self) -> String {
        format!("{:02}:{:02}", self.hour, self.minute)
    }

    fn hms(&self) -> String {
        format!("{:02}:{:02}:{:02}", self.hour, self.minute, self.second)
    }
}

/// The shared time axis: its range, unit, ticks and title.
struct TimeAxis {
    clock: Clock,
    range: Range<f64>,
    unit: TimeUnit,
    ticks: Vec<(f64, String)>,
    desc: String,
}

impl TimeAxis {
    fn new(data: &ChartData) -> TimeAxis {
        let (t0, t1) = data.span().unwrap_or((0.0, 1.0));
        let range = padded_x(t0, t1);
        let span = range.end - range.start;
        let unit = TimeUnit::for_span(span);
        match data.clock {
            Clock::Device => {
                let u = unit.seconds();
                let step = nice_step(span / u, 12.0, unit.steps()) * u;
                let ticks = multiples(&range, step)
                    .into_iter()
                    .map(|t| (t, tick(&(t / u))))
                    .collect();
                let tl = &data.timeline;
                let mut desc = if tl.joined() {
                    format!(
                        "time ({}): device time of session 1; each later session follows its \
                         restart mark, with its device clock from 0",
                        unit.symbol()
                    )
                } else {
                    format!("device time ({})", unit.symbol())
                };
                if tl.wraps > 0 {
                    desc.push_str("; the device clock wrapped at 2^32 ms and the axis runs on");
                }
                TimeAxis {
                    clock: Clock::Device,
                    range,
                    unit,
                    ticks,
                    desc,
                }
            }
            Clock::Wall => {
                let step = nice_step(span, 9.0, &WALL_STEPS_S);
                let days = span > 86_400.0;
                // Sub-second steps: as many decimals of the second as they need.
                let decimals = (0..3).find(|&d| step * 10f64.powi(d) >= 0.999).unwrap_or(3);
                let ticks = multiples(&range, step)
                    .into_iter()
                    .map(|t| {
                        let at = Utc::of(t);
                        let label = if step < 1.0 {
                            let scale = 10f64.powi(decimals);
                            let t = (t * scale).round() / scale;
                            let frac = format!("{:.*}", decimals as usize, t - t.floor());
                            format!("{}{}", Utc::of(t).hms(), frac.trim_start_matches('0'))
                        } else if step < 60.0 {
                            at.hms()
                        } else if step >= 86_400.0 || (days && at.hour == 0 && at.minute == 0) {
                            format!("{:02}-{:02}", at.month, at.day)
                        } else {
                            at.hm()
                        };
                        (t, label)
                    })
                    .collect();
                let (a, b) = (Utc::of(t0), Utc::of(t1));
                let end = if a.date() == b.date() {
                    b.hms()
                } else {
                    format!("{} {}", b.date(), b.hms())
                };
                let format = if step < 1.0 {
                    "hh:mm:ss.s"
                } else if step < 60.0 {
                    "hh:mm:ss"
                } else if days {
                    "hh:mm, dates as mm-dd"
                } else {
                    "hh:mm"
                };
                let desc = format!(
                    "host receive time, UTC ({format}): {} {} – {end}",
                    a.date(),
                    a.hms()
                );
                TimeAxis {
                    clock: Clock::Wall,
                    range,
                    unit,
                    ticks,
                    desc,
                }
            }
        }
    }

    /// A place on the axis in words: `5.35 min`, `08:12:03 UTC`.
    fn at(&self, x: f64) -> String {
        match self.clock {
            Clock::Device => format!(
                "{:.*} {}",
                self.unit.decimals(),
                x / self.unit.seconds(),
                self.unit.symbol()
            ),
            Clock::Wall => {
                let at = Utc::of(x);
                let span = self.range.end - self.range.start;
                if span > 86_400.0 {
                    format!("{:02}-{:02} {} UTC", at.month, at.day, at.hms())
                } else if span < 60.0 {
                    let tenths = ((x - x.floor()) * 10.0).floor().clamp(0.0, 9.0);
                    format!("{}.{tenths:.0} UTC", at.hms())
                } else {
                    format!("{} UTC", at.hms())
                }
            }
        }
    }
}

/// The time range, widened when the run is a single instant.
fn padded_x(t0: f64, t1: f64) -> Range<f64> {
    if t1 > t0 { t0..t1 } else { t0 - 0.5..t0 + 0.5 }
}

/// A value range with a margin of 6 %, never empty.
fn padded_y(lo: f64, hi: f64) -> Range<f64> {
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

// ---------------------------------------------------------------------------
// Drawing

/// Colours: our own, picked for contrast on white and for telling apart in
/// grey print (dark blue, copper, violet, brick, green, blue).
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
    pub const COLD: RGBColor = RGBColor(0x1f, 0x77, 0xb4);
    pub const AMBIENT: RGBColor = RGBColor(0x2f, 0x7d, 0x4f);
    pub const WORK: RGBColor = RGBColor(0x44, 0x47, 0x50);
    pub const ALARM: RGBColor = RGBColor(0xf0, 0xb4, 0x29);
    pub const OUTAGE: RGBColor = RGBColor(0x7a, 0x84, 0x92);
    pub const NEW_RUN: RGBColor = RGBColor(0x0b, 0x6e, 0x4f);

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

/// Alpha of the uncertainty bands, of the alarm shading and of outages.
const BAND_ALPHA: f64 = 0.22;
const ALARM_ALPHA: f64 = 0.30;
const OUTAGE_ALPHA: f64 = 0.30;

/// Pixel layout.
const HEADER_PX: u32 = 70;
const LEGEND_PX: u32 = 290;
const Y_LABEL_PX: u32 = 96;
/// Above the first panel: the labels of outages, restarts and new runs.
const STRIP_PX: u32 = 22;
/// Below the last panel: the time axis's tick labels and title.
const X_AXIS_PX: u32 = 54;
/// Below the other panels.
const PANEL_GAP_PX: u32 = 6;
/// The least height left to the panels, whatever the footer holds.
const MIN_BODY_PX: u32 = 480;
/// One row of the footer.
const ROW_PX: i32 = 20;
const FOOTER_FONT_PX: f64 = 15.0;
/// A footer entry's swatch, and the space between entries of a row.
const SWATCH_PX: i32 = 34;
const ITEM_GAP_PX: i32 = 28;
const Y_TICKS: usize = 5;
/// A rule with at most this many events has their times in the legend.
const TIMES_PER_RULE: u64 = 4;
/// Event lines (2 px wide) that would fall within 3 px of one already
/// drawn are set this far beside it, up to this many times, so that a white
/// column shows between them.
const LINE_SHIFT_PX: i32 = 4;
const MAX_SHIFTS: i32 = 4;

type DrawResult<DB> = Result<(), DrawingAreaErrorKind<<DB as DrawingBackend>::ErrorType>>;
type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// One line (with an optional band) of a panel.
struct Trace<'a> {
    label: String,
    band_label: Option<String>,
    colour: RGBColor,
    line: &'a MinMax,
    band: Option<&'a MinMax>,
    /// Dashed: a setting the device used, not a measurement.
    dashed: bool,
}

/// One panel: its axis title, its traces and its furniture.
struct PanelSpec<'a> {
    y_desc: String,
    traces: Vec<Trace<'a>>,
    zero_line: Option<String>,
    shade_alarms: bool,
    /// Values are divided by this before they are drawn (W to kW).
    y_scale: f64,
    /// A muted line under the legend.
    note: Option<&'static str>,
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

/// The power unit for values up to `extent`: W, kW or MW.
fn power_unit(extent: Option<(f64, f64)>) -> (f64, &'static str) {
    let m = extent.map_or(0.0, |(lo, hi)| lo.abs().max(hi.abs()));
    if m >= 1e7 {
        (1e6, "MW")
    } else if m >= 1e4 {
        (1e3, "kW")
    } else {
        (1.0, "W")
    }
}

fn panel_specs(data: &ChartData) -> [PanelSpec<'_>; 4] {
    let k_text = format_k(data.coverage());
    let band_words = format!("± k·u, k = {k_text}");
    let (merit_desc, merit_label, bound_label) = merit_words(data.hello.map(|h| h.mode));
    let powers = [
        data.heat_in_w.extent(),
        data.work_w.extent(),
        data.heat_out_w.extent(),
    ]
    .into_iter()
    .fold(None, widen);
    let (p_scale, p_unit) = power_unit(powers);
    [
        PanelSpec {
            y_desc: merit_desc.to_string(),
            traces: vec![
                Trace {
                    label: merit_label.to_string(),
                    band_label: Some(band_words.clone()),
                    colour: palette::PERFORMANCE,
                    line: &data.performance,
                    band: Some(&data.performance_band),
                    dashed: false,
                },
                Trace {
                    label: bound_label.to_string(),
                    band_label: Some(band_words.clone()),
                    colour: palette::BOUND,
                    line: &data.bound,
                    band: Some(&data.bound_band),
                    dashed: false,
                },
            ],
            zero_line: None,
            shade_alarms: true,
            y_scale: 1.0,
            note: None,
        },
        PanelSpec {
            y_desc: "entropy generation Ṡ_gen (W/K)".to_string(),
            traces: vec![Trace {
                label: "Ṡ_gen, entropy generation rate".to_string(),
                band_label: Some(band_words),
                colour: palette::ENTROPY,
                line: &data.entropy_rate,
                band: Some(&data.entropy_band),
                dashed: false,
            }],
            zero_line: Some("zero: below it by more than k·u breaks the second law".to_string()),
            shade_alarms: true,
            y_scale: 1.0,
            note: None,
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
                    dashed: false,
                },
                Trace {
                    label: "T_c, heat-weighted cold-side mean".to_string(),
                    band_label: None,
                    colour: palette::COLD,
                    line: &data.cold_mean,
                    band: None,
                    dashed: false,
                },
                Trace {
                    label: "T0, ambient used by the device".to_string(),
                    band_label: None,
                    colour: palette::AMBIENT,
                    line: &data.ambient,
                    band: None,
                    dashed: true,
                },
            ],
            zero_line: None,
            shade_alarms: false,
            y_scale: 1.0,
            note: Some("T_c = Q_out / S_out of each window"),
        },
        PanelSpec {
            y_desc: format!("mean power ({p_unit})"),
            traces: vec![
                Trace {
                    label: "Q_in/Δt, heat in".to_string(),
                    band_label: None,
                    colour: palette::HOT,
                    line: &data.heat_in_w,
                    band: None,
                    dashed: false,
                },
                Trace {
                    label: "W/Δt, work".to_string(),
                    band_label: None,
                    colour: palette::WORK,
                    line: &data.work_w,
                    band: None,
                    dashed: false,
                },
                Trace {
                    label: "Q_out/Δt, heat out".to_string(),
                    band_label: None,
                    colour: palette::COLD,
                    line: &data.heat_out_w,
                    band: None,
                    dashed: false,
                },
            ],
            zero_line: None,
            shade_alarms: false,
            y_scale: p_scale,
            note: Some("each over its window's duration Δt"),
        },
    ]
}

fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    data: &ChartData,
    ink: Ink,
) -> DrawResult<DB> {
    root.fill(&WHITE)?;
    let (width, height) = root.dim_in_pixel();
    let axis = TimeAxis::new(data);
    let rows = footer_rows(data, &axis, width as i32 - 48);
    let footer_h = (rows.len() as u32 * ROW_PX as u32 + 14)
        .min(height.saturating_sub(HEADER_PX + MIN_BODY_PX));
    let (header, rest) = root.split_vertically(HEADER_PX);
    let (body, footer) = rest.split_vertically(height.saturating_sub(HEADER_PX + footer_h));

    draw_header(&header, data, &axis, ink)?;
    let panels = panel_specs(data);
    let body_h = body.dim_in_pixel().1;
    let strip = strip_px(data);
    let each = body_h.saturating_sub(strip + X_AXIS_PX + 3 * PANEL_GAP_PX) / 4;
    let (p1, rest) = body.split_vertically(strip + each + PANEL_GAP_PX);
    let (p2, rest) = rest.split_vertically(each + PANEL_GAP_PX);
    let (p3, p4) = rest.split_vertically(each + PANEL_GAP_PX);
    for (i, (area, spec)) in [p1, p2, p3, p4].iter().zip(&panels).enumerate() {
        draw_panel(area, spec, data, &axis, (i == 0, i == 3), ink)?;
    }
    draw_footer(&footer, &rows, ink)?;
    Ok(())
}

/// The height of the strip above the first panel: room for the words at
/// outages, restarts and new runs, if there are any.
fn strip_px(data: &ChartData) -> u32 {
    if data.timeline.markers.kept.is_empty() {
        0
    } else {
        STRIP_PX
    }
}

/// The union of two value ranges.
fn widen(a: Option<(f64, f64)>, b: Option<(f64, f64)>) -> Option<(f64, f64)> {
    match (a, b) {
        (Some((a0, a1)), Some((b0, b1))) => Some((a0.min(b0), a1.max(b1))),
        (a, None) => a,
        (None, b) => b,
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
    axis: &TimeAxis,
    ink: Ink,
) -> DrawResult<DB> {
    let who = match &data.hello {
        Some(h) => {
            let (a, b, c) = h.firmware_version;
            format!("rig {} · firmware {a}.{b}.{c}", h.rig_id)
        }
        None => "rig unknown (no Hello in this run)".to_string(),
    };
    let (t0, t1) = data.span().unwrap_or((0.0, 0.0));
    let when = match data.clock {
        Clock::Device if axis.unit == TimeUnit::Seconds => format!("t = {t0:.1}–{t1:.1} s"),
        Clock::Device => {
            let (u, d) = (axis.unit.seconds(), axis.unit.decimals());
            format!("t = {:.d$}–{:.d$} {}", t0 / u, t1 / u, axis.unit.symbol())
        }
        Clock::Wall => {
            let (a, b) = (Utc::of(t0), Utc::of(t1));
            if a.date() == b.date() {
                format!("{} {}–{} UTC", a.date(), a.hms(), b.hms())
            } else {
                format!("{} {} – {} {} UTC", a.date(), a.hms(), b.date(), b.hms())
            }
        }
    };
    let title = format!(
        "{who} · run {} · {when} ({})",
        data.run,
        duration_words(t1 - t0)
    );
    let at = (HPos::Left, VPos::Top);
    put(ink, area, &title, &font(27.0), (24, 12), at, false)?;
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
        "{mode} · {} summaries, {drawn} · bands ± k·u with k = {}{}",
        data.summaries,
        format_k(data.coverage()),
        if data.hello.is_none() {
            " (assumed)"
        } else {
            ""
        }
    );
    put(
        ink,
        area,
        &sub,
        &font(17.0).color(&palette::MUTED),
        (24, 44),
        at,
        false,
    )?;
    Ok(())
}

fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    spec: &PanelSpec<'_>,
    data: &ChartData,
    axis: &TimeAxis,
    (first, last): (bool, bool),
    ink: Ink,
) -> DrawResult<DB> {
    let (width, _) = area.dim_in_pixel();
    let (plot_area, legend_area) = area.split_horizontally(width.saturating_sub(LEGEND_PX));
    let scale = spec.y_scale;
    let scaled = |e: Option<(f64, f64)>| e.map(|(a, b)| (a / scale, b / scale));

    let mut extent: Option<(f64, f64)> = None;
    for t in &spec.traces {
        extent = widen(extent, scaled(t.line.extent()));
        extent = widen(extent, scaled(t.band.and_then(MinMax::extent)));
    }
    let has_data = extent.is_some();
    if spec.zero_line.is_some() {
        extent = widen(extent, Some((0.0, 0.0)));
    }
    let (lo, hi) = extent.unwrap_or((0.0, 1.0));
    let y_range = padded_y(lo, hi);
    let x_range = axis.range.clone();

    let mut chart = ChartBuilder::on(&plot_area)
        .margin_top(if first { strip_px(data) + 8 } else { 8 })
        .margin_right(12)
        .margin_left(8)
        .x_label_area_size(if last { X_AXIS_PX } else { PANEL_GAP_PX })
        .y_label_area_size(Y_LABEL_PX)
        .build_cartesian_2d(x_range.clone(), y_range.clone())?;
    // The grid and the axes; every label is set below (see `put`).
    chart
        .configure_mesh()
        .disable_x_mesh()
        .x_labels(0)
        .y_labels(Y_TICKS)
        .max_light_lines(1)
        .x_label_formatter(&|_: &f64| String::new())
        .y_label_formatter(&|_: &f64| String::new())
        .axis_style(palette::MUTED)
        .bold_line_style(palette::GRID_BOLD)
        .light_line_style(palette::GRID)
        .draw()?;

    let (y0, y1) = (y_range.start, y_range.end);
    let bottom_left = chart.backend_coord(&(x_range.start, y0));
    let top_right = chart.backend_coord(&(x_range.end, y1));
    let s_per_px = (x_range.end - x_range.start) / f64::from((top_right.0 - bottom_left.0).max(1));

    chart.draw_series(axis.ticks.iter().map(|&(t, _)| {
        PathElement::new(vec![(t, y0), (t, y1)], palette::GRID_BOLD.stroke_width(1))
    }))?;
    if spec.shade_alarms {
        let style = palette::ALARM.mix(ALARM_ALPHA).filled();
        chart.draw_series(
            data.second_law
                .all()
                .into_iter()
                .map(|(a, b)| Rectangle::new([(a, y0), (b, y1)], style)),
        )?;
    }
    draw_outages(&mut chart, data, &x_range, (y0, y1), s_per_px)?;
    for t in &spec.traces {
        if let Some(band) = t.band {
            let style = t.colour.mix(BAND_ALPHA).filled();
            for seg in band.band() {
                let mut points: Vec<(f64, f64)> =
                    seg.iter().map(|&(x, _, up)| (x, up / scale)).collect();
                points.extend(seg.iter().rev().map(|&(x, low, _)| (x, low / scale)));
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
    draw_event_lines(&mut chart, data, (y0, y1), s_per_px)?;
    draw_restarts(&mut chart, data, &x_range, (y0, y1))?;
    for t in &spec.traces {
        for seg in t.line.line() {
            let seg: Vec<(f64, f64)> = seg.into_iter().map(|(x, v)| (x, v / scale)).collect();
            if seg.len() == 1 {
                chart.draw_series(seg.iter().map(|&p| Circle::new(p, 2, t.colour.filled())))?;
            } else if t.dashed {
                chart.draw_series(DashedLineSeries::new(seg, 10, 6, t.colour.stroke_width(2)))?;
            } else {
                chart.draw_series(LineSeries::new(seg, t.colour.stroke_width(2)))?;
            }
        }
    }

    // The labels, set on the panel's area.
    let base = area.get_base_pixel();
    let rel = |(x, y): (i32, i32)| (x - base.0, y - base.1);
    let (left, bottom) = rel(bottom_left);
    let (right, top) = rel(top_right);
    if !has_data {
        put(
            ink,
            area,
            "no values in this run",
            &font(18.0).color(&palette::MUTED),
            ((left + right) / 2, (top + bottom) / 2),
            (HPos::Center, VPos::Center),
            false,
        )?;
    }
    let label = font(15.0);
    for v in chart
        .as_coord_spec()
        .y_spec()
        .key_points(BoldPoints(Y_TICKS))
    {
        let (_, y) = rel(chart.backend_coord(&(x_range.start, v)));
        put(
            ink,
            area,
            &tick(&v),
            &label,
            (left - 8, y),
            (HPos::Right, VPos::Center),
            false,
        )?;
    }
    // The axis title, read upwards, in as many lines as the panel needs.
    let lines = wrap_px(&spec.y_desc, f64::from((bottom - top - 4).max(40)), 16.0);
    let n = lines.len() as i32;
    for (i, line) in lines.iter().enumerate() {
        put(
            ink,
            area,
            line,
            &font(16.0),
            (24 - 9 * (n - 1) + 18 * i as i32, (top + bottom) / 2),
            (HPos::Center, VPos::Center),
            true,
        )?;
    }
    if last {
        for (t, text) in &axis.ticks {
            let (x, _) = rel(chart.backend_coord(&(*t, y0)));
            area.draw(&PathElement::new(
                vec![(x, bottom), (x, bottom + 5)],
                palette::MUTED.stroke_width(1),
            ))?;
            put(
                ink,
                area,
                text,
                &label,
                (x, bottom + 8),
                (HPos::Center, VPos::Top),
                false,
            )?;
        }
        put(
            ink,
            area,
            &axis.desc,
            &font(16.0),
            ((left + right) / 2, bottom + 30),
            (HPos::Center, VPos::Top),
            false,
        )?;
    }
    if first {
        draw_marker_labels(area, &chart, data, axis, (left, right), ink)?;
    }
    let legend_top = if first { strip_px(data) as i32 } else { 0 };
    draw_legend(&legend_area, spec, legend_top, ink)
}

/// The legend beside a panel.
fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    spec: &PanelSpec<'_>,
    top: i32,
    ink: Ink,
) -> DrawResult<DB> {
    let line_h = 21;
    let mut y = top + 16;
    let swatch = |y: i32, style: ShapeStyle, filled: bool| {
        if filled {
            area.draw(&Rectangle::new([(10, y - 6), (38, y + 6)], style))
        } else {
            area.draw(&PathElement::new(vec![(10, y), (38, y)], style))
        }
    };
    let text = font(15.0);
    let muted = font(15.0).color(&palette::MUTED);
    let at = (HPos::Left, VPos::Center);
    let wrap_w = f64::from(LEGEND_PX) - 56.0;
    for t in &spec.traces {
        if t.dashed {
            area.draw(&DashedPathElement::new(
                vec![(10, y), (38, y)],
                7,
                4,
                t.colour.stroke_width(3),
            ))?;
        } else {
            swatch(y, t.colour.stroke_width(3), false)?;
        }
        put(ink, area, &t.label, &text, (46, y), at, false)?;
        y += line_h;
        if let Some(b) = &t.band_label {
            swatch(y, t.colour.mix(BAND_ALPHA).filled(), true)?;
            put(ink, area, b, &text, (46, y), at, false)?;
            y += line_h;
        }
    }
    if let Some(z) = &spec.zero_line {
        swatch(y, palette::INK.stroke_width(1), false)?;
        for part in wrap_px(z, wrap_w, 15.0) {
            put(ink, area, &part, &text, (46, y), at, false)?;
            y += 18;
        }
        y += line_h - 18;
    }
    if spec.shade_alarms {
        swatch(y, palette::ALARM.mix(ALARM_ALPHA + 0.2).filled(), true)?;
        put(
            ink,
            area,
            "second-law alarm active",
            &text,
            (46, y),
            at,
            false,
        )?;
        y += 18;
        for part in ["(beyond_carnot or", "negative_entropy_production)"] {
            put(ink, area, part, &muted, (46, y), at, false)?;
            y += 18;
        }
    }
    if let Some(note) = spec.note {
        for part in wrap_px(note, wrap_w, 15.0) {
            put(ink, area, &part, &muted, (46, y), at, false)?;
            y += 18;
        }
    }
    Ok(())
}

/// Splits `text` at spaces into lines at most `width_px` wide at `size_px`
/// (a single word wider than that stays whole).
fn wrap_px(text: &str, width_px: f64, size_px: f64) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    for word in text.split(' ') {
        match lines.last_mut() {
            Some(line) if text_width(&format!("{line} {word}"), size_px) <= width_px => {
                line.push(' ');
                line.push_str(word);
            }
            _ => lines.push(word.to_string()),
        }
    }
    lines
}

/// The outages as grey spans, at least 3 px wide.
fn draw_outages<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    data: &ChartData,
    range: &Range<f64>,
    (y0, y1): (f64, f64),
    s_per_px: f64,
) -> DrawResult<DB> {
    let min_w = 3.0 * s_per_px;
    let style = palette::OUTAGE.mix(OUTAGE_ALPHA).filled();
    for m in &data.timeline.markers.kept {
        if m.kind != BreakKind::Outage {
            continue;
        }
        let (mut a, mut b) = (
            m.x0.clamp(range.start, range.end),
            m.x1.clamp(range.start, range.end),
        );
        if b - a < min_w {
            let mid = (a + b) / 2.0;
            a = (mid - min_w / 2.0).max(range.start);
            b = (a + min_w).min(range.end);
            a = (b - min_w).max(range.start);
        }
        chart.draw_series(std::iter::once(Rectangle::new([(a, y0), (b, y1)], style)))?;
    }
    Ok(())
}

/// Restarts (dashed), new runs (dashed, green) and the device clock going
/// back (dotted), as vertical lines.
fn draw_restarts<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    data: &ChartData,
    range: &Range<f64>,
    (y0, y1): (f64, f64),
) -> DrawResult<DB> {
    for m in &data.timeline.markers.kept {
        let x = m.x0.clamp(range.start, range.end);
        let points = [(x, y0), (x, y1)];
        let (colour, dash, gap) = match m.kind {
            BreakKind::Outage => continue,
            BreakKind::Restart => (palette::INK, 9, 4),
            BreakKind::NewRun => (palette::NEW_RUN, 9, 4),
            BreakKind::ClockBack => (palette::INK, 2, 4),
        };
        chart.draw_series(std::iter::once(DashedPathElement::new(
            points,
            dash,
            gap,
            colour.stroke_width(2),
        )))?;
    }
    Ok(())
}

/// The words above the first panel at each outage, restart and new run
/// (those that fit without overlapping one another).
fn draw_marker_labels<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    chart: &Chart<'_, DB>,
    data: &ChartData,
    axis: &TimeAxis,
    (left, right): (i32, i32),
    ink: Ink,
) -> DrawResult<DB> {
    let base = area.get_base_pixel();
    let y0 = chart.y_range().start;
    let mut markers: Vec<&Marker> = data.timeline.markers.kept.iter().collect();
    markers.sort_by(|a, b| a.x0.total_cmp(&b.x0));
    let mut free_from = left;
    for m in markers {
        let x = chart
            .backend_coord(&(m.x0.clamp(axis.range.start, axis.range.end), y0))
            .0
            - base.0;
        let text = marker_words(m);
        let colour = match m.kind {
            BreakKind::Outage => palette::MUTED,
            BreakKind::NewRun => palette::NEW_RUN,
            BreakKind::Restart | BreakKind::ClockBack => palette::INK,
        };
        let w = text_width(&text, 14.0).ceil() as i32;
        // Beside its mark, or before it at the right edge.
        let at = if x + 4 + w <= right { x + 4 } else { x - 4 - w };
        if at < free_from {
            continue;
        }
        area.draw(&PathElement::new(
            vec![(x, 2), (x, STRIP_PX as i32 + 8)],
            colour.stroke_width(2),
        ))?;
        put(
            ink,
            area,
            &text,
            &font(14.0).color(&colour),
            (at, 5),
            (HPos::Left, VPos::Top),
            false,
        )?;
        free_from = at + w + 12;
    }
    Ok(())
}

/// What a mark on the time axis was, in a few words.
fn marker_words(m: &Marker) -> String {
    match (m.kind, m.value) {
        (BreakKind::Outage, Some(ms)) => format!("link down {}", duration_words(ms_to_s(ms))),
        (BreakKind::Outage, None) => "link down, not back".to_string(),
        (BreakKind::Restart, Some(session)) => format!("restart: session {session}"),
        (BreakKind::Restart, None) => "restart".to_string(),
        (BreakKind::NewRun, Some(run)) => format!("new run {run}"),
        (BreakKind::NewRun, None) => "new run".to_string(),
        (BreakKind::ClockBack, _) => "device clock went back".to_string(),
    }
}

/// One thin vertical line per kept event: solid for raised, dashed for
/// cleared, dotted for acknowledged, in the rule's colour. A line that
/// would fall within 3 px of one already drawn is set 4 px beside it (up to
/// 4 times), so coinciding events of several rules all show.
fn draw_event_lines<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    data: &ChartData,
    (y0, y1): (f64, f64),
    s_per_px: f64,
) -> DrawResult<DB> {
    let mut all: Vec<(f64, usize, EventKind)> = data
        .events
        .iter()
        .enumerate()
        .flat_map(|(i, m)| m.kept.kept.iter().map(move |e| (e.x, i, e.kind)))
        .collect();
    all.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let mut taken: BTreeSet<i32> = BTreeSet::new();
    let range = chart.x_range();
    for (t, rule, kind) in all {
        // An event past either end (after the last summary, or a tampered
        // time) is drawn at that end.
        let t = t.clamp(range.start, range.end);
        let px = chart.backend_coord(&(t, y0)).0;
        let mut shift = 0;
        while shift < MAX_SHIFTS * LINE_SHIFT_PX
            && taken
                .range(px + shift - 3..=px + shift + 3)
                .next()
                .is_some()
        {
            shift += LINE_SHIFT_PX;
        }
        taken.insert(px + shift);
        let x = t + f64::from(shift) * s_per_px;
        let colour = palette::RULES.get(rule).copied().unwrap_or(palette::MUTED);
        let points = [(x, y0), (x, y1)];
        let style = colour.stroke_width(2);
        match kind {
            EventKind::Raised => {
                chart.draw_series(std::iter::once(PathElement::new(points.to_vec(), style)))?;
            }
            EventKind::Cleared => {
                chart.draw_series(std::iter::once(DashedPathElement::new(points, 8, 5, style)))?;
            }
            _ => {
                chart.draw_series(std::iter::once(DashedPathElement::new(points, 2, 4, style)))?;
            }
        }
    }
    Ok(())
}

/// An event's time as `heatbound watch` printed it (the device's `t_ms` in
/// seconds, one decimal), with its session when the run has several and
/// its place on the axis where that is not the same.
fn event_time(m: &EventMark, axis: &TimeAxis, sessions: u32) -> String {
    let mut text = format!("{:.1} s", f64::from(m.t_ms) / 1000.0);
    let mut notes = Vec::new();
    if sessions > 1 {
        notes.push(format!("session {}", m.session));
    }
    match axis.clock {
        Clock::Wall => notes.push(axis.at(m.x)),
        Clock::Device if m.shifted => notes.push(format!("{} on the axis", axis.at(m.x))),
        Clock::Device => {}
    }
    if !notes.is_empty() {
        text.push_str(&format!(" ({})", notes.join(", ")));
    }
    text
}

/// A rule's events as words for the legend: their times when few (at most
/// [`TIMES_PER_RULE`]), else counts.
fn event_words(rule: RuleId, marks: &Marks, axis: &TimeAxis, sessions: u32) -> String {
    const NAMES: [&str; 3] = ["raised", "cleared", "acknowledged"];
    if marks.total() <= TIMES_PER_RULE && marks.kept.complete() {
        let times: Vec<String> = marks
            .kept
            .kept
            .iter()
            .map(|m| {
                format!(
                    "{} {}",
                    NAMES[kind_index(m.kind)],
                    event_time(m, axis, sessions)
                )
            })
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

/// How a footer entry's swatch is drawn.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Swatch {
    /// A short line: solid, dashed or dotted.
    Line(RGBColor, Dash),
    /// A filled box.
    Band(RGBColor),
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Dash {
    Solid,
    Dashed,
    Dotted,
}

/// One entry of a footer row, `x` pixels from the row's start.
#[derive(Clone, Debug, PartialEq)]
struct Item {
    x: i32,
    swatch: Option<Swatch>,
    text: String,
    colour: RGBColor,
}

/// Lays `entries` out in rows at most `width` pixels wide: side by side
/// while they fit; an entry wider than a row has its words wrapped, its
/// later lines under its text.
fn flow(rows: &mut Vec<Vec<Item>>, entries: Vec<(Option<Swatch>, String, RGBColor)>, width: i32) {
    let mut row: Vec<Item> = Vec::new();
    let mut x = 0;
    for (swatch, text, colour) in entries {
        let indent = if swatch.is_some() { SWATCH_PX } else { 0 };
        let w = indent + text_width(&text, FOOTER_FONT_PX).ceil() as i32;
        if !row.is_empty() && x + w > width {
            rows.push(std::mem::take(&mut row));
            x = 0;
        }
        if w <= width {
            row.push(Item {
                x,
                swatch,
                text,
                colour,
            });
            x += w + ITEM_GAP_PX;
            continue;
        }
        for (i, line) in wrap_px(&text, f64::from(width - indent), FOOTER_FONT_PX)
            .into_iter()
            .enumerate()
        {
            rows.push(vec![Item {
                x: if i == 0 { 0 } else { indent },
                swatch: if i == 0 { swatch } else { None },
                text: line,
                colour,
            }]);
        }
    }
    if !row.is_empty() {
        rows.push(row);
    }
}

fn plural(n: u64, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// The footer, row by row: how alarm events are drawn and when they
/// happened, what broke the record, which alarms were active, the caution.
fn footer_rows(data: &ChartData, axis: &TimeAxis, width: i32) -> Vec<Vec<Item>> {
    let mut rows = Vec::new();
    flow(
        &mut rows,
        vec![(
            None,
            "alarm events, drawn as vertical lines: solid = raised, dashed = cleared, dotted = \
             acknowledged (set 4 px apart where they would coincide); times as the device sent \
             them, as `heatbound watch` prints them"
                .to_string(),
            palette::MUTED,
        )],
        width,
    );
    let sessions = data.timeline.session;
    let entries: Vec<_> = RuleId::ALL
        .iter()
        .zip(&data.events)
        .filter(|(_, marks)| marks.total() > 0)
        .map(|(rule, marks)| {
            let colour = palette::RULES
                .get(rule.index())
                .copied()
                .unwrap_or(palette::MUTED);
            (
                Some(Swatch::Line(colour, Dash::Solid)),
                event_words(*rule, marks, axis, sessions),
                palette::INK,
            )
        })
        .collect();
    if entries.is_empty() {
        flow(
            &mut rows,
            vec![(
                None,
                "no alarm events in this run".to_string(),
                palette::INK,
            )],
            width,
        );
    } else {
        flow(&mut rows, entries, width);
    }

    let b = &data.timeline.breaks;
    let mut entries = Vec::new();
    if b.outages > 0 {
        entries.push((
            Some(Swatch::Band(palette::OUTAGE)),
            format!("link down: {}", plural(b.outages, "outage", "outages")),
            palette::INK,
        ));
    }
    if b.restarts > 0 {
        entries.push((
            Some(Swatch::Line(palette::INK, Dash::Dashed)),
            format!(
                "controller restarted: {}",
                plural(b.restarts, "time", "times")
            ),
            palette::INK,
        ));
    }
    if b.new_runs > 0 {
        entries.push((
            Some(Swatch::Line(palette::NEW_RUN, Dash::Dashed)),
            format!(
                "new run started on command: {}",
                plural(b.new_runs, "time", "times")
            ),
            palette::INK,
        ));
    }
    if b.clock_back > 0 {
        entries.push((
            Some(Swatch::Line(palette::INK, Dash::Dotted)),
            format!(
                "device clock went back: {}",
                plural(b.clock_back, "time", "times")
            ),
            palette::INK,
        ));
    }
    if b.gaps > 0 {
        entries.push((
            None,
            format!(
                "{} in the summary sequence ({} missing)",
                plural(b.gaps, "gap", "gaps"),
                plural(b.missing, "summary", "summaries")
            ),
            palette::INK,
        ));
    }
    if !entries.is_empty() {
        entries.push((
            None,
            "every line breaks at each of these".to_string(),
            palette::MUTED,
        ));
        flow(&mut rows, entries, width);
    }

    let active: Vec<&str> = RuleId::ALL
        .iter()
        .filter(|r| data.alarms_seen & (1 << r.index()) != 0)
        .map(|r| r.as_str())
        .collect();
    if !active.is_empty() {
        flow(
            &mut rows,
            vec![(
                None,
                format!("alarms active at some time: {}", active.join(", ")),
                palette::MUTED,
            )],
            width,
        );
    }
    flow(
        &mut rows,
        vec![(
            None,
            "heatbound's alarms are monitoring aids, not a safety interlock: keep hardwired \
             cut-outs, relief devices and guards in place."
                .to_string(),
            palette::HOT,
        )],
        width,
    );
    rows
}

fn draw_footer<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    rows: &[Vec<Item>],
    ink: Ink,
) -> DrawResult<DB> {
    let (_, height) = area.dim_in_pixel();
    let x0 = 24;
    for (i, row) in rows.iter().enumerate() {
        let y = 6 + ROW_PX * i as i32;
        if y + ROW_PX > height as i32 {
            break;
        }
        for item in row {
            let x = x0 + item.x;
            let mut text_x = x;
            if let Some(swatch) = item.swatch {
                let line = vec![(x + 4, y + 9), (x + 26, y + 9)];
                match swatch {
                    Swatch::Line(c, Dash::Solid) => {
                        area.draw(&PathElement::new(line, c.stroke_width(3)))?;
                    }
                    Swatch::Line(c, Dash::Dashed) => {
                        area.draw(&DashedPathElement::new(line, 6, 3, c.stroke_width(2)))?;
                    }
                    Swatch::Line(c, Dash::Dotted) => {
                        area.draw(&DashedPathElement::new(line, 2, 3, c.stroke_width(2)))?;
                    }
                    Swatch::Band(c) => {
                        area.draw(&Rectangle::new(
                            [(x + 4, y + 3), (x + 26, y + 15)],
                            c.mix(OUTAGE_ALPHA + 0.15).filled(),
                        ))?;
                    }
                }
                text_x += SWATCH_PX;
            }
            put(
                ink,
                area,
                &item.text,
                &font(FOOTER_FONT_PX).color(&item.colour),
                (text_x, y),
                (HPos::Left, VPos::Top),
                false,
            )?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use heatbound::alarm::{Event, Severity};
    use heatbound::config::RigConfig;
    use heatbound::wire::RigId;

    fn hello(session: u32, run: u32) -> Hello {
        let mut h = Hello::from_config(
            RigId::new("rig").expect("rig id"),
            (1, 0, 0),
            100,
            &RigConfig::default(),
        );
        h.session = session;
        h.run = run;
        h
    }

    fn summary(seq: u16, t_ms: u32) -> Summary {
        Summary {
            seq,
            t_ms,
            ..Summary::default()
        }
    }

    fn event(t_ms: u32) -> EventFrame {
        EventFrame {
            seq: 0,
            event: Event {
                t_ms,
                rule: RuleId::BeyondCarnot,
                kind: EventKind::Raised,
                severity: Severity::Trip,
            },
            verdict: Default::default(),
        }
    }

    fn outage(id: i64, started: i64, ended: Option<i64>) -> OutageRow {
        OutageRow {
            id,
            started_host_ms: started,
            ended_host_ms: ended,
            reason: "test".to_string(),
        }
    }

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

    /// No drawn segment (line or band) holds points from both sides of a cut.
    fn assert_no_segment_spans(d: &MinMax, cuts: &[f64]) {
        for seg in d.line() {
            for &c in cuts {
                assert!(
                    seg.iter().all(|p| p.0 < c) || seg.iter().all(|p| p.0 >= c),
                    "a line joins across the cut at {c}: {seg:?}"
                );
            }
        }
        for seg in d.band() {
            for &c in cuts {
                assert!(
                    seg.iter().all(|p| p.0 < c) || seg.iter().all(|p| p.0 >= c),
                    "a band joins across the cut at {c}"
                );
            }
        }
    }

    #[test]
    fn a_cut_is_never_bridged_however_far_the_buckets_merge() {
        // Ten days at one summary a second, the record broken three times.
        let cuts = [100_000.0, 100_001.0, 500_000.0];
        let mut d = MinMax::new(MAX_BUCKETS);
        for i in 0..864_000u32 {
            let t = f64::from(i);
            if cuts.contains(&t) {
                d.cut();
            }
            d.push_range(t, Some(((t * 0.01).sin(), (t * 0.01).sin() + 0.1)));
        }
        let line = d.line();
        assert!(line.len() >= 4, "{} segments", line.len());
        assert!(line.iter().map(Vec::len).sum::<usize>() <= 2 * MAX_BUCKETS);
        assert_no_segment_spans(&d, &cuts);

        // A cut every ten summaries: more cuts than buckets. Memory stays
        // bounded, and a bucket merged across cuts is points joined to nothing.
        let mut d = MinMax::new(MAX_BUCKETS);
        let mut many = Vec::new();
        for i in 0..200_000u32 {
            let t = f64::from(i);
            if i % 10 == 0 && i > 0 {
                d.cut();
                many.push(t);
            }
            d.push(t, Some(t));
        }
        assert!(d.closed.len() <= MAX_BUCKETS);
        assert!(d.line().iter().map(Vec::len).sum::<usize>() <= 2 * MAX_BUCKETS);
        assert_no_segment_spans(&d, &many);
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
    fn the_device_axis_runs_through_the_u32_wrap() {
        let mut tl = Timeline::new(Clock::Device, Vec::new());
        let start = u32::MAX - 1_499; // 1.5 s before the roll-over
        let t0 = f64::from(start) / 1000.0;
        for i in 0..5u16 {
            let at = tl.summary(0, &summary(i, start.wrapping_add(u32::from(i) * 1000)));
            assert!((at.x - (t0 + f64::from(i))).abs() < 1e-6, "{at:?}");
            assert!(!at.broken, "a wrap is no break");
        }
        // An event between the last two summaries, sent after the last: on
        // the axis past the wrap, its device time (what watch printed) 2.0 s.
        let e = tl.event(0, &event(start.wrapping_add(3500)));
        assert!((e.x - (t0 + 3.5)).abs() < 1e-6, "{e:?}");
        assert!(e.shifted && e.session == 1, "{e:?}");
        // Placing an event does not move the clock.
        let next = tl.summary(0, &summary(5, start.wrapping_add(5000)));
        assert!((next.x - (t0 + 5.0)).abs() < 1e-6, "{next:?}");
        assert_eq!(tl.wraps, 1);
        assert_eq!(tl.breaks, Breaks::default());
    }

    #[test]
    fn a_restart_opens_a_session_after_the_last_one_by_the_host_clock() {
        let mut tl = Timeline::new(Clock::Device, Vec::new());
        tl.hello(&hello(7, 0));
        assert_eq!(tl.summary(1_000_000, &summary(0, 100_000)).x, 100.0);
        assert_eq!(tl.summary(1_001_000, &summary(1, 101_000)).x, 101.0);
        // The controller rebooted: a Hello of a new session, and its clock
        // is back near zero. The host saw 60 s pass; the new session is 5 s
        // old at its first summary, so it booted 55 s after 101.0.
        tl.hello(&hello(8, 0));
        let e = tl.event(1_060_500, &event(4_500));
        assert_eq!(e.x, 101.0 + 55.0 + 4.5);
        assert_eq!((e.session, e.shifted), (2, true));
        let at = tl.summary(1_061_000, &summary(0, 5_000));
        assert_eq!(at.x, 101.0 + 55.0 + 5.0);
        assert!(at.broken);
        assert_eq!(tl.breaks.restarts, 1, "one restart, seen twice");
        assert_eq!(
            tl.markers.kept,
            vec![Marker {
                x0: 156.0,
                x1: 156.0,
                kind: BreakKind::Restart,
                value: Some(2)
            }]
        );
        let next = tl.summary(1_062_000, &summary(1, 6_000));
        assert_eq!(next.x, 162.0);
        assert!(!next.broken);
        assert!(tl.joined());
    }

    #[test]
    fn a_restart_without_a_hello_or_host_times_follows_at_once() {
        // A capture read from a file: every frame at the same host time.
        let mut tl = Timeline::new(Clock::Device, Vec::new());
        tl.summary(0, &summary(10, 100_000));
        tl.summary(0, &summary(11, 101_000));
        // The sequence goes back: a restart, the new session 1 s old.
        let at = tl.summary(0, &summary(0, 1_000));
        assert_eq!((at.x, at.broken), (102.0, true));
        assert_eq!(tl.summary(0, &summary(1, 2_000)).x, 103.0);
        assert_eq!(tl.breaks.restarts, 1);
        assert_eq!(tl.session, 2);
        // The clock going back with the sequence in order: no restart seen,
        // but the line breaks and the session is joined after.
        let at = tl.summary(0, &summary(2, 500));
        assert_eq!((at.x, at.broken), (103.5, true));
        assert_eq!(tl.breaks.clock_back, 1);
    }

    #[test]
    fn a_new_run_on_command_breaks_the_line_and_the_clock_runs_on() {
        let mut tl = Timeline::new(Clock::Device, Vec::new());
        tl.hello(&hello(7, 3));
        tl.summary(0, &summary(0, 1_000));
        tl.summary(0, &summary(1, 2_000));
        tl.hello(&hello(7, 3)); // a periodic Hello: nothing
        tl.hello(&hello(7, 4));
        let at = tl.summary(0, &summary(2, 3_000));
        assert_eq!((at.x, at.broken), (3.0, true));
        assert_eq!(tl.breaks.new_runs, 1);
        assert_eq!(tl.breaks.restarts, 0);
        assert_eq!(tl.markers.kept[0].kind, BreakKind::NewRun);
        assert_eq!(
            (tl.markers.kept[0].x0, tl.markers.kept[0].value),
            (2.0, Some(4))
        );
        assert!(!tl.joined());
    }

    #[test]
    fn gaps_and_outages_break_the_line_and_outages_are_placed_by_host_time() {
        let outages = vec![
            outage(1, 10_500, Some(14_200)),
            outage(2, 30_000, None), // never came back: after the last summary
        ];
        let mut tl = Timeline::new(Clock::Device, outages.clone());
        tl.summary(10_000, &summary(0, 1_000));
        // The link was down from 10.5 s to 14.2 s (host); summaries 1–4 lost.
        let at = tl.summary(15_000, &summary(5, 6_000));
        assert!(at.broken);
        assert_eq!(tl.breaks.gaps, 1);
        assert_eq!(tl.breaks.missing, 4);
        assert_eq!(tl.breaks.outages, 1);
        let m = tl.markers.kept[0];
        assert_eq!(m.kind, BreakKind::Outage);
        assert!(
            (m.x0 - 1.5).abs() < 1e-9 && (m.x1 - 5.2).abs() < 1e-9,
            "{m:?}"
        );
        assert_eq!(m.value, Some(3_700));
        assert!(!tl.summary(16_000, &summary(6, 7_000)).broken);
        tl.finish();
        assert_eq!(tl.breaks.outages, 2);
        let last = tl.markers.kept[1];
        assert_eq!((last.x0, last.x1, last.value), (21.0, 21.0, None));

        // On the host's clock, outages are where the host saw them.
        let mut tl = Timeline::new(Clock::Wall, outages);
        tl.summary(10_000, &summary(0, 1_000));
        let at = tl.summary(15_000, &summary(5, 6_000));
        assert_eq!((at.x, at.broken), (15.0, true));
        assert_eq!((tl.markers.kept[0].x0, tl.markers.kept[0].x1), (10.5, 14.2));
    }

    #[test]
    fn an_event_before_any_summary_sets_the_origin() {
        let mut tl = Timeline::new(Clock::Device, Vec::new());
        assert_eq!(tl.event(0, &event(4_000)).x, 4.0);
        assert_eq!(tl.summary(0, &summary(0, 5_000)).x, 5.0);
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

        // A cut ends an open span at its latest summary.
        let mut s = Spans::new(MAX_SPANS);
        s.push(1.0, true);
        s.push(2.0, true);
        s.cut();
        s.push(9.0, true);
        assert_eq!(s.all(), vec![(1.0, 2.0), (9.0, 9.0)]);

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

    fn device_axis() -> TimeAxis {
        TimeAxis {
            clock: Clock::Device,
            range: 0.0..600.0,
            unit: TimeUnit::Seconds,
            ticks: Vec::new(),
            desc: String::new(),
        }
    }

    fn mark(x: f64, t_ms: u32, kind: EventKind, session: u32) -> EventMark {
        EventMark {
            x,
            kind,
            t_ms,
            session,
            shifted: (x - f64::from(t_ms) / 1000.0).abs() > 1e-6,
        }
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
            m.push(mark(f64::from(i), i * 1000, kind, 1));
        }
        assert_eq!(m.counts, [5_000, 5_000, 0]);
        assert!(m.kept.kept.len() < MAX_MARKS_PER_RULE);
        assert!(m.kept.kept.len() > MAX_MARKS_PER_RULE / 4);
        let axis = device_axis();
        assert_eq!(
            event_words(RuleId::BeyondCarnot, &m, &axis, 1),
            "beyond_carnot: 5000 raised, 5000 cleared"
        );
        let mut few = Marks::default();
        few.push(mark(500.4, 500_400, EventKind::Raised, 1));
        assert_eq!(
            event_words(RuleId::BeyondCarnot, &few, &axis, 1),
            "beyond_carnot: raised 500.4 s"
        );
    }

    #[test]
    fn event_times_are_the_devices_as_watch_prints_them() {
        // `heatbound watch` prints `f64::from(t_ms) / 1000.0` with `{:.1}`.
        let axis = device_axis();
        let mut m = Marks::default();
        m.push(mark(500.45, 500_450, EventKind::Raised, 1));
        // In session 2, at 160.0 s on the axis, 20.3 s on the device clock.
        m.push(mark(160.0 + 20.3, 20_300, EventKind::Cleared, 2));
        let words = event_words(RuleId::BeyondCarnot, &m, &axis, 2);
        assert_eq!(
            words,
            format!(
                "beyond_carnot: raised {:.1} s (session 1), cleared 20.3 s (session 2, 180.3 s \
                 on the axis)",
                500.45f64
            )
        );
        let wall = TimeAxis {
            clock: Clock::Wall,
            range: 1_700_000_000.0..1_700_000_600.0,
            ..device_axis()
        };
        let mut m = Marks::default();
        m.push(mark(1_700_000_010.0, 500_400, EventKind::Raised, 1));
        assert_eq!(
            event_words(RuleId::NearCarnot, &m, &wall, 1),
            "near_carnot: raised 500.4 s (22:13:30 UTC)"
        );
    }

    #[test]
    fn the_time_unit_follows_the_span() {
        for (span, unit) in [
            (600.0, TimeUnit::Seconds),
            (1800.0, TimeUnit::Seconds),
            (1801.0, TimeUnit::Minutes),
            (36_000.0, TimeUnit::Minutes),
            (36_001.0, TimeUnit::Hours),
            (259_200.0, TimeUnit::Hours),
            (864_000.0, TimeUnit::Days),
        ] {
            assert_eq!(TimeUnit::for_span(span), unit, "{span} s");
        }
        // Ticks of a ten-day run: whole days, at most twelve.
        let u = TimeUnit::Days;
        let step = nice_step(864_000.0 / u.seconds(), 12.0, u.steps());
        assert_eq!(step, 1.0);
        let ticks = multiples(&(1.0..864_000.0), step * u.seconds());
        assert_eq!(ticks.len(), 10);
        assert_eq!(ticks.first(), Some(&86_400.0));
        // Five hours in minutes: every 30 min.
        let u = TimeUnit::Minutes;
        assert_eq!(nice_step(300.0, 12.0, u.steps()), 30.0);
        // A wall-clock day: every three hours, UTC-aligned.
        assert_eq!(nice_step(86_400.0, 9.0, &WALL_STEPS_S), 10_800.0);
        assert_eq!(nice_step(5.0, 12.0, TimeUnit::Seconds.steps()), 0.5);
    }

    #[test]
    fn on_the_wall_clock_every_frame_is_at_its_receive_time() {
        // A capture read from a file: everything received within 2 s.
        let mut data = ChartData::new(1, Clock::Wall, Vec::new());
        let t0 = 1_700_000_000_000; // 2023-11-14 22:13:20 UTC
        for i in 0..5u16 {
            let frame = Frame::Summary(summary(i, 1000 * (u32::from(i) + 476)));
            data.push(&Stored {
                host_ms: t0 + 500 * i64::from(i),
                frame,
            });
        }
        // An event 0.5 s of device time after the summary before it, read
        // with it: where the host got it, not extrapolated by device time.
        data.push(&Stored {
            host_ms: t0 + 2000,
            frame: Frame::Event(event(480_500)),
        });
        let mark = data.events[RuleId::BeyondCarnot.index()].kept.kept[0];
        assert_eq!((mark.x, mark.t_ms), (1_700_000_002.0, 480_500));
        // Ticks every half second, labelled to the tenth.
        let axis = TimeAxis::new(&data);
        let labels: Vec<&str> = axis.ticks.iter().map(|t| t.1.as_str()).collect();
        assert_eq!(
            labels,
            [
                "22:13:20.0",
                "22:13:20.5",
                "22:13:21.0",
                "22:13:21.5",
                "22:13:22.0"
            ]
        );
        assert_eq!(
            axis.desc,
            "host receive time, UTC (hh:mm:ss.s): 2023-11-14 22:13:20 – 22:13:22"
        );
    }

    #[test]
    fn utc_dates_follow_the_gregorian_calendar() {
        // Checked against GNU date: `date -u -d @SECONDS`.
        assert_eq!(
            Utc::of(0.0),
            Utc {
                year: 1970,
                month: 1,
                day: 1,
                hour: 0,
                minute: 0,
                second: 0
            }
        );
        let at = Utc::of(1_700_000_000.0);
        assert_eq!(
            (at.date(), at.hms()),
            ("2023-11-14".into(), "22:13:20".into())
        );
        let at = Utc::of(951_782_400.0); // a leap day
        assert_eq!(
            (at.date(), at.hms()),
            ("2000-02-29".into(), "00:00:00".into())
        );
        let at = Utc::of(4_102_444_799.9);
        assert_eq!(
            (at.date(), at.hms()),
            ("2099-12-31".into(), "23:59:59".into())
        );
        let at = Utc::of(-1.0);
        assert_eq!(
            (at.date(), at.hms()),
            ("1969-12-31".into(), "23:59:59".into())
        );
        // Absurd times (a tampered log) are clamped, never a panic.
        assert_eq!(Utc::of(f64::MAX).year, 9999);
        assert!(Utc::of(-1e300).year < -6000);
    }

    #[test]
    fn the_fonts_metrics_are_read_from_its_tables() {
        // Values read from host-tools/assets/DejaVuSans.ttf with Python's
        // struct module, by the OpenType layout of cmap 4, hmtx, loca, glyf
        // and kern.
        let m = glyphs::metrics().expect("the built-in font's metrics");
        let g = |c| m.glyph(c);
        assert_eq!((g('m'), g('w'), g('η'), g('Ṡ')), (80, 90, 844, 2398));
        assert_eq!((m.advance(g('m')), m.x_min(g('m'))), (1995.0, Some(186)));
        assert_eq!((m.advance(g('w')), m.x_min(g('w'))), (1675.0, Some(86)));
        assert_eq!(m.x_min(g(' ')), None);
        assert_eq!(m.kern(g('r'), g('m')), -36);
        assert_eq!(m.kern(g('T'), g('o')), -348);
        assert_eq!(m.kern(g('m'), g('w')), 0);
        // A character the font lacks is its missing glyph.
        assert_eq!(g('\u{10FFFF}'), 0);
        // ab_glyph scales by ascender − descender: 27 px puts 'm''s left
        // bearing at 2.11 px (as ab_glyph 0.2.32 reports it).
        assert!((186.0 * m.scale(27.0) - 2.107).abs() < 1e-3);
    }

    /// The widest run of blank pixel columns between the first and the last
    /// ink of `text` drawn at 27 px, whole (plotters) or glyph by glyph.
    fn widest_gap(text: &str, by_glyph: bool) -> usize {
        register_font().expect("font");
        let (w, h) = (400u32, 50u32);
        let mut buf = vec![255u8; (w * h * 3) as usize];
        {
            let root = BitMapBackend::with_buffer(&mut buf, (w, h)).into_drawing_area();
            let ink = Ink {
                glyphs: if by_glyph { glyphs::metrics() } else { None },
            };
            put(
                ink,
                &root,
                text,
                &font(27.0),
                (10, 10),
                (HPos::Left, VPos::Top),
                false,
            )
            .expect("drawn");
            root.present().expect("presented");
        }
        let inked: Vec<bool> = (0..w as usize)
            .map(|x| (0..h as usize).any(|y| buf[3 * (y * w as usize + x)] < 160))
            .collect();
        let first = inked.iter().position(|&i| i).unwrap_or(0);
        let last = inked.iter().rposition(|&i| i).unwrap_or(0);
        inked[first..=last]
            .split(|&i| i)
            .map(<[bool]>::len)
            .max()
            .unwrap_or(0)
    }

    #[test]
    fn firmware_is_one_word_on_the_bitmap() {
        // The font's design (its tables, read as in the test above): after
        // "firm" (advances 721 + 569 + 842 + 1995, kerning r–m −36 units)
        // the w's outline begins 86 units on, and the m's ends 186 units
        // before the w's pen: a 3.1 px gap at 27 px, the space 7.4 px.
        let m = glyphs::metrics().expect("metrics");
        let s = m.scale(27.0);
        let (set, _) = m.layout("firmware", 27.0);
        let w = set[4];
        assert_eq!(w.c, 'w');
        let w_outline = f64::from(w.ink_x.unwrap_or(0)) + (86.0 * s).fract();
        let design = (721.0 + 569.0 + 842.0 - 36.0 + 1995.0 + 86.0) * s;
        assert!((w_outline - design).abs() <= 0.5, "{w_outline} vs {design}");
        // Drawn: plotters' own setting drops the m's 2.1 px bearing and
        // opens a gap of 4 blank columns or more before the w ("firm ware");
        // glyph by glyph it stays as narrow as the font draws it.
        let whole = widest_gap("mw", false);
        let by_glyph = widest_gap("mw", true);
        assert!(whole >= 4, "plotters' own setting changed? gap {whole} px");
        assert!(by_glyph <= 3, "a {by_glyph} px gap between m and w");
        // A real space still shows.
        assert!(widest_gap("firm ware", true) >= 7);
    }

    #[test]
    fn footer_rows_never_overlap_and_fit_their_width() {
        let width = 1352;
        let long = "beyond_carnot: raised 500.4 s (session 2, 1234.5 s on the axis), \
                    acknowledged 501.1 s (session 2, 1235.2 s on the axis), cleared 546.0 s \
                    (session 2, 1280.1 s on the axis)";
        let entries: Vec<_> = (0..6)
            .map(|i| {
                let text = if i % 2 == 0 {
                    long.to_string()
                } else {
                    format!("rule_{i}: 3 raised, 2 cleared")
                };
                (
                    Some(Swatch::Line(palette::RULES[i], Dash::Solid)),
                    text,
                    palette::INK,
                )
            })
            .collect();
        let mut rows = Vec::new();
        flow(&mut rows, entries, width);
        assert!(rows.len() >= 4, "{}", rows.len());
        for row in &rows {
            let mut end = 0;
            for item in row {
                assert!(item.x >= end, "{row:?}");
                end = item.x
                    + if item.swatch.is_some() { SWATCH_PX } else { 0 }
                    + text_width(&item.text, FOOTER_FONT_PX).ceil() as i32;
                assert!(end <= width, "{end} > {width}: {row:?}");
            }
        }
        // Every word is still there, in order.
        let all: Vec<String> = rows.concat().into_iter().map(|i| i.text).collect();
        assert!(
            all.join(" ")
                .contains("cleared 546.0 s (session 2, 1280.1 s on the axis)")
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
    fn cold_side_temperature_and_powers_are_ratios_with_a_positive_denominator() {
        // DESIGN §4 / docs/log-schema.md: T_c = heat_out_j / entropy_out_j_per_k.
        assert_eq!(ratio(4200.0, 14.0), Some(300.0));
        assert_eq!(ratio(4200.0, 0.0), None);
        assert_eq!(ratio(4200.0, -1.0), None);
        assert_eq!(ratio(f32::NAN, 1.0), None);
        assert_eq!(ratio(f32::INFINITY, 1.0), None);
        assert_eq!(ratio(6000.0, 6.0), Some(1000.0));
        assert_eq!(power_unit(Some((0.0, 9_999.0))), (1.0, "W"));
        assert_eq!(power_unit(Some((-20_000.0, 0.0))), (1e3, "kW"));
        assert_eq!(power_unit(Some((0.0, 2e7))), (1e6, "MW"));
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
