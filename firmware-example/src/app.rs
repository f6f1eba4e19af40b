//! The controller application: one [`App::tick`] per sample, from bus reads
//! to UART bytes, generic over the embedded-hal traits.
//!
//! Where it sits: everything between the drivers and the UART.
//!
//! ```text
//! tick(t_ms):
//!   Max31855 (hot, cold) --SPI--+
//!   Ina226 (heater, generator) --I2C--+--> Sample --> Monitor::push --> AlarmSet::update
//!   HeatOut (flow + inlet/outlet) ---+                                   |
//!        trip pin <-- trip_active() <--------------------------------------+
//!        UART <-- Event frames now; a Summary every summary period; Hello at start
//! ```
//!
//! The same `App` runs on a board (HAL SPI/I2C/GPIO/UART, a SysTick
//! millisecond counter as `t_ms`), in the emulator and on a PC against the
//! [simulated rig](crate::sim_bus). It reads no clock: the caller passes the
//! sample time to every call (STYLE §3), so a `main` on Cortex-M is
//!
//! ```text
//! let mut app = App::<_, _, _, _, _, _, 64>::new(&config, devices)?;
//! app.start(systick_ms());
//! loop { wait_for_next_sample(); app.tick(systick_ms()); if button() { app.acknowledge_all(systick_ms()); } }
//! ```
//!
//! Nothing from a bus can panic it: a failed SPI or I2C transfer, a
//! converter's fault bits or an unconvertible reading is counted in
//! [`AppStats`] and the channel reads NaN, which the monitor counts as an
//! invalid sample and the `sensor_fault` rule raises after its delay. UART
//! write errors are counted and the frame is dropped.
//!
//! The App holds no heap, so it can live in a `static`. Its size is
//! dominated by `Monitor<N>`: with `N = 64` on the simulated devices (UART
//! buffer excluded) it is 3,760 bytes on a 32-bit Cortex-M target, of which
//! the monitor is 3,200 and the drivers, alarms, Hello and counters the rest
//! (3,832 and 3,224 bytes on x86-64; `tests/app_sim.rs` checks the budget).

use embedded_hal::digital::OutputPin;
use embedded_hal::i2c::I2c;
use embedded_hal::spi::SpiDevice;
use heatbound::ZERO_CELSIUS_K;
use heatbound::alarm::AlarmSet;
use heatbound::config::RigConfig;
use heatbound::control::{Controller, ControllerSettings};
use heatbound::monitor::{Monitor, MonitorError, Pushed, Sample};
use heatbound::sensor::power;
use heatbound::wire::{self, CommandKey, Frame, RigId};

use crate::drivers::flow::HeatOut;
use crate::drivers::ina226::{self, Calibration, Config, Ina226};
use crate::drivers::max31855::{self, Max31855};

/// Firmware version sent in the Hello (the crate version).
pub const FIRMWARE_VERSION: (u8, u8, u8) = (0, 1, 0);

/// Heater channel calibration on the bench rig: 0.5 mA LSB (16.4 A full
/// scale) through a 2 mΩ shunt, CAL 5120.
pub const BENCH_HEATER_CALIBRATION: Calibration = match Calibration::for_current_lsb(0.000_5, 0.002)
{
    Ok(c) => c,
    Err(_) => panic!("bench heater calibration out of range"),
};

/// Generator channel calibration on the bench rig: 0.5 mA LSB through
/// 2 mΩ, like the heater (the generator's 3.6 A nominal, and 14 A with the
/// scale-error scenario's 4×, both fit).
pub const BENCH_GENERATOR_CALIBRATION: Calibration = BENCH_HEATER_CALIBRATION;

/// The heater INA226's address (A1 = A0 = GND).
pub const BENCH_HEATER_ADDRESS: u8 = 0x40;

/// The generator INA226's address (A0 = VS).
pub const BENCH_GENERATOR_ADDRESS: u8 = 0x41;

/// The heater's voltage divider: 2:1 brings the 48 V-class heater within
/// the INA226's 36 V VBUS rating.
pub const BENCH_HEATER_DIVIDER: f32 = 2.0;

/// What the application needs to know besides its devices.
#[derive(Clone, Debug, PartialEq)]
pub struct AppConfig {
    /// The monitor and alarm configuration.
    pub rig: RigConfig,
    /// The rig's identifier, sent in the Hello.
    pub rig_id: RigId,
    /// Nominal sample period, ms (sent in the Hello; the caller keeps it).
    pub sample_period_ms: u32,
    /// Summary period in sample time, ms (default 1000).
    pub summary_period_ms: u32,
    /// Hello repetition period in sample time, ms; 0 = only at start.
    pub hello_period_ms: u32,
    /// The heater-power INA226.
    pub heater: Ina226,
    /// The generator-power INA226.
    pub generator: Ina226,
    /// The rig's command key; `None`: the controller accepts no command
    /// but a Hello request (a real board never falls back to the demo key).
    pub key: Option<CommandKey>,
    /// This boot's session number, from a random source where the board
    /// has one (see [`Hello::session`](heatbound::wire::Hello::session)).
    pub session: u32,
}

impl AppConfig {
    /// The bench rig's configuration: 10 Hz samples, 1 s summaries, a Hello
    /// every minute, the INA226s at 0x40 (heater, with its 2:1 divider) and
    /// 0x41 (generator), default averaging and conversion times; no command
    /// key and session 0 until the board sets them.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// use heatbound::wire::RigId;
    /// use heatbound_firmware_example::app::AppConfig;
    /// let c = AppConfig::bench(RigConfig::default(), RigId::new("stirling-1").unwrap());
    /// assert_eq!((c.sample_period_ms, c.summary_period_ms), (100, 1000));
    /// assert_eq!(c.heater.calibration().cal(), 5120);
    /// ```
    pub fn bench(rig: RigConfig, rig_id: RigId) -> Self {
        AppConfig {
            rig,
            rig_id,
            sample_period_ms: 100,
            summary_period_ms: 1000,
            hello_period_ms: 60_000,
            heater: Ina226::new(
                BENCH_HEATER_ADDRESS,
                Config::default(),
                BENCH_HEATER_CALIBRATION,
            )
            .with_bus_divider(BENCH_HEATER_DIVIDER),
            generator: Ina226::new(
                BENCH_GENERATOR_ADDRESS,
                Config::default(),
                BENCH_GENERATOR_CALIBRATION,
            ),
            key: None,
            session: 0,
        }
    }

    fn controller_settings(&self) -> ControllerSettings {
        ControllerSettings {
            rig_id: self.rig_id,
            firmware_version: FIRMWARE_VERSION,
            sample_period_ms: self.sample_period_ms,
            summary_period_ms: self.summary_period_ms,
            hello_period_ms: self.hello_period_ms,
        }
    }
}

/// The devices an [`App`] drives, by value.
#[derive(Debug)]
pub struct Devices<HOT, COLD, I2C, TRIP, UART, HO> {
    /// The hot thermocouple's converter (its own chip select).
    pub hot_spi: HOT,
    /// The cold-side thermocouple's converter.
    pub cold_spi: COLD,
    /// The I2C bus carrying both INA226s.
    pub i2c: I2C,
    /// The trip relay output: high = trip.
    pub trip: TRIP,
    /// The UART the frames go out on.
    pub uart: UART,
    /// The heat-out channel ([`NoHeatOut`](crate::drivers::flow::NoHeatOut)
    /// when there is none).
    pub heat_out: HO,
}

/// Counters of one input channel.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct ChannelStats {
    /// Readings attempted.
    pub reads: u32,
    /// Readings lost to a bus error.
    pub bus_errors: u32,
    /// Readings the device flagged or that could not be converted
    /// (thermocouple fault bits, wrong chip id, out-of-range values,
    /// calorimeter failures).
    pub faults: u32,
}

impl ChannelStats {
    /// Readings that produced NaN.
    pub const fn failures(&self) -> u32 {
        self.bus_errors.saturating_add(self.faults)
    }
}

/// The application's counters.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct AppStats {
    /// Ticks run.
    pub ticks: u32,
    /// The hot thermocouple.
    pub hot: ChannelStats,
    /// The cold-side thermocouple.
    pub cold: ChannelStats,
    /// The heater INA226.
    pub heater: ChannelStats,
    /// The generator INA226.
    pub generator: ChannelStats,
    /// The heat-out channel.
    pub heat_out: ChannelStats,
    /// Frames written whole to the UART.
    pub frames_sent: u32,
    /// Frames lost to a UART write error (or a writer that accepted nothing).
    pub uart_errors: u32,
    /// Frames that could not be encoded (a non-finite Hello field).
    pub encode_errors: u32,
    /// Bytes received on the link (commands and noise).
    pub rx_bytes: u32,
    /// Failed writes to the trip pin.
    pub trip_pin_errors: u32,
}

/// What one tick did.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tick {
    /// The sample pushed into the monitor.
    pub sample: Sample,
    /// What the monitor did with it.
    pub pushed: Pushed,
    /// Alarm events raised by this sample (each sent as an Event frame).
    pub events: usize,
    /// Whether a Summary was sent.
    pub summary_sent: bool,
    /// The trip output after the tick.
    pub trip: bool,
}

/// The controller application: drivers, monitor, alarms, trip output and
/// UART stream. `N` is the monitor's window capacity (the firmware uses 64).
///
/// On the simulated rig ([`crate::sim_bus`]), with 5 s of bus errors on
/// the hot converter:
///
/// ```
/// use core::cell::RefCell;
/// use heatbound::alarm::RuleId;
/// use heatbound::config::RigConfig;
/// use heatbound::wire::RigId;
/// use heatbound_firmware_example::app::{App, AppConfig};
/// use heatbound_firmware_example::rig::Scenario;
/// use heatbound_firmware_example::sim_bus::{sim_devices, SimBench, SimDevice};
///
/// let bench = RefCell::new(SimBench::bench_stirling(Scenario::Steady, 1));
/// bench.borrow_mut().inject_bus_errors(SimDevice::HotThermocouple, 100, 60);
/// let config = AppConfig::bench(RigConfig::default(), RigId::new("doc").unwrap());
/// let mut app = App::<_, _, _, _, _, _, 64>::new(&config, sim_devices::<8192>(&bench))?;
/// bench.borrow_mut().advance_to(0);
/// app.start(0);
/// for t_ms in (100..=20_000).step_by(100) {
///     bench.borrow_mut().advance_to(t_ms);
///     let tick = app.tick(t_ms);
///     assert_eq!(tick.trip, app.alarms().trip_active());
/// }
/// assert_eq!(app.stats().hot.bus_errors, 60);
/// assert_eq!(app.monitor().invalid_samples(), 60);
/// // Raised after its 5 s on-delay; it clears 5 s after the errors stop.
/// assert!(app.alarms().is_active(RuleId::SensorFault));
/// assert!(!app.trip_output()); // sensor_fault is a warning, not a trip
/// # Ok::<(), heatbound::monitor::MonitorError>(())
/// ```
pub struct App<HOT, COLD, I2C, TRIP, UART, HO, const N: usize> {
    hot: Max31855<HOT>,
    cold: Max31855<COLD>,
    i2c: I2C,
    heater: Ina226,
    generator: Ina226,
    heater_ready: bool,
    generator_ready: bool,
    trip: TRIP,
    trip_high: bool,
    uart: UART,
    heat_out: HO,
    controller: Controller<N>,
    started: bool,
    stats: AppStats,
}

impl<HOT, COLD, I2C, TRIP, UART, HO, const N: usize> App<HOT, COLD, I2C, TRIP, UART, HO, N>
where
    HOT: SpiDevice,
    COLD: SpiDevice,
    I2C: I2c,
    TRIP: OutputPin,
    UART: embedded_io::Write,
    HO: HeatOut,
{
    /// The application for `config` on `devices`. Touches no device: call
    /// [`App::start`] next. Fails only if the monitor rejects the
    /// configuration.
    pub fn new(
        config: &AppConfig,
        devices: Devices<HOT, COLD, I2C, TRIP, UART, HO>,
    ) -> Result<Self, MonitorError> {
        let controller = Controller::new(
            &config.controller_settings(),
            &config.rig,
            config.key.as_ref(),
            config.session,
        )?;
        Ok(App {
            hot: Max31855::new(devices.hot_spi),
            cold: Max31855::new(devices.cold_spi),
            i2c: devices.i2c,
            heater: config.heater,
            generator: config.generator,
            heater_ready: false,
            generator_ready: false,
            trip: devices.trip,
            trip_high: false,
            uart: devices.uart,
            heat_out: devices.heat_out,
            controller,
            started: false,
            stats: AppStats::default(),
        })
    }

    /// Boot at `t_ms`: the trip output low, both INA226s checked and
    /// programmed (a failure is counted and retried on every tick), the
    /// heat-out gate opened, the summary period started, and a Hello on the
    /// UART. The first [`App::tick`] should come one sample period later: a
    /// tick at the boot time itself has no flow interval yet, so its heat
    /// out reads NaN.
    pub fn start(&mut self, t_ms: u32) {
        self.started = true;
        self.drive_trip(false);
        self.heater_ready = Self::init_ina(&self.heater, &mut self.i2c, &mut self.stats.heater);
        self.generator_ready =
            Self::init_ina(&self.generator, &mut self.i2c, &mut self.stats.generator);
        self.heat_out.start(t_ms);
        let (uart, stats) = (&mut self.uart, &mut self.stats);
        self.controller
            .start(t_ms, &mut |f: &Frame| send_frame(uart, stats, f));
    }

    /// One sample at `t_ms`: read, convert, push, update the alarms, drive
    /// the trip output, send events now and a Summary when the summary
    /// period has passed. Starts the App first if [`App::start`] was not
    /// called.
    pub fn tick(&mut self, t_ms: u32) -> Tick {
        if !self.started {
            self.start(t_ms);
        }
        self.stats.ticks = self.stats.ticks.wrapping_add(1);
        let sample = self.read_sample(t_ms);
        let (uart, stats) = (&mut self.uart, &mut self.stats);
        let step = self
            .controller
            .step(&sample, &mut |f: &Frame| send_frame(uart, stats, f));
        self.drive_trip(step.trip);
        Tick {
            sample,
            pushed: step.pushed,
            events: step.events,
            summary_sent: step.summary_sent,
            trip: step.trip,
        }
    }

    /// Bytes received on the link at sample time `t_ms` (call it with what
    /// the UART's receive buffer holds, never waiting for more): each
    /// command they complete is checked, carried out or refused, and
    /// answered; the trip output follows at once. Costs O(1) per byte, so
    /// an endless stream without a delimiter costs only the bytes.
    pub fn receive(&mut self, bytes: &[u8], t_ms: u32) {
        let n = u32::try_from(bytes.len()).unwrap_or(u32::MAX);
        self.stats.rx_bytes = self.stats.rx_bytes.wrapping_add(n);
        let (uart, stats) = (&mut self.uart, &mut self.stats);
        self.controller
            .receive(bytes, t_ms, &mut |f: &Frame| send_frame(uart, stats, f));
        self.drive_trip(self.controller.trip_active());
    }

    /// The operator acknowledges every active alarm at `t_ms` (the reset
    /// button): the acknowledged and cleared events go out at once and the
    /// trip output follows. Returns the number of events.
    pub fn acknowledge_all(&mut self, t_ms: u32) -> usize {
        let (uart, stats) = (&mut self.uart, &mut self.stats);
        let n = self
            .controller
            .acknowledge_all(t_ms, &mut |f: &Frame| send_frame(uart, stats, f));
        self.drive_trip(self.controller.trip_active());
        n
    }

    /// The controller (monitor, alarms, link state).
    pub fn controller(&self) -> &Controller<N> {
        &self.controller
    }

    /// The monitor.
    pub fn monitor(&self) -> &Monitor<N> {
        self.controller.monitor()
    }

    /// The alarms.
    pub fn alarms(&self) -> &AlarmSet {
        self.controller.alarms()
    }

    /// The counters.
    pub fn stats(&self) -> &AppStats {
        &self.stats
    }

    /// The trip output as last commanded (high = trip).
    pub fn trip_output(&self) -> bool {
        self.trip_high
    }

    /// The trip pin.
    pub fn trip_pin(&self) -> &TRIP {
        &self.trip
    }

    /// The UART.
    pub fn uart(&self) -> &UART {
        &self.uart
    }

    /// The UART, mutably (to drain a simulated one).
    pub fn uart_mut(&mut self) -> &mut UART {
        &mut self.uart
    }

    /// The heat-out channel.
    pub fn heat_out(&self) -> &HO {
        &self.heat_out
    }

    /// The devices back.
    pub fn release(self) -> Devices<HOT, COLD, I2C, TRIP, UART, HO> {
        Devices {
            hot_spi: self.hot.release(),
            cold_spi: self.cold.release(),
            i2c: self.i2c,
            trip: self.trip,
            uart: self.uart,
            heat_out: self.heat_out,
        }
    }

    fn read_sample(&mut self, t_ms: u32) -> Sample {
        let t_hot_k = Self::read_thermocouple_k(&mut self.hot, &mut self.stats.hot);
        let t_cold_k = Self::read_thermocouple_k(&mut self.cold, &mut self.stats.cold);
        let heat_in_w = Self::read_power_w(
            &self.heater,
            &mut self.heater_ready,
            &mut self.i2c,
            &mut self.stats.heater,
        );
        let work_w = Self::read_power_w(
            &self.generator,
            &mut self.generator_ready,
            &mut self.i2c,
            &mut self.stats.generator,
        );
        self.stats.heat_out.reads = self.stats.heat_out.reads.wrapping_add(1);
        let heat_out_w = match self.heat_out.heat_out_w(t_ms) {
            Ok(q) => q,
            Err(_) => {
                self.stats.heat_out.faults = self.stats.heat_out.faults.wrapping_add(1);
                Some(f32::NAN)
            }
        };
        Sample {
            t_ms,
            t_hot_k,
            t_cold_k,
            heat_in_w,
            work_w,
            heat_out_w,
            // This board reads one hot-side thermocouple.
            t_hot2_k: None,
        }
    }

    /// A thermocouple channel in kelvin, NaN on any failure.
    fn read_thermocouple_k<S: SpiDevice>(tc: &mut Max31855<S>, stats: &mut ChannelStats) -> f32 {
        stats.reads = stats.reads.wrapping_add(1);
        match tc.read_hot_junction_c() {
            Ok(t_c) => (t_c + ZERO_CELSIUS_K) as f32,
            Err(max31855::Error::Bus(_)) => {
                stats.bus_errors = stats.bus_errors.wrapping_add(1);
                f32::NAN
            }
            Err(_) => {
                stats.faults = stats.faults.wrapping_add(1);
                f32::NAN
            }
        }
    }

    fn count_ina_error<E>(e: &ina226::Error<E>, stats: &mut ChannelStats) {
        match e {
            ina226::Error::Bus(_) => stats.bus_errors = stats.bus_errors.wrapping_add(1),
            _ => stats.faults = stats.faults.wrapping_add(1),
        }
    }

    fn init_ina(ina: &Ina226, i2c: &mut I2C, stats: &mut ChannelStats) -> bool {
        match ina.init(i2c) {
            Ok(()) => true,
            Err(e) => {
                Self::count_ina_error(&e, stats);
                false
            }
        }
    }

    /// An electrical channel in watts, NaN on any failure. A chip that is
    /// not (or no longer known to be) programmed is programmed first: after
    /// a bus error it may have browned out and lost its calibration, and an
    /// uncalibrated INA226 reads 0 A rather than failing.
    fn read_power_w(
        ina: &Ina226,
        ready: &mut bool,
        i2c: &mut I2C,
        stats: &mut ChannelStats,
    ) -> f32 {
        stats.reads = stats.reads.wrapping_add(1);
        if !*ready {
            *ready = Self::init_ina(ina, i2c, stats);
            if !*ready {
                return f32::NAN;
            }
        }
        match ina.read(i2c) {
            Ok(r) => match power::electrical_power_w(r.voltage_v, r.current_a) {
                Ok(p) => p,
                Err(_) => {
                    stats.faults = stats.faults.wrapping_add(1);
                    f32::NAN
                }
            },
            Err(e) => {
                Self::count_ina_error(&e, stats);
                *ready = false;
                f32::NAN
            }
        }
    }

    fn drive_trip(&mut self, high: bool) {
        self.trip_high = high;
        // Written every tick, not only on change: a glitch on the line is
        // re-asserted within one sample.
        let r = if high {
            self.trip.set_high()
        } else {
            self.trip.set_low()
        };
        if r.is_err() {
            self.stats.trip_pin_errors = self.stats.trip_pin_errors.wrapping_add(1);
        }
    }
}

/// Encodes `frame` onto `uart`, counting what was sent and what was lost.
fn send_frame<UART: embedded_io::Write>(uart: &mut UART, stats: &mut AppStats, frame: &Frame) {
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    let Ok(n) = wire::encode(frame, &mut buf) else {
        stats.encode_errors = stats.encode_errors.wrapping_add(1);
        return;
    };
    let mut rest = buf.get(..n).unwrap_or(&[]);
    // Not `write_all`: it panics on a writer that accepts nothing.
    while !rest.is_empty() {
        match uart.write(rest) {
            Ok(k) if k > 0 => rest = rest.get(k..).unwrap_or(&[]),
            _ => {
                stats.uart_errors = stats.uart_errors.wrapping_add(1);
                return;
            }
        }
    }
    stats.frames_sent = stats.frames_sent.wrapping_add(1);
}
