//! heatbound controller firmware for the STM32 Nucleo-F446RE.
//!
//! Where it sits: the board end of the data flow. This file only builds
//! the real devices, hands them to the one [`App`] of
//! `heatbound-firmware-example`, and keeps time: the App monitors, raises
//! alarms, drives the trip output, answers commands and writes every frame.
//!
//! ```text
//! SPI1 --> MAX31855 ×4 (hot, cold, coolant in, coolant out) --+
//! I2C1 --> INA226 ×2 (heater 0x40, generator 0x41) ----------+--> App::tick every 100 ms
//! PA0 --> TIM2 pulse count (flow meter) ---------------------+        |
//!                                                                      +--> PB5 trip output
//! USART2 RX --interrupt--> ring buffer --drained every ms--> App::receive
//! App frames --> ring buffer --interrupt--> USART2 TX (ST-LINK virtual COM port)
//! B1 (PC13) --debounced press--> App::acknowledge_all
//! ```
//!
//! The trip output is a monitoring aid, not a safety interlock. Only the
//! App drives it (high = trip); this file sets it low once, when it claims
//! the pin at boot, before the App exists. If start-up fails the App never runs: the pin
//! stays low, nothing is sent (the host sees no Hello and reports the link
//! down), the reason goes to the defmt log, and the core sleeps.
#![no_std]
#![no_main]
#![deny(unsafe_code)]

#[macro_use]
mod fmt;
mod button;
mod pulse;
mod session;

use core::cell::RefCell;
use core::sync::atomic::{AtomicU32, Ordering};

use cortex_m::peripheral::syst::SystClkSource;
use cortex_m_rt::{entry, exception};
use embassy_stm32::gpio::{Input, Level, Output, Pin, Pull, Speed};
use embassy_stm32::i2c::{self, I2c};
use embassy_stm32::mode::Blocking;
use embassy_stm32::spi::{self, Spi};
use embassy_stm32::time::Hertz;
use embassy_stm32::usart::{self, BufferedUart, BufferedUartRx, BufferedUartTx};
use embassy_stm32::{Peri, bind_interrupts, peripherals};
use embassy_time::Duration;
use embedded_hal::delay::DelayNs;
use embedded_hal_bus::spi::RefCellDevice;
use embedded_io::{Read, ReadReady};
use heatbound::config::RigConfig;
use heatbound::wire::{CommandKey, RigId};
use heatbound_firmware_example::app::{App, AppConfig, Devices};
use heatbound_firmware_example::drivers::flow::Calorimeter;
use heatbound_firmware_example::drivers::max31855::Max31855;

#[cfg(not(feature = "defmt"))]
use panic_halt as _;
#[cfg(feature = "defmt")]
use {defmt_rtt as _, panic_probe as _};

// defmt log lines carry the App's millisecond clock.
#[cfg(feature = "defmt")]
defmt::timestamp!("{=u32:ms}", now_ms());

/// `COMMAND_KEY`, written by build.rs from `HEATBOUND_KEY_FILE`.
mod provisioned {
    include!(concat!(env!("OUT_DIR"), "/command_key.rs"));
}

/// The rig id sent in the Hello: `HEATBOUND_RIG_ID` at build time (checked
/// by build.rs), else the board's name.
const RIG_ID: &str = match option_env!("HEATBOUND_RIG_ID") {
    Some(id) => id,
    None => "nucleo-f446re",
};

/// Core clock, Hz: HSI 16 MHz / 8 × 168 / 4 (see [`clock_config`]).
const SYSCLK_HZ: u32 = 84_000_000;

/// Monitor window capacity, samples.
const WINDOW: usize = 64;

/// The flow meter's K-factor, pulses per litre. 450 is typical of the small
/// Hall-effect turbine meters used on bench coolant loops; set it to your
/// meter's datasheet figure, or better, to a bucket-and-stopwatch
/// calibration at the rig's flow.
const FLOW_K_FACTOR_PULSES_PER_L: f32 = 450.0;

/// The flow meter's sliding gate, sample intervals (10 = 1 s at 10 Hz).
const FLOW_GATE: usize = 10;

/// SPI clock for the MAX31855s, Hz (the chip allows 5 MHz; about 1 MHz is
/// kind to long sensor leads). SPI1 divides its 84 MHz clock by a power of
/// two: embassy picks /64, 1.31 MHz.
const SPI_HZ: u32 = 1_000_000;

/// I2C clock for the INA226s, Hz (standard mode).
const I2C_HZ: u32 = 100_000;

/// The longest an I2C transfer may take before it fails as a bus error. A
/// held-low line then costs a few milliseconds per sample, never the loop.
const I2C_TIMEOUT: Duration = Duration::from_millis(5);

/// The host link: ST-LINK virtual COM port, 8N1.
const UART_BAUD: u32 = 115_200;

/// Button poll interval, ms.
const BUTTON_POLL_MS: u32 = 10;

/// Bytes read from the receive ring per [`App::receive`] call.
const RX_CHUNK: usize = 64;

/// Most receive chunks handed over per pass of the main loop: at 115,200
/// baud at most ~12 bytes arrive per millisecond, so one chunk usually
/// empties the ring and the cap only bounds a pass.
const RX_CHUNKS_PER_PASS: usize = 4;

/// Transmit ring, bytes: several whole frames (128 bytes at most each), so
/// a tick's burst of events and a Summary is queued without waiting.
const TX_RING: usize = 1024;

/// Receive ring, bytes: over 20 ms of line time at 115,200 baud.
const RX_RING: usize = 256;

bind_interrupts!(struct Irqs {
    USART2 => usart::BufferedInterruptHandler<peripherals::USART2>;
});

type SpiBus = Spi<'static, Blocking, spi::mode::Master>;
/// One MAX31855: the shared SPI1 bus and its own chip select.
type Thermocouple = RefCellDevice<'static, SpiBus, Output<'static>, SpinDelay>;
type I2cBus = I2c<'static, Blocking, i2c::mode::Master>;
type HeatOut = Calorimeter<
    pulse::FlowPulses<'static>,
    Max31855<Thermocouple>,
    Max31855<Thermocouple>,
    FLOW_GATE,
>;
type BoardApp = App<
    Thermocouple,
    Thermocouple,
    I2cBus,
    Output<'static>,
    BufferedUartTx<'static>,
    HeatOut,
    WINDOW,
>;

#[entry]
fn main() -> ! {
    let p = embassy_stm32::init(clock_config());
    // The trip line is driven low from the first moment the pin is ours;
    // from here on only the App changes it.
    let trip = Output::new(p.PB5, Level::Low, Speed::Low);
    let session = session::draw(p.TIM5);
    info!(
        "heatbound {=str}: session {=u32:08x} ({=u16} LSI periods, spread {=u32} counts)",
        RIG_ID, session.number, session.captures, session.spread
    );
    if session.spread == 0 {
        warn!("no oscillator jitter seen: the session rests on the device id and boot time");
    }

    let Ok(rig_id) = RigId::new(RIG_ID) else {
        halt("the rig id is not 1 to 16 printable ASCII bytes");
    };
    let mut config = AppConfig::bench(RigConfig::default(), rig_id);
    config.session = session.number;
    config.key = provisioned::COMMAND_KEY.map(CommandKey::from_bytes);
    if config.key.is_none() {
        warn!(
            "no command key provisioned (HEATBOUND_KEY_FILE): every command but a Hello request will be refused"
        );
    }

    let Some(spi_bus) = cortex_m::singleton!(: RefCell<SpiBus> = RefCell::new(spi_bus(
        p.SPI1, p.PA5, p.PA7, p.PA6
    ))) else {
        halt("SPI bus already built");
    };
    let spi_bus: &'static RefCell<SpiBus> = spi_bus;
    let (Some(tx_ring), Some(rx_ring)) = (
        cortex_m::singleton!(: [u8; TX_RING] = [0; TX_RING]),
        cortex_m::singleton!(: [u8; RX_RING] = [0; RX_RING]),
    ) else {
        halt("UART buffers already taken");
    };
    let mut uart_config = usart::Config::default();
    uart_config.baudrate = UART_BAUD;
    let Ok(uart) = BufferedUart::new(p.USART2, p.PA3, p.PA2, tx_ring, rx_ring, Irqs, uart_config)
    else {
        halt("USART2 rejected its configuration");
    };
    let (uart_tx, mut uart_rx) = uart.split();

    let heat_out = Calorimeter::new(
        pulse::FlowPulses::new(p.TIM2, p.PA0),
        FLOW_K_FACTOR_PULSES_PER_L,
        Max31855::new(thermocouple(spi_bus, p.PA9)),
        Max31855::new(thermocouple(spi_bus, p.PA8)),
    );
    let devices = Devices {
        hot_spi: thermocouple(spi_bus, p.PB6),
        cold_spi: thermocouple(spi_bus, p.PC7),
        i2c: i2c_bus(p.I2C1, p.PB8, p.PB9),
        trip,
        uart: uart_tx,
        heat_out,
    };
    let app = match App::new(&config, devices) {
        Ok(app) => app,
        Err(e) => {
            error!("the monitor rejects the rig configuration: {}", e);
            halt("App::new failed");
        }
    };
    let Some(app) = cortex_m::singleton!(: BoardApp = app) else {
        halt("App already built");
    };

    let button = Input::new(p.PC13, Pull::None);
    let Some(core) = cortex_m::Peripherals::take() else {
        halt("core peripherals already taken");
    };
    // SysTick: the App's millisecond clock, and the core's wake-up from
    // `wfi`. (embassy-time, on TIM3, only times out I2C transfers and the
    // session draw.)
    let mut systick = core.SYST;
    systick.set_clock_source(SystClkSource::Core);
    systick.set_reload(SYSCLK_HZ / 1000 - 1);
    systick.clear_current();
    systick.enable_interrupt();
    systick.enable_counter();

    run(app, &mut uart_rx, &button, config.sample_period_ms)
}

/// The main loop: one sample per `period_ms`, received bytes handed over
/// as they come, the button polled; sleeps between SysTick wake-ups.
fn run(app: &mut BoardApp, rx: &mut BufferedUartRx<'_>, button: &Input<'_>, period_ms: u32) -> ! {
    // The B1 button pulls PC13 low when pressed.
    let mut debouncer = button::Debouncer::new(button.is_low());
    let period_ms = period_ms.max(1);
    let start = now_ms();
    app.start(start);
    let mut next_sample = start.wrapping_add(period_ms);
    let mut next_poll = start;
    #[cfg(feature = "defmt")]
    let mut next_report = start;
    loop {
        let now = now_ms();
        drain_rx(app, rx, now);
        if reached(now, next_poll) {
            next_poll = now.wrapping_add(BUTTON_POLL_MS);
            if debouncer.update(button.is_low()) {
                let events = app.acknowledge_all(now);
                info!("acknowledge button: {=usize} events", events);
            }
        }
        if reached(now, next_sample) {
            app.tick(now);
            next_sample = next_sample.wrapping_add(period_ms);
            let after = now_ms();
            if reached(after, next_sample) {
                // A whole period behind (a debugger halt, a long stall):
                // start afresh rather than run a burst of late samples.
                next_sample = after.wrapping_add(period_ms);
            }
        }
        #[cfg(feature = "defmt")]
        if reached(now, next_report) {
            next_report = now.wrapping_add(10_000);
            report(app);
        }
        cortex_m::asm::wfi();
    }
}

/// Hands what the receive ring holds to the App, without waiting for more.
fn drain_rx(app: &mut BoardApp, rx: &mut BufferedUartRx<'_>, t_ms: u32) {
    let mut chunk = [0u8; RX_CHUNK];
    for _ in 0..RX_CHUNKS_PER_PASS {
        // `read` is only called when bytes are waiting, so it never blocks.
        if !matches!(rx.read_ready(), Ok(true)) {
            return;
        }
        match rx.read(&mut chunk) {
            Ok(n) if n > 0 => app.receive(chunk.get(..n).unwrap_or(&[]), t_ms),
            _ => return,
        }
    }
}

/// Milliseconds since SysTick started, wrapping (every 49.7 days, as the
/// App expects).
static MILLIS: AtomicU32 = AtomicU32::new(0);

/// The millisecond clock the App runs on.
fn now_ms() -> u32 {
    MILLIS.load(Ordering::Relaxed)
}

/// Whether the wrapping millisecond clock `now` is at or past `deadline`.
fn reached(now: u32, deadline: u32) -> bool {
    now.wrapping_sub(deadline) < 1 << 31
}

/// 84 MHz from the HSI through the PLL: HSI rather than the ST-LINK's 8 MHz
/// clock output, because that output depends on solder bridges that vary
/// between Nucleo revisions. APB1 at 42 MHz (its maximum is 45), APB2 and
/// the timers at 84 MHz.
fn clock_config() -> embassy_stm32::Config {
    use embassy_stm32::rcc::{
        AHBPrescaler, APBPrescaler, Pll, PllMul, PllPDiv, PllPreDiv, PllSource, Sysclk,
    };
    let mut config = embassy_stm32::Config::default();
    config.rcc.hsi = true;
    config.rcc.hse = None;
    config.rcc.pll_src = PllSource::HSI;
    config.rcc.pll = Some(Pll {
        prediv: PllPreDiv::DIV8,   // 2 MHz PLL input
        mul: PllMul::MUL168,       // 336 MHz VCO
        divp: Some(PllPDiv::DIV4), // 84 MHz system clock
        divq: None,
        divr: None,
    });
    config.rcc.sys = Sysclk::PLL1_P;
    config.rcc.ahb_pre = AHBPrescaler::DIV1;
    config.rcc.apb1_pre = APBPrescaler::DIV2;
    config.rcc.apb2_pre = APBPrescaler::DIV1;
    config
}

/// SPI1 on the Arduino header: SCK PA5 (D13), MOSI PA7 (D11, unused by the
/// read-only MAX31855), MISO PA6 (D12, pulled up); mode 0.
fn spi_bus(
    spi1: Peri<'static, peripherals::SPI1>,
    sck: Peri<'static, peripherals::PA5>,
    mosi: Peri<'static, peripherals::PA7>,
    miso: Peri<'static, peripherals::PA6>,
) -> SpiBus {
    let mut config = spi::Config::default();
    config.mode = spi::MODE_0;
    config.frequency = Hertz(SPI_HZ);
    // An absent or unplugged converter then reads all ones, which the
    // driver rejects as a fault, rather than a floating line's plausible
    // garbage (or all zeros, a believable 0 °C).
    config.miso_pull = Pull::Up;
    config.gpio_speed = Speed::Medium;
    Spi::new_blocking(spi1, sck, mosi, miso, config)
}

/// One MAX31855 on the shared bus, chip select `cs` (idle high).
fn thermocouple(bus: &'static RefCell<SpiBus>, cs: Peri<'static, impl Pin>) -> Thermocouple {
    let cs = Output::new(cs, Level::High, Speed::Medium);
    let Ok(device) = RefCellDevice::new(bus, cs, SpinDelay);
    device
}

/// I2C1 on the Arduino header: SCL PB8 (D15), SDA PB9 (D14), with a
/// transfer timeout.
fn i2c_bus(
    i2c1: Peri<'static, peripherals::I2C1>,
    scl: Peri<'static, peripherals::PB8>,
    sda: Peri<'static, peripherals::PB9>,
) -> I2cBus {
    let mut config = i2c::Config::default();
    config.frequency = Hertz(I2C_HZ);
    config.timeout = I2C_TIMEOUT;
    I2c::new_blocking(i2c1, scl, sda, config)
}

/// Start-up failed: log why and sleep. The App never ran, so the trip pin
/// is at its power-up low and no frame was sent.
fn halt(why: &str) -> ! {
    error!("start-up failed: {=str}", why);
    loop {
        cortex_m::asm::wfi();
    }
}

/// The App's counters on the defmt log, every 10 s.
#[cfg(feature = "defmt")]
fn report(app: &BoardApp) {
    let s = app.stats();
    defmt::info!(
        "ticks {=u32} frames {=u32} uart_err {=u32} rx {=u32} | bus/fault hot {=u32}/{=u32} cold {=u32}/{=u32} heater {=u32}/{=u32} gen {=u32}/{=u32} heat_out {=u32}/{=u32} | trip {=bool}",
        s.ticks,
        s.frames_sent,
        s.uart_errors,
        s.rx_bytes,
        s.hot.bus_errors,
        s.hot.faults,
        s.cold.bus_errors,
        s.cold.faults,
        s.heater.bus_errors,
        s.heater.faults,
        s.generator.bus_errors,
        s.generator.faults,
        s.heat_out.bus_errors,
        s.heat_out.faults,
        app.trip_output()
    );
}

/// The millisecond tick: counts [`MILLIS`] and wakes the core from `wfi`.
#[exception]
fn SysTick() {
    MILLIS.fetch_add(1, Ordering::Relaxed);
}

/// A busy-wait delay for the SPI devices' `DelayNs` slot. The MAX31855
/// driver asks for no delay inside its transactions, so it never runs; it
/// stands in for embassy-time's `Delay`, whose nanosecond conversion would
/// link a 64-bit division (under 1 KiB, but the flash budget is tight).
struct SpinDelay;

impl DelayNs for SpinDelay {
    fn delay_ns(&mut self, ns: u32) {
        let us = ns.div_ceil(1000);
        cortex_m::asm::delay(us.saturating_mul(SYSCLK_HZ / 1_000_000));
    }
}
