//! The audit engine: re-checks a received frame stream and decides whether
//! the record can be trusted. Pure: frames in, [`Report`] out, no I/O.
//!
//! Data flow (DESIGN.md §2, host side):
//!
//! ```text
//! capture bytes --wire::Decoder--> Received frames + DecoderStats --+
//! log database  --store reader---> Received frames + link errors  --+--> audit() --> Report
//! ```
//!
//! Five checks, each a section of the report:
//!
//! 1. **Integrity.** No frame lost (CRC, overlong, malformed, unknown
//!    version), no summary missing, duplicated or reordered, no restart that
//!    no Hello announced, no link error, and a Hello before the first
//!    summary (without it the settings of the figures are unknown).
//! 2. **Recomputation.** Each summary's figures are recomputed from its raw
//!    integrals with the core's own [`Integrals::metrics`](heatbound::monitor::Integrals::metrics),
//!    in f32 like the controller, with the latest Hello's settings, and
//!    compared with the device's T0 and σ̇ (T_h, η or COP and its bound no
//!    longer travel: they follow from the integrals alone). See
//!    [`REL_TOL`] for the tolerance.
//! 3. **Second law.** A summary *violates* it when σ̇ < −k·u(σ̇) or
//!    η − η_C > k·u(margin) (recomputed figures, the device's
//!    uncertainties, k from the Hello). A violation is *flagged* when the
//!    device had a second-law alarm (`beyond_carnot` or
//!    `negative_entropy_production`) active in that summary, or the
//!    violation began no longer ago than that alarm's on-delay plus one
//!    summary period (the alarm is legitimately still pending). The
//!    section fails on any unflagged violation: a record that claims an
//!    impossible engine without saying so cannot be trusted. Flagged
//!    violations are counted and reported, but the record is honest.
//! 4. **Alarm consistency.** The two second-law rules are replayed at
//!    summary granularity with [`Limits::verdicts`] on the recomputed
//!    figures. An alarm that becomes active (alarm bit or `raised` event)
//!    needs a summary with the rule's condition in the preceding on-delay
//!    plus one summary period; a condition seen in consecutive summaries
//!    for longer than on-delay plus one period needs the alarm active; a
//!    non-latching alarm still active after its condition was clear for
//!    longer than off-delay plus one period is stuck. Events and alarm bits
//!    must agree. The device evaluates every sample and the host sees one
//!    summary per period, so one period of slack is allowed each way.
//!
//! 5. **Diagnosis.** Each summary's verdict (consistent or not, the
//!    suspect and its bias) is recomputed from its raw integrals with the
//!    Hello's uncertainties and UA, in f32 like the controller
//!    ([`crate::verdict_check`]), and compared: an honest controller's
//!    verdict is reproduced exactly.
//!
//! The delays, deadbands and latching come from the audit's configuration
//! (defaults, or `--config`) with every setting the Hello carries taken
//! from the Hello; the Hello's config digest says whether the result is
//! the device's configuration.
use heatbound::alarm::{AlarmInputs, EventKind, Limits, RuleId, Verdict};
use heatbound::config::{RigConfig, Uncertainty};
use heatbound::monitor::{AlarmFigures, Faults, FigureSettings, Metrics};
use heatbound::wire::{DecoderStats, Frame, Hello, Link, LinkTracker, Summary};
use serde::Serialize;

use crate::store::{Impossible, LinkErrorKind, Log, RunId, StoreError};

/// Relative tolerance of the recomputation, against the larger of the two
/// values and the magnitude of the terms that form the figure.
///
/// Device and host evaluate the same f32 formulas on the same integrals, so
/// they normally agree to the last bit. They may differ by a few ulps where
/// the host must rebuild an input (the default T0 travels as a value and is
/// turned back into a time integral) and where a figure is a difference of
/// large terms (σ̇ = (S_out + Q_loss/T0 − S_in)/Δt). 1e-5 is about 80 f32
/// ulps of the largest term: well above rounding, far below any tampering
/// or formula change that matters (≥ 1e-4 of a figure).
pub const REL_TOL: f64 = 1e-5;

/// Absolute floor of the recomputation tolerance, in the figure's unit, so
/// that figures at zero compare.
pub const ABS_TOL: f64 = 1e-9;

/// How many findings each section lists (the counts are complete).
pub const MAX_LISTED: usize = 5;

/// One frame as received, with the host's receive time when known.
#[derive(Clone, Debug, PartialEq)]
pub struct Received {
    /// Host clock at reception, ms since the Unix epoch; `None` for a raw
    /// capture.
    pub host_ms: Option<i64>,
    /// The frame.
    pub frame: Frame,
}

/// A link error the logger recorded (port error, disconnect).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LinkError {
    /// Host clock, ms since the Unix epoch, when known.
    pub host_ms: Option<i64>,
    /// What happened.
    pub message: String,
}

/// Everything the audit looks at.
#[derive(Clone, Copy, Debug)]
pub struct Input<'a> {
    /// The frames, in the order received.
    pub frames: &'a [Received],
    /// The decoder's counts of frames and losses.
    pub decoder: DecoderStats,
    /// Link errors the logger recorded.
    pub link_errors: &'a [LinkError],
}

/// What a log adds to its frames: how the run ended, rows that cannot be
/// frames, and what the logger recorded besides the frames. A raw capture
/// has none of these ([`LogFacts::default`]).
#[derive(Clone, Debug, Default)]
pub struct LogFacts {
    /// Whether the writer closed the run (`runs.ended_host_ms` set);
    /// `None` for a raw capture.
    pub closed: Option<bool>,
    /// Rows no frame can be, or counts no logger writes (the log was
    /// altered), one readable line each.
    pub tampered: Vec<String>,
    /// Indices into [`Input::frames`] of summaries that stand in for a
    /// tampered row: only their sequence number and device time are used.
    pub placeholders: Vec<usize>,
    /// Summaries the logger recognised as replayed and did not store.
    pub replayed: u64,
}

/// Why a log could not be audited at all.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum LogAuditError {
    /// The log could not be read.
    #[error(transparent)]
    Store(Box<StoreError>),
    /// The run asked for is not in the log.
    #[error("{path}: no run {run} in the log")]
    NoSuchRun {
        /// The database file.
        path: String,
        /// The run asked for.
        run: RunId,
    },
    /// The log holds no runs.
    #[error("{path}: the log holds no runs")]
    NoRuns {
        /// The database file.
        path: String,
    },
}

impl From<StoreError> for LogAuditError {
    fn from(e: StoreError) -> Self {
        LogAuditError::Store(Box::new(e))
    }
}

/// Where a record that was never closed ends.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct RecordEnd {
    /// Sequence number of the last summary, if any.
    pub seq: Option<u16>,
    /// Device time of the last frame with one, s.
    pub t_s: Option<f64>,
    /// Host receive time of the last frame, Unix ms.
    pub host_ms: Option<i64>,
}

/// The audit's verdict and its evidence.
#[derive(Clone, Debug, Serialize)]
pub struct Report {
    /// Every section passed.
    pub trustworthy: bool,
    /// Frames, losses and sequence.
    pub integrity: Integrity,
    /// The device's figures against the host's.
    pub recomputation: Recomputation,
    /// σ̇ ≥ −k·u(σ̇) and η − η_C ≤ k·u(margin), or the device said otherwise.
    pub second_law: SecondLaw,
    /// The second-law alarms against their conditions.
    pub alarm_consistency: AlarmConsistency,
    /// The device's diagnosis against the host's.
    pub diagnosis: DiagnosisCheck,
}

/// The diagnosis section: each summary's verdict (consistent or not, and
/// the suspect with its bias) recomputed from its raw integrals with the
/// Hello's settings and UA, in f32 as the controller makes it
/// ([`crate::verdict_check`]): an honest controller's is reproduced
/// exactly.
#[derive(Clone, Debug, Default, Serialize)]
pub struct DiagnosisCheck {
    /// Section verdict.
    pub pass: bool,
    /// Summaries whose verdict was compared.
    pub compared: u64,
    /// Summaries that could not be compared: no Hello yet.
    pub without_hello: u64,
    /// Summaries whose verdict differs.
    pub mismatches: u64,
    /// Inconsistent summaries, and how many of them named a suspect.
    pub inconsistent: u64,
    /// Of those, with a suspect.
    pub with_suspect: u64,
    /// The first few mismatches.
    pub first_mismatches: Vec<Finding>,
}

/// The integrity section.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Integrity {
    /// Section verdict.
    pub pass: bool,
    /// Frames accepted.
    pub frames: u64,
    /// Hello frames.
    pub hellos: u64,
    /// Summary frames.
    pub summaries: u64,
    /// Event frames.
    pub events: u64,
    /// Reply frames (the controller's answers to commands).
    pub replies: u64,
    /// Frames lost to CRC errors.
    pub crc_errors: u64,
    /// Frames lost for being too long.
    pub overlong: u64,
    /// Frames lost as malformed.
    pub malformed: u64,
    /// Frames of another protocol version.
    pub unknown_version: u64,
    /// Bytes not in any accepted frame.
    pub bytes_discarded: u64,
    /// Summaries missing from sequence gaps.
    pub missing_summaries: u64,
    /// Summaries repeating the previous sequence number.
    pub duplicates: u64,
    /// Controller restarts (sequence went back).
    pub restarts: u64,
    /// Restarts not announced by a Hello right before.
    pub unannounced_restarts: u64,
    /// Link errors the logger recorded.
    pub link_errors: u64,
    /// Summaries sent again: the sequence went back to a summary already
    /// seen in the current device session (since the last restart),
    /// identical to it, and not a device starting over (its first summary
    /// again, right after a Hello). Neither missing nor a restart; not
    /// checked again.
    pub replayed: u64,
    /// Hello and event frames inside replayed sections (not checked again).
    pub replayed_other: u64,
    /// Summaries whose device time does not follow the sequence (time went
    /// back or stood still, or jumped far beyond the summary spacing).
    pub time_inconsistencies: u64,
    /// Rows of the log no frame can be, or counts no logger writes.
    pub tampered_rows: u64,
    /// Whether the writer closed the run; `None` for a raw capture.
    pub run_closed: Option<bool>,
    /// Where the record ends, when the run was never closed.
    pub record_ends_early: Option<RecordEnd>,
    /// A Hello arrived before the first summary, or the first Hello came
    /// after it in the same device session (see `summaries_before_hello`).
    pub hello_before_first_summary: bool,
    /// Summaries logged before the run's first Hello that belong to that
    /// Hello's device session (the sequence goes on across it, no restart):
    /// a log started while the controller was already running. They are
    /// checked with that Hello's settings.
    pub summaries_before_hello: u64,
    /// Whether the latest Hello's config digest matches the configuration
    /// the alarm checks assume; `None` without a Hello.
    pub config_digest_matches: Option<bool>,
    /// What failed, one line each.
    pub problems: Vec<String>,
}

/// One figure that did not recompute.
#[derive(Clone, Debug, Serialize)]
pub struct Mismatch {
    /// Summary sequence number.
    pub seq: u16,
    /// Device sample time, s.
    pub t_s: f64,
    /// The figure's field name on the wire.
    pub figure: &'static str,
    /// The device's value (`None` = not available).
    pub device: Option<f64>,
    /// The host's value.
    pub recomputed: Option<f64>,
    /// The allowed difference.
    pub tolerance: f64,
}

/// The recomputation section.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Recomputation {
    /// Section verdict.
    pub pass: bool,
    /// Summaries recomputed.
    pub summaries: u64,
    /// Figures compared.
    pub figures: u64,
    /// Figures that disagree (value beyond tolerance, or availability).
    pub mismatches: u64,
    /// Summaries checked with the audit configuration's settings because no
    /// Hello had arrived yet.
    pub without_hello: u64,
    /// See [`REL_TOL`].
    pub relative_tolerance: f64,
    /// See [`ABS_TOL`].
    pub absolute_tolerance: f64,
    /// The first few mismatches.
    pub first_mismatches: Vec<Mismatch>,
}

/// A finding of the second-law or alarm sections.
#[derive(Clone, Debug, Serialize)]
pub struct Finding {
    /// Summary sequence number, if the finding is about a summary.
    pub seq: Option<u16>,
    /// Device sample time, s.
    pub t_s: f64,
    /// The rule concerned, if any.
    pub rule: Option<RuleId>,
    /// What is wrong.
    pub message: String,
}

/// The second-law section.
#[derive(Clone, Debug, Default, Serialize)]
pub struct SecondLaw {
    /// Section verdict.
    pub pass: bool,
    /// The rule applied, in words.
    pub rule: &'static str,
    /// Summaries where σ̇ and u(σ̇), or the margin and u(margin), were available.
    pub evaluable: u64,
    /// Summaries that violate σ̇ ≥ −k·u(σ̇) or η − η_C ≤ k·u(margin).
    pub violations: u64,
    /// `violations / evaluable`, `None` when nothing was evaluable.
    pub violation_fraction: Option<f64>,
    /// Violations the device flagged (alarm active or legitimately pending).
    pub flagged: u64,
    /// Violations it did not.
    pub unflagged: u64,
    /// The first few unflagged violations.
    pub first_unflagged: Vec<Finding>,
}

/// The alarm consistency section.
#[derive(Clone, Debug, Default, Serialize)]
pub struct AlarmConsistency {
    /// Section verdict.
    pub pass: bool,
    /// The rule applied, in words.
    pub rule: &'static str,
    /// Alarm activations checked (bit transitions and raised events).
    pub activations: u64,
    /// Activations with no supporting condition.
    pub unsupported: u64,
    /// Conditions that held too long without the alarm.
    pub missed: u64,
    /// Non-latching alarms still active long after their condition cleared.
    pub stuck: u64,
    /// Events and alarm bits that disagree.
    pub event_bit_disagreements: u64,
    /// On-delay assumed per checked rule, s.
    pub on_delay_s: Vec<(RuleId, f64)>,
    /// The first few findings.
    pub findings: Vec<Finding>,
}

const SECOND_LAW_RULE: &str = "a summary violates the second law when sigma < -k*u(sigma) or \
eta - eta_C > k*u(margin) (recomputed figures, device uncertainties); each violation must be \
flagged: beyond_carnot or negative_entropy_production active in that summary, or the \
violation younger than that rule's on-delay plus one summary period";

const ALARM_RULE: &str = "beyond_carnot and negative_entropy_production replayed per summary \
on the recomputed figures: an activation needs its condition in a summary within the on-delay \
plus one period before it; a condition held in consecutive summaries for longer than the \
on-delay plus one period needs the alarm active; a non-latching alarm must clear within the \
off-delay plus one period of its condition clearing; events and alarm bits must agree";

/// The rules whose conditions the host can replay from a summary.
const CHECKED: [RuleId; 2] = [RuleId::BeyondCarnot, RuleId::NegativeEntropyProduction];

/// `x` as the f64 of its shortest decimal form: the value a person wrote.
fn decimal_f64(x: f32) -> f64 {
    x.to_string().parse().unwrap_or(f64::from(x))
}

/// `base` with every setting the Hello carries taken from the Hello. A
/// setting that already rounds to the Hello's f32 is kept as it is, so a
/// matching configuration reproduces the Hello's digest exactly.
pub fn effective_config(base: &RigConfig, hello: &Hello) -> RigConfig {
    let pick = |b: f64, h: f32| if b as f32 == h { b } else { decimal_f64(h) };
    let mut c = *base;
    c.mode = hello.mode;
    if hello.window_samples != u16::MAX {
        c.window_samples = u32::from(hello.window_samples);
    }
    c.coverage_factor = pick(base.coverage_factor, hello.coverage_factor);
    c.ambient_k = hello
        .ambient_k
        .map(|h| base.ambient_k.map_or(decimal_f64(h), |b| pick(b, h)));
    let (u, h) = (&base.uncertainty, &hello.uncertainty);
    c.uncertainty = Uncertainty {
        hot_k: pick(u.hot_k, h.hot_k),
        hot2_k: pick(u.hot2_k, h.hot2_k),
        cold_k: pick(u.cold_k, h.cold_k),
        heat_in_rel: pick(u.heat_in_rel, h.heat_in_rel),
        work_rel: pick(u.work_rel, h.work_rel),
        heat_out_rel: pick(u.heat_out_rel, h.heat_out_rel),
    };
    c.losses = hello.losses.map(|(ua, u_ua)| {
        let base = base.losses;
        heatbound::config::Losses {
            ua_w_per_k: base.map_or(decimal_f64(ua), |b| pick(b.ua_w_per_k, ua)),
            u_ua_w_per_k: base.map_or(decimal_f64(u_ua), |b| pick(b.u_ua_w_per_k, u_ua)),
        }
    });
    c
}

/// The figure settings of a Hello, as f64.
pub fn hello_settings(hello: &Hello) -> FigureSettings {
    let u = &hello.uncertainty;
    FigureSettings {
        mode: hello.mode,
        ambient_k: hello.ambient_k.map(f64::from),
        uncertainty: Uncertainty {
            hot_k: f64::from(u.hot_k),
            hot2_k: f64::from(u.hot2_k),
            cold_k: f64::from(u.cold_k),
            heat_in_rel: f64::from(u.heat_in_rel),
            work_rel: f64::from(u.work_rel),
            heat_out_rel: f64::from(u.heat_out_rel),
        },
    }
}

/// What the audit currently assumes about the device.
struct Context {
    settings: FigureSettings,
    limits: Limits,
    coverage_factor: f64,
    on_ms: [i64; RuleId::COUNT],
    off_ms: [i64; RuleId::COUNT],
    enabled: [bool; RuleId::COUNT],
    latching: [bool; RuleId::COUNT],
}

impl Context {
    fn new(config: &RigConfig) -> Self {
        let ms = |s: f64| (s * 1000.0).round() as i64;
        let rule = |id: RuleId| config.alarms.rule(id);
        Self {
            settings: FigureSettings::new(config),
            limits: Limits::new(config),
            coverage_factor: config.coverage_factor,
            on_ms: RuleId::ALL.map(|id| ms(rule(id).on_delay_s)),
            off_ms: RuleId::ALL.map(|id| ms(rule(id).off_delay_s)),
            enabled: RuleId::ALL.map(|id| rule(id).enabled),
            latching: RuleId::ALL.map(|id| rule(id).latching),
        }
    }
}

/// Replay state of one checked rule.
#[derive(Clone, Debug, Default)]
struct Track {
    /// Start of the current run of summaries with the condition raised.
    raise_since: Option<i64>,
    /// Start of the current run of summaries with the condition clear.
    clear_since: Option<i64>,
    /// Latest summary with the condition raised.
    last_raise: Option<i64>,
    /// Alarm bit in the previous summary.
    last_bit: bool,
    /// The current raise run has been reported as missed.
    missed_reported: bool,
    /// The current clear run has been reported as stuck.
    stuck_reported: bool,
    /// Latest event kind for the rule since the previous summary.
    event_since_summary: Option<EventKind>,
    /// Raised events waiting for the next summary to judge their support.
    pending_raises: Vec<(i64, u32)>,
}

/// Pushes `item` if fewer than [`MAX_LISTED`] are listed.
fn list<T>(v: &mut Vec<T>, item: T) {
    if v.len() < MAX_LISTED {
        v.push(item);
    }
}

/// A span of the audit's timeline, ms, in seconds.
#[allow(clippy::cast_precision_loss)] // exact below 2^53 ms (285,000 years)
fn ms_to_s(ms: i64) -> f64 {
    ms as f64 / 1000.0
}

fn seconds(t_ms: u32) -> f64 {
    f64::from(t_ms) / 1000.0
}

/// `host_ms` as `YYYY-MM-DD HH:MM:SS.mmm UTC`.
fn utc(host_ms: i64) -> String {
    let ms = host_ms.rem_euclid(86_400_000);
    let (y, m, d) = crate::term::civil_from_days(host_ms.div_euclid(86_400_000));
    format!(
        "{y:04}-{m:02}-{d:02} {:02}:{:02}:{:02}.{:03} UTC",
        ms / 3_600_000,
        ms / 60_000 % 60,
        ms / 1000 % 60,
        ms % 1000
    )
}

/// Audits run `run` (the latest if `None`) of `log` against `config`.
///
/// The logger stores the decoder's losses as `link_errors` rows; they
/// become the audit's decoder counts (summed with checked arithmetic: a
/// sum that overflows is a tampered log). Gap, duplicate and restart rows
/// are not counted again: the audit re-derives them from the stored
/// frames. Replay rows count replayed summaries. Each outage is a link
/// error. A row no frame can be is a failed check, not an error; only a
/// log that cannot be read at all is an `Err`.
pub fn audit_log(
    log: &Log,
    run: Option<RunId>,
    config: &RigConfig,
) -> Result<Report, LogAuditError> {
    audit_log_with_progress(log, run, config, None)
}

/// Frames between progress updates: keeps the bar off the per-frame path.
const PROGRESS_EVERY_FRAMES: u64 = 4096;

/// [`audit_log`], moving `progress` (if any) in frames as the run's rows
/// are read and checked, a page at a time (prefix `checking`; its length
/// the summaries the log holds, grown if more frames come). Memory stays
/// flat in the run's length. The caller makes, shows and finishes the bar.
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound_host::{audit, store::Log};
/// let dir = tempfile::tempdir().unwrap();
/// let log = Log::open(&dir.path().join("run.sqlite")).unwrap();
/// let bar = indicatif::ProgressBar::hidden();
/// // An empty log has no run to audit, and leaves the bar where it was.
/// assert!(audit::audit_log_with_progress(&log, None, &RigConfig::default(), Some(&bar)).is_err());
/// assert_eq!(bar.position(), 0);
/// ```
pub fn audit_log_with_progress(
    log: &Log,
    run: Option<RunId>,
    config: &RigConfig,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<Report, LogAuditError> {
    let name = log.path().display().to_string();
    let runs = log.runs()?;
    let info = match run {
        Some(id) => runs
            .iter()
            .find(|r| r.id == id)
            .ok_or(LogAuditError::NoSuchRun {
                path: name,
                run: id,
            })?,
        None => runs.last().ok_or(LogAuditError::NoRuns { path: name })?,
    };
    let id = info.id;
    let mut facts = LogFacts {
        closed: Some(info.ended_host_ms.is_some()),
        ..LogFacts::default()
    };
    // Every row was received while the run was open.
    let (start, end) = (info.started_host_ms, info.ended_host_ms);
    let outside = |host_ms: i64| host_ms < start || end.is_some_and(|e| host_ms > e);
    let window = format!(
        "the run's time (started {start}{})",
        end.map_or_else(String::new, |e| format!(", ended {e}"))
    );
    // Link errors and outages first: then the frames, checked as they are
    // read a page at a time, so memory stays flat however long the run.
    let mut stats = DecoderStats::default();
    let mut overflowed: Vec<&'static str> = Vec::new();
    for row in log.link_error_rows(id)? {
        let row = match row {
            Ok(row) => row,
            Err(StoreError::BadRow {
                table, ord, reason, ..
            }) => {
                facts.tampered.push(format!("{table} row {ord}: {reason}"));
                continue;
            }
            Err(e) => return Err(e.into()),
        };
        if outside(row.host_ms) {
            facts.tampered.push(format!(
                "link_errors row {}: host_ms {} is outside {window}",
                row.ord, row.host_ms
            ));
        }
        let slot = match row.kind {
            LinkErrorKind::Crc => &mut stats.crc_errors,
            LinkErrorKind::Overlong => &mut stats.overlong,
            LinkErrorKind::Malformed => &mut stats.malformed,
            LinkErrorKind::UnknownVersion => &mut stats.unknown_version,
            LinkErrorKind::Replay => &mut facts.replayed,
            _ => continue,
        };
        match slot.checked_add(row.count) {
            Some(n) => *slot = n,
            None => {
                *slot = u64::MAX;
                if !overflowed.contains(&row.kind.as_str()) {
                    overflowed.push(row.kind.as_str());
                }
            }
        }
    }
    for kind in overflowed {
        facts.tampered.push(format!(
            "link_errors: the {kind} counts add up to more than 2^64, which no logger writes"
        ));
    }
    let outages = log.outages(id)?;
    for o in &outages {
        let ended_before = o.ended_host_ms.is_some_and(|e| e < o.started_host_ms);
        if outside(o.started_host_ms) || o.ended_host_ms.is_some_and(outside) || ended_before {
            facts.tampered.push(format!(
                "outages row {}: its times ({} to {}) are not inside {window} in order",
                o.id,
                o.started_host_ms,
                o.ended_host_ms
                    .map_or_else(|| "open".to_owned(), |e| e.to_string())
            ));
        }
    }
    let link_errors: Vec<LinkError> = outages
        .into_iter()
        .map(|o| LinkError {
            host_ms: Some(o.started_host_ms),
            message: format!("link down: {}", o.reason),
        })
        .collect();
    let mut auditor = Auditor::new(config);
    let mut frames = 0u64;
    if let Some(bar) = progress {
        bar.set_prefix("checking");
        bar.set_length(info.summaries);
        bar.set_position(0);
    }
    for (read, stored) in (0u64..).zip(log.frames(id)?) {
        if let Some(bar) = progress
            && read.is_multiple_of(PROGRESS_EVERY_FRAMES)
        {
            // Hellos, events and replies come on top of the summaries.
            if bar.length().is_some_and(|len| read > len) {
                bar.set_length(read);
            }
            bar.set_position(read);
        }
        match stored {
            Ok(s) => {
                if outside(s.host_ms) {
                    let (table, seq) = match &s.frame {
                        Frame::Hello(_) => ("hellos", None),
                        Frame::Summary(x) => ("summaries", Some(x.seq)),
                        Frame::Event(x) => ("events", Some(x.seq)),
                        Frame::Reply(_) => ("replies", None),
                    };
                    let at = seq.map_or_else(String::new, |s| format!(" seq {s}"));
                    facts.tampered.push(format!(
                        "{table} row{at}: host_ms {} is outside {window}",
                        s.host_ms
                    ));
                }
                frames = frames.saturating_add(1);
                auditor.offer(&s.frame, true);
                auditor.last_host_ms = Some(s.host_ms);
            }
            Err(StoreError::ImpossibleValue(v)) => {
                let Impossible {
                    table,
                    ord,
                    seq,
                    t_ms,
                    column,
                    ref value,
                    why,
                    ref also,
                    ..
                } = *v;
                let at = seq.map_or_else(String::new, |s| format!(" (seq {s})"));
                facts.tampered.push(format!(
                    "{table} row {ord}{at}: {column} = {value}: {why}{}",
                    also.iter().map(|a| format!("; {a}")).collect::<String>()
                ));
                if let (Some(seq), Some(t_ms)) = (seq, t_ms) {
                    // A stand-in: only its sequence number and time count.
                    frames = frames.saturating_add(1);
                    let stand_in = Frame::Summary(Summary {
                        seq,
                        t_ms,
                        ..Summary::default()
                    });
                    auditor.offer(&stand_in, false);
                }
            }
            Err(StoreError::BadRow {
                table, ord, reason, ..
            }) => facts.tampered.push(format!("{table} row {ord}: {reason}")),
            Err(e) => return Err(e.into()),
        }
    }
    auditor.release_early(false);
    auditor.take_held_hello();
    if let Some(bar) = progress {
        bar.set_length(frames);
        bar.set_position(frames);
    }
    stats.frames = frames;
    Ok(auditor.finish(
        &Input {
            frames: &[],
            decoder: stats,
            link_errors: &link_errors,
        },
        &facts,
    ))
}

/// Audits `input` against `config` (the defaults, or the user's `rig.toml`).
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound::wire::DecoderStats;
/// use heatbound_host::audit::{Input, audit};
/// let input = Input { frames: &[], decoder: DecoderStats::default(), link_errors: &[] };
/// let report = audit(&input, &RigConfig::default());
/// assert!(!report.trustworthy); // nothing received, nothing to trust
/// ```
pub fn audit(input: &Input<'_>, config: &RigConfig) -> Report {
    audit_with(input, &LogFacts::default(), config)
}

/// [`audit`] with what a log adds to its frames.
pub fn audit_with(input: &Input<'_>, facts: &LogFacts, config: &RigConfig) -> Report {
    audit_with_progress(input, facts, config, None)
}

/// [`audit_with`], moving `progress` (if any) through the frames checked:
/// its prefix becomes `checking`, its length the number of frames. The
/// caller makes, shows and finishes the bar.
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound::wire::DecoderStats;
/// use heatbound_host::audit::{Input, LogFacts, audit_with_progress};
/// let input = Input { frames: &[], decoder: DecoderStats::default(), link_errors: &[] };
/// let bar = indicatif::ProgressBar::hidden();
/// let report = audit_with_progress(&input, &LogFacts::default(), &RigConfig::default(), Some(&bar));
/// assert!(!report.trustworthy);
/// assert_eq!((bar.position(), bar.length()), (0, Some(0)));
/// ```
pub fn audit_with_progress(
    input: &Input<'_>,
    facts: &LogFacts,
    config: &RigConfig,
    progress: Option<&indicatif::ProgressBar>,
) -> Report {
    if let Some(bar) = progress {
        bar.set_prefix("checking");
        bar.set_length(u64::try_from(input.frames.len()).unwrap_or(u64::MAX));
        bar.set_position(0);
        bar.reset_eta();
    }
    let mut auditor = Auditor::new(config);
    let mut placeholders = facts.placeholders.iter().copied().peekable();
    for (i, r) in input.frames.iter().enumerate() {
        if let Some(bar) = progress {
            let i = u64::try_from(i).unwrap_or(u64::MAX);
            if i.is_multiple_of(PROGRESS_EVERY_FRAMES) {
                bar.set_position(i);
            }
        }
        let placeholder = placeholders.next_if_eq(&i).is_some();
        auditor.offer(&r.frame, !placeholder);
        if r.host_ms.is_some() {
            auditor.last_host_ms = r.host_ms;
        }
    }
    auditor.release_early(false);
    auditor.take_held_hello();
    if let Some(bar) = progress {
        bar.set_position(u64::try_from(input.frames.len()).unwrap_or(u64::MAX));
    }
    auditor.finish(input, facts)
}

/// A fingerprint of each summary of the current device session, by
/// sequence number: enough to tell a replayed summary (the same one again)
/// from a new one, in 1 MiB however long the session, where the summaries
/// themselves would take ten times that.
struct SeenInSession {
    /// Indexed by `seq`; 0 is "none" (a fingerprint is never 0).
    prints: Vec<u64>,
    len: usize,
}

impl SeenInSession {
    fn new() -> Self {
        Self {
            prints: vec![0; usize::from(u16::MAX) + 1],
            len: 0,
        }
    }

    /// The summary's fields, exactly, hashed; never 0.
    fn print(s: &Summary) -> u64 {
        use std::hash::{Hash as _, Hasher as _};
        let mut buf = [0u8; heatbound::wire::MAX_FRAME_LEN];
        let n = heatbound::wire::encode(&Frame::Summary(*s), &mut buf).unwrap_or(0);
        let mut h = std::collections::hash_map::DefaultHasher::new();
        buf.get(..n).unwrap_or_default().hash(&mut h);
        h.finish().max(1)
    }

    fn insert(&mut self, s: &Summary) {
        if let Some(slot) = self.prints.get_mut(usize::from(s.seq)) {
            if *slot == 0 {
                self.len += 1;
            }
            *slot = Self::print(s);
        }
    }

    /// Whether this very summary was seen under its sequence number.
    fn holds(&self, s: &Summary) -> bool {
        self.prints
            .get(usize::from(s.seq))
            .is_some_and(|&p| p != 0 && p == Self::print(s))
    }

    fn is_empty(&self) -> bool {
        self.len == 0
    }

    fn clear(&mut self) {
        if self.len > 0 {
            self.prints.fill(0);
            self.len = 0;
        }
    }
}

struct Auditor<'c> {
    base: &'c RigConfig,
    ctx: Context,
    hello: Option<Hello>,
    diagnosis: DiagnosisCheck,
    ua: crate::verdict_check::UaFollower,
    link: LinkTracker,
    integrity: Integrity,
    recomputation: Recomputation,
    second_law: SecondLaw,
    alarms: AlarmConsistency,
    tracks: [Track; RuleId::COUNT],
    /// Previous frame was a Hello (announces a restart).
    after_hello: bool,
    /// Unwrapped time of the previous summary, and its raw `t_ms`.
    prev_t: Option<(i64, u32)>,
    /// Largest in-order summary spacing seen, ms: the "one period" of slack.
    period_ms: i64,
    /// Start of the current run of second-law violations.
    violation_since: Option<i64>,
    /// The summary of each sequence number seen in the current device
    /// session (since the last restart), to tell a replay from a restart.
    session: SeenInSession,
    /// The first summary of the current device session.
    session_first: Option<Summary>,
    /// Sequence number of the latest summary taken (not replayed).
    last_seq: Option<u16>,
    /// The previous summary was a replay.
    in_replay: bool,
    /// A Hello identical to the latest one, met inside a replay: part of
    /// the replay if a replayed summary follows, else taken then.
    held_hello: Option<Hello>,
    /// Shortest consistent in-order summary spacing, ms.
    min_step_ms: Option<i64>,
    /// Host time of the latest frame that has one.
    last_host_ms: Option<i64>,
    /// Raw device time of the latest frame that has one.
    last_t_ms: Option<u32>,
    /// Frames before the run's first Hello, held until it is known whether
    /// that Hello's session is theirs.
    early: Early,
}

/// The most frames held before a run's first Hello: a controller answers a
/// Hello request within a second or two, so a log that started while it ran
/// has a handful; past this many, they are checked as they are.
const EARLY_CAP: usize = 4096;

/// Frames before the first Hello of a run that starts with summaries.
#[derive(Debug, Default)]
struct Early {
    /// Holding is over (a Hello came first, or the held frames went on).
    done: bool,
    /// The frames, in arrival order.
    held: Vec<(Frame, bool)>,
    /// Where the first Hello is in `held`.
    hello_at: Option<usize>,
    /// The last held summary's sequence number before the Hello.
    last_seq: Option<u16>,
    /// Its device time, ms.
    last_t_ms: u32,
}

impl<'c> Auditor<'c> {
    fn new(base: &'c RigConfig) -> Self {
        Self {
            base,
            ctx: Context::new(base),
            hello: None,
            link: LinkTracker::new(),
            integrity: Integrity::default(),
            recomputation: Recomputation {
                relative_tolerance: REL_TOL,
                absolute_tolerance: ABS_TOL,
                ..Recomputation::default()
            },
            second_law: SecondLaw {
                rule: SECOND_LAW_RULE,
                ..SecondLaw::default()
            },
            alarms: AlarmConsistency {
                rule: ALARM_RULE,
                ..AlarmConsistency::default()
            },
            diagnosis: DiagnosisCheck::default(),
            ua: crate::verdict_check::UaFollower::default(),
            tracks: Default::default(),
            after_hello: false,
            prev_t: None,
            period_ms: 1000,
            violation_since: None,
            session: SeenInSession::new(),
            session_first: None,
            last_seq: None,
            in_replay: false,
            held_hello: None,
            min_step_ms: None,
            last_host_ms: None,
            last_t_ms: None,
            early: Early::default(),
        }
    }

    /// One frame of the run, in arrival order. A run whose first Hello
    /// comes after summaries (its log began while the controller was
    /// running) is held until the summary after that Hello shows whether
    /// the sequence went on (the same session: the Hello's settings hold
    /// for the summaries before it too) or started over (a restart: the
    /// early summaries' settings are unknown).
    fn offer(&mut self, frame: &Frame, trusted: bool) {
        if self.early.done {
            return self.frame(frame, trusted);
        }
        let e = &mut self.early;
        match frame {
            Frame::Hello(_) if e.held.is_empty() => {
                e.done = true;
                return self.frame(frame, trusted);
            }
            Frame::Hello(_) if e.hello_at.is_none() => e.hello_at = Some(e.held.len()),
            Frame::Summary(s) => match (e.hello_at, e.last_seq) {
                (Some(_), Some(last)) => {
                    // The same session: the sequence and the device clock
                    // both went on across the Hello.
                    let on = (1..0x8000).contains(&s.seq.wrapping_sub(last))
                        && s.t_ms.wrapping_sub(e.last_t_ms) < 0x8000_0000;
                    e.held.push((frame.clone(), trusted));
                    return self.release_early(on);
                }
                (None, Some(last)) if s.seq.wrapping_sub(last) >= 0x8000 => {
                    // Went back with no Hello: a restart, held no longer.
                    e.held.push((frame.clone(), trusted));
                    return self.release_early(false);
                }
                (None, _) => {
                    e.last_seq = Some(s.seq);
                    e.last_t_ms = s.t_ms;
                }
                (Some(_), None) => {}
            },
            Frame::Event(_) | Frame::Reply(_) | Frame::Hello(_) => {}
        }
        if e.held.is_empty() && !matches!(frame, Frame::Summary(_)) {
            // Nothing held yet: only a summary before a Hello starts holding.
            return self.frame(frame, trusted);
        }
        e.held.push((frame.clone(), trusted));
        if e.held.len() > EARLY_CAP {
            self.release_early(false);
        }
    }

    /// Checks the held frames: with `same_session`, the Hello first (its
    /// settings hold for all of them), else in arrival order.
    fn release_early(&mut self, same_session: bool) {
        self.early.done = true;
        let held = std::mem::take(&mut self.early.held);
        let hello_at = self.early.hello_at.take();
        match hello_at.filter(|_| same_session) {
            Some(at) => {
                self.integrity.summaries_before_hello = held
                    .iter()
                    .take(at)
                    .filter(|(f, _)| matches!(f, Frame::Summary(_)))
                    .count() as u64;
                if let Some((hello, trusted)) = held.get(at) {
                    self.frame(hello, *trusted);
                }
                for (i, (f, trusted)) in held.iter().enumerate() {
                    if i != at {
                        self.frame(f, *trusted);
                    }
                }
            }
            None => {
                for (f, trusted) in &held {
                    self.frame(f, *trusted);
                }
            }
        }
    }

    /// Whether summary `s` replays one already seen in this device session:
    /// the sequence went back (or stayed, inside a replay) to a summary of
    /// this session identical to `s` (same device time, same integrals).
    /// A restart starts a new session near boot time: with contents of its
    /// own, or, after its Hello, with the session's first summary again (a
    /// device that started over).
    fn is_replay(&self, s: &Summary) -> bool {
        let Some(last) = self.last_seq else {
            return false;
        };
        let d = s.seq.wrapping_sub(last);
        let back = d >= 0x8000 || (d == 0 && self.in_replay);
        // A device that started over sends its first summary again after
        // its Hello: a restart, even when the contents repeat exactly.
        let started_over = self.after_hello && !self.in_replay && self.session_first == Some(*s);
        back && !started_over && self.session.holds(s)
    }

    /// One frame; `trusted` is false for a placeholder of a tampered row
    /// (only its sequence number and device time are used).
    fn frame(&mut self, frame: &Frame, trusted: bool) {
        match frame {
            Frame::Summary(s) if self.is_replay(s) => {
                if self.held_hello.take().is_some() {
                    self.integrity.replayed_other += 1;
                }
                self.integrity.replayed += 1;
                self.in_replay = true;
                self.after_hello = false;
                return;
            }
            Frame::Event(_) if self.in_replay => {
                self.integrity.replayed_other += 1;
                return;
            }
            Frame::Hello(h)
                if self.in_replay
                    && self.held_hello.is_none()
                    && self.hello.as_ref() == Some(h) =>
            {
                self.held_hello = Some(*h);
                return;
            }
            _ => {}
        }
        self.in_replay = false;
        self.take_held_hello();
        self.take(frame, trusted);
    }

    /// A Hello held at the end of a replay was the stream's own: take it.
    fn take_held_hello(&mut self) {
        if let Some(h) = self.held_hello.take() {
            self.take(&Frame::Hello(h), true);
        }
    }

    /// One frame that is not a replay.
    fn take(&mut self, frame: &Frame, trusted: bool) {
        let link = self.link.observe(frame);
        match frame {
            Frame::Hello(h) => {
                self.integrity.hellos += 1;
                let eff = effective_config(self.base, h);
                self.integrity.config_digest_matches =
                    Some(Hello::config_digest(&eff) == h.config_digest);
                self.ctx = Context::new(&eff);
                self.ctx.settings = hello_settings(h);
                self.ctx.coverage_factor = f64::from(h.coverage_factor);
                self.hello = Some(*h);
                self.after_hello = true;
            }
            Frame::Event(e) => {
                self.integrity.events += 1;
                self.last_t_ms = Some(e.event.t_ms);
                self.event(e.event);
                self.after_hello = false;
            }
            Frame::Summary(s) => {
                self.integrity.summaries += 1;
                if self.integrity.summaries == 1 {
                    self.integrity.hello_before_first_summary = self.hello.is_some();
                }
                if matches!(link, Link::Restart) {
                    // A new device session.
                    self.session.clear();
                }
                if self.session.is_empty() {
                    self.session_first = Some(*s);
                }
                self.session.insert(s);
                self.last_seq = Some(s.seq);
                self.last_t_ms = Some(s.t_ms);
                self.summary(s, link, trusted);
                self.after_hello = false;
            }
            // A command's answer: logged with the commands, nothing to recompute.
            Frame::Reply(_) => self.integrity.replies += 1,
        }
    }

    /// The event's time on the audit's unwrapped timeline.
    fn unwrap_time(&self, t_ms: u32) -> i64 {
        match self.prev_t {
            // The wrapping difference read as signed: the shorter way
            // round the 2^32 ms clock.
            Some((prev, raw)) => {
                prev.saturating_add(i64::from(t_ms.wrapping_sub(raw).cast_signed()))
            }
            None => i64::from(t_ms),
        }
    }

    fn event(&mut self, e: heatbound::alarm::Event) {
        if !CHECKED.contains(&e.rule) {
            return;
        }
        let t = self.unwrap_time(e.t_ms);
        let track = &mut self.tracks[e.rule.index()];
        if e.kind != EventKind::Acknowledged {
            track.event_since_summary = Some(e.kind);
        }
        if e.kind == EventKind::Raised {
            track.pending_raises.push((t, e.t_ms));
        }
    }

    fn summary(&mut self, s: &Summary, link: Link, trusted: bool) {
        // The timeline and the continuity with the previous summary.
        let (t, continuous) = match (link, self.prev_t) {
            (Link::Restart, Some((prev, _))) => {
                self.integrity.restarts += 1;
                if !self.after_hello {
                    self.integrity.unannounced_restarts += 1;
                }
                (prev + 1, false)
            }
            (Link::InOrder, Some(_)) => (self.unwrap_time(s.t_ms), true),
            (_, Some(_)) => (self.unwrap_time(s.t_ms), false),
            (_, None) => (i64::from(s.t_ms), false),
        };
        // Device time must follow the sequence: forward, by about the
        // summary spacing per sequence step.
        let steps = match link {
            Link::InOrder => Some(1),
            Link::Gap { missing } => Some(i64::from(missing) + 1),
            _ => None,
        };
        let mut advance = true;
        if let (Some(steps), Some((prev, prev_raw))) = (steps, self.prev_t) {
            let step = t.saturating_sub(prev);
            let jump = self
                .min_step_ms
                .is_some_and(|min| step > min.saturating_mul(4).saturating_mul(steps));
            if step <= 0 || jump {
                self.integrity.time_inconsistencies += 1;
                let what = if step <= 0 {
                    // Keep the timeline on the earlier, consistent time.
                    advance = false;
                    "device time went back or stood still"
                } else {
                    "device time jumped far beyond the summary spacing"
                };
                list(
                    &mut self.integrity.problems,
                    format!(
                        "summaries row seq {}: t_ms = {} ({:.3} s) after {:.3} s at the previous \
                         summary: {what} while the sequence went on",
                        s.seq,
                        s.t_ms,
                        seconds(s.t_ms),
                        seconds(prev_raw)
                    ),
                );
            } else {
                if continuous {
                    self.period_ms = self.period_ms.max(step);
                }
                if steps == 1 {
                    self.min_step_ms = Some(self.min_step_ms.map_or(step, |m| m.min(step)));
                }
            }
        }
        if matches!(link, Link::Restart) {
            self.tracks = Default::default();
            self.violation_since = None;
        }
        if advance {
            self.prev_t = Some((t, s.t_ms));
        }
        if !trusted {
            return;
        }

        let m = self.recompute(s);
        self.check_verdict(s);
        self.check_second_law(s, &m, t);
        self.check_alarms(s, &m, t, continuous);
    }

    fn recompute(&mut self, s: &Summary) -> Metrics<f32> {
        let rc = &mut self.recomputation;
        rc.summaries += 1;
        if self.hello.is_none() {
            rc.without_hello += 1;
        }
        let m = s.integrals().metrics(&self.ctx.settings);
        let f = |x: Option<f32>| x.map(f64::from);
        // Magnitude of the terms of σ̇: its tolerance scales with them.
        let t0 = f(m.ambient_k.or(s.ambient_k));
        let loss = if s.status.heat_out_measured {
            let q = f64::from(s.heat_in_j) - f64::from(s.work_j) - f64::from(s.heat_out_j);
            t0.map_or(0.0, |t0| if t0 > 0.0 { q.abs() / t0 } else { 0.0 })
        } else {
            0.0
        };
        let d = f64::from(s.duration_s);
        let sigma_scale = if d > 0.0 {
            (f64::from(s.entropy_in_j_per_k).abs() + f64::from(s.entropy_out_j_per_k).abs() + loss)
                / d
        } else {
            0.0
        };
        // T_h, η (or COP) and its bound no longer travel: every receiver
        // recomputes them from the integrals, so there is nothing to compare.
        let figures: [(&'static str, Option<f32>, Option<f32>, f64); 2] = [
            ("ambient_k", s.ambient_k, m.ambient_k, 0.0),
            (
                "entropy_rate_w_per_k",
                s.entropy_rate_w_per_k,
                m.entropy_rate_w_per_k,
                sigma_scale,
            ),
        ];
        for (name, device, host, scale) in figures {
            rc.figures += 1;
            let (dv, hv) = (f(device), f(host));
            // A tolerance is only ever computed from finite values: a
            // non-finite figure (or term) is a mismatch, never a free pass.
            let finite = |x: Option<f64>| x.is_none_or(f64::is_finite);
            let tolerance = match (dv, hv) {
                (Some(a), Some(b)) if a.is_finite() && b.is_finite() && scale.is_finite() => {
                    REL_TOL * a.abs().max(b.abs()).max(scale) + ABS_TOL
                }
                _ => ABS_TOL,
            };
            let agree = finite(dv)
                && finite(hv)
                && match (dv, hv) {
                    (Some(a), Some(b)) => (a - b).abs() <= tolerance,
                    (None, None) => true,
                    _ => false,
                };
            if !agree {
                rc.mismatches += 1;
                list(
                    &mut rc.first_mismatches,
                    Mismatch {
                        seq: s.seq,
                        t_s: seconds(s.t_ms),
                        figure: name,
                        device: dv.filter(|x| x.is_finite()),
                        recomputed: hv.filter(|x| x.is_finite()),
                        tolerance,
                    },
                );
            }
        }
        m
    }

    fn check_verdict(&mut self, s: &Summary) {
        let dc = &mut self.diagnosis;
        let Some(hello) = &self.hello else {
            dc.without_hello += 1;
            return;
        };
        if s.verdict.consistent == Some(false) {
            dc.inconsistent += 1;
            if s.verdict.suspect.is_some() {
                dc.with_suspect += 1;
            }
        }
        self.ua.observe(s, hello);
        let ua = self.ua.ua(hello);
        match crate::verdict_check::compare(s, hello, ua.as_ref()) {
            crate::verdict_check::Agreement::Agrees => dc.compared += 1,
            crate::verdict_check::Agreement::Differs(message) => {
                dc.compared += 1;
                dc.mismatches += 1;
                list(
                    &mut dc.first_mismatches,
                    Finding {
                        seq: Some(s.seq),
                        t_s: seconds(s.t_ms),
                        rule: None,
                        message,
                    },
                );
            }
        }
    }

    fn second_law_alarm_active(s: &Summary) -> bool {
        CHECKED.iter().any(|r| s.alarms & (1 << r.index()) != 0)
    }

    fn check_second_law(&mut self, s: &Summary, m: &Metrics<f32>, t: i64) {
        let k = self.ctx.coverage_factor;
        let f = |x: Option<f32>| x.map(f64::from);
        let sigma = match (f(m.entropy_rate_w_per_k), f(s.u_entropy_rate_w_per_k)) {
            (Some(x), Some(u)) => Some(x < -k * u),
            _ => None,
        };
        let carnot = match (f(m.carnot_margin), f(s.u_margin)) {
            (Some(margin), Some(u)) => Some(-margin > k * u),
            _ => None,
        };
        if sigma.is_none() && carnot.is_none() {
            self.violation_since = None;
            return;
        }
        let sl = &mut self.second_law;
        sl.evaluable += 1;
        let violated = sigma == Some(true) || carnot == Some(true);
        if !violated {
            self.violation_since = None;
            return;
        }
        sl.violations += 1;
        let since = *self.violation_since.get_or_insert(t);
        let grace = CHECKED
            .iter()
            .filter(|r| self.ctx.enabled[r.index()])
            .map(|r| self.ctx.on_ms[r.index()])
            .max();
        let pending =
            grace.is_some_and(|on| t.saturating_sub(since) <= on.saturating_add(self.period_ms));
        if Self::second_law_alarm_active(s) || pending {
            sl.flagged += 1;
        } else {
            sl.unflagged += 1;
            let what = match (sigma, carnot) {
                (Some(true), Some(true)) => "negative entropy production and beyond Carnot",
                (Some(true), _) => "negative entropy production",
                _ => "beyond Carnot",
            };
            list(
                &mut sl.first_unflagged,
                Finding {
                    seq: Some(s.seq),
                    t_s: seconds(s.t_ms),
                    rule: None,
                    message: format!(
                        "{what} for {:.1} s with no second-law alarm active",
                        ms_to_s(t.saturating_sub(since))
                    ),
                },
            );
        }
    }

    fn check_alarms(&mut self, s: &Summary, m: &Metrics<f32>, t: i64, continuous: bool) {
        let figures = AlarmFigures {
            // The host cannot recompute uncertainties (the sensitivity
            // integrals do not travel): use the device's.
            var_carnot_margin: s.u_margin.map(|u| u * u),
            var_entropy_rate_w_per_k: s.u_entropy_rate_w_per_k.map(|u| u * u),
            ..AlarmFigures::from(m)
        };
        let inputs = AlarmInputs {
            figures,
            t_hot_k: None,
            faults: Faults::default(),
            // The checked rules read neither the hot side nor the trends.
            trends: Default::default(),
        };
        let verdicts = self.ctx.limits.verdicts(&inputs);
        let period = self.period_ms;
        for rule in CHECKED {
            let i = rule.index();
            let (on, off) = (self.ctx.on_ms[i], self.ctx.off_ms[i]);
            let (enabled, latching) = (self.ctx.enabled[i], self.ctx.latching[i]);
            let track = &mut self.tracks[i];
            if !continuous {
                track.raise_since = None;
                track.clear_since = None;
            }
            match verdicts[i] {
                Verdict::Raise { .. } => {
                    if track.raise_since.is_none() {
                        track.raise_since = Some(t);
                        track.missed_reported = false;
                    }
                    track.last_raise = Some(t);
                    track.clear_since = None;
                }
                Verdict::Hold => {
                    track.raise_since = None;
                    track.clear_since = None;
                }
                Verdict::Clear => {
                    track.raise_since = None;
                    if track.clear_since.is_none() {
                        track.clear_since = Some(t);
                        track.stuck_reported = false;
                    }
                }
            }
            let bit = s.alarms & (1 << i) != 0;
            // Activations: raised events since the previous summary, and a
            // bit that turned on (judged once when both are present).
            let raises = core::mem::take(&mut track.pending_raises);
            let event = track.event_since_summary.take();
            let last_raise = track.last_raise;
            let supported = |at: i64| {
                last_raise.is_some_and(|r| r >= at.saturating_sub(on).saturating_sub(period))
            };
            let mut findings: Vec<String> = Vec::new();
            let newly = bit && !track.last_bit;
            for &(te, raw) in &raises {
                self.alarms.activations += 1;
                if !supported(te) {
                    self.alarms.unsupported += 1;
                    findings.push(format!(
                        "raised at {:.1} s with no supporting condition",
                        seconds(raw)
                    ));
                }
            }
            if newly && raises.is_empty() {
                self.alarms.activations += 1;
                if !supported(t) {
                    self.alarms.unsupported += 1;
                    findings.push("alarm bit set with no supporting condition".to_owned());
                }
            }
            // Events against bits (only where the previous summary is known).
            if continuous {
                let disagree = match event {
                    Some(EventKind::Raised) => !bit,
                    Some(EventKind::Cleared) => bit,
                    _ => bit != track.last_bit,
                };
                if disagree {
                    self.alarms.event_bit_disagreements += 1;
                    findings.push(match event {
                        Some(kind) => format!("{kind} event, but the alarm bit is {bit}"),
                        None => format!(
                            "alarm bit changed to {bit} with no event since the previous summary"
                        ),
                    });
                }
            }
            if enabled
                && !bit
                && !track.missed_reported
                && track
                    .raise_since
                    .is_some_and(|since| t.saturating_sub(since) > on.saturating_add(period))
            {
                track.missed_reported = true;
                self.alarms.missed += 1;
                findings.push(format!(
                    "condition held for {:.1} s without the alarm",
                    ms_to_s(t.saturating_sub(track.raise_since.unwrap_or(t)))
                ));
            }
            if bit
                && !latching
                && !track.stuck_reported
                && track
                    .clear_since
                    .is_some_and(|since| t.saturating_sub(since) > off.saturating_add(period))
            {
                track.stuck_reported = true;
                self.alarms.stuck += 1;
                findings.push(format!(
                    "still active {:.1} s after its condition cleared",
                    ms_to_s(t.saturating_sub(track.clear_since.unwrap_or(t)))
                ));
            }
            track.last_bit = bit;
            for message in findings {
                list(
                    &mut self.alarms.findings,
                    Finding {
                        seq: Some(s.seq),
                        t_s: seconds(s.t_ms),
                        rule: Some(rule),
                        message,
                    },
                );
            }
        }
    }

    fn finish(mut self, input: &Input<'_>, facts: &LogFacts) -> Report {
        // Raised events after the last summary: judge on what was seen.
        let period = self.period_ms;
        for rule in CHECKED {
            let i = rule.index();
            let on = self.ctx.on_ms[i];
            let track = &mut self.tracks[i];
            for (te, raw) in core::mem::take(&mut track.pending_raises) {
                self.alarms.activations += 1;
                if track
                    .last_raise
                    .is_none_or(|r| r < te.saturating_sub(on).saturating_sub(period))
                {
                    self.alarms.unsupported += 1;
                    list(
                        &mut self.alarms.findings,
                        Finding {
                            seq: None,
                            t_s: seconds(raw),
                            rule: Some(rule),
                            message: "raised with no supporting condition".to_owned(),
                        },
                    );
                }
            }
        }
        self.alarms.on_delay_s = CHECKED
            .iter()
            .map(|r| (*r, ms_to_s(self.ctx.on_ms[r.index()])))
            .collect();

        let d = &input.decoder;
        let link = self.link.stats();
        let g = &mut self.integrity;
        g.frames = g.hellos + g.summaries + g.events + g.replies;
        g.crc_errors = d.crc_errors;
        g.overlong = d.overlong;
        g.malformed = d.malformed;
        g.unknown_version = d.unknown_version;
        g.bytes_discarded = d.bytes_discarded;
        g.missing_summaries = link.missing_summaries;
        g.duplicates = link.duplicates;
        g.link_errors = u64::try_from(input.link_errors.len()).unwrap_or(u64::MAX);
        g.replayed = g.replayed.saturating_add(facts.replayed);
        g.tampered_rows = u64::try_from(facts.tampered.len()).unwrap_or(u64::MAX);
        g.run_closed = facts.closed;
        // Found while reading the frames (time against the sequence).
        let mut problems = core::mem::take(&mut g.problems);
        for t in facts.tampered.iter().take(MAX_LISTED) {
            problems.push(format!("tampered log: {t}"));
        }
        if facts.tampered.len() > MAX_LISTED {
            problems.push(format!(
                "tampered log: {} rows in all",
                facts.tampered.len()
            ));
        }
        if g.time_inconsistencies > MAX_LISTED as u64 {
            problems.push(format!(
                "{} summaries whose device time does not follow the sequence",
                g.time_inconsistencies
            ));
        }
        if facts.closed == Some(false) {
            let end = RecordEnd {
                seq: self.last_seq,
                t_s: self.last_t_ms.map(seconds),
                host_ms: self.last_host_ms,
            };
            g.record_ends_early = Some(end);
            problems.push(format!(
                "the run was never closed (the writer stopped, or is still running): the \
                 record ends early, at {}",
                match (end.seq, end.t_s, end.host_ms) {
                    (None, None, None) => "its start: no frame was logged".to_owned(),
                    (seq, t, host) => format!(
                        "seq {}, device time {}, host time {}",
                        seq.map_or_else(|| "n/a".to_owned(), |s| s.to_string()),
                        t.map_or_else(|| "n/a".to_owned(), |t| format!("{t:.3} s")),
                        host.map_or_else(|| "n/a".to_owned(), utc)
                    ),
                }
            ));
        }
        if g.summaries == 0 {
            problems.push("no summaries: nothing to check".to_owned());
        } else if !g.hello_before_first_summary {
            problems.push("no Hello before the first summary: its settings are unknown".to_owned());
        }
        let losses = d
            .crc_errors
            .saturating_add(d.overlong)
            .saturating_add(d.malformed)
            .saturating_add(d.unknown_version);
        if losses > 0 {
            problems.push(format!(
                "{} frames lost ({} CRC, {} overlong, {} malformed, {} unknown version), \
                 {} bytes discarded",
                losses, d.crc_errors, d.overlong, d.malformed, d.unknown_version, d.bytes_discarded
            ));
        }
        if g.missing_summaries > 0 {
            problems.push(format!(
                "{} summaries missing from sequence gaps",
                g.missing_summaries
            ));
        }
        if g.duplicates > 0 {
            problems.push(format!("{} duplicate summaries", g.duplicates));
        }
        if g.replayed > 0 {
            problems.push(format!(
                "{} summaries replayed (sent again, identical to summaries already seen \
                 since the device's last restart){}: not checked again, not counted as missing \
                 or as a restart",
                g.replayed,
                if g.replayed_other > 0 {
                    format!(", with {} Hello and event frames", g.replayed_other)
                } else {
                    String::new()
                }
            ));
        }
        if g.unannounced_restarts > 0 {
            problems.push(format!(
                "{} restarts without a Hello",
                g.unannounced_restarts
            ));
        }
        if let Some(e) = input.link_errors.first() {
            problems.push(format!(
                "{} link errors, the first: {}",
                input.link_errors.len(),
                e.message
            ));
        }
        g.problems = problems;
        g.pass = g.problems.is_empty();

        let rc = &mut self.recomputation;
        rc.pass = rc.mismatches == 0 && rc.summaries > 0;
        let sl = &mut self.second_law;
        #[allow(clippy::cast_precision_loss)] // a fraction: 2^53 summaries are far off
        let fraction = |a: u64, b: u64| a as f64 / b as f64;
        sl.violation_fraction = (sl.evaluable > 0).then(|| fraction(sl.violations, sl.evaluable));
        sl.pass = sl.unflagged == 0;
        let a = &mut self.alarms;
        a.pass =
            a.unsupported == 0 && a.missed == 0 && a.stuck == 0 && a.event_bit_disagreements == 0;
        self.diagnosis.pass = self.diagnosis.mismatches == 0;

        Report {
            trustworthy: self.integrity.pass
                && self.recomputation.pass
                && self.second_law.pass
                && self.alarms.pass
                && self.diagnosis.pass,
            integrity: self.integrity,
            recomputation: self.recomputation,
            second_law: self.second_law,
            alarm_consistency: self.alarms,
            diagnosis: self.diagnosis,
        }
    }
}

fn verdict(pass: bool) -> &'static str {
    if pass { "PASS" } else { "FAIL" }
}

fn opt(x: Option<f64>) -> String {
    x.map_or_else(|| "n/a".to_owned(), |x| format!("{x:.7}"))
}

impl Report {
    /// The readable report of an audit of `source`.
    pub fn text(&self, source: &str) -> String {
        use std::fmt::Write as _;
        let mut o = String::new();
        let g = &self.integrity;
        let _ = writeln!(o, "heatbound audit: {source}");
        let _ = writeln!(
            o,
            "integrity           {}  {} frames ({} hello, {} summary, {} event, {} reply); lost: {} CRC, \
             {} overlong, {} malformed, {} unknown version; {} missing, {} duplicate, \
             {} restarts ({} unannounced), {} replayed; {} link errors",
            verdict(g.pass),
            g.frames,
            g.hellos,
            g.summaries,
            g.events,
            g.replies,
            g.crc_errors,
            g.overlong,
            g.malformed,
            g.unknown_version,
            g.missing_summaries,
            g.duplicates,
            g.restarts,
            g.unannounced_restarts,
            g.replayed,
            g.link_errors
        );
        for p in &g.problems {
            let _ = writeln!(o, "  - {p}");
        }
        if g.summaries_before_hello > 0 {
            let _ = writeln!(
                o,
                "  {} summaries before the first Hello (the log began while the controller ran): \
                 checked with that Hello's settings, the same session",
                g.summaries_before_hello
            );
        }
        match g.config_digest_matches {
            Some(true) => {
                let _ = writeln!(o, "  config digest matches the audited configuration");
            }
            Some(false) => {
                let _ = writeln!(
                    o,
                    "  note: the device's config digest differs from the audited configuration: \
                     alarm delays and deadbands are assumed (give --config rig.toml)"
                );
            }
            None => {}
        }
        let r = &self.recomputation;
        let _ = writeln!(
            o,
            "recomputation       {}  {} summaries, {} figures, {} mismatches (tolerance {:e} \
             relative to the larger value or the figure's terms, + {:e})",
            verdict(r.pass),
            r.summaries,
            r.figures,
            r.mismatches,
            r.relative_tolerance,
            r.absolute_tolerance
        );
        if r.without_hello > 0 {
            let _ = writeln!(
                o,
                "  - {} summaries before any Hello, checked with the audit configuration",
                r.without_hello
            );
        }
        for m in &r.first_mismatches {
            let _ = writeln!(
                o,
                "  - seq {} at {:.1} s: {} device {} recomputed {} (tolerance {:.2e})",
                m.seq,
                m.t_s,
                m.figure,
                opt(m.device),
                opt(m.recomputed),
                m.tolerance
            );
        }
        let s = &self.second_law;
        let _ = writeln!(
            o,
            "second law          {}  {} evaluable summaries, {} violations ({}), {} flagged by \
             the device, {} unflagged",
            verdict(s.pass),
            s.evaluable,
            s.violations,
            s.violation_fraction
                .map_or_else(|| "n/a".to_owned(), |f| format!("{:.1} %", f * 100.0)),
            s.flagged,
            s.unflagged
        );
        let _ = writeln!(o, "  rule: {}", s.rule);
        for f in &s.first_unflagged {
            let _ = writeln!(
                o,
                "  - seq {} at {:.1} s: {}",
                f.seq.unwrap_or_default(),
                f.t_s,
                f.message
            );
        }
        let a = &self.alarm_consistency;
        let _ = writeln!(
            o,
            "alarm consistency   {}  {} activations, {} unsupported, {} missed, {} stuck, {} \
             event/bit disagreements",
            verdict(a.pass),
            a.activations,
            a.unsupported,
            a.missed,
            a.stuck,
            a.event_bit_disagreements
        );
        let delays: Vec<String> = a
            .on_delay_s
            .iter()
            .map(|(r, d)| format!("{r} {d} s"))
            .collect();
        let _ = writeln!(o, "  rule: {} (on-delays: {})", a.rule, delays.join(", "));
        for f in &a.findings {
            let rule = f.rule.map_or("", RuleId::as_str);
            let seq = f.seq.map_or_else(String::new, |s| format!("seq {s} "));
            let _ = writeln!(o, "  - {seq}at {:.1} s: {rule}: {}", f.t_s, f.message);
        }
        let d = &self.diagnosis;
        let _ = writeln!(
            o,
            "diagnosis           {}  {} verdicts recomputed, {} mismatches, {} before a Hello; the \
             device found {} inconsistent windows, {} with a suspect",
            verdict(d.pass),
            d.compared,
            d.mismatches,
            d.without_hello,
            d.inconsistent,
            d.with_suspect
        );
        for f in &d.first_mismatches {
            let _ = writeln!(
                o,
                "  - seq {} at {:.1} s: {}",
                f.seq.unwrap_or_default(),
                f.t_s,
                f.message
            );
        }
        let _ = writeln!(
            o,
            "verdict: {}",
            if self.trustworthy {
                "trustworthy"
            } else {
                "NOT trustworthy"
            }
        );
        o
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use heatbound::wire::RigId;

    #[test]
    fn effective_config_reproduces_a_matching_digest() {
        let c = RigConfig {
            ambient_k: Some(293.15),
            ..RigConfig::default()
        };
        let id = RigId::new("t").unwrap_or_default();
        let hello = Hello::from_config(id, (0, 1, 0), 100, &c);
        let eff = effective_config(&RigConfig::default(), &hello);
        assert_eq!(Hello::config_digest(&eff), hello.config_digest);
    }

    #[test]
    fn host_times_read_as_utc_and_never_panic() {
        // Unix time 1_700_000_000 s is 2023-11-14 22:13:20 UTC (from memory;
        // POSIX.1-2017 §4.16 gives the formula the conversion follows).
        assert_eq!(utc(1_700_000_000_123), "2023-11-14 22:13:20.123 UTC");
        // The epoch itself, and a time before it (POSIX §4.16, day 0).
        assert_eq!(utc(0), "1970-01-01 00:00:00.000 UTC");
        assert_eq!(utc(-1), "1969-12-31 23:59:59.999 UTC");
        // A crafted log may hold any i64.
        assert!(!utc(i64::MIN).is_empty());
        assert!(!utc(i64::MAX).is_empty());
    }

    #[test]
    fn an_empty_stream_is_not_trustworthy() {
        let r = audit(
            &Input {
                frames: &[],
                decoder: DecoderStats::default(),
                link_errors: &[],
            },
            &RigConfig::default(),
        );
        assert!(!r.trustworthy);
        assert!(!r.integrity.pass);
    }
}
