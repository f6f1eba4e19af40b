//! The monitor: samples in, second-law figures out, O(1) per sample.
//!
//! ```text
//! conversion --> Sample --> Monitor::push --> window + run integrals
//!                                    |--> Monitor::alarm_inputs --> AlarmSet::update
//!                                    '--> Monitor::window_metrics / totals_metrics (on demand)
//! ```
//!
//! ## Definitions
//! - Integration is by the trapezoidal rule between consecutive valid samples.
//!   A spacing longer than `max_gap_s` is not bridged: integration restarts
//!   after it. Invalid samples are skipped and counted, and their valid
//!   neighbours are joined when the spacing allows.
//! - `Q_in = ∫q_in dt`, `W = ∫w dt`, `Q_out = ∫q_out dt` when heat out is
//!   measured, else `Q_in − W`.
//! - Heat-weighted mean temperatures `T_h = Q_in / ∫(q_in/T_hot) dt` and
//!   `T_c = Q_out / ∫(q_out/T_cold) dt`.
//! - `η = W/Q_in`, `η_C = 1 − T_c/T_h`, `η_CA = 1 − √(T_c/T_h)`, margin
//!   `η_C − η`, second-law efficiency `η/η_C`.
//! - `S_gen = ∫(q_out/T_cold) dt + Q_loss/T0 − ∫(q_in/T_hot) dt`, with
//!   `Q_loss = Q_in − W − Q_out` only when heat out is measured; `σ̇ = S_gen`
//!   per second of integrated time; exergy destroyed `T0·S_gen` (Gouy–Stodola).
//!   `T0` is the configured ambient, else the cold-side mean: the time mean
//!   of `T_cold` when heat out is measured (a heat-weighted mean would be
//!   undefined once the coolant stops carrying heat), `T_c` when inferred.
//! - Heat pump and cooler: COP `Q_in/W` (heat delivered) or `Q_out/W` (heat
//!   drawn) against `T_h/(T_h − T_c)` or `T_c/(T_h − T_c)`; the entropy
//!   account changes sign with the direction of the heat flows.
//! - A figure whose denominator is ≤ 0 is `None`, never NaN or inf.
//!
//! ## Uncertainty (GUM, JCGM 100:2008, first-order law of propagation)
//! Each channel's standard uncertainty is a *systematic* error: an offset of
//! the hot or cold temperature, or a scale error of a power channel, shared
//! by every sample. Such errors do not average down over a window. The
//! monitor therefore keeps, beside the plain integrals, the sensitivities
//! `∫q_in/T_hot² dt` and `∫q_out/T_cold² dt` (and, with heat out inferred,
//! `∫q_in/T_cold dt` and `∫w/T_cold dt` separately), from which the partial
//! derivative of every figure with respect to each of the five systematic
//! errors follows exactly. Correlations are kept because each error's
//! partials are combined before squaring: `u(margin)` is not
//! `√(u(η_C)² + u(η)²)`. A configured `T0` is exact; the default `T0` is
//! itself measured, and a cold-side offset moves it one for one.
//!
//! ## Cost and precision
//! [`Monitor::push`] adds one interval to the window and to the run totals
//! and subtracts the interval that leaves the window: no rescan. The
//! window's sums are rebuilt from fresh ones every window and the run totals
//! are folded into `f64` ([`WindowSums`]), so a run of weeks at 10 Hz does
//! not drift. The steady-state test keeps min/max per channel in 8 time buckets
//! of `duration_s/8`, amortised O(1). The monitor is generic over the
//! [`Real`] it computes in: `f32` on a controller, `f64` on the host.
//!
//! `size_of::<Monitor<64>>()` (f32) is 3 232 bytes on x86-64, and the
//! `alarm::AlarmSet` adds 232: together well under the
//! 8 KiB budget (a unit test checks it; `cargo run -p heatbound --example
//! sizes` prints the figures).

use serde::{Deserialize, Serialize};

use crate::num::{Real, WindowSums, lanes};

/// Which way the machine runs, which decides the figure of merit.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[serde(rename_all = "snake_case")]
pub enum Mode {
    /// A heat engine: efficiency η = W/Q_in against η_C = 1 − T_c/T_h.
    ///
    /// Channels: `heat_in_w` is heat drawn from the hot side, `work_w` the
    /// work delivered, `heat_out_w` the heat rejected to the cold side.
    #[default]
    Engine,
    /// A heat pump: COP = Q_hot/W against T_h/(T_h − T_c).
    ///
    /// Channels: `heat_in_w` is the heat delivered to the hot side, `work_w`
    /// the work driving the machine, `heat_out_w` the heat drawn from the
    /// cold side.
    HeatPump,
    /// A cooler: COP = Q_cold/W against T_c/(T_h − T_c); channels as for
    /// [`Mode::HeatPump`].
    Cooler,
}

impl Mode {
    /// The name used in `rig.toml`.
    pub const fn as_str(self) -> &'static str {
        match self {
            Mode::Engine => "engine",
            Mode::HeatPump => "heat_pump",
            Mode::Cooler => "cooler",
        }
    }

    /// Whether the machine runs backwards (heat pump or cooler).
    pub const fn is_reverse(self) -> bool {
        !matches!(self, Mode::Engine)
    }
}

impl core::fmt::Display for Mode {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Validated standard uncertainties.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Uncertainty {
    /// Hot-side temperature, kelvin.
    pub hot_k: f64,
    /// Cold-side temperature, kelvin.
    pub cold_k: f64,
    /// Heat input, relative.
    pub heat_in_rel: f64,
    /// Work, relative.
    pub work_rel: f64,
    /// Heat out, relative.
    pub heat_out_rel: f64,
}

impl Default for Uncertainty {
    fn default() -> Self {
        // See the config module docs for the tolerance class behind each value.
        const SQRT3: f64 = 1.732_050_807_568_877_2;
        Self {
            hot_k: 2.0 / SQRT3,
            cold_k: 0.25 / SQRT3,
            heat_in_rel: 0.01 / SQRT3,
            work_rel: 0.01 / SQRT3,
            heat_out_rel: 0.02 / SQRT3,
        }
    }
}

/// Validated steady-state settings.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Steady {
    /// Seconds every channel must stay in band.
    pub duration_s: f64,
    /// Hot-side band, kelvin.
    pub hot_band_k: f64,
    /// Cold-side band, kelvin.
    pub cold_band_k: f64,
    /// Heat-input band, relative.
    pub heat_in_band_rel: f64,
    /// Work band, relative.
    pub work_band_rel: f64,
    /// Heat-out band, relative.
    pub heat_out_band_rel: f64,
}

impl Default for Steady {
    fn default() -> Self {
        Self {
            duration_s: 60.0,
            hot_band_k: 2.0,
            cold_band_k: 2.0,
            heat_in_band_rel: 0.05,
            work_band_rel: 0.05,
            heat_out_band_rel: 0.05,
        }
    }
}

/// Validated health settings.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Health {
    /// Consecutive identical readings that make a channel stuck; 0 = off.
    pub stuck_samples: u32,
    /// Sample spacing that makes the channels stale, seconds.
    pub stale_s: f64,
    /// Lowest plausible temperature, kelvin.
    pub min_temperature_k: f64,
    /// Highest plausible temperature, kelvin.
    pub max_temperature_k: f64,
}

/// What the monitor needs to know about a rig: the settings the
/// configuration gathers ([`MonitorConfig`] gives them).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MonitorSettings {
    /// Which way the machine runs.
    pub mode: Mode,
    /// Ambient temperature T0 for exergy, kelvin; `None`: the cold-side mean.
    pub ambient_k: Option<f64>,
    /// Length of the sliding window, in valid samples.
    pub window_samples: u32,
    /// Longest gap bridged by the integration, seconds.
    pub max_gap_s: f64,
    /// Standard uncertainties of the channels.
    pub uncertainty: Uncertainty,
    /// Steady-state detection.
    pub steady: Steady,
    /// Channel health.
    pub health: Health,
}

/// Anything that holds the monitor's settings, such as the validated rig
/// configuration.
pub trait MonitorConfig {
    /// The monitor's settings.
    fn monitor_settings(&self) -> MonitorSettings;
}

impl MonitorConfig for MonitorSettings {
    fn monitor_settings(&self) -> MonitorSettings {
        *self
    }
}

/// One reading of every channel, already converted to SI units.
///
/// `heat_in_w`, `work_w` and `heat_out_w` follow the sign conventions of
/// [`Mode`]. `heat_out_w` is `None` when heat out is not measured.
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize)]
pub struct Sample<R = f32> {
    /// Sample time, milliseconds; wraps after 49.7 days, which is handled.
    pub t_ms: u32,
    /// Hot-side temperature, kelvin.
    pub t_hot_k: R,
    /// Cold-side temperature, kelvin.
    pub t_cold_k: R,
    /// Heat input, watts.
    pub heat_in_w: R,
    /// Work, watts.
    pub work_w: R,
    /// Heat out, watts, if measured.
    pub heat_out_w: Option<R>,
}

/// The channels of a [`Sample`], for faults and steady-state bands.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[serde(rename_all = "snake_case")]
#[repr(u8)]
pub enum Channel {
    /// `t_hot_k`.
    Hot = 0,
    /// `t_cold_k`.
    Cold = 1,
    /// `heat_in_w`.
    HeatIn = 2,
    /// `work_w`.
    Work = 3,
    /// `heat_out_w`.
    HeatOut = 4,
}

impl Channel {
    /// Every channel, in bit order.
    pub const ALL: [Channel; 5] = [
        Channel::Hot,
        Channel::Cold,
        Channel::HeatIn,
        Channel::Work,
        Channel::HeatOut,
    ];

    /// The channel's column name.
    pub const fn as_str(self) -> &'static str {
        match self {
            Channel::Hot => "hot",
            Channel::Cold => "cold",
            Channel::HeatIn => "heat_in_w",
            Channel::Work => "work_w",
            Channel::HeatOut => "heat_out_w",
        }
    }

    /// The channel's bit in a fault mask.
    pub const fn bit(self) -> u8 {
        1 << (self as u8)
    }
}

impl core::fmt::Display for Channel {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The largest power magnitude a sample may carry, watts: a terawatt, far
/// beyond any bench rig, so a reading past it is a converter or scaling
/// fault. It also keeps every `f32` sum of a run (weeks at 10 Hz) finite.
pub const MAX_POWER_W: f32 = 1.0e12;

/// Why a sample was not integrated.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Invalid {
    /// A reading is NaN or infinite.
    NonFinite(Channel),
    /// A temperature is outside the configured plausible range, or a power
    /// beyond ±[`MAX_POWER_W`].
    OutOfRange(Channel),
    /// Heat out is measured in this run, but the sample has none.
    MissingHeatOut,
    /// The sample has the same time stamp as the previous one.
    RepeatedTime,
}

impl core::fmt::Display for Invalid {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Invalid::NonFinite(c) => write!(f, "{c} is not a finite number"),
            Invalid::OutOfRange(c @ (Channel::Hot | Channel::Cold)) => {
                write!(f, "{c} is outside the plausible temperature range")
            }
            Invalid::OutOfRange(c) => write!(f, "{c} is beyond ±{MAX_POWER_W:e} W"),
            Invalid::MissingHeatOut => {
                f.write_str("heat_out_w is missing in a run that measures it")
            }
            Invalid::RepeatedTime => f.write_str("time stamp repeats the previous sample's"),
        }
    }
}

/// What [`Monitor::push`] did with a sample.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Pushed {
    /// Integrated from the previous valid sample.
    Integrated,
    /// Valid, and starts integration: the first sample, or the first after a
    /// gap longer than `max_gap_s`.
    Started,
    /// Skipped and counted.
    Invalid(Invalid),
}

/// The state of the channels, as the `sensor_fault` rule sees it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Faults {
    /// Channels invalid in the latest sample, as [`Channel::bit`]s.
    pub invalid: u8,
    /// Channels that repeated the same value `stuck_samples` times in a row.
    pub stuck: u8,
    /// The latest sample came later than `stale_s` after the one before.
    pub stale: bool,
    /// Since when the channels have been faulty, if they are now.
    pub since_ms: Option<u32>,
}

impl Faults {
    /// Whether any channel is faulty.
    pub const fn any(&self) -> bool {
        self.since_ms.is_some()
    }
}

/// The raw integrals of a window or run: everything the figures are derived
/// from. These travel on the wire so the host can recompute every figure.
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize)]
pub struct Integrals<R> {
    /// Integrated time, seconds (gaps excluded).
    pub duration_s: R,
    /// `Q_in = ∫q_in dt`, joules.
    pub heat_in_j: R,
    /// `W = ∫w dt`, joules.
    pub work_j: R,
    /// `Q_out`: `∫q_out dt` if measured, else `Q_in − W`, joules.
    pub heat_out_j: R,
    /// Whether heat out was measured.
    pub heat_out_measured: bool,
    /// `∫q_in/T_hot dt`, J/K.
    pub entropy_in_j_per_k: R,
    /// `∫q_out/T_cold dt`, J/K.
    pub entropy_out_j_per_k: R,
    /// `∫q_in/T_hot² dt`, J/K²: sensitivity to a hot-side offset.
    pub hot_sensitivity: R,
    /// `∫q_out/T_cold² dt`, J/K²: sensitivity to a cold-side offset.
    pub cold_sensitivity: R,
    /// With heat out inferred: `∫q_in/T_cold dt`, J/K (else 0).
    pub cold_heat_in_j_per_k: R,
    /// With heat out inferred: `∫w/T_cold dt`, J/K (else 0).
    pub cold_work_j_per_k: R,
    /// With heat out measured: `∫T_cold dt`, K·s, whose time mean is the
    /// default T0 (else 0).
    pub cold_temperature_integral_k_s: R,
}

/// What the figures need besides the integrals.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FigureSettings {
    /// Engine, heat pump or cooler.
    pub mode: Mode,
    /// T0, kelvin; `None` = the cold-side mean.
    pub ambient_k: Option<f64>,
    /// Standard uncertainties.
    pub uncertainty: Uncertainty,
}

impl FigureSettings {
    /// The settings of `config`.
    pub fn new(config: &impl MonitorConfig) -> Self {
        let config = &config.monitor_settings();
        Self {
            mode: config.mode,
            ambient_k: config.ambient_k,
            uncertainty: config.uncertainty,
        }
    }
}

/// Every figure of a window or run. `None` means *not available*.
///
/// `u_*` are standard uncertainties (coverage k = 1); multiply by the
/// configured coverage factor for expanded ones.
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize)]
pub struct Metrics<R> {
    /// Integrated time, seconds.
    pub duration_s: R,
    /// `Q_in`, joules.
    pub heat_in_j: R,
    /// `W`, joules.
    pub work_j: R,
    /// `Q_out`, joules (measured or inferred).
    pub heat_out_j: R,
    /// Energy-balance residual, joules: `Q_in − W − Q_out` for an engine,
    /// `W + Q_out − Q_in` reversed; only with heat out measured.
    pub balance_residual_j: Option<R>,
    /// `η = W/Q_in` (engine).
    pub efficiency: Option<R>,
    /// Coefficient of performance (heat pump: `Q_in/W`, cooler: `Q_out/W`).
    pub cop: Option<R>,
    /// Heat-weighted mean hot-side temperature `T_h`, kelvin.
    pub hot_mean_k: Option<R>,
    /// Heat-weighted mean cold-side temperature `T_c`, kelvin.
    pub cold_mean_k: Option<R>,
    /// `η_C = 1 − T_c/T_h` (engine).
    pub carnot_efficiency: Option<R>,
    /// Carnot COP: `T_h/(T_h − T_c)` or `T_c/(T_h − T_c)`.
    pub carnot_cop: Option<R>,
    /// `η_CA = 1 − √(T_c/T_h)` (engine).
    pub curzon_ahlborn_efficiency: Option<R>,
    /// `η_C − η` (or `COP_C − COP`).
    pub carnot_margin: Option<R>,
    /// `η/η_C` (or `COP/COP_C`).
    pub second_law_efficiency: Option<R>,
    /// `S_gen`, J/K.
    pub entropy_generated_j_per_k: Option<R>,
    /// `σ̇ = S_gen / duration`, W/K.
    pub entropy_rate_w_per_k: Option<R>,
    /// Entropy inflow rate `∫(q_in/T_hot) dt / duration`, W/K: the scale of `σ̇`.
    pub entropy_in_rate_w_per_k: Option<R>,
    /// Exergy destroyed `T0·S_gen`, joules.
    pub exergy_destroyed_j: Option<R>,
    /// T0 used, kelvin.
    pub ambient_k: Option<R>,
    /// u(η).
    pub u_efficiency: Option<R>,
    /// u(COP).
    pub u_cop: Option<R>,
    /// u(η_C).
    pub u_carnot_efficiency: Option<R>,
    /// u(COP_C).
    pub u_carnot_cop: Option<R>,
    /// u(margin).
    pub u_carnot_margin: Option<R>,
    /// u(S_gen), J/K.
    pub u_entropy_generated_j_per_k: Option<R>,
    /// u(σ̇), W/K.
    pub u_entropy_rate_w_per_k: Option<R>,
    /// u(balance residual), joules.
    pub u_balance_residual_j: Option<R>,
}

/// `Some(x)` if `x` is finite.
#[inline]
fn fin<R: Real>(x: R) -> Option<R> {
    if x.is_finite() { Some(x) } else { None }
}

/// Whether `th` is above `tc` by more than rounding: temperatures a few
/// units in the last place apart are equal for the Carnot figures, whose
/// denominators would otherwise be rounding noise.
#[inline]
fn above<R: Real>(th: R, tc: R) -> bool {
    th - tc > R::from_f64(16.0) * R::EPSILON * th
}

/// `a / b` if `b > 0` and the quotient is finite.
#[inline]
fn ratio<R: Real>(a: R, b: R) -> Option<R> {
    if b > R::ZERO { fin(a / b) } else { None }
}

/// Partial derivatives of one figure with respect to the five systematic
/// errors: hot offset, cold offset (K), heat-in, work and heat-out scale.
#[derive(Clone, Copy, Debug, Default)]
struct Partials<R> {
    hot: R,
    cold: R,
    heat_in: R,
    work: R,
    heat_out: R,
}

impl<R: Real> Partials<R> {
    fn sub(self, o: Self) -> Self {
        Self {
            hot: self.hot - o.hot,
            cold: self.cold - o.cold,
            heat_in: self.heat_in - o.heat_in,
            work: self.work - o.work,
            heat_out: self.heat_out - o.heat_out,
        }
    }

    fn scale(self, s: R) -> Self {
        Self {
            hot: self.hot * s,
            cold: self.cold * s,
            heat_in: self.heat_in * s,
            work: self.work * s,
            heat_out: self.heat_out * s,
        }
    }

    /// `Σ (∂f/∂x_i · u_i)²`, GUM eq. (10) for uncorrelated inputs: the
    /// squared combined standard uncertainty.
    fn variance(self, u: &[R; 5]) -> Option<R> {
        let t = |d: R, ui: R| {
            let x = d * ui;
            x * x
        };
        fin(t(self.hot, u[0])
            + t(self.cold, u[1])
            + t(self.heat_in, u[2])
            + t(self.work, u[3])
            + t(self.heat_out, u[4]))
    }

    /// `√(Σ (∂f/∂x_i · u_i)²)`: the combined standard uncertainty.
    fn combine(self, u: &[R; 5]) -> Option<R> {
        std_uncertainty(self.variance(u))
    }
}

/// The standard uncertainty from a variance, if finite.
#[inline]
fn std_uncertainty<R: Real>(var: Option<R>) -> Option<R> {
    var.and_then(|v| fin(v.sqrt()))
}

/// [`FigureSettings`] in `R`, converted once rather than on every sample.
#[derive(Clone, Copy, Debug)]
struct Prepared<R> {
    mode: Mode,
    ambient: Option<R>,
    /// Standard uncertainties: hot and cold offsets (K), then the relative
    /// scale errors of heat in, work and heat out.
    u: [R; 5],
}

impl<R: Real> Prepared<R> {
    fn new(s: &FigureSettings) -> Self {
        let u = &s.uncertainty;
        Self {
            mode: s.mode,
            ambient: s.ambient_k.map(R::from_f64),
            u: [u.hot_k, u.cold_k, u.heat_in_rel, u.work_rel, u.heat_out_rel].map(R::from_f64),
        }
    }
}

impl<R: Real> Integrals<R> {
    /// Every figure of DESIGN §4 from these integrals.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// use heatbound::monitor::{FigureSettings, Integrals};
    /// // A steady engine for 1 s: 1000 W in, 150 W out, 600 K and 300 K.
    /// let i = Integrals {
    ///     duration_s: 1.0, heat_in_j: 1000.0, work_j: 150.0, heat_out_j: 850.0,
    ///     heat_out_measured: false,
    ///     entropy_in_j_per_k: 1000.0 / 600.0, entropy_out_j_per_k: 850.0 / 300.0,
    ///     hot_sensitivity: 1000.0 / 360000.0, cold_sensitivity: 850.0 / 90000.0,
    ///     cold_heat_in_j_per_k: 1000.0 / 300.0, cold_work_j_per_k: 150.0 / 300.0,
    ///     cold_temperature_integral_k_s: 0.0, // only used with heat out measured
    /// };
    /// let m = i.metrics(&FigureSettings::new(&RigConfig::default()));
    /// assert!((m.entropy_generated_j_per_k.unwrap() - 1.16667_f64).abs() < 1e-5);
    /// assert!((m.exergy_destroyed_j.unwrap() - 350.0).abs() < 1e-9);
    /// assert_eq!(m.carnot_efficiency, Some(0.5));
    /// ```
    pub fn metrics(&self, settings: &FigureSettings) -> Metrics<R> {
        let p = Prepared::new(settings);
        let c = self.second_law::<true>(&p);
        let u = &p.u;
        let u_s_gen = std_uncertainty(c.var_s_gen(u));
        let mut m = Metrics {
            duration_s: self.duration_s,
            heat_in_j: self.heat_in_j,
            work_j: self.work_j,
            heat_out_j: self.heat_out_j,
            hot_mean_k: c.th,
            cold_mean_k: c.tc,
            carnot_margin: c.margin(),
            second_law_efficiency: c.second_law_efficiency(),
            u_carnot_margin: std_uncertainty(c.var_margin(u)),
            balance_residual_j: c.loss,
            u_balance_residual_j: std_uncertainty(c.var_loss),
            entropy_generated_j_per_k: c.s_gen,
            u_entropy_generated_j_per_k: u_s_gen,
            entropy_rate_w_per_k: c.s_gen.and_then(|s| ratio(s, self.duration_s)),
            u_entropy_rate_w_per_k: u_s_gen.and_then(|s| ratio(s, self.duration_s)),
            entropy_in_rate_w_per_k: ratio(self.entropy_in_j_per_k, self.duration_s),
            ambient_k: c.t0,
            exergy_destroyed_j: match (c.s_gen, c.t0) {
                (Some(s), Some(t0)) => fin(s * t0),
                _ => None,
            },
            ..Metrics::default()
        };
        let u_perf = c.d_perf.and_then(|d| d.combine(u));
        let u_bound = c.d_bound.and_then(|d| d.combine(u));
        if settings.mode == Mode::Engine {
            m.efficiency = c.perf;
            m.carnot_efficiency = c.bound;
            m.u_efficiency = u_perf;
            m.u_carnot_efficiency = u_bound;
            m.curzon_ahlborn_efficiency = match (c.th, c.tc) {
                (Some(th), Some(tc)) if above(th, tc) => fin(R::ONE - (tc / th).sqrt()),
                _ => None,
            };
        } else {
            m.cop = c.perf;
            m.carnot_cop = c.bound;
            m.u_cop = u_perf;
            m.u_carnot_cop = u_bound;
        }
        m
    }

    /// Only the figures the alarm rules read: the per-sample path, which
    /// skips everything [`Integrals::metrics`] adds for reports.
    pub fn alarm_figures(&self, settings: &FigureSettings) -> AlarmFigures<R> {
        self.alarm_figures_with::<true>(&Prepared::new(settings))
    }

    /// [`Integrals::alarm_figures`] with the settings already in `R`, and
    /// the variances only if `VARIANCES` (else `None`). No square roots: the
    /// rules compare squares of the uncertainties.
    #[inline]
    fn alarm_figures_with<const VARIANCES: bool>(&self, p: &Prepared<R>) -> AlarmFigures<R> {
        let c = self.second_law::<VARIANCES>(p);
        let dur2 = self.duration_s * self.duration_s;
        AlarmFigures {
            heat_in_j: self.heat_in_j,
            carnot_margin: c.margin(),
            var_carnot_margin: c.var_margin(&p.u),
            second_law_efficiency: c.second_law_efficiency(),
            entropy_rate_w_per_k: c.s_gen.and_then(|s| ratio(s, self.duration_s)),
            var_entropy_rate_w_per_k: c.var_s_gen(&p.u).and_then(|v| ratio(v, dur2)),
            entropy_in_rate_w_per_k: ratio(self.entropy_in_j_per_k, self.duration_s),
            balance_residual_j: c.loss,
            var_balance_residual_j: c.var_loss,
        }
    }

    /// The mean temperatures, the figure of merit and its bound, the entropy
    /// account and, if `PARTIALS`, the partial derivatives behind their
    /// uncertainties (else those are `None`). The values do not depend on
    /// `PARTIALS`: they are the same operations either way.
    // Inlined so that the shared struct dissolves into registers on the
    // per-sample path, and the partials vanish where they are not asked for.
    #[inline(always)]
    fn second_law<const PARTIALS: bool>(&self, p: &Prepared<R>) -> SecondLaw<R> {
        let u = &p.u;
        let mode = p.mode;
        let measured = self.heat_out_measured;
        let (qi, w, qo) = (self.heat_in_j, self.work_j, self.heat_out_j);
        let (si, so) = (self.entropy_in_j_per_k, self.entropy_out_j_per_k);
        let (si2, so2) = (self.hot_sensitivity, self.cold_sensitivity);
        let (ca, cb) = (self.cold_heat_in_j_per_k, self.cold_work_j_per_k);
        let zero = R::ZERO;

        // Mean temperatures and their partials.
        let th = ratio(qi, si);
        let tc = ratio(qo, so);
        // Read only inside `PARTIALS.then`: without partials they are dead
        // code, and the compiler drops them.
        let d_th = Partials {
            hot: ratio(qi * si2, si * si).unwrap_or(zero),
            ..Partials::default()
        };
        let d_tc = match ratio(R::ONE, so * so) {
            Some(inv) if measured => Partials {
                cold: qo * so2 * inv,
                ..Partials::default()
            },
            Some(inv) => Partials {
                cold: qo * so2 * inv,
                heat_in: (qi * so - qo * ca) * inv,
                work: (qo * cb - w * so) * inv,
                ..Partials::default()
            },
            None => Partials::default(),
        };

        // The figure of merit and its bound.
        let (perf, d_perf, bound, d_bound) = match mode {
            Mode::Engine => {
                let eta = ratio(w, qi);
                let d_eta = eta.filter(|_| PARTIALS).map(|e| Partials {
                    heat_in: -e,
                    work: e,
                    ..Partials::default()
                });
                let (carnot, d_carnot) = match (th, tc) {
                    (Some(th), Some(tc)) if above(th, tc) => {
                        let d = PARTIALS
                            .then(|| d_tc.scale(-R::ONE / th).sub(d_th.scale(-tc / (th * th))));
                        (fin(R::ONE - tc / th), d)
                    }
                    _ => (None, None),
                };
                (eta, d_eta, carnot, d_carnot)
            }
            _ => {
                let cop = match mode {
                    Mode::HeatPump => ratio(qi, w),
                    _ => ratio(qo, w),
                };
                let d_cop = cop.filter(|_| PARTIALS).map(|c| match (mode, measured) {
                    (Mode::HeatPump, _) => Partials {
                        heat_in: c,
                        work: -c,
                        ..Partials::default()
                    },
                    (_, true) => Partials {
                        heat_out: c,
                        work: -c,
                        ..Partials::default()
                    },
                    (_, false) => {
                        let r = ratio(qi, w).unwrap_or(zero);
                        Partials {
                            heat_in: r,
                            work: -r,
                            ..Partials::default()
                        }
                    }
                });
                let (carnot, d_carnot) = match (th, tc) {
                    (Some(th), Some(tc)) if above(th, tc) => {
                        let dt = th - tc;
                        let top = if mode == Mode::HeatPump { th } else { tc };
                        // d(T_h/ΔT) = d(T_c/ΔT) = (T_h dT_c − T_c dT_h)/ΔT².
                        let d = PARTIALS
                            .then(|| d_tc.scale(th / (dt * dt)).sub(d_th.scale(tc / (dt * dt))));
                        (fin(top / dt), d)
                    }
                    _ => (None, None),
                };
                (cop, d_cop, carnot, d_carnot)
            }
        };

        // Energy balance and the entropy account, engine convention first.
        // T0: the configured ambient, else the cold-side mean. With heat out
        // measured that is the time mean of T_cold: a heat-weighted mean
        // would be undefined once the coolant stops carrying heat away.
        let t0 = match p.ambient {
            Some(t) => Some(t),
            None if measured => ratio(self.cold_temperature_integral_k_s, self.duration_s),
            None => tc,
        };
        let sign = if mode.is_reverse() { -R::ONE } else { R::ONE };
        let (loss, var_loss, s_gen, d_s) = if measured {
            let loss = qi - w - qo;
            let t = |x: R| x * x;
            let var_loss = if PARTIALS {
                fin(t(qi * u[2]) + t(w * u[3]) + t(qo * u[4]))
            } else {
                None
            };
            let (s_gen, d_s) = match t0 {
                Some(t0) if t0 > zero => {
                    let d = PARTIALS.then(|| {
                        let mut d = Partials {
                            hot: si2,
                            cold: -so2,
                            heat_in: qi / t0 - si,
                            work: -w / t0,
                            heat_out: so - qo / t0,
                        };
                        if p.ambient.is_none() {
                            // The default T0 is the time mean of T_cold, which
                            // a cold-side offset moves one for one: so does
                            // Q_loss/T0.
                            d.cold = d.cold - loss / (t0 * t0);
                        }
                        d
                    });
                    (fin(so + loss / t0 - si), d)
                }
                _ => (None, None),
            };
            (fin(loss * sign), var_loss, s_gen, d_s)
        } else {
            let d = Partials {
                hot: si2,
                cold: -so2,
                heat_in: ca - si,
                work: -cb,
                heat_out: zero,
            };
            (None, None, fin(so - si), PARTIALS.then_some(d))
        };
        SecondLaw {
            th,
            tc,
            perf,
            d_perf,
            bound,
            d_bound,
            t0,
            loss,
            var_loss,
            s_gen: s_gen.map(|s| s * sign),
            d_s,
        }
    }
}

/// What [`Integrals::second_law`] works out, shared by the full figures and
/// the alarms' figures.
struct SecondLaw<R> {
    th: Option<R>,
    tc: Option<R>,
    /// η, or COP reversed.
    perf: Option<R>,
    d_perf: Option<Partials<R>>,
    /// η_C, or the Carnot COP reversed.
    bound: Option<R>,
    d_bound: Option<Partials<R>>,
    t0: Option<R>,
    /// Balance residual in the mode's convention (heat out measured only).
    loss: Option<R>,
    /// u²(loss).
    var_loss: Option<R>,
    s_gen: Option<R>,
    /// Partials of the engine-convention S_gen; the sign does not matter for u.
    d_s: Option<Partials<R>>,
}

impl<R: Real> SecondLaw<R> {
    fn margin(&self) -> Option<R> {
        match (self.perf, self.bound) {
            (Some(p), Some(b)) => fin(b - p),
            _ => None,
        }
    }

    fn second_law_efficiency(&self) -> Option<R> {
        match (self.perf, self.bound) {
            (Some(p), Some(b)) => ratio(p, b),
            _ => None,
        }
    }

    fn var_margin(&self, u: &[R; 5]) -> Option<R> {
        match (self.d_perf, self.d_bound) {
            (Some(dp), Some(db)) => db.sub(dp).variance(u),
            _ => None,
        }
    }

    fn var_s_gen(&self, u: &[R; 5]) -> Option<R> {
        self.d_s.and_then(|d| d.variance(u))
    }
}

/// The window's alarm inputs, from [`Monitor::alarm_inputs`]: its integrals,
/// from which the figures follow when the rules ask.
#[derive(Clone, Copy, Debug)]
pub struct WindowAlarmInputs<'a, R> {
    integrals: Integrals<R>,
    prepared: &'a Prepared<R>,
    t_hot_k: Option<R>,
    faults: Faults,
}

impl<R: Real> WindowAlarmInputs<'_, R> {
    /// Every figure, uncertainties included, for inspection or logging.
    pub fn resolve(&self) -> AlarmInputs<R> {
        AlarmInputs {
            figures: self.figures_with_variances(),
            t_hot_k: self.t_hot_k,
            faults: self.faults,
        }
    }
}

impl<R: Real> RuleInputs for WindowAlarmInputs<'_, R> {
    type Real = R;
    #[inline]
    fn figures(&self) -> AlarmFigures<R> {
        self.integrals.alarm_figures_with::<false>(self.prepared)
    }
    fn figures_with_variances(&self) -> AlarmFigures<R> {
        self.integrals.alarm_figures_with::<true>(self.prepared)
    }
    fn t_hot_k(&self) -> Option<R> {
        self.t_hot_k
    }
    fn faults(&self) -> Faults {
        self.faults
    }
}

/// The window figures the alarm rules read (see [`Metrics`] for each).
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize)]
pub struct AlarmFigures<R> {
    /// `Q_in`, joules.
    pub heat_in_j: R,
    /// `η_C − η` (or `COP_C − COP`).
    pub carnot_margin: Option<R>,
    /// u²(margin): the rules compare squares, which needs no square root.
    pub var_carnot_margin: Option<R>,
    /// `η/η_C` (or `COP/COP_C`).
    pub second_law_efficiency: Option<R>,
    /// σ̇, W/K.
    pub entropy_rate_w_per_k: Option<R>,
    /// u²(σ̇), (W/K)².
    pub var_entropy_rate_w_per_k: Option<R>,
    /// Entropy inflow rate, W/K.
    pub entropy_in_rate_w_per_k: Option<R>,
    /// Balance residual, joules (heat out measured only).
    pub balance_residual_j: Option<R>,
    /// u²(balance residual), J².
    pub var_balance_residual_j: Option<R>,
}

impl<R: Real> From<&Metrics<R>> for AlarmFigures<R> {
    fn from(m: &Metrics<R>) -> Self {
        let sq = |u: Option<R>| u.map(|u| u * u);
        Self {
            heat_in_j: m.heat_in_j,
            carnot_margin: m.carnot_margin,
            var_carnot_margin: sq(m.u_carnot_margin),
            second_law_efficiency: m.second_law_efficiency,
            entropy_rate_w_per_k: m.entropy_rate_w_per_k,
            var_entropy_rate_w_per_k: sq(m.u_entropy_rate_w_per_k),
            entropy_in_rate_w_per_k: m.entropy_in_rate_w_per_k,
            balance_residual_j: m.balance_residual_j,
            var_balance_residual_j: sq(m.u_balance_residual_j),
        }
    }
}

/// How many integrals the monitor keeps beside time, and where each sits
/// in a [`Terms`]. Eight lanes of `f32` fill two SSE registers (one AVX
/// register), which keeps the per-sample sums cheap.
const TERMS: usize = 8;
/// `q_in`.
const QI: usize = 0;
/// `w`.
const W: usize = 1;
/// `q_in/T_hot`.
const SI: usize = 2;
/// `q_in/T_hot²`.
const SI2: usize = 3;
/// Measured: `q_out/T_cold`; inferred: `q_in/T_cold`.
const CA: usize = 4;
/// Measured: `q_out`; inferred: `w/T_cold`.
const CB: usize = 5;
/// Measured: `q_out/T_cold²`; inferred: `q_in/T_cold²`.
const CA2: usize = 6;
/// Measured: `T_cold` (its time integral gives the default T0); inferred:
/// `w/T_cold²`.
const CB2: usize = 7;

/// The integrands at one sample, or the contribution of one trapezoid.
/// Arrays, so that sums and trapezoids vectorise. Time is kept apart, in
/// whole milliseconds, where integer sums are exact.
type Terms<R> = [R; TERMS];

/// The integrands of a sample.
fn integrands<R: Real>(s: &Sample<R>, measured: bool) -> Terms<R> {
    let inv_h = R::ONE / s.t_hot_k;
    let inv_c = R::ONE / s.t_cold_k;
    let (qi, w) = (s.heat_in_w, s.work_w);
    let si = qi * inv_h;
    if measured {
        let qo = s.heat_out_w.unwrap_or(R::ZERO);
        let ca = qo * inv_c;
        [qi, w, si, si * inv_h, ca, qo, ca * inv_c, s.t_cold_k]
    } else {
        let (ca, cb) = (qi * inv_c, w * inv_c);
        [qi, w, si, si * inv_h, ca, cb, ca * inv_c, cb * inv_c]
    }
}

/// The trapezoid between integrands `a` and `b`, `dt` seconds apart.
#[inline]
fn trapezoid<R: Real>(a: &Terms<R>, b: &Terms<R>, dt: R) -> Terms<R> {
    let h = dt * R::from_f64(0.5);
    let mut out = [R::ZERO; TERMS];
    lanes::<TERMS>(|i| out[i] = h * (a[i] + b[i]));
    out
}

/// The integrals from summed terms over `duration_ms`.
fn integrals_of<R: Real>(v: &Terms<R>, duration_ms: u64, measured: bool) -> Integrals<R> {
    let (cold, cold_sensitivity, heat_out_j, cold_heat_in, cold_work, cold_time) = if measured {
        (v[CA], v[CA2], v[CB], R::ZERO, R::ZERO, v[CB2])
    } else {
        (
            v[CA] - v[CB],
            v[CA2] - v[CB2],
            v[QI] - v[W],
            v[CA],
            v[CB],
            R::ZERO,
        )
    };
    Integrals {
        duration_s: R::from_ms(duration_ms),
        heat_in_j: v[QI],
        work_j: v[W],
        heat_out_j,
        heat_out_measured: measured,
        entropy_in_j_per_k: v[SI],
        entropy_out_j_per_k: cold,
        hot_sensitivity: v[SI2],
        cold_sensitivity,
        cold_heat_in_j_per_k: cold_heat_in,
        cold_work_j_per_k: cold_work,
        cold_temperature_integral_k_s: cold_time,
    }
}

const BUCKETS: usize = 8;
const STEADY_CHANNELS: usize = 5;

/// Min and max of each channel over a stretch of time. An empty span has
/// `min = MAX` and `max = −MAX`, so including and merging need no branches.
#[derive(Clone, Copy, Debug)]
struct Span<R> {
    min: [R; STEADY_CHANNELS],
    max: [R; STEADY_CHANNELS],
}

#[inline]
fn lesser<R: Real>(a: R, b: R) -> R {
    if b < a { b } else { a }
}

#[inline]
fn greater<R: Real>(a: R, b: R) -> R {
    if b > a { b } else { a }
}

impl<R: Real> Span<R> {
    fn empty() -> Self {
        Self {
            min: [R::MAX; STEADY_CHANNELS],
            max: [-R::MAX; STEADY_CHANNELS],
        }
    }

    #[inline]
    fn merge(&mut self, other: &Self) {
        lanes::<STEADY_CHANNELS>(|i| {
            self.min[i] = lesser(self.min[i], other.min[i]);
            self.max[i] = greater(self.max[i], other.max[i]);
        });
    }

    /// Includes one sample; returns whether it widened the span.
    #[inline]
    fn include(&mut self, v: &[R; STEADY_CHANNELS]) -> bool {
        let mut widened = false;
        lanes::<STEADY_CHANNELS>(|i| {
            let x = v[i];
            if x < self.min[i] {
                self.min[i] = x;
                widened = true;
            }
            if x > self.max[i] {
                self.max[i] = x;
                widened = true;
            }
        });
        widened
    }
}

/// Steady-state test over time buckets: amortised O(1) per sample.
///
/// The duration is split into 8 buckets; each keeps the min and max of every
/// channel. The flag says that the last 8 complete buckets and the current
/// one, together at least the configured duration, stayed within the bands.
#[derive(Clone, Copy, Debug)]
struct SteadyTracker<R> {
    bucket_ms: u32,
    bucket_start_ms: u32,
    current: Span<R>,
    done: [Span<R>; BUCKETS],
    /// Merge of `done`, refreshed when a bucket completes.
    done_merged: Span<R>,
    next: usize,
    completed: usize,
    /// Absolute part of each band (the temperatures), and relative part (the
    /// powers, as a fraction of the larger magnitude).
    band_abs: [R; STEADY_CHANNELS],
    band_rel: [R; STEADY_CHANNELS],
    started: bool,
    /// The last verdict: a sample inside the spans seen so far cannot change
    /// it, which spares the band test on most samples.
    steady: bool,
}

impl<R: Real> SteadyTracker<R> {
    fn new(config: &impl MonitorConfig) -> Self {
        let config = &config.monitor_settings();
        let s = &config.steady;
        let bucket_ms = (s.duration_s * 1000.0 / BUCKETS as f64).clamp(1.0, u32::MAX as f64) as u32;
        let z = 0.0;
        Self {
            bucket_ms,
            bucket_start_ms: 0,
            current: Span::empty(),
            done: [Span::empty(); BUCKETS],
            done_merged: Span::empty(),
            next: 0,
            completed: 0,
            band_abs: [s.hot_band_k, s.cold_band_k, z, z, z].map(R::from_f64),
            band_rel: [
                z,
                z,
                s.heat_in_band_rel,
                s.work_band_rel,
                s.heat_out_band_rel,
            ]
            .map(R::from_f64),
            started: false,
            steady: false,
        }
    }

    fn restart(&mut self, t_ms: u32) {
        self.started = true;
        self.bucket_start_ms = t_ms;
        self.current = Span::empty();
        self.done = [Span::empty(); BUCKETS];
        self.done_merged = Span::empty();
        self.completed = 0;
        self.next = 0;
        self.steady = false;
    }

    /// Adds a sample at `t_ms`; returns whether every channel has stayed in
    /// band for at least the configured duration.
    fn push(&mut self, t_ms: u32, v: &[R; STEADY_CHANNELS]) -> bool {
        if !self.started {
            self.restart(t_ms);
        }
        let mut elapsed = t_ms.wrapping_sub(self.bucket_start_ms);
        let mut rotated = false;
        if elapsed >= self.bucket_ms {
            // Close the current bucket, and any empty ones after it.
            let mut closed = 0;
            while elapsed >= self.bucket_ms && closed <= BUCKETS {
                if let Some(slot) = self.done.get_mut(self.next) {
                    *slot = self.current;
                }
                self.current = Span::empty();
                self.next = (self.next + 1) % BUCKETS;
                self.completed = (self.completed + 1).min(BUCKETS);
                self.bucket_start_ms = self.bucket_start_ms.wrapping_add(self.bucket_ms);
                elapsed -= self.bucket_ms;
                closed += 1;
            }
            if elapsed >= self.bucket_ms {
                self.bucket_start_ms = t_ms;
            }
            let mut merged = Span::empty();
            for b in &self.done {
                merged.merge(b);
            }
            self.done_merged = merged;
            rotated = true;
        }
        let widened = self.current.include(v);
        if self.completed < BUCKETS {
            return false;
        }
        if !rotated && !widened {
            return self.steady;
        }
        let mut all = self.done_merged;
        all.merge(&self.current);
        let mut steady = true;
        for i in 0..STEADY_CHANNELS {
            let (lo, hi) = (all.min[i], all.max[i]);
            let scale = greater(hi.abs(), lo.abs());
            steady &= hi - lo <= self.band_abs[i] + self.band_rel[i] * scale;
        }
        self.steady = steady;
        steady
    }
}

/// Consecutive-repeat counters for the stuck check.
#[derive(Clone, Copy, Debug)]
struct StuckCheck<R> {
    last: [R; STEADY_CHANNELS],
    repeats: [u32; STEADY_CHANNELS],
    limit: u32,
}

impl<R: Real> StuckCheck<R> {
    fn update(&mut self, v: &[R; STEADY_CHANNELS], present: u8) -> u8 {
        if self.limit == 0 {
            return 0;
        }
        let mut stuck = 0;
        for (i, ch) in Channel::ALL.iter().enumerate() {
            if present & ch.bit() == 0 {
                self.repeats[i] = 0;
                continue;
            }
            if v[i] == self.last[i] {
                self.repeats[i] = self.repeats[i].saturating_add(1);
            } else {
                self.repeats[i] = 1;
                self.last[i] = v[i];
            }
            if self.repeats[i] >= self.limit {
                stuck |= ch.bit();
            }
        }
        stuck
    }
}

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
}

impl<const N: usize, R: Real> Monitor<N, R> {
    /// An empty monitor for `config`.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// use heatbound::monitor::{Monitor, Sample, Pushed};
    /// let mut m: Monitor<64> = Monitor::new(&RigConfig::default()).unwrap();
    /// let s = |t_ms| Sample { t_ms, t_hot_k: 600.0, t_cold_k: 300.0,
    ///                         heat_in_w: 1000.0, work_w: 150.0, heat_out_w: None };
    /// assert_eq!(m.push(&s(0)), Pushed::Started);
    /// assert_eq!(m.push(&s(1000)), Pushed::Integrated);
    /// let w = m.window_metrics();
    /// assert_eq!(w.efficiency, Some(0.15));
    /// assert!((w.entropy_rate_w_per_k.unwrap() - 1.166_666_7).abs() < 1e-5);
    /// ```
    pub fn new(config: &impl MonitorConfig) -> Result<Self, MonitorError> {
        let config = &config.monitor_settings();
        let window_len = config.window_samples as usize;
        if window_len > N || window_len < 2 {
            return Err(MonitorError::WindowTooLong {
                window_samples: config.window_samples,
                capacity: N,
            });
        }
        let to_ms = |s: f64| (s * 1000.0).clamp(0.0, u32::MAX as f64 / 2.0) as u32;
        let settings = FigureSettings::new(config);
        Ok(Self {
            settings,
            prepared: Prepared::new(&settings),
            window_len,
            refresh_after: config.window_samples - 1,
            max_gap_ms: to_ms(config.max_gap_s),
            stale_ms: to_ms(config.health.stale_s),
            t_min_k: R::from_f64(config.health.min_temperature_k),
            t_max_k: R::from_f64(config.health.max_temperature_k),
            measured: None,
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
        })
    }

    // Written out channel by channel: a loop over (value, channel) pairs is
    // not unrolled when the firmware is built for size.
    fn check(&self, s: &Sample<R>) -> Result<(), Invalid> {
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
        let (lo, hi) = (self.t_min_k, self.t_max_k);
        let in_range = |v: R, c| {
            if v >= lo && v <= hi {
                Ok(())
            } else {
                Err(Invalid::OutOfRange(c))
            }
        };
        in_range(s.t_hot_k, Channel::Hot)?;
        in_range(s.t_cold_k, Channel::Cold)?;
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
        match (self.measured, s.heat_out_w) {
            (_, Some(q)) if !q.is_finite() => return Err(Invalid::NonFinite(Channel::HeatOut)),
            (_, Some(q)) if q.abs() > max_power => {
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
            self.invalid += 1;
            self.faults.invalid = match why {
                Invalid::NonFinite(c) | Invalid::OutOfRange(c) => c.bit(),
                Invalid::MissingHeatOut => Channel::HeatOut.bit(),
                Invalid::RepeatedTime => 0,
            };
            self.update_fault_since(s.t_ms, since_last);
            return Pushed::Invalid(why);
        }
        self.faults.invalid = 0;
        let measured = *self.measured.get_or_insert(s.heat_out_w.is_some());
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
                trapezoid(&self.prev_point, &point, R::from_ms(u64::from(dt_ms)))
            }
            None => [R::ZERO; TERMS],
        };
        // The oldest sample's own trapezoid reaches outside the window,
        // which therefore holds `window_len − 1` trapezoids when full. Every
        // trapezoid enters it, so the run totals are kept there too.
        if self.filled > 1 {
            let leaving = if full { self.ring.get(self.head) } else { None };
            self.sums.slide(&entry, leaving, self.refresh_after);
            self.window_ms += u64::from(entry_ms);
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
            }
            self.steady.restart(s.t_ms);
            Pushed::Started
        };
        self.is_steady = self.steady.push(s.t_ms, &values);
        if self.is_steady {
            self.steady_ms += u64::from(entry_ms);
        }
        outcome
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
        )
    }

    /// The run's raw integrals.
    pub fn totals_integrals(&self) -> Integrals<R> {
        integrals_of(
            &self.sums.totals_f64().map(R::from_f64),
            self.totals_ms,
            self.measured.unwrap_or(false),
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
    /// [`RuleInputs`]).
    ///
    pub fn alarm_inputs(&self) -> WindowAlarmInputs<'_, R> {
        WindowAlarmInputs {
            integrals: self.window_integrals(),
            prepared: &self.prepared,
            t_hot_k: self.last_t_hot_k,
            faults: self.faults,
        }
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
}

/// What the rules look at, every figure computed up front: the window
/// figures, the latest hot-side temperature and the channel faults. Replays
/// that already hold the figures build this; the monitor's live inputs are a
/// [`WindowAlarmInputs`], whose
/// `resolve()` gives this form.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AlarmInputs<R: Real> {
    /// The sliding window's figures that the rules read.
    pub figures: AlarmFigures<R>,
    /// Latest valid hot-side temperature, kelvin.
    pub t_hot_k: Option<R>,
    /// Channel faults.
    pub faults: Faults,
}

/// Where the rules read their inputs.
///
/// [`AlarmInputs`] holds every figure up front. The monitor's
/// [`WindowAlarmInputs`] leaves the
/// uncertainties until a rule asks for them, which it does only within its
/// deadband of a second-law limit: each such rule tests `a − k·u` with
/// `k·u ≥ 0`, so a reading that clears with `u = 0` clears whatever `u` is,
/// and the usual reading, far from the bound, costs no uncertainty work. The
/// verdicts are the same either way.
pub trait RuleInputs {
    /// The type the figures are in.
    type Real: Real;
    /// The figures; the `var_*` fields may be `None` here.
    fn figures(&self) -> AlarmFigures<Self::Real>;
    /// The figures with their variances.
    fn figures_with_variances(&self) -> AlarmFigures<Self::Real>;
    /// Latest valid hot-side temperature, kelvin.
    fn t_hot_k(&self) -> Option<Self::Real>;
    /// Channel faults.
    fn faults(&self) -> Faults;
}

impl<R: Real> RuleInputs for AlarmInputs<R> {
    type Real = R;
    fn figures(&self) -> AlarmFigures<R> {
        self.figures
    }
    fn figures_with_variances(&self) -> AlarmFigures<R> {
        self.figures
    }
    fn t_hot_k(&self) -> Option<R> {
        self.t_hot_k
    }
    fn faults(&self) -> Faults {
        self.faults
    }
}
