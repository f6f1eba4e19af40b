//! Build-time settings of the bare-metal binaries, read from the environment
//! of `cargo build` (`option_env!`), so one ELF is one reproducible run.
//!
//! | variable | default | meaning |
//! |---|---|---|
//! | `HEATBOUND_SCENARIO` | `thermocouple-drift` | the rig's scenario ([`Scenario::parse`](heatbound_firmware_example::rig::Scenario::parse) names) |
//! | `HEATBOUND_SEED` | 1 | the rig's noise seed |
//! | `HEATBOUND_DURATION_S` | 600 | rig time simulated before exiting (bounded mode) |
//! | `HEATBOUND_SPEEDUP` | 1 | `endless` mode: rig seconds per real second |
//! | `HEATBOUND_MEASURE_SAMPLES` | 5900 | `measure` builds: samples measured after the warm-up |
//!
//! A malformed number fails the build (const evaluation).
//!
//! The controller's session number ([`SESSION`]) is derived from the seed:
//! QEMU gives the firmware no random source.

/// The scenario's name.
pub const SCENARIO: &str = match option_env!("HEATBOUND_SCENARIO") {
    Some(s) => s,
    None => "thermocouple-drift",
};

/// The rig's noise seed.
pub const SEED: u64 = parse_u32(option_env!("HEATBOUND_SEED"), 1) as u64;

/// The session number the emulated controller announces in its Hello and
/// authenticates commands for.
///
/// A real controller draws a fresh one from a random source at every boot,
/// so a command recorded in one session is refused in the next. QEMU's
/// mps2-an386 offers no random source, so here it is derived from
/// [`SEED`] at build time (the same mixing as the host's simulation,
/// `host-tools/src/sil.rs`): every boot of one ELF has the same session,
/// and a command recorded against one boot is accepted again by the next
/// boot of the same ELF, whose counter starts over. It is not secret
/// either, any more than the demo key the emulator builds use: the
/// emulator demonstrates the protocol, it protects nothing.
#[cfg_attr(feature = "measure", allow(dead_code))]
pub const SESSION: u32 = (SEED ^ (SEED >> 32)) as u32 ^ 0x5EED_5EED;

/// Rig time simulated in bounded mode, s.
#[cfg_attr(feature = "endless", allow(dead_code))]
pub const DURATION_S: u32 = parse_u32(option_env!("HEATBOUND_DURATION_S"), 600);

/// Rig seconds per real second in `endless` mode (at least 1).
#[cfg_attr(not(feature = "endless"), allow(dead_code))]
pub const SPEEDUP: u32 = parse_u32(option_env!("HEATBOUND_SPEEDUP"), 1);

/// Samples measured after the warm-up in `measure` builds.
#[cfg_attr(not(feature = "measure"), allow(dead_code))]
pub const MEASURE_SAMPLES: u32 = parse_u32(option_env!("HEATBOUND_MEASURE_SAMPLES"), 5_900);

/// A decimal `u32`, or `default` when unset; anything else stops the build.
const fn parse_u32(s: Option<&str>, default: u32) -> u32 {
    let Some(s) = s else {
        return default;
    };
    let bytes = s.as_bytes();
    assert!(!bytes.is_empty(), "empty HEATBOUND_* number");
    let mut value: u32 = 0;
    let mut i = 0;
    while i < bytes.len() {
        let d = bytes[i];
        assert!(d.is_ascii_digit(), "HEATBOUND_* numbers are decimal digits");
        value = match value.checked_mul(10) {
            Some(v) => match v.checked_add((d - b'0') as u32) {
                Some(v) => v,
                None => panic!("HEATBOUND_* number too large"),
            },
            None => panic!("HEATBOUND_* number too large"),
        };
        i += 1;
    }
    value
}
