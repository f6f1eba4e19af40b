//! The live monitor: a sliding window of valid samples and the run totals,
//! updated in O(1) per sample.

use crate::num::{Real, WindowSums, ratio};

use super::figures::{Metrics, Prepared};
use super::health::{Faults, StuckCheck};
use super::integrals::{Integrals, TERMS, Terms, integrals_of, integrands, trapezoid};
use super::rule_inputs::WindowAlarmInputs;
use super::sample::{Channel, Invalid, MAX_POWER_W, Pushed, Sample};
use super::settings::{FigureSettings, MonitorConfig};
use super::steady::{STEADY_CHANNELS, SteadyTracker};
use super::trend::{TrendTracker, Trends};

/// Errors building a [`Monitor`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum MonitorError {
    /// `window_samples` exceeds the monitor's capacity `N`.
    WindowTooLong {
        /// Configured window, samples.
        window_samples: u32,
        /// Capacity of this monitor.
        capacity: usize,
    },
}

impl core::fmt::Display for MonitorError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            MonitorError::WindowTooLong {
                window_samples,
                capacity,
            } => {
                write!(
                    f,
                    "`window_samples` = {window_samples} exceeds this monitor's capacity of {capacity} samples"
                )
            }
        }
    }
}

impl core::error::Error for MonitorError {}

/// The live monitor: a sliding window of up to `N` valid samples plus run
/// totals, computing in `R` (`f32` by default).
#[derive(Clone, Debug)]
pub struct Monitor<const N: usize, R: Real = f32> {
    settings: FigureSettings,
    prepared: Prepared<R>,
    window_len: usize,
    /// Trapezoids in a full window: `window_len − 1`.
    refresh_after: u32,
    max_gap_ms: u32,
    stale_ms: u32,
    t_min_k: R,
    t_max_k: R,
    /// Whether this run measures heat out; fixed by the first valid sample.
    measured: Option<bool>,
    /// Whether this run reads a second hot sensor; fixed likewise.
    hot2: Option<bool>,
    /// Time of the previous valid sample.
    prev_ms: Option<u32>,
    /// Integrands of the previous valid sample.
    prev_point: Terms<R>,
    /// `ring[i]` and `ring_ms[i]` are the trapezoid that ends at the i-th
    /// sample of the window and its length
    /// (zero for a sample that starts integration).
    ring: [Terms<R>; N],
    ring_ms: [u32; N],
    head: usize,
    filled: usize,
    /// The window's sums and the run totals of the trapezoids.
    sums: WindowSums<R, TERMS>,
    window_ms: u64,
    totals_ms: u64,
    steady_ms: u64,
    /// Whether the rig has been steady since integration (re)started: the
    /// trends start then.
    steady_seen: bool,
    steady: SteadyTracker<R>,
    stuck: StuckCheck<R>,
    is_steady: bool,
    faults: Faults,
    valid: u64,
    invalid: u64,
    restarts: u64,
    first_ms: Option<u32>,
    last_ms: u32,
    span_ms: u64,
    last_t_hot_k: Option<R>,
    trend: TrendTracker<R>,
}

impl<const N: usize, R: Real> Monitor<N, R> {
    /// An empty monitor for `config`.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// use heatbound::monitor::{Monitor, Sample, Pushed};
    /// let mut m: Monitor<64> = Monitor::new(&RigConfig::default()).unwrap();
    /// let s = |t_ms| Sample { t_ms, t_hot_k: 600.0, t_cold_k: 300.0,
    ///                         heat_in_w: 1000.0, work_w: 150.0, heat_out_w: None,
    ///                         t_hot2_k: None };
    /// assert_eq!(m.push(&s(0)), Pushed::Started);
    /// assert_eq!(m.push(&s(1000)), Pushed::Integrated);
    /// let w = m.window_metrics();
    /// assert_eq!(w.efficiency, Some(0.15));
    /// assert!((w.entropy_rate_w_per_k.unwrap() - 1.166_666_7).abs() < 1e-5);
    /// ```
    pub fn new(config: &impl MonitorConfig) -> Result<Self, MonitorError> {
        Self::fits(config)?;
        let config = &config.monitor_settings();
        let window_len = config.window_samples as usize;
        let to_ms = |s: f64| (s * 1000.0).clamp(0.0, u32::MAX as f64 / 2.0) as u32;
        let settings = FigureSettings::new(config);
        // Finite bounds, not NaN: a reading inside them is finite (see
        // `check`). A NaN bound leaves no reading inside.
        let (t_min_k, t_max_k) = match (
            finite_bound(R::from_f64(config.health.min_temperature_k)),
            finite_bound(R::from_f64(config.health.max_temperature_k)),
        ) {
            (lo, hi) if lo.is_finite() && hi.is_finite() => (lo, hi),
            _ => (R::MAX, -R::MAX),
        };
        Ok(Self {
            settings,
            prepared: Prepared::new(&settings),
            window_len,
            refresh_after: config.window_samples - 1,
            max_gap_ms: to_ms(config.max_gap_s),
            stale_ms: to_ms(config.health.stale_s),
            t_min_k,
            t_max_k,
            measured: None,
            hot2: None,
            prev_ms: None,
            prev_point: [R::ZERO; TERMS],
            ring: [[R::ZERO; TERMS]; N],
            ring_ms: [0; N],
            head: 0,
            filled: 0,
            sums: WindowSums::new(),
            window_ms: 0,
            totals_ms: 0,
            steady_ms: 0,
            steady_seen: false,
            steady: SteadyTracker::new(config),
            stuck: StuckCheck {
                last: [R::ZERO; STEADY_CHANNELS],
                repeats: [0; STEADY_CHANNELS],
                limit: config.health.stuck_samples,
            },
            is_steady: false,
            faults: Faults::default(),
            valid: 0,
            invalid: 0,
            restarts: 0,
            first_ms: None,
            last_ms: 0,
            span_ms: 0,
            last_t_hot_k: None,
            trend: TrendTracker::new(),
        })
    }

    /// Whether a monitor of this capacity can run `config`, without
    /// building one (a monitor is kilobytes; a controller checks a
    /// configuration it was sent before it lets go of the one it runs).
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// use heatbound::monitor::Monitor;
    /// let mut c = RigConfig::default();
    /// c.window_samples = 100;
    /// assert!(Monitor::<64>::fits(&c).is_err());
    /// assert!(Monitor::<128>::fits(&c).is_ok());
    /// ```
    pub fn fits(config: &impl MonitorConfig) -> Result<(), MonitorError> {
        let window_samples = config.monitor_settings().window_samples;
        let window_len = window_samples as usize;
        if window_len > N || window_len < 2 {
            return Err(MonitorError::WindowTooLong {
                window_samples,
                capacity: N,
            });
        }
        Ok(())
    }

    /// Why `s` cannot be integrated, if it cannot.
    fn check(&self, s: &Sample<R>) -> Result<(), Invalid> {
        // The usual sample, told by two range tests and two magnitude
        // comparisons: the bounds are finite and a NaN passes none, so
        // readings that pass are finite. Anything else (a test may refuse
        // what is in fact fine) is classified reading by reading.
        let (lo, hi) = (self.t_min_k, self.t_max_k);
        let max_power = R::from_f32(MAX_POWER_W);
        let usual = s.t_hot_k.within(lo, hi)
            & s.t_cold_k.within(lo, hi)
            & (s.heat_in_w.abs() <= max_power)
            & (s.work_w.abs() <= max_power);
        if !usual {
            return self.check_each(s);
        }
        self.check_hot2(s)?;
        self.check_rest(s)
    }

    // Written out channel by channel: a loop over (value, channel) pairs is
    // not unrolled when the firmware is built for size.
    #[cold]
    #[inline(never)]
    fn check_each(&self, s: &Sample<R>) -> Result<(), Invalid> {
        let finite = |v: R, c| {
            if v.is_finite() {
                Ok(())
            } else {
                Err(Invalid::NonFinite(c))
            }
        };
        finite(s.t_hot_k, Channel::Hot)?;
        finite(s.t_cold_k, Channel::Cold)?;
        finite(s.heat_in_w, Channel::HeatIn)?;
        finite(s.work_w, Channel::Work)?;
        self.in_range(s.t_hot_k, Channel::Hot)?;
        self.in_range(s.t_cold_k, Channel::Cold)?;
        self.check_hot2(s)?;
        let max_power = R::from_f32(MAX_POWER_W);
        let bounded = |v: R, c| {
            if v.abs() <= max_power {
                Ok(())
            } else {
                Err(Invalid::OutOfRange(c))
            }
        };
        bounded(s.heat_in_w, Channel::HeatIn)?;
        bounded(s.work_w, Channel::Work)?;
        self.check_rest(s)
    }

    #[inline]
    fn in_range(&self, v: R, c: Channel) -> Result<(), Invalid> {
        if v >= self.t_min_k && v <= self.t_max_k {
            Ok(())
        } else {
            Err(Invalid::OutOfRange(c))
        }
    }

    #[inline]
    fn check_hot2(&self, s: &Sample<R>) -> Result<(), Invalid> {
        match (self.hot2, s.t_hot2_k) {
            (_, Some(t)) if !t.is_finite() => Err(Invalid::NonFinite(Channel::Hot2)),
            (_, Some(t)) => self.in_range(t, Channel::Hot2),
            (Some(true), None) => Err(Invalid::MissingHot2),
            _ => Ok(()),
        }
    }

    /// Heat out and the sample's time.
    #[inline]
    fn check_rest(&self, s: &Sample<R>) -> Result<(), Invalid> {
        match (self.measured, s.heat_out_w) {
            (_, Some(q)) if !q.is_finite() => return Err(Invalid::NonFinite(Channel::HeatOut)),
            (_, Some(q)) if q.abs() > R::from_f32(MAX_POWER_W) => {
                return Err(Invalid::OutOfRange(Channel::HeatOut));
            }
            (Some(true), None) => return Err(Invalid::MissingHeatOut),
            _ => {}
        }
        if self.prev_ms == Some(s.t_ms) {
            return Err(Invalid::RepeatedTime);
        }
        Ok(())
    }

    /// Takes one sample: integrates it from the previous valid sample, slides
    /// the window, updates the steady-state test and the channel faults.
    /// O(1): no rescan of the window.
    pub fn push(&mut self, s: &Sample<R>) -> Pushed {
        // Time bookkeeping covers every sample, valid or not.
        match self.first_ms {
            None => self.first_ms = Some(s.t_ms),
            Some(_) => self.span_ms += u64::from(s.t_ms.wrapping_sub(self.last_ms)),
        }
        let since_last = s.t_ms.wrapping_sub(self.last_ms);
        let had_sample = self.valid + self.invalid > 0;
        self.last_ms = s.t_ms;
        self.faults.stale = had_sample && since_last > self.stale_ms;

        if let Err(why) = self.check(s) {
            return self.refuse(why, s.t_ms, since_last);
        }
        self.faults.invalid = 0;
        let measured = *self.measured.get_or_insert(s.heat_out_w.is_some());
        self.hot2.get_or_insert(s.t_hot2_k.is_some());
        let point = integrands(s, measured);
        self.last_t_hot_k = Some(s.t_hot_k);

        let values = [
            s.t_hot_k,
            s.t_cold_k,
            s.heat_in_w,
            s.work_w,
            s.heat_out_w.unwrap_or(R::ZERO),
        ];
        let present = if measured { 0x1f } else { 0x0f };
        self.faults.stuck = self.stuck.update(&values, present);
        self.update_fault_since(s.t_ms, since_last);

        // The spacing to the previous valid sample, if it is bridged.
        let dt_ms = match self.prev_ms {
            Some(t_prev) if s.t_ms.wrapping_sub(t_prev) <= self.max_gap_ms => {
                Some(s.t_ms.wrapping_sub(t_prev))
            }
            _ => None,
        };
        self.valid += 1;

        // Slide the window: the new sample's trapezoid enters; when full, the
        // oldest sample leaves and with it the trapezoid to its successor.
        let full = self.filled == self.window_len;
        if full {
            self.head = if self.head + 1 == self.window_len {
                0
            } else {
                self.head + 1
            };
            if let Some(ms) = self.ring_ms.get(self.head) {
                self.window_ms -= u64::from(*ms);
            }
        } else {
            self.filled += 1;
        }
        let mut newest = self.head + self.filled - 1;
        if newest >= self.window_len {
            newest -= self.window_len;
        }
        let entry_ms = dt_ms.unwrap_or(0);
        let entry = match dt_ms {
            Some(dt_ms) => {
                self.totals_ms += u64::from(dt_ms);
                trapezoid(&self.prev_point, &point, dt_ms)
            }
            None => [R::ZERO; TERMS],
        };
        // The oldest sample's own trapezoid reaches outside the window,
        // which therefore holds `window_len − 1` trapezoids when full. Every
        // trapezoid enters it, so the run totals are kept there too.
        if self.filled > 1 {
            let leaving = if full { self.ring.get(self.head) } else { None };
            let rebuilt = self.sums.slide(&entry, leaving, self.refresh_after);
            self.window_ms += u64::from(entry_ms);
            // Once per window, from the first steady period on (a warm-up
            // heads for its operating point, not for a limit): a point of
            // the trends.
            if rebuilt && full && self.steady_seen && self.trend.due(s.t_ms) {
                let margin = self
                    .window_integrals()
                    .alarm_figures_with::<false>(&self.prepared)
                    .carnot_margin;
                self.trend.push(s.t_ms, margin, Some(s.t_hot_k));
            }
        }
        if let (Some(slot), Some(ms)) = (self.ring.get_mut(newest), self.ring_ms.get_mut(newest)) {
            *slot = entry;
            *ms = entry_ms;
        }
        self.prev_ms = Some(s.t_ms);
        self.prev_point = point;

        let outcome = if dt_ms.is_some() {
            Pushed::Integrated
        } else {
            if self.valid > 1 {
                self.restarts += 1;
                self.trend.clear();
                // Not drifting from an operating point until steady again.
                self.steady_seen = false;
            }
            self.steady.restart(s.t_ms);
            Pushed::Started
        };
        self.is_steady = self.steady.push(s.t_ms, &values);
        if self.is_steady {
            self.steady_seen = true;
            self.steady_ms += u64::from(entry_ms);
        }
        outcome
    }

    /// Counts a sample refused for `why` and marks its channel faulty.
    #[cold]
    #[inline(never)]
    fn refuse(&mut self, why: Invalid, t_ms: u32, since_last: u32) -> Pushed {
        self.invalid += 1;
        self.faults.invalid = match why {
            Invalid::NonFinite(c) | Invalid::OutOfRange(c) => c.bit(),
            Invalid::MissingHeatOut => Channel::HeatOut.bit(),
            Invalid::MissingHot2 => Channel::Hot2.bit(),
            Invalid::RepeatedTime => 0,
        };
        self.update_fault_since(t_ms, since_last);
        Pushed::Invalid(why)
    }

    fn update_fault_since(&mut self, t_ms: u32, since_last: u32) {
        let faulty = self.faults.invalid != 0 || self.faults.stuck != 0 || self.faults.stale;
        self.faults.since_ms = match (faulty, self.faults.since_ms) {
            (false, _) => None,
            (true, Some(since)) => Some(since),
            // A stale channel has been silent since the previous sample.
            (true, None) if self.faults.stale => Some(t_ms.wrapping_sub(since_last)),
            (true, None) => Some(t_ms),
        };
    }

    /// The window's raw integrals.
    pub fn window_integrals(&self) -> Integrals<R> {
        integrals_of(
            &self.sums.window(),
            self.window_ms,
            self.measured.unwrap_or(false),
            self.hot2.unwrap_or(false),
        )
    }

    /// The run's raw integrals.
    pub fn totals_integrals(&self) -> Integrals<R> {
        integrals_of(
            &self.sums.totals_f64().map(R::from_f64),
            self.totals_ms,
            self.measured.unwrap_or(false),
            self.hot2.unwrap_or(false),
        )
    }

    /// Every figure of the sliding window.
    pub fn window_metrics(&self) -> Metrics<R> {
        self.window_integrals().metrics(&self.settings)
    }

    /// Every figure of the whole run.
    pub fn totals_metrics(&self) -> Metrics<R> {
        self.totals_integrals().metrics(&self.settings)
    }

    /// What the alarm rules need now, for `alarm::AlarmSet::update`: the
    /// uncertainties are worked out only if a rule needs them (see
    /// [`RuleInputs`](super::rule_inputs::RuleInputs)).
    ///
    pub fn alarm_inputs(&self) -> WindowAlarmInputs<'_, R> {
        WindowAlarmInputs {
            integrals: self.window_integrals(),
            prepared: &self.prepared,
            t_hot_k: self.last_t_hot_k,
            faults: self.faults,
            trends: self.trend.lines(),
        }
    }

    /// The lines fitted to the recent windows' Carnot margin and hot-side
    /// temperature, where the rig is heading.
    pub fn trends(&self) -> Trends<R> {
        self.trend.lines()
    }

    /// The settings the figures are computed with.
    pub fn settings(&self) -> &FigureSettings {
        &self.settings
    }

    /// Whether every channel has stayed in band for the configured duration.
    pub fn is_steady(&self) -> bool {
        self.is_steady
    }

    /// Fraction of integrated run time that was steady, if any time was integrated.
    pub fn steady_fraction(&self) -> Option<R> {
        ratio(
            R::from_f64(self.steady_ms as f64),
            R::from_f64(self.totals_ms as f64),
        )
    }

    /// Channel faults as of the latest sample.
    pub fn faults(&self) -> Faults {
        self.faults
    }

    /// Valid samples taken.
    pub fn valid_samples(&self) -> u64 {
        self.valid
    }

    /// Invalid samples skipped.
    pub fn invalid_samples(&self) -> u64 {
        self.invalid
    }

    /// Times integration restarted after a gap.
    pub fn restarts(&self) -> u64 {
        self.restarts
    }

    /// Valid samples now in the window.
    pub fn window_samples(&self) -> usize {
        self.filled
    }

    /// Time from the first to the latest sample, valid or not, in seconds
    /// (wraps of the millisecond clock included).
    pub fn elapsed_s(&self) -> f64 {
        self.span_ms as f64 * 1e-3
    }

    /// Whether heat out is measured in this run (`None` before the first valid sample).
    pub fn heat_out_measured(&self) -> Option<bool> {
        self.measured
    }

    /// Whether this run reads a second hot sensor (`None` before the first valid sample).
    pub fn hot2_measured(&self) -> Option<bool> {
        self.hot2
    }
}

/// `x` clamped to the finite range (NaN stays NaN).
fn finite_bound<R: Real>(x: R) -> R {
    if x > R::MAX {
        R::MAX
    } else if x < -R::MAX {
        -R::MAX
    } else {
        x
    }
}
