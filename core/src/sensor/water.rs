//! Liquid water at atmospheric pressure: isobaric heat capacity cp(T) and
//! density ρ(T), 5 to 95 °C, for coolant calorimetry.
//!
//! Where it sits: `sensor::power` uses these to turn a coolant flow and its
//! temperature rise into a heat flow (watts) for the `Sample`.
//!
//! Both are polynomials in x = t/100 °C fitted by least squares to IAPWS-95
//! (IAPWS R6-95(2018), computed with the PyPI package `iapws`) at
//! 0.101325 MPa, every 0.25 °C from 5 to 95 °C. The generator script is
//! `tests/tools/gen_water_iapws95.py`; its vectors are in
//! `tests/vectors/water_iapws95.csv`. Fit error against those vectors: cp
//! within 1.5e-5 relative, ρ within 7e-6 relative, far inside the 0.1 % and
//! 0.05 % targets. Pressure changes of a few bar shift either by less than
//! 0.05 %, so they are ignored.
//!
//! f32: these run on every sample of a calorimetric channel on the
//! single-precision FPU, and f32 rounding (6e-8) is far below the fit error.
//!
//! ```
//! use heatbound::sensor::water;
//!
//! // IAPWS-95 at 0.101325 MPa: cp(25 °C) = 4.18131 kJ/(kg·K).
//! let cp = water::cp_j_per_kg_k(25.0)?;
//! assert!((cp - 4181.31).abs() < 0.001 * 4181.31);
//! let rho = water::density_kg_per_m3(20.0)?;
//! assert!((rho - 998.2).abs() < 0.1);
//! # Ok::<(), heatbound::sensor::water::WaterError>(())
//! ```

use core::fmt;

/// The temperature range of the fits, (low, high) in °C.
pub const WATER_RANGE_C: (f32, f32) = (5.0, 95.0);

/// cp in J/(kg·K) as Σ c_i x^i, x = t/100 °C (least-squares fit to IAPWS-95).
const CP_COEFFS: [f32; 7] = [
    4218.853, -326.26215, 1064.3527, -1877.8788, 2027.8617, -1187.5366, 296.49857,
];

/// ρ in kg/m³ as Σ c_i x^i, x = t/100 °C (least-squares fit to IAPWS-95).
const RHO_COEFFS: [f32; 6] = [
    999.88116, 5.7604737, -81.42313, 60.778404, -36.393955, 9.764934,
];

/// Why a water property could not be evaluated.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum WaterError {
    /// The water temperature is NaN or infinite.
    NonFinite,
    /// The water temperature is outside the 5 to 95 °C range of the fits.
    OutOfRange {
        /// The rejected temperature in °C.
        temperature_c: f32,
    },
}

impl fmt::Display for WaterError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::NonFinite => f.write_str("water temperature is not a finite number"),
            Self::OutOfRange { temperature_c } => {
                let (lo, hi) = WATER_RANGE_C;
                write!(
                    f,
                    "water temperature {temperature_c} °C is outside the {lo} to {hi} °C range of the cp and density fits"
                )
            }
        }
    }
}

impl core::error::Error for WaterError {}

fn eval(coeffs: &[f32], temperature_c: f32) -> Result<f32, WaterError> {
    if !temperature_c.is_finite() {
        return Err(WaterError::NonFinite);
    }
    let (lo, hi) = WATER_RANGE_C;
    if !(lo..=hi).contains(&temperature_c) {
        return Err(WaterError::OutOfRange { temperature_c });
    }
    let x = temperature_c / 100.0;
    Ok(coeffs.iter().rev().fold(0.0, |acc, &c| acc * x + c))
}

/// The isobaric specific heat capacity of liquid water, in J/(kg·K), at
/// `temperature_c` (°C) and atmospheric pressure.
///
/// ```
/// use heatbound::sensor::water;
/// // IAPWS-95 at 0.101325 MPa: cp(60 °C) = 4.18495 kJ/(kg·K).
/// assert!((water::cp_j_per_kg_k(60.0)? - 4184.95).abs() < 0.5);
/// assert!(water::cp_j_per_kg_k(100.0).is_err());
/// # Ok::<(), heatbound::sensor::water::WaterError>(())
/// ```
pub fn cp_j_per_kg_k(temperature_c: f32) -> Result<f32, WaterError> {
    eval(&CP_COEFFS, temperature_c)
}

/// The density of liquid water, in kg/m³, at `temperature_c` (°C) and
/// atmospheric pressure.
///
/// ```
/// use heatbound::sensor::water;
/// // IAPWS-95 at 0.101325 MPa: about 971.8 kg/m³ at 80 °C.
/// assert!((water::density_kg_per_m3(80.0)? - 971.8).abs() < 0.1);
/// assert!(water::density_kg_per_m3(f32::NAN).is_err());
/// # Ok::<(), heatbound::sensor::water::WaterError>(())
/// ```
pub fn density_kg_per_m3(temperature_c: f32) -> Result<f32, WaterError> {
    eval(&RHO_COEFFS, temperature_c)
}
