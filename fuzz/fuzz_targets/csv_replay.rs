//! The CSV replay behind `analyze` on arbitrary bytes: it must never panic,
//! and every figure of a report it returns must be finite. The same bytes
//! are also read as another logger's file, under one of a few `[csv]`
//! layouts (picked by the input's length): semicolons and decimal commas
//! with a preamble and ISO 8601 local times, tabs with spreadsheet dates and
//! °F, and blank-aligned columns with raw thermocouple and RTD signals.
#![no_main]

use std::sync::OnceLock;

use heatbound::config::RigConfig;
use heatbound_host::replay;
use heatbound_host::rigfile::{RigToml, rig_from_text};
use libfuzzer_sys::fuzz_target;

const LAYOUTS: [&str; 3] = [
    "[csv]\ndelimiter = \";\"\ndecimal = \",\"\nskip_lines = 1\ntime_zone = \"Europe/Berlin\"\n\
     time = { column = \"t\", unit = \"iso8601\" }\n\
     hot = { column = \"a\", unit = \"mV\", sensor = \"k\", cold_junction = { column = \"cj\", unit = \"degC\" } }\n\
     cold = { column = \"b\", unit = \"ohm\", sensor = \"pt100\" }\n\
     heat_in = { column = \"p\", unit = \"kW\" }\nwork = { column = \"w\", unit = \"mW\" }\n",
    "[csv]\ndelimiter = \"\\t\"\ntime = { column = \"t\", unit = \"excel_days\" }\n\
     hot = { column = \"a\", unit = \"degF\" }\ncold = { column = \"b\", unit = \"K\" }\n\
     heat_in = { column = \"p\", unit = \"W\" }\nwork = { column = \"w\", unit = \"W\" }\n\
     heat_out = { column = \"q\", unit = \"W\" }\n",
    "[csv]\ndelimiter = \" \"\ntime = { column = \"t\", unit = \"ms\" }\n\
     hot = { column = \"a\", unit = \"mV\", sensor = \"type-t\", cold_junction_c = 0 }\n\
     cold = { column = \"b\", unit = \"ohm\", sensor = \"pt1000\" }\n\
     heat_in = { column = \"p\", unit = \"W\" }\nwork = { column = \"w\", unit = \"W\" }\n",
];

fn layouts() -> &'static [RigToml] {
    static PARSED: OnceLock<Vec<RigToml>> = OnceLock::new();
    PARSED.get_or_init(|| {
        LAYOUTS
            .iter()
            .map(|t| rig_from_text(t, "fuzz.toml").expect("a valid [csv] table"))
            .collect()
    })
}

fn check(report: &replay::Replay) {
    // Both renderings must work on whatever was accepted; JSON refuses
    // NaN and infinity, so this also checks that none reached the report.
    let _ = report.text("fuzz.csv");
    assert!(
        report.json_text().is_ok(),
        "a report that is not valid JSON"
    );
}

fuzz_target!(|data: &[u8]| {
    if let Ok(report) = replay::replay(data, &RigConfig::default(), None) {
        check(&report);
    }
    let rigs = layouts();
    let rig = &rigs[data.len() % rigs.len()];
    if let Ok(report) = replay::replay_with(data, &rig.config, rig.csv.as_ref(), None) {
        check(&report);
    }
});
