//! Linker set-up for the bare-metal binaries, and nothing for anyone else.
//!
//! Only with the `bare-metal` feature on a `thumb*` target: the board's
//! memory map goes into `OUT_DIR` as `memory.x` (the name cortex-m-rt's
//! `link.x` includes) and the bins link with `-Tlink.x`: `memory.x` (QEMU
//! mps2-an386) for Cortex-M4F builds, `memory/microbit.x` (QEMU microbit,
//! nRF51) for Cortex-M0 (`thumbv6m`) builds. An empty `device.x` goes beside
//! it: cortex-m-rt's `device` feature includes one, and the bins provide
//! their own interrupt vectors (`src/bin/shared/hw.rs`).
//!
//! Host builds, tests and clippy get no linker arguments, and neither does
//! a board crate that uses this one as a library (no `bare-metal`): a
//! dependency's link search path reaches its dependents' link, and the
//! QEMU `memory.x` must never be the one a real board finds.
//!
//! The deployable QEMU image (neither `measure` nor `defmt`) also links with
//! identical code folding (`--icf=all`, rust-lld): monomorphised copies that
//! compile to the same bytes are kept once, about 350 bytes of its 64 KiB
//! budget. Rust gives functions no address identity (LLVM `unnamed_addr`),
//! so folding them is sound. Not with `defmt`, whose interned strings are
//! identical one-byte sections told apart by their addresses; and not in
//! `measure` builds, whose profile is read per function.

use std::env;
use std::fs;
use std::path::PathBuf;

fn main() {
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rerun-if-changed=memory/microbit.x");

    let target = env::var("TARGET").unwrap_or_default();
    let feature = |name: &str| env::var_os(format!("CARGO_FEATURE_{name}")).is_some();
    if !target.starts_with("thumb") || !feature("BARE_METAL") {
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
    fs::write(
        out.join("device.x"),
        "/* The interrupt vectors are the binaries' own (src/bin/shared/hw.rs). */\n",
    )
    .expect("cannot write OUT_DIR/device.x");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rustc-link-arg-bins=-Tlink.x");
    if feature("DEFMT") {
        println!("cargo:rustc-link-arg-bins=-Tdefmt.x");
    } else if !feature("MEASURE") {
        println!("cargo:rustc-link-arg-bins=--icf=all");
    }
}
