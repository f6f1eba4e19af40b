//! Platinum resistance thermometers (Pt100, Pt1000, any R0) by IEC 60751:2008.
//!
//! Where it sits: a driver (a ratiometric ADC or an RTD-to-digital converter)
//! delivers the sensor resistance in ohms; this module turns it into the
//! temperature that goes into a `Sample` (in kelvin, after adding
//! [`crate::units::ZERO_CELSIUS_K`]), and back for checking against a calibrator.
//!
//! The Callendar–Van Dusen equation of IEC 60751:2008, −200 to 850 °C:
//!
//! ```text
//! R(t) = R0·[1 + A·t + B·t² + C·(t − 100)·t³]    C = 0 at and above 0 °C
//! A = 3.9083e-3 /°C, B = −5.775e-7 /°C², C = −4.183e-12 /°C⁴
//! ```
//!
//! The inverse is the closed-form root of the quadratic at and above 0 °C
//! (R ≥ R0), and Newton iteration on the quartic below 0 °C, seeded by the
//! quadratic root and kept inside the bracket [−200, 0] °C.
//!
//! All f64: a Pt100 read to the ±0.00005 Ω of the IEC tables at 390 Ω needs
//! a relative precision of 1.3e-7, beyond f32.
//!
//! ```
//! use heatbound::sensor::rtd::Rtd;
//!
//! // IEC 60751:2008 table: Pt100 at 100 °C is 138.5055 Ω.
//! assert!((Rtd::PT100.resistance_ohm(100.0)? - 138.5055).abs() < 0.00005);
//! assert!((Rtd::PT100.temperature_c(138.5055)? - 100.0).abs() < 0.0002);
//! # Ok::<(), heatbound::sensor::rtd::RtdError>(())
//! ```

use core::fmt;

/// IEC 60751:2008 coefficient A, in °C⁻¹.
pub const CVD_A: f64 = 3.9083e-3;
/// IEC 60751:2008 coefficient B, in °C⁻².
pub const CVD_B: f64 = -5.775e-7;
/// IEC 60751:2008 coefficient C (used only below 0 °C), in °C⁻⁴.
pub const CVD_C: f64 = -4.183e-12;

/// The IEC 60751 temperature range, (low, high) in °C.
pub const RTD_RANGE_C: (f64, f64) = (-200.0, 850.0);

/// How far past a range end a resistance may lie, relative to R0, and still
/// be accepted (mapped to the range end): half the last digit of the IEC
/// Pt100 tables (0.00005 Ω of 100 Ω).
pub const RESISTANCE_TOLERANCE_REL: f64 = 5e-7;

/// The largest R0 accepted, in ohms. Larger values are no platinum RTD on
/// the market, and keep every result far from f64 overflow.
pub const MAX_R0_OHM: f64 = 1e6;

/// A platinum RTD with the IEC 60751 coefficients and a given R0.
///
/// `Display` gives "Pt100", "Pt1000" or "Pt RTD (R0 = … Ω)".
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Rtd {
    r0_ohm: f64,
}

/// Why an RTD conversion failed. The `Display` text names the sensor, the
/// offending value and the valid range.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum RtdError {
    /// R0 is not a finite number in (0, [`MAX_R0_OHM`]] Ω.
    InvalidR0 {
        /// The rejected R0 in ohms.
        r0_ohm: f64,
    },
    /// The temperature is NaN or infinite.
    NonFiniteTemperature {
        /// The sensor.
        rtd: Rtd,
    },
    /// The resistance is NaN or infinite.
    NonFiniteResistance {
        /// The sensor.
        rtd: Rtd,
    },
    /// The temperature is outside −200 to 850 °C.
    TemperatureOutOfRange {
        /// The sensor.
        rtd: Rtd,
        /// The rejected temperature in °C.
        temperature_c: f64,
    },
    /// The resistance is outside R(−200 °C) to R(850 °C).
    ResistanceOutOfRange {
        /// The sensor.
        rtd: Rtd,
        /// The rejected resistance in ohms.
        resistance_ohm: f64,
    },
}

impl fmt::Display for RtdError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let (lo, hi) = RTD_RANGE_C;
        match *self {
            Self::InvalidR0 { r0_ohm } => write!(
                f,
                "RTD R0 {r0_ohm} Ω is not a positive resistance up to {MAX_R0_OHM} Ω"
            ),
            Self::NonFiniteTemperature { rtd } => {
                write!(f, "{rtd} temperature is not a finite number")
            }
            Self::NonFiniteResistance { rtd } => {
                write!(f, "{rtd} resistance is not a finite number")
            }
            Self::TemperatureOutOfRange { rtd, temperature_c } => write!(
                f,
                "{rtd} temperature {temperature_c} °C is outside the IEC 60751 range {lo} to {hi} °C"
            ),
            Self::ResistanceOutOfRange {
                rtd,
                resistance_ohm,
            } => {
                let (r_lo, r_hi) = rtd.resistance_range_ohm();
                write!(
                    f,
                    "{rtd} resistance {resistance_ohm} Ω is outside the IEC 60751 range {r_lo:.4} to {r_hi:.4} Ω"
                )
            }
        }
    }
}

impl core::error::Error for RtdError {}

impl fmt::Display for Rtd {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.r0_ohm == 100.0 {
            f.write_str("Pt100")
        } else if self.r0_ohm == 1000.0 {
            f.write_str("Pt1000")
        } else {
            write!(f, "Pt RTD (R0 = {} Ω)", self.r0_ohm)
        }
    }
}

impl Rtd {
    /// A Pt100: R0 = 100 Ω.
    pub const PT100: Rtd = Rtd { r0_ohm: 100.0 };
    /// A Pt1000: R0 = 1000 Ω.
    pub const PT1000: Rtd = Rtd { r0_ohm: 1000.0 };

    /// A platinum RTD with resistance `r0_ohm` at 0 °C.
    ///
    /// ```
    /// use heatbound::sensor::rtd::Rtd;
    /// let pt500 = Rtd::new(500.0)?;
    /// assert_eq!(pt500.resistance_ohm(0.0)?, 500.0);
    /// assert!(Rtd::new(0.0).is_err() && Rtd::new(f64::NAN).is_err());
    /// # Ok::<(), heatbound::sensor::rtd::RtdError>(())
    /// ```
    pub fn new(r0_ohm: f64) -> Result<Self, RtdError> {
        if r0_ohm.is_finite() && r0_ohm > 0.0 && r0_ohm <= MAX_R0_OHM {
            Ok(Self { r0_ohm })
        } else {
            Err(RtdError::InvalidR0 { r0_ohm })
        }
    }

    /// The resistance at 0 °C, in ohms.
    ///
    /// ```
    /// use heatbound::sensor::rtd::Rtd;
    /// assert_eq!(Rtd::PT1000.r0_ohm(), 1000.0);
    /// ```
    pub const fn r0_ohm(self) -> f64 {
        self.r0_ohm
    }

    /// The resistances at the ends of the IEC 60751 range, (low, high) in ohms.
    ///
    /// ```
    /// use heatbound::sensor::rtd::Rtd;
    /// let (lo, hi) = Rtd::PT100.resistance_range_ohm();
    /// // IEC 60751:2008 table: 18.5201 Ω at −200 °C, 390.4811 Ω at 850 °C.
    /// assert!((lo - 18.5201).abs() < 0.00005 && (hi - 390.4811).abs() < 0.00005);
    /// ```
    pub fn resistance_range_ohm(self) -> (f64, f64) {
        let (lo, hi) = RTD_RANGE_C;
        (self.eval(lo).0, self.eval(hi).0)
    }

    /// The resistance in ohms at `temperature_c` (°C), by Callendar–Van Dusen.
    ///
    /// ```
    /// use heatbound::sensor::rtd::Rtd;
    /// // IEC 60751:2008 table: Pt100 at −100 °C is 60.2558 Ω.
    /// assert!((Rtd::PT100.resistance_ohm(-100.0)? - 60.2558).abs() < 0.00005);
    /// assert!(Rtd::PT100.resistance_ohm(900.0).is_err());
    /// # Ok::<(), heatbound::sensor::rtd::RtdError>(())
    /// ```
    pub fn resistance_ohm(self, temperature_c: f64) -> Result<f64, RtdError> {
        if !temperature_c.is_finite() {
            return Err(RtdError::NonFiniteTemperature { rtd: self });
        }
        let (lo, hi) = RTD_RANGE_C;
        if !(lo..=hi).contains(&temperature_c) {
            return Err(RtdError::TemperatureOutOfRange {
                rtd: self,
                temperature_c,
            });
        }
        Ok(self.eval(temperature_c).0)
    }

    /// The temperature in °C at resistance `resistance_ohm`: the inverse of
    /// [`Self::resistance_ohm`].
    ///
    /// A resistance up to [`RESISTANCE_TOLERANCE_REL`]·R0 beyond a range end
    /// gives that end.
    ///
    /// ```
    /// use heatbound::sensor::rtd::Rtd;
    /// // IEC 60751:2008 table: Pt100 at −200 °C is 18.5201 Ω.
    /// assert!((Rtd::PT100.temperature_c(18.5201)? + 200.0).abs() < 0.001);
    /// assert!(Rtd::PT1000.temperature_c(10.0).is_err());
    /// # Ok::<(), heatbound::sensor::rtd::RtdError>(())
    /// ```
    pub fn temperature_c(self, resistance_ohm: f64) -> Result<f64, RtdError> {
        if !resistance_ohm.is_finite() {
            return Err(RtdError::NonFiniteResistance { rtd: self });
        }
        let (r_lo, r_hi) = self.resistance_range_ohm();
        let tol = RESISTANCE_TOLERANCE_REL * self.r0_ohm;
        if resistance_ohm < r_lo - tol || resistance_ohm > r_hi + tol {
            return Err(RtdError::ResistanceOutOfRange {
                rtd: self,
                resistance_ohm,
            });
        }
        let (t_lo, t_hi) = RTD_RANGE_C;
        if resistance_ohm <= r_lo {
            return Ok(t_lo);
        }
        if resistance_ohm >= r_hi {
            return Ok(t_hi);
        }
        let w = resistance_ohm / self.r0_ohm;
        // Root of B t² + A t + (1 − W) = 0 in the form without cancellation
        // near 0 °C; exact at and above 0 °C, the seed below it.
        let quadratic =
            2.0 * (w - 1.0) / (CVD_A + libm::sqrt(CVD_A * CVD_A + 4.0 * CVD_B * (w - 1.0)));
        if w >= 1.0 {
            return Ok(quadratic.clamp(0.0, t_hi));
        }
        // Below 0 °C: Newton on the quartic, bisecting whenever a step would
        // leave the bracket (R is increasing, so the bracket holds the root).
        let (mut a, mut b) = (t_lo, 0.0);
        let mut t = if quadratic > a && quadratic < b {
            quadratic
        } else {
            -100.0
        };
        for _ in 0..100 {
            let (r, dr) = self.eval(t);
            let g = r - resistance_ohm;
            if g == 0.0 {
                return Ok(t);
            }
            if g < 0.0 {
                a = t;
            } else {
                b = t;
            }
            let newton = t - g / dr;
            let next = if dr > 0.0 && newton > a && newton < b {
                newton
            } else {
                0.5 * (a + b)
            };
            if libm::fabs(next - t) <= 1e-12 {
                return Ok(next.clamp(t_lo, 0.0));
            }
            t = next;
        }
        Ok(t.clamp(t_lo, 0.0))
    }

    /// R(t) in ohms and dR/dt in Ω/°C, for `t` inside the range.
    fn eval(self, t: f64) -> (f64, f64) {
        let mut w = 1.0 + t * (CVD_A + t * CVD_B);
        let mut dw = CVD_A + 2.0 * CVD_B * t;
        if t < 0.0 {
            w += CVD_C * (t - 100.0) * t * t * t;
            dw += CVD_C * (4.0 * t - 300.0) * t * t;
        }
        (self.r0_ohm * w, self.r0_ohm * dw)
    }
}
