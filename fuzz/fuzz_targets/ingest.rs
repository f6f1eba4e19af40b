//! The ingest stream behind `watch` on arbitrary bytes in arbitrary chunks:
//! it must never panic, must count every byte, must store what it accepts,
//! and the log it leaves must audit without error.
#![no_main]

use heatbound::config::RigConfig;
use heatbound_host::audit;
use heatbound_host::ingest::{Ingest, LineStyle};
use heatbound_host::store::Log;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some((&seed, stream)) = data.split_first() else {
        return;
    };
    let Ok(dir) = tempfile::tempdir() else {
        return;
    };
    let path = dir.path().join("fuzz.sqlite");
    let log = Log::open(&path).expect("a fresh log opens");
    let mut ingest = Ingest::new(log, "fuzz", 0, LineStyle::Plain).expect("a run begins");
    let mut rest = stream;
    let mut step = usize::from(seed % 61) + 1;
    let mut host_ms = 0i64;
    while !rest.is_empty() {
        let (chunk, tail) = rest.split_at(step.min(rest.len()));
        ingest
            .feed(chunk, host_ms, |line| assert!(!line.is_empty()))
            .expect("storing into a fresh log works");
        rest = tail;
        step = (step * 7 + 5) % 97 + 1;
        host_ms += 37;
    }
    let run = ingest.run_id();
    let totals = ingest.finish(host_ms).expect("the run closes");
    assert_eq!(totals.bytes, stream.len() as u64, "every byte is counted");

    let log = Log::open_read(&path).expect("the written log reads back");
    let report = audit::audit_log(&log, Some(run), &RigConfig::default())
        .expect("a log ingest wrote can be audited");
    assert!(report.integrity.frames <= totals.frames);
});
