//! The few things the bare-metal binaries do below safe Rust: painting the
//! stack to measure its high-water mark, a block of a known number of
//! instructions to calibrate the SysTick instruction counter, and the
//! device part of the vector table.
//!
//! Where it sits: called by `main` at boot (paint), at exit (high-water
//! mark) and by the measurement mode (calibration); the vector table is
//! read by the core at reset and on an interrupt.
#![allow(unsafe_code)]

/// Device interrupts the vector table has entries for: the 32 an Armv6-M
/// core can have (the nRF51 uses 26 of them), and the first 32 of
/// mps2-an386's (its UARTs, timers and GPIO are among them).
const DEVICE_INTERRUPTS: usize = 32;

unsafe extern "C" {
    /// cortex-m-rt's handler for any exception or interrupt without its
    /// own (it loops forever).
    fn DefaultHandler();
}

/// The device interrupts' part of the vector table, which cortex-m-rt's
/// `device` feature leaves to the application (a peripheral access crate
/// would provide it). Without that feature cortex-m-rt fills in 240
/// entries, 960 bytes of flash for the Cortex-M4F image, which fits the
/// 64 KiB budget only without them. No binary here enables an interrupt
/// (UART0 is polled, SysTick is read without its exception), so every
/// entry is `DefaultHandler`.
#[unsafe(link_section = ".vector_table.interrupts")]
#[unsafe(no_mangle)]
static __INTERRUPTS: [unsafe extern "C" fn(); DEVICE_INTERRUPTS] =
    [DefaultHandler; DEVICE_INTERRUPTS];

/// The word the free stack is filled with at boot.
const PAINT: u32 = 0xC0DE_57AC;

/// Bytes below the live stack pointer left unpainted while painting: the
/// painting function's own frame lives there.
const PAINT_MARGIN_BYTES: usize = 256;

unsafe extern "C" {
    /// Top of the stack (cortex-m-rt `link.x`): the initial MSP.
    static _stack_start: u32;
    /// Lowest address the stack may grow to: the end of `.bss`/`.uninit`
    /// (cortex-m-rt `link.x`).
    static _stack_end: u32;
}

fn stack_bounds() -> (usize, usize) {
    // Only the addresses of the linker symbols are taken; nothing is read
    // through them.
    let top = core::ptr::addr_of!(_stack_start) as usize;
    let bottom = core::ptr::addr_of!(_stack_end) as usize;
    (bottom, top)
}

/// Fills the free stack, from its lowest address to just below the current
/// stack pointer, with [`PAINT`]. Call once, early in `main`, before any
/// deep call.
#[inline(never)]
pub fn paint_stack() {
    let (bottom, _) = stack_bounds();
    let sp = cortex_m::register::msp::read() as usize;
    let end = sp.saturating_sub(PAINT_MARGIN_BYTES) & !3;
    let mut p = bottom;
    while p < end {
        // SAFETY: `p` is word aligned (`_stack_end` is asserted 4-aligned by
        // link.x) and lies in RAM between the end of the statics and the
        // live stack pointer minus a margin that covers this function's
        // frame, so no live object is there; no interrupt is enabled, so no
        // exception frame can be pushed there meanwhile.
        unsafe { core::ptr::write_volatile(p as *mut u32, PAINT) };
        p += 4;
    }
}

/// Stack bytes used so far: from the top of the stack down to the lowest
/// word that no longer holds [`PAINT`]. The unpainted margin and `main`'s
/// frame at painting time count as used, so this is an upper bound.
pub fn stack_high_water_bytes() -> usize {
    let (bottom, top) = stack_bounds();
    let mut p = bottom;
    while p < top {
        // SAFETY: `p` is word aligned and within the stack region of RAM
        // (`_stack_end..._stack_start`), which is always mapped; reading it
        // races with nothing (single core, no interrupts).
        if unsafe { core::ptr::read_volatile(p as *const u32) } != PAINT {
            break;
        }
        p += 4;
    }
    top - p
}

/// `nop`s in [`known_block`].
const KNOWN_BLOCK_NOPS: u32 = 8_000;

/// Instructions one call of [`known_block`] executes: its `nop`s, the `bl`
/// into it and the `bx lr` out (checked in the disassembly: no prologue).
// Used by the measurement mode only (the mps2-an386 bin without `measure`).
#[allow(dead_code)]
pub const KNOWN_BLOCK_INSTRUCTIONS: u32 = KNOWN_BLOCK_NOPS + 2;

/// Runs a straight line of `nop`s (no loop, no branch). Not inlined: the
/// 16 KB of `nop`s would push the caller's literal pool out of reach.
#[allow(dead_code)]
#[inline(never)]
pub fn known_block() {
    // SAFETY: `nop` has no effect on memory, registers or flags.
    unsafe {
        core::arch::asm!(
            ".rept 8000",
            "nop",
            ".endr",
            options(nomem, nostack, preserves_flags)
        );
    }
}
