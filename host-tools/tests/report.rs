//! `heatbound report`: one run as a self-contained HTML page, from a log or
//! from a CSV file with its configuration.
//!
//! - The run totals of a log (windows that meet end to end) against the
//!   monitor's own f64 totals of the same samples.
//! - The uncertainty budget of a CSV replay against the GUM vectors of
//!   `tests/vectors/gum_cases.json` (PyPI `uncertainties`, JCGM 100:2008),
//!   signed coefficients included.
//! - A CSV file's steady periods (two plateaus joined by a ramp) against
//!   the plateaus' figures worked out by hand, and its chart.
//! - The command line: the page, refusals to overwrite what is not ours,
//!   one-line errors, and `demo` writing its report.
//! - The page in a real browser (headless Chromium): no console message, no
//!   request leaving the file, a screenshot, and a PDF whose pages and text
//!   are checked with poppler. Without Chromium the browser test is
//!   skipped, unless `HEATBOUND_REQUIRE_BROWSER` is set (as `.ci/run` does).
use std::path::{Path, PathBuf};
use std::process::Command as Process;

use assert_cmd::Command;
use heatbound::config::{Mode, RigConfig};
use heatbound::control::{Controller, ControllerSettings};
use heatbound::monitor::{Budget, Metrics, Monitor, Sample};
use heatbound::wire::{Frame, Hello, RigId, Summary};
use heatbound_host::report::{self, BudgetTable};
use heatbound_host::store::Log;
use serde_json::Value;

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// The workspace's root.
fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("the workspace")
        .to_path_buf()
}

// ---------------------------------------------------------------------------
// A logged run whose totals are known

/// Unix ms of the first frame of the test logs.
const T0_HOST_MS: i64 = 1_700_000_000_000;

/// The test rig: 1 Hz samples, windows of 11 samples (10 s), a summary every
/// 10 s, so that windows meet end to end; heat out measured, T0 the cold
/// side's mean.
fn rig_config() -> RigConfig {
    RigConfig {
        window_samples: 11,
        ..RigConfig::default()
    }
}

/// Sample `i` (1 Hz) of a run with two steady stretches: the hot side
/// climbs from 500 K to 650 K, holds, falls to 600 K and holds again;
/// small ripples keep every channel moving (synthetic: a demo run).
fn sample(i: u32) -> Sample {
    let t = f64::from(i);
    let ripple = |period: f64, a: f64| a * (t / period).sin();
    let hot = if t < 200.0 {
        500.0 + 0.75 * t
    } else if t < 500.0 {
        650.0
    } else if t < 600.0 {
        650.0 - 0.5 * (t - 500.0)
    } else {
        600.0
    } + ripple(7.0, 0.3);
    let heat_in = 1000.0 + (hot - 500.0) * 4.0 / 3.0 + ripple(5.0, 2.0);
    let work = 0.2 * heat_in + ripple(3.0, 0.5);
    let heat_out = 0.72 * heat_in + ripple(11.0, 1.0);
    #[allow(clippy::cast_possible_truncation)]
    Sample {
        t_ms: i * 1000,
        t_hot_k: hot as f32,
        t_cold_k: (300.0 + ripple(13.0, 0.1)) as f32,
        heat_in_w: heat_in as f32,
        work_w: work as f32,
        heat_out_w: Some(heat_out as f32),
        t_hot2_k: None,
    }
}

/// The same sample in f64, as a host monitor takes it.
fn sample64(s: &Sample) -> Sample<f64> {
    Sample {
        t_ms: s.t_ms,
        t_hot_k: f64::from(s.t_hot_k),
        t_cold_k: f64::from(s.t_cold_k),
        heat_in_w: f64::from(s.heat_in_w),
        work_w: f64::from(s.work_w),
        heat_out_w: s.heat_out_w.map(f64::from),
        t_hot2_k: s.t_hot2_k.map(f64::from),
    }
}

/// The run above through the controller (as the firmware runs it) into a
/// log at `path`; returns the monitor's own f64 totals of the same samples
/// and their budget.
fn logged_run(path: &Path, samples: u32) -> (Metrics<f64>, Budget<f64>) {
    let config = rig_config();
    let settings = ControllerSettings {
        rig_id: RigId::new("report-rig").expect("rig id"),
        firmware_version: (1, 2, 3),
        sample_period_ms: 1000,
        summary_period_ms: 10_000,
        hello_period_ms: 0,
    };
    let mut controller = Controller::<64>::new(&settings, &config, None, 7).expect("controller");
    let mut exact: Box<Monitor<4096, f64>> = Box::new(Monitor::new(&config).expect("monitor"));
    let mut frames: Vec<(u32, Frame)> = Vec::new();
    controller.start(0, &mut |f: &Frame| frames.push((0, f.clone())));
    for i in 1..=samples {
        let s = sample(i);
        controller.step(&s, &mut |f: &Frame| frames.push((s.t_ms, f.clone())));
        exact.push(&sample64(&s));
    }
    let mut log = Log::open(path).expect("a new log");
    let run = log.begin_run("file:test", T0_HOST_MS).expect("a run");
    for (t_ms, f) in &frames {
        log.insert_frame(run, T0_HOST_MS + i64::from(*t_ms), f)
            .expect("logged");
    }
    log.end_run(run, T0_HOST_MS + i64::from(samples) * 1000 + 500)
        .expect("closed");
    let budget = exact.totals_integrals().budget(exact.settings());
    (exact.totals_metrics(), budget)
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-300)
}

#[test]
fn log_totals_and_budget_match_the_monitors_own() {
    // Source of every check value: the monitor's own f64 run totals of the
    // same samples (the monitor's figures and partials are checked against
    // PyPI `uncertainties` in tests/tests/monitor_uncertainty.rs). The log
    // holds f32 windows: values agree to f32 rounding, and the
    // uncertainties to the sensitivities taken at each window's mean
    // temperatures (second order in a 10 s window's temperature change).
    let dir = tempfile::tempdir().expect("a temporary directory");
    let path = dir.path().join("run.sqlite");
    let (exact, exact_budget) = logged_run(&path, 900);
    let r = report::from_log(&path, None, &rig_config()).expect("the report");
    let got = &r.totals.figures;
    assert!((got.duration_s - exact.duration_s).abs() < 1e-3, "{got:?}");
    for (what, g, w, tol) in [
        ("Q_in", Some(got.heat_in_j), Some(exact.heat_in_j), 1e-5),
        ("W", Some(got.work_j), Some(exact.work_j), 1e-5),
        ("Q_out", Some(got.heat_out_j), Some(exact.heat_out_j), 1e-5),
        ("η", got.efficiency, exact.efficiency, 1e-5),
        ("η_C", got.carnot_efficiency, exact.carnot_efficiency, 1e-5),
        ("T0", got.ambient_k, exact.ambient_k, 1e-6),
        (
            "S_gen",
            got.entropy_generated_j_per_k,
            exact.entropy_generated_j_per_k,
            1e-4,
        ),
        ("Ex", got.exergy_destroyed_j, exact.exergy_destroyed_j, 1e-4),
        ("u(η)", got.u_efficiency, exact.u_efficiency, 1e-3),
        (
            "u(η_C)",
            got.u_carnot_efficiency,
            exact.u_carnot_efficiency,
            1e-3,
        ),
        (
            "u(margin)",
            got.u_carnot_margin,
            exact.u_carnot_margin,
            1e-3,
        ),
        (
            "u(σ̇)",
            got.u_entropy_rate_w_per_k,
            exact.u_entropy_rate_w_per_k,
            1e-3,
        ),
    ] {
        let (g, w) = (g.expect(what), w.expect(what));
        assert!(rel(g, w) < tol, "{what}: report {g}, monitor {w}");
    }
    // Windows that meet end to end cover the run: nothing uncovered.
    assert!(
        !r.totals
            .notes
            .iter()
            .any(|n| n.contains("lies in no window")),
        "{:?}",
        r.totals.notes
    );
    // The budgets: signed coefficients, the monitor's own to the same
    // tolerance, and shares that sum to 1.
    let exact_c = [
        exact_budget.performance,
        exact_budget.bound,
        exact_budget.margin,
        exact_budget.entropy_rate,
    ];
    assert_eq!(r.budgets.len(), 4);
    for (t, c) in r.budgets.iter().zip(exact_c) {
        let c = c.expect("coefficients");
        assert!(t.signed);
        let u_c = t.u_c.expect("u_c");
        for (row, want) in t.rows.iter().zip(c) {
            let got = row.sensitivity.expect("c_i");
            assert!(
                (got - want).abs() * row.u <= 1e-3 * u_c,
                "{} {}: c = {got}, monitor {want}",
                t.symbol,
                row.quantity
            );
        }
        assert!((t.share_sum().expect("shares") - 1.0).abs() < 1e-12);
    }
    // Two steady stretches, at 650 K and at 600 K.
    assert_eq!(r.steady.periods.len(), 2, "{:?}", r.steady);
    for (p, t_h) in r.steady.periods.iter().zip([650.0, 600.0]) {
        let got: f64 = p.t_h.parse().expect("T_h");
        assert!((got - t_h).abs() < 0.5, "{p:?}");
    }
    let fraction = r.steady.fraction.expect("steady fraction");
    assert!((0.3..0.8).contains(&fraction), "{fraction}");
    // The audit passes: the controller made this log.
    assert_eq!(r.verdict.pass, Some(true), "{:?}", r.verdict);
    assert!(r.facts.iter().any(|f| f.value == "report-rig"));
    assert!(r.facts.iter().any(|f| f.value == "1.2.3"));
}

// ---------------------------------------------------------------------------
// The budget of a CSV replay against the GUM vectors

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// A vector case as our CSV and rig.toml.
fn case_files(dir: &Path, case: &Value) -> (PathBuf, PathBuf) {
    let name = case["name"].as_str().expect("name");
    let measured = case["measured"].as_bool().expect("measured");
    let mut csv = String::from("time_s,hot_k,cold_k,heat_in_w,work_w");
    if measured {
        csv.push_str(",heat_out_w");
    }
    csv.push('\n');
    for s in case["samples"].as_array().expect("samples") {
        // `{}` writes the shortest decimal that reads back as the same f64.
        csv.push_str(&format!(
            "{},{},{},{},{}",
            num(&s["t_ms"]) / 1000.0,
            num(&s["t_hot_k"]),
            num(&s["t_cold_k"]),
            num(&s["heat_in_w"]),
            num(&s["work_w"])
        ));
        if measured {
            csv.push_str(&format!(",{}", num(&s["heat_out_w"])));
        }
        csv.push('\n');
    }
    let u = &case["uncertainty"];
    let mut toml = format!("mode = \"{}\"\n", case["mode"].as_str().expect("mode"));
    if let Some(t0) = case["ambient_k"].as_f64() {
        toml.push_str(&format!("ambient_k = {t0}\n"));
    }
    toml.push_str(&format!(
        "[uncertainty]\nhot_k = {}\ncold_k = {}\nheat_in_rel = {}\nwork_rel = {}\nheat_out_rel = {}\n",
        num(&u["hot_k"]),
        num(&u["cold_k"]),
        num(&u["heat_in_rel"]),
        num(&u["work_rel"]),
        num(&u["heat_out_rel"])
    ));
    let csv_path = dir.join(format!("{name}.csv"));
    let toml_path = dir.join(format!("{name}.toml"));
    std::fs::write(&csv_path, csv).expect("write CSV");
    std::fs::write(&toml_path, toml).expect("write rig.toml");
    (csv_path, toml_path)
}

#[test]
fn csv_budget_matches_the_gum_vectors() {
    // Source: tests/vectors/gum_cases.json, written by
    // tests/tools/gum_vectors.py with PyPI `uncertainties` 3.2.3 (GUM JCGM
    // 100:2008 §5.1.2, exact derivatives). For each case and each of η (or
    // COP), its bound, the margin and σ̇, the report's coefficient of every
    // input must be the vector's own c_i, with its sign, and its
    // contribution |c_i|·u(x_i); the shares must
    // sum to 1, and the contributions' squares must add up to the vector's
    // u² (first order is exact in both: rounding only).
    let vectors = root().join("tests/vectors/gum_cases.json");
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(vectors).expect("the vectors"))
        .expect("JSON");
    let cases = doc["cases"].as_array().expect("cases");
    assert_eq!(cases.len(), 7, "every generated case is checked");
    let dir = tempfile::tempdir().expect("a temporary directory");
    let inputs = ["hot", "cold", "heat_in", "work", "heat_out"];
    let mut checked = 0;
    for case in cases {
        let name = case["name"].as_str().expect("name");
        let (csv, toml) = case_files(dir.path(), case);
        let rig = heatbound_host::rigfile::load_rig(Some(&toml)).expect("rig.toml");
        let r = report::from_csv(
            &csv,
            &rig.config,
            None,
            Some(&toml),
            report::DEFAULT_SUMMARY_PERIOD_MS,
            None,
        )
        .expect("report");
        let keys = if rig.config.mode == Mode::Engine {
            [
                "efficiency",
                "carnot_efficiency",
                "carnot_margin",
                "entropy_rate_w_per_k",
            ]
        } else {
            ["cop", "carnot_cop", "carnot_margin", "entropy_rate_w_per_k"]
        };
        for (t, key) in r.budgets.iter().zip(keys) {
            let what = format!("{name} {key}");
            let want = &case["expected"][key];
            let (value, u) = (num(&want["value"]), num(&want["u"]));
            assert!(rel(t.estimate.expect("estimate"), value) < 1e-9, "{what}");
            check_shares(&what, t, u);
            for (row, input) in t.rows.iter().zip(inputs) {
                let c = num(&want["sensitivity"][input]);
                let contribution = (c * row.u).abs();
                assert!(
                    (row.contribution - contribution).abs() <= 1e-9 * u,
                    "{what} {input}: report {}, uncertainties {contribution}",
                    row.contribution
                );
                // Signed: the replay's own sensitivity integrals, one pass.
                let ci = row.sensitivity.expect("c_i");
                let scale = if row.u > 0.0 {
                    u / row.u
                } else {
                    c.abs().max(1.0)
                };
                assert!(
                    (ci - c).abs() <= 1e-9 * scale,
                    "{what} {input}: report c = {ci}, uncertainties c = {c}"
                );
            }
            checked += 1;
        }
    }
    assert_eq!(checked, 7 * 4);
}

/// The shares of `t` sum to 1 and its contributions add up to `u`.
fn check_shares(what: &str, t: &BudgetTable, u: f64) {
    let sum = t.share_sum().expect("shares");
    assert!((sum - 1.0).abs() < 1e-12, "{what}: shares sum to {sum}");
    let rss = t
        .rows
        .iter()
        .map(|r| r.contribution * r.contribution)
        .sum::<f64>()
        .sqrt();
    assert!(rel(rss, u) < 1e-9, "{what}: √Σu_i² = {rss}, u = {u}");
    assert!(rel(t.u_c.expect("u_c"), u) < 1e-9, "{what}: u_c");
}

// ---------------------------------------------------------------------------
// The page

/// Whatever in `page` could make a browser load something from outside
/// the file, each with a few characters around it.
fn external_references(page: &str) -> Vec<String> {
    let lower = page.to_ascii_lowercase();
    let mut found = Vec::new();
    let mut look = |needle: &str, allowed: &dyn Fn(&str) -> bool| {
        for (i, _) in lower.match_indices(needle) {
            let after = lower.get(i + needle.len()..).unwrap_or("");
            if !allowed(after) {
                let end = (i + 60).min(page.len());
                found.push(page.get(i..end).unwrap_or("?").to_owned());
            }
        }
    };
    look("http://", &|_| false);
    look("https://", &|_| false);
    look("<script", &|_| false);
    look("@import", &|_| false);
    look("<link", &|_| false);
    look("<iframe", &|_| false);
    look("url(", &|a| {
        a.trim_start_matches(['"', '\'']).starts_with("data:")
    });
    for attr in ["src=", "href=", "xlink:href=", "action="] {
        look(attr, &|a| {
            let v = a.trim_start_matches(['"', '\'']);
            v.starts_with("data:") || v.starts_with('#')
        });
    }
    found
}

/// The checks every page must pass as text.
fn check_page(page: &str) {
    assert!(page.starts_with("<!DOCTYPE html>"));
    let bad = external_references(page);
    assert!(bad.is_empty(), "references outside the file: {bad:?}");
    assert!(
        page.contains("<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'")
    );
    for section in [
        "1. The run",
        "Losses and gaps",
        "2. Verdict",
        "3. Run totals",
        "4. Uncertainty budget",
        "5. Steady periods",
        "6. Alarms",
        "7. Charts",
    ] {
        assert!(page.contains(section), "no {section:?}");
    }
    assert!(page.contains(&heatbound_host::report::format::escape(
        heatbound_host::term::SAFETY_NOTE
    )));
    assert!(
        page.contains("src: url(data:font/ttf;base64,"),
        "the font is embedded"
    );
    // No NaN or infinity reaches the page.
    for word in page.split(|c: char| !c.is_alphanumeric()) {
        assert!(
            !matches!(word, "NaN" | "nan" | "inf" | "Infinity"),
            "{word}"
        );
    }
    assert!(!page.contains('∞'));
}

#[test]
fn the_check_for_external_references_can_fail() {
    for page in [
        "<img src=\"http://example.invalid/x.png\">",
        "<img src=//example.invalid/x.png>",
        "<style>@import 'x.css';</style>",
        "<style>body { background: url(https://example.invalid/x.png) }</style>",
        "<style>body { background: url( x.png) }</style>",
        "<script src=\"x.js\"></script>",
        "<a href=\"report2.html\">",
    ] {
        assert!(!external_references(page).is_empty(), "{page}");
    }
    assert!(external_references("<a href=\"#totals\"> url(data:font/ttf;base64,AA)").is_empty());
}

#[test]
fn report_of_a_log_from_the_command_line() {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let db = dir.path().join("run.sqlite");
    logged_run(&db, 300);
    let out = heatbound().arg("report").arg(&db).output().expect("runs");
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{stdout}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // Default: beside the log, with .html.
    let html = dir.path().join("run.html");
    assert!(
        stdout.starts_with(&format!("report: {} (", html.display())),
        "{stdout}"
    );
    assert!(stdout.contains("verdict: Trustworthy"), "{stdout}");
    assert!(stdout.contains("not a safety-rated interlock"), "{stdout}");
    let page = std::fs::read_to_string(&html).expect("the page");
    check_page(&page);
    assert!(
        page.contains("<svg class=\"chart\""),
        "the chart is inline SVG"
    );
    assert!(page.contains("report-rig"));
    assert!(page.contains("Sensitivity coefficient c<sub>i</sub>"));
    // A second run replaces its own earlier report.
    heatbound()
        .args(["report", "--run", "1", "--out"])
        .arg(&html)
        .arg(&db)
        .assert()
        .success();
}

#[test]
fn report_of_a_csv_with_its_config() {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let out = dir.path().join("bench.html");
    let assert = heatbound()
        .arg("report")
        .arg(root().join("examples/bench-run.csv"))
        .arg("--config")
        .arg(root().join("examples/rig.toml"))
        .arg("--out")
        .arg(&out)
        .assert()
        .success();
    let stdout = String::from_utf8_lossy(&assert.get_output().stdout).into_owned();
    assert!(stdout.contains("verdict: Readings"), "{stdout}");
    let page = std::fs::read_to_string(&out).expect("the page");
    check_page(&page);
    assert!(page.contains("Replay of bench-run.csv"));
    assert!(
        page.contains("Sensitivity coefficient c<sub>i</sub>"),
        "signed coefficients from the replay's own integrals"
    );
    assert!(page.contains("examples/rig.toml"));
    assert!(page.contains("<table class=\"steady\">"), "steady periods");
    assert!(page.contains("<svg class=\"chart\""), "the chart");
    assert!(page.contains("by the same monitor the controller runs"));
}

// ---------------------------------------------------------------------------
// A CSV file's steady periods

/// Plateau A (t < 400 s) and plateau B (t ≥ 600 s), joined by a linear ramp:
/// (T_h K, T_c K, Q_in W, W W). Heat out closes the balance, Q_out = Q_in − W.
const PLATEAU_A: (f64, f64, f64, f64) = (600.0, 300.0, 1000.0, 250.0);
const PLATEAU_B: (f64, f64, f64, f64) = (700.0, 310.0, 1200.0, 360.0);

/// Row `t` (1 Hz) of the two-plateau run.
fn plateau_row(t: u32) -> (f64, f64, f64, f64) {
    let (a, b) = (PLATEAU_A, PLATEAU_B);
    let x = (f64::from(t).clamp(400.0, 600.0) - 400.0) / 200.0;
    let mix = |p: f64, q: f64| p + (q - p) * x;
    (mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2), mix(a.3, b.3))
}

/// The leading number of a cell (`0.2500 ± 0.0031`, `1.000 kW`,
/// `600.0`), with a `k` or `m` unit prefix undone, and the decimals it was
/// printed with.
fn leading(cell: &str) -> (f64, usize) {
    let text = cell.replace('−', "-");
    let mut words = text.split_whitespace();
    let number = words.next().expect("a number");
    let decimals = number.split_once('.').map_or(0, |(_, d)| d.len());
    let value: f64 = number
        .parse()
        .unwrap_or_else(|_| panic!("not a number: {cell}"));
    let scale = match words.last() {
        Some(u) if u.starts_with('k') => 1000.0,
        Some(u) if u.starts_with('m') && u.len() > 1 => 0.001,
        _ => 1.0,
    };
    (value * scale, decimals)
}

#[test]
fn csv_report_lists_the_steady_plateaus_with_their_figures() {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let csv = dir.path().join("plateaus.csv");
    let toml = dir.path().join("rig.toml");
    let mut text = String::from("time_s,hot_k,cold_k,heat_in_w,work_w,heat_out_w\n");
    for t in 0..1200u32 {
        let (hot, cold, q_in, w) = plateau_row(t);
        text.push_str(&format!("{t},{hot},{cold},{q_in},{w},{}\n", q_in - w));
    }
    std::fs::write(&csv, text).expect("write CSV");
    // Windows of 11 samples (10 s) and a summary every 10 s: they meet end
    // to end. Steady after 30 s inside the bands.
    std::fs::write(&toml, "window_samples = 11\n[steady]\nduration_s = 30.0\n")
        .expect("write rig.toml");
    let rig = heatbound_host::rigfile::load_rig(Some(&toml)).expect("rig.toml");
    let r = report::from_csv(&csv, &rig.config, None, Some(&toml), 10_000, None).expect("report");

    // The ramp (0.5 K/s on the hot side against a 2 K band) is never
    // steady; each plateau is, 30 s after it begins.
    let periods = &r.steady.periods;
    assert_eq!(periods.len(), 2, "{periods:#?}");
    assert_eq!(r.steady.more, 0);
    let seconds = |s: &str| leading(s).0;
    assert!(seconds(&periods[0].from) >= 30.0 && seconds(&periods[0].to) <= 400.0);
    assert!(seconds(&periods[1].from) >= 630.0 && seconds(&periods[1].to) <= 1199.0);

    // Expected figures, from the plateau's constants by hand (DESIGN §4
    // with constant readings and a closed balance): the means are the
    // readings, η = W/Q_in, η_C = 1 − T_c/T_h, the margin η_C − η, and
    // σ̇ = Q_out/T_c − Q_in/T_h with Q_out = Q_in − W. Each must match the
    // page to the decimals it prints.
    for (p, (t_h, t_c, q_in, w)) in periods.iter().zip([PLATEAU_A, PLATEAU_B]) {
        let eta = w / q_in;
        let eta_c = 1.0 - t_c / t_h;
        let sigma = (q_in - w) / t_c - q_in / t_h;
        for (what, cell, want) in [
            ("T_h", &p.t_h, t_h),
            ("T_c", &p.t_c, t_c),
            ("heat in", &p.heat_in, q_in),
            ("work", &p.work, w),
            ("η", &p.performance, eta),
            ("η_C", &p.bound, eta_c),
            ("margin", &p.margin, eta_c - eta),
            ("σ̇", &p.entropy_rate, sigma),
        ] {
            let (got, decimals) = leading(cell);
            let scale = if cell.contains(" kW") { 1000.0 } else { 1.0 };
            let half_ulp = 0.5 * scale * 10f64.powi(-i32::try_from(decimals).expect("decimals"));
            assert!(
                (got - want).abs() <= half_ulp * 1.000_001,
                "{what}: page {cell:?}, expected {want} (period {} to {})",
                p.from,
                p.to
            );
        }
    }

    // The page, from the command line: the table and the chart.
    let out = dir.path().join("plateaus.html");
    heatbound()
        .arg("report")
        .arg(&csv)
        .arg("--config")
        .arg(&toml)
        .args(["--summary-period", "10", "--out"])
        .arg(&out)
        .assert()
        .success();
    let page = std::fs::read_to_string(&out).expect("the page");
    check_page(&page);
    let steady = page
        .split_once("<section id=\"steady\">")
        .and_then(|(_, rest)| rest.split_once("</section>"))
        .expect("the steady section")
        .0;
    assert_eq!(steady.matches("<tr><td>").count(), 2, "{steady}");
    assert!(page.contains("<th>File time</th>"));
    assert!(page.contains("<svg class=\"chart\""));
    assert!(page.contains("every 10.0 s of the file"));
}

#[test]
fn files_that_are_not_ours_are_never_overwritten() {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let db = dir.path().join("run.sqlite");
    logged_run(&db, 60);
    let notes = dir.path().join("notes.html");
    let data = dir.path().join("data.txt");
    std::fs::write(&notes, "<!DOCTYPE html><p>my notes</p>").expect("write");
    std::fs::write(&data, "1,2,3\n").expect("write");
    for (out, what) in [
        (&notes, "another HTML page"),
        (&data, "not an HTML page"),
        (&db, "that is the report's input"),
        (&dir.path().to_path_buf(), "a directory"),
    ] {
        let got = heatbound()
            .arg("report")
            .arg(&db)
            .arg("--out")
            .arg(out)
            .output()
            .expect("runs");
        assert_eq!(got.status.code(), Some(2), "{}", out.display());
        let stderr = String::from_utf8_lossy(&got.stderr);
        assert_eq!(stderr.lines().count(), 1, "one line: {stderr}");
        assert!(stderr.starts_with("heatbound: error: "), "{stderr}");
        assert!(stderr.contains(what), "{stderr}");
        assert!(got.stdout.is_empty());
    }
    assert_eq!(
        std::fs::read_to_string(&notes).expect("notes"),
        "<!DOCTYPE html><p>my notes</p>"
    );
    assert_eq!(std::fs::read_to_string(&data).expect("data"), "1,2,3\n");
    assert!(
        report::check_target(&db, &[]).is_err(),
        "a log is not a report"
    );
}

#[test]
fn bad_inputs_fail_in_one_line() {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let db = dir.path().join("run.sqlite");
    logged_run(&db, 30);
    let csv = root().join("examples/bench-run.csv");
    let missing = dir.path().join("missing.sqlite");
    let empty = dir.path().join("empty.sqlite");
    drop(Log::open(&empty).expect("an empty log"));
    let out = dir.path().join("r.html");
    for (args, words) in [
        (
            vec![db.as_os_str(), "--run".as_ref(), "9".as_ref()],
            "--run 9: no such run in the log (it holds run 1)",
        ),
        (
            vec![csv.as_os_str(), "--run".as_ref(), "1".as_ref()],
            "--run applies to a log database",
        ),
        (vec![missing.as_os_str()], "missing.sqlite: cannot open"),
        (vec![empty.as_os_str()], "no run in the log has summaries"),
    ] {
        let got = heatbound()
            .arg("report")
            .args(&args)
            .arg("--out")
            .arg(&out)
            .output()
            .expect("runs");
        assert_eq!(got.status.code(), Some(2), "{args:?}");
        let stderr = String::from_utf8_lossy(&got.stderr);
        assert_eq!(stderr.lines().count(), 1, "one line: {stderr}");
        assert!(stderr.contains(words), "{args:?}: {stderr}");
        assert!(!out.exists());
    }
}

#[test]
fn figures_that_are_not_available_read_n_a() {
    // Summaries with no heat in: no η, no bound, no σ̇. Nothing may read NaN.
    let dir = tempfile::tempdir().expect("a temporary directory");
    let path = dir.path().join("cold.sqlite");
    let mut log = Log::open(&path).expect("a new log");
    let run = log.begin_run("file:test", T0_HOST_MS).expect("a run");
    let hello = Hello::from_config(
        RigId::new("idle").expect("id"),
        (0, 1, 0),
        1000,
        &RigConfig::default(),
    );
    log.insert_frame(run, T0_HOST_MS, &Frame::Hello(hello))
        .expect("logged");
    for seq in 0..20u16 {
        let s = Summary {
            seq,
            t_ms: 1000 * (u32::from(seq) + 1),
            duration_s: 1.0,
            ..Summary::default()
        };
        log.insert_frame(
            run,
            T0_HOST_MS + 1000 * (i64::from(seq) + 1),
            &Frame::Summary(s),
        )
        .expect("logged");
    }
    log.end_run(run, T0_HOST_MS + 30_000).expect("closed");
    drop(log);
    let r = report::from_log(&path, None, &RigConfig::default()).expect("the report");
    let page = report::render(&r);
    check_page(&page);
    assert!(page.contains("n/a"));
}

#[test]
fn demo_writes_its_report_beside_the_log() {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let db = dir.path().join("demo.sqlite");
    let out = heatbound()
        .args(["demo", "--speed", "300", "--quiet", "--db"])
        .arg(&db)
        .output()
        .expect("runs");
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{text}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        text.lines()
            .any(|l| l.starts_with("report written to ") && l.ends_with("demo.html")),
        "{text}"
    );
    let page = std::fs::read_to_string(dir.path().join("demo.html")).expect("the page");
    check_page(&page);
    // The demo's alarm, its acknowledgement over the link, and the
    // controller's diagnosis at the raise: the drifting hot thermocouple.
    assert!(page.contains("beyond_carnot"));
    assert!(page.contains("<td class=\"kind\">acknowledged</td>"));
    assert!(page.contains("by demo operator"));
    assert!(
        page.contains("readings inconsistent: check hot"),
        "diagnosis at the raise"
    );
    assert!(page.contains(">Trustworthy<"));

    // A file in the report's place that is not a report stops the demo
    // before it starts, untouched.
    let other = dir.path().join("other.sqlite");
    std::fs::write(dir.path().join("other.html"), "mine").expect("write");
    heatbound()
        .args(["demo", "--speed", "300", "--quiet", "--db"])
        .arg(&other)
        .assert()
        .code(2);
    assert_eq!(
        std::fs::read_to_string(dir.path().join("other.html")).expect("kept"),
        "mine"
    );
    assert!(!other.exists(), "nothing started");
}

// ---------------------------------------------------------------------------
// In a browser

/// The programs the browser test needs.
struct Tools {
    chromium: PathBuf,
}

/// `name` on the PATH.
fn which(name: &str) -> Option<PathBuf> {
    std::env::var_os("PATH").and_then(|paths| {
        std::env::split_paths(&paths)
            .map(|d| d.join(name))
            .find(|p| p.is_file())
    })
}

/// Chromium and poppler, or `None` (the test skips) unless
/// `HEATBOUND_REQUIRE_BROWSER` is set, when their absence fails it.
fn tools() -> Option<Tools> {
    let chromium = which("chromium").or_else(|| which("chromium-browser"));
    let poppler =
        which("pdfinfo").is_some() && which("pdftotext").is_some() && which("pdffonts").is_some();
    match (chromium, poppler) {
        (Some(chromium), true) => Some(Tools { chromium }),
        _ if std::env::var_os("HEATBOUND_REQUIRE_BROWSER").is_some() => panic!(
            "HEATBOUND_REQUIRE_BROWSER is set but chromium or poppler-utils (pdfinfo, pdftotext, \
             pdffonts) is missing: apt-get install chromium poppler-utils"
        ),
        _ => {
            eprintln!("skipped: chromium or poppler-utils not installed");
            None
        }
    }
}

/// What a page did in the browser.
struct Rendered {
    /// Console messages (errors, CSP refusals), `net::` failures.
    console: Vec<String>,
    /// Requests the page made to anywhere but itself.
    requests: Vec<String>,
}

/// Chromium, headless, with a profile of its own in `dir`.
fn chromium(tools: &Tools, dir: &Path, args: &[String], page: &Path) -> std::process::Output {
    let profile = tempfile::tempdir_in(dir).expect("a profile");
    Process::new(&tools.chromium)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .args(args)
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("chromium runs")
}

/// Renders `page` to `png` (1280 × 1600), logging the console to stderr and
/// the network to a NetLog, and returns what the page did.
fn render(tools: &Tools, dir: &Path, page: &Path, png: &Path) -> Rendered {
    let netlog = dir.join("net.json");
    let out = chromium(
        tools,
        dir,
        &[
            "--enable-logging=stderr".to_owned(),
            "--v=0".to_owned(),
            format!("--log-net-log={}", netlog.display()),
            format!("--screenshot={}", png.display()),
            "--window-size=1280,1600".to_owned(),
        ],
        page,
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(png.is_file(), "no screenshot: {stderr}");
    let console = stderr
        .lines()
        .filter(|l| l.contains(":CONSOLE") || l.contains("Refused to") || l.contains("net::ERR"))
        .map(str::to_owned)
        .collect();
    // Chromium's own background requests (updates, time) have no
    // initiator; the page's have its origin, `null` for a file.
    let log: Value = serde_json::from_str(&std::fs::read_to_string(&netlog).expect("the NetLog"))
        .expect("NetLog JSON");
    let start_job = log["constants"]["logEventTypes"]["URL_REQUEST_START_JOB"].as_u64();
    let requests = log["events"]
        .as_array()
        .map(|events| {
            events
                .iter()
                .filter(|e| e["type"].as_u64() == start_job)
                .filter(|e| e["params"]["initiator"].as_str() != Some("not an origin"))
                .filter_map(|e| e["params"]["url"].as_str())
                .filter(|u| !u.starts_with("file:") && !u.starts_with("data:"))
                .map(str::to_owned)
                .collect()
        })
        .unwrap_or_default();
    let _ = std::fs::remove_file(&netlog);
    Rendered { console, requests }
}

/// The width and height of a PNG (W3C PNG specification: the signature,
/// §5.2, then IHDR with both as big-endian u32 in bytes 16..24, §11.2.2).
fn png_size(png: &Path) -> (u32, u32) {
    let b = std::fs::read(png).expect("the PNG");
    assert_eq!(b.get(..8), Some(&b"\x89PNG\r\n\x1a\n"[..]));
    let be = |i: usize| u32::from_be_bytes([b[i], b[i + 1], b[i + 2], b[i + 3]]);
    (be(16), be(20))
}

/// The output of a poppler tool (`pdftotext` to stdout).
fn poppler(tool: &str, args: &[&str], pdf: &Path) -> String {
    let to_stdout: &[&str] = if tool == "pdftotext" { &["-"] } else { &[] };
    let out = Process::new(tool)
        .args(args)
        .arg(pdf)
        .args(to_stdout)
        .output()
        .expect("poppler runs");
    assert!(
        out.status.success(),
        "{tool}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}

#[test]
fn the_report_in_a_browser_loads_nothing_and_prints() {
    let Some(tools) = tools() else { return };
    let dir = tempfile::tempdir().expect("a temporary directory");

    // First, that the check can fail: a page with an external image, an
    // external stylesheet and a script error; and one whose policy refuses
    // them, as the report's would.
    let broken = dir.path().join("broken.html");
    std::fs::write(
        &broken,
        "<!DOCTYPE html><html><head><link rel=\"stylesheet\" href=\"https://example.invalid/x.css\">\
         </head><body><img src=\"http://example.invalid/x.png\"><script>notDefined();</script>\
         </body></html>",
    )
    .expect("write");
    let r = render(&tools, dir.path(), &broken, &dir.path().join("broken.png"));
    assert!(
        r.console.iter().any(|l| l.contains("notDefined")),
        "{:?}",
        r.console
    );
    assert!(
        r.requests
            .iter()
            .any(|u| u.contains("example.invalid/x.png"))
            && r.requests
                .iter()
                .any(|u| u.contains("example.invalid/x.css")),
        "{:?}",
        r.requests
    );
    let refused = dir.path().join("refused.html");
    std::fs::write(
        &refused,
        "<!DOCTYPE html><html><head><meta http-equiv=\"Content-Security-Policy\" \
         content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\"></head>\
         <body><img src=\"http://example.invalid/y.png\"></body></html>",
    )
    .expect("write");
    let r = render(
        &tools,
        dir.path(),
        &refused,
        &dir.path().join("refused.png"),
    );
    assert!(
        r.console
            .iter()
            .any(|l| l.contains("Content Security Policy")),
        "{:?}",
        r.console
    );
    assert!(r.requests.is_empty(), "{:?}", r.requests);

    // The report: no console message, no request.
    let db = dir.path().join("run.sqlite");
    logged_run(&db, 900);
    let page = dir.path().join("run.html");
    let report = report::from_log(&db, None, &rig_config()).expect("the report");
    report::write(&report, &page, &[&db]).expect("written");
    let shot = dir.path().join("run.png");
    let r = render(&tools, dir.path(), &page, &shot);
    assert!(r.console.is_empty(), "console: {:?}", r.console);
    assert!(r.requests.is_empty(), "requests: {:?}", r.requests);
    assert_eq!(png_size(&shot), (1280, 1600));
    // A page of text and tables, not a blank one.
    let size = std::fs::metadata(&shot).expect("the screenshot").len();
    assert!(size > 40_000, "screenshot of {size} bytes");

    // Printed: A4 pages, the chart on a landscape one, every font embedded,
    // and the text (the chart's SVG text included) readable.
    let pdf = dir.path().join("run.pdf");
    let out = chromium(
        &tools,
        dir.path(),
        &[
            "--no-pdf-header-footer".to_owned(),
            format!("--print-to-pdf={}", pdf.display()),
        ],
        &page,
    );
    assert!(
        pdf.is_file(),
        "no PDF: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let info = poppler("pdfinfo", &[], &pdf);
    let pages: u32 = info
        .lines()
        .find_map(|l| l.strip_prefix("Pages:"))
        .and_then(|n| n.trim().parse().ok())
        .expect("a page count");
    assert!((4..=10).contains(&pages), "{pages} pages");
    // Compared in lower case: the style sets some words in capitals.
    let text = poppler("pdftotext", &["-layout"], &pdf).to_lowercase();
    for words in [
        "Run 1 of run.sqlite",
        "Trustworthy",
        "report-rig",
        "Uncertainty budget",
        "Combined standard uncertainty",
        "Steady periods",
        "device time (s)",
        "Caution: heat-engine rigs have hot surfaces",
        "not a safety-",
    ] {
        assert!(
            text.contains(&words.to_lowercase()),
            "{words:?} not in the PDF's text: {}",
            text.get(..text.len().min(600)).unwrap_or("")
        );
    }
    let mut landscape = 0;
    for i in 1..=pages {
        let n = i.to_string();
        let size = poppler("pdfinfo", &["-f", &n, "-l", &n], &pdf);
        let wide = size
            .lines()
            .filter(|l| l.contains(" size:"))
            .filter_map(|l| {
                let v: Vec<f64> = l
                    .split_whitespace()
                    .filter_map(|w| w.parse().ok())
                    .collect();
                // "Page N size: W x H pts": N, W, H.
                (v.len() >= 3).then(|| v[1] > v[2])
            })
            .next()
            .expect("a page size");
        let page_text = poppler("pdftotext", &["-f", &n, "-l", &n], &pdf);
        if wide {
            landscape += 1;
            assert!(
                page_text.contains("7. Charts"),
                "page {i} is landscape: {page_text}"
            );
        }
    }
    assert_eq!(landscape, 1, "the chart alone is on a landscape page");
    let fonts = poppler("pdffonts", &[], &pdf);
    let rows: Vec<&str> = fonts.lines().skip(2).collect();
    assert!(!rows.is_empty(), "{fonts}");
    for row in rows {
        // Columns: name, type, encoding, emb, sub, uni, object ID.
        let cols: Vec<&str> = row.split_whitespace().collect();
        assert!(cols.len() >= 5, "{row}");
        assert_eq!(cols[cols.len() - 5], "yes", "font not embedded: {row}");
    }
    assert!(fonts.contains("DejaVuSans"), "{fonts}");
}
