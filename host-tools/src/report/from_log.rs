//! A report from one run of a log: the audit's checks, the Hello's
//! settings, the run totals and steady periods from windows that meet end
//! to end ([`super::tiles`]), the alarm timeline with the operators'
//! commands, and the chart.

use std::collections::BTreeMap;
use std::fs::File;
use std::path::Path;

use heatbound::alarm::{EventKind, RuleId};
use heatbound::config::RigConfig;
use heatbound::monitor::FigureSettings;
use heatbound::wire::{EventFrame, Frame, Hello, Verdict as WireVerdict};

use super::format::{count, duration, fixed, sig, utc};
use super::sections::{self, Extra};
use super::tiles::{Rec, Tiler};
use super::{
    AlarmRow, Alarms, Chart, Check, Fact, Kind, MAX_ALARM_ROWS, MAX_PERIODS, Outcome, Report,
    ReportError, RowKind, Steady, Totals, Verdict,
};
use crate::audit::{self, Report as Audit};
use crate::chart::{ChartOptions, Clock, svg_chart};
use crate::diagnosis_report::bias_text;
use crate::store::{CommandRow, Log, OutageRow, RunInfo, StoreError};

/// What one pass over the run's frames keeps: counts, sums and the few
/// rows the report names, so memory does not grow with the run.
pub(super) struct Read {
    first_hello: Option<Hello>,
    last_hello: Option<Hello>,
    hellos: u64,
    digests: Vec<u32>,
    summaries: u64,
    first: Option<Rec>,
    last: Option<Rec>,
    totals: Option<Tiler>,
    pub(super) steady: SteadyScan,
    /// Events with their host time and the segment they fell in.
    events: Vec<(i64, u32, EventFrame)>,
    replies: u64,
    unreadable: u64,
}

/// The figure settings, coverage factor and tolerance of the latest Hello
/// (or of `config` before any).
fn in_force(hello: Option<&Hello>, config: &RigConfig) -> (FigureSettings, f64, i64) {
    let settings = hello.map_or_else(|| FigureSettings::new(config), audit::hello_settings);
    let k = hello
        .map(|h| f64::from(h.coverage_factor))
        .filter(|k| k.is_finite() && *k > 0.0)
        .unwrap_or(config.coverage_factor);
    let tolerance_ms = hello.map_or(1, |h| i64::from(h.sample_period_ms / 2).max(1));
    (settings, k, tolerance_ms)
}

/// Makes the report of run `run` (default: the latest with summaries) of
/// the log at `path`, audited against `config` (the defaults, or the
/// user's `rig.toml`, for what the Hello does not carry).
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound::wire::{Frame, Hello, RigId, Summary};
/// use heatbound_host::store::Log;
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("log.sqlite");
/// let mut log = Log::open(&path).unwrap();
/// let run = log.begin_run("file:capture.bin", 1_700_000_000_000).unwrap();
/// let hello = Hello::from_config(RigId::new("bench-1").unwrap(), (1, 0, 0), 100, &RigConfig::default());
/// log.insert_frame(run, 1_700_000_000_000, &Frame::Hello(hello)).unwrap();
/// for seq in 0..3u16 {
///     let s = Summary { seq, t_ms: 1000 * (u32::from(seq) + 1), duration_s: 1.0,
///                       heat_in_j: 1000.0, work_j: 300.0, heat_out_j: 700.0,
///                       entropy_in_j_per_k: 2.0, entropy_out_j_per_k: 2.8, ..Summary::default() };
///     log.insert_frame(run, 1_700_000_001_000 + 1000 * i64::from(seq), &Frame::Summary(s)).unwrap();
/// }
/// log.end_run(run, 1_700_000_004_000).unwrap();
/// drop(log);
/// let report = heatbound_host::report::from_log(&path, None, &RigConfig::default()).unwrap();
/// assert!(report.facts.iter().any(|f| f.value.contains("bench-1")));
/// // Three one-second windows that meet end to end: 3 kJ in.
/// assert!(report.totals.rows.iter().any(|r| r.symbol == "Q_in" && r.value.starts_with("3.0")));
/// ```
pub fn from_log(path: &Path, run: Option<i64>, config: &RigConfig) -> Result<Report, ReportError> {
    // The OS's own words for a missing or unreadable file, before SQLite's.
    let open_err = |source| ReportError::Open {
        path: path.to_path_buf(),
        source,
    };
    let file = File::open(path).map_err(open_err)?;
    if file.metadata().map_err(open_err)?.is_dir() {
        return Err(open_err(std::io::Error::other("is a directory")));
    }
    drop(file);
    let log = Log::open_read(path)?;
    let runs = log.runs()?;
    let info = pick_run(path, &runs, run)?;
    let audit = audit::audit_log(&log, Some(info.id), config)?;
    let mut read = read_frames(&log, info.id, config, Times::Device)?;
    let commands = log.commands(info.id)?;
    let outages = log.outages(info.id)?;
    drop(log);

    let (settings, k, _) = in_force(read.last_hello.as_ref(), config);
    let measured = read
        .last
        .as_ref()
        .is_some_and(|r| r.summary.status.heat_out_measured);
    let mut tiler = read.totals.take().unwrap_or_default();
    let integrals = tiler.finish();
    let metrics = integrals.metrics(&settings);
    let budget = integrals.budget(&settings);
    let mut notes = vec![format!(
        "From a log: a Summary carries its sliding window, so the run's integrals are the sum of \
         {} taken one after another without overlap, {} of integrated time over {} of the record.",
        count(tiler.windows, "window", "windows"),
        duration(tiler.covered_s),
        duration(tiler.span_s)
    )];
    if tiler.uncovered_s > 0.0 {
        notes.push(format!(
            "{} of the record lies in no window taken: {} between windows (where a window is not \
             a whole number of summary periods long, or summaries are missing), and the end of \
             each session after its last window. The energies, S_gen and the exergy are over the \
             time covered; the ratios are unaffected.",
            duration(tiler.uncovered_s),
            count(tiler.breaks, "gap", "gaps"),
        ));
    }
    notes.push(
        "The wire does not carry the sensitivity integrals (∫q_in/T_hot² dt and the like); each \
         window's are taken at its own mean temperatures, exact for temperatures constant within \
         one window."
            .to_owned(),
    );
    if read.last_hello.is_none() {
        notes.push(
            "No Hello in the run: the settings and uncertainties are the report's configuration's."
                .to_owned(),
        );
    }
    if read.digests.len() > 1 {
        notes.push(
            "The configuration changed during the run: every window is taken with the last \
             Hello's settings and uncertainties."
                .to_owned(),
        );
    }
    let totals = Totals {
        figures: metrics,
        k,
        rows: sections::total_rows(&metrics, &Extra::of(&budget), k, &settings, measured),
        notes,
    };
    let budgets = sections::budget_tables(&budget, &metrics, k, settings.mode, measured);

    let chart = match svg_chart(
        path,
        &ChartOptions {
            run: Some(info.id),
            clock: Clock::Device,
        },
    ) {
        Ok(c) => Chart::Svg {
            svg: c.svg,
            caption: format!(
                "Run {}, {} summaries, device time {}–{} s. Lines break at link outages, \
                 restarts, new runs and missing summaries; second-law alarms are shaded.",
                c.run,
                c.summaries,
                fixed(Some(c.t_s.0), 1),
                fixed(Some(c.t_s.1), 1)
            ),
        },
        Err(e) => Chart::None(format!(
            "The chart could not be drawn: {}",
            crate::term::error_line(&e)
        )),
    };

    let name = path.display().to_string();
    Ok(Report {
        kind: Kind::Log,
        title: format!("Run {} of {}", info.id, file_name(path)),
        input: name.clone(),
        facts: facts(&name, info, &runs, &read, &audit, &settings, k),
        losses: losses(&audit, &outages, &read),
        verdict: verdict(&audit),
        totals,
        budgets,
        budget_notes: sections::budget_notes(),
        steady: read.steady.finish(),
        alarms: alarms(&read, &commands),
        chart,
    })
}

/// The file's name, for the title.
pub(super) fn file_name(path: &Path) -> String {
    path.file_name().map_or_else(
        || path.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    )
}

/// The run asked for, or the latest with summaries.
fn pick_run<'a>(
    path: &Path,
    runs: &'a [RunInfo],
    run: Option<i64>,
) -> Result<&'a RunInfo, ReportError> {
    match run {
        Some(id) => {
            let Some(info) = runs.iter().find(|r| r.id == id) else {
                let held = match (runs.first(), runs.last()) {
                    (Some(a), Some(b)) if a.id == b.id => format!("it holds run {}", a.id),
                    (Some(a), Some(b)) => format!("it holds runs {} to {}", a.id, b.id),
                    _ => "it holds no runs".to_owned(),
                };
                return Err(ReportError::NoSuchRun {
                    path: path.to_path_buf(),
                    run: id,
                    held,
                });
            };
            if info.summaries == 0 {
                return Err(ReportError::NoSummaries {
                    path: path.to_path_buf(),
                    run: id,
                });
            }
            Ok(info)
        }
        None => runs.iter().rev().find(|r| r.summaries > 0).ok_or_else(|| {
            ReportError::NothingToReport {
                path: path.to_path_buf(),
            }
        }),
    }
}

/// One pass over the run's frames, steady periods timed as `times` says.
/// Rows that cannot be frames are counted and skipped: the audit reports
/// them.
pub(super) fn read_frames(
    log: &Log,
    run: i64,
    config: &RigConfig,
    times: Times,
) -> Result<Read, ReportError> {
    let mut r = Read {
        first_hello: None,
        last_hello: None,
        hellos: 0,
        digests: Vec::new(),
        summaries: 0,
        first: None,
        last: None,
        totals: None,
        steady: SteadyScan {
            times,
            ..SteadyScan::default()
        },
        events: Vec::new(),
        replies: 0,
        unreadable: 0,
    };
    let mut segment = 0u32;
    let mut boot: Option<(u32, u32)> = None;
    let mut new_boot = false;
    for stored in log.frames(run)? {
        let stored = match stored {
            Ok(s) => s,
            Err(StoreError::ImpossibleValue(_) | StoreError::BadRow { .. }) => {
                r.unreadable += 1;
                continue;
            }
            Err(e) => return Err(e.into()),
        };
        match stored.frame {
            Frame::Hello(h) => {
                let key = (h.session, h.run);
                new_boot |= boot.is_some_and(|b| b != key);
                boot = Some(key);
                r.hellos += 1;
                if !r.digests.contains(&h.config_digest) {
                    r.digests.push(h.config_digest);
                }
                if r.first_hello.is_none() {
                    r.first_hello = Some(h);
                }
                r.last_hello = Some(h);
            }
            Frame::Summary(s) => {
                let end_ms = match &r.last {
                    Some(p) if !new_boot => {
                        let d = s.t_ms.wrapping_sub(p.summary.t_ms);
                        // The device clock went back (or stood): a restart.
                        if d == 0 || d > u32::MAX / 2 {
                            segment += 1;
                            i64::from(s.t_ms)
                        } else {
                            p.end_ms.saturating_add(i64::from(d))
                        }
                    }
                    Some(_) => {
                        segment += 1;
                        i64::from(s.t_ms)
                    }
                    None => i64::from(s.t_ms),
                };
                new_boot = false;
                let rec = Rec {
                    summary: s,
                    host_ms: stored.host_ms,
                    end_ms,
                    segment,
                };
                let (settings, k, tolerance_ms) = in_force(r.last_hello.as_ref(), config);
                r.totals
                    .get_or_insert_with(|| Tiler::new(tolerance_ms))
                    .push(&rec);
                r.steady.push(&rec, &settings, k, tolerance_ms);
                r.summaries += 1;
                if r.first.is_none() {
                    r.first = Some(rec);
                }
                r.last = Some(rec);
            }
            Frame::Event(e) => r.events.push((stored.host_ms, segment, e)),
            Frame::Reply(_) => r.replies += 1,
        }
    }
    Ok(r)
}

/// The header's facts.
fn facts(
    name: &str,
    info: &RunInfo,
    runs: &[RunInfo],
    read: &Read,
    audit: &Audit,
    settings: &FigureSettings,
    k: f64,
) -> Vec<Fact> {
    let mut f = vec![
        Fact::new("Log", name),
        Fact::new(
            "Run",
            format!(
                "{} ({} of the log): {}, written by heatbound {}",
                info.id,
                count(u64::try_from(runs.len()).unwrap_or(0), "run", "runs"),
                info.source,
                info.tool_version
            ),
        ),
    ];
    match &read.last_hello {
        Some(h) => {
            let (a, b, c) = h.firmware_version;
            f.push(Fact::new("Rig", h.rig_id.as_str()));
            f.push(Fact::new("Firmware", format!("{a}.{b}.{c}")));
            let digests: Vec<String> = read.digests.iter().map(|d| format!("{d:08x}")).collect();
            let matches = match audit.integrity.config_digest_matches {
                Some(true) => " (the audit's configuration has the same digest)",
                Some(false) => " (differs from the audit's configuration: give --config rig.toml)",
                None => "",
            };
            f.push(Fact::new(
                "Configuration digest",
                if digests.len() > 1 {
                    format!("changed during the run: {}", digests.join(", "))
                } else {
                    format!("{}{matches}", digests.join(", "))
                },
            ));
            f.push(Fact::new(
                "Sampling",
                format!(
                    "every {} ms; window of {} samples",
                    h.sample_period_ms, h.window_samples
                ),
            ));
            f.push(Fact::new(
                "UA (heat lost to the room)",
                h.losses.map_or_else(
                    || "learned by the controller from a steady window".to_owned(),
                    |(ua, u)| {
                        format!(
                            "configured: {} ± {} W/K (standard)",
                            sig(f64::from(ua), 3),
                            sig(f64::from(u), 2)
                        )
                    },
                ),
            ));
        }
        None => f.push(Fact::new(
            "Rig",
            "unknown: no Hello in the run (rig, firmware and configuration digest travel in it)",
        )),
    }
    f.push(Fact::new("Mode", settings.mode.as_str().replace('_', " ")));
    f.push(Fact::new(
        "Uncertainties",
        sections::uncertainty_words(settings),
    ));
    f.push(Fact::new("Coverage factor", format!("k = {}", sig(k, 3))));
    let (first, last) = (read.first.as_ref(), read.last.as_ref());
    if let (Some(a), Some(b)) = (first, last) {
        let segments = b.segment + 1;
        f.push(Fact::new(
            "Time span",
            format!(
                "{} to {} ({}); device time t = {}–{} s{}",
                utc(a.host_ms),
                utc(b.host_ms),
                duration(b.host_ms.saturating_sub(a.host_ms) as f64 / 1000.0),
                fixed(Some(f64::from(a.summary.t_ms) / 1000.0), 1),
                fixed(Some(f64::from(b.summary.t_ms) / 1000.0), 1),
                if segments > 1 {
                    format!(", in {segments} sessions (restarts or new runs)")
                } else {
                    String::new()
                }
            ),
        ));
    }
    let n = read.summaries;
    f.push(Fact::new(
        "Summaries",
        format!(
            "{} ({}, {}, {})",
            n,
            count(read.hellos, "Hello", "Hellos"),
            count(
                u64::try_from(read.events.len()).unwrap_or(0),
                "event",
                "events"
            ),
            count(read.replies, "reply", "replies")
        ),
    ));
    f.push(Fact::new(
        "Run closed",
        match info.ended_host_ms {
            Some(e) => format!("yes, at {}", utc(e)),
            None => "no: the logger stopped without closing the run".to_owned(),
        },
    ));
    f
}

/// Losses and gaps: what the logger and the audit counted.
fn losses(audit: &Audit, outages: &[OutageRow], read: &Read) -> Vec<Fact> {
    let g = &audit.integrity;
    let lost = g.crc_errors + g.overlong + g.malformed + g.unknown_version;
    let mut f = vec![
        Fact::new(
            "Frames lost",
            format!(
                "{lost} ({} bad CRC, {} overlong, {} malformed, {} unknown version); {} bytes \
                 discarded",
                g.crc_errors, g.overlong, g.malformed, g.unknown_version, g.bytes_discarded
            ),
        ),
        Fact::new(
            "Summaries missing",
            format!("{} (sequence gaps)", g.missing_summaries),
        ),
        Fact::new(
            "Duplicates and replays",
            format!(
                "{} duplicate, {} replayed (sent again after a reconnection, not counted twice)",
                g.duplicates, g.replayed
            ),
        ),
        Fact::new(
            "Controller restarts",
            format!(
                "{} ({} without a Hello)",
                g.restarts, g.unannounced_restarts
            ),
        ),
        Fact::new("Link errors", g.link_errors.to_string()),
    ];
    let down: f64 = outages
        .iter()
        .filter_map(|o| {
            o.ended_host_ms
                .map(|e| e.saturating_sub(o.started_host_ms) as f64 / 1000.0)
        })
        .filter(|s| *s >= 0.0)
        .sum();
    let mut text = format!(
        "{}, {} in all",
        count(
            u64::try_from(outages.len()).unwrap_or(0),
            "outage",
            "outages"
        ),
        duration(down)
    );
    for o in outages.iter().take(5) {
        text.push_str(&format!(
            "; {} for {} ({})",
            utc(o.started_host_ms),
            o.ended_host_ms.map_or_else(
                || "the rest of the run".to_owned(),
                |e| duration(e.saturating_sub(o.started_host_ms) as f64 / 1000.0)
            ),
            o.reason
        ));
    }
    if outages.len() > 5 {
        text.push_str(&format!("; and {} more", outages.len() - 5));
    }
    f.push(Fact::new("Link outages", text));
    if read.unreadable > 0 {
        f.push(Fact::new(
            "Rows that are no frame",
            format!("{} (left out here; the audit lists them)", read.unreadable),
        ));
    }
    f
}

/// The audit's verdict and its five checks.
fn verdict(a: &Audit) -> Verdict {
    let pass = |p: bool| if p { Outcome::Pass } else { Outcome::Fail };
    let g = &a.integrity;
    let r = &a.recomputation;
    let s = &a.second_law;
    let c = &a.alarm_consistency;
    let d = &a.diagnosis;
    let finding = |f: &audit::Finding| {
        let seq = f.seq.map_or_else(String::new, |s| format!("seq {s}, "));
        let rule = f.rule.map_or_else(String::new, |r| format!("{r}: "));
        format!("{seq}t = {} s: {rule}{}", fixed(Some(f.t_s), 1), f.message)
    };
    let checks = vec![
        Check {
            name: "Integrity".to_owned(),
            outcome: pass(g.pass),
            summary: format!(
                "{} frames ({} Hello, {} summaries, {} events, {} replies); nothing may be lost, \
                 missing, duplicated or unannounced, and a Hello must come first",
                g.frames, g.hellos, g.summaries, g.events, g.replies
            ),
            details: g.problems.clone(),
        },
        Check {
            name: "Recomputation".to_owned(),
            outcome: pass(r.pass),
            summary: format!(
                "{} summaries, {} figures recomputed from their integrals with the core's own \
                 code: {} mismatches (tolerance {} relative)",
                r.summaries,
                r.figures,
                r.mismatches,
                sig(r.relative_tolerance, 1)
            ),
            details: r
                .first_mismatches
                .iter()
                .map(|m| {
                    format!(
                        "seq {}, t = {} s: {} device {} recomputed {}",
                        m.seq,
                        fixed(Some(m.t_s), 1),
                        m.figure,
                        super::format::opt_sig(m.device, 7),
                        super::format::opt_sig(m.recomputed, 7)
                    )
                })
                .collect(),
        },
        Check {
            name: "Second law".to_owned(),
            outcome: pass(s.pass),
            summary: format!(
                "{} evaluable summaries, {} violations, {} flagged by the device, {} unflagged \
                 ({})",
                s.evaluable, s.violations, s.flagged, s.unflagged, s.rule
            ),
            details: s.first_unflagged.iter().map(finding).collect(),
        },
        Check {
            name: "Alarm consistency".to_owned(),
            outcome: pass(c.pass),
            summary: format!(
                "{} activations: {} unsupported, {} missed, {} stuck, {} event/bit \
                 disagreements",
                c.activations, c.unsupported, c.missed, c.stuck, c.event_bit_disagreements
            ),
            details: c.findings.iter().map(finding).collect(),
        },
        Check {
            name: "Diagnosis".to_owned(),
            outcome: pass(d.pass),
            summary: format!(
                "{} verdicts recomputed, {} mismatches; the device found {} inconsistent \
                 windows, {} with a suspect",
                d.compared, d.mismatches, d.inconsistent, d.with_suspect
            ),
            details: d.first_mismatches.iter().map(finding).collect(),
        },
    ];
    Verdict {
        pass: Some(a.trustworthy),
        headline: if a.trustworthy {
            "Trustworthy".to_owned()
        } else {
            "NOT trustworthy".to_owned()
        },
        basis: "The audit of the log (as `heatbound audit` makes it): the record can be trusted \
                only if every check passes."
            .to_owned(),
        checks,
    }
}

/// When an alarm was raised: on the device's clock, and the host's.
#[derive(Clone, Copy)]
struct Since {
    segment: u32,
    t_ms: u32,
    host_ms: i64,
}

impl Since {
    /// Milliseconds from `self` to `then`: on the device's clock within one
    /// session (a demo plays faster than the wall clock), else the host's.
    fn until(&self, then: &Since) -> i64 {
        if self.segment == then.segment {
            i64::from(then.t_ms.wrapping_sub(self.t_ms))
        } else {
            then.host_ms.saturating_sub(self.host_ms).max(0)
        }
    }
}

/// The diagnosis a controller attached to an event, in words.
pub(super) fn verdict_words(v: &WireVerdict) -> String {
    match v.consistent {
        None => "no diagnosis (no window yet)".to_owned(),
        Some(true) => "readings consistent within k·u".to_owned(),
        Some(false) => match (v.suspect, v.bias) {
            (Some(c), Some(b)) if b.is_finite() => format!(
                "readings inconsistent: check {} ({} explains it)",
                c.name(),
                bias_text(c, f64::from(b))
            ),
            (Some(c), _) => format!("readings inconsistent: check {}", c.name()),
            (None, _) => "readings inconsistent: no single sensor explains it".to_owned(),
        },
    }
}

/// How a steady period's times are written.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub(super) enum Times {
    /// A log's: the device's clock, and the host's (UTC) when it began.
    #[default]
    Device,
    /// A CSV file's own: `first_s` (the file's first time, s) on from the
    /// controller's clock, which counts from the first row; UTC when the
    /// file's times are dates (`unix`).
    File {
        /// The file's first time, s.
        first_s: f64,
        /// Whether the file's times are Unix seconds.
        unix: bool,
    },
}

/// Steady periods, found as the log is read: runs of summaries with the
/// device's steady flag, in one session and with no summary missing, each
/// with its figures over the windows that tile it.
#[derive(Default)]
pub(super) struct SteadyScan {
    /// How the periods' times are written.
    times: Times,
    /// The period being read.
    open: Option<Period>,
    /// Periods found, with their length in ms; the longest kept past
    /// [`MAX_PERIODS`].
    periods: Vec<(i64, i64, super::SteadyPeriod)>,
    /// Periods left out.
    more: usize,
    /// Time read, and time with the flag on, ms.
    total_ms: i64,
    steady_ms: i64,
    prev: Option<Rec>,
}

/// A steady period being read.
struct Period {
    tiler: Tiler,
    first: Rec,
    last: Rec,
    summaries: u64,
    settings: FigureSettings,
    k: f64,
}

impl SteadyScan {
    fn push(&mut self, r: &Rec, settings: &FigureSettings, k: f64, tolerance_ms: i64) {
        // Each summary stands for the time since the one before.
        let (continues, period) = match &self.prev {
            Some(p) if p.segment == r.segment => (
                p.summary.seq.wrapping_add(1) == r.summary.seq,
                r.end_ms.saturating_sub(p.end_ms),
            ),
            _ => (false, r.end_ms.saturating_sub(r.start_ms())),
        };
        self.total_ms = self.total_ms.saturating_add(period);
        if !continues || !r.summary.status.steady {
            self.close();
        }
        if r.summary.status.steady {
            self.steady_ms = self.steady_ms.saturating_add(period);
            let open = self.open.get_or_insert_with(|| Period {
                tiler: Tiler::new(tolerance_ms),
                first: *r,
                last: *r,
                summaries: 0,
                settings: *settings,
                k,
            });
            open.tiler.push(r);
            open.last = *r;
            open.summaries += 1;
        }
        self.prev = Some(*r);
    }

    /// Ends the period being read, if any.
    fn close(&mut self) {
        let Some(mut p) = self.open.take() else {
            return;
        };
        let device_s = |r: &Rec| f64::from(r.summary.t_ms) / 1000.0;
        let (from, to, wall) = match self.times {
            Times::Device => {
                let when = |r: &Rec| format!("{} s", fixed(Some(device_s(r)), 1));
                (when(&p.first), when(&p.last), utc(p.first.host_ms))
            }
            Times::File { first_s, unix } => {
                let when = |r: &Rec| {
                    if unix {
                        super::from_csv::at(first_s + device_s(r), true)
                    } else {
                        format!("{} s", fixed(Some(first_s + device_s(r)), 1))
                    }
                };
                (when(&p.first), when(&p.last), String::new())
            }
        };
        let m = p.tiler.finish().metrics(&p.settings);
        let cells = sections::steady_cells(&m, p.k, p.settings.mode, from, to, wall, p.summaries);
        let length = p.last.end_ms.saturating_sub(p.first.end_ms);
        self.periods.push((p.first.host_ms, length, cells));
        if self.periods.len() >= 2 * MAX_PERIODS {
            self.keep_longest();
        }
    }

    /// Keeps the [`MAX_PERIODS`] longest periods, in time order.
    fn keep_longest(&mut self) {
        let excess = self.periods.len().saturating_sub(MAX_PERIODS);
        if excess == 0 {
            return;
        }
        // The longest periods are the ones a report quotes.
        self.periods
            .sort_by_key(|(_, len, _)| std::cmp::Reverse(*len));
        self.periods.truncate(MAX_PERIODS);
        self.periods.sort_by_key(|(at, _, _)| *at);
        self.more += excess;
    }

    pub(super) fn finish(&mut self) -> Steady {
        self.close();
        self.keep_longest();
        let note = match self.times {
            Times::Device => {
                "A period runs from the first summary with the device's steady flag on to the \
                 last, within one session and with no summary missing. Its figures are over the \
                 windows that meet end to end from its first summary on, that summary's window \
                 reaching back before the flag came on (the steady test looks back too), with \
                 the settings of the Hello in force."
            }
            Times::File { .. } => {
                "A period runs from the first summary with the steady flag on to the last, at \
                 the file's times. Its figures are over the windows that meet end to end from \
                 its first summary on, that summary's window reaching back before the flag came \
                 on (the steady test looks back too)."
            }
        };
        Steady {
            fraction: (self.total_ms > 0).then(|| self.steady_ms as f64 / self.total_ms as f64),
            periods: std::mem::take(&mut self.periods)
                .into_iter()
                .map(|(_, _, p)| p)
                .collect(),
            more: self.more,
            note: Some(note.to_owned()),
        }
    }
}

/// The alarm timeline, with the commands sent to the controller, in the
/// order the host received them; and per rule, how often and how long.
fn alarms(read: &Read, commands: &[CommandRow]) -> Alarms {
    let sessions = read.last.as_ref().map_or(0, |r| r.segment) + 1;
    let mut rows: Vec<(i64, AlarmRow)> = Vec::new();
    // Per rule: raised, acknowledged, ms active, and where the open one began.
    let mut per: BTreeMap<&'static str, (u64, u64, i64, Option<Since>)> = BTreeMap::new();
    for (host_ms, segment, e) in &read.events {
        let ev = &e.event;
        let kind = match ev.kind {
            EventKind::Raised => RowKind::Raised,
            EventKind::Cleared => RowKind::Cleared,
            EventKind::Acknowledged => RowKind::Acknowledged,
        };
        let entry = per.entry(ev.rule.as_str()).or_insert((0, 0, 0, None));
        let now = Since {
            segment: *segment,
            t_ms: ev.t_ms,
            host_ms: *host_ms,
        };
        match ev.kind {
            EventKind::Raised => {
                entry.0 += 1;
                entry.3.get_or_insert(now);
            }
            EventKind::Acknowledged => entry.1 += 1,
            EventKind::Cleared => {
                if let Some(since) = entry.3.take() {
                    entry.2 += since.until(&now);
                }
            }
        }
        let session = if sessions > 1 {
            format!(" (session {})", segment + 1)
        } else {
            String::new()
        };
        rows.push((
            *host_ms,
            AlarmRow {
                device_time: format!(
                    "t = {} s{session}",
                    fixed(Some(f64::from(ev.t_ms) / 1000.0), 1)
                ),
                wall_time: utc(*host_ms),
                rule: ev.rule.as_str().to_owned(),
                kind,
                severity: ev.severity.to_string(),
                detail: if ev.kind == EventKind::Raised {
                    verdict_words(&e.verdict)
                } else {
                    String::new()
                },
            },
        ));
    }
    let end = read.last.as_ref().map(|r| Since {
        segment: r.segment,
        t_ms: r.summary.t_ms,
        host_ms: r.host_ms,
    });
    for c in commands {
        let reply = match (c.reply_host_ms, &c.reply_code) {
            (Some(t), Some(code)) => {
                let after = duration(t.saturating_sub(c.host_ms) as f64 / 1000.0);
                if code.to_string() == c.outcome {
                    format!("{}: replied after {after}", c.outcome)
                } else {
                    format!("{}: replied {code} after {after}", c.outcome)
                }
            }
            _ => c.outcome.clone(),
        };
        rows.push((
            c.host_ms,
            AlarmRow {
                device_time: "—".to_owned(),
                wall_time: utc(c.host_ms),
                rule: format!("{} {}", c.command, c.detail).trim().to_owned(),
                kind: RowKind::Command,
                severity: format!("by {}", c.origin),
                detail: reply,
            },
        ));
    }
    rows.sort_by_key(|(t, _)| *t);
    let more = rows.len().saturating_sub(MAX_ALARM_ROWS);
    let per_rule = per
        .iter()
        .map(|(rule, (raised, acked, active_ms, open))| {
            let active = active_ms + open.zip(end).map_or(0, |(since, end)| since.until(&end));
            Fact::new(
                *rule,
                format!(
                    "raised {}, acknowledged {}, active {} in all{}",
                    count(*raised, "time", "times"),
                    count(*acked, "time", "times"),
                    duration(active as f64 / 1000.0),
                    if open.is_some() {
                        " (still active at the end)"
                    } else {
                        ""
                    }
                ),
            )
        })
        .collect();
    let rule_ids = RuleId::ALL.map(RuleId::as_str).join(", ");
    Alarms {
        per_rule,
        rows: rows
            .into_iter()
            .take(MAX_ALARM_ROWS)
            .map(|(_, r)| r)
            .collect(),
        more,
        note: Some(format!(
            "Device times are the controller's, as `heatbound watch` printed them; host times \
             are when the logger received each frame. At each raise, the controller's diagnosis \
             of that window. Commands are what operators sent through the process holding the \
             link, with the controller's reply. Rules: {rule_ids}."
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use heatbound::monitor::Channel;

    #[test]
    fn verdicts_in_words() {
        let v = WireVerdict {
            consistent: Some(false),
            suspect: Some(Channel::Hot),
            bias: Some(-35.25),
        };
        assert_eq!(
            verdict_words(&v),
            "readings inconsistent: check hot (-35.2 K explains it)"
        );
        assert_eq!(
            verdict_words(&WireVerdict::default()),
            "no diagnosis (no window yet)"
        );
    }
}
