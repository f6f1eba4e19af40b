//! MAX31855 frame layout and conversions: 32 bits in, °C out, no bus.
//!
//! Where it sits: between the SPI bytes the [driver](super::Max31855) reads
//! and the monitor's `t_hot_k`/`t_cold_k`:
//!
//! ```text
//! 4 SPI bytes --> u32 --> decode_frame --> Max31855Reading (counts)
//!     --> linearized_hot_junction_c (ITS-90 cold-junction compensation) --> °C
//! ```
//!
//! The frame, from the MAX31855 datasheet ("Memory Map", Table 2/3):
//!
//! | bits | meaning |
//! |---|---|
//! | D31..D18 | thermocouple temperature, 14-bit two's complement, 0.25 °C LSB |
//! | D17 | reserved (reads 0) |
//! | D16 | fault: set when any of SCV, SCG, OC is set |
//! | D15..D4 | internal (cold-junction) temperature, 12-bit two's complement, 0.0625 °C LSB |
//! | D3 | reserved (reads 0) |
//! | D2 | SCV: thermocouple shorted to VCC |
//! | D1 | SCG: thermocouple shorted to GND |
//! | D0 | OC: thermocouple open circuit |
//!
//! The chip's thermocouple value assumes a constant K-type Seebeck
//! coefficient of 41.276 µV/°C between the two junctions, while the real
//! K-type slope varies between about 39 and 43 µV/°C over the range. With
//! the board at 30 °C that makes the chip read about 2 °C low at 400 °C and
//! 6.6 °C high at 700 °C (from the ITS-90 table), so common practice with this
//! chip is to undo the linearisation: recover the EMF the chip measured,
//! `E = 0.041276 mV/°C · (T_tc − T_cj)`, and apply proper ITS-90
//! cold-junction compensation to it
//! ([`ThermocoupleType::temperature_c_with_cold_junction`]). That is what
//! [`linearized_hot_junction_c`] does.
//!
//! The inverse functions ([`chip_thermocouple_c`], [`thermocouple_count`],
//! [`internal_count`], [`encode_frame`]) give the frame a real chip would
//! send; the simulated rig and the tests use them.

use core::fmt;

use heatbound::sensor::thermocouple::{ThermocoupleError, ThermocoupleType};

/// The chip's K-type Seebeck coefficient, mV/°C (MAX31855 datasheet,
/// "Thermocouple temperature" equation: 41.276 µV/°C for type K).
pub const K_SLOPE_MV_PER_C: f64 = 0.041_276;

/// Thermocouple temperature LSB, °C.
pub const THERMOCOUPLE_LSB_C: f64 = 0.25;

/// Internal (cold-junction) temperature LSB, °C.
pub const INTERNAL_LSB_C: f64 = 0.0625;

const FAULT_BIT: u32 = 1 << 16;
const SCV_BIT: u32 = 1 << 2;
const SCG_BIT: u32 = 1 << 1;
const OC_BIT: u32 = 1 << 0;

/// Smallest and largest 14-bit thermocouple counts.
const TC_COUNT_RANGE: (i16, i16) = (-(1 << 13), (1 << 13) - 1);
/// Smallest and largest 12-bit internal-temperature counts.
const CJ_COUNT_RANGE: (i16, i16) = (-(1 << 11), (1 << 11) - 1);

/// The fault bits of a frame whose D16 is set (or whose cause bits are set
/// without D16, which a healthy chip never sends).
///
/// All three false means the fault flag was set without a cause: still a
/// fault, because the reading cannot be trusted.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub struct Max31855Fault {
    /// OC (D0): the thermocouple is open circuit.
    pub open: bool,
    /// SCG (D1): the thermocouple is shorted to GND.
    pub short_gnd: bool,
    /// SCV (D2): the thermocouple is shorted to VCC.
    pub short_vcc: bool,
}

impl Max31855Fault {
    /// An open thermocouple (OC).
    pub const OPEN: Max31855Fault = Max31855Fault {
        open: true,
        short_gnd: false,
        short_vcc: false,
    };

    /// The three cause bits (D2..D0) of this fault.
    pub const fn bits(self) -> u32 {
        (self.short_vcc as u32) << 2 | (self.short_gnd as u32) << 1 | self.open as u32
    }
}

impl fmt::Display for Max31855Fault {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("thermocouple fault:")?;
        if self.open {
            f.write_str(" open circuit")?;
        }
        if self.short_gnd {
            f.write_str(" short to GND")?;
        }
        if self.short_vcc {
            f.write_str(" short to VCC")?;
        }
        if !(self.open || self.short_gnd || self.short_vcc) {
            f.write_str(" flag set without a cause")?;
        }
        Ok(())
    }
}

impl core::error::Error for Max31855Fault {}

/// A fault-free frame: the two temperatures as the chip reports them, in
/// counts of their LSBs (always within the 14- and 12-bit ranges).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub struct Max31855Reading {
    thermocouple: i16,
    internal: i16,
}

impl Max31855Reading {
    /// A reading from counts, if they fit the frame: thermocouple in
    /// −8192..=8191 (0.25 °C), internal in −2048..=2047 (0.0625 °C).
    ///
    /// ```
    /// use heatbound_firmware_example::drivers::max31855::conversion::Max31855Reading;
    /// let r = Max31855Reading::from_counts(100, 400).unwrap(); // 25 °C, 25 °C
    /// assert_eq!(r.thermocouple_c(), 25.0);
    /// assert!(Max31855Reading::from_counts(9000, 0).is_none());
    /// ```
    pub const fn from_counts(thermocouple: i16, internal: i16) -> Option<Max31855Reading> {
        let tc_ok = thermocouple >= TC_COUNT_RANGE.0 && thermocouple <= TC_COUNT_RANGE.1;
        let cj_ok = internal >= CJ_COUNT_RANGE.0 && internal <= CJ_COUNT_RANGE.1;
        if tc_ok && cj_ok {
            Some(Max31855Reading {
                thermocouple,
                internal,
            })
        } else {
            None
        }
    }

    /// The thermocouple field, counts of 0.25 °C.
    pub const fn thermocouple_count(&self) -> i16 {
        self.thermocouple
    }

    /// The internal-temperature field, counts of 0.0625 °C.
    pub const fn internal_count(&self) -> i16 {
        self.internal
    }

    /// The chip's (linear-slope) thermocouple temperature, °C.
    pub fn thermocouple_c(&self) -> f64 {
        f64::from(self.thermocouple) * THERMOCOUPLE_LSB_C
    }

    /// The internal (cold-junction) temperature, °C.
    pub fn internal_c(&self) -> f64 {
        f64::from(self.internal) * INTERNAL_LSB_C
    }
}

/// Sign-extends the low `bits` bits of `field`.
const fn sign_extend(field: u32, bits: u32) -> i16 {
    let shift = 32 - bits;
    (((field << shift) as i32) >> shift) as i16
}

/// Decodes a 32-bit frame (first byte on the wire in bits 31..24).
///
/// A set fault flag (D16) or any set cause bit is an error carrying the
/// cause bits; the temperature fields of such a frame are not meaningful.
/// The reserved bits D17 and D3 are ignored.
///
/// ```
/// use heatbound_firmware_example::drivers::max31855::conversion::{decode_frame, Max31855Fault};
/// // MAX31855 datasheet, Table 2/3: +100.75 °C and +25.0000 °C.
/// let r = decode_frame(0b0000_0110_0100_11_0_0_0001_1001_0000_0_000).unwrap();
/// assert_eq!((r.thermocouple_c(), r.internal_c()), (100.75, 25.0));
/// assert_eq!(decode_frame(0x0001_0001), Err(Max31855Fault::OPEN));
/// ```
pub const fn decode_frame(raw: u32) -> Result<Max31855Reading, Max31855Fault> {
    let causes = raw & (SCV_BIT | SCG_BIT | OC_BIT);
    if raw & FAULT_BIT != 0 || causes != 0 {
        return Err(Max31855Fault {
            open: raw & OC_BIT != 0,
            short_gnd: raw & SCG_BIT != 0,
            short_vcc: raw & SCV_BIT != 0,
        });
    }
    Ok(Max31855Reading {
        thermocouple: sign_extend(raw >> 18, 14),
        internal: sign_extend(raw >> 4, 12),
    })
}

/// The frame a chip sends for `thermocouple` and `internal` counts (masked
/// to their widths) and `fault` (D16 set when any cause is, or when
/// `fault` is `Some` at all).
///
/// ```
/// use heatbound_firmware_example::drivers::max31855::conversion::*;
/// let raw = encode_frame(403, 400, None);
/// assert_eq!(decode_frame(raw).unwrap().thermocouple_c(), 100.75);
/// assert_eq!(decode_frame(encode_frame(0, 400, Some(Max31855Fault::OPEN))),
///            Err(Max31855Fault::OPEN));
/// ```
pub const fn encode_frame(thermocouple: i16, internal: i16, fault: Option<Max31855Fault>) -> u32 {
    let tc = ((thermocouple as u16 as u32) & 0x3FFF) << 18;
    let cj = ((internal as u16 as u32) & 0x0FFF) << 4;
    let fault_bits = match fault {
        Some(f) => FAULT_BIT | f.bits(),
        None => 0,
    };
    tc | cj | fault_bits
}

/// The hot-junction temperature, °C, from a reading: the chip's EMF
/// `0.041276 mV/°C · (T_tc − T_cj)` with ITS-90 type-K cold-junction
/// compensation at the chip's internal temperature.
///
/// ```
/// use heatbound_firmware_example::drivers::max31855::conversion::*;
/// // A 400 °C junction with the board at 30 °C: the chip reports 30 °C plus
/// // (E(400) − E(30)) / 41.276 µV/°C = 30 + (16.397 − 1.203) / 0.041276,
/// // about 1.9 °C too low (NIST ITS-90 table values).
/// let tc_c = chip_thermocouple_c(400.0, 30.0)?;
/// assert!((tc_c - 398.1).abs() < 0.05);
/// let r = Max31855Reading::from_counts(thermocouple_count(tc_c), internal_count(30.0)).unwrap();
/// assert!((linearized_hot_junction_c(&r)? - 400.0).abs() < 0.2);
/// # Ok::<(), heatbound::sensor::thermocouple::ThermocoupleError>(())
/// ```
pub fn linearized_hot_junction_c(reading: &Max31855Reading) -> Result<f64, ThermocoupleError> {
    let t_cj_c = reading.internal_c();
    let emf_mv = K_SLOPE_MV_PER_C * (reading.thermocouple_c() - t_cj_c);
    ThermocoupleType::K.temperature_c_with_cold_junction(emf_mv, t_cj_c)
}

/// The thermocouple temperature a chip reports, °C and unquantised, for a
/// type-K hot junction at `hot_c` with its cold junction at
/// `cold_junction_c`: `T_cj + (E(T_hot) − E(T_cj)) / 41.276 µV/°C`.
///
/// ```
/// use heatbound_firmware_example::drivers::max31855::conversion::chip_thermocouple_c;
/// // Both junctions at the same temperature: no EMF, the chip reads T_cj.
/// assert!((chip_thermocouple_c(25.0, 25.0)? - 25.0).abs() < 1e-12);
/// # Ok::<(), heatbound::sensor::thermocouple::ThermocoupleError>(())
/// ```
pub fn chip_thermocouple_c(hot_c: f64, cold_junction_c: f64) -> Result<f64, ThermocoupleError> {
    let emf_mv = ThermocoupleType::K.emf_mv_with_cold_junction(hot_c, cold_junction_c)?;
    Ok(cold_junction_c + emf_mv / K_SLOPE_MV_PER_C)
}

/// `value / lsb` rounded to the nearest count and clamped to `range` (the
/// chip saturates at the ends of its field). NaN gives 0.
fn count(value: f64, lsb: f64, range: (i16, i16)) -> i16 {
    let x = value / lsb;
    if x.is_nan() {
        return 0;
    }
    // Saturated first: the ends are whole counts, so rounding after gives
    // the same count. Comparisons, not f64 max/min or clamp, which would
    // bring libm's fmax/fmin or float formatting into the firmware.
    if x <= f64::from(range.0) {
        return range.0;
    }
    if x >= f64::from(range.1) {
        return range.1;
    }
    // Round half away from zero without libm's `round`: `as` truncates
    // towards zero (|x| < 2^15 here), and the fraction is exact.
    let whole = x as i32;
    let frac = x - f64::from(whole);
    let rounded = if frac >= 0.5 {
        whole + 1
    } else if frac <= -0.5 {
        whole - 1
    } else {
        whole
    };
    i16::try_from(rounded).unwrap_or(if rounded < 0 { range.0 } else { range.1 })
}

/// The 14-bit thermocouple count for a temperature `t_c` (°C), rounded to
/// 0.25 °C and saturated at −2048 °C and +2047.75 °C.
///
/// ```
/// use heatbound_firmware_example::drivers::max31855::conversion::thermocouple_count;
/// assert_eq!(thermocouple_count(100.75), 403);
/// assert_eq!(thermocouple_count(1e6), 8191);
/// ```
pub fn thermocouple_count(t_c: f64) -> i16 {
    count(t_c, THERMOCOUPLE_LSB_C, TC_COUNT_RANGE)
}

/// The 12-bit internal-temperature count for `t_c` (°C), rounded to
/// 0.0625 °C and saturated at −128 °C and +127.9375 °C.
///
/// ```
/// use heatbound_firmware_example::drivers::max31855::conversion::internal_count;
/// assert_eq!(internal_count(25.0), 400);
/// assert_eq!(internal_count(-0.0625), -1);
/// ```
pub fn internal_count(t_c: f64) -> i16 {
    count(t_c, INTERNAL_LSB_C, CJ_COUNT_RANGE)
}
