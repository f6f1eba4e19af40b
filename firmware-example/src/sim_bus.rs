//! The simulated rig behind the embedded-hal traits: software in the loop at
//! the bus level.
//!
//! Where it sits: in place of the board. The [`App`](crate::app::App) and its
//! drivers run unchanged; only the devices at the far end of the bus are
//! simulated, answering with the bytes real chips would send for what the
//! [rig](crate::rig) measures now.
//!
//! ```text
//! Rig::step / Rig::measured(t_ms) --> SimBench (RefCell, one per run)
//!     SimThermocouple (SpiDevice)  MAX31855 frames: hot junction, cold side
//!     SimI2c (I2c)                 two INA226 register files: heater 0x40, generator 0x41
//!     SimPulseCounter, SimCoolantTemperature   flow pulses, inlet/outlet °C
//! SimTripPin (OutputPin), SimUart (embedded_io::Write)  what the App drives
//! ```
//!
//! The thermocouple frames follow the chip: the reported thermocouple
//! temperature is `T_cj + (E(T_hot) − E(T_cj)) / 41.276 µV/°C` with the
//! ITS-90 type-K E(t), rounded to 0.25 °C; the internal temperature is the
//! rig's cold-junction reading rounded to 0.0625 °C; an open thermocouple
//! (the `open-thermocouple` scenario) sets OC. The INA226s answer register
//! reads from the rig's V and I with the configuration and calibration the
//! driver wrote (an uncalibrated chip reads 0 A, as a real one does). The
//! pulse counter accumulates `coolant_flow_hz` over rig time, keeping the
//! fraction of a pulse owed.
//!
//! Faults to inject: a bus error on chosen transfers of a device
//! ([`SimBench::inject_bus_errors`]), forced thermocouple fault bits
//! ([`SimBench::set_thermocouple_fault`]), and a repair knob
//! ([`SimBench::repair_at`]) that ends the scenario's fault at a given time.
//!
//! ```
//! use core::cell::RefCell;
//! use heatbound::config::RigConfig;
//! use heatbound::wire::{Decoder, Frame, RigId, MAX_FRAME_LEN};
//! use heatbound_firmware_example::app::{App, AppConfig};
//! use heatbound_firmware_example::rig::Scenario;
//! use heatbound_firmware_example::sim_bus::{sim_devices, SimBench};
//!
//! let bench = RefCell::new(SimBench::bench_stirling(Scenario::Steady, 1));
//! let config = AppConfig::bench(RigConfig::default(), RigId::new("sim").unwrap());
//! let mut app = App::<_, _, _, _, _, _, 64>::new(&config, sim_devices::<4096>(&bench))?;
//! bench.borrow_mut().advance_to(0);
//! app.start(0); // boot: Hello, INA226s programmed, flow gate opened
//! for i in 1..=20 {
//!     let t_ms = i * 100;
//!     bench.borrow_mut().advance_to(t_ms);
//!     app.tick(t_ms);
//! }
//! let mut decoder = Decoder::<MAX_FRAME_LEN>::new();
//! let mut kinds = Vec::new();
//! decoder.feed(app.uart().bytes(), |f| kinds.push(f.map(|f| f.kind())));
//! assert_eq!(kinds, [Ok(0), Ok(1), Ok(1)]); // Hello, then a Summary each second
//! assert!(!app.trip_output());
//! # Ok::<(), heatbound::monitor::MonitorError>(())
//! ```

use core::cell::RefCell;
use core::convert::Infallible;
use core::fmt;

use embedded_hal::digital::{self, OutputPin};
use embedded_hal::i2c::{self, I2c, NoAcknowledgeSource};
use embedded_hal::spi::{self, Operation, SpiDevice};

use crate::app::{BENCH_GENERATOR_ADDRESS, BENCH_HEATER_ADDRESS, BENCH_HEATER_DIVIDER, Devices};
use crate::drivers::TemperatureSource;
use crate::drivers::flow::{Calorimeter, PulseCounter};
use crate::drivers::ina226::conversion as ina;
use crate::drivers::max31855::conversion as tc;
use crate::drivers::max31855::conversion::Max31855Fault;
use crate::rig::{Measured, Rig, Scenario};

/// The bench rig's shunts, Ω (both channels).
pub const BENCH_SHUNT_OHM: f32 = 0.002;

/// Flow-meter gate of the simulated calorimeter, samples (1 s at 10 Hz).
pub const SIM_FLOW_GATE: usize = 10;

/// A simulated device that can be told to fail.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum SimDevice {
    /// The hot thermocouple's MAX31855.
    HotThermocouple,
    /// The cold-side thermocouple's MAX31855.
    ColdThermocouple,
    /// The heater's INA226.
    HeaterMonitor,
    /// The generator's INA226.
    GeneratorMonitor,
}

impl SimDevice {
    const fn index(self) -> usize {
        self as usize
    }
}

/// Why a simulated transfer failed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum SimBusError {
    /// An injected fault ([`SimBench::inject_bus_errors`]).
    Injected,
    /// No simulated device at the I2C address.
    NoDevice,
    /// The bench was borrowed elsewhere (a test holding a borrow across a
    /// tick).
    Busy,
}

impl fmt::Display for SimBusError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            SimBusError::Injected => "injected bus error",
            SimBusError::NoDevice => "no device at the address",
            SimBusError::Busy => "simulated bench busy",
        })
    }
}

impl core::error::Error for SimBusError {}

impl spi::Error for SimBusError {
    fn kind(&self) -> spi::ErrorKind {
        spi::ErrorKind::Other
    }
}

impl i2c::Error for SimBusError {
    fn kind(&self) -> i2c::ErrorKind {
        match self {
            SimBusError::NoDevice => i2c::ErrorKind::NoAcknowledge(NoAcknowledgeSource::Address),
            SimBusError::Injected => i2c::ErrorKind::Bus,
            SimBusError::Busy => i2c::ErrorKind::ArbitrationLoss,
        }
    }
}

/// Transfers `first..first + count` of a device fail.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
struct FailPlan {
    first: u32,
    count: u32,
}

impl FailPlan {
    fn fails(&self, transfer: u32) -> bool {
        transfer >= self.first && transfer - self.first < self.count
    }
}

/// One simulated INA226's register file and wiring.
#[derive(Clone, Copy, Debug, PartialEq)]
struct SimIna226 {
    address: u8,
    shunt_ohm: f32,
    divider: f32,
    pointer: u8,
    config: u16,
    calibration: u16,
    mask_enable: u16,
    alert_limit: u16,
}

impl SimIna226 {
    const fn new(address: u8, shunt_ohm: f32, divider: f32) -> Self {
        SimIna226 {
            address,
            shunt_ohm,
            divider,
            pointer: 0,
            config: ina::CONFIG_RESET,
            calibration: 0,
            mask_enable: 0,
            alert_limit: 0,
        }
    }

    fn write(&mut self, bytes: &[u8]) {
        let Some((&pointer, data)) = bytes.split_first() else {
            return;
        };
        self.pointer = pointer;
        if let [hi, lo, ..] = *data {
            let value = u16::from_be_bytes([hi, lo]);
            match pointer {
                0x00 if value & 0x8000 != 0 => {
                    *self = SimIna226::new(self.address, self.shunt_ohm, self.divider)
                }
                0x00 => self.config = value,
                0x05 => self.calibration = value & ina::CAL_MAX,
                0x06 => self.mask_enable = value,
                0x07 => self.alert_limit = value,
                _ => {}
            }
        }
    }

    fn register(&self, voltage_v: f32, current_a: f32) -> u16 {
        let shunt = ina::shunt_register(current_a * self.shunt_ohm);
        let bus = ina::bus_register(voltage_v / self.divider);
        let current = ina::current_register(shunt, self.calibration);
        match self.pointer {
            0x00 => self.config,
            0x01 => shunt,
            0x02 => bus,
            0x03 => ina::power_register(current, bus),
            0x04 => current,
            0x05 => self.calibration,
            0x06 => self.mask_enable,
            0x07 => self.alert_limit,
            0xFE => ina::MANUFACTURER_ID,
            0xFF => ina::DIE_ID,
            _ => 0,
        }
    }
}

/// The simulated bench: the rig, what it measures now, the simulated chips'
/// state and the injected faults. Share it between the simulated devices in
/// a [`RefCell`] ([`sim_devices`]).
#[derive(Clone, Debug)]
pub struct SimBench {
    rig: Rig,
    measured: Measured,
    t_ms: Option<u32>,
    repair_at_ms: Option<u32>,
    repaired: bool,
    tc_fault: [Option<Max31855Fault>; 2],
    fail: [FailPlan; 4],
    transfers: [u32; 4],
    ina: [SimIna226; 2],
    pulses_owed: f64,
}

impl SimBench {
    /// A bench around `rig`, wired like the bench rig: INA226s at 0x40
    /// (heater, 2:1 divider) and 0x41 (generator), 2 mΩ shunts.
    pub fn new(rig: Rig) -> Self {
        let measured = rig.measured(0);
        SimBench {
            rig,
            measured,
            t_ms: None,
            repair_at_ms: None,
            repaired: false,
            tc_fault: [None; 2],
            fail: [FailPlan::default(); 4],
            transfers: [0; 4],
            ina: [
                SimIna226::new(BENCH_HEATER_ADDRESS, BENCH_SHUNT_OHM, BENCH_HEATER_DIVIDER),
                SimIna226::new(BENCH_GENERATOR_ADDRESS, BENCH_SHUNT_OHM, 1.0),
            ],
            pulses_owed: 0.0,
        }
    }

    /// [`SimBench::new`] with [`Rig::bench_stirling`].
    pub fn bench_stirling(scenario: Scenario, seed: u64) -> Self {
        SimBench::new(Rig::bench_stirling(scenario, seed))
    }

    /// Moves the bench to sample time `t_ms`: steps the rig by the time
    /// since the previous call (the first call only takes the reading),
    /// counts the flow pulses of that interval, applies a due repair, and
    /// latches the rig's [`Rig::measured`] at `t_ms` for the devices to
    /// answer with. Time going backwards only re-reads.
    pub fn advance_to(&mut self, t_ms: u32) {
        if let Some(prev) = self.t_ms {
            let dt_ms = t_ms.saturating_sub(prev);
            if dt_ms > 0 {
                let dt_s = dt_ms as f32 / 1000.0;
                self.pulses_owed += f64::from(self.measured.coolant_flow_hz) * f64::from(dt_s);
                self.rig.step(dt_s);
            }
        }
        self.t_ms = Some(t_ms);
        if !self.repaired && self.repair_at_ms.is_some_and(|r| t_ms >= r) {
            self.repaired = true;
            self.rig.repair();
        }
        self.measured = self.rig.measured(t_ms);
    }

    /// From sample time `t_ms` on, the rig runs `steady` instead of its
    /// scenario: the drifting thermocouple is replaced, the open one
    /// reconnected, the meter's scale corrected.
    pub fn repair_at(&mut self, t_ms: u32) {
        self.repair_at_ms = Some(t_ms);
    }

    /// Makes transfers `first..first + count` of `device` fail with a bus
    /// error (transfers counted from 0 for each device: one per SPI read,
    /// one per I2C register access).
    pub fn inject_bus_errors(&mut self, device: SimDevice, first: u32, count: u32) {
        if let Some(plan) = self.fail.get_mut(device.index()) {
            *plan = FailPlan { first, count };
        }
    }

    /// Forces a thermocouple converter's fault bits (`None` = back to what
    /// the rig measures). Only the thermocouple devices have fault bits.
    pub fn set_thermocouple_fault(&mut self, device: SimDevice, fault: Option<Max31855Fault>) {
        let slot = match device {
            SimDevice::HotThermocouple => self.tc_fault.get_mut(0),
            SimDevice::ColdThermocouple => self.tc_fault.get_mut(1),
            _ => None,
        };
        if let Some(slot) = slot {
            *slot = fault;
        }
    }

    /// Transfers `device` has seen so far.
    pub fn transfers(&self, device: SimDevice) -> u32 {
        self.transfers.get(device.index()).copied().unwrap_or(0)
    }

    /// The rig.
    pub fn rig(&self) -> &Rig {
        &self.rig
    }

    /// What the rig measures at the latest [`SimBench::advance_to`].
    pub fn measured(&self) -> &Measured {
        &self.measured
    }

    /// The calibration word the driver programmed into an INA226 (0 until
    /// it does).
    pub fn ina226_calibration(&self, device: SimDevice) -> Option<u16> {
        match device {
            SimDevice::HeaterMonitor => self.ina.first().map(|c| c.calibration),
            SimDevice::GeneratorMonitor => self.ina.get(1).map(|c| c.calibration),
            _ => None,
        }
    }

    /// Counts a transfer of `device`; whether it fails.
    fn transfer(&mut self, device: SimDevice) -> Result<(), SimBusError> {
        let i = device.index();
        let n = self.transfers.get(i).copied().unwrap_or(0);
        if let Some(slot) = self.transfers.get_mut(i) {
            *slot = n.wrapping_add(1);
        }
        match self.fail.get(i) {
            Some(plan) if plan.fails(n) => Err(SimBusError::Injected),
            _ => Ok(()),
        }
    }

    /// The MAX31855 frame for a junction at `hot_c` (None = open).
    fn thermocouple_frame(&self, hot_c: Option<f32>, forced: Option<Max31855Fault>) -> u32 {
        let cj_c = f64::from(self.measured.cold_junction_c);
        let cj = tc::internal_count(cj_c);
        let fault = match (forced, hot_c) {
            (Some(f), _) => Some(f),
            (None, None) => Some(Max31855Fault::OPEN),
            (None, Some(_)) => None,
        };
        let count = match (fault, hot_c) {
            (None, Some(hot_c)) => {
                let hot_c = f64::from(hot_c);
                match tc::chip_thermocouple_c(hot_c, cj_c) {
                    Ok(t) => tc::thermocouple_count(t),
                    // Beyond the ITS-90 range: the chip saturates.
                    Err(_) if hot_c > cj_c => i16::MAX,
                    Err(_) => i16::MIN,
                }
            }
            // Under a fault the temperature field means nothing; send 0.
            _ => 0,
        };
        tc::encode_frame(count.clamp(-(1 << 13), (1 << 13) - 1), cj, fault)
    }

    fn spi_frame(&mut self, device: SimDevice) -> Result<u32, SimBusError> {
        self.transfer(device)?;
        Ok(match device {
            SimDevice::HotThermocouple => {
                self.thermocouple_frame(self.measured.hot_junction_c, self.tc_fault[0])
            }
            _ => self.thermocouple_frame(Some(self.measured.cold_side_c), self.tc_fault[1]),
        })
    }

    fn i2c_transaction(
        &mut self,
        address: u8,
        operations: &mut [i2c::Operation<'_>],
    ) -> Result<(), SimBusError> {
        let (slot, device) = match address {
            BENCH_HEATER_ADDRESS => (0, SimDevice::HeaterMonitor),
            BENCH_GENERATOR_ADDRESS => (1, SimDevice::GeneratorMonitor),
            _ => return Err(SimBusError::NoDevice),
        };
        self.transfer(device)?;
        let m = self.measured;
        let (v, a) = if slot == 0 {
            (m.heater_v, m.heater_a)
        } else {
            (m.generator_v, m.generator_a)
        };
        let Some(chip) = self.ina.get_mut(slot) else {
            return Err(SimBusError::NoDevice);
        };
        for op in operations {
            match op {
                i2c::Operation::Write(bytes) => chip.write(bytes),
                i2c::Operation::Read(buf) => {
                    let word = chip.register(v, a).to_be_bytes();
                    for (dst, src) in buf.iter_mut().zip(word.iter().cycle()) {
                        *dst = *src;
                    }
                }
            }
        }
        Ok(())
    }
}

/// A MAX31855 on the simulated bench: the hot junction or the cold side.
#[derive(Clone, Copy, Debug)]
pub struct SimThermocouple<'a> {
    bench: &'a RefCell<SimBench>,
    device: SimDevice,
}

impl<'a> SimThermocouple<'a> {
    /// The hot thermocouple's converter.
    pub const fn hot(bench: &'a RefCell<SimBench>) -> Self {
        SimThermocouple {
            bench,
            device: SimDevice::HotThermocouple,
        }
    }

    /// The cold-side thermocouple's converter.
    pub const fn cold(bench: &'a RefCell<SimBench>) -> Self {
        SimThermocouple {
            bench,
            device: SimDevice::ColdThermocouple,
        }
    }
}

impl spi::ErrorType for SimThermocouple<'_> {
    type Error = SimBusError;
}

impl SpiDevice for SimThermocouple<'_> {
    fn transaction(&mut self, operations: &mut [Operation<'_, u8>]) -> Result<(), Self::Error> {
        let frame = {
            let mut bench = self.bench.try_borrow_mut().map_err(|_| SimBusError::Busy)?;
            bench.spi_frame(self.device)?
        };
        // MISO shifts the frame out MSB first over however the reads are
        // split; past 32 bits the line reads 0.
        let bytes = frame.to_be_bytes();
        let mut next = bytes.iter().copied().chain(core::iter::repeat(0));
        for op in operations {
            match op {
                Operation::Read(buf) | Operation::TransferInPlace(buf) => {
                    buf.iter_mut().for_each(|b| *b = next.next().unwrap_or(0));
                }
                Operation::Transfer(read, _) => {
                    read.iter_mut().for_each(|b| *b = next.next().unwrap_or(0));
                }
                Operation::Write(_) | Operation::DelayNs(_) => {}
            }
        }
        Ok(())
    }
}

/// The simulated I2C bus with the two INA226s.
#[derive(Clone, Copy, Debug)]
pub struct SimI2c<'a> {
    bench: &'a RefCell<SimBench>,
}

impl<'a> SimI2c<'a> {
    /// The bus of `bench`.
    pub const fn new(bench: &'a RefCell<SimBench>) -> Self {
        SimI2c { bench }
    }
}

impl i2c::ErrorType for SimI2c<'_> {
    type Error = SimBusError;
}

impl I2c for SimI2c<'_> {
    fn transaction(
        &mut self,
        address: u8,
        operations: &mut [i2c::Operation<'_>],
    ) -> Result<(), Self::Error> {
        let mut bench = self.bench.try_borrow_mut().map_err(|_| SimBusError::Busy)?;
        bench.i2c_transaction(address, operations)
    }
}

/// The coolant flow meter's pulse counter.
#[derive(Clone, Copy, Debug)]
pub struct SimPulseCounter<'a> {
    bench: &'a RefCell<SimBench>,
}

impl<'a> SimPulseCounter<'a> {
    /// The counter of `bench`.
    pub const fn new(bench: &'a RefCell<SimBench>) -> Self {
        SimPulseCounter { bench }
    }
}

impl PulseCounter for SimPulseCounter<'_> {
    fn take(&mut self) -> u32 {
        let Ok(mut bench) = self.bench.try_borrow_mut() else {
            return 0;
        };
        // Whole pulses only from one on (a negative or NaN debt gives
        // none); `as` truncates, which is the floor of a positive number.
        let owed = bench.pulses_owed;
        let whole = if owed >= 1.0 { owed as u32 } else { 0 };
        bench.pulses_owed -= f64::from(whole);
        whole
    }
}

/// A coolant temperature sensor (an RTD on a converter whose bus is not
/// modelled): the rig's inlet or outlet reading.
#[derive(Clone, Copy, Debug)]
pub struct SimCoolantTemperature<'a> {
    bench: &'a RefCell<SimBench>,
    outlet: bool,
}

impl<'a> SimCoolantTemperature<'a> {
    /// The inlet sensor.
    pub const fn inlet(bench: &'a RefCell<SimBench>) -> Self {
        SimCoolantTemperature {
            bench,
            outlet: false,
        }
    }

    /// The outlet sensor.
    pub const fn outlet(bench: &'a RefCell<SimBench>) -> Self {
        SimCoolantTemperature {
            bench,
            outlet: true,
        }
    }
}

impl TemperatureSource for SimCoolantTemperature<'_> {
    type Error = SimBusError;

    fn read_c(&mut self) -> Result<f32, Self::Error> {
        let bench = self.bench.try_borrow().map_err(|_| SimBusError::Busy)?;
        let m = bench.measured();
        Ok(if self.outlet {
            m.coolant_outlet_c
        } else {
            m.coolant_inlet_c
        })
    }
}

/// The trip relay output: remembers its level and counts transitions.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct SimTripPin {
    high: bool,
    rises: u32,
    falls: u32,
}

impl SimTripPin {
    /// A pin driven low.
    pub const fn new() -> Self {
        SimTripPin {
            high: false,
            rises: 0,
            falls: 0,
        }
    }

    /// Whether the pin is high (trip).
    pub const fn is_high(&self) -> bool {
        self.high
    }

    /// Low-to-high transitions so far.
    pub const fn rises(&self) -> u32 {
        self.rises
    }

    /// High-to-low transitions so far.
    pub const fn falls(&self) -> u32 {
        self.falls
    }
}

impl digital::ErrorType for SimTripPin {
    type Error = Infallible;
}

impl OutputPin for SimTripPin {
    fn set_low(&mut self) -> Result<(), Self::Error> {
        if self.high {
            self.falls += 1;
        }
        self.high = false;
        Ok(())
    }

    fn set_high(&mut self) -> Result<(), Self::Error> {
        if !self.high {
            self.rises += 1;
        }
        self.high = true;
        Ok(())
    }
}

/// A UART that collects up to `N` bytes; a write with no room left fails
/// (the App counts it). Drain it with [`SimUart::clear`] after reading
/// [`SimUart::bytes`].
#[derive(Clone, Debug)]
pub struct SimUart<const N: usize> {
    buf: [u8; N],
    len: usize,
}

impl<const N: usize> Default for SimUart<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> SimUart<N> {
    /// An empty UART.
    pub const fn new() -> Self {
        SimUart {
            buf: [0; N],
            len: 0,
        }
    }

    /// The bytes written since the last [`SimUart::clear`].
    pub fn bytes(&self) -> &[u8] {
        self.buf.get(..self.len).unwrap_or(&[])
    }

    /// Forgets the bytes.
    pub fn clear(&mut self) {
        self.len = 0;
    }
}

/// The simulated UART is full.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SimUartFull;

impl fmt::Display for SimUartFull {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("simulated UART buffer full")
    }
}

impl core::error::Error for SimUartFull {}

impl embedded_io::Error for SimUartFull {
    fn kind(&self) -> embedded_io::ErrorKind {
        embedded_io::ErrorKind::OutOfMemory
    }
}

impl<const N: usize> embedded_io::ErrorType for SimUart<N> {
    type Error = SimUartFull;
}

impl<const N: usize> embedded_io::Write for SimUart<N> {
    fn write(&mut self, bytes: &[u8]) -> Result<usize, Self::Error> {
        if bytes.is_empty() {
            return Ok(0);
        }
        let room = self.buf.get_mut(self.len..).unwrap_or(&mut []);
        let n = room.len().min(bytes.len());
        if n == 0 {
            return Err(SimUartFull);
        }
        if let (Some(dst), Some(src)) = (room.get_mut(..n), bytes.get(..n)) {
            dst.copy_from_slice(src);
        }
        self.len += n;
        Ok(n)
    }

    fn flush(&mut self) -> Result<(), Self::Error> {
        Ok(())
    }
}

/// The simulated calorimeter: flow pulses plus inlet and outlet sensors.
pub type SimCalorimeter<'a> = Calorimeter<
    SimPulseCounter<'a>,
    SimCoolantTemperature<'a>,
    SimCoolantTemperature<'a>,
    SIM_FLOW_GATE,
>;

/// The devices of a simulated bench, for [`App::new`](crate::app::App::new).
pub type SimDevices<'a, const U: usize> = Devices<
    SimThermocouple<'a>,
    SimThermocouple<'a>,
    SimI2c<'a>,
    SimTripPin,
    SimUart<U>,
    SimCalorimeter<'a>,
>;

/// An [`App`](crate::app::App) on the simulated bench, with a `U`-byte UART
/// and an `N`-sample window.
pub type SimApp<'a, const U: usize, const N: usize> = crate::app::App<
    SimThermocouple<'a>,
    SimThermocouple<'a>,
    SimI2c<'a>,
    SimTripPin,
    SimUart<U>,
    SimCalorimeter<'a>,
    N,
>;

/// Every device of `bench`, with a `U`-byte UART.
pub fn sim_devices<const U: usize>(bench: &RefCell<SimBench>) -> SimDevices<'_, U> {
    let k_factor = bench
        .try_borrow()
        .map(|b| b.rig().params().flow_pulses_per_l)
        .unwrap_or(f32::NAN);
    Devices {
        hot_spi: SimThermocouple::hot(bench),
        cold_spi: SimThermocouple::cold(bench),
        i2c: SimI2c::new(bench),
        trip: SimTripPin::new(),
        uart: SimUart::new(),
        heat_out: Calorimeter::new(
            SimPulseCounter::new(bench),
            k_factor,
            SimCoolantTemperature::inlet(bench),
            SimCoolantTemperature::outlet(bench),
        ),
    }
}
