//! The SQLite log's schema, migrations and frame round trip.
use heatbound::alarm::{Event, EventKind, RuleId, Severity};
use heatbound::config::{Mode, RigConfig};
use heatbound::wire::{EventFrame, FaultBits, Frame, Hello, RigId, Status, Summary};
use heatbound_host::store::{LinkErrorKind, Log, SCHEMA_VERSION, StoreError};
use rusqlite::Connection;

fn hello() -> Hello {
    let config = RigConfig {
        mode: Mode::HeatPump,
        ambient_k: Some(293.15),
        ..RigConfig::default()
    };
    Hello::from_config(RigId::new("bench-1").unwrap(), (1, 2, 3), 100, &config)
}

fn summary(seq: u16) -> Summary {
    Summary {
        seq,
        t_ms: 120_000 + u32::from(seq),
        duration_s: 6.0,
        heat_in_j: 6000.0,
        work_j: 1800.0,
        heat_out_j: 4200.0,
        entropy_in_j_per_k: 10.0,
        entropy_out_j_per_k: 14.0,
        hot_mean_k: Some(600.0),
        ambient_k: None,
        performance: Some(0.3),
        bound: Some(0.5),
        entropy_rate_w_per_k: Some(0.666_666_7),
        u_performance: Some(0.004),
        u_bound: None,
        u_margin: Some(0.0045),
        u_entropy_rate_w_per_k: None,
        status: Status {
            steady: true,
            heat_out_measured: false,
            trip_active: true,
            any_fault: true,
        },
        faults: FaultBits {
            channels: 0b10101,
            stale: true,
        },
        alarms: 0b100101,
    }
}

fn event() -> EventFrame {
    EventFrame {
        seq: 2,
        event: Event {
            t_ms: 341_000,
            rule: RuleId::SensorFault,
            kind: EventKind::Acknowledged,
            severity: Severity::Warning,
        },
    }
}

#[test]
fn migrates_an_empty_database_and_reopens() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("log.sqlite");
    let mut log = Log::open(&path).unwrap();
    assert_eq!(log.migrate().unwrap(), SCHEMA_VERSION);
    drop(log);
    let conn = Connection::open(&path).unwrap();
    let v: i64 = conn
        .pragma_query_value(None, "user_version", |r| r.get(0))
        .unwrap();
    assert_eq!(v, SCHEMA_VERSION);
    let mode: String = conn
        .pragma_query_value(None, "journal_mode", |r| r.get(0))
        .unwrap();
    assert_eq!(mode, "wal");
    let tables: Vec<String> = conn
        .prepare("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert_eq!(
        tables,
        [
            "commands",
            "events",
            "hellos",
            "link_errors",
            "operator_actions",
            "outages",
            "replies",
            "runs",
            "summaries"
        ]
    );
    drop(conn);
    // Reopening a current log changes nothing and keeps the runs.
    let mut log = Log::open(&path).unwrap();
    let run = log.begin_run("file:a.bin", 5).unwrap();
    drop(log);
    let log = Log::open(&path).unwrap();
    assert_eq!(log.runs().unwrap().len(), 1);
    assert_eq!(log.runs().unwrap()[0].id, run);
}

#[test]
fn a_newer_schema_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("new.sqlite");
    let conn = Connection::open(&path).unwrap();
    conn.pragma_update(None, "user_version", SCHEMA_VERSION + 1)
        .unwrap();
    drop(conn);
    let err = Log::open(&path).err().expect("refused");
    assert!(matches!(err, StoreError::NewerSchema { .. }), "{err}");
    assert!(err.to_string().contains("newer"), "{err}");
    let err = Log::open_read(&path).err().expect("refused");
    assert!(matches!(err, StoreError::NewerSchema { .. }), "{err}");
}

#[test]
fn reading_an_unmigrated_file_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("empty.sqlite");
    Connection::open(&path)
        .unwrap()
        .execute_batch("CREATE TABLE x (a)")
        .unwrap();
    let err = Log::open_read(&path).err().expect("refused");
    assert!(matches!(err, StoreError::NotALog { .. }), "{err}");
}

#[test]
fn frames_round_trip_exactly_in_receive_order() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("rt.sqlite");
    let mut log = Log::open(&path).unwrap();
    let run = log.begin_run("tcp:127.0.0.1:7777", 1000).unwrap();
    let frames = [
        Frame::Hello(hello()),
        Frame::Summary(summary(1)),
        Frame::Summary(Summary::default()),
        Frame::Event(event()),
        Frame::Summary(summary(3)),
    ];
    for (i, f) in frames.iter().enumerate() {
        log.insert_frame(run, 1000 + i as i64, f).unwrap();
        if i == 2 {
            log.insert_link_error(run, 1002, LinkErrorKind::Gap, 4, "4 missing")
                .unwrap();
        }
    }
    let outage = log.begin_outage(run, 1010, "connection closed").unwrap();
    log.end_outage(outage, 1020).unwrap();
    // A second run does not mix in.
    let other = log.begin_run("file:b.bin", 2000).unwrap();
    log.insert_frame(other, 2001, &Frame::Summary(summary(9)))
        .unwrap();
    log.end_run(run, 3000).unwrap();
    drop(log);

    let log = Log::open_read(&path).unwrap();
    let stored: Vec<_> = log.frames(run).unwrap().collect::<Result<_, _>>().unwrap();
    let got: Vec<_> = stored.iter().map(|s| s.frame.clone()).collect();
    assert_eq!(got, frames);
    let hosts: Vec<_> = stored.iter().map(|s| s.host_ms).collect();
    assert_eq!(hosts, [1000, 1001, 1002, 1003, 1004]);
    let runs = log.runs().unwrap();
    assert_eq!(runs.len(), 2);
    assert_eq!(runs[0].source, "tcp:127.0.0.1:7777");
    assert_eq!(runs[0].ended_host_ms, Some(3000));
    assert_eq!(runs[0].summaries, 3);
    assert_eq!(runs[1].ended_host_ms, None);
    let errors = log.link_errors(run).unwrap();
    assert_eq!(errors.len(), 1);
    assert_eq!((errors[0].kind, errors[0].count), (LinkErrorKind::Gap, 4));
    assert_eq!(errors[0].ord, 3, "placed between the frames");
    let outages = log.outages(run).unwrap();
    assert_eq!(outages.len(), 1);
    assert_eq!(outages[0].ended_host_ms, Some(1020));
    assert_eq!(log.frames(other).unwrap().count(), 1);
}

#[test]
fn frames_page_through_long_runs() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("long.sqlite");
    let mut log = Log::open(&path).unwrap();
    let run = log.begin_run("file:long.bin", 0).unwrap();
    for seq in 0..10_000u16 {
        log.insert_frame(run, i64::from(seq), &Frame::Summary(summary(seq)))
            .unwrap();
    }
    drop(log);
    let log = Log::open_read(&path).unwrap();
    let mut n = 0u16;
    for s in log.frames(run).unwrap() {
        let Frame::Summary(s) = s.unwrap().frame else {
            panic!("not a summary")
        };
        assert_eq!(s.seq, n);
        n += 1;
    }
    assert_eq!(n, 10_000);
}

/// A log written by schema version 2 (before the downlink): built with the
/// first two migrations and rows as version 2 wrote them.
fn version_2_log(path: &std::path::Path) {
    let conn = Connection::open(path).unwrap();
    for sql in &heatbound_host::store::MIGRATIONS[..2] {
        conn.execute_batch(sql).unwrap();
    }
    conn.pragma_update(None, "user_version", 2).unwrap();
    conn.execute_batch(
        "INSERT INTO runs (id, started_host_ms, source, tool_version, ended_host_ms)
             VALUES (1, 1000, 'file:old.bin', '0.1.0', 9000);
         INSERT INTO hellos VALUES (1, 0, 1000, 1, 'bench-1', '1.2.3', 100, 60, 'engine', 2.0,
             293.5, 1.0, 0.125, 0.0078125, 0.0078125, 0.015625, 305419896);
         INSERT INTO events VALUES (1, 1, 1001, 0, 5000, 'beyond_carnot', 'raised', 'trip');",
    )
    .unwrap();
}

#[test]
fn a_version_2_log_reads_as_it_is_and_migrates_on_write() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("v2.sqlite");
    version_2_log(&path);

    // Read-only: nothing is migrated, the rows read, the new columns are 0.
    let log = Log::open_read(&path).unwrap();
    let frames: Vec<Frame> = log.frames(1).unwrap().map(|r| r.unwrap().frame).collect();
    assert_eq!(frames.len(), 2);
    let Frame::Hello(h) = &frames[0] else {
        panic!("{frames:?}")
    };
    assert_eq!(
        (h.config_digest, h.run, h.session, h.keyed),
        (0x1234_5678, 0, 0, false)
    );
    assert!(log.commands(1).unwrap().is_empty());
    drop(log);
    let v: i64 = Connection::open(&path)
        .unwrap()
        .pragma_query_value(None, "user_version", |r| r.get(0))
        .unwrap();
    assert_eq!(v, 2);

    // A writer migrates it to the current version and keeps every row.
    let mut log = Log::open(&path).unwrap();
    assert_eq!(log.migrate().unwrap(), SCHEMA_VERSION);
    let frames: Vec<Frame> = log.frames(1).unwrap().map(|r| r.unwrap().frame).collect();
    assert_eq!(frames.len(), 2);
    let run = log.begin_run("tcp:127.0.0.1:1", 10_000).unwrap();
    let id = log
        .insert_command(run, 10_001, "test", "ack", "all", 1, 7, &[1, 2, 0])
        .unwrap();
    log.settle_command(id, 10_002, Some(heatbound::wire::ReplyCode::Replayed))
        .unwrap();
    let rows = log.commands(run).unwrap();
    assert_eq!(rows.len(), 1);
    assert_eq!(rows[0].outcome, "rejected");
    assert_eq!(rows[0].sealed, [1, 2, 0]);
    assert_eq!(rows[0].reply_host_ms, Some(10_002));
}
