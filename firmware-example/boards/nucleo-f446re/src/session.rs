//! This boot's session number, from the best entropy the STM32F446 has.
//!
//! Where it sits: at boot, before the App is built.
//!
//! ```text
//! LSI (~32 kHz RC) --TIM5 CH4 capture of the 84 MHz timer clock--> 256 period stamps --+
//! 96-bit device UID ------------------------------------------------------------------+--> SHA-256 --> session
//! embassy-time ticks since reset -----------------------------------------------------+
//! ```
//!
//! The session number is what makes a command recorded before a restart
//! useless after it (`Hello::session`), so it should differ at every boot
//! and be hard to guess. The STM32F446 has **no hardware random number
//! generator**: unlike the F405/F407/F427/F429, it has no RNG peripheral
//! (RM0390 has no RNG chapter, and embassy-stm32 has no `rng::Rng` for this
//! chip), so embassy's `Rng` cannot be used here. The best on-chip source
//! left is the jitter between two independent oscillators:
//!
//! - TIM5 channel 4 can be wired inside the chip to the LSI RC oscillator
//!   (TIM5_OR.TI4_RMP = 01, provided for LSI calibration). TIM5 counts the
//!   timer clock (84 MHz from the PLL, itself from the HSI RC oscillator)
//!   and captures the count at every LSI rising edge: about 2,600 counts
//!   per LSI period, whose low bits wander with both oscillators' phase
//!   noise. 256 periods (about 8 ms) are captured.
//! - The 96-bit unique device ID: not secret, but it makes two boards'
//!   sessions differ even where the jitter is small.
//! - The embassy-time tick count at the end, which varies with the boot.
//!
//! SHA-256 condenses all of it; the session is the first four bytes. How
//! many bits of the jitter are truly unpredictable has not been measured on
//! hardware: treat the session as a restart marker that is unlikely to
//! repeat, not as a cryptographic nonce. The command counter and the key
//! still authenticate every command.

use embassy_stm32::Peri;
use embassy_stm32::peripherals::TIM5;
use embassy_stm32::timer::Channel;
use embassy_stm32::timer::low_level::{InputCaptureMode, InputTISelection, Timer};
use embassy_time::{Duration, Instant};
use sha2::{Digest, Sha256};

/// LSI periods captured.
const CAPTURES: u16 = 256;

/// TIM5_OR with TI4_RMP = 01: channel 4's input is the LSI oscillator.
const TIM5_OR_TI4_LSI: u32 = 0b01 << 6;

/// The longest wait for one LSI edge. The LSI runs at 17–47 kHz
/// (datasheet range), so a period is at most 59 µs; a millisecond without
/// an edge means the LSI is not running.
const EDGE_TIMEOUT: Duration = Duration::from_millis(1);

/// A drawn session number and how it was drawn.
pub struct Session {
    /// The session number (never 0, which means "not set").
    pub number: u32,
    /// LSI periods captured (all of [`CAPTURES`] unless the LSI stalled).
    pub captures: u16,
    /// Largest minus smallest LSI period seen, in timer counts: 0 means no
    /// jitter was observed and the session rests on the UID and the boot
    /// time alone.
    pub spread: u32,
}

/// Draws this boot's session number (about 8 ms at boot).
pub fn draw(tim: Peri<'_, TIM5>) -> Session {
    let mut hash = Sha256::new();
    hash.update(embassy_stm32::uid::uid());

    let timer = Timer::new(tim);
    timer.regs_gp32().or().write_value(TIM5_OR_TI4_LSI);
    timer.set_input_ti_selection(Channel::Ch4, InputTISelection::Normal);
    timer.set_input_capture_mode(Channel::Ch4, InputCaptureMode::Rising);
    // Free-running over all 32 bits at the full timer clock (prescaler 0
    // after the reset in `Timer::new`).
    timer.set_max_compare_value(u32::MAX);
    timer.enable_channel(Channel::Ch4, true);
    timer.start();

    let mut captures = 0u16;
    let mut previous: Option<u32> = None;
    let (mut shortest, mut longest) = (u32::MAX, 0u32);
    'capture: while captures < CAPTURES {
        let deadline = Instant::now() + EDGE_TIMEOUT;
        while !timer.get_input_interrupt(Channel::Ch4) {
            if Instant::now() > deadline {
                break 'capture;
            }
        }
        // Reading the capture register clears the capture flag.
        let stamp = timer.get_capture_value(Channel::Ch4);
        hash.update(stamp.to_le_bytes());
        if let Some(p) = previous {
            let period = stamp.wrapping_sub(p);
            shortest = shortest.min(period);
            longest = longest.max(period);
        }
        previous = Some(stamp);
        captures += 1;
    }
    drop(timer);

    hash.update(Instant::now().as_ticks().to_le_bytes());
    let digest = hash.finalize();
    let mut first = [0u8; 4];
    first.copy_from_slice(digest.get(..4).unwrap_or(&[0; 4]));
    let number = match u32::from_le_bytes(first) {
        0 => 1,
        n => n,
    };
    Session {
        number,
        captures,
        spread: longest.saturating_sub(shortest),
    }
}
