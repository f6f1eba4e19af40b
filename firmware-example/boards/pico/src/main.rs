//! heatbound controller firmware for the Raspberry Pi Pico (RP2040).
//!
//! Where it sits: the board end of the data flow. The board-independent
//! [`App`] does everything that matters (sampling, the monitor, alarms,
//! the trip output, wire frames, commands); this file only builds its
//! devices from the Pico's peripherals, paces it at the sample period,
//! hands it what the UART has received and tells it when the acknowledge
//! button is pressed.
//!
//! ```text
//! SPI0 (GP16 MISO, GP18 SCK) --+-- CS GP17: MAX31855 hot      --+
//!                              +-- CS GP20: MAX31855 cold      --+
//!                              +-- CS GP21: MAX31855 coolant in  --+-- Calorimeter --+
//!                              +-- CS GP22: MAX31855 coolant out --+                  |
//! GP13 flow meter --PWM6 B edge counter--------------------------------------+        |
//! I2C0 (GP4 SDA, GP5 SCL): INA226 heater 0x40, generator 0x41 ---------------+--> App::tick every 100 ms
//! GP14 acknowledge button --Debouncer--> App::acknowledge_all                 |
//! GP1 UART0 RX --IRQ ring buffer--> App::receive                              |
//!                                       GP15 trip output (high = trip) <-----+
//!                                       GP0 UART0 TX (115200 8N1) <-- wire frames
//! ```
//!
//! The pin map and wiring are in README.md. The trip output is a
//! monitoring aid, not a safety-rated interlock.
#![no_std]
#![no_main]
#![deny(unsafe_code)]

mod button;
mod clock;
mod link;
mod pulse;
mod session;

use core::cell::RefCell;

use cortex_m_rt::entry;
use embassy_rp::bind_interrupts;
use embassy_rp::gpio::{Input, Level, Output, Pull};
use embassy_rp::i2c::{self, I2c};
use embassy_rp::peripherals::{I2C0, SPI0, UART0};
use embassy_rp::pwm::{self, InputMode, Pwm};
use embassy_rp::spi::{self, Spi};
use embassy_rp::uart::{self, BufferedInterruptHandler, BufferedUart, BufferedUartTx};
use embassy_time::{Delay, Instant};
use embedded_hal_bus::spi::RefCellDevice;
use heatbound::config::RigConfig;
use heatbound::wire::{CommandKey, RigId};
use heatbound_firmware_example::app::{App, AppConfig, Devices};
use heatbound_firmware_example::drivers::flow::Calorimeter;
use heatbound_firmware_example::drivers::max31855::Max31855;

#[cfg(feature = "defmt")]
use defmt_rtt as _;
#[cfg(not(feature = "defmt"))]
use panic_halt as _;
#[cfg(feature = "defmt")]
use panic_probe as _;

use crate::button::Debouncer;
use crate::clock::{MsClock, Pacer};
use crate::link::Rx;
use crate::pulse::{FLOW_K_FACTOR_PULSES_PER_L, PwmPulseCounter};

// `COMMAND_KEY: Option<[u8; 32]>`, written by build.rs from
// `HEATBOUND_KEY_FILE` (`None` without it).
include!(concat!(env!("OUT_DIR"), "/command_key.rs"));

/// The rig identifier sent in the Hello (at most 16 printable ASCII
/// bytes). Give each rig its own.
const RIG_ID: &str = "pico-rig-1";

/// Monitor window, samples (6.4 s at 10 Hz).
const WINDOW: usize = 64;

/// Flow-meter gate, sample intervals: a sliding one-second gate at 10 Hz.
const FLOW_GATE: usize = 10;

/// Host link: 115,200 baud, 8 data bits, no parity, 1 stop bit.
const UART_BAUD: u32 = 115_200;

/// UART transmit ring buffer, bytes: about 90 ms of line time, so a tick's
/// frames are queued, not waited for.
const TX_BUFFER_LEN: usize = 1024;

/// UART receive ring buffer, bytes: a whole command (at most
/// `heatbound::wire::MAX_COMMAND_LEN`, 512) fits while a tick runs.
const RX_BUFFER_LEN: usize = 512;

/// SPI clock for the MAX31855s, Hz (the chip allows 5 MHz; 1 MHz is kind
/// to long thermocouple-board wiring).
const SPI_HZ: u32 = 1_000_000;

/// I2C clock for the INA226s, Hz (standard mode).
const I2C_HZ: u32 = 100_000;

bind_interrupts!(struct Irqs {
    UART0_IRQ => BufferedInterruptHandler<UART0>;
});

/// The shared SPI bus.
type SpiBus = Spi<'static, SPI0, spi::Blocking>;
/// One MAX31855 on the shared bus, with its own chip select.
type Thermocouple = RefCellDevice<'static, SpiBus, Output<'static>, Delay>;
/// The heat-out channel: flow pulses, coolant inlet and outlet.
type Coolant =
    Calorimeter<PwmPulseCounter, Max31855<Thermocouple>, Max31855<Thermocouple>, FLOW_GATE>;
/// The App on this board.
type BoardApp = App<
    Thermocouple,
    Thermocouple,
    I2c<'static, I2C0, i2c::Blocking>,
    Output<'static>,
    BufferedUartTx,
    Coolant,
    WINDOW,
>;

// `MsClock` counts microseconds: embassy-rp's time driver ticks at 1 MHz.
const _: () = assert!(embassy_time::TICK_HZ == 1_000_000);

/// The timer's microseconds, low 32 bits (the 64-bit count truncated: the
/// clock only needs differences).
#[allow(clippy::cast_possible_truncation)] // the low 32 bits are the point
fn now_us() -> u32 {
    Instant::now().as_ticks() as u32
}

#[cfg(feature = "defmt")]
defmt::timestamp!("{=u64:us}", Instant::now().as_ticks());

#[entry]
fn main() -> ! {
    let p = embassy_rp::init(embassy_rp::config::Config::default());

    // The float arithmetic runs in the boot ROM's routines (embassy-rp
    // `rom-v2-intrinsics`), whose double-precision half exists from boot
    // ROM v2 (RP2040-B1) on. Production Picos carry B1 or B2 chips; refuse
    // a pre-production B0 here, before the first float operation, instead
    // of panicking inside one.
    if embassy_rp::rom_data::rom_version_number() < 2 {
        halt("boot ROM v1 (RP2040-B0): this image needs an RP2040-B1 or later");
    }

    // Trip output first, low (no trip), so the relay stays released while
    // the rest is set up.
    let trip = Output::new(p.PIN_15, Level::Low);

    // SPI0: four MAX31855s, each with its own chip select, idle high.
    let mut spi_config = spi::Config::default();
    spi_config.frequency = SPI_HZ; // mode 0 is the default, as the MAX31855 needs
    let spi = Spi::new_blocking_rxonly(p.SPI0, p.PIN_18, p.PIN_16, spi_config);
    // The shared bus and the UART's ring buffers live for good.
    let Some((spi_bus, tx_buffer, rx_buffer)) = cortex_m::singleton!(
        : (RefCell<SpiBus>, [u8; TX_BUFFER_LEN], [u8; RX_BUFFER_LEN]) =
            (RefCell::new(spi), [0; TX_BUFFER_LEN], [0; RX_BUFFER_LEN])
    ) else {
        halt("board statics already taken");
    };
    let spi_bus: &'static RefCell<SpiBus> = spi_bus;
    let thermocouple = |cs: Output<'static>| -> Thermocouple {
        let Ok(device) = RefCellDevice::new(spi_bus, cs, Delay);
        device
    };
    let hot = thermocouple(Output::new(p.PIN_17, Level::High));
    let cold = thermocouple(Output::new(p.PIN_20, Level::High));
    let coolant_in = thermocouple(Output::new(p.PIN_21, Level::High));
    let coolant_out = thermocouple(Output::new(p.PIN_22, Level::High));

    // I2C0: both INA226s. The breakout boards carry the pull-ups; the
    // internal ones (50–80 kΩ) stay on as a fallback.
    let mut i2c_config = i2c::Config::default();
    i2c_config.frequency = I2C_HZ;
    let i2c = I2c::new_blocking(p.I2C0, p.PIN_5, p.PIN_4, i2c_config);

    // Flow meter: PWM slice 6 counts rising edges on GP13 (channel B). The
    // meter's open-collector output needs a pull-up to 3.3 V; the
    // internal one backs up the external resistor.
    let flow = Pwm::new_input(
        p.PWM_SLICE6,
        p.PIN_13,
        Pull::Up,
        InputMode::RisingEdge,
        pwm::Config::default(),
    );
    let heat_out = Calorimeter::new(
        PwmPulseCounter::new(flow),
        FLOW_K_FACTOR_PULSES_PER_L,
        Max31855::new(coolant_in),
        Max31855::new(coolant_out),
    );

    // UART0 to the host: interrupt-driven both ways, so neither sending
    // frames nor waiting for commands holds up sampling.
    let mut uart_config = uart::Config::default();
    uart_config.baudrate = UART_BAUD;
    let uart = BufferedUart::new(
        p.UART0,
        p.PIN_0,
        p.PIN_1,
        Irqs,
        tx_buffer,
        rx_buffer,
        uart_config,
    );
    let (uart_tx, uart_rx) = uart.split();
    let mut rx = Rx::new(uart_rx);

    // Acknowledge button to GND, internal pull-up: low = pressed.
    let ack = Input::new(p.PIN_14, Pull::Up);

    let Ok(rig_id) = RigId::new(RIG_ID) else {
        halt("RIG_ID is not a valid rig id");
    };
    let mut config = AppConfig::bench(RigConfig::default(), rig_id);
    config.key = COMMAND_KEY.map(CommandKey::from_bytes);
    config.session = session::draw();
    log_boot(&config);

    let devices = Devices {
        hot_spi: hot,
        cold_spi: cold,
        i2c,
        trip,
        uart: uart_tx,
        heat_out,
    };
    let Ok(app) = App::new(&config, devices) else {
        halt("the rig configuration does not suit the monitor");
    };
    let Some(app) = cortex_m::singleton!(: BoardApp = app) else {
        halt("App already built");
    };

    let mut clock = MsClock::new(now_us());
    let t_start = clock.update(now_us());
    app.start(t_start);
    let mut pacer = Pacer::new(config.sample_period_ms, t_start);
    let mut button = Debouncer::new(button::SETTLE_MS, ack.is_low(), t_start);
    loop {
        let t_ms = clock.update(now_us());
        rx.drain(|bytes| receive(app, bytes, t_ms));
        if button.update(ack.is_low(), t_ms) {
            acknowledge(app, t_ms);
        }
        if pacer.due(t_ms) {
            tick(app, t_ms);
        }
    }
}

// The App's three entry points, each kept out of line. Under fat LTO the
// inliner otherwise folds the whole command path (parse, MAC check,
// configuration checks) into `main` beside the tick path and copies code
// both share. Measured while writing this crate, the three wrappers saved
// 2–9 KiB of flash, and 16–24 KiB with the `defmt` feature, which would not
// fit in 64 KiB without them.

/// [`App::receive`], out of line.
#[inline(never)]
fn receive(app: &mut BoardApp, bytes: &[u8], t_ms: u32) {
    app.receive(bytes, t_ms);
}

/// [`App::acknowledge_all`], out of line.
#[inline(never)]
fn acknowledge(app: &mut BoardApp, t_ms: u32) {
    app.acknowledge_all(t_ms);
}

/// [`App::tick`], out of line.
#[inline(never)]
fn tick(app: &mut BoardApp, t_ms: u32) {
    app.tick(t_ms);
}

/// What this boot is, on the defmt log. Never the key itself.
fn log_boot(config: &AppConfig) {
    #[cfg(feature = "defmt")]
    {
        defmt::info!(
            "heatbound-pico: rig {=str}, session {=u32:#010x}",
            config.rig_id.as_str(),
            config.session
        );
        if config.key.is_none() {
            defmt::warn!(
                "no command key provisioned (HEATBOUND_KEY_FILE at build time): \
                 every command but a Hello request will be refused"
            );
        }
    }
    #[cfg(not(feature = "defmt"))]
    let _ = config;
}

/// Stops here for good: only for a build-time mistake (a bad `RIG_ID` or
/// rig configuration) or a chip this image cannot run on, never for
/// anything a sensor or the host sends. The trip output is left low, or
/// released to its pull-down when its pin has been dropped.
fn halt(why: &str) -> ! {
    #[cfg(feature = "defmt")]
    defmt::error!("heatbound-pico: {=str}", why);
    #[cfg(not(feature = "defmt"))]
    let _ = why;
    loop {
        cortex_m::asm::wfi();
    }
}
