//! The CSV replay behind `analyze` on arbitrary bytes: it must never panic,
//! and every figure of a report it returns must be finite.
#![no_main]

use heatbound::config::RigConfig;
use heatbound_host::replay;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(report) = replay::replay(data, &RigConfig::default(), None) else {
        return;
    };
    // Both renderings must work on whatever was accepted; JSON refuses
    // NaN and infinity, so this also checks that none reached the report.
    let _ = report.text("fuzz.csv");
    assert!(
        report.json_text().is_ok(),
        "a report that is not valid JSON"
    );
});
