//! This boot's session number, from the ring oscillator.
//!
//! Where it sits: read once at boot into `AppConfig::session`, which the
//! Hello carries and every command's MAC covers. A command recorded in one
//! session is refused in the next, so the number must differ from boot to
//! boot and not be guessable from earlier ones.
//!
//! ```text
//! ROSC RANDOMBIT --RoscRng (64 bytes = 512 raw bits)--> FNV-1a fold --fmix32--> session
//! ```
//!
//! The RP2040's only entropy source is the ring oscillator's jitter, read
//! one bit at a time from `ROSC.RANDOMBIT`. The RP2040 datasheet's
//! ring-oscillator chapter warns that these bits are not of cryptographic
//! quality: they are not uniform and successive ones are correlated,
//! so this reads sixteen times more bits than it keeps and folds them all
//! into the 32-bit result with a multiply-xor hash (FNV-1a, then the
//! `fmix32` finaliser of `MurmurHash3` so that every raw bit can reach every
//! output bit). A session number only has to be fresh at each boot and
//! hard to predict; this is not a key generator.

use embassy_rp::clocks::RoscRng;

/// Raw ROSC bytes folded into one session number.
const RAW_BYTES: usize = 64;

/// A fresh session number. The ring oscillator must be running, as it is
/// under `embassy_rp::init`'s default clock configuration.
pub fn draw() -> u32 {
    let mut raw = [0u8; RAW_BYTES];
    RoscRng.fill_bytes(&mut raw);
    fmix32(fnv1a(&raw))
}

/// FNV-1a, 32-bit (offset basis 2166136261, prime 16777619).
fn fnv1a(bytes: &[u8]) -> u32 {
    bytes.iter().fold(0x811C_9DC5, |h, &b| {
        (h ^ u32::from(b)).wrapping_mul(0x0100_0193)
    })
}

/// The 32-bit finaliser of `MurmurHash3`: a bijection that avalanches.
fn fmix32(mut h: u32) -> u32 {
    h ^= h >> 16;
    h = h.wrapping_mul(0x85EB_CA6B);
    h ^= h >> 13;
    h = h.wrapping_mul(0xC2B2_AE35);
    h ^= h >> 16;
    h
}
