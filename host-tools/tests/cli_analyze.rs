//! `heatbound analyze`: the replay against independent computations, the
//! handling of invalid readings, every error path, the text report and the
//! shipped example.
//!
//! Sources of the check values:
//! - REFERENCES.md, "Second law for a steady engine": Q_h = 1000 W,
//!   W = 150 W, T_h = 600 K, T_c = 300 K give S_gen = 1.16667 W/K, and with
//!   T0 = T_c the exergy destroyed is 350 W.
//! - Otherwise, an independent recomputation of DESIGN.md §4 in this test
//!   (trapezoidal rule in plain f64, written here, not taken from the core).
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use serde_json::Value;
use tempfile::TempDir;

/// Writes `text` as `name` into a fresh temporary directory.
fn write(dir: &TempDir, name: &str, text: &str) -> PathBuf {
    let path = dir.path().join(name);
    std::fs::write(&path, text).expect("write test file");
    path
}

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// Runs `analyze --json` on `csv` (with `config` if given) and parses the output.
fn analyze_json(csv: &Path, config: Option<&Path>) -> Value {
    let mut cmd = heatbound();
    cmd.arg("analyze").arg(csv).arg("--json");
    if let Some(c) = config {
        cmd.arg("--config").arg(c);
    }
    let out = cmd.output().expect("run heatbound");
    assert!(
        out.status.success(),
        "analyze failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("valid JSON")
}

/// Runs `analyze` expecting failure; returns stderr, checked to be one line, exit 2.
fn analyze_error(args: &[&std::ffi::OsStr]) -> String {
    let out = heatbound()
        .arg("analyze")
        .args(args)
        .output()
        .expect("run heatbound");
    assert_eq!(
        out.status.code(),
        Some(2),
        "exit code; stderr: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.stdout.is_empty(), "nothing on stdout on error");
    let err = String::from_utf8(out.stderr).expect("UTF-8 stderr");
    assert_eq!(err.lines().count(), 1, "exactly one stderr line: {err:?}");
    assert!(err.starts_with("heatbound: error: "), "{err}");
    err
}

fn f(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} is not a number: {v}"))
}

fn assert_rel(actual: f64, expected: f64, rel: f64, what: &str) {
    let scale = expected.abs().max(1e-300);
    assert!(
        (actual - expected).abs() <= rel * scale,
        "{what}: {actual} vs expected {expected} (rel {rel})"
    );
}

/// A constant engine: REFERENCES.md "Second law for a steady engine", held
/// for `seconds` at 1 s spacing. Columns in °C and out of canonical order.
fn reference_engine_csv(seconds: u32) -> String {
    // 326.85 °C + 273.15 = 600 K, 26.85 °C + 273.15 = 300 K.
    let mut s = String::from("work_w,cold_c,note,time_s,heat_in_w,hot_c\n");
    for i in 0..=seconds {
        s.push_str(&format!("150,26.85,x,{i},1000,326.85\n"));
    }
    s
}

#[test]
fn constant_engine_matches_the_second_law_reference() {
    let dir = TempDir::new().unwrap();
    let csv = write(&dir, "steady.csv", &reference_engine_csv(120));
    let j = analyze_json(&csv, None);
    let t = &j["totals"];
    let d = 120.0;

    assert_eq!(j["samples"], 121);
    assert_eq!(j["invalid_samples"], 0);
    assert_eq!(f(&j, "duration_s"), d);
    // DESIGN.md §4: energies; heat out inferred as Q_in − W.
    assert_rel(f(t, "heat_in_j"), 1000.0 * d, 1e-12, "Q_in");
    assert_rel(f(t, "work_j"), 150.0 * d, 1e-12, "W");
    assert_rel(f(t, "heat_out_j"), 850.0 * d, 1e-12, "Q_out");
    assert!(
        t["balance_residual_j"].is_null(),
        "no residual without measured heat out"
    );
    // Constant temperatures: the heat-weighted means are the readings.
    assert_rel(f(t, "hot_mean_k"), 600.0, 1e-12, "T_h");
    assert_rel(f(t, "cold_mean_k"), 300.0, 1e-12, "T_c");
    assert_rel(f(t, "efficiency"), 0.15, 1e-12, "η");
    assert_rel(f(t, "carnot_efficiency"), 0.5, 1e-12, "η_C");
    assert_rel(
        f(t, "curzon_ahlborn_efficiency"),
        1.0 - 0.5_f64.sqrt(),
        1e-12,
        "η_CA",
    );
    assert_rel(f(t, "carnot_margin"), 0.35, 1e-12, "margin");
    assert_rel(f(t, "second_law_efficiency"), 0.3, 1e-12, "η/η_C");
    // REFERENCES.md: S_gen = 1.16667 W/K (= 850/300 − 1000/600 = 7/6 exactly).
    let s_gen = f(t, "entropy_generated_j_per_k");
    assert_rel(s_gen / d, 1.16667, 5e-6, "S_gen rate vs REFERENCES.md");
    assert_rel(s_gen, 7.0 / 6.0 * d, 1e-12, "S_gen");
    // REFERENCES.md: exergy destroyed 350 W with T0 = T_c (the default T0).
    assert_rel(
        f(t, "exergy_destroyed_j"),
        350.0 * d,
        1e-12,
        "exergy destroyed",
    );
    assert_rel(f(t, "entropy_rate_w_per_k"), 7.0 / 6.0, 1e-12, "σ̇");
    assert_eq!(t["mode"], "engine");
    assert_eq!(t["heat_out_measured"], false);

    // The final window: default 60 samples, 59 s.
    let w = &j["window"];
    assert_eq!(w["samples"], 60);
    assert_rel(f(w, "duration_s"), 59.0, 1e-12, "window duration");
    assert_rel(f(w, "efficiency"), 0.15, 1e-12, "window η");
    assert_rel(
        f(w, "entropy_generated_j_per_k"),
        7.0 / 6.0 * 59.0,
        1e-12,
        "window S_gen",
    );
    for key in ["u_efficiency", "u_carnot_efficiency", "u_carnot_margin"] {
        assert!(f(w, key) > 0.0, "{key} present and positive");
    }
    // Steady after the default 60 s of constant readings, and at the end.
    let steady = f(&j, "steady_fraction");
    assert!(steady > 0.0 && steady < 1.0, "steady fraction {steady}");
    assert_eq!(j["steady_at_end"], true);
    assert_eq!(j["alarms"], Value::Array(vec![]));
    assert_eq!(f(&j, "coverage_factor"), 2.0);
    assert_eq!(j["restarts"], 0);
}

#[test]
fn json_has_exactly_the_documented_keys_in_order() {
    let dir = TempDir::new().unwrap();
    let csv = write(&dir, "steady.csv", &reference_engine_csv(5));
    let out = heatbound()
        .arg("analyze")
        .arg(&csv)
        .arg("--json")
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    // DESIGN.md §5, then the additions the issue allows, in that order.
    let j: serde_json::Map<String, Value> = serde_json::from_str(&text).unwrap();
    let keys: Vec<&str> = j.keys().map(String::as_str).collect();
    let mut expected = vec![
        "samples",
        "invalid_samples",
        "duration_s",
        "totals",
        "window",
        "steady_fraction",
        "alarms",
    ];
    expected.extend([
        "coverage_factor",
        "restarts",
        "steady_at_end",
        "invalid_lines",
        "unused_columns",
        "hot2_measured",
        "diagnosis",
        "time_to_limit_s",
    ]);
    let mut sorted_expected = expected.clone();
    sorted_expected.sort_unstable();
    assert_eq!(
        keys, sorted_expected,
        "top-level keys (serde_json's map is sorted)"
    );
    let shared = [
        "heat_in_j",
        "work_j",
        "heat_out_j",
        "balance_residual_j",
        "efficiency",
        "hot_mean_k",
        "cold_mean_k",
        "carnot_efficiency",
        "curzon_ahlborn_efficiency",
        "carnot_margin",
        "second_law_efficiency",
        "entropy_generated_j_per_k",
        "exergy_destroyed_j",
    ];
    // The text order is the documented one: check positions in the raw output.
    let totals_at = text.find("\"totals\"").unwrap();
    let window_at = text.find("\"window\"").unwrap();
    let mut last = totals_at;
    for key in shared {
        let at = text[last..]
            .find(&format!("\"{key}\""))
            .map(|p| p + last)
            .unwrap_or_else(|| panic!("{key} in totals"));
        assert!(at < window_at, "{key} inside totals");
        last = at;
    }
    let mut last = window_at;
    for key in shared
        .iter()
        .chain(&["u_efficiency", "u_carnot_efficiency", "u_carnot_margin"])
    {
        let at = text[last..]
            .find(&format!("\"{key}\""))
            .map(|p| p + last)
            .unwrap_or_else(|| panic!("{key} in window"));
        last = at;
    }
    let totals = j["totals"].as_object().unwrap();
    for key in shared {
        assert!(totals.contains_key(key), "totals.{key}");
    }
    let allowed_totals = [
        "entropy_rate_w_per_k",
        "cop",
        "carnot_cop",
        "mode",
        "heat_out_measured",
    ];
    for key in totals.keys() {
        assert!(
            shared.contains(&key.as_str()) || allowed_totals.contains(&key.as_str()),
            "unexpected totals.{key}"
        );
    }
}

#[test]
fn kelvin_columns_in_canonical_order_give_the_same_figures() {
    let dir = TempDir::new().unwrap();
    let mut k = String::from("time_s,hot_k,cold_k,heat_in_w,work_w\n");
    for i in 0..=120 {
        k.push_str(&format!("{i},600,300,1000,150\n"));
    }
    let a = analyze_json(&write(&dir, "k.csv", &k), None);
    let c = analyze_json(&write(&dir, "c.csv", &reference_engine_csv(120)), None);
    for key in [
        "heat_in_j",
        "work_j",
        "efficiency",
        "hot_mean_k",
        "cold_mean_k",
        "carnot_efficiency",
        "entropy_generated_j_per_k",
    ] {
        // 326.85 + 273.15 and 26.85 + 273.15 round to within an ulp of 600 and 300.
        assert_rel(f(&a["totals"], key), f(&c["totals"], key), 1e-12, key);
    }
}

#[test]
fn measured_heat_out_gives_the_balance_residual_and_its_entropy() {
    let dir = TempDir::new().unwrap();
    let mut s = String::from("time_s,hot_k,cold_k,heat_in_w,work_w,heat_out_w\n");
    for i in 0..=30 {
        s.push_str(&format!("{i},600,300,1000,150,800\n"));
    }
    let csv = write(&dir, "measured.csv", &s);
    let config = write(&dir, "rig.toml", "ambient_k = 290.0\n");
    let j = analyze_json(&csv, Some(&config));
    let t = &j["totals"];
    let d = 30.0;
    // DESIGN.md §4: Q_loss = Q_in − W − Q_out, lost at T0; S_gen adds Q_loss/T0.
    assert_rel(f(t, "heat_out_j"), 800.0 * d, 1e-12, "Q_out measured");
    assert_rel(f(t, "balance_residual_j"), 50.0 * d, 1e-12, "Q_loss");
    let s_rate = 800.0 / 300.0 + 50.0 / 290.0 - 1000.0 / 600.0;
    assert_rel(
        f(t, "entropy_generated_j_per_k"),
        s_rate * d,
        1e-12,
        "S_gen",
    );
    assert_rel(
        f(t, "exergy_destroyed_j"),
        290.0 * s_rate * d,
        1e-12,
        "T0·S_gen",
    );
    assert_eq!(t["heat_out_measured"], true);
    assert!(f(&j["window"], "u_balance_residual_j") > 0.0);
}

/// One row of the varying run: every channel a different smooth function,
/// written with 6 decimals; the test reads back what it wrote.
fn varying_row(t: f64) -> [f64; 5] {
    let r = |x: f64| format!("{x:.6}").parse::<f64>().unwrap();
    [
        r(600.0 + 80.0 * (0.013 * t).sin()),
        r(300.0 + 15.0 * (0.007 * t).cos()),
        r(1000.0 + 120.0 * (0.005 * t).sin()),
        r(150.0 + 25.0 * (0.011 * t).cos()),
        r(820.0 + 60.0 * (0.009 * t).sin()),
    ]
}

/// Independent trapezoidal sums over consecutive rows (DESIGN.md §4).
#[derive(Default)]
struct Sums {
    dt: f64,
    qi: f64,
    w: f64,
    qo: f64,
    si: f64,
    so: f64,
}

fn trapezoids(rows: &[(f64, [f64; 5])], measured: bool) -> Sums {
    let mut s = Sums::default();
    for pair in rows.windows(2) {
        let ((ta, a), (tb, b)) = (pair[0], pair[1]);
        let dt = tb - ta;
        let qo = |v: &[f64; 5]| if measured { v[4] } else { v[2] - v[3] };
        let trap = |fa: f64, fb: f64| 0.5 * dt * (fa + fb);
        s.dt += dt;
        s.qi += trap(a[2], b[2]);
        s.w += trap(a[3], b[3]);
        s.qo += trap(qo(&a), qo(&b));
        s.si += trap(a[2] / a[0], b[2] / b[0]);
        s.so += trap(qo(&a) / a[1], qo(&b) / b[1]);
    }
    s
}

fn check_figures(v: &Value, s: &Sums, measured: bool, t0: Option<f64>, what: &str) {
    let rel = 1e-9;
    assert_rel(f(v, "heat_in_j"), s.qi, rel, &format!("{what} Q_in"));
    assert_rel(f(v, "work_j"), s.w, rel, &format!("{what} W"));
    assert_rel(f(v, "heat_out_j"), s.qo, rel, &format!("{what} Q_out"));
    let th = s.qi / s.si;
    let tc = s.qo / s.so;
    assert_rel(f(v, "hot_mean_k"), th, rel, &format!("{what} T_h"));
    assert_rel(f(v, "cold_mean_k"), tc, rel, &format!("{what} T_c"));
    assert_rel(f(v, "efficiency"), s.w / s.qi, rel, &format!("{what} η"));
    assert_rel(
        f(v, "carnot_efficiency"),
        1.0 - tc / th,
        rel,
        &format!("{what} η_C"),
    );
    assert_rel(
        f(v, "curzon_ahlborn_efficiency"),
        1.0 - (tc / th).sqrt(),
        rel,
        &format!("{what} η_CA"),
    );
    let s_gen = if measured {
        let loss = s.qi - s.w - s.qo;
        s.so + loss / t0.unwrap_or(tc) - s.si
    } else {
        s.so - s.si
    };
    assert_rel(
        f(v, "entropy_generated_j_per_k"),
        s_gen,
        rel,
        &format!("{what} S_gen"),
    );
    assert_rel(
        f(v, "exergy_destroyed_j"),
        t0.unwrap_or(tc) * s_gen,
        rel,
        &format!("{what} exergy"),
    );
}

fn varying_run(measured: bool) -> (String, Vec<(f64, [f64; 5])>) {
    let mut text = String::from(if measured {
        "heat_out_w,time_s,hot_k,cold_k,heat_in_w,work_w\n"
    } else {
        "time_s,hot_k,cold_k,heat_in_w,work_w\n"
    });
    let mut rows = Vec::new();
    let mut t = 100.0_f64;
    for i in 0..400u32 {
        // Uneven spacing, 0.25 s to 2.0 s, whole milliseconds.
        t += [0.25, 1.0, 2.0, 0.5, 1.75][i as usize % 5];
        let v = varying_row(t);
        if measured {
            text.push_str(&format!(
                "{:.6},{t:.3},{:.6},{:.6},{:.6},{:.6}\n",
                v[4], v[0], v[1], v[2], v[3]
            ));
        } else {
            text.push_str(&format!(
                "{t:.3},{:.6},{:.6},{:.6},{:.6}\n",
                v[0], v[1], v[2], v[3]
            ));
        }
        rows.push((format!("{t:.3}").parse().unwrap(), v));
    }
    (text, rows)
}

#[test]
fn varying_run_matches_an_independent_trapezoidal_computation() {
    let dir = TempDir::new().unwrap();
    for measured in [false, true] {
        let (text, rows) = varying_run(measured);
        let csv = write(&dir, "varying.csv", &text);
        let config = write(&dir, "rig.toml", "window_samples = 50\nambient_k = 295.0\n");
        let j = analyze_json(&csv, Some(&config));
        let t0 = Some(295.0);
        check_figures(
            &j["totals"],
            &trapezoids(&rows, measured),
            measured,
            t0,
            "totals",
        );
        // The window is the last 50 valid samples (49 trapezoids).
        let window = &rows[rows.len() - 50..];
        check_figures(
            &j["window"],
            &trapezoids(window, measured),
            measured,
            t0,
            "window",
        );
        assert_rel(
            f(&j, "duration_s"),
            rows[rows.len() - 1].0 - rows[0].0,
            1e-12,
            "duration_s",
        );
        assert_eq!(j["samples"], 400);
    }
}

#[test]
fn nan_and_empty_readings_are_counted_as_invalid_and_bridged() {
    let dir = TempDir::new().unwrap();
    let mut s = String::from("time_s,hot_k,cold_k,heat_in_w,work_w,heat_out_w\n");
    for i in 0..=20 {
        let row = match i {
            3 => format!("{i},NaN,300,1000,150,800"),
            7 => format!("{i},600,300,1000,,800"),
            11 => format!("{i},600,300,1000,150,nan"),
            15 => format!("{i},600, ,1000,150,800"),
            _ => format!("{i},600,300,1000,150,800"),
        };
        s.push_str(&row);
        s.push('\n');
    }
    let j = analyze_json(&write(&dir, "gaps.csv", &s), None);
    assert_eq!(j["samples"], 21);
    assert_eq!(j["invalid_samples"], 4);
    // Constant readings: the neighbours of each 2 s hole are joined, so the
    // integral covers all 20 s (DESIGN.md §4, default max_gap_s 10 s).
    assert_rel(
        f(&j["totals"], "heat_in_j"),
        20_000.0,
        1e-12,
        "Q_in bridged",
    );
    assert_eq!(
        j["alarms"],
        Value::Array(vec![]),
        "one-sample dropouts stay under the 5 s on-delay"
    );
}

#[test]
fn a_lasting_dropout_raises_sensor_fault_after_its_on_delay() {
    let dir = TempDir::new().unwrap();
    let mut s = String::from("time_s,hot_k,cold_k,heat_in_w,work_w\n");
    for i in 0..=30 {
        let hot = if (10..20).contains(&i) {
            "nan".to_string()
        } else {
            "600".to_string()
        };
        s.push_str(&format!("{}.5,{hot},300,1000,150\n", i));
    }
    let j = analyze_json(&write(&dir, "dropout.csv", &s), None);
    assert_eq!(j["invalid_samples"], 10);
    let alarms = j["alarms"].as_array().unwrap();
    // Invalid from t = 10.5 s; the default on-delay is 5 s (rig.toml docs,
    // DESIGN.md §5), so raised at the row of 15.5 s; the default off-delay
    // of 5 s after the first valid row (20.5 s) clears it at 25.5 s.
    assert_eq!(alarms.len(), 2, "{alarms:?}");
    assert_eq!(alarms[0]["rule"], "sensor_fault");
    assert_eq!(alarms[0]["event"], "raised");
    assert_eq!(alarms[0]["severity"], "warning");
    assert_eq!(f(&alarms[0], "t_s"), 15.5);
    assert_eq!(alarms[1]["event"], "cleared");
    assert_eq!(f(&alarms[1], "t_s"), 25.5);
}

#[test]
fn beyond_carnot_readings_raise_a_trip_at_the_row_time() {
    let dir = TempDir::new().unwrap();
    // AlarmSet::update's documented example: 500 W in, 300 W out between
    // 600 K and 300 K is 60 % against a 50 % bound, raised 6 s in.
    let mut s = String::from("time_s,hot_k,cold_k,heat_in_w,work_w\n");
    for i in 0..20 {
        s.push_str(&format!("{},600,300,500,300\n", 1000 + i));
    }
    let j = analyze_json(&write(&dir, "impossible.csv", &s), None);
    let alarms = j["alarms"].as_array().unwrap();
    let raised = alarms
        .iter()
        .find(|a| a["rule"] == "beyond_carnot")
        .expect("beyond_carnot raised");
    assert_eq!(raised["event"], "raised");
    assert_eq!(raised["severity"], "trip");
    assert_eq!(f(raised, "t_s"), 1006.0);
}

// --- error paths -----------------------------------------------------------

fn os(p: &Path) -> &std::ffi::OsStr {
    p.as_os_str()
}

#[test]
fn unparsable_number_names_file_line_and_column() {
    let dir = TempDir::new().unwrap();
    let csv = write(
        &dir,
        "run.csv",
        "time_s,hot_k,cold_k,heat_in_w,work_w\n0,600,300,1000,150\n1,600,300,1000,150\n2,600,300,12.x,150\n",
    );
    let err = analyze_error(&[os(&csv)]);
    let expected = format!(
        "heatbound: error: {}: line 4, column heat_in_w: cannot parse \"12.x\" as a number\n",
        csv.display()
    );
    assert_eq!(err, expected);
}

#[test]
fn missing_header_column_is_named() {
    let dir = TempDir::new().unwrap();
    let csv = write(
        &dir,
        "nowork.csv",
        "time_s,hot_k,cold_k,heat_in_w\n0,600,300,1000\n",
    );
    let err = analyze_error(&[os(&csv)]);
    assert!(
        err.contains(&format!(
            "{}: line 1, column work_w: missing required column",
            csv.display()
        )),
        "{err}"
    );
    let csv = write(
        &dir,
        "nohot.csv",
        "time_s,cold_k,heat_in_w,work_w\n0,300,1000,150\n",
    );
    let err = analyze_error(&[os(&csv)]);
    assert!(
        err.contains("line 1, column hot_c or hot_k: missing required column"),
        "{err}"
    );
}

#[test]
fn both_celsius_and_kelvin_is_contradictory() {
    let dir = TempDir::new().unwrap();
    let csv = write(
        &dir,
        "both.csv",
        "time_s,hot_c,hot_k,cold_k,heat_in_w,work_w\n0,326.85,600,300,1000,150\n",
    );
    let err = analyze_error(&[os(&csv)]);
    assert!(
        err.contains(&format!(
            "{}: line 1, column hot_k: both hot_c and hot_k",
            csv.display()
        )),
        "{err}"
    );
}

#[test]
fn short_row_names_line_and_column() {
    let dir = TempDir::new().unwrap();
    let csv = write(
        &dir,
        "short.csv",
        "time_s,hot_k,cold_k,heat_in_w,work_w\n0,600,300,1000,150\n1,600,300\n",
    );
    let err = analyze_error(&[os(&csv)]);
    assert!(
        err.contains(&format!(
            "{}: line 3, column heat_in_w: missing",
            csv.display()
        )),
        "{err}"
    );
}

#[test]
fn time_going_backwards_or_repeating_is_an_error() {
    let dir = TempDir::new().unwrap();
    for (name, t) in [("back.csv", "1.5"), ("repeat.csv", "2")] {
        let text = format!(
            "time_s,hot_k,cold_k,heat_in_w,work_w\n1,600,300,1000,150\n2,600,300,1000,150\n{t},600,300,1000,150\n"
        );
        let csv = write(&dir, name, &text);
        let err = analyze_error(&[os(&csv)]);
        assert!(
            err.contains(&format!(
                "{}: line 4, column time_s: time {t} s does not increase",
                csv.display()
            )),
            "{err}"
        );
    }
}

#[test]
fn empty_or_nan_time_is_an_error() {
    let dir = TempDir::new().unwrap();
    for (name, t) in [("notime.csv", ""), ("nantime.csv", "NaN")] {
        let text = format!(
            "time_s,hot_k,cold_k,heat_in_w,work_w\n1,600,300,1000,150\n{t},600,300,1000,150\n"
        );
        let csv = write(&dir, name, &text);
        let err = analyze_error(&[os(&csv)]);
        assert!(
            err.contains(&format!(
                "{}: line 3, column time_s: no time",
                csv.display()
            )),
            "{err}"
        );
    }
}

#[test]
fn missing_file_is_named() {
    let dir = TempDir::new().unwrap();
    let csv = dir.path().join("absent.csv");
    let err = analyze_error(&[os(&csv)]);
    assert!(
        err.contains(&format!("{}: cannot read the file", csv.display())),
        "{err}"
    );
}

#[test]
fn bad_config_key_names_file_line_and_column() {
    let dir = TempDir::new().unwrap();
    let csv = write(&dir, "ok.csv", &reference_engine_csv(3));
    let config = write(
        &dir,
        "rig.toml",
        "mode = \"engine\"\n\n[alarms]\nhot_max = 900.0\n",
    );
    let err = analyze_error(&[os(&csv), "--config".as_ref(), os(&config)]);
    assert!(
        err.contains(&format!(
            "{}: line 4, column 1: unknown field `hot_max`",
            config.display()
        )),
        "{err}"
    );
}

#[test]
fn config_value_out_of_range_names_file_line_and_key() {
    let dir = TempDir::new().unwrap();
    let csv = write(&dir, "ok.csv", &reference_engine_csv(3));
    let config = write(
        &dir,
        "rig.toml",
        "[uncertainty]\nhot_k = 1.0\nwork_rel = -0.1\n",
    );
    let err = analyze_error(&[os(&csv), "--config".as_ref(), os(&config)]);
    assert!(
        err.contains(&format!(
            "{}: line 3, column 12: `uncertainty.work_rel` must be a number ≥ 0",
            config.display()
        )),
        "{err}"
    );

    let config = write(&dir, "big.toml", "window_samples = 5000\n");
    let err = analyze_error(&[os(&csv), "--config".as_ref(), os(&config)]);
    assert!(
        err.contains(&format!(
            "{}: line 1, column 18: `window_samples` = 5000 exceeds",
            config.display()
        )),
        "{err}"
    );
    assert!(err.contains("4096"), "{err}");
}

#[test]
fn malformed_toml_is_one_line() {
    let dir = TempDir::new().unwrap();
    let csv = write(&dir, "ok.csv", &reference_engine_csv(3));
    let config = write(&dir, "rig.toml", "window_samples = [\n");
    let err = analyze_error(&[os(&csv), "--config".as_ref(), os(&config)]);
    assert!(
        err.contains(&format!("{}: line ", config.display())),
        "{err}"
    );
}

// --- text report and the shipped example ------------------------------------

#[test]
fn text_report_has_its_sections_and_the_caution() {
    let dir = TempDir::new().unwrap();
    let csv = write(&dir, "steady.csv", &reference_engine_csv(120));
    let out = heatbound().arg("analyze").arg(&csv).output().unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    for heading in [
        "Run: ",
        "Run totals",
        "Final window",
        "Steady state",
        "Alarms",
        "no alarms",
        "Caution:",
    ] {
        assert!(text.contains(heading), "missing {heading:?} in:\n{text}");
    }
    // η = 15 %, η_C = 50 % (REFERENCES.md numbers), T_h = 600 K = 326.85 °C.
    assert!(text.contains("15.00 %"), "{text}");
    assert!(text.contains("50.00 %"), "{text}");
    assert!(text.contains("600.00 K (326.85 °C)"), "{text}");
    assert!(text.contains("k = 2"), "{text}");
}

fn example(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("..")
        .join("examples")
        .join(name)
}

#[test]
fn shipped_example_runs_and_shows_the_coolant_loss() {
    let j = analyze_json(&example("bench-run.csv"), Some(&example("rig.toml")));
    assert_eq!(j["samples"], 1800);
    assert_eq!(
        j["invalid_samples"], 5,
        "three NaN hot readings, one empty work, one NaN cold"
    );
    let eta = f(&j["totals"], "efficiency");
    assert!(eta > 0.05 && eta < 0.12, "run efficiency {eta}");
    let alarms = j["alarms"].as_array().unwrap();
    let has = |rule: &str| {
        alarms
            .iter()
            .any(|a| a["rule"] == rule && a["event"] == "raised")
    };
    assert!(has("over_temperature"), "{alarms:?}");
    assert!(has("sensor_fault"), "{alarms:?}");
    // After the coolant is lost, the calorimeter reads nothing: the window's
    // energy balance is nearly all residual.
    let w = &j["window"];
    // Zero up to the rounding the window's compensated add-and-subtract
    // leaves behind (about 1e-17 of the energies that passed through it).
    assert!(f(w, "heat_out_j").abs() < 1e-12 * f(&j["totals"], "heat_in_j"));
    assert!(f(w, "balance_residual_j") > 0.9 * f(w, "heat_in_j"));

    let out = heatbound()
        .arg("analyze")
        .arg(example("bench-run.csv"))
        .arg("--config")
        .arg(example("rig.toml"))
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("over_temperature") && text.contains("trip"),
        "{text}"
    );
}

#[test]
fn unused_columns_and_invalid_rows_are_located_and_a_huge_header_is_not_echoed() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("run.csv");
    std::fs::write(
        &csv,
        "time_s,hot_c,cold_c,heat_in_w,work_w,heat_out_W,comment\n\
         0,500,20,100,20,80,a\n1,,20,100,20,80,b\n2,500,20,100,20,80,c\n3,NaN,20,100,20,80,d\n",
    )
    .unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_heatbound"))
        .arg("analyze")
        .arg(&csv)
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("2 invalid, skipped; first at lines 3, 5"),
        "{text}"
    );
    assert!(
        text.contains("heat_out_W: not read: did you mean heat_out_w?"),
        "{text}"
    );
    assert!(
        text.contains("comment: not a column heatbound reads"),
        "{text}"
    );

    // A 1 MB first line with an escape sequence: the error quotes a bounded,
    // escaped excerpt of it.
    let huge = dir.path().join("huge.csv");
    std::fs::write(&huge, format!("{}\u{1b}[2J\n1,2\n", "x".repeat(1 << 20))).unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_heatbound"))
        .arg("analyze")
        .arg(&huge)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(err.len() < 1000, "{} bytes of error", err.len());
    assert!(!err.contains('\u{1b}'), "{err}");
}

/// A hot thermocouple that drops 400 K after 120 s makes the engine look
/// better than Carnot: the second-law alarms' raises carry the diagnosis
/// of that moment, and the final window's diagnosis names the hot sensor,
/// because the second element (`hot2_k`) and `[losses]` isolate it
/// (docs/diagnosis.md §6; the rig is this test's own, its first law closed
/// by construction: 1000 W = 200 W + 597.5 W + 0.5 W/K · 405 K).
#[test]
fn second_law_raises_carry_the_diagnosis_and_the_hot_sensor_is_named() {
    let dir = TempDir::new().unwrap();
    let mut csv = String::from("time_s,hot_k,hot2_k,cold_k,heat_in_w,work_w,heat_out_w\n");
    for t in 0..400 {
        let hot = if t < 120 { 700.0 } else { 300.0 };
        csv.push_str(&format!("{t},{hot},700,300,1000,200,597.5\n"));
    }
    let csv = write(&dir, "drop.csv", &csv);
    let rig = write(
        &dir,
        "rig.toml",
        "ambient_k = 295.0\n[losses]\nua_w_per_k = 0.5\nu_ua_w_per_k = 0.01\n",
    );
    let out = heatbound()
        .arg("analyze")
        .arg(&csv)
        .arg("--config")
        .arg(&rig)
        .arg("--json")
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: Value = serde_json::from_slice(&out.stdout).unwrap();
    let raises: Vec<&Value> = j["alarms"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|a| a["event"] == "raised" && a["rule"] == "beyond_carnot")
        .collect();
    assert_eq!(raises.len(), 1, "{}", j["alarms"]);
    let d = &raises[0]["diagnosis"];
    assert_eq!(d["consistent"], false, "{d}");
    assert_eq!(j["diagnosis"]["suspect"], "hot", "{}", j["diagnosis"]);
    let c = &j["diagnosis"]["candidates"][0];
    assert_eq!(c["channel"], "hot");
    assert!((c["bias"].as_f64().unwrap() + 400.0).abs() < 1.0, "{c}");
    assert_eq!(j["hot2_measured"], true);
    // Alarms that are not second-law or energy-balance raises carry none.
    assert!(
        j["alarms"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|a| a["event"] != "raised")
            .all(|a| a.get("diagnosis").is_none())
    );
}
