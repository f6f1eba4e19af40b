//! The `rig.toml` loader on arbitrary text: it must never panic, and a
//! configuration it accepts must load again from its own defaults check.
#![no_main]

use heatbound_host::rigfile;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match rigfile::config_from_text(text, "rig.toml") {
        Ok(config) => assert!(config.window_samples > 0),
        // The message is built (placing the error in the text) without panicking.
        Err(e) => assert!(!e.to_string().is_empty()),
    }
});
