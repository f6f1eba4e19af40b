//! The scenarios the simulated rig can run: one healthy run from hot, one
//! cold start, and the faults the alarms exist to catch.
//!
//! Every fault begins at [`FAULT_START_S`] = 120 s of rig time, after two
//! minutes of steady running, so a monitor has a full window of good data
//! first. The timelines are scaled so that at 10 Hz the interesting event
//! falls within the first 10 minutes of simulated time (a 20 s demo at 30×
//! shows it). See the [rig module docs](super) for what each alarm does
//! when.

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
}

impl Scenario {
    /// Every scenario, in documentation order.
    pub const ALL: [Scenario; 6] = [
        Scenario::Steady,
        Scenario::WarmUp,
        Scenario::ThermocoupleDrift,
        Scenario::CoolantLoss,
        Scenario::OpenThermocouple,
        Scenario::PowerMeterScaleError,
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
        }
    }

    /// The scenario of `name` ([`Scenario::name`]).
    pub fn parse(name: &str) -> Result<Scenario, ParseScenarioError> {
        Scenario::ALL
            .into_iter()
            .find(|s| s.name() == name)
            .ok_or(ParseScenarioError::Unknown)
    }

    /// Rig time at which the fault begins, seconds; `None` for scenarios
    /// without a fault (`steady`, `warm-up`).
    pub const fn fault_start_s(self) -> Option<f32> {
        match self {
            Scenario::Steady | Scenario::WarmUp => None,
            _ => Some(FAULT_START_S),
        }
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
            ParseScenarioError::Unknown => f.write_str(
                "unknown scenario; expected one of: steady, warm-up, thermocouple-drift, \
                 coolant-loss, open-thermocouple, power-meter-scale-error",
            ),
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
}
