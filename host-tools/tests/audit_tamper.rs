//! `heatbound audit` of an altered log: impossible values, overflowing
//! counts and runs that were never closed are failed checks, never a pass
//! and never a panic.
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use rusqlite::Connection;
use serde_json::Value;
use tempfile::TempDir;

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// A `steady` capture of `seconds` summaries, logged by `watch` into `log.db`.
fn logged(dir: &TempDir, seconds: u32) -> PathBuf {
    let cap = dir.path().join("steady.bin");
    heatbound()
        .args(["simulate", "--scenario", "steady", "--duration-s"])
        .arg(seconds.to_string())
        .arg("--output")
        .arg(&cap)
        .assert()
        .success();
    let db = dir.path().join("log.db");
    heatbound()
        .args(["watch", "--quiet", "--input"])
        .arg(&cap)
        .arg("--db")
        .arg(&db)
        .assert()
        .success();
    db
}

fn sql(db: &Path, statement: &str) {
    Connection::open(db)
        .expect("open log")
        .execute_batch(statement)
        .expect("alter the log");
}

/// Audits `db` with `--json`: exit status and report.
fn audit_json(db: &Path) -> (i32, Value) {
    let out = heatbound()
        .arg("audit")
        .arg(db)
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

fn problems(r: &Value) -> String {
    r["integrity"]["problems"].to_string()
}

#[test]
fn an_untouched_closed_log_is_trustworthy() {
    // The baseline the altered copies below are measured against.
    let dir = TempDir::new().expect("temp dir");
    let db = logged(&dir, 60);
    let (code, r) = audit_json(&db);
    assert_eq!(code, 0, "{r:#}");
    assert_eq!(r["integrity"]["run_closed"], true);
    assert_eq!(r["integrity"]["tampered_rows"], 0);
}

#[test]
fn values_beyond_f32_are_a_failed_check_naming_row_and_column() {
    // IEEE 754-2019 binary32: the largest finite value is
    // (2 - 2^-23) * 2^127 = 3.4028235e38, so 1e308 is no f32 a frame can
    // carry; narrowing it would give an infinity.
    let dir = TempDir::new().expect("temp dir");
    let db = logged(&dir, 60);
    sql(
        &db,
        "UPDATE summaries SET performance = 1e308, bound = -1e308 WHERE seq = 20",
    );
    let (code, r) = audit_json(&db);
    assert_eq!(code, 1, "{r:#}");
    assert_eq!(r["trustworthy"], false);
    assert_eq!(r["integrity"]["pass"], false);
    assert_eq!(r["integrity"]["tampered_rows"], 1, "{r:#}");
    let p = problems(&r);
    assert!(
        p.contains("seq 20") && p.contains("performance = 1e308"),
        "{p}"
    );
    assert!(p.contains("bound = -1e308"), "both columns named: {p}");
    // The row is not recomputed, and the sequence around it is intact.
    assert_eq!(r["recomputation"]["summaries"], 59, "{r:#}");
    assert_eq!(r["integrity"]["missing_summaries"], 0, "{r:#}");
    assert_eq!(r["integrity"]["summaries"], 60, "{r:#}");
}

#[test]
fn a_value_that_is_not_an_f32_is_tampering() {
    // 0.1 has no exact binary32 form (IEEE 754-2019 §3.3: a binary32 has a
    // 24-bit significand), so the logger, which widens f32 to f64 exactly,
    // cannot have written it.
    let dir = TempDir::new().expect("temp dir");
    let db = logged(&dir, 30);
    sql(&db, "UPDATE summaries SET work_j = 0.1 WHERE seq = 5");
    let (code, r) = audit_json(&db);
    assert_eq!(code, 1, "{r:#}");
    let p = problems(&r);
    assert!(p.contains("seq 5") && p.contains("work_j"), "{p}");
}

#[test]
fn device_time_at_the_top_of_the_clock_fails_against_its_neighbours() {
    // t_ms is a u32 (docs/wire-format.md): 4294967295 = 2^32 - 1 is its
    // largest value, more than 49 days, between summaries about 1 s apart
    // (the simulator's default summary period).
    let dir = TempDir::new().expect("temp dir");
    let db = logged(&dir, 60);
    sql(&db, "UPDATE summaries SET t_ms = 4294967295 WHERE seq = 30");
    let (code, r) = audit_json(&db);
    assert_eq!(code, 1, "{r:#}");
    assert_eq!(r["integrity"]["time_inconsistencies"], 1, "{r:#}");
    assert!(problems(&r).contains("seq 30"), "{r:#}");
}

#[test]
fn overflowing_or_negative_counts_are_tampering_not_a_panic() {
    // i64::MAX = 2^63 - 1; three of them exceed u64::MAX = 2^64 - 1, so the
    // sum wraps unless checked (two's complement arithmetic, common practice).
    let dir = TempDir::new().expect("temp dir");
    let db = logged(&dir, 30);
    sql(
        &db,
        "INSERT INTO link_errors (run_id, ord, host_ms, kind, count, detail)
         SELECT 1, 100000 + n, started_host_ms, 'crc', c, 'x' FROM runs,
         (SELECT 0 AS n, 9223372036854775807 AS c UNION ALL SELECT 1, 9223372036854775807
          UNION ALL SELECT 2, 9223372036854775807 UNION ALL SELECT 3, 2);",
    );
    let (code, r) = audit_json(&db);
    assert_eq!(code, 1, "{r:#}");
    assert_eq!(r["trustworthy"], false);
    assert!(problems(&r).contains("more than 2^64"), "{r:#}");
    assert_eq!(r["integrity"]["tampered_rows"], 1, "{r:#}");

    let db2 = dir.path().join("neg.db");
    std::fs::copy(&db, &db2).expect("copy");
    sql(&db2, "DELETE FROM link_errors WHERE ord >= 100000;");
    sql(
        &db2,
        "INSERT INTO link_errors (run_id, ord, host_ms, kind, count, detail)
         SELECT 1, 100000, started_host_ms, 'overlong', -5, 'x' FROM runs;",
    );
    let (code, r) = audit_json(&db2);
    assert_eq!(code, 1, "{r:#}");
    assert_eq!(r["integrity"]["tampered_rows"], 1, "{r:#}");
    assert!(problems(&r).contains("negative"), "{r:#}");
}

#[test]
fn a_run_never_closed_ends_early_and_is_not_trustworthy() {
    let dir = TempDir::new().expect("temp dir");
    let db = logged(&dir, 30);
    // As a killed writer leaves it: runs.ended_host_ms stays NULL
    // (docs/log-schema.md §1).
    sql(&db, "UPDATE runs SET ended_host_ms = NULL");
    let (code, r) = audit_json(&db);
    assert_eq!(code, 1, "{r:#}");
    let g = &r["integrity"];
    assert_eq!(g["run_closed"], false);
    assert_eq!(g["record_ends_early"]["seq"], 29, "{g:#}");
    assert!(g["record_ends_early"]["host_ms"].is_i64(), "{g:#}");
    let p = problems(&r);
    assert!(
        p.contains("never closed (the writer stopped, or is still running)"),
        "{p}"
    );
    let out = heatbound().arg("audit").arg(&db).output().expect("run");
    let text = String::from_utf8(out.stdout).expect("UTF-8");
    assert!(text.contains("record ends early, at seq 29"), "{text}");
    assert!(text.contains("UTC"), "{text}");
}

#[test]
fn crafted_values_never_panic_and_never_pass() {
    // Each alteration on its own copy of a clean log. SQLite columns take
    // any type (sqlite.org/datatype3.html, "type affinity"), so a crafted
    // file can hold text, huge integers or infinities (9e999 reads as +inf)
    // anywhere; i64 and u16/u32 ranges are those of the Rust reference.
    let dir = TempDir::new().expect("temp dir");
    let clean = logged(&dir, 30);
    let cases = [
        "UPDATE summaries SET seq = 70000 WHERE seq = 3",
        "UPDATE summaries SET seq = -1 WHERE seq = 3",
        "UPDATE summaries SET t_ms = -5 WHERE seq = 3",
        "UPDATE summaries SET t_ms = 9223372036854775807 WHERE seq = 3",
        "UPDATE summaries SET heat_in_j = 9e999 WHERE seq = 3",
        "UPDATE summaries SET heat_in_j = -9e999 WHERE seq = 3",
        "UPDATE summaries SET duration_s = 'abc' WHERE seq = 3",
        "UPDATE summaries SET status = 300 WHERE seq = 3",
        "UPDATE summaries SET status = 255 WHERE seq = 3",
        "UPDATE summaries SET alarms = 255 WHERE seq = 3",
        "UPDATE summaries SET host_ms = -9223372036854775808 WHERE seq = 3",
        "UPDATE summaries SET host_ms = 9223372036854775807",
        "UPDATE summaries SET entropy_rate_w_per_k = 3e38, u_entropy_rate_w_per_k = 3e38",
        "UPDATE hellos SET coverage_factor = 9e999",
        "UPDATE hellos SET sample_period_ms = 99999999999",
        "UPDATE hellos SET mode = 'perpetual'",
        "INSERT INTO link_errors VALUES (1, 5000, 0, 'gap', -9223372036854775808, 'x')",
        "INSERT INTO link_errors VALUES (1, 9223372036854775807, 0, 'crc', 1, 'x')",
        "INSERT INTO link_errors VALUES (1, 5000, 0, 'meteor', 1, 'x')",
        "UPDATE runs SET ended_host_ms = NULL; UPDATE summaries SET host_ms = 9223372036854775807",
        "UPDATE runs SET ended_host_ms = NULL; UPDATE summaries SET host_ms = -9223372036854775808",
        "INSERT INTO outages (run_id, started_host_ms, reason) VALUES (1, -9223372036854775808, '')",
    ];
    for (i, case) in cases.iter().enumerate() {
        let db = dir.path().join(format!("case{i}.db"));
        std::fs::copy(&clean, &db).expect("copy");
        sql(&db, case);
        let out = heatbound()
            .arg("audit")
            .arg(&db)
            .arg("--json")
            .output()
            .expect("run heatbound");
        let code = out.status.code();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(
            code == Some(1) || code == Some(2),
            "{case}: exit {code:?}, stderr {stderr}"
        );
        assert!(!stderr.contains("panicked"), "{case}: {stderr}");
        if code == Some(1) {
            let r: Value = serde_json::from_slice(&out.stdout).expect("JSON");
            assert_eq!(r["trustworthy"], false, "{case}");
        }
        eprintln!("{case}: exit {code:?} {}", stderr.trim());
    }
}

/// Moves the run's first Hello to just after its fifth summary: a log that
/// began while the controller was already running, and got its Hello when
/// it asked. Every row's ord is spread out first to make room.
fn hello_after_five_summaries(db: &Path) {
    sql(
        db,
        // Through negative values: no two rows share an ord on the way.
        "UPDATE summaries SET ord = -ord * 10; UPDATE summaries SET ord = -ord;
         UPDATE events SET ord = -ord * 10; UPDATE events SET ord = -ord;
         UPDATE link_errors SET ord = -ord * 10; UPDATE link_errors SET ord = -ord;
         UPDATE replies SET ord = -ord * 10; UPDATE replies SET ord = -ord;
         UPDATE hellos SET ord = -ord * 10; UPDATE hellos SET ord = -ord;
         UPDATE hellos SET ord = (SELECT ord + 5 FROM summaries ORDER BY ord LIMIT 1 OFFSET 4)
           WHERE ord = (SELECT min(ord) FROM hellos);",
    );
}

#[test]
fn summaries_before_the_first_hello_of_the_same_session_are_checked_with_it() {
    let dir = TempDir::new().expect("temp dir");
    let db = logged(&dir, 60);
    hello_after_five_summaries(&db);
    let (code, r) = audit_json(&db);
    assert_eq!(code, 0, "{r:#}");
    assert_eq!(r["integrity"]["summaries_before_hello"], 5, "{r:#}");
    assert_eq!(r["integrity"]["hello_before_first_summary"], true);
}

#[test]
fn summaries_before_a_hello_that_starts_over_have_unknown_settings() {
    // The same, but the five early summaries' sequence runs far ahead of
    // the ones after the Hello: the controller restarted at that Hello, so
    // the early ones are of a session whose settings no Hello gave.
    let dir = TempDir::new().expect("temp dir");
    let db = logged(&dir, 60);
    hello_after_five_summaries(&db);
    sql(
        &db,
        "UPDATE summaries SET seq = seq + 30000
           WHERE ord < (SELECT min(ord) FROM hellos);",
    );
    let (code, r) = audit_json(&db);
    assert_ne!(code, 0, "{r:#}");
    assert_eq!(r["integrity"]["summaries_before_hello"], 0, "{r:#}");
    assert!(
        problems(&r).contains("no Hello before the first summary"),
        "{}",
        problems(&r)
    );
}
