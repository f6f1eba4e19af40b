//! The rig configuration: what the monitor and the alarms need to know about
//! a rig, as it is written in `rig.toml` and as it is checked.
//!
//! Two types, two layers: [`RigFile`] mirrors the file (every key optional,
//! unknown keys rejected) and [`RigConfig`] is the validated value the
//! [`Monitor`](crate::monitor::Monitor) and [`AlarmSet`](crate::alarm::AlarmSet)
//! are built from. [`RigFile::validate`] is the only way from one to the other,
//! and it fills in the documented defaults.
//!
//! ```text
//! rig.toml --(toml, host)--> RigFile --validate--> RigConfig --> Monitor, AlarmSet
//! ```
//!
//! ## Defaults and where they come from
//! Standard uncertainties (systematic, GUM JCGM 100:2008) are derived from
//! sensor tolerance classes: a tolerance ±a read as a rectangular
//! distribution has standard uncertainty u = a/√3 (GUM §4.3.7).
//!
//! | key | default | basis |
//! |---|---|---|
//! | `uncertainty.hot_k` | 1.1547 K | IEC 60584-1 type K class 1 at 500 °C: ±0.004·\|t\| = ±2.0 °C, u = 2.0/√3 |
//! | `uncertainty.hot2_k` | 1.1547 K | as `hot_k`: a second element of the same type and class |
//! | `uncertainty.cold_k` | 0.1443 K | IEC 60751 Pt100 class A at 50 °C: ±(0.15 + 0.002·\|t\|) = ±0.25 °C, u = 0.25/√3 |
//! | `uncertainty.heat_in_rel` | 0.005774 | heater power meter ±1 % of reading (from memory), u = 0.01/√3 |
//! | `uncertainty.work_rel` | 0.005774 | shaft or generator power ±1 % of reading (from memory), u = 0.01/√3 |
//! | `uncertainty.heat_out_rel` | 0.011547 | coolant calorimetry ±2 % of reading (from memory), u = 0.02/√3 |
//! | `coverage_factor` | 2 | about 95 % coverage (GUM §6.2, JCGM 100:2008) |
//! | `steady.duration_s` | 60 s | ISO 1585: conditions constant for at least 1 min before data are taken |
//! | `steady.hot_band_k`, `steady.cold_band_k` | 2 K | "within ±1 °C" bands of collector and heat-pump test standards (partly verified) |
//! | `steady.*_band_rel` | 0.05 | 5 % of reading, the typical flow deadband (from memory) |
//! | `alarms.near_carnot_fraction` | 0.75 | above well-developed engines' 40–60 % of Carnot (from memory) |
//! | rule deadbands | 1 % of the limit's scale | typical starting deadband for temperatures (from memory) |
//! | `alarms.horizon_s` | 600 s | ten minutes: time for an operator at the bench to act before a limit |
//! | `alarms.limit_ahead.deadband` | 60 s | a tenth of the default horizon |
//! | `[losses]` | none: UA learned | from the first steady window with heat out measured (`docs/diagnosis.md` §5) |

use serde::{Deserialize, Serialize};

use crate::alarm::AlarmConfig;
pub use crate::alarm::{Alarms, Rule};
use crate::alarm::{RuleId, Severity};
use crate::diagnosis::DiagnosisConfig;
pub use crate::diagnosis::Losses;
pub use crate::monitor::{Health, Mode, Steady, Uncertainty};
use crate::monitor::{MonitorConfig, MonitorSettings};

/// `rig.toml` as written: every key optional, unknown keys rejected.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RigFile {
    /// `engine`, `heat_pump` or `cooler`.
    pub mode: Option<Mode>,
    /// Ambient temperature T0 for exergy, in kelvin. Default: the cold-side mean.
    pub ambient_k: Option<f64>,
    /// Length of the sliding window, in valid samples.
    pub window_samples: Option<u32>,
    /// Longest sample spacing that is still integrated across, in seconds.
    pub max_gap_s: Option<f64>,
    /// Coverage factor k for expanded uncertainties and the second-law alarms.
    pub coverage_factor: Option<f64>,
    /// Standard uncertainties of the channels.
    pub uncertainty: Option<UncertaintyFile>,
    /// Steady-state detection.
    pub steady: Option<SteadyFile>,
    /// Channel health checks inside the monitor.
    pub health: Option<HealthFile>,
    /// Alarm limits and rule settings.
    pub alarms: Option<AlarmsFile>,
    /// The hot side's heat loss to the room; learned from the first
    /// steady window when absent.
    pub losses: Option<LossesFile>,
}

/// `[losses]`: heat lost from the hot side to the room is
/// `UA·(T_hot − T0)`. Both keys are required.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LossesFile {
    /// UA, W/K.
    pub ua_w_per_k: Option<f64>,
    /// UA's standard uncertainty, W/K.
    pub u_ua_w_per_k: Option<f64>,
}

/// `[uncertainty]`: standard uncertainties, treated as systematic.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UncertaintyFile {
    /// Hot-side temperature, absolute, in kelvin.
    pub hot_k: Option<f64>,
    /// The second hot-side sensor, absolute, in kelvin.
    pub hot2_k: Option<f64>,
    /// Cold-side temperature, absolute, in kelvin.
    pub cold_k: Option<f64>,
    /// Heat input, relative.
    pub heat_in_rel: Option<f64>,
    /// Work output, relative.
    pub work_rel: Option<f64>,
    /// Heat out, relative.
    pub heat_out_rel: Option<f64>,
}

/// `[steady]`: a channel is steady while its max − min over the duration
/// stays inside its band.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SteadyFile {
    /// How long every channel must stay inside its band, in seconds.
    pub duration_s: Option<f64>,
    /// Band of the hot-side temperature, in kelvin.
    pub hot_band_k: Option<f64>,
    /// Band of the cold-side temperature, in kelvin.
    pub cold_band_k: Option<f64>,
    /// Band of the heat input, relative to its largest magnitude.
    pub heat_in_band_rel: Option<f64>,
    /// Band of the work output, relative to its largest magnitude.
    pub work_band_rel: Option<f64>,
    /// Band of the measured heat out, relative to its largest magnitude.
    pub heat_out_band_rel: Option<f64>,
}

/// `[health]`: checks the monitor makes on every sample.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HealthFile {
    /// A channel that repeats exactly this many samples in a row is stuck;
    /// 0 turns the check off. Off by default, because replayed files with
    /// rounded columns repeat values legitimately.
    pub stuck_samples: Option<u32>,
    /// A sample spacing longer than this is a stale channel, in seconds.
    /// Default: `max_gap_s`.
    pub stale_s: Option<f64>,
    /// Lowest plausible temperature on either side, in kelvin.
    pub min_temperature_k: Option<f64>,
    /// Highest plausible temperature on either side, in kelvin.
    pub max_temperature_k: Option<f64>,
}

/// `[alarms]`: limits, shared delays and per-rule overrides.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AlarmsFile {
    /// `near_carnot` is raised above this fraction of the Carnot bound.
    pub near_carnot_fraction: Option<f64>,
    /// `over_temperature` is raised above this hot-side temperature, in kelvin.
    pub hot_max_k: Option<f64>,
    /// `limit_ahead` is raised when the recent trend reaches the Carnot
    /// bound or `hot_max_k` sooner than this, in seconds.
    pub horizon_s: Option<f64>,
    /// On-delay of every rule that does not set its own, in seconds.
    pub on_delay_s: Option<f64>,
    /// Off-delay of every rule that does not set its own, in seconds.
    pub off_delay_s: Option<f64>,
    /// `[alarms.beyond_carnot]`.
    pub beyond_carnot: Option<RuleFile>,
    /// `[alarms.negative_entropy_production]`.
    pub negative_entropy_production: Option<RuleFile>,
    /// `[alarms.near_carnot]`.
    pub near_carnot: Option<RuleFile>,
    /// `[alarms.energy_balance]`.
    pub energy_balance: Option<RuleFile>,
    /// `[alarms.over_temperature]`.
    pub over_temperature: Option<RuleFile>,
    /// `[alarms.sensor_fault]`.
    pub sensor_fault: Option<RuleFile>,
    /// `[alarms.limit_ahead]`.
    pub limit_ahead: Option<RuleFile>,
}

/// `[alarms.<rule>]`: overrides for one rule.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RuleFile {
    /// Whether the rule is evaluated at all.
    pub enabled: Option<bool>,
    /// `advisory`, `warning` or `trip`.
    pub severity: Option<Severity>,
    /// Hysteresis, in the rule's own unit (see [`RuleId::deadband_unit`]).
    pub deadband: Option<f64>,
    /// Seconds of sample time the condition must hold before raising.
    pub on_delay_s: Option<f64>,
    /// Seconds of sample time the clear condition must hold before clearing.
    pub off_delay_s: Option<f64>,
    /// Hold the alarm until acknowledged, even after the condition clears.
    pub latching: Option<bool>,
}

/// The validated rig configuration.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RigConfig {
    /// Engine, heat pump or cooler.
    pub mode: Mode,
    /// Ambient T0 for exergy and heat lost to the room, kelvin; `None`
    /// means the cold-side mean of the same window or run.
    pub ambient_k: Option<f64>,
    /// Sliding-window length in valid samples (≥ 2).
    pub window_samples: u32,
    /// Longest spacing integrated across, seconds.
    pub max_gap_s: f64,
    /// Coverage factor k.
    pub coverage_factor: f64,
    /// Channel standard uncertainties.
    pub uncertainty: Uncertainty,
    /// Steady-state detection.
    pub steady: Steady,
    /// Health checks.
    pub health: Health,
    /// Alarms.
    pub alarms: Alarms,
    /// The hot side's loss coefficient to the room; `None`: learned.
    pub losses: Option<Losses>,
}

impl Default for RigConfig {
    /// The documented defaults; identical to validating an empty file.
    fn default() -> Self {
        builtin_defaults()
    }
}

/// The one place the defaults live: `validate` falls back on these.
fn builtin_defaults() -> RigConfig {
    let hot_max_k = 1100.0;
    let mut rules = [Rule {
        enabled: true,
        severity: Severity::Warning,
        deadband: 0.0,
        on_delay_s: DEFAULT_DELAY_S,
        off_delay_s: DEFAULT_DELAY_S,
        latching: false,
    }; RuleId::COUNT];
    for id in RuleId::ALL {
        let rule = &mut rules[id.index()];
        rule.severity = id.default_severity();
        rule.latching = id.default_severity() == Severity::Trip;
        rule.deadband = id.default_deadband(hot_max_k);
    }
    RigConfig {
        mode: Mode::Engine,
        ambient_k: None,
        window_samples: DEFAULT_WINDOW,
        max_gap_s: DEFAULT_MAX_GAP_S,
        coverage_factor: 2.0,
        uncertainty: Uncertainty::default(),
        steady: Steady::default(),
        health: Health {
            stuck_samples: 0,
            stale_s: DEFAULT_MAX_GAP_S,
            min_temperature_k: 1.0,
            max_temperature_k: 3000.0,
        },
        alarms: Alarms {
            near_carnot_fraction: 0.75,
            hot_max_k,
            horizon_s: 600.0,
            rules,
        },
        losses: None,
    }
}

const DEFAULT_WINDOW: u32 = 60;
const DEFAULT_MAX_GAP_S: f64 = 10.0;
const DEFAULT_DELAY_S: f64 = 5.0;

/// What was wrong with a configuration, and where.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ConfigError {
    /// A key's value is outside what it may be; `expected` says what it may be.
    OutOfRange {
        /// The key, as written in `rig.toml` (`uncertainty.hot_k`).
        key: &'static str,
        /// What the value must be.
        expected: &'static str,
    },
    /// Two keys contradict each other.
    Inconsistent {
        /// What contradicts what.
        what: &'static str,
    },
}

impl core::fmt::Display for ConfigError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            ConfigError::OutOfRange { key, expected } => write!(f, "`{key}` must be {expected}"),
            ConfigError::Inconsistent { what } => f.write_str(what),
        }
    }
}

impl core::error::Error for ConfigError {}

/// What a numeric setting must be.
#[derive(Clone, Copy)]
enum Expect {
    /// Finite and ≥ 0.
    NonNegative,
    /// Finite and > 0.
    Positive,
    /// A finite temperature > 0 K.
    Temperature,
    /// A finite fraction in (0, 1].
    Fraction,
}

impl Expect {
    const fn words(self) -> &'static str {
        match self {
            Expect::NonNegative => "a number ≥ 0",
            Expect::Positive => "a number > 0",
            Expect::Temperature => "a temperature > 0 K",
            Expect::Fraction => "a fraction in (0, 1]",
        }
    }

    // Out of line: `check` tests some forty settings, and the comparisons
    // are calls on a core without double-precision hardware.
    #[inline(never)]
    fn holds(self, x: f64) -> bool {
        x.is_finite()
            && match self {
                Expect::NonNegative => x >= 0.0,
                Expect::Positive | Expect::Temperature => x > 0.0,
                Expect::Fraction => x > 0.0 && x <= 1.0,
            }
    }
}

/// The numeric settings [`RigConfig::check`] tests, in the order of its
/// `values`: their keys, and what each must be. Two tables, so that a
/// caller that only asks whether a configuration is valid carries no keys.
static SETTING_KEYS: [&str; 20] = [
    "max_gap_s",
    "coverage_factor",
    "uncertainty.hot_k",
    "uncertainty.hot2_k",
    "uncertainty.cold_k",
    "uncertainty.heat_in_rel",
    "uncertainty.work_rel",
    "uncertainty.heat_out_rel",
    "steady.duration_s",
    "steady.hot_band_k",
    "steady.cold_band_k",
    "steady.heat_in_band_rel",
    "steady.work_band_rel",
    "steady.heat_out_band_rel",
    "health.stale_s",
    "health.min_temperature_k",
    "health.max_temperature_k",
    "alarms.near_carnot_fraction",
    "alarms.hot_max_k",
    "alarms.horizon_s",
];

static SETTING_EXPECT: [Expect; 20] = [
    Expect::Positive,
    Expect::Positive,
    Expect::NonNegative,
    Expect::NonNegative,
    Expect::NonNegative,
    Expect::NonNegative,
    Expect::NonNegative,
    Expect::NonNegative,
    Expect::Positive,
    Expect::NonNegative,
    Expect::NonNegative,
    Expect::NonNegative,
    Expect::NonNegative,
    Expect::NonNegative,
    Expect::Positive,
    Expect::Temperature,
    Expect::Temperature,
    Expect::Fraction,
    Expect::Temperature,
    Expect::Positive,
];

/// Whether `x` is what `key` expects.
fn need(x: f64, key: &'static str, expect: Expect) -> Result<(), ConfigError> {
    if expect.holds(x) {
        Ok(())
    } else {
        Err(ConfigError::OutOfRange {
            key,
            expected: expect.words(),
        })
    }
}

impl RigFile {
    /// Fills in the defaults and checks every key ([`RigConfig::check`]).
    ///
    /// ```
    /// use heatbound::config::{RigFile, UncertaintyFile, Mode};
    /// let file = RigFile {
    ///     mode: Some(Mode::HeatPump),
    ///     uncertainty: Some(UncertaintyFile { hot_k: Some(1.0), ..Default::default() }),
    ///     ..Default::default()
    /// };
    /// let config = file.validate().unwrap();
    /// assert_eq!(config.uncertainty.hot_k, 1.0);
    /// assert_eq!(config.window_samples, 60);
    ///
    /// let bad = RigFile { coverage_factor: Some(-1.0), ..Default::default() };
    /// assert_eq!(bad.validate().unwrap_err().to_string(), "`coverage_factor` must be a number > 0");
    /// ```
    pub fn validate(&self) -> Result<RigConfig, ConfigError> {
        // The shared delays exist only in the file: name them as written.
        if let Some(a) = &self.alarms {
            for (x, key) in [
                (a.on_delay_s, "alarms.on_delay_s"),
                (a.off_delay_s, "alarms.off_delay_s"),
            ] {
                if let Some(x) = x {
                    need(x, key, Expect::NonNegative)?;
                }
            }
        }
        let config = self.with_defaults();
        config.check()?;
        Ok(config)
    }

    /// The file with every key it leaves out set to its documented default.
    fn with_defaults(&self) -> RigConfig {
        let d = builtin_defaults();
        let max_gap_s = self.max_gap_s.unwrap_or(d.max_gap_s);
        let u = self.uncertainty.clone().unwrap_or_default();
        let du = d.uncertainty;
        let st = self.steady.clone().unwrap_or_default();
        let ds = d.steady;
        let h = self.health.clone().unwrap_or_default();
        let a = self.alarms.clone().unwrap_or_default();
        let hot_max_k = a.hot_max_k.unwrap_or(d.alarms.hot_max_k);
        let on_delay_s = a.on_delay_s.unwrap_or(DEFAULT_DELAY_S);
        let off_delay_s = a.off_delay_s.unwrap_or(DEFAULT_DELAY_S);
        let overrides = [
            &a.beyond_carnot,
            &a.negative_entropy_production,
            &a.near_carnot,
            &a.energy_balance,
            &a.over_temperature,
            &a.sensor_fault,
            &a.limit_ahead,
        ];
        let mut rules = d.alarms.rules;
        for id in RuleId::ALL {
            let o = overrides[id.index()].clone().unwrap_or_default();
            let base = d.alarms.rules[id.index()];
            let severity = o.severity.unwrap_or(base.severity);
            rules[id.index()] = Rule {
                enabled: o.enabled.unwrap_or(base.enabled),
                severity,
                deadband: o.deadband.unwrap_or(id.default_deadband(hot_max_k)),
                on_delay_s: o.on_delay_s.unwrap_or(on_delay_s),
                off_delay_s: o.off_delay_s.unwrap_or(off_delay_s),
                // Trip rules latch unless told otherwise, so a trip is always seen.
                latching: o.latching.unwrap_or(severity == Severity::Trip),
            };
        }
        RigConfig {
            mode: self.mode.unwrap_or_default(),
            ambient_k: self.ambient_k,
            window_samples: self.window_samples.unwrap_or(d.window_samples),
            max_gap_s,
            coverage_factor: self.coverage_factor.unwrap_or(d.coverage_factor),
            uncertainty: Uncertainty {
                hot_k: u.hot_k.unwrap_or(du.hot_k),
                hot2_k: u.hot2_k.unwrap_or(du.hot2_k),
                cold_k: u.cold_k.unwrap_or(du.cold_k),
                heat_in_rel: u.heat_in_rel.unwrap_or(du.heat_in_rel),
                work_rel: u.work_rel.unwrap_or(du.work_rel),
                heat_out_rel: u.heat_out_rel.unwrap_or(du.heat_out_rel),
            },
            steady: Steady {
                duration_s: st.duration_s.unwrap_or(ds.duration_s),
                hot_band_k: st.hot_band_k.unwrap_or(ds.hot_band_k),
                cold_band_k: st.cold_band_k.unwrap_or(ds.cold_band_k),
                heat_in_band_rel: st.heat_in_band_rel.unwrap_or(ds.heat_in_band_rel),
                work_band_rel: st.work_band_rel.unwrap_or(ds.work_band_rel),
                heat_out_band_rel: st.heat_out_band_rel.unwrap_or(ds.heat_out_band_rel),
            },
            health: Health {
                stuck_samples: h.stuck_samples.unwrap_or(d.health.stuck_samples),
                stale_s: h.stale_s.unwrap_or(max_gap_s),
                min_temperature_k: h.min_temperature_k.unwrap_or(d.health.min_temperature_k),
                max_temperature_k: h.max_temperature_k.unwrap_or(d.health.max_temperature_k),
            },
            alarms: Alarms {
                near_carnot_fraction: a
                    .near_carnot_fraction
                    .unwrap_or(d.alarms.near_carnot_fraction),
                hot_max_k,
                horizon_s: a.horizon_s.unwrap_or(d.alarms.horizon_s),
                rules,
            },
            losses: self.losses.as_ref().map(|l| Losses {
                // A missing key is NaN, which `check` names.
                ua_w_per_k: l.ua_w_per_k.unwrap_or(f64::NAN),
                u_ua_w_per_k: l.u_ua_w_per_k.unwrap_or(f64::NAN),
            }),
        }
    }
}

impl RigConfig {
    /// The file that validates to exactly this configuration: every key
    /// written out, no default left to fill in.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// let mut c = RigConfig::default();
    /// c.alarms.hot_max_k = 900.0;
    /// assert_eq!(c.to_file().validate(), Ok(c));
    /// ```
    pub fn to_file(&self) -> RigFile {
        let rule = |id: RuleId| {
            let r = self.alarms.rule(id);
            Some(RuleFile {
                enabled: Some(r.enabled),
                severity: Some(r.severity),
                deadband: Some(r.deadband),
                on_delay_s: Some(r.on_delay_s),
                off_delay_s: Some(r.off_delay_s),
                latching: Some(r.latching),
            })
        };
        let (u, st, h) = (&self.uncertainty, &self.steady, &self.health);
        let first = self.alarms.rule(RuleId::BeyondCarnot);
        RigFile {
            mode: Some(self.mode),
            ambient_k: self.ambient_k,
            window_samples: Some(self.window_samples),
            max_gap_s: Some(self.max_gap_s),
            coverage_factor: Some(self.coverage_factor),
            uncertainty: Some(UncertaintyFile {
                hot_k: Some(u.hot_k),
                hot2_k: Some(u.hot2_k),
                cold_k: Some(u.cold_k),
                heat_in_rel: Some(u.heat_in_rel),
                work_rel: Some(u.work_rel),
                heat_out_rel: Some(u.heat_out_rel),
            }),
            steady: Some(SteadyFile {
                duration_s: Some(st.duration_s),
                hot_band_k: Some(st.hot_band_k),
                cold_band_k: Some(st.cold_band_k),
                heat_in_band_rel: Some(st.heat_in_band_rel),
                work_band_rel: Some(st.work_band_rel),
                heat_out_band_rel: Some(st.heat_out_band_rel),
            }),
            health: Some(HealthFile {
                stuck_samples: Some(h.stuck_samples),
                stale_s: Some(h.stale_s),
                min_temperature_k: Some(h.min_temperature_k),
                max_temperature_k: Some(h.max_temperature_k),
            }),
            alarms: Some(AlarmsFile {
                near_carnot_fraction: Some(self.alarms.near_carnot_fraction),
                hot_max_k: Some(self.alarms.hot_max_k),
                horizon_s: Some(self.alarms.horizon_s),
                on_delay_s: Some(first.on_delay_s),
                off_delay_s: Some(first.off_delay_s),
                beyond_carnot: rule(RuleId::BeyondCarnot),
                negative_entropy_production: rule(RuleId::NegativeEntropyProduction),
                near_carnot: rule(RuleId::NearCarnot),
                energy_balance: rule(RuleId::EnergyBalance),
                over_temperature: rule(RuleId::OverTemperature),
                sensor_fault: rule(RuleId::SensorFault),
                limit_ahead: rule(RuleId::LimitAhead),
            }),
            losses: self.losses.map(|l| LossesFile {
                ua_w_per_k: Some(l.ua_w_per_k),
                u_ua_w_per_k: Some(l.u_ua_w_per_k),
            }),
        }
    }

    /// Checks every setting: the rules [`RigFile::validate`] applies to a
    /// file, applied to a configuration that arrived whole (over the wire,
    /// say). The first setting out of range is named.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// let mut c = RigConfig::default();
    /// assert!(c.check().is_ok());
    /// c.window_samples = 1;
    /// assert!(c.check().is_err());
    /// c.window_samples = 60;
    /// c.steady.hot_band_k = f64::INFINITY;
    /// assert_eq!(c.check().unwrap_err().to_string(), "`steady.hot_band_k` must be a number ≥ 0");
    /// ```
    pub fn check(&self) -> Result<(), ConfigError> {
        use Expect::{NonNegative, Temperature};
        if let Some(t) = self.ambient_k {
            need(t, "ambient_k", Temperature)?;
        }
        if self.window_samples < 2 {
            return Err(ConfigError::OutOfRange {
                key: "window_samples",
                expected: "an integer ≥ 2",
            });
        }
        let (u, st, h, a) = (&self.uncertainty, &self.steady, &self.health, &self.alarms);
        // The values in the order of `SETTINGS`: one loop over a table, not
        // one inlined test per setting.
        let values = [
            self.max_gap_s,
            self.coverage_factor,
            u.hot_k,
            u.hot2_k,
            u.cold_k,
            u.heat_in_rel,
            u.work_rel,
            u.heat_out_rel,
            st.duration_s,
            st.hot_band_k,
            st.cold_band_k,
            st.heat_in_band_rel,
            st.work_band_rel,
            st.heat_out_band_rel,
            h.stale_s,
            h.min_temperature_k,
            h.max_temperature_k,
            a.near_carnot_fraction,
            a.hot_max_k,
            a.horizon_s,
        ];
        for ((&key, &expect), x) in SETTING_KEYS.iter().zip(&SETTING_EXPECT).zip(values) {
            need(x, key, expect)?;
        }
        if let Some(l) = &self.losses {
            need(l.ua_w_per_k, "losses.ua_w_per_k", NonNegative)?;
            need(l.u_ua_w_per_k, "losses.u_ua_w_per_k", NonNegative)?;
        }
        if h.min_temperature_k >= h.max_temperature_k {
            return Err(ConfigError::Inconsistent {
                what: "`health.min_temperature_k` must be below `health.max_temperature_k`",
            });
        }
        if h.stuck_samples == 1 {
            return Err(ConfigError::OutOfRange {
                key: "health.stuck_samples",
                expected: "0 (off) or an integer ≥ 2",
            });
        }
        for id in RuleId::ALL {
            let r = a.rule(id);
            let [deadband, on, off] = id.config_keys();
            need(r.deadband, deadband, NonNegative)?;
            need(r.on_delay_s, on, NonNegative)?;
            need(r.off_delay_s, off, NonNegative)?;
        }
        Ok(())
    }
}

impl MonitorConfig for RigConfig {
    fn monitor_settings(&self) -> MonitorSettings {
        MonitorSettings {
            mode: self.mode,
            ambient_k: self.ambient_k,
            window_samples: self.window_samples,
            max_gap_s: self.max_gap_s,
            uncertainty: self.uncertainty,
            steady: self.steady,
            health: self.health,
        }
    }
}

impl DiagnosisConfig for RigConfig {
    fn coverage_factor(&self) -> f64 {
        self.coverage_factor
    }
    fn losses(&self) -> Option<Losses> {
        self.losses
    }
}

impl AlarmConfig for RigConfig {
    fn alarms(&self) -> &Alarms {
        &self.alarms
    }
    fn coverage_factor(&self) -> f64 {
        self.coverage_factor
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn empty_file_gives_documented_defaults() {
        let c = RigFile::default().validate().unwrap();
        assert_eq!(c, RigConfig::default());
        assert_eq!(c.mode, Mode::Engine);
        assert_eq!(c.window_samples, 60);
        assert_eq!(c.max_gap_s, 10.0);
        assert_eq!(c.coverage_factor, 2.0);
        // IEC 60584-1 type K class 1 at 500 °C, ±2.0 °C rectangular (GUM §4.3.7).
        assert!((c.uncertainty.hot_k - 1.154_700_538).abs() < 1e-9);
        // IEC 60751 class A at 50 °C, ±0.25 °C rectangular.
        assert!((c.uncertainty.cold_k - 0.144_337_567).abs() < 1e-9);
        assert_eq!(c.alarms.near_carnot_fraction, 0.75);
        assert_eq!(c.alarms.rule(RuleId::BeyondCarnot).severity, Severity::Trip);
        assert!(c.alarms.rule(RuleId::BeyondCarnot).latching);
        assert!(!c.alarms.rule(RuleId::NearCarnot).latching);
        assert_eq!(c.alarms.rule(RuleId::OverTemperature).deadband, 11.0);
    }

    #[test]
    fn each_bad_key_is_named() {
        let cases: [(RigFile, &str); 5] = [
            (
                RigFile {
                    window_samples: Some(1),
                    ..Default::default()
                },
                "window_samples",
            ),
            (
                RigFile {
                    max_gap_s: Some(f64::NAN),
                    ..Default::default()
                },
                "max_gap_s",
            ),
            (
                RigFile {
                    uncertainty: Some(UncertaintyFile {
                        work_rel: Some(-0.1),
                        ..Default::default()
                    }),
                    ..Default::default()
                },
                "uncertainty.work_rel",
            ),
            (
                RigFile {
                    alarms: Some(AlarmsFile {
                        near_carnot_fraction: Some(1.5),
                        ..Default::default()
                    }),
                    ..Default::default()
                },
                "alarms.near_carnot_fraction",
            ),
            (
                RigFile {
                    alarms: Some(AlarmsFile {
                        sensor_fault: Some(RuleFile {
                            on_delay_s: Some(-1.0),
                            ..Default::default()
                        }),
                        ..Default::default()
                    }),
                    ..Default::default()
                },
                "alarms.sensor_fault.on_delay_s",
            ),
        ];
        for (file, key) in cases {
            match file.validate() {
                Err(ConfigError::OutOfRange { key: k, .. }) => assert_eq!(k, key),
                other => panic!("{key}: expected OutOfRange, got {other:?}"),
            }
        }
    }
}
