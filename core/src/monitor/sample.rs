//! One reading of every channel, and what can be wrong with it.

use serde::Serialize;

#[cfg(doc)]
use super::settings::Mode;

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
    /// A second hot-side temperature, kelvin, if the rig has one (a
    /// dual-element thermocouple, say): the diagnosis compares it with
    /// `t_hot_k`.
    pub t_hot2_k: Option<R>,
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
    /// `t_hot2_k`.
    Hot2 = 5,
}

impl Channel {
    /// Every channel, in bit order.
    pub const ALL: [Channel; 6] = [
        Channel::Hot,
        Channel::Cold,
        Channel::HeatIn,
        Channel::Work,
        Channel::HeatOut,
        Channel::Hot2,
    ];

    /// The channel's column name.
    pub const fn as_str(self) -> &'static str {
        match self {
            Channel::Hot => "hot",
            Channel::Cold => "cold",
            Channel::HeatIn => "heat_in_w",
            Channel::Work => "work_w",
            Channel::HeatOut => "heat_out_w",
            Channel::Hot2 => "hot2",
        }
    }

    /// The channel's name in a diagnosis: `hot`, `hot2`, `cold`, `heat_in`,
    /// `work` or `heat_out`.
    pub const fn name(self) -> &'static str {
        match self {
            Channel::Hot => "hot",
            Channel::Cold => "cold",
            Channel::HeatIn => "heat_in",
            Channel::Work => "work",
            Channel::HeatOut => "heat_out",
            Channel::Hot2 => "hot2",
        }
    }

    /// Whether the channel is a temperature (its error an offset in
    /// kelvin) rather than a power (its error a relative scale).
    pub const fn is_temperature(self) -> bool {
        matches!(self, Channel::Hot | Channel::Hot2 | Channel::Cold)
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
    /// The run has a second hot-side sensor, but the sample has no reading
    /// of it.
    MissingHot2,
    /// The sample has the same time stamp as the previous one.
    RepeatedTime,
}

impl core::fmt::Display for Invalid {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Invalid::NonFinite(c) => write!(f, "{c} is not a finite number"),
            Invalid::OutOfRange(c @ (Channel::Hot | Channel::Cold | Channel::Hot2)) => {
                write!(f, "{c} is outside the plausible temperature range")
            }
            Invalid::OutOfRange(c) => write!(f, "{c} is beyond ±{MAX_POWER_W:e} W"),
            Invalid::MissingHeatOut => {
                f.write_str("heat_out_w is missing in a run that measures it")
            }
            Invalid::MissingHot2 => f.write_str("hot2 is missing in a run that measures it"),
            Invalid::RepeatedTime => f.write_str("time stamp repeats the previous sample's"),
        }
    }
}

/// What `Monitor::push` did with a sample.
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
