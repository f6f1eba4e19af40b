//! heatbound's per-sample instruction count on a Cortex-M0 with soft float:
//! QEMU `-M microbit` (nRF51822, 256 KiB flash, 16 KiB RAM).
//!
//! Where it sits: beside the mps2-an386 firmware, for the DESIGN §6 budget
//! of ≤ 20,000 instructions per sample on Cortex-M0 (and, for information,
//! the cost of one authenticated command). It runs only the [`measure`]
//! mode (no App, no UART) and prints to semihosting stderr. QEMU 7.2's
//! nRF51 UART model does receive (STARTRX +0x000, EVENTS_RXDRDY +0x108,
//! RXD +0x518, a six-byte FIFO), but with no App here there is nothing to
//! hand received bytes to.
//! The window is the firmware's 64 samples: `Monitor<64>` and the alarms fit
//! the 16 KiB of RAM with room for the stack.
#![no_std]
#![no_main]
#![deny(unsafe_code)]

// Only the measurement settings are read here.
#[allow(dead_code)]
#[path = "../shared/build_env.rs"]
mod build_env;
#[path = "../shared/hw.rs"]
mod hw;
#[path = "../shared/measure.rs"]
mod measure;

use cortex_m_rt::entry;
use cortex_m_semihosting::debug::{self, EXIT_FAILURE, EXIT_SUCCESS};
use cortex_m_semihosting::heprintln;
use panic_semihosting as _;

#[entry]
fn main() -> ! {
    hw::paint_stack();
    let Some(cp) = cortex_m::Peripherals::take() else {
        debug::exit(EXIT_FAILURE);
        #[allow(clippy::empty_loop)]
        loop {}
    };
    let report = measure::run::<64>(cp.SYST);
    measure::print("microbit", &report);
    heprintln!("stack.high_water_bytes={}", hw::stack_high_water_bytes());
    debug::exit(EXIT_SUCCESS);
    #[allow(clippy::empty_loop)]
    loop {}
}
