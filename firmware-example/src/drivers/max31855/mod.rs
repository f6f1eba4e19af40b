//! MAX31855 cold-junction-compensated K-type thermocouple converter on SPI:
//! the bus side.
//!
//! Where it sits: the first stage of the hot and cold temperature channels.
//!
//! ```text
//! SpiDevice --(4 bytes, read only)--> Max31855::read --> conversion --> °C --> App --> Sample
//! ```
//!
//! The chip is read-only: with CS low it clocks out a 32-bit frame on MISO
//! (first byte = bits 31..24). Each [`Max31855::read`] is one
//! [`SpiDevice::read`], a transaction in which the `SpiDevice`
//! implementation drives CS. The frame layout and every conversion are in
//! [`conversion`]; this module only moves bytes and wraps errors.

pub mod conversion;

use core::fmt;

use embedded_hal::spi::SpiDevice;
use heatbound::sensor::thermocouple::ThermocoupleError;

pub use conversion::{Max31855Fault, Max31855Reading};

use crate::drivers::TemperatureSource;

/// A MAX31855 read failed.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum Error<E> {
    /// The SPI transaction failed.
    Bus(E),
    /// The chip flagged a thermocouple fault (D16 with the cause bits).
    Fault(Max31855Fault),
    /// The reported temperatures are outside the ITS-90 type-K range, so
    /// cold-junction compensation is impossible.
    Conversion(ThermocoupleError),
}

impl<E: fmt::Debug> fmt::Display for Error<E> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Bus(e) => write!(f, "MAX31855 SPI error: {e:?}"),
            Error::Fault(fault) => write!(f, "MAX31855 {fault}"),
            Error::Conversion(e) => write!(f, "MAX31855 reading not convertible: {e}"),
        }
    }
}

impl<E: fmt::Debug> core::error::Error for Error<E> {}

/// A MAX31855 on its own SPI device (its own chip select).
///
/// ```
/// use embedded_hal_mock::eh1::spi::{Mock, Transaction};
/// use heatbound_firmware_example::drivers::max31855::Max31855;
///
/// // MAX31855 datasheet, Table 2/3: +25.00 °C thermocouple, +25.0000 °C internal.
/// let frame: u32 = (0b0000_0001_1001_00 << 18) | (0b0001_1001_0000 << 4);
/// let spi = Mock::new(&[
///     Transaction::transaction_start(),
///     Transaction::read_vec(frame.to_be_bytes().to_vec()),
///     Transaction::transaction_end(),
/// ]);
/// let mut tc = Max31855::new(spi);
/// let r = tc.read()?;
/// assert_eq!((r.thermocouple_c(), r.internal_c()), (25.0, 25.0));
/// tc.release().done();
/// # Ok::<(), heatbound_firmware_example::drivers::max31855::Error<embedded_hal::spi::ErrorKind>>(())
/// ```
#[derive(Debug)]
pub struct Max31855<SPI> {
    spi: SPI,
}

impl<SPI: SpiDevice> Max31855<SPI> {
    /// The converter on `spi`. Touches no bus: the chip needs no set-up.
    pub const fn new(spi: SPI) -> Self {
        Max31855 { spi }
    }

    /// Gives the SPI device back.
    pub fn release(self) -> SPI {
        self.spi
    }

    /// The raw 32-bit frame.
    pub fn read_raw(&mut self) -> Result<u32, Error<SPI::Error>> {
        let mut bytes = [0u8; 4];
        self.spi.read(&mut bytes).map_err(Error::Bus)?;
        Ok(u32::from_be_bytes(bytes))
    }

    /// One decoded reading; a set fault flag is [`Error::Fault`].
    pub fn read(&mut self) -> Result<Max31855Reading, Error<SPI::Error>> {
        conversion::decode_frame(self.read_raw()?).map_err(Error::Fault)
    }

    /// The hot-junction temperature, °C, with ITS-90 cold-junction
    /// compensation ([`conversion::linearized_hot_junction_c`]).
    pub fn read_hot_junction_c(&mut self) -> Result<f64, Error<SPI::Error>> {
        let r = self.read()?;
        conversion::linearized_hot_junction_c(&r).map_err(Error::Conversion)
    }
}

impl<SPI: SpiDevice> TemperatureSource for Max31855<SPI> {
    type Error = Error<SPI::Error>;

    fn read_c(&mut self) -> Result<f32, Self::Error> {
        self.read_hot_junction_c().map(|t| t as f32)
    }
}
