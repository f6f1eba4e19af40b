//! The chart of a record that breaks: a link outage, a controller restart
//! and a run started on command each break every line and are marked on
//! the time axis; the legend's alarm times are what `heatbound watch`
//! printed; `--clock wall` is UTC; long runs are in hours or days; lines of
//! coinciding events are set apart; the footer never overlaps itself.
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use heatbound::alarm::{Event, EventKind, RuleId, Severity};
use heatbound::config::{Mode, RigConfig};
use heatbound::wire::{self, Decoder, EventFrame, Frame, Hello, RigId, Summary};
use heatbound_host::chart::{Breaks, ChartOptions, Clock, write_chart_with};
use heatbound_host::ingest::{Ingest, LineStyle};
use heatbound_host::store::Log;
use tempfile::TempDir;

/// Colours of the chart (host-tools/src/chart.rs, `palette`), as the SVG
/// writes them.
const PERFORMANCE: &str = "#1D4E89";
const COLD: &str = "#1F77B4";
const HOT: &str = "#A82A2A";
const WORK: &str = "#444750";
const BEYOND_CARNOT: &str = "#D0213C";
const NEGATIVE_ENTROPY: &str = "#9B2FAE";

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// The frames of `heatbound simulate ARGS` (a drifting thermocouple).
fn simulated(dir: &TempDir, name: &str, args: &[&str]) -> Vec<Frame> {
    let cap = dir.path().join(format!("{name}.bin"));
    heatbound()
        .args(["simulate", "--scenario", "thermocouple-drift"])
        .args(args)
        .arg("--out")
        .arg(&cap)
        .assert()
        .success();
    let bytes = std::fs::read(&cap).expect("read the capture");
    let mut decoder = Decoder::<{ wire::MAX_FRAME_LEN }>::new();
    bytes
        .iter()
        .filter_map(|&b| decoder.push_byte(b))
        .map(|f| f.expect("a frame the simulation sent"))
        .collect()
}

fn encode(frame: &Frame) -> Vec<u8> {
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    let n = wire::encode(frame, &mut buf).expect("encode");
    buf[..n].to_vec()
}

/// A log written as `watch` writes it, with the lines `watch` printed.
struct Written {
    ingest: Ingest,
    lines: Vec<String>,
}

impl Written {
    fn new(db: &Path) -> Written {
        let log = Log::open(db).expect("a new log");
        let ingest = Ingest::new(log, "tcp:127.0.0.1:7777", 0, LineStyle::Plain).expect("ingest");
        Written {
            ingest,
            lines: Vec::new(),
        }
    }

    fn frame(&mut self, frame: &Frame, host_ms: i64) {
        let lines = &mut self.lines;
        self.ingest
            .feed(&encode(frame), host_ms, |l| lines.push(l.to_string()))
            .expect("logged");
    }

    fn finish(self, host_ms: i64) -> Vec<String> {
        self.ingest.finish(host_ms).expect("closed");
        self.lines
    }
}

/// The device time of a frame, if it has one.
fn t_ms(frame: &Frame) -> Option<u32> {
    match frame {
        Frame::Summary(s) => Some(s.t_ms),
        Frame::Event(e) => Some(e.event.t_ms),
        _ => None,
    }
}

/// Host receive times, Unix ms: the rig's first session starts here.
const BASE_MS: i64 = 1_750_000_000_000;

/// A run of two controller sessions as a live link delivers them:
///
/// - session 1 (600 s of a drifting thermocouple, reseated at 540 s): the
///   link is down from 200 s to 259.5 s and the summaries sent meanwhile are
///   lost;
/// - the controller restarts: session 2 (530 s, another seed, so another
///   boot session) comes 30 s after session 1's last summary beyond its own
///   age;
/// - at 300 s of session 2 the operator starts a new run (the Hello's run
///   counter goes from 0 to 1).
///
/// Returns the log and the lines `watch` printed.
fn broken_log(dir: &TempDir) -> (PathBuf, Vec<String>, u64) {
    let one = simulated(dir, "one", &["--duration-s", "600", "--repair-at-s", "540"]);
    let two = simulated(dir, "two", &["--duration-s", "530", "--seed", "2"]);
    let db = dir.path().join("broken.sqlite");
    let mut w = Written::new(&db);
    let mut host = BASE_MS;
    let mut lost = 0;
    let mut down = false;
    for f in &one {
        if let Some(t) = t_ms(f) {
            host = BASE_MS + i64::from(t);
        }
        let in_outage = t_ms(f).is_some_and(|t| (200_000..259_500).contains(&t));
        match (in_outage, down) {
            (true, false) => {
                w.ingest
                    .link_down(host, "tcp:127.0.0.1:7777: connection reset")
                    .expect("down");
                down = true;
            }
            (false, true) if t_ms(f).is_some() => {
                w.ingest.link_up(host - 1000).expect("up");
                down = false;
            }
            _ => {}
        }
        if down {
            lost += u64::from(matches!(f, Frame::Summary(_)));
            continue;
        }
        w.frame(f, host);
    }
    let session_two = host + 30_000;
    let mut new_run = false;
    for f in &two {
        if let Some(t) = t_ms(f) {
            host = session_two + i64::from(t);
        }
        match f {
            Frame::Hello(h) if new_run => {
                let mut h = *h;
                h.run = 1;
                w.frame(&Frame::Hello(h), host);
            }
            _ => w.frame(f, host),
        }
        if let Frame::Summary(s) = f
            && s.t_ms == 300_000
        {
            // The new run is applied at the window boundary: a Hello with
            // the new run counter follows the summary.
            new_run = true;
            let Some(Frame::Hello(h)) = two.first() else {
                panic!("the simulation starts with a Hello");
            };
            let mut h = *h;
            h.run = 1;
            w.frame(&Frame::Hello(h), host);
        }
    }
    let lines = w.finish(host + 1000);
    (db, lines, lost)
}

/// Every `<text>` of an SVG: its x, y and words.
fn texts(svg: &str) -> Vec<(f64, f64, String)> {
    let attr = |tag: &str, name: &str| -> f64 {
        let key = format!(" {name}=\"");
        tag.find(&key)
            .and_then(|i| tag[i + key.len()..].split('"').next())
            .and_then(|v| v.parse().ok())
            .unwrap_or(f64::NAN)
    };
    svg.split("<text")
        .skip(1)
        .filter_map(|rest| {
            let (tag, body) = rest.split_once('>')?;
            let (words, _) = body.split_once("</text>")?;
            let words = words
                .trim()
                .replace("&apos;", "'")
                .replace("&quot;", "\"")
                .replace("&lt;", "<")
                .replace("&gt;", ">")
                .replace("&amp;", "&");
            Some((attr(tag, "x"), attr(tag, "y"), words))
        })
        .collect()
}

/// The point lists of the SVG's polylines drawn in `colour` at `width` px.
fn polylines(svg: &str, colour: &str, width: u32) -> Vec<Vec<(f64, f64)>> {
    svg.split("<polyline")
        .skip(1)
        .filter_map(|rest| {
            let tag = rest.split('>').next()?;
            if !tag.contains(&format!("stroke=\"{colour}\""))
                || !tag.contains(&format!("stroke-width=\"{width}\""))
            {
                return None;
            }
            let points = tag.split("points=\"").nth(1)?.split('"').next()?;
            Some(
                points
                    .split_whitespace()
                    .filter_map(|p| {
                        let (x, y) = p.split_once(',')?;
                        Some((x.parse().ok()?, y.parse().ok()?))
                    })
                    .collect(),
            )
        })
        .collect()
}

/// The tick labels of the time axis, left to right: the texts set on the
/// line 22 px above the axis title that starts with `title`.
fn x_ticks(svg: &str, title: &str) -> Vec<String> {
    let all = texts(svg);
    let Some(&(_, y, _)) = all.iter().find(|t| t.2.starts_with(title)) else {
        panic!("no axis title {title:?}");
    };
    let mut ticks: Vec<(f64, String)> = all
        .into_iter()
        .filter(|t| (t.1 - (y - 22.0)).abs() < 0.5)
        .map(|t| (t.0, t.2))
        .collect();
    ticks.sort_by(|a, b| a.0.total_cmp(&b.0));
    ticks.into_iter().map(|t| t.1).collect()
}

fn chart_svg(db: &Path, clock: Clock, name: &str) -> (heatbound_host::chart::Drawn, String) {
    let out = db.with_file_name(name);
    let drawn = write_chart_with(db, &ChartOptions { run: None, clock }, &out).expect("drawn");
    let svg = std::fs::read_to_string(&out).expect("the SVG");
    (drawn, svg)
}

#[test]
fn an_outage_a_restart_and_a_new_run_break_every_line_and_are_marked() {
    let dir = TempDir::new().expect("temp dir");
    let (db, _, lost) = broken_log(&dir);
    let (drawn, svg) = chart_svg(&db, Clock::Device, "broken.svg");
    assert_eq!(
        drawn.breaks,
        Breaks {
            outages: 1,
            restarts: 1,
            new_runs: 1,
            clock_back: 0,
            gaps: 1,
            missing: lost,
        }
    );
    assert!(lost >= 59, "{lost} summaries lost in the outage");
    // The audit of the same log finds the same restart and the same gap,
    // and the log's own records agree.
    let out = heatbound()
        .arg("audit")
        .arg(&db)
        .arg("--json")
        .output()
        .expect("run heatbound audit");
    let report: serde_json::Value =
        serde_json::from_slice(&out.stdout).expect("the audit's JSON report");
    assert_eq!(report["integrity"]["restarts"], 1, "{report:#}");
    assert_eq!(report["integrity"]["missing_summaries"], lost, "{report:#}");
    let log = Log::open_read(&db).expect("the log");
    assert_eq!(log.outages(1).expect("outages").len(), 1);
    let kinds: Vec<String> = log
        .link_errors(1)
        .expect("link errors")
        .iter()
        .map(|e| e.kind.to_string())
        .collect();
    assert_eq!(kinds, ["gap", "restart"]);
    assert!(
        drawn
            .line()
            .ends_with("; 1 outage, 1 restart, 1 new run, 1 gap)"),
        "{}",
        drawn.line()
    );

    // Each series is four lines: before and after the outage, before and
    // after the new run. Two series share a colour on two panels (T_c and
    // Q_out, T_h and Q_in): eight lines each.
    for (colour, lines) in [(PERFORMANCE, 4), (COLD, 8), (HOT, 8), (WORK, 4)] {
        let segments = polylines(&svg, colour, 2);
        assert_eq!(segments.len(), lines, "{colour}");
        for seg in &segments {
            assert!(seg.len() > 20, "{colour}: a stub of {} points", seg.len());
        }
    }
    // The η lines follow one another along the axis and never overlap: the
    // outage, the restart and the new run each lie between two of them.
    let eta = polylines(&svg, PERFORMANCE, 2);
    let spans: Vec<(f64, f64)> = eta
        .iter()
        .map(|s| {
            let xs = s.iter().map(|p| p.0);
            (
                xs.clone().fold(f64::MAX, f64::min),
                xs.fold(f64::MIN, f64::max),
            )
        })
        .collect();
    for pair in spans.windows(2) {
        assert!(pair[0].1 < pair[1].0, "{spans:?}");
    }

    // The marks and their words.
    let words: Vec<String> = texts(&svg).into_iter().map(|t| t.2).collect();
    for expected in [
        "link down 59 s",
        "restart: session 2",
        "new run 1",
        "link down: 1 outage",
        "controller restarted: 1 time",
        "new run started on command: 1 time",
        "every line breaks at each of these",
    ] {
        assert!(
            words.iter().any(|w| w.starts_with(expected)),
            "{expected:?} not in {words:?}"
        );
    }
    assert!(
        words
            .iter()
            .any(|w| w.contains("gap in the summary sequence")),
        "{words:?}"
    );
    // Joined sessions are said to be joined.
    assert!(
        words
            .iter()
            .any(|w| w.starts_with("time (s): device time of session 1; each later session")),
        "{words:?}"
    );
    for bad in ["NaN", "inf"] {
        assert!(!svg.contains(bad), "{bad} in the SVG");
    }
}

#[test]
fn alarm_times_in_the_legend_are_those_watch_printed() {
    let dir = TempDir::new().expect("temp dir");
    let (db, lines, _) = broken_log(&dir);
    // watch: "raised beyond_carnot trip at t=500.3 s".
    let printed: Vec<(String, String, String)> = lines
        .iter()
        .filter_map(|l| {
            let (head, t) = l.split_once(" at t=")?;
            let mut words = head.split(' ');
            let kind = words.next()?.to_string();
            let rule = words.next()?.to_string();
            ["raised", "cleared", "acknowledged"]
                .contains(&kind.as_str())
                .then(|| (kind, rule, t.trim_end_matches(" s").to_string()))
        })
        .collect();
    assert!(printed.len() >= 7, "{lines:?}");
    let (_, svg) = chart_svg(&db, Clock::Device, "times.svg");
    let legend = texts(&svg);
    for rule in RuleId::ALL {
        let ours: Vec<_> = printed.iter().filter(|p| p.1 == rule.as_str()).collect();
        if ours.is_empty() {
            continue;
        }
        let entry = legend
            .iter()
            .find(|t| t.2.starts_with(&format!("{}: ", rule.as_str())))
            .map(|t| t.2.clone())
            .unwrap_or_else(|| panic!("no legend entry for {rule}"));
        // Each event, in order, at the time watch printed, with its session.
        let mut rest = entry.as_str();
        for (kind, _, t) in ours {
            let needle = format!("{kind} {t} s (session ");
            let Some(i) = rest.find(&needle) else {
                panic!("{needle:?} not next in {entry:?}");
            };
            rest = &rest[i + needle.len()..];
        }
    }
    // Session 2's events say where they are on the joined axis: its boot
    // is 30 s after session 1's last summary at 600.0 s.
    let carnot = legend
        .iter()
        .find(|t| t.2.starts_with("beyond_carnot: "))
        .map(|t| t.2.clone())
        .unwrap_or_default();
    assert!(
        carnot.contains("raised 500.2 s (session 2, 1130.2 s on the axis)"),
        "{carnot}"
    );
}

#[test]
fn the_wall_clock_is_utc_from_the_host_times() {
    let dir = TempDir::new().expect("temp dir");
    let (db, _, _) = broken_log(&dir);
    // The log's first summary: BASE_MS + 1 s = 2025-06-15 15:06:41 UTC
    // (GNU date: `date -u -d @1750000001`).
    let (drawn, svg) = chart_svg(&db, Clock::Wall, "wall.svg");
    assert_eq!(drawn.breaks.restarts, 1);
    let words: Vec<String> = texts(&svg).into_iter().map(|t| t.2).collect();
    assert!(
        words
            .iter()
            .any(|w| w.starts_with("host receive time, UTC (hh:mm): 2025-06-15 15:06:41 – ")),
        "{words:?}"
    );
    // The last summary: BASE_MS + 1160 s, 15:26:00 UTC.
    assert!(
        words
            .iter()
            .any(|w| w.ends_with("· run 1 · 2025-06-15 15:06:41–15:26:00 UTC (19.3 min)")),
        "{words:?}"
    );
    // Tick labels are times of day, UTC: every five minutes.
    assert_eq!(
        x_ticks(&svg, "host receive time, UTC"),
        ["15:10", "15:15", "15:20", "15:25"]
    );
    // Alarm times are still the device's, with the host's time beside them.
    assert!(
        words.iter().any(|w| w
            == "beyond_carnot: raised 500.3 s (session 1, 15:15:00 UTC), raised 500.2 s \
                (session 2, 15:25:30 UTC)"),
        "{words:?}"
    );
    // On the command line.
    let out = dir.path().join("wall.png");
    heatbound()
        .arg("chart")
        .arg(&db)
        .args(["--clock", "wall", "--out"])
        .arg(&out)
        .assert()
        .success();
    assert!(std::fs::metadata(&out).is_ok_and(|m| m.len() > 10_000));
}

fn hello() -> Frame {
    let config = RigConfig {
        mode: Mode::Engine,
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

fn summary(seq: u16, t_ms: u32) -> Frame {
    Frame::Summary(Summary {
        seq,
        t_ms,
        duration_s: 6.0,
        heat_in_j: 6000.0,
        work_j: 1800.0,
        heat_out_j: 4200.0,
        entropy_in_j_per_k: 10.0,
        entropy_out_j_per_k: 14.0,
        ambient_k: Some(293.15),
        entropy_rate_w_per_k: Some(0.666),
        ..Summary::default()
    })
}

fn event(t_ms: u32, rule: RuleId, kind: EventKind) -> Frame {
    Frame::Event(EventFrame {
        seq: 0,
        event: Event {
            t_ms,
            rule,
            kind,
            severity: Severity::Trip,
        },
        verdict: Default::default(),
    })
}

/// A log of `frames`, each received at BASE_MS plus its device time.
fn log_of(dir: &TempDir, name: &str, frames: &[Frame]) -> PathBuf {
    let db = dir.path().join(name);
    // In device-time order, as a controller sends them.
    let mut frames = frames.to_vec();
    frames.sort_by_key(|f| t_ms(f).unwrap_or(0));
    let mut log = Log::open(&db).expect("a new log");
    let run = log.begin_run("file:capture.bin", BASE_MS).expect("run");
    for f in &frames {
        let host = BASE_MS + t_ms(f).map_or(0, i64::from);
        log.insert_frame(run, host, f).expect("logged");
    }
    log.end_run(run, BASE_MS).expect("closed");
    db
}

#[test]
fn the_time_unit_follows_the_length_of_the_run() {
    let dir = TempDir::new().expect("temp dir");
    let steps = |a: u32, b: u32, step: u32| -> Vec<String> {
        (a..=b)
            .step_by(step as usize)
            .map(|v| v.to_string())
            .collect()
    };
    for (span_s, every_s, desc, ticks, title) in [
        (
            600u32,
            1u32,
            "device time (s)",
            steps(60, 600, 60),
            "t = 1.0–600.0 s (10.0 min)",
        ),
        (
            5 * 3600,
            60,
            "device time (min)",
            steps(30, 300, 30),
            "t = 1.00–300.00 min (5.0 h)",
        ),
        (
            2 * 86_400,
            600,
            "device time (h)",
            steps(6, 48, 6),
            "t = 0.17–48.00 h (47.8 h)",
        ),
        (
            10 * 86_400,
            3600,
            "device time (days)",
            steps(1, 10, 1),
            "t = 0.042–10.000 days (10.0 days)",
        ),
    ] {
        let mut frames = vec![hello()];
        for (i, t) in (every_s..=span_s).step_by(every_s as usize).enumerate() {
            frames.push(summary(i as u16, t * 1000));
        }
        let db = log_of(&dir, &format!("span-{span_s}.sqlite"), &frames);
        let (_, svg) = chart_svg(&db, Clock::Device, &format!("span-{span_s}.svg"));
        assert_eq!(x_ticks(&svg, desc), ticks, "{desc}");
        assert!(
            texts(&svg).iter().any(|t| t.2.ends_with(title)),
            "{title}: {:?}",
            texts(&svg).first()
        );
    }
}

#[test]
fn the_cold_side_and_the_powers_are_drawn_from_the_windows_integrals() {
    let dir = TempDir::new().expect("temp dir");
    let mut frames = vec![hello()];
    frames.extend((0..30u16).map(|i| summary(i, 1000 * (u32::from(i) + 1))));
    let db = log_of(&dir, "powers.sqlite", &frames);
    let (_, svg) = chart_svg(&db, Clock::Device, "powers.svg");
    let words: Vec<String> = texts(&svg).into_iter().map(|t| t.2).collect();
    for label in [
        "T_c, heat-weighted cold-side mean",
        "Q_in/Δt, heat in",
        "W/Δt, work",
        "Q_out/Δt, heat out",
        "mean power (W)",
    ] {
        assert!(words.iter().any(|w| w == label), "{label} not in {words:?}");
    }
    // T_c = 4200 J / 14 J/K = 300 K, flat; the powers 1000, 300 and 700 W:
    // each a straight line at its own height.
    let flat = |colour: &str| -> Vec<f64> {
        polylines(&svg, colour, 2)
            .iter()
            .map(|seg| {
                let y = seg[0].1;
                assert!(seg.iter().all(|p| p.1 == y), "{colour}: not flat");
                y
            })
            .collect()
    };
    let cold = flat(COLD); // T_c, then Q_out
    let hot = flat(HOT); // T_h, then Q_in
    let work = flat(WORK);
    assert_eq!((cold.len(), hot.len(), work.len()), (2, 2, 1));
    // In the temperature panel T_c (300 K) is below T_h (600 K); in the
    // power panel Q_in (1000 W) above Q_out (700 W) above W (300 W).
    assert!(cold[0] > hot[0], "T_c {} above T_h {}", cold[0], hot[0]);
    assert!(
        hot[1] < cold[1] && cold[1] < work[0],
        "{hot:?} {cold:?} {work:?}"
    );
}

#[test]
fn coinciding_alarm_lines_are_set_apart() {
    let dir = TempDir::new().expect("temp dir");
    let mut frames = vec![hello()];
    frames.extend((0..600u16).map(|i| summary(i, 1000 * (u32::from(i) + 1))));
    // Two rules raised at the same instant: one line would hide the other.
    frames.push(event(300_000, RuleId::BeyondCarnot, EventKind::Raised));
    frames.push(event(
        300_000,
        RuleId::NegativeEntropyProduction,
        EventKind::Raised,
    ));
    let db = log_of(&dir, "coincide.sqlite", &frames);
    let (_, svg) = chart_svg(&db, Clock::Device, "coincide.svg");
    let x = |colour: &str| -> f64 {
        let lines = polylines(&svg, colour, 2);
        assert_eq!(lines.len(), 4, "{colour}: one line per panel");
        lines[0][0].0
    };
    let (a, b) = (x(BEYOND_CARNOT), x(NEGATIVE_ENTROPY));
    assert!((b - a).abs() >= 3.0, "{a} and {b}: one hides the other");
    assert!((b - a).abs() <= 5.0, "{a} and {b}: set too far apart");
    // Both at 300.0 s, as the device sent them.
    let words: Vec<String> = texts(&svg).into_iter().map(|t| t.2).collect();
    assert!(words.iter().any(|w| w == "beyond_carnot: raised 300.0 s"));
    assert!(
        words
            .iter()
            .any(|w| w == "negative_entropy_production: raised 300.0 s")
    );
}

#[test]
fn the_footer_never_overlaps_whatever_the_alarms() {
    let dir = TempDir::new().expect("temp dir");
    let mut frames = vec![hello()];
    frames.extend((0..600u16).map(|i| summary(i, 1000 * (u32::from(i) + 1))));
    // Every rule raised, acknowledged and cleared: six long legend entries.
    for (i, rule) in RuleId::ALL.iter().enumerate() {
        let t = 100_000 + 50_000 * i as u32;
        frames.push(event(t, *rule, EventKind::Raised));
        frames.push(event(t + 1_300, *rule, EventKind::Acknowledged));
        frames.push(event(t + 20_700, *rule, EventKind::Cleared));
    }
    // Alarm bits too, for "alarms active at some time".
    if let Some(Frame::Summary(s)) = frames.get_mut(200) {
        s.alarms = 0b11_1111;
    }
    let db = log_of(&dir, "footer.sqlite", &frames);
    let (_, svg) = chart_svg(&db, Clock::Device, "footer.svg");
    let all = texts(&svg);
    let y_of = |start: &str| {
        all.iter()
            .find(|t| t.2.starts_with(start))
            .map(|t| t.1)
            .unwrap_or_else(|| panic!("{start:?} not in the SVG"))
    };
    let mut rows = vec![y_of("alarm events, drawn as vertical lines")];
    for rule in RuleId::ALL {
        let y = y_of(&format!("{}: raised ", rule.as_str()));
        if !rows.contains(&y) {
            rows.push(y);
        }
    }
    rows.push(y_of("alarms active at some time: beyond_carnot"));
    rows.push(y_of("heatbound's alarms are monitoring aids"));
    // Row after row, at least a line apart, all inside the picture.
    for pair in rows.windows(2) {
        assert!(pair[1] - pair[0] >= 18.0, "{rows:?}");
    }
    assert!(rows.last().is_some_and(|&y| y + 15.0 <= 1000.0), "{rows:?}");
    // Two entries share a row only side by side (an entry is at most one
    // row wide, and its words start after the one before it).
    for rule in RuleId::ALL {
        let entry = all
            .iter()
            .find(|t| t.2.starts_with(&format!("{}: raised ", rule.as_str())));
        let Some((x, y, _)) = entry else {
            panic!("no entry for {rule}");
        };
        for other in all.iter().filter(|t| t.1 == *y && t.0 > *x) {
            assert!(other.0 - x >= 200.0, "{other:?} crowds {rule}");
        }
    }
    // Nothing runs off the picture: every text starts inside it, and ends
    // inside it by a low estimate of its width (DejaVu Sans averages more
    // than 0.45 em a character in these words).
    for (x, _, words) in &all {
        let low = 0.45 * 15.0 * words.chars().count() as f64;
        assert!(
            *x >= 0.0 && x + low <= 1400.0,
            "off the picture: {x} {words:?}"
        );
    }
    // The legend holds every event's time.
    assert!(
        all.iter()
            .any(|t| t.2
                == "over_temperature: raised 300.0 s, acknowledged 301.3 s, cleared 320.7 s"),
        "{all:?}"
    );
}

#[test]
fn absurd_times_are_drawn_without_a_panic() {
    // Times no logger writes (a tampered log): two summaries 1 ms apart,
    // so the axis is 1 ms wide, and events far off it on either clock; an
    // outage that ends long before it began.
    let dir = TempDir::new().expect("temp dir");
    let db = dir.path().join("absurd.sqlite");
    let mut log = Log::open(&db).expect("a new log");
    let run = log.begin_run("file:capture.bin", 0).expect("run");
    let frames = [
        (i64::MIN, hello()),
        (0, summary(0, 1000)),
        (1, summary(1, 1001)),
        (
            i64::MAX,
            event(59_000, RuleId::BeyondCarnot, EventKind::Raised),
        ),
        (
            i64::MIN,
            event(
                1001u32.wrapping_sub(59_000),
                RuleId::SensorFault,
                EventKind::Cleared,
            ),
        ),
    ];
    for (host, f) in &frames {
        log.insert_frame(run, *host, f).expect("logged");
    }
    let outage = log.begin_outage(run, i64::MAX - 1, "gone").expect("outage");
    log.end_outage(outage, i64::MIN).expect("outage ended");
    log.end_run(run, 0).expect("closed");
    drop(log);
    for clock in [Clock::Device, Clock::Wall] {
        for name in ["absurd.svg", "absurd.png"] {
            let out = dir.path().join(name);
            let drawn = write_chart_with(&db, &ChartOptions { run: None, clock }, &out)
                .unwrap_or_else(|e| panic!("{clock:?} {name}: {e}"));
            assert_eq!(drawn.summaries, 2);
        }
        let (_, svg) = chart_svg(&db, clock, "absurd.svg");
        for bad in ["NaN", "inf"] {
            assert!(!svg.contains(bad), "{bad} in the SVG");
        }
    }
}
