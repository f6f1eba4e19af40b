//! `heatbound demo`: the whole chain, end to end, as the README's main command,
//! with the audit and the chart of its log.
use assert_cmd::Command;

#[test]
fn demo_raises_beyond_carnot_and_its_log_passes_the_audit() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("demo.sqlite");
    // --speed 300 plays the same ten minutes of rig time in 2 s, still in
    // wall time, so the demo's operator can acknowledge over the link.
    let out = Command::cargo_bin("heatbound")
        .unwrap()
        .args(["demo", "--speed", "300", "--db"])
        .arg(&db)
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        out.status.success(),
        "{text}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // The alarm is shown as it is raised, in the live stream...
    assert!(
        text.lines()
            .any(|l| l.contains("raised") && l.contains("beyond_carnot")),
        "{text}"
    );
    assert!(text.contains("ALARM beyond_carnot (trip)"), "{text}");
    // ...and the run ends with the audit and the place of the log.
    assert!(text.contains("verdict: trustworthy"), "{text}");
    assert!(text.contains("log written to"), "{text}");
    assert!(text.contains("not a safety-rated"), "{text}");
    assert!(db.exists());
    // ...and draws the chart of its log beside it.
    let png = dir.path().join("demo.png");
    assert!(
        text.lines()
            .any(|l| l.starts_with("chart written to ") && l.ends_with("demo.png")),
        "{text}"
    );
    let bytes = std::fs::read(&png).expect("the demo's chart");
    // PNG specification (W3C / ISO/IEC 15948): signature (§5.2), then IHDR
    // with width and height as big-endian u32 in bytes 16..24 (§11.2.2).
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n", "PNG signature");
    assert_eq!(&bytes[12..16], b"IHDR");
    assert_eq!(
        (
            u32::from_be_bytes([bytes[16], bytes[17], bytes[18], bytes[19]]),
            u32::from_be_bytes([bytes[20], bytes[21], bytes[22], bytes[23]])
        ),
        (1400, 1000)
    );

    // The operator's acknowledges went down the link, were applied, and
    // are in the log with their replies; the trip output dropped once the
    // thermocouple was reseated and the condition cleared.
    assert!(
        text.lines()
            .any(|l| l.starts_with("acknowledged beyond_carnot trip")),
        "{text}"
    );
    assert!(text.contains("trip output off at t = 546"), "{text}");
    let log = heatbound_host::store::Log::open_read(&db).unwrap();
    let run = log.runs().unwrap()[0].id;
    let commands = log.commands(run).unwrap();
    let acks: Vec<_> = commands.iter().filter(|c| c.command == "ack").collect();
    assert!(
        acks.iter().any(|c| c.detail == "beyond_carnot"),
        "{commands:?}"
    );
    assert!(
        acks.iter().all(|c| c.outcome == "applied"
            && c.origin == "demo operator"
            && c.reply_host_ms >= Some(c.host_ms)),
        "{commands:?}"
    );
    drop(log);

    // The log it wrote audits clean on its own, too.
    let audit = Command::cargo_bin("heatbound")
        .unwrap()
        .arg("audit")
        .arg(&db)
        .output()
        .unwrap();
    assert_eq!(
        audit.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&audit.stdout)
    );
}

#[test]
fn demo_replaces_a_previous_log_instead_of_appending() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("demo.sqlite");
    for _ in 0..2 {
        Command::cargo_bin("heatbound")
            .unwrap()
            .args(["demo", "--speed", "300", "--quiet", "--db"])
            .arg(&db)
            .assert()
            .success();
    }
    let conn = rusqlite::Connection::open(&db).unwrap();
    let runs: i64 = conn
        .query_row("SELECT COUNT(*) FROM runs", [], |r| r.get(0))
        .unwrap();
    assert_eq!(runs, 1);
}

#[test]
fn demo_rejects_a_bad_speed_in_one_line() {
    let out = Command::cargo_bin("heatbound")
        .unwrap()
        .args(["demo", "--speed=-1"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("--speed"), "{err}");
}

#[test]
fn demo_refuses_a_db_that_is_not_a_heatbound_log_and_leaves_it() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("run.csv");
    std::fs::write(&csv, "t_s,hot_c\n0,500\n").unwrap();
    let out = Command::cargo_bin("heatbound")
        .unwrap()
        .args(["demo", "--speed", "300", "--quiet", "--db"])
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(err.contains("not a heatbound log"), "{err}");
    assert_eq!(std::fs::read_to_string(&csv).unwrap(), "t_s,hot_c\n0,500\n");
}

#[test]
fn demo_refuses_a_picture_it_did_not_draw_where_its_chart_goes_before_starting() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("bench.sqlite");
    let png = dir.path().join("bench.png");
    let photo = b"\x89PNG\r\n\x1a\nsomeone's photo".to_vec();
    std::fs::write(&png, &photo).unwrap();
    let out = Command::cargo_bin("heatbound")
        .unwrap()
        .args(["demo", "--speed", "300", "--quiet", "--db"])
        .arg(&db)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("is not a chart heatbound drew"), "{err}");
    assert_eq!(std::fs::read(&png).unwrap(), photo, "the picture is left");
    assert!(!db.exists(), "nothing started: no log");
}
