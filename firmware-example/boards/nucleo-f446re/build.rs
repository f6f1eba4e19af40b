//! Build script for the Nucleo-F446RE image: the linker set-up and the
//! rig's identity (command key and rig id).
//!
//! - `memory.x` (this board's map) is copied into `OUT_DIR`, which goes on
//!   the linker's search path: cortex-m-rt's `link.x` includes the first
//!   `memory.x` it finds. `board.x` fails the link if the map in use is not
//!   this board's, should another crate in the build graph ever put its own
//!   on the path.
//! - `budget.x` fails the link if the deployable image (release, no
//!   `defmt`) exceeds the project's budget: 64 KiB of flash, 16 KiB of
//!   static RAM.
//! - The bins link with `-Tlink.x` and `-Tboard.x`, plus `-Tdefmt.x` with
//!   the `defmt` feature and `-Tbudget.x` for the deployable image.
//! - `HEATBOUND_KEY_FILE` is read by the shared `provision.rs` into
//!   `$OUT_DIR/command_key.rs`.
//! - `HEATBOUND_RIG_ID`, if set, is checked here so a bad id fails the build
//!   instead of the boot.

use std::env;
use std::fs;
use std::path::PathBuf;

include!("../provision.rs");

/// The longest rig id the wire format carries, bytes (`RigId::LEN`).
const RIG_ID_MAX_LEN: usize = 16;

fn main() {
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rerun-if-changed=board.x");
    println!("cargo:rerun-if-changed=budget.x");
    println!("cargo:rerun-if-changed=../provision.rs");

    let out = PathBuf::from(env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    for script in ["memory.x", "board.x", "budget.x"] {
        let text = fs::read(script).unwrap_or_else(|e| panic!("cannot read {script}: {e}"));
        fs::write(out.join(script), text)
            .unwrap_or_else(|e| panic!("cannot write OUT_DIR/{script}: {e}"));
    }
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
    println!("cargo:rustc-link-arg-bins=-Tboard.x");
    let defmt = env::var_os("CARGO_FEATURE_DEFMT").is_some();
    if defmt {
        println!("cargo:rustc-link-arg-bins=-Tdefmt.x");
    }
    if !defmt && env::var("PROFILE").as_deref() == Ok("release") {
        println!("cargo:rustc-link-arg-bins=-Tbudget.x");
    }

    provision_command_key();
    check_rig_id();
}

/// Fails the build if `HEATBOUND_RIG_ID` is not 1 to 16 bytes of printable
/// ASCII (what `heatbound::wire::RigId::new` accepts).
fn check_rig_id() {
    println!("cargo:rerun-if-env-changed=HEATBOUND_RIG_ID");
    let Some(id) = env::var_os("HEATBOUND_RIG_ID") else {
        return;
    };
    let id = id.to_string_lossy();
    let printable = id.bytes().all(|b| (b' '..=b'~').contains(&b));
    if id.is_empty() || id.len() > RIG_ID_MAX_LEN || !printable {
        panic!(
            "HEATBOUND_RIG_ID {id:?}: a rig id is 1 to {RIG_ID_MAX_LEN} bytes of printable ASCII"
        );
    }
}
