//! End to end through the binary: `simulate` → bytes → `watch --input` →
//! database → `audit`, and the same capture with bytes flipped.
use std::path::Path;

use assert_cmd::Command;

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").unwrap()
}

fn simulate(capture: &Path, scenario: &str) {
    heatbound()
        .args([
            "simulate",
            "--scenario",
            scenario,
            "--duration-s",
            "600",
            "--seed",
            "7",
            "--output",
        ])
        .arg(capture)
        .assert()
        .success();
}

fn watch(capture: &Path, db: &Path) -> String {
    let out = heatbound()
        .args(["watch", "--quiet", "--input"])
        .arg(capture)
        .arg("--db")
        .arg(db)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

fn audit_json(input: &Path) -> (Option<i32>, serde_json::Value) {
    let out = heatbound()
        .arg("audit")
        .arg(input)
        .arg("--json")
        .output()
        .unwrap();
    let report = serde_json::from_slice(&out.stdout)
        .unwrap_or_else(|e| panic!("{e}: {}", String::from_utf8_lossy(&out.stdout)));
    (out.status.code(), report)
}

#[test]
fn a_clean_simulated_run_is_logged_and_audits_trustworthy() {
    let dir = tempfile::tempdir().unwrap();
    let (capture, db) = (dir.path().join("run.bin"), dir.path().join("run.sqlite"));
    simulate(&capture, "thermocouple-drift");
    watch(&capture, &db);

    let conn = rusqlite::Connection::open(&db).unwrap();
    let count = |sql: &str| -> i64 { conn.query_row(sql, [], |r| r.get(0)).unwrap() };
    // 600 s at one summary per second.
    assert_eq!(count("SELECT COUNT(*) FROM summaries"), 600);
    assert_eq!(
        count("SELECT COUNT(*) FROM events WHERE rule = 'beyond_carnot' AND kind = 'raised'"),
        1
    );
    assert_eq!(count("SELECT COUNT(*) FROM link_errors"), 0);

    let (code, report) = audit_json(&db);
    assert_eq!(code, Some(0), "{report:#}");
    assert_eq!(report["trustworthy"], true);
    // The capture itself audits the same way.
    let (code, _) = audit_json(&capture);
    assert_eq!(code, Some(0));
}

#[test]
fn flipped_bytes_are_counted_as_losses_and_fail_the_audit() {
    let dir = tempfile::tempdir().unwrap();
    let (capture, db) = (dir.path().join("run.bin"), dir.path().join("run.sqlite"));
    simulate(&capture, "steady");
    let mut bytes = std::fs::read(&capture).unwrap();
    // Flip one bit in every 1000th byte: each hits one frame. A flip that
    // made or unmade a delimiter (0x00) would split or join frames, so such
    // a byte is passed over for the next one.
    let mut flipped = 0;
    for start in (500..bytes.len()).step_by(1000) {
        if let Some(i) = (start..bytes.len()).find(|&i| bytes[i] != 0 && bytes[i] != 0x10) {
            bytes[i] ^= 0x10;
            flipped += 1;
        }
    }
    std::fs::write(&capture, &bytes).unwrap();
    watch(&capture, &db);

    let conn = rusqlite::Connection::open(&db).unwrap();
    let losses: i64 = conn
        .query_row(
            "SELECT COALESCE(SUM(count), 0) FROM link_errors WHERE kind IN ('crc', 'malformed', 'overlong')",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert!(
        losses >= 1 && losses <= flipped,
        "{losses} losses for {flipped} flips"
    );
    let summaries: i64 = conn
        .query_row("SELECT COUNT(*) FROM summaries", [], |r| r.get(0))
        .unwrap();
    assert!(summaries < 600 && summaries >= 600 - flipped, "{summaries}");

    let (code, report) = audit_json(&db);
    assert_eq!(code, Some(1), "{report:#}");
    assert_eq!(report["trustworthy"], false);
    assert_eq!(report["integrity"]["pass"], false);
}
