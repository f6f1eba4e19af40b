//! `heatbound simulate`: the software-in-the-loop stream is deterministic,
//! decodes cleanly with the core decoder, keeps the wire budgets and shows
//! the alarms each scenario should raise.
use std::io::{BufRead as _, BufReader, Read as _};
use std::net::TcpStream;
use std::path::Path;
use std::process::{Command as StdCommand, Stdio};

use assert_cmd::Command;
use heatbound::alarm::{EventKind, RuleId};
use heatbound::wire::{self, Decoder, DecoderStats, Frame};
use tempfile::TempDir;

const SCENARIOS: [&str; 9] = [
    "steady",
    "warm-up",
    "thermocouple-drift",
    "coolant-loss",
    "open-thermocouple",
    "power-meter-scale-error",
    "hot2-drift",
    "cold-offset",
    "heater-scale-error",
];

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// Runs `simulate` with `args` and returns the stream from stdout.
fn simulate(args: &[&str]) -> Vec<u8> {
    let out = heatbound()
        .arg("simulate")
        .args(args)
        .output()
        .expect("run heatbound");
    assert!(
        out.status.success(),
        "simulate failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out.stdout
}

/// Decodes `bytes` with the core decoder.
fn decode(bytes: &[u8]) -> (Vec<Frame>, DecoderStats) {
    let mut decoder = Decoder::<{ wire::MAX_FRAME_LEN }>::new();
    let mut frames = Vec::new();
    decoder.feed(bytes, |r| frames.push(r.expect("a clean stream")));
    assert_eq!(decoder.pending(), 0, "the stream ends on a delimiter");
    (frames, *decoder.stats())
}

fn raised(frames: &[Frame], rule: RuleId) -> Vec<u32> {
    frames
        .iter()
        .filter_map(|f| match f {
            Frame::Event(e) if e.event.rule == rule && e.event.kind == EventKind::Raised => {
                Some(e.event.t_ms)
            }
            _ => None,
        })
        .collect()
}

#[test]
fn the_same_seed_gives_the_same_bytes_and_another_seed_differs() {
    let dir = TempDir::new().expect("temp dir");
    let file = |name: &str| dir.path().join(name);
    for (name, seed) in [("a.bin", "7"), ("b.bin", "7"), ("c.bin", "8")] {
        heatbound()
            .args([
                "simulate",
                "--duration-s",
                "120",
                "--seed",
                seed,
                "--output",
            ])
            .arg(file(name))
            .assert()
            .success();
    }
    let read = |name: &str| std::fs::read(file(name)).expect("read capture");
    let (a, b, c) = (read("a.bin"), read("b.bin"), read("c.bin"));
    assert!(!a.is_empty());
    assert_eq!(a, b, "same seed, same bytes");
    assert_ne!(a, c, "different seed, different bytes");
    // stdout carries the same stream, and nothing else.
    assert_eq!(simulate(&["--duration-s", "120", "--seed", "7"]), a);
}

#[test]
fn every_scenario_runs_and_decodes_without_loss() {
    for scenario in SCENARIOS {
        let bytes = simulate(&["--scenario", scenario, "--duration-s", "150"]);
        let (frames, stats) = decode(&bytes);
        assert_eq!(stats.losses(), 0, "{scenario}");
        assert_eq!(stats.bytes_discarded, 0, "{scenario}");
        assert!(
            matches!(frames.first(), Some(Frame::Hello(_))),
            "{scenario}"
        );
        let summaries = frames
            .iter()
            .filter(|f| matches!(f, Frame::Summary(_)))
            .count();
        assert_eq!(summaries, 150, "{scenario}: one summary per second");
    }
}

#[test]
fn summaries_keep_the_wire_budget_and_count_in_sequence() {
    let bytes = simulate(&["--scenario", "thermocouple-drift", "--duration-s", "300"]);
    let mut expected_seq = 0u16;
    for chunk in bytes.split_inclusive(|&b| b == 0) {
        let frame = wire::decode(chunk).expect("each chunk is one frame");
        if let Frame::Summary(s) = frame {
            assert!(chunk.len() <= 80, "summary of {} bytes", chunk.len());
            assert!(chunk.len() <= wire::SUMMARY_MAX_WIRE_LEN);
            assert_eq!(s.seq, expected_seq);
            expected_seq += 1;
        }
    }
}

#[test]
fn thermocouple_drift_raises_beyond_carnot_and_sets_the_alarm_bit() {
    let bytes = simulate(&["--scenario", "thermocouple-drift", "--duration-s", "600"]);
    let (frames, stats) = decode(&bytes);
    assert_eq!(stats.losses(), 0);
    let raised_at = raised(&frames, RuleId::BeyondCarnot);
    assert_eq!(raised_at.len(), 1, "raised once (it latches)");
    assert!((300_000..600_000).contains(&raised_at[0]), "{raised_at:?}");
    let bit = 1 << RuleId::BeyondCarnot.index();
    let with_bit: Vec<u32> = frames
        .iter()
        .filter_map(|f| match f {
            Frame::Summary(s) if s.alarms & bit != 0 => Some(s.t_ms),
            _ => None,
        })
        .collect();
    assert!(!with_bit.is_empty());
    assert!(with_bit.iter().all(|&t| t >= raised_at[0]));
    assert!(
        with_bit.len() > 50,
        "the alarm stays active: {}",
        with_bit.len()
    );
}

#[test]
fn steady_raises_no_alarm() {
    let bytes = simulate(&["--scenario", "steady", "--duration-s", "600"]);
    let (frames, _) = decode(&bytes);
    assert!(!frames.iter().any(|f| matches!(f, Frame::Event(_))));
    assert!(
        frames
            .iter()
            .all(|f| !matches!(f, Frame::Summary(s) if s.alarms != 0))
    );
}

#[test]
fn stderr_carries_the_run_summary_and_the_caution() {
    let out = heatbound()
        .args([
            "simulate",
            "--scenario",
            "open-thermocouple",
            "--duration-s",
            "200",
        ])
        .output()
        .expect("run heatbound");
    assert!(out.status.success());
    let err = String::from_utf8(out.stderr).expect("UTF-8");
    assert!(err.contains("scenario open-thermocouple"), "{err}");
    assert!(err.contains("sensor_fault at 125.0 s"), "{err}");
    assert!(err.contains("Caution"), "{err}");
}

#[test]
fn bad_options_are_one_line_errors() {
    for args in [
        &["--scenario", "meltdown"][..],
        &["--rate-hz", "0"],
        &["--summary-period-s", "0.01"],
        // The old spelling is a hidden alias of --speed; negative numbers
        // need no `=`.
        &["--realtime-factor", "-1"],
        &["--speed", "-1"],
    ] {
        let out = heatbound()
            .arg("simulate")
            .args(args)
            .output()
            .expect("run heatbound");
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        assert!(out.stdout.is_empty());
        let err = String::from_utf8(out.stderr).expect("UTF-8");
        assert_eq!(err.lines().count(), 1, "{err}");
        assert!(err.starts_with("heatbound: error: "), "{err}");
    }
}

#[test]
fn listen_streams_to_one_tcp_client() {
    let bin = assert_cmd::cargo::cargo_bin("heatbound");
    let mut child = StdCommand::new(bin)
        .args(["simulate", "--duration-s", "30", "--listen", "0"])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn heatbound");
    let mut stderr = BufReader::new(child.stderr.take().expect("stderr"));
    let mut line = String::new();
    stderr.read_line(&mut line).expect("the listening line");
    let addr = line
        .trim()
        .rsplit(' ')
        .next()
        .expect("an address")
        .to_owned();
    assert!(addr.starts_with("127.0.0.1:"), "{line}");
    let mut stream = TcpStream::connect(&addr).expect("connect");
    let mut bytes = Vec::new();
    stream.read_to_end(&mut bytes).expect("read the stream");
    assert!(child.wait().expect("wait").success());
    let (frames, stats) = decode(&bytes);
    assert_eq!(stats.losses(), 0);
    assert_eq!(
        frames
            .iter()
            .filter(|f| matches!(f, Frame::Summary(_)))
            .count(),
        30
    );
    assert_eq!(
        bytes,
        simulate(&["--duration-s", "30"]),
        "same bytes as stdout"
    );
}

#[test]
fn a_config_file_is_used_as_written() {
    let dir = TempDir::new().expect("temp dir");
    let cfg = dir.path().join("rig.toml");
    std::fs::write(&cfg, "coverage_factor = 3.0\n").expect("write config");
    let bytes = simulate(&["--duration-s", "5", "--config", path(&cfg)]);
    let (frames, _) = decode(&bytes);
    match frames.first() {
        Some(Frame::Hello(h)) => {
            assert_eq!(h.coverage_factor, 3.0);
            assert_eq!(
                h.ambient_k, None,
                "no ambient in the file: the cold-side mean"
            );
        }
        other => panic!("first frame {other:?}"),
    }
}

fn path(p: &Path) -> &str {
    p.to_str().expect("UTF-8 temp path")
}

#[test]
fn listen_serves_a_second_client_from_a_frame_boundary() {
    let bin = assert_cmd::cargo::cargo_bin("heatbound");
    let mut child = StdCommand::new(bin)
        .args([
            "simulate",
            "--duration-s",
            "60",
            "--speed",
            "20",
            "--listen",
            "0",
        ])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn heatbound");
    let mut stderr = BufReader::new(child.stderr.take().expect("stderr"));
    let mut line = String::new();
    stderr.read_line(&mut line).expect("the listening line");
    let addr = line
        .trim()
        .rsplit(' ')
        .next()
        .expect("an address")
        .to_owned();
    let first = TcpStream::connect(&addr).expect("connect");
    let reader = std::thread::spawn(move || {
        let mut first = first;
        let mut bytes = Vec::new();
        first.read_to_end(&mut bytes).expect("read the stream");
        bytes
    });
    std::thread::sleep(std::time::Duration::from_millis(800));
    let mut second = TcpStream::connect(&addr).expect("connect a second client");
    let mut late = Vec::new();
    second.read_to_end(&mut late).expect("read the stream");
    let whole = reader.join().expect("first reader");
    assert!(child.wait().expect("wait").success());
    let (frames, stats) = decode(&whole);
    assert_eq!(stats.losses(), 0);
    assert_eq!(
        frames
            .iter()
            .filter(|f| matches!(f, Frame::Summary(_)))
            .count(),
        60
    );
    // The late client joined mid-run: fewer bytes, every one in a whole frame.
    let (late_frames, late_stats) = decode(&late);
    assert_eq!(
        late_stats.losses(),
        0,
        "the late client starts at a frame boundary"
    );
    assert!(!late_frames.is_empty() && late.len() < whole.len());
    assert!(
        whole.ends_with(&late),
        "the late client gets the rest of the same stream"
    );
}
