//! `heatbound export`: a run of the log as CSV, read back with Python's `csv`
//! module (tests/tools/read_export.py) and compared, row by row and column by
//! column, with the log read directly with SQL (rusqlite, the columns of
//! docs/log-schema.md §3), not through heatbound's own reader. Also: which run
//! is taken, and that no file is overwritten unless asked.
//!
//! The logs are the simulated rig's (`simulate | watch`) and a run of frames
//! built here to set every alarm, fault and status bit, a heat pump's mode,
//! a diagnosis with a suspect, and figures that are not available.
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use heatbound::config::{Mode, RigConfig};
use heatbound::monitor::Channel;
use heatbound::wire::{self, FaultBits, Frame, Hello, RigId, Status, Summary, Verdict};
use serde_json::Value;
use tempfile::TempDir;

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("the workspace")
        .to_path_buf()
}

/// Logs `bytes` (a capture) into `db` with `heatbound watch`, as a new run.
fn watch_into(dir: &TempDir, db: &Path, bytes: &[u8]) {
    let cap = dir.path().join("capture.bin");
    std::fs::write(&cap, bytes).expect("write capture");
    heatbound()
        .args(["watch", "--input"])
        .arg(&cap)
        .arg("--db")
        .arg(db)
        .assert()
        .success();
}

/// A capture of the simulated rig in `scenario` (with `extra` flags).
fn simulated(dir: &TempDir, scenario: &str, extra: &[&str]) -> Vec<u8> {
    let cap = dir.path().join(format!("{scenario}.bin"));
    heatbound()
        .args(["simulate", "--scenario", scenario, "--duration-s", "600"])
        .args(extra)
        .arg("--output")
        .arg(&cap)
        .assert()
        .success();
    std::fs::read(&cap).expect("read capture")
}

fn encode(frames: &[Frame]) -> Vec<u8> {
    let mut out = Vec::new();
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    for f in frames {
        let n = wire::encode(f, &mut buf).expect("encode");
        out.extend_from_slice(&buf[..n]);
    }
    out
}

/// Frames that set every bit the export spells out, in turn, with a heat
/// pump's summaries among them and windows where a figure has no value.
fn every_bit() -> Vec<u8> {
    let hello = Frame::Hello(Hello::from_config(
        RigId::new("bench-7").expect("rig id"),
        (1, 2, 3),
        100,
        &RigConfig::default(),
    ));
    let mut frames = vec![hello];
    for seq in 0..24u16 {
        let i = usize::from(seq);
        let mode = if seq % 3 == 2 {
            Mode::HeatPump
        } else {
            Mode::Engine
        };
        // Every fourth window has no integrated time: no mean powers, no η.
        let empty = seq % 4 == 3;
        let (duration_s, heat_in_j) = if empty {
            (0.0, 0.0)
        } else {
            (10.0, 4000.0 + f32::from(seq))
        };
        frames.push(Frame::Summary(Summary {
            seq,
            t_ms: 10_000 * u32::from(seq) + 1,
            duration_s,
            heat_in_j,
            work_j: if empty { 0.0 } else { 600.5 },
            heat_out_j: if seq % 5 == 0 { 0.0 } else { 3300.25 },
            entropy_in_j_per_k: if empty { 0.0 } else { heat_in_j / 700.0 },
            entropy_out_j_per_k: if seq % 5 == 0 { 0.0 } else { 3300.25 / 300.0 },
            hot_temperature_integral_k_s: 7000.0,
            hot_pair_integral_k_s: if seq % 2 == 0 { 0.75 } else { 0.0 },
            ambient_k: (seq % 6 != 1).then_some(293.15),
            entropy_rate_w_per_k: (!empty).then_some(0.37),
            u_performance: Some(0.004),
            u_bound: (seq % 7 != 0).then_some(0.002),
            u_margin: Some(0.0045),
            u_entropy_rate_w_per_k: Some(0.01),
            status: Status {
                steady: seq % 2 == 1,
                heat_out_measured: seq % 5 != 0,
                trip_active: seq % 3 == 0,
                any_fault: i % 8 < 7,
                hot2_measured: seq % 2 == 0,
                mode,
            },
            faults: FaultBits {
                channels: if i % 8 < 6 { 1 << (i % 8) } else { 0 },
                stale: i % 8 == 6,
            },
            alarms: (1u8 << (i % 8)) & 0x7f,
            verdict: match seq % 4 {
                0 => Verdict::default(),
                1 => Verdict {
                    consistent: Some(true),
                    ..Verdict::default()
                },
                2 => Verdict {
                    consistent: Some(false),
                    suspect: Some(Channel::ALL[i % 6]),
                    bias: Some(-1.25),
                },
                _ => Verdict {
                    consistent: Some(false),
                    ..Verdict::default()
                },
            },
        }));
    }
    encode(&frames)
}

/// `export ARGS`: status, stdout, stderr.
fn export(args: &[&std::ffi::OsStr]) -> (Option<i32>, String, String) {
    let out = heatbound()
        .arg("export")
        .args(args)
        .output()
        .expect("run heatbound");
    (
        out.status.code(),
        String::from_utf8(out.stdout).expect("UTF-8 stdout"),
        String::from_utf8(out.stderr).expect("UTF-8 stderr"),
    )
}

/// The export read back by Python's `csv` module.
fn read_back(csv: &Path) -> (Vec<String>, Vec<serde_json::Map<String, Value>>) {
    let out = std::process::Command::new("python3")
        .arg(repo().join("tests/tools/read_export.py"))
        .arg(csv)
        .output()
        .expect("python3 (the export is read back with its csv module)");
    assert!(
        out.status.success(),
        "read_export.py: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).expect("JSON from read_export.py");
    let header = v["header"]
        .as_array()
        .unwrap()
        .iter()
        .map(|h| h.as_str().unwrap().to_string())
        .collect();
    let rows = v["rows"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r.as_object().unwrap().clone())
        .collect();
    (header, rows)
}

/// One `summaries` row as SQL gives it.
#[derive(Debug)]
struct LogRow {
    host_ms: i64,
    seq: i64,
    t_ms: i64,
    real: Vec<(&'static str, Option<f64>)>,
    status: i64,
    faults: i64,
    alarms: i64,
    verdict: Option<String>,
    suspect: Option<String>,
    mode: Option<String>,
}

/// The REAL columns of `summaries` the export carries as they are.
const REAL: [&str; 19] = [
    "duration_s",
    "heat_in_j",
    "work_j",
    "heat_out_j",
    "entropy_in_j_per_k",
    "entropy_out_j_per_k",
    "hot_mean_k",
    "ambient_k",
    "performance",
    "bound",
    "entropy_rate_w_per_k",
    "u_performance",
    "u_bound",
    "u_margin",
    "u_entropy_rate_w_per_k",
    "hot_temperature_integral_k_s",
    "hot_pair_integral_k_s",
    "suspect_bias",
    // Not a REAL of the log: filled below from the ones above.
    "margin",
];

fn log_rows(db: &Path, run: i64) -> Vec<LogRow> {
    let conn =
        rusqlite::Connection::open_with_flags(db, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
            .expect("open the log");
    let reals = REAL[..18].join(", ");
    let mut st = conn
        .prepare(&format!(
            "SELECT host_ms, seq, t_ms, status, faults, alarms, verdict, suspect, mode, {reals}
             FROM summaries WHERE run_id = ?1 ORDER BY ord"
        ))
        .expect("select");
    st.query_map([run], |r| {
        let mut real = Vec::new();
        for (i, name) in REAL[..18].iter().enumerate() {
            real.push((*name, r.get::<_, Option<f64>>(9 + i)?));
        }
        Ok(LogRow {
            host_ms: r.get(0)?,
            seq: r.get(1)?,
            t_ms: r.get(2)?,
            status: r.get(3)?,
            faults: r.get(4)?,
            alarms: r.get(5)?,
            verdict: r.get(6)?,
            suspect: r.get(7)?,
            mode: r.get(8)?,
            real,
        })
    })
    .expect("query")
    .collect::<Result<_, _>>()
    .expect("rows")
}

/// docs/log-schema.md §3: `alarms` bit i is rule i.
const ALARM_BITS: [&str; 7] = [
    "beyond_carnot",
    "negative_entropy_production",
    "near_carnot",
    "energy_balance",
    "over_temperature",
    "sensor_fault",
    "limit_ahead",
];

/// docs/log-schema.md §3: `faults` bits 0–5 channel hot, cold, heat_in_w,
/// work_w, heat_out_w, hot2; bit 7 stale.
const FAULT_BITS: [(&str, u32); 7] = [
    ("hot", 0),
    ("cold", 1),
    ("heat_in", 2),
    ("work", 3),
    ("heat_out", 4),
    ("hot2", 5),
    ("stale", 7),
];

/// docs/log-schema.md §3: `status` bits 0 steady, 1 heat_out_measured,
/// 2 trip_active, 3 any_fault, 4 hot2_measured.
const STATUS_BITS: [(&str, u32); 5] = [
    ("steady", 0),
    ("heat_out_measured", 1),
    ("trip_active", 2),
    ("any_fault", 3),
    ("hot2_measured", 4),
];

/// A float cell as its f32 (the log's REALs are f32 values, widened).
fn as_f32(v: &Value) -> Option<f32> {
    v.as_f64().map(|x| x as f32)
}

/// Every cell of `csv` (run `run` of `db`) against the log.
fn same_as_log(csv: &Path, db: &Path, run: i64) -> usize {
    let (header, rows) = read_back(csv);
    let log = log_rows(db, run);
    assert_eq!(rows.len(), log.len(), "one row per summary");
    assert!(!log.is_empty());
    let mut checked: BTreeSet<String> = BTreeSet::new();
    for (i, (row, l)) in rows.iter().zip(&log).enumerate() {
        let mut check = |name: &str, ok: bool, expected: String| {
            checked.insert(name.to_string());
            assert!(
                ok,
                "row {i} (seq {}), {name}: {} in the export, {expected} in the log",
                l.seq, row[name]
            );
        };
        let num = |name: &str| row[name].as_f64();
        check("run_id", num("run_id") == Some(run as f64), run.to_string());
        check("seq", num("seq") == Some(l.seq as f64), l.seq.to_string());
        check(
            "host_time_utc",
            row["host_time_utc"].as_i64() == Some(l.host_ms),
            l.host_ms.to_string(),
        );
        check(
            "rig_time_s",
            num("rig_time_s").map(|s| (s * 1000.0).round() as i64) == Some(l.t_ms),
            l.t_ms.to_string(),
        );
        let mode = l.mode.clone().unwrap_or_default();
        check("mode", row["mode"] == mode.as_str(), mode);
        let logged = |name: &str| {
            l.real
                .iter()
                .find(|(n, _)| *n == name)
                .and_then(|(_, v)| *v)
        };
        for name in &REAL[..18] {
            let stored = logged(name);
            if let Some(x) = stored {
                assert_eq!(f64::from(x as f32), x, "{name}: the log holds f32 values");
            }
            check(
                name,
                as_f32(&row[*name]) == stored.map(|x| x as f32),
                format!("{stored:?}"),
            );
        }
        // The derived figures, from the logged values in single precision.
        let f = |name: &str| logged(name).map(|x| x as f32);
        let (duration, performance, bound) = (f("duration_s"), f("performance"), f("bound"));
        for (name, energy) in [
            ("heat_in_w", "heat_in_j"),
            ("work_w", "work_j"),
            ("heat_out_w", "heat_out_j"),
        ] {
            let expected = duration
                .filter(|d| *d > 0.0)
                .and_then(|d| Some(f(energy)? / d));
            check(
                name,
                as_f32(&row[name]) == expected,
                format!("{expected:?}"),
            );
        }
        let cold = f("entropy_out_j_per_k")
            .filter(|s| *s > 0.0)
            .and_then(|s| Some(f("heat_out_j")? / s));
        check(
            "cold_mean_k",
            as_f32(&row["cold_mean_k"]) == cold,
            format!("{cold:?}"),
        );
        let margin = bound.zip(performance).map(|(b, p)| b - p);
        check(
            "margin",
            as_f32(&row["margin"]) == margin,
            format!("{margin:?}"),
        );
        for (name, bit) in STATUS_BITS {
            let expected = (l.status >> bit) & 1;
            check(
                name,
                num(name) == Some(expected as f64),
                expected.to_string(),
            );
        }
        for (i, rule) in ALARM_BITS.iter().enumerate() {
            let expected = (l.alarms >> i) & 1;
            let name = format!("alarm_{rule}");
            check(
                &name,
                num(&name) == Some(expected as f64),
                expected.to_string(),
            );
        }
        for (channel, bit) in FAULT_BITS {
            let expected = (l.faults >> bit) & 1;
            let name = format!("fault_{channel}");
            check(
                &name,
                num(&name) == Some(expected as f64),
                expected.to_string(),
            );
        }
        let verdict = l.verdict.clone().unwrap_or_default();
        check("verdict", row["verdict"] == verdict.as_str(), verdict);
        let suspect = l.suspect.clone().unwrap_or_default();
        // The log names power channels heat_in, work, heat_out as well.
        check("suspect", row["suspect"] == suspect.as_str(), suspect);
    }
    let columns: BTreeSet<String> = header.iter().cloned().collect();
    assert_eq!(columns.len(), header.len(), "no column twice");
    assert_eq!(checked, columns, "every column compared");
    rows.len()
}

#[test]
fn the_export_reads_back_as_the_log() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("log.sqlite");
    watch_into(&dir, &db, &simulated(&dir, "open-thermocouple", &[]));
    watch_into(&dir, &db, &simulated(&dir, "hot2-drift", &["--hot2"]));
    watch_into(&dir, &db, &every_bit());

    // Default: the latest run, and stderr says which.
    let out = dir.path().join("latest.csv");
    let (code, stdout, stderr) = export(&[db.as_os_str(), "--out".as_ref(), out.as_os_str()]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(
        stderr.contains("run 3 of 3 runs, the latest with summaries"),
        "{stderr}"
    );
    assert_eq!(
        stdout,
        format!("export: {} (run 3, 24 summaries)\n", out.display())
    );
    assert_eq!(same_as_log(&out, &db, 3), 24);

    for run in [1, 2] {
        let out = dir.path().join(format!("run{run}.csv"));
        let (code, _, stderr) = export(&[
            db.as_os_str(),
            "--run".as_ref(),
            run.to_string().as_ref(),
            "-o".as_ref(),
            out.as_os_str(),
        ]);
        assert_eq!(code, Some(0), "{stderr}");
        assert!(
            stderr.contains(&format!("run {run} of 3 runs, as --run asked")),
            "{stderr}"
        );
        assert_eq!(same_as_log(&out, &db, run), 600);
    }
}

#[test]
fn no_file_is_overwritten_unless_asked() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("log.sqlite");
    watch_into(&dir, &db, &every_bit());
    let out = dir.path().join("notes.csv");
    std::fs::write(&out, "someone's notes\n").unwrap();

    let (code, stdout, stderr) = export(&[db.as_os_str(), "--out".as_ref(), out.as_os_str()]);
    assert_eq!(code, Some(2));
    assert_eq!(stdout, "");
    assert!(
        stderr.ends_with(&format!(
            "heatbound: error: {}: --out: the file exists; give --force to replace it\n",
            out.display()
        )),
        "{stderr}"
    );
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "someone's notes\n");

    // The log itself, never, even with --force.
    let (code, _, stderr) = export(&[
        db.as_os_str(),
        "--out".as_ref(),
        db.as_os_str(),
        "--force".as_ref(),
    ]);
    assert_eq!(code, Some(2));
    assert!(stderr.contains("that is the log itself"), "{stderr}");

    let (code, _, stderr) = export(&[
        db.as_os_str(),
        "--out".as_ref(),
        out.as_os_str(),
        "--force".as_ref(),
    ]);
    assert_eq!(code, Some(0), "{stderr}");
    assert_eq!(same_as_log(&out, &db, 1), 24);
    // Nothing left beside it.
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("partial"))
        .collect();
    assert!(names.is_empty(), "{names:?}");
}

#[test]
fn bad_input_is_one_line_with_status_2() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("log.sqlite");
    let out = dir.path().join("out.csv");
    let missing = dir.path().join("nope.sqlite");
    let (code, _, stderr) = export(&[missing.as_os_str(), "--out".as_ref(), out.as_os_str()]);
    assert_eq!(code, Some(2));
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.contains("nope.sqlite: cannot open"), "{stderr}");
    // A file that is not a log.
    let text = dir.path().join("notes.txt");
    std::fs::write(&text, "not a database").unwrap();
    let (code, _, stderr) = export(&[text.as_os_str(), "--out".as_ref(), out.as_os_str()]);
    assert_eq!(code, Some(2));
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    watch_into(&dir, &db, &every_bit());
    let (code, _, stderr) = export(&[
        db.as_os_str(),
        "--run".as_ref(),
        "9".as_ref(),
        "--out".as_ref(),
        out.as_os_str(),
    ]);
    assert_eq!(code, Some(2));
    assert!(
        stderr.contains("--run 9: no such run in the log (it holds run 1)"),
        "{stderr}"
    );
    assert!(!out.exists());
}
