//! INA226 register map and conversions: register words in, volts, amperes
//! and watts out, no bus.
//!
//! Where it sits: between the I2C words the [driver](super::Ina226) reads
//! and the V·I of the monitor's `heat_in_w` and `work_w`.
//!
//! From the INA226 datasheet (TI SBOS547, "Register Maps" and
//! "Programming"):
//!
//! | reg | name | content |
//! |---|---|---|
//! | 0x00 | configuration | RST, AVG, VBUSCT, VSHCT, MODE; reset value 0x4127 |
//! | 0x01 | shunt voltage | two's complement, 2.5 µV LSB (±81.92 mV) |
//! | 0x02 | bus voltage | unsigned, 1.25 mV LSB, bit 15 always 0 (40.96 V full scale; 36 V rated) |
//! | 0x03 | power | unsigned, LSB = 25 × current LSB |
//! | 0x04 | current | two's complement, LSB = current LSB |
//! | 0x05 | calibration | CAL = 0.00512 / (current_LSB · R_shunt), bit 15 reserved |
//! | 0xFE | manufacturer id | 0x5449 ("TI") |
//! | 0xFF | die id | 0x2260 |
//!
//! with `current_LSB = max_expected_current / 2^15`. The chip computes
//! `current = shunt · CAL / 2048` and `power = current · bus / 20000`
//! internally; [`current_register`] and [`power_register`] model that for
//! the simulated bus.

use core::fmt;

/// Shunt-voltage LSB, V.
pub const SHUNT_LSB_V: f32 = 2.5e-6;
/// Bus-voltage LSB, V.
pub const BUS_LSB_V: f32 = 1.25e-3;
/// Power LSB as a multiple of the current LSB.
pub const POWER_LSB_FACTOR: f32 = 25.0;
/// The fixed scaling constant of the calibration equation (0.00512).
pub const CAL_SCALE: f64 = 0.005_12;
/// The manufacturer id register's value.
pub const MANUFACTURER_ID: u16 = 0x5449;
/// The die id register's value.
pub const DIE_ID: u16 = 0x2260;
/// The configuration register's reset value: 1 average, 1.1 ms conversions,
/// shunt and bus continuous.
pub const CONFIG_RESET: u16 = 0x4127;
/// The largest CAL value (bit 15 is reserved).
pub const CAL_MAX: u16 = 0x7FFF;

/// A register's pointer address.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[repr(u8)]
#[non_exhaustive]
pub enum Register {
    /// 0x00, configuration.
    Configuration = 0x00,
    /// 0x01, shunt voltage.
    ShuntVoltage = 0x01,
    /// 0x02, bus voltage.
    BusVoltage = 0x02,
    /// 0x03, power.
    Power = 0x03,
    /// 0x04, current.
    Current = 0x04,
    /// 0x05, calibration.
    Calibration = 0x05,
    /// 0x06, mask/enable.
    MaskEnable = 0x06,
    /// 0x07, alert limit.
    AlertLimit = 0x07,
    /// 0xFE, manufacturer id.
    ManufacturerId = 0xFE,
    /// 0xFF, die id.
    DieId = 0xFF,
}

impl Register {
    /// The pointer byte.
    pub const fn addr(self) -> u8 {
        self as u8
    }
}

/// Number of samples averaged (AVG, bits 11..9).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
#[allow(missing_docs)] // the names are the counts
pub enum Averaging {
    #[default]
    X1 = 0,
    X4 = 1,
    X16 = 2,
    X64 = 3,
    X128 = 4,
    X256 = 5,
    X512 = 6,
    X1024 = 7,
}

/// Conversion time (VBUSCT bits 8..6, VSHCT bits 5..3).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
#[allow(missing_docs)] // the names are the times in µs
pub enum ConversionTime {
    Us140 = 0,
    Us204 = 1,
    Us332 = 2,
    Us588 = 3,
    #[default]
    Us1100 = 4,
    Us2116 = 5,
    Us4156 = 6,
    Us8244 = 7,
}

/// Operating mode (MODE, bits 2..0).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub enum OperatingMode {
    /// 0b000: power-down.
    PowerDown = 0,
    /// 0b011: shunt and bus, triggered.
    ShuntAndBusTriggered = 3,
    /// 0b111: shunt and bus, continuous (reset default).
    #[default]
    ShuntAndBusContinuous = 7,
}

/// The configuration register's fields.
///
/// ```
/// use heatbound_firmware_example::drivers::ina226::conversion::*;
/// assert_eq!(Config::default().bits(), CONFIG_RESET);
/// let c = Config { averaging: Averaging::X16, ..Config::default() };
/// assert_eq!(c.bits(), 0x4527);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub struct Config {
    /// Samples averaged.
    pub averaging: Averaging,
    /// Bus-voltage conversion time.
    pub bus_conversion: ConversionTime,
    /// Shunt-voltage conversion time.
    pub shunt_conversion: ConversionTime,
    /// Operating mode.
    pub mode: OperatingMode,
}

impl Config {
    /// The register word (bits 14..12 read as 0b100 on the chip and are
    /// written so).
    pub const fn bits(&self) -> u16 {
        0x4000
            | (self.averaging as u16) << 9
            | (self.bus_conversion as u16) << 6
            | (self.shunt_conversion as u16) << 3
            | self.mode as u16
    }
}

/// Why a calibration cannot be programmed.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum CalibrationError {
    /// The shunt resistance or current is not a positive finite number.
    NotPositive,
    /// CAL would be 0 or above 0x7FFF: choose a larger or smaller current LSB.
    OutOfRange {
        /// The CAL the equation gives.
        cal: f64,
    },
}

impl fmt::Display for CalibrationError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CalibrationError::NotPositive => {
                f.write_str("shunt resistance and current must be positive and finite")
            }
            CalibrationError::OutOfRange { cal } => {
                write!(f, "INA226 calibration {cal} is outside 1..=32767")
            }
        }
    }
}

impl core::error::Error for CalibrationError {}

/// A programmable calibration: the CAL word and the current LSB it gives.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Calibration {
    cal: u16,
    current_lsb_a: f32,
}

impl Calibration {
    /// The calibration for a maximum expected current `max_current_a` (A)
    /// through `shunt_ohm` (Ω): `current_LSB = max / 2^15`,
    /// `CAL = trunc(0.00512 / (current_LSB · R_shunt))`.
    ///
    /// ```
    /// use heatbound_firmware_example::drivers::ina226::conversion::Calibration;
    /// // 10 A through 2 mΩ: current LSB 305.18 µA, CAL 8388.
    /// let c = Calibration::for_max_current(10.0, 0.002)?;
    /// assert_eq!(c.cal(), 8388);
    /// assert!((c.current_lsb_a() - 305.176e-6).abs() < 1e-9);
    /// # Ok::<(), heatbound_firmware_example::drivers::ina226::conversion::CalibrationError>(())
    /// ```
    pub const fn for_max_current(
        max_current_a: f32,
        shunt_ohm: f32,
    ) -> Result<Self, CalibrationError> {
        Self::for_current_lsb(max_current_a / 32_768.0, shunt_ohm)
    }

    /// The calibration for a chosen (usually rounded) current LSB
    /// `current_lsb_a` (A) through `shunt_ohm` (Ω).
    ///
    /// `const`, so a board's calibration can be checked at compile time.
    ///
    /// ```
    /// use heatbound_firmware_example::drivers::ina226::conversion::Calibration;
    /// // A round 1 mA LSB with 2 mΩ: CAL = 0.00512 / (0.001 · 0.002) = 2560.
    /// assert_eq!(Calibration::for_current_lsb(0.001, 0.002)?.cal(), 2560);
    /// assert!(Calibration::for_current_lsb(1e-6, 0.002).is_err()); // CAL 2.56 million
    /// # Ok::<(), heatbound_firmware_example::drivers::ina226::conversion::CalibrationError>(())
    /// ```
    pub const fn for_current_lsb(
        current_lsb_a: f32,
        shunt_ohm: f32,
    ) -> Result<Self, CalibrationError> {
        let ok_lsb = current_lsb_a.is_finite() && current_lsb_a > 0.0;
        let ok_shunt = shunt_ohm.is_finite() && shunt_ohm > 0.0;
        if !(ok_lsb && ok_shunt) {
            return Err(CalibrationError::NotPositive);
        }
        // The inputs are f32, so 0.001 · 0.002 arrives about 1e-7 high and
        // an exact 2560 would truncate to 2559: allow 1 ppm before truncating.
        let cal = CAL_SCALE / (current_lsb_a as f64 * shunt_ohm as f64) * (1.0 + 1e-6);
        if !(cal >= 1.0 && cal < CAL_MAX as f64 + 1.0) {
            return Err(CalibrationError::OutOfRange { cal });
        }
        Ok(Calibration {
            // The float-to-integer cast truncates, as the equation asks.
            cal: cal as u16,
            current_lsb_a,
        })
    }

    /// The CAL word to write to register 0x05.
    pub const fn cal(&self) -> u16 {
        self.cal
    }

    /// The current LSB, A.
    pub const fn current_lsb_a(&self) -> f32 {
        self.current_lsb_a
    }

    /// The power LSB, W (25 × the current LSB).
    pub fn power_lsb_w(&self) -> f32 {
        POWER_LSB_FACTOR * self.current_lsb_a
    }
}

/// Shunt voltage, V, from register 0x01.
///
/// ```
/// use heatbound_firmware_example::drivers::ina226::conversion::shunt_voltage_v;
/// assert!((shunt_voltage_v(0x1F40) - 0.020).abs() < 1e-9); // 8000 · 2.5 µV
/// assert!((shunt_voltage_v(0xFFFF) + 2.5e-6).abs() < 1e-12);
/// ```
pub fn shunt_voltage_v(raw: u16) -> f32 {
    f32::from(raw as i16) * SHUNT_LSB_V
}

/// Bus voltage, V, from register 0x02 (bit 15 ignored).
///
/// ```
/// use heatbound_firmware_example::drivers::ina226::conversion::bus_voltage_v;
/// assert_eq!(bus_voltage_v(0x2580), 12.0); // 9600 · 1.25 mV
/// ```
pub fn bus_voltage_v(raw: u16) -> f32 {
    f32::from(raw & 0x7FFF) * BUS_LSB_V
}

/// Current, A, from register 0x04.
///
/// ```
/// use heatbound_firmware_example::drivers::ina226::conversion::{current_a, Calibration};
/// let cal = Calibration::for_current_lsb(0.001, 0.002).unwrap();
/// assert_eq!(current_a(0x2710, &cal), 10.0); // 10000 · 1 mA
/// ```
pub fn current_a(raw: u16, calibration: &Calibration) -> f32 {
    f32::from(raw as i16) * calibration.current_lsb_a
}

/// Power, W, from register 0x03.
///
/// ```
/// use heatbound_firmware_example::drivers::ina226::conversion::{power_w, Calibration};
/// let cal = Calibration::for_current_lsb(0.001, 0.002).unwrap();
/// assert!((power_w(4800, &cal) - 120.0).abs() < 1e-3); // 4800 · 25 mW
/// ```
pub fn power_w(raw: u16, calibration: &Calibration) -> f32 {
    f32::from(raw) * calibration.power_lsb_w()
}

/// Register 0x01 for a shunt voltage `shunt_v` (V): rounded, saturated at
/// ±81.92 mV.
pub fn shunt_register(shunt_v: f32) -> u16 {
    let c = libm::roundf(shunt_v / SHUNT_LSB_V);
    if c.is_nan() {
        return 0;
    }
    c.clamp(f32::from(i16::MIN), f32::from(i16::MAX)) as i16 as u16
}

/// Register 0x02 for a bus voltage `bus_v` (V): rounded, saturated at 0 and
/// 40.96 V.
pub fn bus_register(bus_v: f32) -> u16 {
    let c = libm::roundf(bus_v / BUS_LSB_V);
    if c.is_nan() {
        return 0;
    }
    c.clamp(0.0, 32_767.0) as u16
}

/// Register 0x04 as the chip computes it: `shunt · CAL / 2048`, truncated
/// and saturated.
///
/// ```
/// use heatbound_firmware_example::drivers::ina226::conversion::current_register;
/// assert_eq!(current_register(0x1F40, 2560), 0x2710); // 20 mV, CAL 2560 → 10 A at 1 mA
/// assert_eq!(current_register(0x1F40, 0), 0); // uncalibrated: reads 0
/// ```
pub fn current_register(shunt_raw: u16, cal: u16) -> u16 {
    let c = i32::from(shunt_raw as i16) * i32::from(cal & CAL_MAX) / 2048;
    c.clamp(i32::from(i16::MIN), i32::from(i16::MAX)) as i16 as u16
}

/// Register 0x03 as the chip computes it: `|current| · bus / 20000`,
/// truncated and saturated.
///
/// ```
/// use heatbound_firmware_example::drivers::ina226::conversion::power_register;
/// assert_eq!(power_register(0x2710, 0x2580), 4800); // 10 A at 12 V, 25 mW LSB: 120 W
/// ```
pub fn power_register(current_raw: u16, bus_raw: u16) -> u16 {
    let i = u32::from((current_raw as i16).unsigned_abs());
    let p = i * u32::from(bus_raw & 0x7FFF) / 20_000;
    p.min(u32::from(u16::MAX)) as u16
}
