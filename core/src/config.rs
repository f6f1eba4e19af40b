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

use serde::{Deserialize, Serialize};

use crate::alarm::AlarmConfig;
pub use crate::alarm::{Alarms, Rule};
use crate::alarm::{RuleId, Severity};
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
}

/// `[uncertainty]`: standard uncertainties, treated as systematic.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UncertaintyFile {
    /// Hot-side temperature, absolute, in kelvin.
    pub hot_k: Option<f64>,
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
            rules,
        },
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

fn check(
    value: Option<f64>,
    default: f64,
    key: &'static str,
    expected: &'static str,
    ok: impl Fn(f64) -> bool,
) -> Result<f64, ConfigError> {
    let v = value.unwrap_or(default);
    if v.is_finite() && ok(v) {
        Ok(v)
    } else {
        Err(ConfigError::OutOfRange { key, expected })
    }
}

impl RigFile {
    /// Checks every key and fills in the defaults.
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
        const NON_NEG: &str = "a number ≥ 0";
        const POS: &str = "a number > 0";
        let nonneg = |x: f64| x >= 0.0;
        let pos = |x: f64| x > 0.0;

        let d = builtin_defaults();
        let ambient_k = match self.ambient_k {
            None => None,
            Some(t) => Some(check(
                Some(t),
                0.0,
                "ambient_k",
                "a temperature > 0 K",
                pos,
            )?),
        };
        let window_samples = self.window_samples.unwrap_or(d.window_samples);
        if window_samples < 2 {
            return Err(ConfigError::OutOfRange {
                key: "window_samples",
                expected: "an integer ≥ 2",
            });
        }
        let max_gap_s = check(self.max_gap_s, d.max_gap_s, "max_gap_s", POS, pos)?;
        let coverage_factor = check(
            self.coverage_factor,
            d.coverage_factor,
            "coverage_factor",
            POS,
            pos,
        )?;

        let u = self.uncertainty.clone().unwrap_or_default();
        let du = d.uncertainty;
        let uncertainty = Uncertainty {
            hot_k: check(u.hot_k, du.hot_k, "uncertainty.hot_k", NON_NEG, nonneg)?,
            cold_k: check(u.cold_k, du.cold_k, "uncertainty.cold_k", NON_NEG, nonneg)?,
            heat_in_rel: check(
                u.heat_in_rel,
                du.heat_in_rel,
                "uncertainty.heat_in_rel",
                NON_NEG,
                nonneg,
            )?,
            work_rel: check(
                u.work_rel,
                du.work_rel,
                "uncertainty.work_rel",
                NON_NEG,
                nonneg,
            )?,
            heat_out_rel: check(
                u.heat_out_rel,
                du.heat_out_rel,
                "uncertainty.heat_out_rel",
                NON_NEG,
                nonneg,
            )?,
        };

        let s = self.steady.clone().unwrap_or_default();
        let ds = d.steady;
        let steady = Steady {
            duration_s: check(s.duration_s, ds.duration_s, "steady.duration_s", POS, pos)?,
            hot_band_k: check(
                s.hot_band_k,
                ds.hot_band_k,
                "steady.hot_band_k",
                NON_NEG,
                nonneg,
            )?,
            cold_band_k: check(
                s.cold_band_k,
                ds.cold_band_k,
                "steady.cold_band_k",
                NON_NEG,
                nonneg,
            )?,
            heat_in_band_rel: check(
                s.heat_in_band_rel,
                ds.heat_in_band_rel,
                "steady.heat_in_band_rel",
                NON_NEG,
                nonneg,
            )?,
            work_band_rel: check(
                s.work_band_rel,
                ds.work_band_rel,
                "steady.work_band_rel",
                NON_NEG,
                nonneg,
            )?,
            heat_out_band_rel: check(
                s.heat_out_band_rel,
                ds.heat_out_band_rel,
                "steady.heat_out_band_rel",
                NON_NEG,
                nonneg,
            )?,
        };

        let h = self.health.clone().unwrap_or_default();
        let health = Health {
            stuck_samples: h.stuck_samples.unwrap_or(d.health.stuck_samples),
            stale_s: check(h.stale_s, max_gap_s, "health.stale_s", POS, pos)?,
            min_temperature_k: check(
                h.min_temperature_k,
                d.health.min_temperature_k,
                "health.min_temperature_k",
                "a temperature > 0 K",
                pos,
            )?,
            max_temperature_k: check(
                h.max_temperature_k,
                d.health.max_temperature_k,
                "health.max_temperature_k",
                "a temperature > 0 K",
                pos,
            )?,
        };
        if health.min_temperature_k >= health.max_temperature_k {
            return Err(ConfigError::Inconsistent {
                what: "`health.min_temperature_k` must be below `health.max_temperature_k`",
            });
        }
        if health.stuck_samples == 1 {
            return Err(ConfigError::OutOfRange {
                key: "health.stuck_samples",
                expected: "0 (off) or an integer ≥ 2",
            });
        }

        let a = self.alarms.clone().unwrap_or_default();
        let near_carnot_fraction = check(
            a.near_carnot_fraction,
            d.alarms.near_carnot_fraction,
            "alarms.near_carnot_fraction",
            "a fraction in (0, 1]",
            |x| x > 0.0 && x <= 1.0,
        )?;
        let hot_max_k = check(
            a.hot_max_k,
            d.alarms.hot_max_k,
            "alarms.hot_max_k",
            "a temperature > 0 K",
            pos,
        )?;
        let on_delay_s = check(
            a.on_delay_s,
            d.alarms.rules[0].on_delay_s,
            "alarms.on_delay_s",
            NON_NEG,
            nonneg,
        )?;
        let off_delay_s = check(
            a.off_delay_s,
            d.alarms.rules[0].off_delay_s,
            "alarms.off_delay_s",
            NON_NEG,
            nonneg,
        )?;

        let overrides = [
            &a.beyond_carnot,
            &a.negative_entropy_production,
            &a.near_carnot,
            &a.energy_balance,
            &a.over_temperature,
            &a.sensor_fault,
        ];
        let mut rules = d.alarms.rules;
        for id in RuleId::ALL {
            let o = overrides[id.index()].clone().unwrap_or_default();
            let keys = id.config_keys();
            let base = d.alarms.rules[id.index()];
            let severity = o.severity.unwrap_or(base.severity);
            rules[id.index()] = Rule {
                enabled: o.enabled.unwrap_or(base.enabled),
                severity,
                deadband: check(
                    o.deadband,
                    id.default_deadband(hot_max_k),
                    keys[0],
                    NON_NEG,
                    nonneg,
                )?,
                on_delay_s: check(o.on_delay_s, on_delay_s, keys[1], NON_NEG, nonneg)?,
                off_delay_s: check(o.off_delay_s, off_delay_s, keys[2], NON_NEG, nonneg)?,
                // Trip rules latch unless told otherwise, so a trip is always seen.
                latching: o.latching.unwrap_or(severity == Severity::Trip),
            };
        }

        Ok(RigConfig {
            mode: self.mode.unwrap_or_default(),
            ambient_k,
            window_samples,
            max_gap_s,
            coverage_factor,
            uncertainty,
            steady,
            health,
            alarms: Alarms {
                near_carnot_fraction,
                hot_max_k,
                rules,
            },
        })
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
                on_delay_s: Some(first.on_delay_s),
                off_delay_s: Some(first.off_delay_s),
                beyond_carnot: rule(RuleId::BeyondCarnot),
                negative_entropy_production: rule(RuleId::NegativeEntropyProduction),
                near_carnot: rule(RuleId::NearCarnot),
                energy_balance: rule(RuleId::EnergyBalance),
                over_temperature: rule(RuleId::OverTemperature),
                sensor_fault: rule(RuleId::SensorFault),
            }),
        }
    }

    /// Checks a configuration that arrived whole (over the wire, say)
    /// rather than through [`RigFile::validate`]: it passes exactly when
    /// validating its own file gives it back unchanged.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// let mut c = RigConfig::default();
    /// assert!(c.check().is_ok());
    /// c.window_samples = 1;
    /// assert!(c.check().is_err());
    /// ```
    pub fn check(&self) -> Result<(), ConfigError> {
        match self.to_file().validate() {
            Ok(c) if c == *self => Ok(()),
            Ok(_) => Err(ConfigError::Inconsistent {
                what: "the configuration does not validate to itself",
            }),
            Err(e) => Err(e),
        }
    }

    /// Whether every number in it is finite.
    pub fn all_finite(&self) -> bool {
        let (u, st, h, a) = (&self.uncertainty, &self.steady, &self.health, &self.alarms);
        let scalars = [
            self.ambient_k.unwrap_or(0.0),
            self.max_gap_s,
            self.coverage_factor,
            u.hot_k,
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
        ];
        scalars.iter().all(|x| x.is_finite())
            && a.rules.iter().all(|r| {
                r.deadband.is_finite() && r.on_delay_s.is_finite() && r.off_delay_s.is_finite()
            })
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
