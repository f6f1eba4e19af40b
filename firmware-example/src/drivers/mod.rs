//! Device drivers over embedded-hal 1.0: the first stage of the data flow.
//!
//! ```text
//! SPI  --> max31855 (hot and cold thermocouples) --+
//! I2C  --> ina226   (heater in, generator out)   --+--> App --> Sample --> Monitor
//! pulses + 2 temperatures --> flow (calorimetry) --+
//! ```
//!
//! Each driver is two layers (STYLE §1–2): a `conversion` module of pure
//! functions from register bits to volts, amperes and °C, tested against the
//! datasheet's examples, and the bus side, which moves bytes and wraps the
//! bus error in the driver's `Error<E>`. Nothing here panics on what a bus
//! returns, reads a clock or allocates.

pub mod flow;
pub mod ina226;
pub mod max31855;

/// Anything that reports one temperature in °C: a thermocouple converter,
/// an RTD converter, or a simulated sensor. The calorimeter's coolant inlet
/// and outlet readings come through this.
///
/// ```
/// use heatbound_firmware_example::drivers::TemperatureSource;
///
/// struct Fixed(f32);
/// impl TemperatureSource for Fixed {
///     type Error = core::convert::Infallible;
///     fn read_c(&mut self) -> Result<f32, Self::Error> {
///         Ok(self.0)
///     }
/// }
/// assert_eq!(Fixed(18.0).read_c(), Ok(18.0));
/// ```
pub trait TemperatureSource {
    /// Why a reading failed.
    type Error: core::fmt::Debug;

    /// One reading, °C.
    fn read_c(&mut self) -> Result<f32, Self::Error>;
}
