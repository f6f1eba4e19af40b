//! `heatbound cycle`: table, JSON and every error path.
use std::path::PathBuf;

use assert_cmd::Command;
use tempfile::TempDir;

const OTTO: &str = r#"
[gas]
moles = 1.0
gamma = 1.4
[start]
pressure_pa = 100000.0
temperature_k = 300.0
[[step]]
process = "adiabatic"
volume_ratio = 0.125
[[step]]
process = "isochoric"
temperature_k = 1800.0
[[step]]
process = "adiabatic"
volume_ratio = 8.0
[[step]]
process = "isochoric"
to_start = true
"#;

fn write(dir: &TempDir, name: &str, text: &str) -> PathBuf {
    let path = dir.path().join(name);
    std::fs::write(&path, text).expect("write test file");
    path
}

fn cycle(path: &std::path::Path, json: bool) -> assert_cmd::assert::Assert {
    let mut cmd = Command::cargo_bin("heatbound").expect("binary built");
    cmd.arg("cycle").arg(path);
    if json {
        cmd.arg("--json");
    }
    cmd.assert()
}

/// Runs a failing file; returns its single stderr line.
fn error_line(text: &str) -> (String, String) {
    let dir = TempDir::new().expect("tempdir");
    let path = write(&dir, "bad.toml", text);
    let out = cycle(&path, false).code(2).get_output().clone();
    assert!(out.stdout.is_empty(), "nothing on stdout for an error");
    let stderr = String::from_utf8(out.stderr).expect("utf-8");
    assert_eq!(stderr.lines().count(), 1, "exactly one line: {stderr:?}");
    let file = path.display().to_string();
    assert!(stderr.starts_with("heatbound: error: "), "{stderr}");
    assert!(stderr.contains(&file), "names the file: {stderr}");
    (stderr.trim_end().to_owned(), file)
}

/// Otto closed form η = 1 − r^(1−γ) (textbook; REFERENCES.md ideal-gas cycles).
fn otto_eta(r: f64, gamma: f64) -> f64 {
    1.0 - r.powf(1.0 - gamma)
}

#[test]
fn json_matches_otto_closed_form() {
    let dir = TempDir::new().expect("tempdir");
    let path = write(&dir, "otto.toml", OTTO);
    let out = cycle(&path, true).success().get_output().stdout.clone();
    let v: serde_json::Value = serde_json::from_slice(&out).expect("valid JSON");
    let eta = v["efficiency"].as_f64().expect("efficiency");
    let want = otto_eta(8.0, 1.4);
    assert!(
        ((eta - want) / want).abs() < 1e-9,
        "η = {eta}, closed form {want}"
    );
    assert_eq!(v["closed"], true);
    let steps = v["steps"].as_array().expect("steps");
    assert_eq!(steps.len(), 4);
    assert_eq!(steps[0]["process"], "adiabatic");
    assert_eq!(
        steps[0]["heat_j"].as_f64(),
        Some(0.0),
        "adiabatic Q is exactly 0"
    );
    assert_eq!(steps[0]["delta_s_j_per_k"].as_f64(), Some(0.0));
    // T2 = T1 r^(γ−1) (textbook adiabat).
    let t2 = steps[0]["end"]["temperature_k"].as_f64().expect("T2");
    assert!((t2 / (300.0 * 8f64.powf(0.4)) - 1.0).abs() < 1e-12);
    for key in [
        "net_work_j",
        "heat_in_j",
        "heat_out_j",
        "carnot_efficiency",
        "t_max_k",
        "t_min_k",
        "mean_heat_in_temperature_k",
        "mean_heat_out_temperature_k",
        "total_delta_s_j_per_k",
    ] {
        assert!(v[key].is_number(), "{key}");
    }
    assert_eq!(v["t_max_k"].as_f64(), Some(1800.0));
    assert_eq!(v["t_min_k"].as_f64(), Some(300.0));
    assert!(
        (v["carnot_efficiency"].as_f64().expect("carnot") - (1.0 - 300.0 / 1800.0)).abs() < 1e-12
    );
    let (w, qi, qo) = (
        v["net_work_j"].as_f64().expect("w"),
        v["heat_in_j"].as_f64().expect("qin"),
        v["heat_out_j"].as_f64().expect("qout"),
    );
    assert!((w - (qi - qo)).abs() < 1e-9 * qi);
    // η = 1 − T_out/T_in for a reversible cycle.
    let (ti, to) = (
        v["mean_heat_in_temperature_k"].as_f64().expect("T_in"),
        v["mean_heat_out_temperature_k"].as_f64().expect("T_out"),
    );
    assert!((eta - (1.0 - to / ti)).abs() < 1e-12);
}

#[test]
fn json_of_an_open_path_has_nulls() {
    let dir = TempDir::new().expect("tempdir");
    let text = "[gas]\nmoles = 1\ndof = 5\n[start]\npressure_pa = 1e5\nvolume_m3 = 0.02\n\
                [[step]]\nprocess = \"polytropic\"\nexponent = 1.3\npressure_ratio = 4\n";
    let path = write(&dir, "open.toml", text);
    let out = cycle(&path, true).success().get_output().stdout.clone();
    let v: serde_json::Value = serde_json::from_slice(&out).expect("valid JSON");
    assert_eq!(v["closed"], false);
    for key in [
        "efficiency",
        "carnot_efficiency",
        "mean_heat_in_temperature_k",
        "mean_heat_out_temperature_k",
    ] {
        assert!(v[key].is_null(), "{key} should be null");
    }
    // p V^k = const: V2 = V1 · 4^(−1/1.3) (definition of the polytrope).
    let v2 = v["steps"][0]["end"]["volume_m3"].as_f64().expect("V2");
    assert!((v2 / (0.02 * 4f64.powf(-1.0 / 1.3)) - 1.0).abs() < 1e-12);
}

#[test]
fn table_shows_steps_and_totals() {
    let dir = TempDir::new().expect("tempdir");
    let path = write(&dir, "otto.toml", OTTO);
    let out = cycle(&path, false).success().get_output().stdout.clone();
    let text = String::from_utf8(out).expect("utf-8");
    for needle in [
        "process",
        "Q [J]",
        "W [J]",
        "adiabatic",
        "isochoric",
        "net work",
        "heat in",
        "heat out",
        "efficiency",
        "Carnot bound",
        "T max / T min",
        "mean T of heat in",
        "total dS",
        "closed cycle",
        // η = 1 − 8^(−0.4) = 0.564725 (textbook Otto, REFERENCES.md 0.56472).
        "0.564725",
        "56.47 %",
        // Carnot bound between 1800 K and 300 K: 1 − 1/6.
        "0.833333",
        "1800 K / 300 K",
    ] {
        assert!(text.contains(needle), "table lacks {needle:?}:\n{text}");
    }
    assert!(
        text.lines()
            .filter(|l| l.trim_start().starts_with(['1', '2', '3', '4']))
            .count()
            >= 4
    );
}

#[test]
fn shipped_examples_run() {
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../examples");
    for name in ["bench-stirling.toml", "bench-otto.toml", "open-path.toml"] {
        let out = cycle(&root.join(name), true)
            .success()
            .get_output()
            .stdout
            .clone();
        let v: serde_json::Value = serde_json::from_slice(&out).expect("valid JSON");
        assert_eq!(v["closed"], name != "open-path.toml", "{name}");
    }
    // Stirling without regenerator, η = ηC / (1 + (cv/R)·ηC/ln r) (textbook,
    // REFERENCES.md) with helium cv/R = 3/2, 650 K / 320 K, r = 1.8.
    let out = cycle(&root.join("bench-stirling.toml"), true)
        .success()
        .get_output()
        .stdout
        .clone();
    let v: serde_json::Value = serde_json::from_slice(&out).expect("valid JSON");
    let eta_c = 1.0 - 320.0 / 650.0;
    let want = eta_c / (1.0 + 1.5 * eta_c / 1.8f64.ln());
    let eta = v["efficiency"].as_f64().expect("efficiency");
    assert!(
        ((eta - want) / want).abs() < 1e-9,
        "η = {eta}, closed form {want}"
    );
}

#[test]
fn missing_file() {
    let dir = TempDir::new().expect("tempdir");
    let path = dir.path().join("absent.toml");
    let out = cycle(&path, false).code(2).get_output().clone();
    let stderr = String::from_utf8(out.stderr).expect("utf-8");
    assert_eq!(stderr.lines().count(), 1);
    assert!(
        stderr.contains("absent.toml") && stderr.contains("cannot read"),
        "{stderr}"
    );
}

const GAS: &str = "[gas]\nmoles = 1.0\ngamma = 1.4\n";
const START: &str = "[start]\npressure_pa = 1e5\ntemperature_k = 300.0\n";

fn with_steps(steps: &str) -> String {
    format!("{GAS}{START}{steps}")
}

#[test]
fn file_level_errors() {
    let cases: &[(&str, &str)] = &[
        ("[gas\nmoles = 1", "malformed TOML"),
        (&format!("{GAS}{START}"), "no [[step]]"),
        (
            &format!("{START}[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n"),
            "missing the [gas] table",
        ),
        (
            &format!("{GAS}[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n"),
            "missing the [start] table",
        ),
        (
            &format!("colour = 3\n{GAS}{START}"),
            "unknown top-level key `colour`",
        ),
        (
            "[gas]\nmoles = 1.0\ngamma = 1.4\ndof = 5\n[start]\npressure_pa = 1e5\ntemperature_k = 300\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n",
            "not both",
        ),
        (
            "[gas]\nmoles = 1.0\n[start]\npressure_pa = 1e5\ntemperature_k = 300\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n",
            "missing gamma or dof",
        ),
        (
            "[gas]\nmoles = 1.0\ngamma = 1.0\n[start]\npressure_pa = 1e5\ntemperature_k = 300\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n",
            "gamma must be finite and greater than 1",
        ),
        (
            "[gas]\nmoles = 1.0\ngamma = 0.8\n[start]\npressure_pa = 1e5\ntemperature_k = 300\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n",
            "gamma must be",
        ),
        (
            "[gas]\nmoles = 0.0\ngamma = 1.4\n[start]\npressure_pa = 1e5\ntemperature_k = 300\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n",
            "moles must be positive",
        ),
        (
            "[gas]\nmoles = -2\ngamma = 1.4\n[start]\npressure_pa = 1e5\ntemperature_k = 300\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n",
            "moles must be positive",
        ),
        (
            "[gas]\nmols = 1\ngamma = 1.4\n[start]\npressure_pa = 1e5\ntemperature_k = 300\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n",
            "unknown field `mols`",
        ),
        (
            &format!(
                "{GAS}[start]\npressure_pa = 1e5\nvolume_m3 = 0.02\ntemperature_k = 300\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n"
            ),
            "exactly two of pressure_pa, volume_m3, temperature_k are needed, found 3",
        ),
        (
            &format!(
                "{GAS}[start]\npressure_pa = 1e5\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n"
            ),
            "found 1",
        ),
        (
            &format!(
                "{GAS}[start]\npressure_pa = -1e5\ntemperature_k = 300\n[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n"
            ),
            "[start]: pressure must be positive",
        ),
    ];
    for (text, reason) in cases {
        let (line, _) = error_line(text);
        assert!(line.contains(reason), "expected {reason:?} in {line:?}");
    }
}

#[test]
fn too_many_steps() {
    let step = "[[step]]\nprocess = \"isothermal\"\nvolume_ratio = 1.01\n";
    let (line, _) = error_line(&with_steps(&step.repeat(65)));
    assert!(line.contains("too many steps: 65, at most 64"), "{line}");
    // 64 is allowed.
    let dir = TempDir::new().expect("tempdir");
    let path = write(&dir, "ok.toml", &with_steps(&step.repeat(64)));
    cycle(&path, true).success();
}

#[test]
fn step_errors_name_the_step() {
    let ok = "[[step]]\nprocess = \"isobaric\"\nvolume_ratio = 2\n";
    let cases: &[(&str, &str)] = &[
        (
            "[[step]]\nprocess = \"isochoric\"\nvolume_ratio = 2\n",
            "step 3 (isochoric): cannot change volume at constant volume",
        ),
        (
            "[[step]]\nprocess = \"isothermal\"\ntemperature_k = 900\n",
            "step 3 (isothermal): cannot change temperature at constant temperature",
        ),
        (
            "[[step]]\nprocess = \"isobaric\"\npressure_pa = 3e5\n",
            "step 3 (isobaric): cannot change pressure at constant pressure",
        ),
        (
            "[[step]]\nprocess = \"adiabatic\"\nto_start = true\n",
            "step 3 (adiabatic): cannot return to the start state: it is not on the same adiabat",
        ),
        (
            "[[step]]\nprocess = \"isothermal\"\nvolume_ratio = 2\npressure_pa = 1e5\n",
            "step 3 (isothermal): two or more end conditions",
        ),
        (
            "[[step]]\nprocess = \"isothermal\"\n",
            "step 3 (isothermal): no end condition",
        ),
        (
            "[[step]]\nprocess = \"adiabatic\"\nexponent = 1.3\nvolume_ratio = 2\n",
            "step 3 (adiabatic): `exponent` is only allowed on a polytropic step",
        ),
        (
            "[[step]]\nprocess = \"polytropic\"\nvolume_ratio = 2\n",
            "step 3 (polytropic): a polytropic step needs `exponent`",
        ),
        (
            "[[step]]\nprocess = \"isentropic\"\nvolume_ratio = 2\n",
            "step 3 (isentropic): unknown process `isentropic`",
        ),
        (
            "[[step]]\nprocess = \"isobaric\"\nvolum_ratio = 2\n",
            "step 3 (isobaric): unknown field `volum_ratio`",
        ),
        (
            "[[step]]\nvolume_ratio = 2\n",
            "step 3: missing field `process`",
        ),
        (
            "[[step]]\nprocess = \"isobaric\"\nvolume_ratio = -2\n",
            "step 3 (isobaric): the end value must be positive and finite",
        ),
        (
            "[[step]]\nprocess = \"polytropic\"\nexponent = nan\nvolume_ratio = 2\n",
            "step 3 (polytropic): the polytropic exponent must be finite",
        ),
    ];
    for (bad, reason) in cases {
        let (line, _) = error_line(&with_steps(&format!("{ok}{ok}{bad}")));
        assert!(line.contains(reason), "expected {reason:?} in {line:?}");
    }
}
