//! The cycle-file reader on arbitrary text: it must never panic, and a
//! report it returns renders as a table and as JSON.
#![no_main]

use heatbound_host::cycle_file;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match cycle_file::evaluate_text(text) {
        Ok(report) => {
            let _ = report.table("fuzz.toml");
            assert!(serde_json::to_string(&report.json()).is_ok());
        }
        Err(e) => assert!(!e.to_string().is_empty()),
    }
});
