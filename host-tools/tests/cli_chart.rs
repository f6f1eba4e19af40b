//! `heatbound chart`: a picture of a logged run, PNG or SVG, with its axes and
//! series named, run selection, the device clock's wrap, and one-line errors
//! with exit status 2. Records that break (outages, restarts, new runs) are in
//! `chart_breaks.rs`.
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use heatbound::alarm::{Event, EventKind, RuleId, Severity};
use heatbound::config::{Mode, RigConfig};
use heatbound::wire::{self, EventFrame, Frame, Hello, RigId, Status, Summary};
use tempfile::TempDir;

/// The size `heatbound chart` draws, pixels.
const SIZE: (u32, u32) = (1400, 1000);

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
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

/// A log of `duration_s` of the simulated rig in `scenario`, as `simulate | watch` writes it.
fn simulated_log(dir: &TempDir, scenario: &str, duration_s: u32) -> PathBuf {
    let cap = dir.path().join(format!("{scenario}.bin"));
    heatbound()
        .args(["simulate", "--scenario", scenario, "--duration-s"])
        .arg(duration_s.to_string())
        .arg("--output")
        .arg(&cap)
        .assert()
        .success();
    let db = dir.path().join(format!("{scenario}.sqlite"));
    watch_into(dir, &db, &std::fs::read(&cap).expect("read capture"));
    db
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

fn hello(mode: Mode) -> Frame {
    let config = RigConfig {
        mode,
        ambient_k: Some(293.15),
        ..RigConfig::default()
    };
    Frame::Hello(Hello::from_config(
        RigId::new("rig-under-test").expect("rig id"),
        (2, 4, 6),
        100,
        &config,
    ))
}

/// An engine summary with η = `performance` (`None`: no heat in, so no η).
fn summary(seq: u16, t_ms: u32, performance: Option<f32>) -> Frame {
    let heat_in_j = if performance.is_some() { 6000.0 } else { 0.0 };
    let work_j = performance.map_or(1800.0, |eta| eta * heat_in_j);
    summary_of(seq, t_ms, Mode::Engine, heat_in_j, work_j)
}

/// A heat-pump summary with COP = Q_hot/W = `cop` (`None`: no work, so no
/// COP).
fn pump_summary(seq: u16, t_ms: u32, cop: Option<f32>) -> Frame {
    let work_j = if cop.is_some() { 1800.0 } else { 0.0 };
    let heat_in_j = cop.map_or(6000.0, |c| c * work_j);
    summary_of(seq, t_ms, Mode::HeatPump, heat_in_j, work_j)
}

fn summary_of(seq: u16, t_ms: u32, mode: Mode, heat_in_j: f32, work_j: f32) -> Frame {
    Frame::Summary(Summary {
        seq,
        t_ms,
        duration_s: 6.0,
        heat_in_j,
        work_j,
        heat_out_j: 4200.0,
        entropy_in_j_per_k: heat_in_j / 600.0,
        entropy_out_j_per_k: 14.0,
        ambient_k: Some(293.15),
        entropy_rate_w_per_k: Some(0.666),
        u_performance: Some(0.004),
        u_bound: Some(0.002),
        u_margin: Some(0.0045),
        u_entropy_rate_w_per_k: Some(0.01),
        status: Status {
            mode,
            ..Status::default()
        },
        alarms: 0,
        ..Summary::default()
    })
}

/// Runs `heatbound chart ARGS`; returns the exit status, stdout and stderr.
fn chart(args: &[&std::ffi::OsStr]) -> (Option<i32>, String, String) {
    let out = heatbound()
        .arg("chart")
        .args(args)
        .output()
        .expect("run heatbound");
    (
        out.status.code(),
        String::from_utf8(out.stdout).expect("UTF-8 stdout"),
        String::from_utf8(out.stderr).expect("UTF-8 stderr"),
    )
}

/// Asserts a failed run printed exactly one `heatbound: error:` line
/// containing `needle`, and exited with status 2.
fn assert_one_line_error(result: &(Option<i32>, String, String), needle: &str) {
    let (code, stdout, stderr) = result;
    assert_eq!(*code, Some(2), "stdout: {stdout}\nstderr: {stderr}");
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
    assert!(stderr.starts_with("heatbound: error: "), "{stderr}");
    assert!(stderr.contains(needle), "{needle:?} not in {stderr}");
}

/// Width and height from a PNG's IHDR chunk, after checking the signature.
/// Layout from the PNG specification (W3C / ISO/IEC 15948): the 8-byte
/// signature (§5.2), then the IHDR chunk first, its length and type in bytes
/// 8..16 and width and height as big-endian u32 in bytes 16..24 (§11.2.2).
fn png_size(bytes: &[u8]) -> (u32, u32) {
    assert!(bytes.len() > 24, "{} bytes", bytes.len());
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n", "PNG signature");
    assert_eq!(&bytes[12..16], b"IHDR", "IHDR first");
    let be = |b: &[u8]| u32::from_be_bytes([b[0], b[1], b[2], b[3]]);
    (be(&bytes[16..20]), be(&bytes[20..24]))
}

/// Nothing half-written is left beside the pictures.
fn assert_no_partial_files(dir: &Path) {
    let left: Vec<_> = std::fs::read_dir(dir)
        .expect("list the directory")
        .filter_map(Result::ok)
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|name| name.contains(".partial-"))
        .collect();
    assert!(left.is_empty(), "{left:?}");
}

#[test]
fn a_png_is_drawn_beside_the_log_at_the_chosen_size() {
    let dir = TempDir::new().expect("temp dir");
    let db = simulated_log(&dir, "thermocouple-drift", 600);
    let (code, stdout, stderr) = chart(&[db.as_os_str()]);
    assert_eq!(code, Some(0), "{stderr}");
    let png = dir.path().join("thermocouple-drift.png");
    assert_eq!(
        stdout.lines().next(),
        Some(
            format!(
                "chart: {} (run 1, 600 summaries, t = 1.0–600.0 s)",
                png.display()
            )
            .as_str()
        ),
        "{stdout}"
    );
    assert!(stdout.contains("not a safety-rated interlock"), "{stdout}");
    assert!(
        stderr.is_empty(),
        "no progress or noise off a terminal: {stderr}"
    );
    let bytes = std::fs::read(&png).expect("the PNG beside the log");
    assert_eq!(png_size(&bytes), SIZE);
    assert_no_partial_files(dir.path());
}

#[test]
fn an_svg_names_its_axes_series_and_alarm_events() {
    let dir = TempDir::new().expect("temp dir");
    let db = simulated_log(&dir, "thermocouple-drift", 600);
    let svg = dir.path().join("drift.svg");
    let (code, stdout, stderr) = chart(&[db.as_os_str(), "--out".as_ref(), svg.as_os_str()]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(
        stdout.starts_with(&format!("chart: {} (run 1,", svg.display())),
        "{stdout}"
    );
    let text = std::fs::read_to_string(&svg).expect("the SVG, as text");
    // A comment that marks it as drawn here, then the picture.
    assert!(
        text.starts_with("<!-- heatbound chart -->\n<svg"),
        "{}",
        &text[..text.len().min(200)]
    );
    assert!(text.contains(r#"width="1400""#) && text.contains(r#"height="1000""#));
    for label in [
        // The four panels' axes (titles wrapped to the panel's height) and
        // the shared time axis.
        "efficiency η, Carnot",
        "entropy generation",
        "(W/K)",
        "temperature (K)",
        "mean power (W)",
        "device time (s)",
        // The series.
        "η = W/Q_in",
        "η_C = 1 − T_c/T_h",
        "± k·u, k = 2",
        "T_h, heat-weighted hot-side mean",
        "T_c, heat-weighted cold-side mean",
        "T0, ambient used by the device",
        "Q_in/Δt, heat in",
        "W/Δt, work",
        "Q_out/Δt, heat out",
        "second-law alarm active",
        // The title: rig, firmware, run and time span.
        "rig bench-sim · firmware 0.1.0 · run 1 · t = 1.0–600.0 s",
        "engine mode · 600 summaries, every summary drawn",
        // The drift raises beyond_carnot; its event is named in the legend.
        "beyond_carnot: raised",
        "monitoring aids, not a safety interlock",
    ] {
        assert!(text.contains(label), "{label:?} missing from the SVG");
    }
    // Every drawn number is finite.
    for bad in ["NaN", "inf"] {
        assert!(!text.contains(bad), "{bad} in the SVG");
    }
    // The second-law alarm spans are shaded: rectangles in the alarm colour.
    assert!(text.contains("#F0B429"), "no alarm shading");
    // An unbroken record: nothing marked, no strip of marks' words.
    for absent in ["link down", "restart", "new run", "session"] {
        assert!(!text.contains(absent), "{absent:?} in the SVG");
    }
}

#[test]
fn a_heat_pump_run_is_labelled_with_cop_and_missing_values_are_skipped() {
    let dir = TempDir::new().expect("temp dir");
    let db = dir.path().join("pump.sqlite");
    let mut frames = vec![hello(Mode::HeatPump)];
    for i in 0..20u16 {
        // Summary 7 has no figure of merit: not drawn, not a NaN in the file.
        let performance = (i != 7).then_some(3.0 + f32::from(i) * 0.01);
        frames.push(pump_summary(i, 1000 * (u32::from(i) + 1), performance));
    }
    watch_into(&dir, &db, &encode(&frames));
    let svg = dir.path().join("pump.svg");
    let (code, _, stderr) = chart(&[db.as_os_str(), "--out".as_ref(), svg.as_os_str()]);
    assert_eq!(code, Some(0), "{stderr}");
    let text = std::fs::read_to_string(&svg).expect("the SVG");
    assert!(text.contains("COP_heating = Q_hot/W"), "heat-pump label");
    assert!(
        text.contains("Carnot COP = T_h/(T_h − T_c)"),
        "heat-pump bound"
    );
    assert!(
        !text.contains("η_C"),
        "an engine label in a heat-pump chart"
    );
    assert!(
        text.contains("rig rig-under-test · firmware 2.4.6"),
        "title"
    );
    assert!(text.contains("heat pump mode · 20 summaries"), "subtitle");
    assert!(text.contains("no alarm events in this run"));
    assert!(!text.contains("NaN"));
}

#[test]
fn the_time_axis_runs_through_the_device_clock_wrap() {
    let dir = TempDir::new().expect("temp dir");
    let db = dir.path().join("wrap.sqlite");
    // Ten summaries a second apart, starting 5 s before the u32 ms roll-over.
    let start = u32::MAX - 4_999;
    let mut frames = vec![hello(Mode::Engine)];
    for i in 0..10u16 {
        frames.push(summary(
            i,
            start.wrapping_add(1000 * u32::from(i)),
            Some(0.3),
        ));
    }
    frames.push(Frame::Event(EventFrame {
        seq: 10,
        event: Event {
            t_ms: start.wrapping_add(7_500),
            rule: RuleId::NearCarnot,
            kind: EventKind::Raised,
            severity: Severity::Advisory,
        },
        verdict: Default::default(),
    }));
    watch_into(&dir, &db, &encode(&frames));
    let svg = dir.path().join("wrap.svg");
    let (code, stdout, stderr) = chart(&[db.as_os_str(), "--out".as_ref(), svg.as_os_str()]);
    assert_eq!(code, Some(0), "{stderr}");
    // 4294962.296 s to 4294971.296 s: nine seconds, not 49.7 days backwards.
    assert!(
        stdout.contains("(run 1, 10 summaries, t = 4294962.3–4294971.3 s)"),
        "{stdout}"
    );
    let text = std::fs::read_to_string(&svg).expect("the SVG");
    assert!(text.contains("(9 s)"), "the title's duration");
    // The event's device time, as watch printed it (t_ms 2500 after the
    // wrap), and where it is on the axis that runs on through the wrap.
    assert!(
        text.contains("near_carnot: raised 2.5 s (4294969.8 s on the axis)"),
        "the event, placed"
    );
    assert!(
        text.contains("device time (s); the device clock wrapped at 2^32 ms"),
        "the wrap, said"
    );
}

#[test]
fn run_selects_a_run_and_the_default_is_the_latest_with_summaries() {
    let dir = TempDir::new().expect("temp dir");
    let db = dir.path().join("runs.sqlite");
    let run = |n: u16| {
        let mut frames = vec![hello(Mode::Engine)];
        frames.extend((0..n).map(|i| summary(i, 1000 * (u32::from(i) + 1), Some(0.3))));
        encode(&frames)
    };
    watch_into(&dir, &db, &run(5)); // run 1
    watch_into(&dir, &db, &run(8)); // run 2
    watch_into(&dir, &db, &run(0)); // run 3: a Hello only
    let out = dir.path().join("c.png");
    let (code, stdout, stderr) = chart(&[db.as_os_str(), "--out".as_ref(), out.as_os_str()]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(
        stdout.contains("(run 2, 8 summaries, t = 1.0–8.0 s)"),
        "{stdout}"
    );
    let (code, stdout, stderr) = chart(&[
        db.as_os_str(),
        "--run".as_ref(),
        "1".as_ref(),
        "--out".as_ref(),
        out.as_os_str(),
    ]);
    assert_eq!(code, Some(0), "{stderr}");
    assert!(
        stdout.contains("(run 1, 5 summaries, t = 1.0–5.0 s)"),
        "{stdout}"
    );
    assert_eq!(png_size(&std::fs::read(&out).expect("PNG")), SIZE);

    // A run that does not exist, and one without summaries.
    let name = db.display().to_string();
    assert_one_line_error(
        &chart(&[db.as_os_str(), "--run".as_ref(), "9".as_ref()]),
        &format!("{name}: --run 9: no such run in the log (it holds runs 1 to 3)"),
    );
    assert_one_line_error(
        &chart(&[db.as_os_str(), "--run".as_ref(), "3".as_ref()]),
        &format!("{name}: run 3: no summaries to chart"),
    );
}

#[test]
fn unreadable_input_and_a_bad_extension_are_one_line_errors() {
    let dir = TempDir::new().expect("temp dir");

    // A missing file.
    let missing = dir.path().join("missing.sqlite");
    assert_one_line_error(
        &chart(&[missing.as_os_str()]),
        &format!("{}: cannot open: ", missing.display()),
    );
    assert!(!dir.path().join("missing.png").exists());

    // A log with runs but no summaries at all.
    let empty = dir.path().join("hello-only.sqlite");
    watch_into(&dir, &empty, &encode(&[hello(Mode::Engine)]));
    assert_one_line_error(
        &chart(&[empty.as_os_str()]),
        &format!(
            "{}: no run in the log has summaries to chart",
            empty.display()
        ),
    );

    // A file that is not a log.
    let text = dir.path().join("notes.sqlite");
    std::fs::write(&text, "not a database, just words").expect("write");
    assert_one_line_error(&chart(&[text.as_os_str()]), &text.display().to_string());

    // An output format this tool does not write, before any reading.
    let db = dir.path().join("ok.sqlite");
    let mut frames = vec![hello(Mode::Engine)];
    frames.extend((0..3).map(|i| summary(i, 1000 * (u32::from(i) + 1), Some(0.3))));
    watch_into(&dir, &db, &encode(&frames));
    let jpg = dir.path().join("chart.jpg");
    assert_one_line_error(
        &chart(&[db.as_os_str(), "--out".as_ref(), jpg.as_os_str()]),
        &format!("{}: --out: unknown picture format \"jpg\"", jpg.display()),
    );
    assert!(!jpg.exists());
    let bare = dir.path().join("chart");
    assert_one_line_error(
        &chart(&[db.as_os_str(), "--out".as_ref(), bare.as_os_str()]),
        "--out: no extension",
    );
    // A directory that does not exist: the write fails, in one line, for
    // either format.
    for name in ["c.svg", "c.png"] {
        let nowhere = dir.path().join("no-such-dir").join(name);
        assert_one_line_error(
            &chart(&[db.as_os_str(), "--out".as_ref(), nowhere.as_os_str()]),
            &format!(
                "{}: cannot write: No such file or directory",
                nowhere.display()
            ),
        );
    }
    // A directory given as the log.
    assert_one_line_error(
        &chart(&[dir.path().as_os_str()]),
        &format!("{}: cannot open: is a directory", dir.path().display()),
    );
    assert_no_partial_files(dir.path());
}

#[test]
fn a_chart_replaces_only_a_picture_it_drew() {
    let dir = TempDir::new().expect("temp dir");
    let db = simulated_log(&dir, "steady", 60);
    let png = dir.path().join("mine.png");
    let (code, _, stderr) = chart(&[db.as_os_str(), "--out".as_ref(), png.as_os_str()]);
    assert_eq!(code, Some(0), "{stderr}");
    // Every chunk's CRC checks out with Python's zlib (an independent
    // CRC-32), and the mark is a tEXt chunk right after IHDR (W3C PNG
    // §5.3 chunk layout, §11.3.4.3 tEXt).
    let check = std::process::Command::new("python3")
        .arg("-c")
        .arg(
            "import struct, sys, zlib\n\
             b = open(sys.argv[1], 'rb').read()\n\
             assert b[:8] == b'\\x89PNG\\r\\n\\x1a\\n'\n\
             i, kinds = 8, []\n\
             while i < len(b):\n\
             \x20   n, = struct.unpack('>I', b[i:i+4]); t = b[i+4:i+8]; d = b[i+8:i+8+n]\n\
             \x20   crc, = struct.unpack('>I', b[i+8+n:i+12+n])\n\
             \x20   assert zlib.crc32(t + d) == crc, t\n\
             \x20   kinds.append((t, d)); i += 12 + n\n\
             assert kinds[1] == (b'tEXt', b'Software\\x00heatbound chart'), kinds[1]\n\
             assert kinds[-1][0] == b'IEND'\n\
             print('ok')",
        )
        .arg(&png)
        .output()
        .expect("python3");
    assert_eq!(
        String::from_utf8_lossy(&check.stdout).trim(),
        "ok",
        "{}",
        String::from_utf8_lossy(&check.stderr)
    );
    // Its own picture, PNG or SVG, is drawn over again; so is an empty file.
    let (code, _, stderr) = chart(&[db.as_os_str(), "--out".as_ref(), png.as_os_str()]);
    assert_eq!(code, Some(0), "{stderr}");
    let svg = dir.path().join("mine.svg");
    for _ in 0..2 {
        let (code, _, stderr) = chart(&[db.as_os_str(), "--out".as_ref(), svg.as_os_str()]);
        assert_eq!(code, Some(0), "{stderr}");
    }
    let empty = dir.path().join("empty.png");
    std::fs::write(&empty, b"").expect("write");
    let (code, _, stderr) = chart(&[db.as_os_str(), "--out".as_ref(), empty.as_os_str()]);
    assert_eq!(code, Some(0), "{stderr}");
    // Someone else's picture, or a copy of ours with its mark removed, is
    // left as it was.
    let mut stripped = std::fs::read(&png).expect("read");
    stripped.drain(33..33 + 12 + 24);
    for (name, bytes) in [
        ("photo.png", b"\x89PNG\r\n\x1a\nsomeone's photo".to_vec()),
        (
            "drawing.svg",
            b"<svg xmlns=\"http://www.w3.org/2000/svg\"/>".to_vec(),
        ),
        ("stripped.png", stripped),
    ] {
        let path = dir.path().join(name);
        std::fs::write(&path, &bytes).expect("write");
        let result = chart(&[db.as_os_str(), "--out".as_ref(), path.as_os_str()]);
        assert_one_line_error(&result, "is not a chart heatbound drew");
        assert_eq!(
            std::fs::read(&path).expect("read"),
            bytes,
            "{name} unchanged"
        );
    }
    assert_no_partial_files(dir.path());
}
