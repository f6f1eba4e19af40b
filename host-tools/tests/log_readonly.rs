//! Reading a log leaves nothing behind: `audit` and `chart` of a log that
//! `watch` closed add no files (no `-wal`/`-shm`) beside it.
use std::collections::BTreeSet;
use std::path::Path;

use assert_cmd::Command;
use rusqlite::Connection;
use tempfile::TempDir;

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

fn names(dir: &Path) -> BTreeSet<String> {
    std::fs::read_dir(dir)
        .expect("list dir")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect()
}

#[test]
fn auditing_and_charting_a_closed_log_leaves_no_new_files() {
    let work = TempDir::new().expect("temp dir");
    let logs = TempDir::new().expect("temp dir");
    let cap = work.path().join("steady.bin");
    heatbound()
        .args(["simulate", "--duration-s", "30", "--output"])
        .arg(&cap)
        .assert()
        .success();
    let db = logs.path().join("log.sqlite");
    heatbound()
        .args(["watch", "--quiet", "--input"])
        .arg(&cap)
        .arg("--db")
        .arg(&db)
        .assert()
        .success();
    let before = names(logs.path());
    assert_eq!(
        before,
        BTreeSet::from(["log.sqlite".to_owned()]),
        "watch closed the run and its journal"
    );
    heatbound().arg("audit").arg(&db).assert().success();
    heatbound()
        .arg("chart")
        .arg(&db)
        .arg("--out")
        .arg(work.path().join("c.png"))
        .assert()
        .success();
    heatbound_host::store::Log::open_read(&db)
        .expect("open")
        .runs()
        .expect("runs");
    assert_eq!(names(logs.path()), before, "reading wrote beside the log");
    // SQLite's rollback journal mode (sqlite.org/pragma.html#pragma_journal_mode).
    let mode: String = Connection::open(&db)
        .expect("open")
        .pragma_query_value(None, "journal_mode", |r| r.get(0))
        .expect("journal_mode");
    assert_eq!(mode, "delete");
}

#[test]
fn a_writer_switches_back_to_wal_when_it_reopens() {
    let dir = TempDir::new().expect("temp dir");
    let db = dir.path().join("log.sqlite");
    {
        let mut log = heatbound_host::store::Log::open(&db).expect("open");
        let run = log.begin_run("test:a", 0).expect("run");
        log.end_run(run, 1).expect("end");
    }
    let log = heatbound_host::store::Log::open(&db).expect("reopen");
    let mode: String = log
        .connection()
        .expect("connection")
        .pragma_query_value(None, "journal_mode", |r| r.get(0))
        .expect("journal_mode");
    assert_eq!(mode, "wal");
}
