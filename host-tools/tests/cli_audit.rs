//! `heatbound audit`: clean simulated captures are trustworthy; damaged,
//! tampered and inconsistent ones are not, and say why; bad input is a
//! one-line error with exit status 2.
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use heatbound::alarm::RuleId;
use heatbound::wire::{self, Frame};
use serde_json::Value;
use tempfile::TempDir;

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// Simulates `scenario` for `duration_s` into `dir`; returns the capture's path.
fn capture(dir: &TempDir, scenario: &str, duration_s: u32) -> PathBuf {
    let path = dir.path().join(format!("{scenario}.bin"));
    heatbound()
        .args(["simulate", "--scenario", scenario, "--duration-s"])
        .arg(duration_s.to_string())
        .arg("--output")
        .arg(&path)
        .assert()
        .success();
    path
}

/// Audits `path` with `--json`; returns the exit status and the report.
fn audit_json(path: &Path) -> (i32, Value) {
    let out = heatbound()
        .arg("audit")
        .arg(path)
        .arg("--json")
        .output()
        .expect("run heatbound");
    let code = out.status.code().expect("an exit status");
    let report = serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "JSON report ({e}); stderr: {}",
            String::from_utf8_lossy(&out.stderr)
        )
    });
    (code, report)
}

/// Rewrites every frame of the capture at `src` through `edit` into `dst`,
/// re-encoding it (so the CRC is valid).
fn rewrite(src: &Path, dst: &Path, mut edit: impl FnMut(&mut Frame)) {
    let bytes = std::fs::read(src).expect("read capture");
    let mut out = Vec::new();
    for chunk in bytes.split_inclusive(|&b| b == 0) {
        let mut frame = wire::decode(chunk).expect("a clean capture");
        edit(&mut frame);
        let mut buf = [0u8; wire::MAX_FRAME_LEN];
        let n = wire::encode(&frame, &mut buf).expect("encode");
        out.extend_from_slice(&buf[..n]);
    }
    std::fs::write(dst, out).expect("write capture");
}

#[test]
fn clean_simulated_captures_are_trustworthy() {
    let dir = TempDir::new().expect("temp dir");
    for scenario in ["steady", "thermocouple-drift"] {
        let path = capture(&dir, scenario, 600);
        let (code, r) = audit_json(&path);
        assert_eq!(code, 0, "{scenario}: {r:#}");
        assert_eq!(r["trustworthy"], true);
        assert_eq!(r["integrity"]["crc_errors"], 0);
        assert_eq!(r["integrity"]["config_digest_matches"], true);
        assert_eq!(r["recomputation"]["summaries"], 600);
        assert_eq!(r["recomputation"]["mismatches"], 0, "{scenario}: {r:#}");
        assert_eq!(r["second_law"]["unflagged"], 0);
        assert_eq!(r["alarm_consistency"]["unsupported"], 0);
        assert_eq!(r["alarm_consistency"]["missed"], 0);
    }
    // The drift's impossible readings are in the record, and flagged.
    let (_, r) = audit_json(&dir.path().join("thermocouple-drift.bin"));
    assert!(r["second_law"]["violations"].as_u64() > Some(10), "{r:#}");
    assert!(r["alarm_consistency"]["activations"].as_u64() >= Some(1));
}

#[test]
fn the_readable_report_has_sections_and_the_caution() {
    let dir = TempDir::new().expect("temp dir");
    let path = capture(&dir, "steady", 60);
    let out = heatbound()
        .arg("audit")
        .arg(&path)
        .output()
        .expect("run heatbound");
    assert_eq!(out.status.code(), Some(0));
    let text = String::from_utf8(out.stdout).expect("UTF-8");
    for section in [
        "integrity",
        "recomputation",
        "second law",
        "alarm consistency",
    ] {
        assert!(
            text.lines()
                .any(|l| l.starts_with(section) && l.contains("PASS")),
            "{section}: {text}"
        );
    }
    assert!(text.contains("verdict: trustworthy"), "{text}");
    assert!(text.contains("Caution"), "{text}");
}

#[test]
fn flipped_bytes_and_a_deleted_chunk_are_losses_and_gaps() {
    let dir = TempDir::new().expect("temp dir");
    let path = capture(&dir, "steady", 120);
    let mut bytes = std::fs::read(&path).expect("read capture");
    // Flip bits inside a frame in the first half (never turning a byte
    // into a delimiter, nor a delimiter into a byte), then cut out a chunk
    // of the second half.
    let at = (2_000usize..)
        .find(|&i| bytes[i] != 0 && bytes[i + 1] != 0)
        .expect("two bytes inside a frame");
    for i in [at, at + 1] {
        bytes[i] = if bytes[i] == 0xFF {
            0x7F
        } else {
            bytes[i] ^ 0x80 | 1
        };
    }
    bytes.drain(6_000..6_500);
    let damaged = dir.path().join("damaged.bin");
    std::fs::write(&damaged, &bytes).expect("write");
    let (code, r) = audit_json(&damaged);
    assert_eq!(code, 1, "{r:#}");
    assert_eq!(r["trustworthy"], false);
    let g = &r["integrity"];
    assert_eq!(g["pass"], false);
    let losses = g["crc_errors"].as_u64().unwrap_or(0) + g["malformed"].as_u64().unwrap_or(0);
    assert!(losses >= 2, "{g:#}");
    assert!(g["missing_summaries"].as_u64() >= Some(6), "{g:#}");
    // The surviving summaries still recompute.
    assert_eq!(r["recomputation"]["mismatches"], 0);
}

#[test]
fn a_tampered_figure_fails_recomputation() {
    let dir = TempDir::new().expect("temp dir");
    let path = capture(&dir, "steady", 120);
    let tampered = dir.path().join("tampered.bin");
    rewrite(&path, &tampered, |f| {
        if let Frame::Summary(s) = f
            && s.seq == 50
        {
            s.entropy_rate_w_per_k = s.entropy_rate_w_per_k.map(|p| p * 1.01 + 1e-3);
        }
    });
    let (code, r) = audit_json(&tampered);
    assert_eq!(code, 1, "{r:#}");
    assert_eq!(r["integrity"]["pass"], true, "the CRC is valid");
    let rc = &r["recomputation"];
    assert_eq!(rc["pass"], false);
    assert_eq!(rc["mismatches"], 1);
    assert_eq!(rc["first_mismatches"][0]["seq"], 50);
    assert_eq!(rc["first_mismatches"][0]["figure"], "entropy_rate_w_per_k");
}

#[test]
fn a_forged_verdict_fails_the_diagnosis_check() {
    use heatbound::monitor::Channel;
    let dir = TempDir::new().expect("temp dir");
    let path = capture(&dir, "steady", 120);
    let forged = dir.path().join("forged-verdict.bin");
    rewrite(&path, &forged, |f| {
        if let Frame::Summary(s) = f
            && s.seq == 70
        {
            s.verdict.consistent = Some(false);
            s.verdict.suspect = Some(Channel::Cold);
            s.verdict.bias = Some(12.0);
        }
    });
    let (code, r) = audit_json(&forged);
    assert_eq!(code, 1, "{r:#}");
    let d = &r["diagnosis"];
    assert_eq!(d["pass"], false, "{d:#}");
    assert_eq!(d["mismatches"], 1, "{d:#}");
    assert_eq!(d["first_mismatches"][0]["seq"], 70);
    assert!(
        d["first_mismatches"][0]["message"]
            .as_str()
            .is_some_and(|m| m.contains("suspect cold")),
        "{d:#}"
    );
    // The unforged capture's verdicts all recompute.
    let (_, clean) = audit_json(&path);
    assert_eq!(clean["diagnosis"]["pass"], true, "{:#}", clean["diagnosis"]);
    assert!(clean["diagnosis"]["compared"].as_u64() > Some(50));
}

#[test]
fn an_alarm_bit_without_its_condition_fails_alarm_consistency() {
    let dir = TempDir::new().expect("temp dir");
    let path = capture(&dir, "steady", 120);
    let forged = dir.path().join("forged.bin");
    rewrite(&path, &forged, |f| {
        if let Frame::Summary(s) = f
            && (60..70).contains(&s.seq)
        {
            s.alarms |= 1 << RuleId::BeyondCarnot.index();
        }
    });
    let (code, r) = audit_json(&forged);
    assert_eq!(code, 1, "{r:#}");
    let a = &r["alarm_consistency"];
    assert_eq!(a["pass"], false);
    assert_eq!(a["unsupported"], 1, "{a:#}");
    assert_eq!(a["findings"][0]["rule"], "beyond_carnot");
    assert_eq!(r["recomputation"]["pass"], true);
}

#[test]
fn a_capture_without_hello_is_not_trustworthy() {
    let dir = TempDir::new().expect("temp dir");
    let path = capture(&dir, "steady", 30);
    let bytes = std::fs::read(&path).expect("read capture");
    let first = bytes.iter().position(|&b| b == 0).expect("a delimiter");
    let headless = dir.path().join("headless.bin");
    std::fs::write(&headless, &bytes[first + 1..]).expect("write");
    let (code, r) = audit_json(&headless);
    assert_eq!(code, 1);
    assert_eq!(r["integrity"]["hello_before_first_summary"], false);
}

#[test]
fn unreadable_input_is_a_one_line_error() {
    let dir = TempDir::new().expect("temp dir");
    let db = dir.path().join("log.db");
    std::fs::write(&db, b"SQLite format 3\0 and then some").expect("write");
    for path in [dir.path().join("missing.bin"), db] {
        let out = heatbound()
            .arg("audit")
            .arg(&path)
            .output()
            .expect("run heatbound");
        assert_eq!(out.status.code(), Some(2));
        assert!(out.stdout.is_empty());
        let err = String::from_utf8(out.stderr).expect("UTF-8");
        assert_eq!(err.lines().count(), 1, "{err}");
        assert!(err.starts_with("heatbound: error: "), "{err}");
    }
}

#[test]
fn help_documents_the_exit_codes() {
    let out = heatbound()
        .args(["audit", "--help"])
        .output()
        .expect("run heatbound");
    let text = String::from_utf8(out.stdout).expect("UTF-8");
    assert!(text.contains("Exit status: 0"), "{text}");
}

#[test]
fn a_log_database_is_audited_from_its_latest_run() {
    use heatbound_host::store::Log;
    let dir = TempDir::new().expect("temp dir");
    let path = capture(&dir, "thermocouple-drift", 600);
    let bytes = std::fs::read(&path).expect("read capture");
    let db = dir.path().join("log.db");
    {
        let mut log = Log::open(&db).expect("create log");
        // An earlier, damaged run that the default audit must not pick.
        let old = log.begin_run("test:old", 0).expect("run");
        log.end_run(old, 1).expect("end run");
        let run = log.begin_run("test:sim", 1_000).expect("run");
        for (i, chunk) in bytes.split_inclusive(|&b| b == 0).enumerate() {
            let frame = wire::decode(chunk).expect("a clean capture");
            log.insert_frame(run, 1_000 + i as i64, &frame)
                .expect("insert frame");
        }
        log.end_run(run, 2_000_000).expect("end run");
        log.commit().expect("commit");
    }
    let (code, r) = audit_json(&db);
    assert_eq!(code, 0, "{r:#}");
    assert_eq!(r["recomputation"]["summaries"], 600);
    assert_eq!(r["recomputation"]["mismatches"], 0);
    // The empty first run has nothing to trust.
    let out = heatbound()
        .arg("audit")
        .arg(&db)
        .args(["--run", "1"])
        .output()
        .expect("run heatbound");
    assert_eq!(out.status.code(), Some(1));
}

#[test]
fn input_with_no_frame_at_all_is_unreadable_not_untrustworthy() {
    let dir = tempfile::tempdir().unwrap();
    let cases: [(&str, Vec<u8>); 3] = [
        ("empty.bin", Vec::new()),
        ("run.csv", b"t_s,hot_c,cold_c\n0,500,20\n".to_vec()),
        // Bytes from a fixed xorshift sequence stand in for random data.
        ("noise.bin", {
            let mut x: u32 = 0x9E37_79B9;
            (0..4096)
                .map(|_| {
                    x ^= x << 13;
                    x ^= x >> 17;
                    x ^= x << 5;
                    x as u8
                })
                .collect()
        }),
    ];
    for (name, bytes) in cases {
        let path = dir.path().join(name);
        std::fs::write(&path, bytes).unwrap();
        let out = heatbound().arg("audit").arg(&path).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{name}");
        let err = String::from_utf8(out.stderr).unwrap();
        assert!(
            err.contains("not a heatbound capture or log"),
            "{name}: {err}"
        );
    }
}
