//! What the console knows: every frame and counter the link holder saw,
//! turned into trends, readouts, an alarm list and the link's health.
//!
//! ```text
//! ingest::Observed (frames, totals, link up/down) --> Model::observe
//! Model --> console::draw (one screen) ; keys --> console::keys --> Model (selection, span, ...)
//! ```
//!
//! Pure state: time comes in as arguments (host Unix ms), so tests drive it
//! without a terminal or a clock.
use std::collections::VecDeque;

use heatbound::alarm::{EventKind, RuleId, Severity, TimeToLimit, time_to_limit};
use heatbound::config::Mode;
use heatbound::monitor::TrendTracker;
use heatbound::wire::{Frame, Hello, Reply, Summary, Verdict};

use crate::ingest::{Observed, Totals};

/// Trend points kept at most (a day at one summary a second).
pub const MAX_POINTS: usize = 86_400;

/// The spans the trends can show, seconds.
pub const SPANS_S: [u32; 6] = [60, 300, 900, 3600, 6 * 3600, 24 * 3600];

/// One summary, as the trends plot it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Point {
    /// Host receive time, Unix ms.
    pub host_ms: i64,
    /// Where it sits on the trends' time axis, s: rig time between joined
    /// summaries (so a simulation played faster than real time reads in
    /// rig seconds), host time across a break.
    pub x_s: f64,
    /// η or COP, and its standard uncertainty.
    pub performance: Option<(f32, f32)>,
    /// η_C or the Carnot COP, and its standard uncertainty.
    pub bound: Option<(f32, f32)>,
    /// σ̇, W/K, and its standard uncertainty.
    pub entropy_rate: Option<(f32, f32)>,
    /// Heat-weighted T_h, K.
    pub t_hot_k: Option<f32>,
    /// Heat-weighted T_c, K.
    pub t_cold_k: Option<f32>,
    /// Mean powers over the window, W: heat in, work, heat out.
    pub powers_w: Option<[f32; 3]>,
    /// The point starts a new line: the one before it is from before a
    /// gap, an outage or a controller restart.
    pub breaks: bool,
}

/// Where an alarm stands, as the operator needs to know it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum AlarmStatus {
    /// Its condition holds in the latest summary, but it is not raised yet
    /// (the on-delay runs). Known for the second-law rules, whose figures
    /// the summary carries.
    Pending,
    /// Raised, not acknowledged.
    Active,
    /// Raised and acknowledged: its condition may still hold.
    Acknowledged,
    /// Cleared.
    Cleared,
}

impl AlarmStatus {
    /// The word shown.
    pub const fn word(self) -> &'static str {
        match self {
            AlarmStatus::Pending => "pending",
            AlarmStatus::Active => "active",
            AlarmStatus::Acknowledged => "acknowledged",
            AlarmStatus::Cleared => "cleared",
        }
    }
}

/// One row of the alarm list.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AlarmRow {
    /// The rule.
    pub rule: RuleId,
    /// Its severity.
    pub severity: Severity,
    /// Where it stands.
    pub status: AlarmStatus,
    /// Device time it was raised, ms (or, pending, since when).
    pub raised_t_ms: Option<u32>,
    /// Device time it was acknowledged, ms.
    pub acked_t_ms: Option<u32>,
    /// Device time it cleared, ms.
    pub cleared_t_ms: Option<u32>,
    /// For a second-law or energy-balance alarm: the controller's
    /// diagnosis when it was raised.
    pub verdict: Verdict,
}

/// Run totals, integrated from the summaries' window means.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct RunTotals {
    /// Controller run counter they belong to.
    pub run: u32,
    /// Seconds integrated.
    pub seconds: f64,
    /// Heat in, work, heat out, J.
    pub energies_j: [f64; 3],
    /// ∫q_in/T_hot, ∫q_out/T_cold, J/K.
    pub entropies_j_per_k: [f64; 2],
}

impl RunTotals {
    /// η = W/Q_in (or COP in reverse modes), if defined.
    pub fn performance(&self, mode: Mode) -> Option<f64> {
        let [q_in, w, q_out] = self.energies_j;
        let v = match mode {
            Mode::Engine => (q_in > 0.0).then(|| w / q_in),
            Mode::HeatPump => (w > 0.0).then(|| q_in / w),
            Mode::Cooler => (w > 0.0).then(|| q_out / w),
        };
        v.filter(|x| x.is_finite())
    }

    /// The Carnot bound of the run's heat-weighted temperatures.
    pub fn bound(&self, mode: Mode) -> Option<f64> {
        let [q_in, _, q_out] = self.energies_j;
        let [s_in, s_out] = self.entropies_j_per_k;
        let t_h = (q_in > 0.0 && s_in > 0.0).then(|| q_in / s_in)?;
        let t_c = (q_out > 0.0 && s_out > 0.0).then(|| q_out / s_out)?;
        if t_h <= t_c {
            return None;
        }
        let v = match mode {
            Mode::Engine => 1.0 - t_c / t_h,
            Mode::HeatPump => t_h / (t_h - t_c),
            Mode::Cooler => t_c / (t_h - t_c),
        };
        v.is_finite().then_some(v)
    }
}

/// What the console shows.
#[derive(Clone, Debug, Default)]
pub struct Model {
    /// The latest Hello.
    pub hello: Option<Hello>,
    /// Trend points, oldest first.
    pub points: VecDeque<Point>,
    /// The latest summary and its receive time.
    pub latest: Option<(Summary, i64)>,
    /// Run totals of the current controller run.
    pub totals: RunTotals,
    /// The alarm list: current rows, then cleared ones, newest first.
    pub alarms: Vec<AlarmRow>,
    /// The link's counters.
    pub link: Totals,
    /// Whether the link is up, and since when it is down (host ms), why.
    pub link_down: Option<(i64, String)>,
    /// Host time of the latest frame, Unix ms.
    pub last_frame_ms: Option<i64>,
    /// Replies seen, newest last (at most 8).
    pub replies: VecDeque<(Reply, i64)>,
    /// The latest events of the link (loss, gap, restart, outage) with
    /// their host times, newest last: shown when they happen.
    pub link_news: VecDeque<(i64, String)>,
    /// When each limit is projected to be crossed, from the summaries'
    /// trend (the hot side's only when `hot_max_k` is known).
    pub time_to_limit: TimeToLimit<f32>,
    /// `alarms.hot_max_k`, when the console was told it (the Hello does
    /// not carry it).
    pub hot_max_k: Option<f32>,
    trend: TrendTracker<f32>,
    previous_summary: Option<Summary>,
}

/// Consecutive summaries further apart than this in device time are not
/// joined (a controller that stalled).
const JOIN_MAX_MS: u32 = 60_000;

impl Model {
    /// An empty model.
    pub fn new() -> Model {
        Model::default()
    }

    /// The machine's mode (engine until a Hello says otherwise).
    pub fn mode(&self) -> Mode {
        self.hello.map_or(Mode::Engine, |h| h.mode)
    }

    /// The coverage factor k.
    pub fn coverage_factor(&self) -> f32 {
        self.hello
            .map(|h| h.coverage_factor)
            .filter(|k| k.is_finite() && *k > 0.0)
            .unwrap_or(2.0)
    }

    /// Takes in what the link holder observed.
    pub fn observe(&mut self, what: &Observed) {
        match what {
            Observed::Frame { frame, host_ms } => self.frame(frame, *host_ms),
            Observed::Totals(t) => self.counters(*t),
            Observed::Link {
                up,
                reason,
                host_ms,
            } => {
                if *up {
                    if self.link_down.take().is_some() {
                        self.news(*host_ms, "link back".into());
                    }
                } else {
                    let why = reason.clone().unwrap_or_else(|| "link down".into());
                    self.news(*host_ms, format!("link down: {why}"));
                    self.link_down = Some((*host_ms, why));
                    // The trends do not join across an outage.
                    self.previous_summary = None;
                }
            }
        }
    }

    fn news(&mut self, host_ms: i64, what: String) {
        self.link_news.push_back((host_ms, what));
        while self.link_news.len() > 4 {
            self.link_news.pop_front();
        }
    }

    /// The link's news of the last `within_ms` before `now_ms`, oldest first.
    pub fn fresh_news(&self, now_ms: i64, within_ms: i64) -> Vec<&str> {
        self.link_news
            .iter()
            .filter(|(at, _)| now_ms - at < within_ms)
            .map(|(_, what)| what.as_str())
            .collect()
    }

    fn counters(&mut self, t: Totals) {
        let old = self.link;
        let news = [
            (t.losses().saturating_sub(old.losses()), "frame(s) lost"),
            (t.gaps.saturating_sub(old.gaps), "sequence gap(s)"),
            (
                t.restarts.saturating_sub(old.restarts),
                "controller restart(s)",
            ),
            (t.duplicates.saturating_sub(old.duplicates), "duplicate(s)"),
            (
                t.replayed.saturating_sub(old.replayed),
                "summary(ies) replayed",
            ),
        ];
        let said: Vec<String> = news
            .iter()
            .filter(|(n, _)| *n > 0)
            .map(|(n, what)| format!("{n} {what}"))
            .collect();
        if !said.is_empty() {
            let at = self.last_frame_ms.unwrap_or(0);
            self.news(at, said.join(", "));
        }
        self.link = t;
    }

    fn frame(&mut self, frame: &Frame, host_ms: i64) {
        self.last_frame_ms = Some(host_ms);
        match frame {
            Frame::Hello(h) => {
                if self.hello.is_some_and(|old| old.run != h.run) || self.hello.is_none() {
                    self.totals = RunTotals {
                        run: h.run,
                        ..RunTotals::default()
                    };
                }
                self.hello = Some(*h);
            }
            Frame::Summary(s) => self.summary(s, host_ms),
            Frame::Event(e) => self.event(e.event, e.verdict),
            Frame::Reply(r) => {
                self.replies.push_back((*r, host_ms));
                while self.replies.len() > 8 {
                    self.replies.pop_front();
                }
            }
        }
    }

    fn summary(&mut self, s: &Summary, host_ms: i64) {
        // Consecutive summaries of one controller session are joined; a
        // lost summary, an outage or a restart breaks the line.
        let joined = self.previous_summary.filter(|p| {
            let dt = s.t_ms.wrapping_sub(p.t_ms);
            s.seq == p.seq.wrapping_add(1) && dt > 0 && dt <= JOIN_MAX_MS
        });
        // Totals: each window's mean powers over the time since the
        // previous summary, which tiles the run.
        if let Some(p) = joined
            && s.duration_s > 0.0
        {
            let dt = f64::from(s.t_ms.wrapping_sub(p.t_ms)) / 1000.0;
            let per_s = |x: f32| f64::from(x) / f64::from(s.duration_s) * dt;
            let t = &mut self.totals;
            t.seconds += dt;
            t.energies_j[0] += per_s(s.heat_in_j);
            t.energies_j[1] += per_s(s.work_j);
            t.energies_j[2] += per_s(s.heat_out_j);
            t.entropies_j_per_k[0] += per_s(s.entropy_in_j_per_k);
            t.entropies_j_per_k[1] += per_s(s.entropy_out_j_per_k);
        }
        if joined.is_none() {
            self.trend.clear();
        }
        let m = s.metrics();
        let (perf, bound) = if s.status.mode.is_reverse() {
            (m.cop, m.carnot_cop)
        } else {
            (m.efficiency, m.carnot_efficiency)
        };
        self.trend.push(s.t_ms, m.carnot_margin, m.hot_mean_k);
        let lines = self.trend.lines();
        let k = self.coverage_factor();
        self.time_to_limit = TimeToLimit {
            carnot_bound_s: time_to_limit(&lines, 0.0, k).carnot_bound_s,
            hot_max_s: self
                .hot_max_k
                .and_then(|h| time_to_limit(&lines, h, k).hot_max_s),
        };
        let pair = |v: Option<f32>, u: Option<f32>| v.map(|v| (v, u.unwrap_or(0.0)));
        let x_s = match (self.points.back(), joined) {
            (Some(last), Some(p)) => last.x_s + f64::from(s.t_ms.wrapping_sub(p.t_ms)) / 1000.0,
            (Some(last), None) => last.x_s + (host_ms - last.host_ms).max(0) as f64 / 1000.0,
            (None, _) => 0.0,
        };
        let point = Point {
            host_ms,
            x_s,
            performance: pair(perf, s.u_performance),
            bound: pair(bound, s.u_bound),
            entropy_rate: pair(s.entropy_rate_w_per_k, s.u_entropy_rate_w_per_k),
            t_hot_k: m.hot_mean_k,
            t_cold_k: (s.entropy_out_j_per_k > 0.0)
                .then(|| s.heat_out_j / s.entropy_out_j_per_k)
                .filter(|t| t.is_finite()),
            powers_w: (s.duration_s > 0.0)
                .then(|| [s.heat_in_j, s.work_j, s.heat_out_j].map(|e| e / s.duration_s)),
            breaks: joined.is_none(),
        };
        self.points.push_back(point);
        while self.points.len() > MAX_POINTS {
            self.points.pop_front();
        }
        self.pending(s, perf, bound);
        self.previous_summary = Some(*s);
        self.latest = Some((*s, host_ms));
    }

    /// Second-law rules whose condition the summary shows but whose alarm
    /// is not raised: pending (their on-delay runs).
    fn pending(&mut self, s: &Summary, perf: Option<f32>, bound: Option<f32>) {
        let k = self.coverage_factor();
        let beyond = match (perf, bound, s.u_margin) {
            (Some(p), Some(b), Some(u)) => p - b > k * u,
            (Some(p), Some(b), None) => p > b,
            _ => false,
        };
        let negative = match (s.entropy_rate_w_per_k, s.u_entropy_rate_w_per_k) {
            (Some(r), Some(u)) => r < -k * u,
            (Some(r), None) => r < 0.0,
            _ => false,
        };
        for (rule, holds) in [
            (RuleId::BeyondCarnot, beyond),
            (RuleId::NegativeEntropyProduction, negative),
        ] {
            let raised = s.alarms & (1 << rule.index()) != 0;
            let i = self.current(rule);
            match (i, holds && !raised) {
                (None, true) => self.alarms.insert(
                    0,
                    AlarmRow {
                        rule,
                        severity: rule.default_severity(),
                        status: AlarmStatus::Pending,
                        raised_t_ms: Some(s.t_ms),
                        acked_t_ms: None,
                        cleared_t_ms: None,
                        verdict: Verdict::default(),
                    },
                ),
                (Some(i), false) if self.alarms[i].status == AlarmStatus::Pending => {
                    self.alarms.remove(i);
                }
                _ => {}
            }
        }
    }

    /// The row of `rule` that is not cleared, if any.
    fn current(&self, rule: RuleId) -> Option<usize> {
        self.alarms
            .iter()
            .position(|r| r.rule == rule && r.status != AlarmStatus::Cleared)
    }

    fn event(&mut self, e: heatbound::alarm::Event, verdict: Verdict) {
        let i = self.current(e.rule);
        match e.kind {
            EventKind::Raised => {
                let row = AlarmRow {
                    rule: e.rule,
                    severity: e.severity,
                    status: AlarmStatus::Active,
                    raised_t_ms: Some(e.t_ms),
                    acked_t_ms: None,
                    cleared_t_ms: None,
                    verdict,
                };
                match i {
                    Some(i) => self.alarms[i] = row,
                    None => self.alarms.insert(0, row),
                }
            }
            EventKind::Acknowledged => {
                if let Some(i) = i {
                    self.alarms[i].status = AlarmStatus::Acknowledged;
                    self.alarms[i].acked_t_ms = Some(e.t_ms);
                }
            }
            EventKind::Cleared => {
                if let Some(i) = i {
                    let mut row = self.alarms.remove(i);
                    row.status = AlarmStatus::Cleared;
                    row.cleared_t_ms = Some(e.t_ms);
                    // Current rows first, then the cleared ones, newest first.
                    let at = self
                        .alarms
                        .iter()
                        .position(|r| r.status == AlarmStatus::Cleared)
                        .unwrap_or(self.alarms.len());
                    self.alarms.insert(at, row);
                }
            }
        }
        self.alarms.truncate(32);
    }

    /// The trends' time axis now (host time `now_ms`): the latest point's
    /// place, plus the wall time since it arrived (at most a minute).
    pub fn x_now(&self, now_ms: i64) -> f64 {
        // The latest point received by then (a paused view asks for a past time).
        let at = self
            .points
            .iter()
            .rev()
            .find(|p| p.host_ms <= now_ms)
            .or(self.points.front());
        match at {
            Some(p) => p.x_s + (now_ms - p.host_ms).clamp(0, 60_000) as f64 / 1000.0,
            None => 0.0,
        }
    }

    /// Whether the trip output is on (the latest summary's status).
    pub fn trip(&self) -> bool {
        self.latest.is_some_and(|(s, _)| s.status.trip_active)
    }

    /// The worst severity among raised alarms (active or acknowledged).
    pub fn worst(&self) -> Option<Severity> {
        self.alarms
            .iter()
            .filter(|r| matches!(r.status, AlarmStatus::Active | AlarmStatus::Acknowledged))
            .map(|r| r.severity)
            .max()
    }
}
