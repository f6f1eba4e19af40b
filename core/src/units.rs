//! Physical constants, exact by the SI. A leaf module: it imports nothing
//! from the crate, so every other module may use it.

/// The molar gas constant R in J/(mol·K): N_A·k with both defining constants
/// exact in the 2019 SI (CODATA 2018, unchanged in 2022).
pub const MOLAR_GAS_CONSTANT: f64 = 8.314_462_618_153_24;

/// The offset between the Celsius and kelvin scales, exact by the SI
/// definition of the degree Celsius.
pub const ZERO_CELSIUS_K: f64 = 273.15;
