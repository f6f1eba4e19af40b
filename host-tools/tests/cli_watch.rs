//! `heatbound watch`: captures, stdin, a pseudo-terminal serial port, TCP
//! with a reconnect, and a SIGKILL mid-run.
use std::io::Write as _;
use std::net::TcpListener;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use assert_cmd::cargo::CommandCargoExt as _;
use heatbound::alarm::{Event, EventKind, RuleId, Severity};
use heatbound::config::RigConfig;
use heatbound::wire::{self, EventFrame, Frame, Hello, RigId, Status, Summary};
use predicates::prelude::*;
use rusqlite::Connection;

fn hello() -> Frame {
    let config = RigConfig {
        ambient_k: Some(293.15),
        ..RigConfig::default()
    };
    Frame::Hello(Hello::from_config(
        RigId::new("bench-1").unwrap(),
        (1, 2, 3),
        100,
        &config,
    ))
}

fn summary(seq: u16) -> Frame {
    Frame::Summary(Summary {
        seq,
        t_ms: 1000 * u32::from(seq),
        duration_s: 6.0,
        heat_in_j: 6000.0,
        work_j: 1800.0,
        heat_out_j: 4200.0,
        entropy_in_j_per_k: 10.0,
        entropy_out_j_per_k: 14.0,
        ambient_k: Some(293.15),
        entropy_rate_w_per_k: Some(0.666_666_7),
        u_performance: Some(0.004),
        u_bound: Some(0.002),
        u_margin: Some(0.0045),
        u_entropy_rate_w_per_k: None,
        status: Status {
            steady: true,
            trip_active: seq >= 4,
            ..Status::default()
        },
        alarms: if seq >= 4 { 1 } else { 0 },
        ..Summary::default()
    })
}

fn event() -> Frame {
    Frame::Event(EventFrame {
        seq: 3,
        event: Event {
            t_ms: 341_000,
            rule: RuleId::BeyondCarnot,
            kind: EventKind::Raised,
            severity: Severity::Trip,
        },
        verdict: Default::default(),
    })
}

/// ord, seq, t_ms, heat_in_j, performance, u_entropy_rate_w_per_k, status, alarms.
type SummaryRow = (i64, i64, i64, f64, f64, Option<f64>, i64, i64);

fn encode(frames: &[Frame]) -> Vec<u8> {
    let mut out = Vec::new();
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    for f in frames {
        let n = wire::encode(f, &mut buf).unwrap();
        out.extend_from_slice(&buf[..n]);
    }
    out
}

fn watch() -> assert_cmd::Command {
    assert_cmd::Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// The same binary as a plain process, for the tests that talk to it while it runs.
fn spawn_watch() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

fn count(db: &Path, table: &str) -> i64 {
    let conn = Connection::open(db).unwrap();
    conn.query_row(&format!("SELECT count(*) FROM {table}"), [], |r| r.get(0))
        .unwrap_or(0)
}

fn capture() -> Vec<Frame> {
    let mut frames = vec![hello()];
    frames.extend((1..=3).map(summary));
    frames.push(event());
    frames.extend((4..=5).map(summary));
    frames
}

#[test]
fn a_capture_file_is_logged_row_by_row() {
    let dir = tempfile::tempdir().unwrap();
    let cap = dir.path().join("cap.bin");
    let db = dir.path().join("x.sqlite");
    std::fs::write(&cap, encode(&capture())).unwrap();
    let assert = watch()
        .args(["watch", "--input"])
        .arg(&cap)
        .arg("--db")
        .arg(&db)
        .assert()
        .success()
        .stderr(predicate::str::contains("Caution"));
    let out = String::from_utf8(assert.get_output().stdout.clone()).unwrap();
    let lines: Vec<&str> = out.lines().collect();
    assert_eq!(lines.len(), 8, "{out}");
    assert!(
        lines[0].starts_with("hello from bench-1 firmware 1.2.3"),
        "{out}"
    );
    // k = 2 from the Hello: 0.3 ± 2·0.004, T_c = 4200/14.
    assert!(
        lines[1].starts_with("t=1.0s η=0.300±0.0080 η_C=0.500±0.0040 margin=0.200 σ̇=0.667 W/K"),
        "{}",
        lines[1]
    );
    assert!(
        lines[1].contains("T_h=600.0K T_c=300.0K steady"),
        "{}",
        lines[1]
    );
    assert!(!lines[1].contains("ALARM"), "{}", lines[1]);
    assert_eq!(lines[4], "raised beyond_carnot trip at t=341.0 s");
    assert!(
        lines[5].ends_with("ALARM beyond_carnot (trip)"),
        "{}",
        lines[5]
    );
    assert!(!lines[5].contains('\x1b'), "no ANSI when not a terminal");
    assert!(lines[..5].iter().all(|l| l.chars().count() <= 100), "{out}");
    assert!(lines[5].chars().count() <= 120, "{}", lines[5]);
    assert!(
        lines[7].contains("7 frames (1 hellos, 5 summaries, 1 events)"),
        "{}",
        lines[7]
    );
    assert!(lines[7].contains("0 lost"), "{}", lines[7]);

    let conn = Connection::open(&db).unwrap();
    let (source, ended): (String, Option<i64>) = conn
        .query_row("SELECT source, ended_host_ms FROM runs", [], |r| {
            Ok((r.get(0)?, r.get(1)?))
        })
        .unwrap();
    assert_eq!(source, format!("file:{}", cap.display()));
    assert!(ended.is_some());
    let (rig, fw, mode, k, amb, digest): (String, String, String, f64, Option<f64>, i64) = conn
        .query_row(
            "SELECT rig_id, firmware_version, mode, coverage_factor, ambient_k, config_digest FROM hellos",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?, r.get(5)?)),
        )
        .unwrap();
    assert_eq!(
        (rig.as_str(), fw.as_str(), mode.as_str(), k),
        ("bench-1", "1.2.3", "engine", 2.0)
    );
    assert_eq!(amb, Some(f64::from(293.15f32)));
    let Frame::Hello(h) = hello() else {
        unreachable!()
    };
    assert_eq!(digest, i64::from(h.config_digest));
    let rows: Vec<SummaryRow> = conn
        .prepare(
            "SELECT ord, seq, t_ms, heat_in_j, performance, u_entropy_rate_w_per_k, status, alarms
             FROM summaries ORDER BY ord",
        )
        .unwrap()
        .query_map([], |r| {
            Ok((
                r.get(0)?,
                r.get(1)?,
                r.get(2)?,
                r.get(3)?,
                r.get(4)?,
                r.get(5)?,
                r.get(6)?,
                r.get(7)?,
            ))
        })
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert_eq!(rows.len(), 5);
    assert_eq!(rows[0], (1, 1, 1000, 6000.0, f64::from(0.3f32), None, 1, 0));
    assert_eq!(rows[4].0, 6, "the event sits between summaries 3 and 4");
    assert_eq!((rows[4].6, rows[4].7), (1 | 4, 1));
    let ev: (i64, i64, i64, String, String, String) = conn
        .query_row(
            "SELECT ord, seq, t_ms, rule, kind, severity FROM events",
            [],
            |r| {
                Ok((
                    r.get(0)?,
                    r.get(1)?,
                    r.get(2)?,
                    r.get(3)?,
                    r.get(4)?,
                    r.get(5)?,
                ))
            },
        )
        .unwrap();
    assert_eq!(
        ev,
        (
            4,
            3,
            341_000,
            "beyond_carnot".into(),
            "raised".into(),
            "trip".into()
        )
    );
    assert_eq!(count(&db, "link_errors"), 0);

    // The reader API gives back the very frames that were sent.
    let log = heatbound_host::store::Log::open_read(&db).unwrap();
    let run = log.runs().unwrap()[0].id;
    let back: Vec<Frame> = log.frames(run).unwrap().map(|s| s.unwrap().frame).collect();
    assert_eq!(back, capture());
}

#[test]
fn damaged_bytes_are_counted_as_link_errors() {
    let dir = tempfile::tempdir().unwrap();
    let cap = dir.path().join("bad.bin");
    let db = dir.path().join("bad.sqlite");
    let mut bytes = encode(&[hello(), summary(1)]);
    let mut bad = encode(&[summary(2)]);
    bad[20] ^= 0x40; // a payload byte: CRC mismatch
    bytes.extend_from_slice(&bad);
    bytes.extend_from_slice(&[0x05, 0x01, 0x00]); // a COBS code past the end: malformed
    bytes.extend(encode(&[summary(3), summary(7), summary(7)]));
    std::fs::write(&cap, &bytes).unwrap();
    watch()
        .args(["watch", "--quiet", "--input"])
        .arg(&cap)
        .arg("--db")
        .arg(&db)
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "2 lost (crc 1, overlong 0, malformed 1, unknown_version 0)",
        ))
        .stdout(predicate::str::contains(
            "2 gaps (4 summaries missing), 1 duplicates",
        ));
    let conn = Connection::open(&db).unwrap();
    let rows: Vec<(String, i64)> = conn
        .prepare("SELECT kind, count FROM link_errors ORDER BY ord")
        .unwrap()
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    let rows: Vec<(&str, i64)> = rows.iter().map(|(k, n)| (k.as_str(), *n)).collect();
    assert_eq!(
        rows,
        [
            ("gap", 1),
            ("gap", 3),
            ("duplicate", 1),
            ("crc", 1),
            ("malformed", 1)
        ]
    );
    assert_eq!(count(&db, "summaries"), 4);
}

#[test]
fn stdin_is_a_capture_too() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("stdin.sqlite");
    watch()
        .args(["watch", "--input", "-", "--db"])
        .arg(&db)
        .write_stdin(encode(&capture()))
        .assert()
        .success()
        .stdout(predicate::str::contains("5 summaries"));
    assert_eq!(count(&db, "summaries"), 5);
    let source: String = Connection::open(&db)
        .unwrap()
        .query_row("SELECT source FROM runs", [], |r| r.get(0))
        .unwrap();
    assert_eq!(source, "stdin");
}

#[test]
fn a_log_from_a_newer_tool_is_refused_in_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("newer.sqlite");
    Connection::open(&db)
        .unwrap()
        .pragma_update(None, "user_version", 999)
        .unwrap();
    let out = watch()
        .args(["watch", "--input", "-", "--db"])
        .arg(&db)
        .write_stdin(Vec::new())
        .assert()
        .code(2)
        .get_output()
        .stderr
        .clone();
    let err = String::from_utf8(out).unwrap();
    let last = err.lines().last().unwrap();
    assert!(last.starts_with("heatbound: error: "), "{err}");
    assert!(
        last.contains("newer.sqlite") && last.contains("999"),
        "{err}"
    );
}

#[cfg(unix)]
#[test]
fn a_pseudo_terminal_stands_in_for_the_serial_port() {
    use serialport::{SerialPort as _, TTYPort};
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("serial.sqlite");
    let (mut master, slave) = TTYPort::pair().expect("a pty pair");
    let path = slave.name().expect("the slave's path");
    let child = spawn_watch()
        .args([
            "watch",
            "--quiet",
            "--serial",
            &path,
            "--baud",
            "115200",
            "--max-summaries",
            "5",
            "--db",
        ])
        .arg(&db)
        .arg("--max-duration-s")
        .arg("30")
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // Wait for the run to start (the port is open by then).
    let start = Instant::now();
    while count(&db, "runs") == 0 && start.elapsed() < Duration::from_secs(20) {
        std::thread::sleep(Duration::from_millis(50));
    }
    std::thread::sleep(Duration::from_millis(300));
    let bytes = encode(&capture());
    for chunk in bytes.chunks(13) {
        master.write_all(chunk).unwrap();
        std::thread::sleep(Duration::from_millis(2));
    }
    master.flush().unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(stdout.contains("--max-summaries reached"), "{stdout}");
    assert_eq!(count(&db, "summaries"), 5);
    assert_eq!(count(&db, "events"), 1);
    assert_eq!(count(&db, "hellos"), 1);
    assert_eq!(count(&db, "link_errors"), 0);
    drop(slave);
}

#[test]
fn a_dropped_tcp_link_is_an_outage_in_the_same_run() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("tcp.sqlite");
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = listener.local_addr().unwrap().to_string();
    let child = spawn_watch()
        .args([
            "watch",
            "--quiet",
            "--tcp",
            &addr,
            "--max-summaries",
            "6",
            "--max-duration-s",
            "30",
            "--db",
        ])
        .arg(&db)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let (mut first, _) = listener.accept().unwrap();
    first
        .write_all(&encode(&[hello(), summary(1), summary(2), summary(3)]))
        .unwrap();
    // Half a frame, then the link drops.
    let next = encode(&[summary(4)]);
    first.write_all(&next[..30]).unwrap();
    std::thread::sleep(Duration::from_millis(200));
    drop(first);
    let (mut second, _) = listener.accept().unwrap();
    second
        .write_all(&encode(&[summary(4), summary(5), summary(6)]))
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("link down"), "{stderr}");
    drop(second);

    let conn = Connection::open(&db).unwrap();
    assert_eq!(count(&db, "runs"), 1);
    let outages: Vec<(i64, Option<i64>, String)> = conn
        .prepare("SELECT started_host_ms, ended_host_ms, reason FROM outages")
        .unwrap()
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert_eq!(outages.len(), 1, "{outages:?}");
    let (start, end, reason) = &outages[0];
    assert!(end.is_some_and(|e| e > *start), "{outages:?}");
    assert!(reason.contains("closed"), "{reason}");
    let seqs: Vec<i64> = conn
        .prepare("SELECT seq FROM summaries ORDER BY ord")
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert_eq!(seqs, [1, 2, 3, 4, 5, 6]);
    // The half frame cut off by the drop is one counted loss.
    let lost: i64 = conn
        .query_row(
            "SELECT coalesce(sum(count), 0) FROM link_errors WHERE kind IN ('crc', 'malformed')",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(lost, 1);
}

#[test]
fn a_killed_watch_leaves_every_committed_batch() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("kill.sqlite");
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = listener.local_addr().unwrap().to_string();
    let mut child = spawn_watch()
        .args(["watch", "--quiet", "--tcp", &addr, "--db"])
        .arg(&db)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let (mut conn, _) = listener.accept().unwrap();
    let frames: Vec<Frame> = std::iter::once(hello())
        .chain((0..5000).map(summary))
        .collect();
    let bytes = encode(&frames);
    let (head, tail) = bytes.split_at(bytes.len() / 2);
    let tail = tail.to_vec();
    conn.write_all(head).unwrap();
    let reader = Connection::open(&db).unwrap();
    let start = Instant::now();
    let mut seen = 0i64;
    while seen < 1000 && start.elapsed() < Duration::from_secs(30) {
        std::thread::sleep(Duration::from_millis(20));
        seen = reader
            .query_row("SELECT count(*) FROM summaries", [], |r| r.get(0))
            .unwrap_or(0);
    }
    assert!(seen >= 1000, "only {seen} rows visible");
    // Keep writing while the process dies.
    let writer = std::thread::spawn(move || {
        for chunk in tail.chunks(500) {
            if conn.write_all(chunk).is_err() {
                break;
            }
        }
    });
    child.kill().unwrap(); // SIGKILL
    child.wait().unwrap();
    let _ = writer.join();
    drop(reader);

    let conn = Connection::open(&db).unwrap();
    let ok: String = conn
        .query_row("PRAGMA integrity_check", [], |r| r.get(0))
        .unwrap();
    assert_eq!(ok, "ok");
    let after: i64 = conn
        .query_row("SELECT count(*) FROM summaries", [], |r| r.get(0))
        .unwrap();
    assert!(after >= seen, "{after} < {seen}");
    let ended: Option<i64> = conn
        .query_row("SELECT ended_host_ms FROM runs", [], |r| r.get(0))
        .unwrap();
    assert_eq!(ended, None, "a killed run is left open");
}

#[test]
fn a_malformed_address_or_a_missing_port_is_a_usage_error_at_once() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("w.sqlite");
    for source in [["--tcp", "nohost"], ["--serial", "/dev/ttyNOPE-heatbound"]] {
        let start = Instant::now();
        let out = spawn_watch()
            .arg("watch")
            .args(source)
            .arg("--db")
            .arg(&db)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "{source:?}");
        assert!(
            start.elapsed() < Duration::from_secs(5),
            "{source:?} retried"
        );
        let err = String::from_utf8(out.stderr).unwrap();
        assert!(err.starts_with("heatbound: error:"), "{err}");
        assert!(!db.exists(), "{source:?}: a log was started");
    }
}

#[test]
fn a_silent_tcp_peer_is_an_outage() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("stall.sqlite");
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = listener.local_addr().unwrap().to_string();
    let child = spawn_watch()
        .args([
            "watch",
            "--quiet",
            "--tcp",
            &addr,
            "--stall-s",
            "0.5",
            "--max-duration-s",
            "3",
            "--db",
        ])
        .arg(&db)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let (mut first, _) = listener.accept().unwrap();
    first.write_all(&encode(&[hello(), summary(1)])).unwrap();
    // Then silence, with the connection left open.
    let out = child.wait_with_output().unwrap();
    drop(first);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let conn = Connection::open(&db).unwrap();
    let reason: String = conn
        .query_row(
            "SELECT reason FROM outages ORDER BY started_host_ms LIMIT 1",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert!(reason.contains("stalled"), "{reason}");
}
