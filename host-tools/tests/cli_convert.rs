//! `heatbound convert` end to end.
//!
//! Check values: NIST ITS-90 Thermocouple Database (NIST Monograph 175) table
//! values and IEC 60751:2008 Pt100 table values, as quoted in
//! shared/REFERENCES.md. Cold-junction compensation is common practice.
use assert_cmd::Command;
use serde_json::Value;

fn convert(args: &[&str]) -> assert_cmd::assert::Assert {
    Command::cargo_bin("heatbound")
        .unwrap()
        .arg("convert")
        .args(args)
        .assert()
}

fn json(args: &[&str]) -> Value {
    let mut all = args.to_vec();
    all.push("--json");
    let out = convert(&all).success().get_output().stdout.clone();
    serde_json::from_slice(&out).unwrap()
}

fn num(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} not a number in {v}"))
}

/// Exit 2 with exactly one line on stderr; returns that line.
fn fails_one_line(args: &[&str]) -> String {
    let out = convert(args).code(2).get_output().clone();
    assert!(out.stdout.is_empty(), "stdout: {:?}", out.stdout);
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "stderr: {err}");
    assert!(err.starts_with("heatbound: error: "), "stderr: {err}");
    err
}

#[test]
fn json_keys_thermocouple() {
    let v = json(&["--sensor", "type-k", "--temperature-c", "100"]);
    let obj = v.as_object().unwrap();
    for key in [
        "sensor",
        "emf_mv",
        "cold_junction_c",
        "temperature_c",
        "temperature_k",
        "resistance_ohm",
    ] {
        assert!(obj.contains_key(key), "{key} missing in {v}");
    }
    assert_eq!(obj.len(), 6);
    assert!(v["resistance_ohm"].is_null());
    assert_eq!(v["sensor"], "type-k");
    // NIST ITS-90 table: type K 100 °C = 4.096 mV.
    assert!((num(&v, "emf_mv") - 4.096).abs() < 0.0005);
    assert!((num(&v, "temperature_k") - 373.15).abs() < 1e-9);
}

#[test]
fn json_keys_rtd() {
    let v = json(&["--sensor", "pt100", "--temperature-c", "200"]);
    assert!(v["emf_mv"].is_null() && v["cold_junction_c"].is_null());
    // IEC 60751:2008 table: Pt100 at 200 °C = 175.8560 Ω.
    assert!((num(&v, "resistance_ohm") - 175.8560).abs() < 0.00005);
}

#[test]
fn thermocouple_emf_to_temperature() {
    // NIST ITS-90 table: type J 27.393 mV = 500 °C.
    let v = json(&["--sensor", "type-j", "--emf-mv", "27.393"]);
    assert!((num(&v, "temperature_c") - 500.0).abs() < 0.02);
    assert!((num(&v, "temperature_k") - 773.15).abs() < 0.02);
    assert_eq!(num(&v, "emf_mv"), 27.393);
    // NIST ITS-90 table: type T −200 °C = −5.603 mV (negative numbers parse).
    let v = json(&["--sensor", "type-t", "--emf-mv", "-5.603"]);
    assert!((num(&v, "temperature_c") + 200.0).abs() < 0.05);
}

#[test]
fn rtd_resistance_to_temperature() {
    // IEC 60751:2008 table: Pt100 at −100 °C = 60.2558 Ω; Pt1000 = 10×.
    let v = json(&["--sensor", "pt100", "--resistance-ohm", "60.2558"]);
    assert!((num(&v, "temperature_c") + 100.0).abs() < 0.0002);
    let v = json(&["--sensor", "pt1000", "--resistance-ohm", "602.558"]);
    assert!((num(&v, "temperature_c") + 100.0).abs() < 0.0002);
}

#[test]
fn cold_junction_both_directions() {
    // Common practice, NIST ITS-90 table values: type K 25 °C = 1.000 mV,
    // 200 °C = 8.138 mV. A meter at 25 °C reads 7.138 mV for a 200 °C hot end.
    let v = json(&[
        "--sensor",
        "type-k",
        "--emf-mv",
        "7.138",
        "--cold-junction-c",
        "25",
    ]);
    assert!((num(&v, "temperature_c") - 200.0).abs() < 0.03);
    assert_eq!(num(&v, "cold_junction_c"), 25.0);
    let v = json(&[
        "--sensor",
        "type-k",
        "--temperature-c",
        "200",
        "--cold-junction-c",
        "25",
    ]);
    assert!((num(&v, "emf_mv") - 7.138).abs() < 0.001);
    // Full precision: the two directions agree exactly.
    let e = num(&v, "emf_mv").to_string();
    let back = json(&[
        "--sensor",
        "type-k",
        "--emf-mv",
        &e,
        "--cold-junction-c",
        "25",
    ]);
    assert!((num(&back, "temperature_c") - 200.0).abs() < 1e-9);
}

#[test]
fn text_output() {
    let out = convert(&["--sensor", "pt100", "--temperature-c", "100"])
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    assert!(text.contains("pt100"), "{text}");
    assert!(text.contains("138.50550 Ω"), "{text}");
    assert!(text.contains("373.1500 K"), "{text}");
}

#[test]
fn out_of_range_is_one_line() {
    let err = fails_one_line(&["--sensor", "type-k", "--emf-mv", "60.1"]);
    assert!(
        err.contains("type K EMF 60.1 mV is outside the ITS-90 range"),
        "{err}"
    );
    let err = fails_one_line(&["--sensor", "type-t", "--temperature-c", "500"]);
    assert!(err.contains("500 °C"), "{err}");
    let err = fails_one_line(&["--sensor", "pt100", "--resistance-ohm", "5"]);
    assert!(err.contains("Pt100 resistance 5 Ω"), "{err}");
    fails_one_line(&[
        "--sensor",
        "type-k",
        "--emf-mv",
        "54",
        "--cold-junction-c",
        "60",
    ]);
}

#[test]
fn unknown_sensor_is_one_line() {
    let err = fails_one_line(&["--sensor", "type-x", "--temperature-c", "20"]);
    assert!(err.contains("unknown sensor 'type-x'"), "{err}");
}

#[test]
fn non_finite_is_one_line() {
    for bad in ["nan", "inf", "-inf"] {
        let err = fails_one_line(&["--sensor", "type-k", "--temperature-c", bad]);
        assert!(err.contains("not a finite number"), "{err}");
    }
    fails_one_line(&["--sensor", "pt100", "--resistance-ohm", "NaN"]);
    fails_one_line(&[
        "--sensor",
        "type-j",
        "--emf-mv",
        "1",
        "--cold-junction-c",
        "inf",
    ]);
}

#[test]
fn wrong_flag_is_one_line() {
    let err = fails_one_line(&["--sensor", "pt100", "--emf-mv", "1.0"]);
    assert!(
        err.contains("--emf-mv applies only to thermocouples"),
        "{err}"
    );
    let err = fails_one_line(&["--sensor", "type-k", "--resistance-ohm", "100"]);
    assert!(
        err.contains("--resistance-ohm applies only to RTDs"),
        "{err}"
    );
    let err = fails_one_line(&[
        "--sensor",
        "pt1000",
        "--temperature-c",
        "20",
        "--cold-junction-c",
        "25",
    ]);
    assert!(
        err.contains("--cold-junction-c applies only to thermocouples"),
        "{err}"
    );
}

#[test]
fn exactly_one_input_is_a_usage_error() {
    // clap's own usage errors: exit 2 (several lines, with usage).
    convert(&["--sensor", "type-k"]).code(2);
    convert(&[
        "--sensor",
        "type-k",
        "--temperature-c",
        "1",
        "--emf-mv",
        "1",
    ])
    .code(2);
}
