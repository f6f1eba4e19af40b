//! Power channels: DC electrical power, shaft power and calorimetric heat flow.
//!
//! Where it sits: drivers deliver volts and amperes, speed and torque, or a
//! coolant flow and two temperatures; these functions give the watts that go
//! into a `Sample` (`heat_in_w`, `work_w`, `heat_out_w`).
//!
//! All f32: they run on every sample on the single-precision FPU, and their
//! inputs are good to 1e-3 at best. A result too large for f32 is an error,
//! never infinity.
//!
//! ```
//! use heatbound::sensor::power;
//!
//! // Dynamometer: 1500 rpm at 2 N·m is 2π·1500·2/60 = 314.16 W.
//! let work_w = power::shaft_power_w(1500.0, 2.0)?;
//! assert!((work_w - 314.159).abs() < 0.01);
//! // Heater: 24 V at 10 A is 240 W.
//! assert_eq!(power::electrical_power_w(24.0, 10.0)?, 240.0);
//! # Ok::<(), heatbound::sensor::power::PowerError>(())
//! ```

use core::f32::consts::PI;
use core::fmt;

use super::water::{self, WaterError};

/// Why a power could not be computed.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum PowerError {
    /// An input is NaN or infinite.
    NonFinite {
        /// The input, named with its unit (e.g. `"voltage_v"`).
        input: &'static str,
    },
    /// The result does not fit in an f32.
    Overflow {
        /// The quantity computed, named with its unit (e.g. `"power_w"`).
        quantity: &'static str,
    },
    /// A water temperature is outside the range of the water property fits.
    Water(WaterError),
}

impl fmt::Display for PowerError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::NonFinite { input } => write!(f, "power input {input} is not a finite number"),
            Self::Overflow { quantity } => write!(f, "{quantity} is too large to represent"),
            Self::Water(err) => write!(f, "calorimetric heat flow: {err}"),
        }
    }
}

impl core::error::Error for PowerError {
    fn source(&self) -> Option<&(dyn core::error::Error + 'static)> {
        match self {
            Self::Water(err) => Some(err),
            _ => None,
        }
    }
}

impl From<WaterError> for PowerError {
    fn from(err: WaterError) -> Self {
        Self::Water(err)
    }
}

fn finite(value: f32, input: &'static str) -> Result<f32, PowerError> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(PowerError::NonFinite { input })
    }
}

fn result(value: f32, quantity: &'static str) -> Result<f32, PowerError> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(PowerError::Overflow { quantity })
    }
}

/// DC electrical power P = V·I in watts, from `voltage_v` (V) and
/// `current_a` (A). Signed: negative when the current flows backwards.
///
/// ```
/// use heatbound::sensor::power::electrical_power_w;
/// assert_eq!(electrical_power_w(12.5, 4.0)?, 50.0);
/// assert!(electrical_power_w(f32::NAN, 1.0).is_err());
/// # Ok::<(), heatbound::sensor::power::PowerError>(())
/// ```
pub fn electrical_power_w(voltage_v: f32, current_a: f32) -> Result<f32, PowerError> {
    let v = finite(voltage_v, "voltage_v")?;
    let i = finite(current_a, "current_a")?;
    result(v * i, "power_w")
}

/// Shaft power P = 2π·n·τ/60 in watts, from `speed_rpm` (rev/min) and
/// `torque_n_m` (N·m). Signed: negative when the shaft absorbs power.
///
/// ```
/// use heatbound::sensor::power::shaft_power_w;
/// // 3000 rpm at 0.5 N·m: 2π·3000·0.5/60 = 157.08 W.
/// assert!((shaft_power_w(3000.0, 0.5)? - 157.0796).abs() < 0.001);
/// # Ok::<(), heatbound::sensor::power::PowerError>(())
/// ```
pub fn shaft_power_w(speed_rpm: f32, torque_n_m: f32) -> Result<f32, PowerError> {
    let n = finite(speed_rpm, "speed_rpm")?;
    let tau = finite(torque_n_m, "torque_n_m")?;
    // Divide first so that n·τ near f32::MAX does not overflow on the way.
    result(2.0 * PI * (n / 60.0) * tau, "power_w")
}

/// Calorimetric heat flow ṁ·cp(T̄)·(T_out − T_in) in watts: the heat the
/// water picks up between inlet and outlet, with cp at the mean of the two
/// temperatures. `mass_flow_kg_s` in kg/s, temperatures in °C (5 to 95 °C).
///
/// Positive when the outlet is warmer (the coolant on the cold side of an
/// engine: `heat_out_w`); negative when the water gives up heat.
///
/// ```
/// use heatbound::sensor::power::heat_flow_w;
/// // 0.05 kg/s warming from 20 to 30 °C, cp(25 °C) = 4181.3 J/(kg·K)
/// // (IAPWS-95): 0.05 · 4181.3 · 10 = 2090.7 W.
/// let q_w = heat_flow_w(0.05, 20.0, 30.0)?;
/// assert!((q_w - 2090.7).abs() < 1.0);
/// # Ok::<(), heatbound::sensor::power::PowerError>(())
/// ```
pub fn heat_flow_w(mass_flow_kg_s: f32, inlet_c: f32, outlet_c: f32) -> Result<f32, PowerError> {
    let m = finite(mass_flow_kg_s, "mass_flow_kg_s")?;
    let t_in = finite(inlet_c, "inlet_c")?;
    let t_out = finite(outlet_c, "outlet_c")?;
    water::cp_j_per_kg_k(t_in)?;
    water::cp_j_per_kg_k(t_out)?;
    let cp = water::cp_j_per_kg_k(0.5 * (t_in + t_out))?;
    result(m * cp * (t_out - t_in), "heat_flow_w")
}

/// The mass flow in kg/s of water flowing at `volume_flow_m3_s` (m³/s)
/// through a meter at `meter_c` (°C): ρ(T_meter)·V̇.
///
/// ```
/// use heatbound::sensor::power::mass_flow_kg_s;
/// // 1e-4 m³/s at 20 °C, ρ = 998.21 kg/m³ (IAPWS-95): 0.099821 kg/s.
/// assert!((mass_flow_kg_s(1e-4, 20.0)? - 0.099821).abs() < 1e-5);
/// # Ok::<(), heatbound::sensor::power::PowerError>(())
/// ```
pub fn mass_flow_kg_s(volume_flow_m3_s: f32, meter_c: f32) -> Result<f32, PowerError> {
    let v = finite(volume_flow_m3_s, "volume_flow_m3_s")?;
    let t = finite(meter_c, "meter_c")?;
    result(water::density_kg_per_m3(t)? * v, "mass_flow_kg_s")
}

/// Calorimetric heat flow in watts from a volumetric flow meter:
/// [`heat_flow_w`] with ṁ = ρ(T_meter)·V̇. The density is taken where the
/// meter sits (`meter_c`, usually the inlet or the outlet), because that is
/// the water whose volume it counts.
///
/// ```
/// use heatbound::sensor::power::{heat_flow_volumetric_w, litres_per_minute_to_m3_s};
/// // 3 L/min metered at the 20 °C inlet, warming to 30 °C:
/// // ρ(20 °C) = 998.21 kg/m³, cp(25 °C) = 4181.3 J/(kg·K) (IAPWS-95),
/// // 5e-5 m³/s · 998.21 · 4181.3 · 10 = 2086.9 W.
/// let flow_m3_s = litres_per_minute_to_m3_s(3.0)?;
/// let q_w = heat_flow_volumetric_w(flow_m3_s, 20.0, 20.0, 30.0)?;
/// assert!((q_w - 2086.9).abs() < 1.0);
/// # Ok::<(), heatbound::sensor::power::PowerError>(())
/// ```
pub fn heat_flow_volumetric_w(
    volume_flow_m3_s: f32,
    meter_c: f32,
    inlet_c: f32,
    outlet_c: f32,
) -> Result<f32, PowerError> {
    let m = mass_flow_kg_s(volume_flow_m3_s, meter_c)?;
    heat_flow_w(m, inlet_c, outlet_c)
}

/// Converts a flow in litres per minute (as most bench flow meters show it)
/// to m³/s: 1 L/min = 1/60000 m³/s.
///
/// ```
/// use heatbound::sensor::power::litres_per_minute_to_m3_s;
/// assert!((litres_per_minute_to_m3_s(6.0)? - 1e-4).abs() < 1e-10);
/// # Ok::<(), heatbound::sensor::power::PowerError>(())
/// ```
pub fn litres_per_minute_to_m3_s(flow_l_per_min: f32) -> Result<f32, PowerError> {
    let q = finite(flow_l_per_min, "flow_l_per_min")?;
    Ok(q / 60_000.0)
}
