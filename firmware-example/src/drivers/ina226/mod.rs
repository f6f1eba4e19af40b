//! INA226 current, voltage and power monitor on I2C: the bus side.
//!
//! Where it sits: the first stage of the two electrical channels, heater
//! power in (`heat_in_w`) and generator power out (`work_w`).
//!
//! ```text
//! I2c --(pointer write, 2-byte big-endian read)--> Ina226::read --> conversion
//!     --> volts, amperes --> heatbound::sensor::power::electrical_power_w --> Sample
//! ```
//!
//! [`Ina226`] holds the address, configuration and calibration but not the
//! bus: every call takes `&mut I2C`. Two chips at different addresses
//! (A0/A1 strapping, 0x40–0x4F) thus share one bus without a bus-sharing
//! crate; the [`App`](crate::app::App) owns the one `I2c` and passes it to
//! both.
//!
//! The INA226 measures at most 36 V on VBUS. A channel above that (the
//! 48 V-class heater) reads its voltage through a precision resistive
//! divider, entered as [`Ina226::with_bus_divider`]; the driver multiplies
//! the pin voltage by the ratio.

pub mod conversion;

use core::fmt;

use embedded_hal::i2c::{I2c, SevenBitAddress};

pub use conversion::{Calibration, Config, Register};

/// An INA226 transfer or check failed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum Error<E> {
    /// The I2C transaction failed.
    Bus(E),
    /// The chip at the address is not an INA226 (manufacturer and die id
    /// registers read back these values).
    WrongDevice {
        /// Register 0xFE.
        manufacturer_id: u16,
        /// Register 0xFF.
        die_id: u16,
    },
}

impl<E: fmt::Debug> fmt::Display for Error<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Bus(e) => write!(f, "INA226 I2C error: {e:?}"),
            Error::WrongDevice {
                manufacturer_id,
                die_id,
            } => write!(
                f,
                "not an INA226: manufacturer id {manufacturer_id:#06x}, die id {die_id:#06x}"
            ),
        }
    }
}

impl<E: fmt::Debug> core::error::Error for Error<E> {}

/// One electrical reading.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Ina226Reading {
    /// Measured voltage (bus voltage times the divider ratio), V.
    pub voltage_v: f32,
    /// Current through the shunt, A.
    pub current_a: f32,
}

/// One INA226: address, configuration and calibration. The bus is passed
/// to each call.
///
/// ```
/// use embedded_hal_mock::eh1::i2c::{Mock, Transaction as T};
/// use heatbound_firmware_example::drivers::ina226::{Calibration, Config, Ina226};
///
/// let cal = Calibration::for_current_lsb(0.001, 0.002)?;
/// let ina = Ina226::new(0x40, Config::default(), cal);
/// let mut i2c = Mock::new(&[
///     T::write_read(0x40, vec![0xFE], vec![0x54, 0x49]),
///     T::write_read(0x40, vec![0xFF], vec![0x22, 0x60]),
///     T::write(0x40, vec![0x00, 0x41, 0x27]),
///     T::write(0x40, vec![0x05, 0x0A, 0x00]), // CAL 2560
///     T::write_read(0x40, vec![0x02], vec![0x25, 0x80]), // 12 V
///     T::write_read(0x40, vec![0x04], vec![0x27, 0x10]), // 10 A
/// ]);
/// ina.init(&mut i2c).unwrap();
/// let r = ina.read(&mut i2c).unwrap();
/// assert_eq!((r.voltage_v, r.current_a), (12.0, 10.0));
/// i2c.done();
/// # Ok::<(), heatbound_firmware_example::drivers::ina226::conversion::CalibrationError>(())
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Ina226 {
    address: SevenBitAddress,
    config: Config,
    calibration: Calibration,
    bus_divider: f32,
}

impl Ina226 {
    /// A chip at 7-bit `address` to be programmed with `config` and
    /// `calibration`. Touches no bus.
    pub const fn new(address: SevenBitAddress, config: Config, calibration: Calibration) -> Self {
        Ina226 {
            address,
            config,
            calibration,
            bus_divider: 1.0,
        }
    }

    /// The same chip reading its voltage through a divider of `ratio`
    /// (measured voltage / VBUS pin voltage, ≥ 1). A ratio that is not a
    /// finite number ≥ 1 is ignored.
    pub fn with_bus_divider(mut self, ratio: f32) -> Self {
        if ratio.is_finite() && ratio >= 1.0 {
            self.bus_divider = ratio;
        }
        self
    }

    /// The 7-bit address.
    pub const fn address(&self) -> SevenBitAddress {
        self.address
    }

    /// The calibration.
    pub const fn calibration(&self) -> &Calibration {
        &self.calibration
    }

    /// The divider ratio.
    pub const fn bus_divider(&self) -> f32 {
        self.bus_divider
    }

    /// Checks the id registers, then writes the configuration and the
    /// calibration. Until this succeeds the chip's current and power
    /// registers read 0, so a caller retries it after a failure.
    pub fn init<I: I2c>(&self, i2c: &mut I) -> Result<(), Error<I::Error>> {
        let manufacturer_id = self.read_register(i2c, Register::ManufacturerId)?;
        let die_id = self.read_register(i2c, Register::DieId)?;
        if manufacturer_id != conversion::MANUFACTURER_ID || die_id != conversion::DIE_ID {
            return Err(Error::WrongDevice {
                manufacturer_id,
                die_id,
            });
        }
        self.write_register(i2c, Register::Configuration, self.config.bits())?;
        self.write_register(i2c, Register::Calibration, self.calibration.cal())
    }

    /// One register word: pointer write then a 2-byte big-endian read, in
    /// one `write_read` (repeated start).
    pub fn read_register<I: I2c>(
        &self,
        i2c: &mut I,
        reg: Register,
    ) -> Result<u16, Error<I::Error>> {
        let mut word = [0u8; 2];
        i2c.write_read(self.address, &[reg.addr()], &mut word)
            .map_err(Error::Bus)?;
        Ok(u16::from_be_bytes(word))
    }

    /// Writes a register word: pointer byte then the word big-endian.
    pub fn write_register<I: I2c>(
        &self,
        i2c: &mut I,
        reg: Register,
        value: u16,
    ) -> Result<(), Error<I::Error>> {
        let [hi, lo] = value.to_be_bytes();
        i2c.write(self.address, &[reg.addr(), hi, lo])
            .map_err(Error::Bus)
    }

    /// Measured voltage, V (bus register times the divider ratio).
    pub fn read_voltage_v<I: I2c>(&self, i2c: &mut I) -> Result<f32, Error<I::Error>> {
        let raw = self.read_register(i2c, Register::BusVoltage)?;
        Ok(conversion::bus_voltage_v(raw) * self.bus_divider)
    }

    /// Current, A, from the current register.
    pub fn read_current_a<I: I2c>(&self, i2c: &mut I) -> Result<f32, Error<I::Error>> {
        let raw = self.read_register(i2c, Register::Current)?;
        Ok(conversion::current_a(raw, &self.calibration))
    }

    /// Shunt voltage, V.
    pub fn read_shunt_voltage_v<I: I2c>(&self, i2c: &mut I) -> Result<f32, Error<I::Error>> {
        let raw = self.read_register(i2c, Register::ShuntVoltage)?;
        Ok(conversion::shunt_voltage_v(raw))
    }

    /// The chip's own power figure, W (at the VBUS pin: without the
    /// divider ratio).
    pub fn read_power_w<I: I2c>(&self, i2c: &mut I) -> Result<f32, Error<I::Error>> {
        let raw = self.read_register(i2c, Register::Power)?;
        Ok(conversion::power_w(raw, &self.calibration))
    }

    /// Voltage then current: what the application multiplies into watts.
    pub fn read<I: I2c>(&self, i2c: &mut I) -> Result<Ina226Reading, Error<I::Error>> {
        Ok(Ina226Reading {
            voltage_v: self.read_voltage_v(i2c)?,
            current_a: self.read_current_a(i2c)?,
        })
    }
}
