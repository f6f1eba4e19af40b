//! A spliced, replayed section (`A[..x] + A[x-179..x] + A[x..]`) is 179
//! summaries sent again: nothing is missing, nothing restarted, and the log
//! does not store them as new. Also the tail and reconnect cases of the
//! decoder at the Ingest level.
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use heatbound::wire::{self, Frame};
use heatbound_host::ingest::{Ingest, LineStyle};
use heatbound_host::store::{LinkErrorKind, Log};
use rusqlite::Connection;
use serde_json::Value;
use tempfile::TempDir;

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

fn capture(dir: &TempDir, seconds: u32) -> PathBuf {
    let cap = dir.path().join("a.bin");
    heatbound()
        .args(["simulate", "--scenario", "steady", "--duration-s"])
        .arg(seconds.to_string())
        .arg("--output")
        .arg(&cap)
        .assert()
        .success();
    cap
}

/// The capture's frames, each with its delimiter.
fn frames(bytes: &[u8]) -> Vec<&[u8]> {
    bytes.split_inclusive(|&b| b == 0).collect()
}

fn summary_index(frames: &[&[u8]], seq: u16) -> usize {
    frames
        .iter()
        .position(|f| matches!(wire::decode(f), Ok(Frame::Summary(s)) if s.seq == seq))
        .expect("the summary is in the capture")
}

/// `A[..x] + A[x-back..x] + A[x..]` by summary sequence numbers.
fn spliced(a: &[u8], x: u16, back: u16) -> Vec<u8> {
    let f = frames(a);
    let (from, to) = (summary_index(&f, x - back), summary_index(&f, x));
    let mut out = Vec::new();
    for part in [&f[..to], &f[from..to], &f[to..]] {
        for frame in part {
            out.extend_from_slice(frame);
        }
    }
    out
}

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

fn watch(input: &Path, db: &Path) {
    heatbound()
        .args(["watch", "--quiet", "--input"])
        .arg(input)
        .arg("--db")
        .arg(db)
        .assert()
        .success();
}

fn count(db: &Path, table: &str) -> i64 {
    Connection::open(db)
        .unwrap()
        .query_row(&format!("SELECT count(*) FROM {table}"), [], |r| r.get(0))
        .unwrap()
}

fn assert_replay_report(r: &Value, what: &str) {
    let g = &r["integrity"];
    assert_eq!(r["trustworthy"], false, "{what}: {r:#}");
    assert_eq!(g["replayed"], 179, "{what}: {g:#}");
    assert_eq!(g["missing_summaries"], 0, "{what}: {g:#}");
    assert_eq!(g["duplicates"], 0, "{what}: {g:#}");
    assert_eq!(g["restarts"], 0, "{what}: {g:#}");
    assert_eq!(g["unannounced_restarts"], 0, "{what}: {g:#}");
    assert!(
        g["problems"].to_string().contains("179 summaries replayed"),
        "{what}: {g:#}"
    );
    // The original summaries all recompute; the replayed ones are not
    // checked again.
    assert_eq!(r["recomputation"]["summaries"], 900, "{what}: {r:#}");
    assert_eq!(r["recomputation"]["mismatches"], 0, "{what}: {r:#}");
}

#[test]
fn a_replayed_section_is_a_replay_in_the_capture_and_in_the_log() {
    let dir = TempDir::new().expect("temp dir");
    let a = std::fs::read(capture(&dir, 900)).expect("read");
    // The section holds periodic Hellos (the simulator sends one every 60
    // summaries). x = 610 is not at a Hello; with x = 600 the Hello that
    // precedes seq 600 comes right before the replayed section.
    for x in [610u16, 600] {
        let t = dir.path().join(format!("replay-{x}.bin"));
        std::fs::write(&t, spliced(&a, x, 179)).expect("write");
        let (code, r) = audit_json(&t);
        assert_eq!(code, 1, "{r:#}");
        assert_replay_report(&r, &format!("capture x={x}"));

        let db = dir.path().join(format!("replay-{x}.db"));
        watch(&t, &db);
        assert_eq!(
            count(&db, "summaries"),
            900,
            "replays are not stored as new"
        );
        assert_eq!(count(&db, "summaries"), 900, "x={x}");
        let log = Log::open_read(&db).expect("open log");
        let replays: Vec<_> = log
            .link_errors(1)
            .expect("link errors")
            .into_iter()
            .filter(|e| e.kind == LinkErrorKind::Replay)
            .collect();
        assert_eq!(
            replays.iter().map(|e| e.count).sum::<u64>(),
            179,
            "{replays:?}"
        );
        assert!(replays[0].detail.contains("not stored"), "{replays:?}");
        let (code, r) = audit_json(&db);
        assert_eq!(code, 1, "{r:#}");
        assert_replay_report(&r, &format!("log x={x}"));
    }
}

#[test]
fn the_same_capture_twice_after_its_hello_is_still_a_restart() {
    // A real restart announces itself with a Hello and starts again near
    // boot time: two whole captures end to end.
    let dir = TempDir::new().expect("temp dir");
    let a = std::fs::read(capture(&dir, 120)).expect("read");
    let t = dir.path().join("twice.bin");
    std::fs::write(&t, [a.clone(), a].concat()).expect("write");
    let (_, r) = audit_json(&t);
    let g = &r["integrity"];
    assert_eq!(g["restarts"], 1, "{g:#}");
    assert_eq!(g["unannounced_restarts"], 0, "{g:#}");
    assert_eq!(g["replayed"], 0, "{g:#}");
    assert_eq!(r["trustworthy"], true, "{r:#}");
}

#[test]
fn a_restart_without_its_hello_is_still_an_unannounced_restart() {
    // Another device session (another noise seed, so new contents) spliced
    // in with its first Hello cut off.
    let dir = TempDir::new().expect("temp dir");
    let a = std::fs::read(capture(&dir, 120)).expect("read");
    let other = dir.path().join("seed2.bin");
    heatbound()
        .args(["simulate", "--seed", "2", "--duration-s", "30"])
        .arg("--output")
        .arg(&other)
        .assert()
        .success();
    let b = std::fs::read(&other).expect("read");
    let headless = &b[frames(&b)[0].len()..];
    let t = dir.path().join("restart.bin");
    std::fs::write(&t, [a.as_slice(), headless].concat()).expect("write");
    let (code, r) = audit_json(&t);
    assert_eq!(code, 1, "{r:#}");
    let g = &r["integrity"];
    assert_eq!(g["restarts"], 1, "{g:#}");
    assert_eq!(g["unannounced_restarts"], 1, "{g:#}");
    assert_eq!(g["replayed"], 0, "{g:#}");
}

#[test]
fn an_unterminated_tail_is_one_frame_lost() {
    // `{ cat a.bin; head -c 200 /dev/zero | tr '\0' '\001'; } > t.bin`:
    // 200 bytes with no delimiter after the last frame. The decoder's
    // buffer (wire::MAX_FRAME_LEN) is shorter than the tail.
    const { assert!(wire::MAX_FRAME_LEN < 200) };
    let dir = TempDir::new().expect("temp dir");
    let mut bytes = std::fs::read(capture(&dir, 60)).expect("read");
    bytes.extend(std::iter::repeat_n(1u8, 200));
    let t = dir.path().join("t.bin");
    std::fs::write(&t, &bytes).expect("write");
    let (code, r) = audit_json(&t);
    assert_eq!(code, 1, "{r:#}");
    assert_eq!(r["trustworthy"], false);
    let g = &r["integrity"];
    let lost = g["crc_errors"].as_u64().unwrap_or(0)
        + g["overlong"].as_u64().unwrap_or(0)
        + g["malformed"].as_u64().unwrap_or(0)
        + g["unknown_version"].as_u64().unwrap_or(0);
    assert_eq!(lost, 1, "{g:#}");
}

#[test]
fn watch_of_a_capture_with_megabytes_of_garbage_tail_logs_the_loss() {
    let dir = TempDir::new().expect("temp dir");
    let mut bytes = std::fs::read(capture(&dir, 30)).expect("read");
    bytes.extend(std::iter::repeat_n(1u8, 3 << 20));
    let t = dir.path().join("tail.bin");
    std::fs::write(&t, &bytes).expect("write");
    let db = dir.path().join("tail.db");
    watch(&t, &db);
    assert!(count(&db, "link_errors") >= 1);
    let (code, r) = audit_json(&db);
    assert_eq!(code, 1, "{r:#}");
    assert_eq!(r["integrity"]["overlong"], 1, "{r:#}");
    assert_eq!(r["integrity"]["summaries"], 30, "{r:#}");
}

#[test]
fn a_reconnect_after_an_overlong_tail_accepts_the_first_hello() {
    let dir = TempDir::new().expect("temp dir");
    let a = std::fs::read(capture(&dir, 5)).expect("read");
    let hello = frames(&a)[0].to_vec();
    assert!(matches!(wire::decode(&hello), Ok(Frame::Hello(_))));
    let log = Log::open(&dir.path().join("r.db")).expect("log");
    let mut ingest = Ingest::new(log, "test:reconnect", 0, LineStyle::Quiet).expect("ingest");
    // Garbage longer than the decoder's buffer, with no delimiter.
    let garbage = vec![1u8; wire::MAX_FRAME_LEN * 3];
    ingest.feed(&garbage, 10, |_| {}).expect("feed");
    ingest.link_down(20, "connection closed").expect("down");
    ingest.link_up(30).expect("up");
    ingest.feed(&hello, 40, |_| {}).expect("feed hello");
    let t = ingest.totals();
    assert_eq!(t.hellos, 1, "{t:?}");
    assert_eq!(t.overlong, 1, "{t:?}");
    let t = ingest.finish(50).expect("finish");
    assert_eq!(t.hellos, 1, "{t:?}");
}

/// The reasons the live line gives for an undefined figure follow from the
/// window's integrals (DESIGN.md §4: T_c = Q_out/S_out, η_C needs T_h > T_c).
#[test]
fn an_undefined_figure_says_why() {
    use heatbound::wire::Summary;
    use heatbound_host::ingest::why_undefined;
    let ok = Summary {
        duration_s: 1.0,
        heat_in_j: 100.0,
        entropy_in_j_per_k: 100.0 / 650.0,
        work_j: 20.0,
        heat_out_j: 80.0,
        entropy_out_j_per_k: 80.0 / 300.0,
        entropy_rate_w_per_k: Some(0.1),
        ..Summary::default()
    };
    assert_eq!(why_undefined(&ok), None);
    let no_heat_out = Summary {
        heat_out_j: 0.0,
        entropy_out_j_per_k: 0.0,
        ..ok
    };
    assert!(why_undefined(&no_heat_out).is_some_and(|w| w.contains("no heat out")));
    // T_h = Q_in/S_in = 290 K, below T_c.
    let inverted = Summary {
        entropy_in_j_per_k: 100.0 / 290.0,
        ..ok
    };
    assert!(why_undefined(&inverted).is_some_and(|w| w.contains("T_h is not above T_c")));
    let no_heat_in = Summary {
        heat_in_j: 0.0,
        entropy_in_j_per_k: 0.0,
        ..ok
    };
    assert!(why_undefined(&no_heat_in).is_some_and(|w| w.contains("no heat in")));
}
