//! Linker set-up for the bare-metal binaries, and nothing for the host.
//!
//! On a `thumb*` target the board's memory map goes into `OUT_DIR` as
//! `memory.x` (the name cortex-m-rt's `link.x` includes) and the bins link
//! with `-Tlink.x`: `memory.x` (QEMU mps2-an386) for Cortex-M4F builds,
//! `memory/microbit.x` (QEMU microbit, nRF51) for Cortex-M0 (`thumbv6m`)
//! builds. Host builds, tests and clippy get no linker arguments.

use std::env;
use std::fs;
use std::path::PathBuf;

fn main() {
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rerun-if-changed=memory/microbit.x");

    let target = env::var("TARGET").unwrap_or_default();
    if !target.starts_with("thumb") {
        return;
    }
    let source = if target.starts_with("thumbv6m") {
        "memory/microbit.x"
    } else {
        "memory.x"
    };
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    let memory = fs::read(source).unwrap_or_else(|e| panic!("cannot read {source}: {e}"));
    fs::write(out.join("memory.x"), memory).expect("cannot write OUT_DIR/memory.x");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
    if env::var_os("CARGO_FEATURE_DEFMT").is_some()
        && env::var_os("CARGO_FEATURE_BARE_METAL").is_some()
    {
        println!("cargo:rustc-link-arg-bins=-Tdefmt.x");
    }
}
