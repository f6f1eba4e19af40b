//! The scenarios the simulated rig can run: one healthy run from hot, one
//! cold start, the faults the alarms exist to catch, and three that only
//! the consistency diagnosis can see (a second hot thermocouple drifting, a
//! cold-side offset, a heater power scale error).
//!
//! Every fault begins at [`FAULT_START_S`] = 120 s of rig time, after two
//! minutes of steady running, so a monitor has a full window of good data
//! first. The timelines are scaled so that at 10 Hz the interesting event
//! falls within the first 10 minutes of simulated time (a 20 s demo at 30×
//! shows it). See the [rig module docs](super) for what each alarm does
//! when, and what the diagnosis makes of each fault.

use core::fmt;
use core::str::FromStr;

/// Rig time at which every fault scenario's fault begins, seconds.
pub const FAULT_START_S: f32 = 120.0;

/// `thermocouple-drift`: how fast the hot thermocouple's reading falls
/// behind the truth, K/s (50 K/min). It reads low by
/// `min(DRIFT_RATE_K_PER_S·(t − 120 s), DRIFT_LIMIT·(T_head − T_ambient))`.
pub const DRIFT_RATE_K_PER_S: f32 = 50.0 / 60.0;

/// `thermocouple-drift`: the largest error, as a fraction of the head's
/// excess over ambient (a junction pulled out of its well ends up reading
/// close to, but above, the air around it).
pub const DRIFT_LIMIT: f32 = 0.9;

/// `coolant-loss`: seconds over which the coolant flow falls linearly from
/// its set point to zero.
pub const COOLANT_RAMP_S: f32 = 30.0;

/// `power-meter-scale-error`: the factor by which the generator-current
/// channel, and so `work_w`, reads high (a shunt entered as 0.25 mΩ instead
/// of 1 mΩ).
pub const WORK_SCALE_ERROR: f32 = 4.0;

/// `hot2-drift`: how fast the second hot thermocouple's reading falls
/// behind the truth, K/s (20 K/min). It reads low by
/// `min(HOT2_DRIFT_RATE_K_PER_S·(t − 120 s), HOT2_DRIFT_LIMIT_K)`.
pub const HOT2_DRIFT_RATE_K_PER_S: f32 = 20.0 / 60.0;

/// `hot2-drift`: the largest error of the second hot thermocouple, K
/// (reached 450 s after the fault begins, at 570 s). 150 K low at the
/// bench's 669 K head is a junction that has worked partly out of its well.
/// The size is chosen so that, with heat out measured and UA known, the
/// first law can clear the first thermocouple: moving `T_hot` by 150 K moves
/// the modelled loss `UA·(T_hot − T0)` by about 23 W, beyond the first
/// law's band of about 10 to 15 W (k = 2, default uncertainties).
pub const HOT2_DRIFT_LIMIT_K: f32 = 150.0;

/// `cold-offset`: the constant error of the cold-side Pt100's reading, K
/// (reads high; a 2-wire connection with about 10 Ω of lead resistance).
///
/// No plausible offset makes this rig's readings break a law: the engine
/// runs at 31 % of Carnot, so its entropy account has a wide margin
/// (σ̇ ≈ 0.64 W/K against a standard uncertainty of about 0.006 W/K with
/// the default uncertainties), and the cold temperature enters it only
/// through `Q_out/T_c`. For σ̇ to fall below `−k·u` the cold reading would
/// have to be about 360 K high with T0 configured (about 260 K high with T0
/// the cold-side mean). It enters the first law only when T0 is the
/// cold-side mean, as `UA·b` ≈ 4 W for 25 K, within that law's band. The
/// scenario shows a gross error the relations cannot see.
pub const COLD_OFFSET_K: f32 = 25.0;

/// `heater-scale-error`: the factor by which the heater-current channel,
/// and so `heat_in_w`, reads high (a current transducer whose ratio is
/// set 15 % off).
pub const HEATER_SCALE_ERROR: f32 = 1.15;

/// A scenario: how the rig starts and which fault, if any, it develops.
///
/// ```
/// use heatbound_firmware_example::rig::Scenario;
///
/// let s: Scenario = "thermocouple-drift".parse()?;
/// assert_eq!(s, Scenario::ThermocoupleDrift);
/// assert_eq!(s.name(), "thermocouple-drift");
/// assert_eq!(s.fault_start_s(), Some(120.0));
/// assert_eq!(Scenario::Steady.fault_start_s(), None);
/// assert!(Scenario::parse("meltdown").is_err());
/// # Ok::<(), heatbound_firmware_example::rig::ParseScenarioError>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub enum Scenario {
    /// `steady`: starts in steady state at the set point, no fault.
    Steady,
    /// `warm-up`: cold start (head at rest, coolant already flowing), the
    /// heater ramps linearly from 0 to the set point over
    /// [`RigParams::warm_up_ramp_s`](super::RigParams::warm_up_ramp_s).
    WarmUp,
    /// `thermocouple-drift`: from 120 s the hot thermocouple reads low, by
    /// 50 K/min (bounded, see [`DRIFT_LIMIT`]). The truth is unchanged.
    ThermocoupleDrift,
    /// `coolant-loss`: from 120 s the coolant flow falls to zero over 30 s.
    CoolantLoss,
    /// `open-thermocouple`: from 120 s the hot thermocouple is open circuit:
    /// its converter flags the fault and the reading is NaN.
    OpenThermocouple,
    /// `power-meter-scale-error`: from 120 s the work channel reads
    /// [`WORK_SCALE_ERROR`] times high.
    PowerMeterScaleError,
    /// `hot2-drift`: the head carries a second thermocouple, and from 120 s
    /// it reads low by 20 K/min, up to [`HOT2_DRIFT_LIMIT_K`]. The first
    /// thermocouple and the truth are unchanged.
    Hot2Drift,
    /// `cold-offset`: from 120 s the cold-side Pt100 reads
    /// [`COLD_OFFSET_K`] high. The truth and the coolant calorimetry are
    /// unchanged.
    ColdOffset,
    /// `heater-scale-error`: from 120 s the heater channel reads
    /// [`HEATER_SCALE_ERROR`] times the true heater power.
    HeaterScaleError,
}

impl Scenario {
    /// Every scenario, in documentation order.
    pub const ALL: [Scenario; 9] = [
        Scenario::Steady,
        Scenario::WarmUp,
        Scenario::ThermocoupleDrift,
        Scenario::CoolantLoss,
        Scenario::OpenThermocouple,
        Scenario::PowerMeterScaleError,
        Scenario::Hot2Drift,
        Scenario::ColdOffset,
        Scenario::HeaterScaleError,
    ];

    /// The scenario's name, as the command line spells it.
    pub const fn name(self) -> &'static str {
        match self {
            Scenario::Steady => "steady",
            Scenario::WarmUp => "warm-up",
            Scenario::ThermocoupleDrift => "thermocouple-drift",
            Scenario::CoolantLoss => "coolant-loss",
            Scenario::OpenThermocouple => "open-thermocouple",
            Scenario::PowerMeterScaleError => "power-meter-scale-error",
            Scenario::Hot2Drift => "hot2-drift",
            Scenario::ColdOffset => "cold-offset",
            Scenario::HeaterScaleError => "heater-scale-error",
        }
    }

    /// One line saying what happens, for help texts and reports.
    pub const fn description(self) -> &'static str {
        match self {
            Scenario::Steady => "starts hot and steady at the set point; no fault",
            Scenario::WarmUp => {
                "cold start with coolant flowing; the heater ramps up to the set point"
            }
            Scenario::ThermocoupleDrift => {
                "from 120 s the hot thermocouple reads low by 50 K/min; the truth is unchanged"
            }
            Scenario::CoolantLoss => "from 120 s the coolant flow falls to zero over 30 s",
            Scenario::OpenThermocouple => {
                "from 120 s the hot thermocouple is open circuit and reads NaN"
            }
            Scenario::PowerMeterScaleError => "from 120 s the work channel reads 4x high",
            Scenario::Hot2Drift => {
                "a second hot thermocouple; from 120 s it reads low by 20 K/min, up to 150 K"
            }
            Scenario::ColdOffset => "from 120 s the cold-side sensor reads 25 K high",
            Scenario::HeaterScaleError => "from 120 s the heater power reads 15 % high",
        }
    }

    /// The scenario of `name` ([`Scenario::name`]).
    pub fn parse(name: &str) -> Result<Scenario, ParseScenarioError> {
        // A match rather than a search of `ALL`: the firmware parses a
        // build-time constant, which the compiler then folds to the
        // scenario (a search of nine names it compiles as a loop, with the
        // names and a memcmp in flash). `names_round_trip` keeps the two
        // spellings together.
        Ok(match name {
            "steady" => Scenario::Steady,
            "warm-up" => Scenario::WarmUp,
            "thermocouple-drift" => Scenario::ThermocoupleDrift,
            "coolant-loss" => Scenario::CoolantLoss,
            "open-thermocouple" => Scenario::OpenThermocouple,
            "power-meter-scale-error" => Scenario::PowerMeterScaleError,
            "hot2-drift" => Scenario::Hot2Drift,
            "cold-offset" => Scenario::ColdOffset,
            "heater-scale-error" => Scenario::HeaterScaleError,
            _ => return Err(ParseScenarioError::Unknown),
        })
    }

    /// Rig time at which the fault begins, seconds; `None` for scenarios
    /// without a fault (`steady`, `warm-up`).
    pub const fn fault_start_s(self) -> Option<f32> {
        match self {
            Scenario::Steady | Scenario::WarmUp => None,
            _ => Some(FAULT_START_S),
        }
    }

    /// Whether the scenario needs the second hot thermocouple
    /// (`hot2-drift`): a rig running it has one whatever its parameters say
    /// ([`Rig::has_hot2`](super::Rig::has_hot2)).
    pub const fn needs_hot2(self) -> bool {
        matches!(self, Scenario::Hot2Drift)
    }

    /// Whether the rig starts in steady state at the set point (every
    /// scenario but `warm-up`).
    pub const fn starts_hot(self) -> bool {
        !matches!(self, Scenario::WarmUp)
    }
}

impl fmt::Display for Scenario {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.pad(self.name())
    }
}

impl FromStr for Scenario {
    type Err = ParseScenarioError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Scenario::parse(s)
    }
}

/// A scenario name that is not one of [`Scenario::ALL`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum ParseScenarioError {
    /// The name matches no scenario.
    Unknown,
}

impl fmt::Display for ParseScenarioError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ParseScenarioError::Unknown => {
                f.write_str("unknown scenario; expected one of: ")?;
                for (i, s) in Scenario::ALL.iter().enumerate() {
                    if i > 0 {
                        f.write_str(", ")?;
                    }
                    f.write_str(s.name())?;
                }
                Ok(())
            }
        }
    }
}

impl core::error::Error for ParseScenarioError {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_round_trip() {
        for s in Scenario::ALL {
            assert_eq!(Scenario::parse(s.name()), Ok(s));
        }
        assert_eq!(Scenario::parse("Steady"), Err(ParseScenarioError::Unknown));
    }

    #[test]
    fn the_parse_error_lists_every_scenario() {
        extern crate std;
        use std::string::ToString as _;
        let words = ParseScenarioError::Unknown.to_string();
        for s in Scenario::ALL {
            assert!(words.contains(s.name()), "{s} missing from {words:?}");
        }
        assert!(words.ends_with("heater-scale-error"), "{words:?}");
    }

    #[test]
    fn only_hot2_drift_needs_a_second_hot_sensor() {
        for s in Scenario::ALL {
            assert_eq!(s.needs_hot2(), s == Scenario::Hot2Drift, "{s}");
        }
    }
}
