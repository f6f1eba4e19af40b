//! heatbound firmware for the emulated Arm MPS2 board with a Cortex-M4F
//! (QEMU `-M mps2-an386`), with the simulated rig compiled in.
//!
//! Where it sits: the board end of the data flow. The [`App`] runs
//! unchanged over the [simulated bus](heatbound_firmware_example::sim_bus)
//! devices and streams wire frames out of UART0; the host's commands come
//! in on UART0 too. Diagnostics go to semihosting stderr, never to the
//! UART.
//!
//! ```text
//! SimBench (rig, RefCell) --SPI/I2C bytes, pulses--> App::tick(t_ms) --> wire frames --> UART0 TX (0x4000_4000)
//! UART0 RX --polled between samples, never waited for--> App::receive(bytes, t_ms) --> Reply (+ Events, Hello)
//!                                                      \--> diag (semihosting stderr): run summary, stack high-water mark
//! ```
//!
//! ## Hello and commands
//! The Hello names the rig `qemu-mps2-an386`, says the controller holds a
//! command key, and carries the boot's session number. The key is the
//! public [`CommandKey::DEMO`](heatbound::wire::CommandKey::DEMO): this is
//! an emulator build, not a real controller, and anyone can seal commands
//! for it. The session is not drawn at boot either: QEMU offers no random
//! source, so it is derived from `HEATBOUND_SEED` at build time
//! ([`build_env::SESSION`]; seed 1 gives `0x5EED5EEC`), and every boot of
//! one ELF has the same one. A host learns it, as from any controller, from
//! the Hello (send a Hello request, counter 0 and no tag, to get one at any
//! time).
//!
//! Received bytes are handed to the App as soon as the loop sees them, at
//! most 32 at a time, stamped with the latest sample time: in `endless`
//! mode continuously while it waits for the next sample (a command is
//! answered within the sample period), in bounded mode once per sample. A
//! flood of bytes delays a sample by at most one such chunk, and a chunk
//! holds at most two whole commands (18 bytes at the least), so at most two
//! MAC checks. QEMU 7.2's model of this UART holds one byte, and reading it
//! does not ask the chardev for the next: that comes when QEMU's main loop
//! next runs. So in bounded mode, which runs faster than real time, a
//! 19-byte command arrives over about 200 samples of rig time (measured).
//!
//! Modes (cargo features):
//! - default: simulate `HEATBOUND_DURATION_S` (600) s of rig time at 10 Hz
//!   as fast as the emulator runs (`t_ms` is rig time, 100 ms per tick),
//!   then exit QEMU with status 0;
//! - `endless`: run until stopped, paced by SysTick to 10 Hz ×
//!   `HEATBOUND_SPEEDUP` of emulated time (real time without `-icount`),
//!   polling UART0's receiver while it waits;
//! - `measure`: no App; instruction counts of the per-sample work
//!   ([`measure`]), then exit.
//!
//! The scenario and seed are fixed at build time ([`build_env`]).
//!
//! Diagnostics are written by [`diag`] without `core::fmt`, and a panic
//! exits QEMU with status 1 after a line naming its place (file and line,
//! and the message when it is a plain string), also without formatting: the
//! image must fit 64 KiB of flash. The `measure` build keeps
//! `panic-semihosting` and `heprintln!`.
//!
//! The trip output here is a simulated pin: it is a monitoring aid, not a
//! safety interlock.
#![no_std]
#![no_main]
#![deny(unsafe_code)]

// A measuring build reads only the measurement settings.
#[cfg_attr(feature = "measure", allow(dead_code))]
#[path = "../shared/build_env.rs"]
mod build_env;
// A measuring build prints only the stack line and failures through it.
#[cfg_attr(feature = "measure", allow(dead_code))]
mod diag;
#[path = "../shared/hw.rs"]
mod hw;
#[cfg(feature = "measure")]
#[path = "../shared/measure.rs"]
mod measure;
#[cfg_attr(feature = "measure", allow(dead_code))]
mod uart;

use cortex_m_rt::entry;
use cortex_m_semihosting::debug::{self, EXIT_FAILURE, EXIT_SUCCESS};
#[cfg(feature = "measure")]
use panic_semihosting as _;

use diag::Line;

#[cfg(not(feature = "measure"))]
use run::run;

/// Fails the run: a message on semihosting stderr, QEMU exits with 1.
fn fail(why: &str) -> ! {
    Line::new().str("heatbound-mps2-an386: ").str(why).emit();
    debug::exit(EXIT_FAILURE);
    #[allow(clippy::empty_loop)]
    loop {}
}

/// Ends the run: QEMU exits with 0.
fn finish() -> ! {
    Line::new()
        .str("stack.high_water_bytes=")
        .usize(hw::stack_high_water_bytes())
        .emit();
    debug::exit(EXIT_SUCCESS);
    #[allow(clippy::empty_loop)]
    loop {}
}

/// A panic: a line with its place (and its message when that is a plain
/// string), then QEMU exits with 1. Nothing is formatted.
#[cfg(not(feature = "measure"))]
#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    cortex_m::interrupt::disable();
    let mut line = Line::new();
    line.str("heatbound-mps2-an386: panicked");
    if let Some(at) = info.location() {
        line.str(" at ").str(at.file()).str(":").u32(at.line());
    }
    if let Some(message) = info.message().as_str() {
        line.str(": ").str(message);
    }
    line.emit();
    debug::exit(EXIT_FAILURE);
    #[allow(clippy::empty_loop)]
    loop {}
}

#[entry]
fn main() -> ! {
    hw::paint_stack();
    let Some(cp) = cortex_m::Peripherals::take() else {
        fail("core peripherals already taken");
    };
    #[cfg(feature = "measure")]
    {
        let report = measure::run::<64>(cp.SYST);
        measure::print("mps2-an386", &report);
        finish()
    }
    #[cfg(not(feature = "measure"))]
    run(cp.SYST)
}

#[cfg(not(feature = "measure"))]
mod run {
    //! The App over the simulated bench, streaming to UART0.

    use core::cell::RefCell;

    use cortex_m::peripheral::SYST;
    use heatbound::alarm::RuleId;
    use heatbound::config::RigConfig;
    use heatbound::wire::{CommandKey, ReplyCode, RigId};
    use heatbound_firmware_example::app::{App, AppConfig, Devices};
    use heatbound_firmware_example::rig::Scenario;
    use heatbound_firmware_example::sim_bus::{
        SimBench, SimCalorimeter, SimI2c, SimThermocouple, SimTripPin, sim_devices,
    };

    use crate::build_env;
    use crate::diag::Line;
    use crate::uart::{self, Uart0Rx, Uart0Tx};

    /// Monitor window, samples.
    const WINDOW: usize = 64;

    /// Sample period, ms of rig time.
    const DT_MS: u32 = 100;

    /// UART0 divider: 115,200 baud from the 25 MHz peripheral clock.
    const BAUDDIV: u32 = 217;

    /// The rig identifier sent in the Hello.
    const RIG_ID: &str = "qemu-mps2-an386";

    /// Received bytes handed to the App per call at most: bounds the time
    /// one poll can take from sampling, whatever the host sends.
    const RX_CHUNK: usize = 32;

    /// The App on this board.
    type BoardApp = App<
        SimThermocouple<'static>,
        SimThermocouple<'static>,
        SimI2c<'static>,
        SimTripPin,
        Uart0Tx,
        SimCalorimeter<'static>,
        WINDOW,
    >;

    /// Builds the bench and the App in statics, boots it at t = 0 and runs
    /// the sample loop.
    pub fn run(syst: SYST) -> ! {
        let Ok(scenario) = Scenario::parse(build_env::SCENARIO) else {
            crate::fail("unknown HEATBOUND_SCENARIO");
        };
        let Some(bench) = cortex_m::singleton!(
            BENCH: RefCell<SimBench> =
                RefCell::new(SimBench::bench_stirling(scenario, build_env::SEED))
        ) else {
            crate::fail("bench already built");
        };
        let bench: &'static RefCell<SimBench> = bench;
        let sim = sim_devices::<0>(bench);
        let Some((uart_tx, mut uart_rx)) = uart::uart0(BAUDDIV) else {
            crate::fail("UART0 already taken");
        };
        let devices = Devices {
            hot_spi: sim.hot_spi,
            cold_spi: sim.cold_spi,
            i2c: sim.i2c,
            trip: sim.trip,
            uart: uart_tx,
            heat_out: sim.heat_out,
        };
        let Ok(rig_id) = RigId::new(RIG_ID) else {
            crate::fail("bad rig id");
        };
        let mut config = AppConfig::bench(RigConfig::default(), rig_id);
        // An emulator build, not a real controller: the public demo key, and
        // a session from the build-time seed (no random source in QEMU; see
        // `build_env::SESSION`).
        config.key = Some(CommandKey::DEMO);
        config.session = build_env::SESSION;
        let Ok(app) = App::new(&config, devices) else {
            crate::fail("the configuration does not suit the monitor");
        };
        let Some(app) = cortex_m::singleton!(APP: BoardApp = app) else {
            crate::fail("app already built");
        };
        Line::new()
            .str("heatbound-mps2-an386: scenario ")
            .str(scenario.name())
            .str(" seed ")
            .u64(build_env::SEED)
            .str(" session ")
            .u32(build_env::SESSION)
            .str(" (demo key)")
            .emit();
        #[cfg(feature = "defmt")]
        defmt::info!("boot: scenario {=str}", scenario.name());

        let mut pacer = Pacer::new(syst);
        if let Ok(mut b) = bench.try_borrow_mut() {
            b.advance_to(0);
        }
        app.start(0);
        let mut t_ms: u32 = 0;
        loop {
            // Until the next sample is due (at once in bounded mode), hand
            // the App what UART0 has received, one bounded chunk per poll,
            // so a command never delays a sample by more than one chunk.
            loop {
                receive(app, &mut uart_rx, t_ms);
                if pacer.due() {
                    break;
                }
            }
            t_ms = t_ms.wrapping_add(DT_MS);
            if let Ok(mut b) = bench.try_borrow_mut() {
                b.advance_to(t_ms);
            }
            app.tick(t_ms);
            if !cfg!(feature = "endless") && t_ms >= build_env::DURATION_S.saturating_mul(1000) {
                break;
            }
        }
        report(app, t_ms);
        crate::finish()
    }

    /// Hands the App at most [`RX_CHUNK`] bytes that UART0 holds, stamped
    /// with the latest sample time; never waits for a byte.
    fn receive(app: &mut BoardApp, rx: &mut Uart0Rx, t_ms: u32) {
        let mut buf = [0u8; RX_CHUNK];
        let n = rx.read_available(&mut buf);
        if let Some(bytes) = buf.get(..n).filter(|b| !b.is_empty()) {
            app.receive(bytes, t_ms);
        }
    }

    /// The run's summary on semihosting stderr.
    fn report(app: &BoardApp, t_ms: u32) {
        let stats = app.stats();
        Line::new()
            .str("run.t_ms=")
            .u32(t_ms)
            .str(" ticks=")
            .u32(stats.ticks)
            .str(" frames_sent=")
            .u32(stats.frames_sent)
            .str(" uart_errors=")
            .u32(stats.uart_errors)
            .str(" encode_errors=")
            .u32(stats.encode_errors)
            .emit();
        Line::new()
            .str("run.invalid_samples=")
            .u64(app.monitor().invalid_samples())
            .str(" trip=")
            .bool(app.trip_output())
            .str(" beyond_carnot_active=")
            .bool(app.alarms().is_active(RuleId::BeyondCarnot))
            .emit();
        let rx = app.controller().receiver_stats();
        let replies = app.controller().stats();
        let applied = replies.count(ReplyCode::Applied);
        let refused = replies.replies.iter().sum::<u32>().saturating_sub(applied);
        Line::new()
            .str("run.rx_bytes=")
            .u32(stats.rx_bytes)
            .str(" commands=")
            .u32(rx.commands)
            .str(" crc_errors=")
            .u32(rx.crc_errors)
            .str(" applied=")
            .u32(applied)
            .str(" refused=")
            .u32(refused)
            .emit();
        #[cfg(feature = "defmt")]
        defmt::info!("done: {=u32} frames", stats.frames_sent);
    }

    /// Paces the loop in `endless` mode: SysTick wraps once per sample
    /// period of emulated time (25 MHz core clock). Without `-icount`
    /// QEMU's emulated clock follows real time. In bounded mode a sample is
    /// always due: rig time is not real time.
    struct Pacer {
        #[cfg_attr(not(feature = "endless"), allow(dead_code))]
        syst: SYST,
    }

    impl Pacer {
        /// mps2-an386's core clock, Hz.
        #[cfg_attr(not(feature = "endless"), allow(dead_code))]
        const CORE_HZ: u32 = 25_000_000;

        fn new(#[allow(unused_mut)] mut syst: SYST) -> Self {
            #[cfg(feature = "endless")]
            {
                use cortex_m::peripheral::syst::SystClkSource;
                let per_sample = Self::CORE_HZ / (1000 / DT_MS) / build_env::SPEEDUP.max(1);
                syst.disable_interrupt();
                syst.set_clock_source(SystClkSource::Core);
                syst.set_reload(per_sample.clamp(1, 0x00FF_FFFF) - 1);
                syst.clear_current();
                syst.enable_counter();
            }
            Pacer { syst }
        }

        /// Whether the next sample is due; polled, never waits. In
        /// `endless` mode it reads (and clears) SysTick's wrap flag.
        fn due(&mut self) -> bool {
            #[cfg(feature = "endless")]
            {
                self.syst.has_wrapped()
            }
            #[cfg(not(feature = "endless"))]
            {
                true
            }
        }
    }
}
