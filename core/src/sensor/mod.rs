//! Sensor conversion and channel health: readings in, kelvin and watts out.
//!
//! This module sits between the drivers and the monitor:
//!
//! ```text
//! sensors --(SPI/I2C/ADC bytes)--> drivers --> sensor (this module) --> Sample --> Monitor
//! ```
//!
//! A driver turns register bits into an electrical quantity (millivolts, ohms,
//! volts and amperes, rpm and newton-metres, a flow). The pure functions here
//! turn that quantity into what the monitor consumes (a temperature, a power),
//! and [`health::ChannelHealth`] decides whether the channel can be trusted.
//! Nothing here touches a bus or reads a clock: sample time is always an
//! argument.
//!
//! | submodule | what | standard |
//! |---|---|---|
//! | [`thermocouple`] | types K, J, T: EMF ↔ temperature, cold-junction compensation | NIST ITS-90 (Monograph 175) |
//! | [`rtd`] | platinum RTDs (Pt100, Pt1000, any R0): resistance ↔ temperature | IEC 60751:2008 |
//! | [`water`] | water cp(T) and ρ(T), 5–95 °C | fitted to IAPWS-95 |
//! | [`power`] | V·I, shaft power, calorimetric heat flow | — |
//! | [`health`] | non-finite, range, rate, stuck and stale faults | common practice |
//!
//! # Precision: f64 where precision demands it, f32 where speed does
//!
//! - **f64** for the thermocouple reference functions, their Newton
//!   inversion and the RTD Callendar–Van Dusen equation. The ITS-90
//!   polynomials reach order 14 with coefficients spanning some 30 decades
//!   (type T: 3.9e-2 down to 8.0e-31); in f32 (24-bit mantissa) the sum
//!   loses the 1 µV table resolution and the Newton refinement cannot get
//!   below about 1e-3 °C. A Pt100 at 850 °C read to ±0.00005 Ω needs a
//!   relative precision of 1.3e-7, just beyond f32. These conversions run
//!   once per reading, so software f64 on a Cortex-M4F is affordable.
//! - **f32** for channel health and the power channels, which run on every
//!   sample on the single-precision FPU. Their inputs come from sensors good
//!   to 1e-3 at best, far above f32's 6e-8 rounding.
//!
//! Every function returns a typed error instead of panicking, and never
//! returns NaN or infinity: non-finite input, input outside the range of the
//! standard and results that overflow are all errors.
//!
//! ```
//! use heatbound::sensor::{SensorKind, thermocouple::ThermocoupleType};
//!
//! let kind: SensorKind = "type-k".parse()?;
//! assert_eq!(kind.thermocouple(), Some(ThermocoupleType::K));
//! let t_c = ThermocoupleType::K.temperature_c(4.096)?;
//! assert!((t_c - 100.0).abs() < 0.02);
//! # Ok::<(), Box<dyn core::error::Error>>(())
//! ```

pub mod health;
pub mod power;
pub mod rtd;
pub mod thermocouple;
pub mod water;

use core::fmt;
use core::str::FromStr;

use self::rtd::Rtd;
use self::thermocouple::ThermocoupleType;

/// A temperature sensor the conversions know, as a bench engineer names it.
///
/// `Display` and `FromStr` use the command-line names: `type-k`, `type-j`,
/// `type-t`, `pt100`, `pt1000`.
///
/// ```
/// use heatbound::sensor::SensorKind;
///
/// let kind: SensorKind = "pt100".parse()?;
/// assert_eq!(kind, SensorKind::Pt100);
/// assert_eq!(kind.to_string(), "pt100");
/// assert!(kind.rtd().is_some() && kind.thermocouple().is_none());
/// # Ok::<(), heatbound::sensor::ParseSensorKindError>(())
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum SensorKind {
    /// Type K thermocouple (nickel-chromium / nickel-aluminium).
    TypeK,
    /// Type J thermocouple (iron / copper-nickel).
    TypeJ,
    /// Type T thermocouple (copper / copper-nickel).
    TypeT,
    /// Platinum RTD with R0 = 100 Ω.
    Pt100,
    /// Platinum RTD with R0 = 1000 Ω.
    Pt1000,
    /// Platinum RTD with another R0 (IEC 60751 coefficients).
    Rtd {
        /// Resistance at 0 °C in ohms.
        r0_ohm: f64,
    },
}

impl SensorKind {
    /// The thermocouple type, or `None` for an RTD.
    ///
    /// ```
    /// use heatbound::sensor::{SensorKind, thermocouple::ThermocoupleType};
    /// assert_eq!(SensorKind::TypeJ.thermocouple(), Some(ThermocoupleType::J));
    /// assert_eq!(SensorKind::Pt1000.thermocouple(), None);
    /// ```
    pub const fn thermocouple(self) -> Option<ThermocoupleType> {
        match self {
            Self::TypeK => Some(ThermocoupleType::K),
            Self::TypeJ => Some(ThermocoupleType::J),
            Self::TypeT => Some(ThermocoupleType::T),
            Self::Pt100 | Self::Pt1000 | Self::Rtd { .. } => None,
        }
    }

    /// The RTD, or `None` for a thermocouple or an invalid R0.
    ///
    /// ```
    /// use heatbound::sensor::SensorKind;
    /// assert_eq!(SensorKind::Pt1000.rtd().map(|r| r.r0_ohm()), Some(1000.0));
    /// assert_eq!(SensorKind::Rtd { r0_ohm: 500.0 }.rtd().map(|r| r.r0_ohm()), Some(500.0));
    /// assert!(SensorKind::Rtd { r0_ohm: -1.0 }.rtd().is_none());
    /// ```
    pub fn rtd(self) -> Option<Rtd> {
        match self {
            Self::Pt100 => Some(Rtd::PT100),
            Self::Pt1000 => Some(Rtd::PT1000),
            Self::Rtd { r0_ohm } => Rtd::new(r0_ohm).ok(),
            Self::TypeK | Self::TypeJ | Self::TypeT => None,
        }
    }

    /// The command-line name (`type-k`, `pt100`, ...); `rtd` for a custom R0.
    ///
    /// ```
    /// use heatbound::sensor::SensorKind;
    /// assert_eq!(SensorKind::TypeT.name(), "type-t");
    /// ```
    pub const fn name(self) -> &'static str {
        match self {
            Self::TypeK => "type-k",
            Self::TypeJ => "type-j",
            Self::TypeT => "type-t",
            Self::Pt100 => "pt100",
            Self::Pt1000 => "pt1000",
            Self::Rtd { .. } => "rtd",
        }
    }
}

impl fmt::Display for SensorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Rtd { r0_ohm } => write!(f, "rtd (R0 = {r0_ohm} Ω)"),
            other => f.write_str(other.name()),
        }
    }
}

/// The sensor names [`SensorKind::from_str`] accepts.
pub const SENSOR_NAMES: &str = "type-k, type-j, type-t, pt100, pt1000";

impl FromStr for SensorKind {
    type Err = ParseSensorKindError;

    /// Parses a command-line name, ignoring ASCII case.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        const KINDS: [SensorKind; 5] = [
            SensorKind::TypeK,
            SensorKind::TypeJ,
            SensorKind::TypeT,
            SensorKind::Pt100,
            SensorKind::Pt1000,
        ];
        KINDS
            .into_iter()
            .find(|k| k.name().eq_ignore_ascii_case(s.trim()))
            .ok_or(ParseSensorKindError)
    }
}

/// A sensor name that is not one of [`SENSOR_NAMES`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub struct ParseSensorKindError;

impl fmt::Display for ParseSensorKindError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "unknown sensor; expected one of {SENSOR_NAMES}")
    }
}

impl core::error::Error for ParseSensorKindError {}
