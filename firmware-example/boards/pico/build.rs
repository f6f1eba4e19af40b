//! Build script of the Pico firmware: the memory map and linker scripts
//! for the bare-metal target, and the rig's command key.
//!
//! - `memory.x` goes into `OUT_DIR`, where cortex-m-rt's `link.x` finds it;
//! - the firmware links with `--nmagic`, `-Tlink.x`, `-Tlink-rp.x` (puts
//!   `.boot2` at the start of flash; see `check-boot2.sh`) and, with the
//!   `defmt` feature, `-Tdefmt.x`. Only for a `thumb*` target: a host
//!   `cargo check --target x86_64-...` gets no linker arguments;
//! - it warns when the rustflags lack `sha2_backend_soft="compact"` (a
//!   `RUSTFLAGS` variable replaces those of `.cargo/config.toml`);
//! - `../provision.rs` writes `$OUT_DIR/command_key.rs` from
//!   `HEATBOUND_KEY_FILE` (the path of a 64-hex-digit key file, mode 600),
//!   or a `None` key without it.

use std::env;
use std::fs;
use std::path::PathBuf;

include!("../provision.rs");

fn main() {
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rerun-if-changed=../provision.rs");

    let target = env::var("TARGET").unwrap_or_default();
    if target.starts_with("thumb") {
        let out = PathBuf::from(env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
        let memory = fs::read("memory.x").unwrap_or_else(|e| panic!("cannot read memory.x: {e}"));
        fs::write(out.join("memory.x"), memory).expect("cannot write OUT_DIR/memory.x");
        println!("cargo:rustc-link-search={}", out.display());
        println!("cargo:rustc-link-arg-bins=--nmagic");
        println!("cargo:rustc-link-arg-bins=-Tlink.x");
        println!("cargo:rustc-link-arg-bins=-Tlink-rp.x");
        if env::var_os("CARGO_FEATURE_DEFMT").is_some() {
            println!("cargo:rustc-link-arg-bins=-Tdefmt.x");
        }
        // A RUSTFLAGS variable replaces the rustflags of .cargo/config.toml,
        // and with them the compact SHA-256 that keeps the image in 64 KiB.
        let rustflags = env::var("CARGO_ENCODED_RUSTFLAGS").unwrap_or_default();
        if !rustflags.contains("sha2_backend_soft=\"compact\"") {
            println!(
                "cargo:warning=rustflags lack --cfg sha2_backend_soft=\"compact\" \
                 (RUSTFLAGS replaces .cargo/config.toml's): SHA-256 is unrolled, about 8 KiB more flash"
            );
        }
    }

    provision_command_key();
}
