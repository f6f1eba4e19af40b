//! The SQLite log's schema, migrations and frame round trip.
use heatbound::alarm::{Event, EventKind, RuleId, Severity};
use heatbound::config::{Mode, RigConfig};
use heatbound::monitor::Channel;
use heatbound::wire::{EventFrame, FaultBits, Frame, Hello, RigId, Status, Summary, Verdict};
use heatbound_host::store::{Batching, LinkErrorKind, Log, SCHEMA_VERSION, StoreError};
use rusqlite::Connection;

fn hello() -> Hello {
    let config = RigConfig {
        mode: Mode::HeatPump,
        ambient_k: Some(293.15),
        ..RigConfig::default()
    };
    Hello::from_config(RigId::new("bench-1").unwrap(), (1, 2, 3), 100, &config)
}

/// A heat-pump summary with a second hot sensor and an inconsistent
/// verdict naming the hot sensor.
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
        hot_temperature_integral_k_s: 3600.0,
        hot_pair_integral_k_s: -240.5,
        ambient_k: None,
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
            hot2_measured: true,
            mode: Mode::HeatPump,
        },
        faults: FaultBits {
            channels: 0b110101,
            stale: true,
        },
        alarms: 0b100101,
        verdict: Verdict {
            consistent: Some(false),
            suspect: Some(Channel::Hot),
            bias: Some(-40.0),
        },
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
        verdict: Verdict::default(),
    }
}

/// A second-law alarm raised with its window's verdict.
fn event_with_verdict() -> EventFrame {
    EventFrame {
        seq: 3,
        event: Event {
            t_ms: 342_000,
            rule: RuleId::BeyondCarnot,
            kind: EventKind::Raised,
            severity: Severity::Trip,
        },
        verdict: Verdict {
            consistent: Some(false),
            suspect: Some(Channel::Hot2),
            bias: None,
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
            "lab_sources",
            "link_errors",
            "log_identity",
            "operator_actions",
            "outages",
            "publications",
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
        // No second sensor, no diagnosis: the defaults, in the Hello's mode.
        Frame::Summary(Summary {
            status: Status {
                mode: Mode::HeatPump,
                ..Status::default()
            },
            ..Summary::default()
        }),
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

/// The frames of run `run` of the log at `path`, each row's result.
fn read_all(path: &std::path::Path, run: i64) -> Vec<Result<Frame, StoreError>> {
    let log = Log::open_read(path).unwrap();
    log.frames(run)
        .unwrap()
        .map(|r| r.map(|s| s.frame))
        .collect()
}

#[test]
fn verdicts_hot2_integrals_and_losses_round_trip() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("v5.sqlite");
    let mut configured = hello();
    configured.uncertainty.hot2_k = 0.75;
    configured.losses = Some((2.5, 0.125));
    // Without `[losses]`: UA learned on the controller.
    let learned = Hello {
        losses: None,
        ..hello()
    };
    let consistent = Summary {
        verdict: Verdict {
            consistent: Some(true),
            suspect: None,
            bias: None,
        },
        ..summary(6)
    };
    let frames = [
        Frame::Hello(configured),
        Frame::Summary(summary(5)),
        Frame::Event(event_with_verdict()),
        Frame::Hello(learned),
        Frame::Summary(consistent),
    ];
    let mut log = Log::open(&path).unwrap();
    let run = log.begin_run("file:v5.bin", 0).unwrap();
    for (i, f) in frames.iter().enumerate() {
        log.insert_frame(run, i as i64, f).unwrap();
    }
    log.end_run(run, 10).unwrap();
    drop(log);

    let got: Vec<Frame> = read_all(&path, run)
        .into_iter()
        .map(Result::unwrap)
        .collect();
    assert_eq!(got, frames);

    // The columns as documented in docs/log-schema.md.
    let conn = Connection::open(&path).unwrap();
    let s = summary(5);
    let row: (String, String, f64, f64, f64, i64, i64) = conn
        .query_row(
            "SELECT verdict, suspect, suspect_bias, hot_temperature_integral_k_s,
             hot_pair_integral_k_s, status, faults FROM summaries WHERE seq = 5",
            [],
            |r| {
                Ok((
                    r.get(0)?,
                    r.get(1)?,
                    r.get(2)?,
                    r.get(3)?,
                    r.get(4)?,
                    r.get(5)?,
                    r.get(6)?,
                ))
            },
        )
        .unwrap();
    assert_eq!(
        row,
        (
            "inconsistent".to_owned(),
            "hot".to_owned(),
            -40.0,
            3600.0,
            -240.5,
            0b11101,
            0b1011_0101
        )
    );
    // The recomputed figures are stored as every reader computes them.
    let figures: (Option<f64>, Option<f64>, Option<f64>) = conn
        .query_row(
            "SELECT hot_mean_k, performance, bound FROM summaries WHERE seq = 5",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .unwrap();
    let widen = |x: Option<f32>| x.map(f64::from);
    assert_eq!(
        figures,
        (
            widen(s.hot_mean_k()),
            widen(s.performance()),
            widen(s.bound())
        )
    );
    assert!(s.performance().is_some() && s.bound().is_some());
    let consistent_row: (String, Option<String>, Option<f64>) = conn
        .query_row(
            "SELECT verdict, suspect, suspect_bias FROM summaries WHERE seq = 6",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .unwrap();
    assert_eq!(consistent_row, ("consistent".to_owned(), None, None));
    let event_row: (String, String) = conn
        .query_row("SELECT verdict, suspect FROM events", [], |r| {
            Ok((r.get(0)?, r.get(1)?))
        })
        .unwrap();
    assert_eq!(event_row, ("inconsistent".to_owned(), "hot2".to_owned()));
    let hellos: Vec<(f64, Option<f64>, Option<f64>)> = conn
        .prepare("SELECT u_hot2_k, ua_w_per_k, u_ua_w_per_k FROM hellos ORDER BY ord")
        .unwrap()
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert_eq!(hellos[0], (0.75, Some(2.5), Some(0.125)));
    assert_eq!(hellos[1].1, None, "UA learned, none configured");
}

#[test]
fn a_summary_keeps_its_own_mode() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("mode.sqlite");
    let with_mode = |seq: u16, mode: Mode| Summary {
        seq,
        status: Status {
            mode,
            ..summary(seq).status
        },
        ..summary(seq)
    };
    let cooler = Hello {
        mode: Mode::Cooler,
        ..hello()
    };
    let mut log = Log::open(&path).unwrap();
    let run = log.begin_run("file:mode.bin", 0).unwrap();
    let frames = [
        // Before any Hello.
        Frame::Summary(with_mode(1, Mode::HeatPump)),
        Frame::Hello(hello()),
        Frame::Summary(with_mode(2, Mode::HeatPump)),
        Frame::Hello(cooler),
        Frame::Summary(with_mode(3, Mode::Cooler)),
    ];
    for (i, f) in frames.iter().enumerate() {
        log.insert_frame(run, i as i64, f).unwrap();
    }
    // A run without a Hello.
    let bare = log.begin_run("file:bare.bin", 10).unwrap();
    log.insert_frame(bare, 11, &Frame::Summary(with_mode(1, Mode::Engine)))
        .unwrap();
    // The mode is stored with the summary: a summary of another mode than
    // the latest Hello's (the Hello after a reconfiguration lost on the
    // link) reads in its own mode.
    let lost = log.begin_run("file:lost.bin", 20).unwrap();
    log.insert_frame(lost, 21, &Frame::Hello(hello())).unwrap();
    log.insert_frame(lost, 22, &Frame::Summary(with_mode(1, Mode::Cooler)))
        .unwrap();
    log.end_run(lost, 30).unwrap();
    drop(log);

    let got: Vec<Frame> = read_all(&path, run)
        .into_iter()
        .map(Result::unwrap)
        .collect();
    assert_eq!(got, frames);
    let got = read_all(&path, bare);
    assert_eq!(
        got[0].as_ref().unwrap(),
        &Frame::Summary(with_mode(1, Mode::Engine))
    );
    let got = read_all(&path, lost);
    let Ok(Frame::Summary(s)) = &got[1] else {
        panic!("{got:?}")
    };
    assert_eq!(s.status.mode, Mode::Cooler);
}

/// A log written by schema version 4: built with the first four
/// migrations and rows as version 4 wrote them (stale = faults bit 5).
fn version_4_log(path: &std::path::Path) {
    let conn = Connection::open(path).unwrap();
    for sql in &heatbound_host::store::MIGRATIONS[..4] {
        conn.execute_batch(sql).unwrap();
    }
    conn.pragma_update(None, "user_version", 4).unwrap();
    conn.execute_batch(
        "INSERT INTO runs (id, started_host_ms, source, tool_version, ended_host_ms)
             VALUES (1, 1000, 'file:old.bin', '0.4.0', 9000);
         INSERT INTO hellos VALUES (1, 0, 1000, 2, 'bench-1', '1.2.3', 100, 60, 'heat_pump',
             2.0, 293.5, 1.0, 0.125, 0.0078125, 0.0078125, 0.015625, 305419896, 3, 77, 5, 1);
         -- seq 1: channels hot and heat_in faulty, stale (bit 5).
         INSERT INTO summaries VALUES (1, 1, 1001, 1, 5000, 6.0, 6000.0, 1800.0, 4200.0, 10.0,
             14.0, 600.0, NULL, 0.5, 0.75, 0.5, 0.25, NULL, 0.125, NULL, 13, 37, 1);
         -- seq 2: every v4 channel faulty, not stale.
         INSERT INTO summaries VALUES (1, 2, 1002, 2, 6000, 6.0, 6000.0, 1800.0, 4200.0, 10.0,
             14.0, 600.0, NULL, 0.5, 0.75, 0.5, 0.25, NULL, 0.125, NULL, 1, 31, 0);
         -- seq 3: altered, an undefined faults bit (7) set.
         INSERT INTO summaries VALUES (1, 3, 1003, 3, 7000, 6.0, 6000.0, 1800.0, 4200.0, 10.0,
             14.0, 600.0, NULL, 0.5, 0.75, 0.5, 0.25, NULL, 0.125, NULL, 1, 128, 0);
         INSERT INTO events VALUES (1, 4, 1004, 3, 7100, 'beyond_carnot', 'raised', 'trip');",
    )
    .unwrap();
}

/// What every reader must make of the rows of [`version_4_log`].
fn check_version_4_rows(frames: &[Result<Frame, StoreError>]) {
    assert_eq!(frames.len(), 5);
    let Ok(Frame::Hello(h)) = &frames[0] else {
        panic!("{frames:?}")
    };
    #[allow(clippy::cast_possible_truncation)]
    let default_hot2 = heatbound::monitor::Uncertainty::default().hot2_k as f32;
    assert_eq!(h.uncertainty.hot2_k, default_hot2);
    assert_eq!(h.losses, None);
    assert_eq!((h.run, h.session, h.keyed), (3, 77, true));
    let Ok(Frame::Summary(s)) = &frames[1] else {
        panic!("{frames:?}")
    };
    assert_eq!(
        s.faults,
        FaultBits {
            channels: 0b101,
            stale: true
        }
    );
    assert_eq!(
        s.status,
        Status {
            steady: true,
            trip_active: true,
            any_fault: true,
            mode: Mode::HeatPump,
            ..Status::default()
        }
    );
    assert_eq!(
        (s.hot_temperature_integral_k_s, s.hot_pair_integral_k_s),
        (0.0, 0.0)
    );
    assert_eq!(s.verdict, Verdict::default());
    assert_eq!(s.u_performance, Some(0.25));
    let Ok(Frame::Summary(s)) = &frames[2] else {
        panic!("{frames:?}")
    };
    assert_eq!(
        s.faults,
        FaultBits {
            channels: 0b11111,
            stale: false
        }
    );
    match &frames[3] {
        Err(StoreError::ImpossibleValue(v)) => {
            assert_eq!(
                (v.column, v.seq, v.why),
                ("faults", Some(3), "undefined bits set")
            );
        }
        other => panic!("{other:?}"),
    }
    let Ok(Frame::Event(e)) = &frames[4] else {
        panic!("{frames:?}")
    };
    assert_eq!(e.verdict, Verdict::default());
}

#[test]
fn a_version_4_log_keeps_its_stale_bits_through_migration_5() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("v4.sqlite");
    version_4_log(&path);

    // Read-only, as it is: the old layout, nothing migrated.
    check_version_4_rows(&read_all(&path, 1));
    let conn = Connection::open(&path).unwrap();
    let v: i64 = conn
        .pragma_query_value(None, "user_version", |r| r.get(0))
        .unwrap();
    assert_eq!(v, 4);
    drop(conn);

    // A writer migrates it: the stale bit moves from bit 5 to bit 7, an
    // undefined bit stays undefined, and every row reads as before.
    let mut log = Log::open(&path).unwrap();
    assert_eq!(log.migrate().unwrap(), SCHEMA_VERSION);
    let faults: Vec<i64> = log
        .connection()
        .unwrap()
        .prepare("SELECT faults FROM summaries ORDER BY ord")
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert_eq!(faults, [0b1000_0101, 0b1_1111, 0b0100_0000]);
    let news: (Option<f64>, Option<String>, Option<f64>) = log
        .connection()
        .unwrap()
        .query_row(
            "SELECT hot_pair_integral_k_s, verdict, u_hot2_k FROM summaries, hellos
             WHERE summaries.ord = 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .unwrap();
    assert_eq!(news, (None, None, None), "new columns are NULL in old rows");
    // New rows follow the old ones in the same run.
    log.insert_frame(1, 1005, &Frame::Summary(summary(4)))
        .unwrap();
    log.end_run(1, 9500).unwrap();
    drop(log);
    let frames = read_all(&path, 1);
    check_version_4_rows(&frames[..5]);
    assert_eq!(frames[5].as_ref().unwrap(), &Frame::Summary(summary(4)));
}

#[test]
fn altered_verdict_and_hot2_columns_are_errors_naming_the_column() {
    let dir = tempfile::tempdir().unwrap();
    let clean = dir.path().join("clean.sqlite");
    let mut log = Log::open(&clean).unwrap();
    let run = log.begin_run("file:a.bin", 0).unwrap();
    let configured = Hello {
        losses: Some((2.5, 0.125)),
        ..hello()
    };
    log.insert_frame(run, 1, &Frame::Hello(configured)).unwrap();
    log.insert_frame(run, 2, &Frame::Summary(summary(1)))
        .unwrap();
    log.insert_frame(run, 3, &Frame::Event(event_with_verdict()))
        .unwrap();
    log.end_run(run, 4).unwrap();
    drop(log);

    // (alteration, table, column or reason named)
    let cases = [
        (
            "UPDATE summaries SET verdict = 'maybe'",
            "summaries",
            "verdict",
        ),
        (
            "UPDATE summaries SET verdict = 'consistent'",
            "summaries",
            "suspect",
        ),
        (
            "UPDATE summaries SET verdict = NULL",
            "summaries",
            "suspect",
        ),
        (
            "UPDATE summaries SET suspect = 'heat_in_w'",
            "summaries",
            "suspect",
        ),
        (
            "UPDATE summaries SET suspect = NULL",
            "summaries",
            "suspect_bias",
        ),
        (
            "UPDATE summaries SET suspect_bias = 0.1",
            "summaries",
            "suspect_bias",
        ),
        (
            "UPDATE summaries SET hot_pair_integral_k_s = NULL",
            "summaries",
            "hot_pair_integral_k_s",
        ),
        (
            "UPDATE summaries SET hot_temperature_integral_k_s = 9e999",
            "summaries",
            "hot_temperature_integral_k_s",
        ),
        ("UPDATE summaries SET status = 32", "summaries", "status"),
        ("UPDATE summaries SET faults = 64", "summaries", "faults"),
        (
            "UPDATE summaries SET mode = 'perpetual'",
            "summaries",
            "mode (the summary's, or for a row before version 5 its run's Hello's)",
        ),
        ("UPDATE hellos SET mode = 'perpetual'", "hellos", "mode"),
        (
            "UPDATE events SET verdict = 'consistent'",
            "events",
            "suspect",
        ),
        ("UPDATE events SET suspect = 'meteor'", "events", "suspect"),
        ("UPDATE events SET verdict = 'yes'", "events", "verdict"),
        (
            "UPDATE hellos SET u_ua_w_per_k = NULL",
            "hellos",
            "u_ua_w_per_k",
        ),
        (
            "UPDATE hellos SET ua_w_per_k = NULL",
            "hellos",
            "ua_w_per_k",
        ),
        ("UPDATE hellos SET u_hot2_k = 1e300", "hellos", "u_hot2_k"),
    ];
    for (i, (case, table, column)) in cases.into_iter().enumerate() {
        let path = dir.path().join(format!("case{i}.sqlite"));
        std::fs::copy(&clean, &path).unwrap();
        let conn = Connection::open(&path).unwrap();
        let n = conn.execute(case, []).unwrap();
        assert_eq!(n, 1, "{case}");
        drop(conn);
        let errors: Vec<StoreError> = read_all(&path, run)
            .into_iter()
            .filter_map(Result::err)
            .collect();
        assert!(!errors.is_empty(), "{case}: read without error");
        let found = errors.iter().any(|e| match e {
            StoreError::ImpossibleValue(v) => v.table == table && v.column == column,
            StoreError::BadRow {
                table: t, reason, ..
            } => *t == table && reason.contains(column),
            _ => false,
        });
        assert!(found, "{case}: {errors:?}");
    }
}

/// Summaries are written to SQLite in groups, but nothing can tell: the
/// writer's own reads, other rows and the batch commits all see every
/// summary logged before them, in receive order.
#[test]
fn waiting_summaries_are_seen_by_every_read_and_keep_their_place() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("wait.sqlite");
    let batching = Batching {
        max_rows: 97,
        max_age_ms: i64::MAX,
    };
    let mut log = Log::open_with(&path, batching).unwrap();
    let run = log.begin_run("file:wait.bin", 0).unwrap();
    let mut expected = Vec::new();
    for seq in 0..300u16 {
        let frame = Frame::Summary(summary(seq));
        log.insert_frame(run, i64::from(seq), &frame).unwrap();
        expected.push(frame);
        if seq % 71 == 70 {
            log.insert_frame(run, i64::from(seq), &Frame::Event(event()))
                .unwrap();
            expected.push(Frame::Event(event()));
        }
        if seq == 150 {
            // Read back mid-batch through every way in.
            let count: i64 = log
                .connection()
                .unwrap()
                .query_row("SELECT count(*) FROM summaries", [], |r| r.get(0))
                .unwrap();
            assert_eq!(count, 151);
            assert_eq!(log.runs().unwrap()[0].summaries, 151);
            let got: Vec<Frame> = log.frames(run).unwrap().map(|s| s.unwrap().frame).collect();
            assert_eq!(got, expected);
        }
    }
    log.end_run(run, 1).unwrap();
    drop(log);
    let got: Vec<Frame> = read_all(&path, run)
        .into_iter()
        .map(Result::unwrap)
        .collect();
    assert_eq!(got, expected);
}

/// A summary SQLite refuses when its group is written is named in the
/// error, by run, row and seq; every other summary of the group is kept,
/// and the call that got the error did not log its own frame.
#[test]
fn a_refused_waiting_summary_is_named_and_the_rest_are_kept() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("refused.sqlite");
    let mut log = Log::open(&path).unwrap();
    let run = log.begin_run("file:refused.bin", 0).unwrap();
    log.connection()
        .unwrap()
        .execute_batch(
            "CREATE TEMP TRIGGER refuse BEFORE INSERT ON summaries WHEN NEW.seq = 7
             BEGIN SELECT RAISE(ABORT, 'refused for the test'); END;",
        )
        .unwrap();
    // Summaries wait until more than a group's worth have come: the call
    // that writes them gets the error.
    let mut failed = None;
    for seq in 0..200u16 {
        if let Err(e) = log.insert_frame(run, i64::from(seq), &Frame::Summary(summary(seq))) {
            failed = Some((seq, e));
            break;
        }
    }
    let (at, err) = failed.expect("the refused summary is reported");
    match &err {
        StoreError::SummaryNotLogged {
            run_id,
            ord,
            seq,
            also,
            ..
        } => assert_eq!((*run_id, *ord, *seq, *also), (run, 7, 7, 0)),
        other => panic!("wrong error: {other}"),
    }
    let text = err.to_string();
    assert!(
        text.contains("run 1 at row 7 (seq 7)") && text.contains("refused for the test"),
        "{text}"
    );
    log.end_run(run, 1).unwrap();
    drop(log);
    let seqs: Vec<u16> = read_all(&path, run)
        .into_iter()
        .map(|f| match f.unwrap() {
            Frame::Summary(s) => s.seq,
            other => panic!("not a summary: {other:?}"),
        })
        .collect();
    let kept: Vec<u16> = (0..at).filter(|&s| s != 7).collect();
    assert_eq!(seqs, kept, "all but the refused one, and not seq {at}");
    assert!(at > 7, "reported when the group was written, at seq {at}");
}
