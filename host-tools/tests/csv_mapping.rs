//! `analyze` with a `[csv]` table: other loggers' files of one run give the
//! figures of the same run in heatbound's own layout.
//!
//! The run is `examples/bench-run.csv` with `examples/rig.toml` (the shipped
//! example, canonical layout). This test writes it again as other loggers
//! would, each with the `[csv]` table that maps it, and checks that
//! `analyze --json` gives the same figures. The check is self-consistency
//! between layouts; no figure is taken from elsewhere.
//!
//! Every number is rewritten in exact decimal arithmetic (a change of unit
//! by a power of ten, `°C + 273.15`, `°C · 1.8 + 32`), so those files carry
//! the run without rounding and their figures may differ from the
//! canonical ones only by binary round-off. The rounded ones are the raw
//! signals: the type K millivolts, written to 0.1 µV and taken from the NIST
//! ITS-90 vectors in `tests/vectors/thermocouple_its90.csv` (NIST Monograph
//! 175 via PyPI thermocouple-its90, see tests/tools/gen_thermocouple_its90.py),
//! and the Pt1000 ohms, written to 1 mΩ from the Callendar–Van Dusen equation
//! with the IEC 60751:2008 coefficients. Their tolerance follows from those
//! digits (see `mv_tolerance_k` and `ohm_tolerance_k`).
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use serde_json::Value;
use tempfile::TempDir;

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("the workspace")
        .to_path_buf()
}

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").expect("the heatbound binary")
}

/// `analyze --json FILE --config RIG`, which must succeed.
fn analyze(csv: &Path, config: &Path) -> Value {
    let out = heatbound()
        .arg("analyze")
        .arg(csv)
        .arg("--config")
        .arg(config)
        .arg("--json")
        .output()
        .expect("run heatbound");
    assert!(
        out.status.success(),
        "analyze {}: {}",
        csv.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("valid JSON")
}

/// `analyze FILE --config RIG`, which must fail with one line on stderr.
fn analyze_error(csv: &Path, config: &Path) -> String {
    let out = heatbound()
        .arg("analyze")
        .arg(csv)
        .arg("--config")
        .arg(config)
        .output()
        .expect("run heatbound");
    assert_eq!(
        out.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.stdout.is_empty());
    let err = String::from_utf8(out.stderr).expect("UTF-8");
    assert_eq!(err.lines().count(), 1, "one line: {err:?}");
    err
}

// ---------------------------------------------------------------------------
// Exact decimals

/// A number as written: `units · 10^-scale`, exactly.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Dec {
    units: i128,
    scale: u32,
}

impl Dec {
    /// `None` for a cell that holds no number (empty, NaN).
    fn parse(text: &str) -> Option<Dec> {
        let text = text.trim();
        let (negative, digits) = match text.strip_prefix('-') {
            Some(rest) => (true, rest),
            None => (false, text),
        };
        let (whole, fraction) = digits.split_once('.').unwrap_or((digits, ""));
        if whole.is_empty() && fraction.is_empty() {
            return None;
        }
        let all = format!("{whole}{fraction}");
        if !all.bytes().all(|b| b.is_ascii_digit()) {
            return None;
        }
        let units: i128 = all.parse().ok()?;
        Some(Dec {
            units: if negative { -units } else { units },
            scale: fraction.len() as u32,
        })
    }

    fn at_scale(self, scale: u32) -> i128 {
        assert!(scale >= self.scale);
        self.units * 10i128.pow(scale - self.scale)
    }

    fn add(self, other: Dec) -> Dec {
        let scale = self.scale.max(other.scale);
        Dec {
            units: self.at_scale(scale) + other.at_scale(scale),
            scale,
        }
    }

    /// `self · 10^places`.
    fn shift(self, places: i32) -> Dec {
        if places >= 0 {
            let p = places as u32;
            if p <= self.scale {
                Dec {
                    units: self.units,
                    scale: self.scale - p,
                }
            } else {
                Dec {
                    units: self.units * 10i128.pow(p - self.scale),
                    scale: 0,
                }
            }
        } else {
            Dec {
                units: self.units,
                scale: self.scale + places.unsigned_abs(),
            }
        }
    }

    /// `self · 1.8 + 32`: °C to °F, exactly.
    fn fahrenheit(self) -> Dec {
        Dec {
            units: self.units * 18,
            scale: self.scale + 1,
        }
        .add(Dec {
            units: 32,
            scale: 0,
        })
    }

    fn value(self) -> f64 {
        self.units as f64 / 10f64.powi(self.scale as i32)
    }

    /// As text with `point` for the decimal mark.
    fn text(self, point: char) -> String {
        let sign = if self.units < 0 { "-" } else { "" };
        let digits = self.units.unsigned_abs().to_string();
        let scale = self.scale as usize;
        if scale == 0 {
            return format!("{sign}{digits}");
        }
        let digits = format!("{digits:0>width$}", width = scale + 1);
        let (whole, fraction) = digits.split_at(digits.len() - scale);
        format!("{sign}{whole}{point}{fraction}")
    }
}

/// 0 °C in kelvin, exactly (the definition of the Celsius scale, SI brochure).
const ZERO_C: Dec = Dec {
    units: 27315,
    scale: 2,
};

// ---------------------------------------------------------------------------
// The canonical run

/// `examples/bench-run.csv` as text cells, and its configuration's text.
struct Run {
    /// time_s, hot_c, cold_c, heat_in_w, work_w, heat_out_w, coolant_flow_kg_s.
    rows: Vec<[String; 7]>,
    csv: PathBuf,
    rig: String,
}

fn run() -> Run {
    let csv = repo().join("examples/bench-run.csv");
    let text = std::fs::read_to_string(&csv).expect("examples/bench-run.csv");
    let mut lines = text.lines();
    assert_eq!(
        lines.next(),
        Some("time_s,hot_c,cold_c,heat_in_w,work_w,heat_out_w,coolant_flow_kg_s"),
        "the example's header changed: adapt this test"
    );
    let rows = lines
        .map(|l| {
            let cells: Vec<String> = l.split(',').map(str::to_string).collect();
            cells.try_into().expect("7 cells a row")
        })
        .collect();
    let rig = std::fs::read_to_string(repo().join("examples/rig.toml")).expect("examples/rig.toml");
    Run { rows, csv, rig }
}

/// A cell rewritten by `f` when it holds a number; an invalid cell (empty,
/// NaN) becomes `invalid`.
fn cell(text: &str, invalid: &str, f: impl FnMut(Dec) -> String) -> String {
    Dec::parse(text).map_or_else(|| invalid.to_string(), f)
}

/// Writes `text` and a rig.toml of the example's settings plus `csv_table`.
fn files(dir: &TempDir, name: &str, text: &str, run: &Run, csv_table: &str) -> (PathBuf, PathBuf) {
    let csv = dir.path().join(name);
    std::fs::write(&csv, text).expect("write the logger file");
    let rig = dir.path().join(format!("{name}.rig.toml"));
    std::fs::write(&rig, format!("{}\n{csv_table}", run.rig)).expect("write rig.toml");
    (csv, rig)
}

// ---------------------------------------------------------------------------
// Raw signals

/// Type K EMF against a 0 °C junction, mV, at the NIST ITS-90 vector points
/// (every 0.5 °C).
struct TypeK {
    t0_c: f64,
    emf_mv: Vec<f64>,
}

impl TypeK {
    fn load() -> TypeK {
        let path = repo().join("tests/vectors/thermocouple_its90.csv");
        let text = std::fs::read_to_string(&path).expect("the ITS-90 vectors");
        let mut t0_c = None;
        let mut emf_mv = Vec::new();
        for line in text.lines().filter(|l| l.starts_with("K,")) {
            let f: Vec<f64> = line[2..].split(',').map(|x| x.parse().unwrap()).collect();
            let t = f[0];
            let t0 = *t0_c.get_or_insert(t);
            assert_eq!(t, t0 + 0.5 * emf_mv.len() as f64, "a 0.5 °C grid");
            emf_mv.push(f[1]);
        }
        TypeK {
            t0_c: t0_c.expect("type K vectors"),
            emf_mv,
        }
    }

    /// E(t), mV: cubic (four-point Lagrange) interpolation of the vectors.
    /// Its error is below h⁴/16 · max|E''''|/24 with h = 0.5 °C, under
    /// 1e-9 mV for type K (E'''' is of order 1e-8 mV/°C⁴ near 127 °C, the
    /// Gaussian term of the reference function, and smaller elsewhere):
    /// negligible beside the 5e-5 mV of the file's rounding.
    fn emf_mv(&self, t_c: f64) -> f64 {
        let x = (t_c - self.t0_c) / 0.5;
        let i = (x.floor() as usize).clamp(1, self.emf_mv.len() - 3);
        let u = x - i as f64;
        let p = |k: usize| self.emf_mv[i - 1 + k];
        // Nodes at u = -1, 0, 1, 2.
        -u * (u - 1.0) * (u - 2.0) / 6.0 * p(0) + (u + 1.0) * (u - 1.0) * (u - 2.0) / 2.0 * p(1)
            - (u + 1.0) * u * (u - 2.0) / 2.0 * p(2)
            + (u + 1.0) * u * (u - 1.0) / 6.0 * p(3)
    }

    /// The smallest Seebeck coefficient dE/dt over `lo..hi` °C, mV/°C, from
    /// the vectors' differences.
    fn min_seebeck(&self, lo: f64, hi: f64) -> f64 {
        let first = ((lo - self.t0_c) / 0.5).floor() as usize;
        let last = ((hi - self.t0_c) / 0.5).ceil() as usize;
        (first..last)
            .map(|i| (self.emf_mv[i + 1] - self.emf_mv[i]) / 0.5)
            .fold(f64::INFINITY, f64::min)
    }
}

/// Millivolts written with this many decimals (0.1 µV).
const MV_DECIMALS: i32 = 4;

/// The largest temperature error of a reading from the millivolt digits:
/// half a unit of the last digit over the smallest Seebeck coefficient of the
/// run's hot side.
fn mv_tolerance_k(type_k: &TypeK, lo_c: f64, hi_c: f64) -> f64 {
    0.5 * 10f64.powi(-MV_DECIMALS) / type_k.min_seebeck(lo_c, hi_c)
}

/// Pt1000 resistance above 0 °C, IEC 60751:2008: R = R0 (1 + A t + B t²).
fn pt1000_ohm(t_c: f64) -> f64 {
    const A: f64 = 3.9083e-3;
    const B: f64 = -5.775e-7;
    assert!(t_c >= 0.0);
    1000.0 * (1.0 + A * t_c + B * t_c * t_c)
}

/// Ohms written with this many decimals (1 mΩ).
const OHM_DECIMALS: i32 = 3;

/// Half a unit of the last ohm digit over the smallest dR/dt of the run's
/// cold side (IEC 60751: R0 (A + 2 B t) falls with t).
fn ohm_tolerance_k(hi_c: f64) -> f64 {
    0.5 * 10f64.powi(-OHM_DECIMALS) / (1000.0 * (3.9083e-3 + 2.0 * -5.775e-7 * hi_c))
}

// ---------------------------------------------------------------------------
// Comparing reports

/// How far a foreign file's report may be from the canonical one.
#[derive(Clone, Copy, Debug)]
struct Tolerance {
    /// Relative, on every figure: binary round-off, and the temperature
    /// error over the coldest reading it can touch.
    rel: f64,
    /// Absolute floor, for figures near 0 (a margin, a residual).
    abs: f64,
    /// Seconds between the foreign file's time axis and the canonical one.
    time_offset_s: f64,
    /// Absolute, on times (seconds): the time cells' round-off.
    time_s: f64,
}

fn close(a: f64, b: f64, rel: f64, abs: f64) -> bool {
    (a - b).abs() <= abs + rel * a.abs().max(b.abs())
}

/// Every figure of `foreign` against `canonical`: numbers within `tol`,
/// everything else equal. The columns' names and the lines are the file's
/// own, checked by the callers.
fn same_report(canonical: &Value, foreign: &Value, tol: Tolerance, what: &str) {
    fn walk(
        path: &str,
        a: &Value,
        b: &Value,
        tol: Tolerance,
        what: &str,
        worst: &mut (f64, String),
    ) {
        match (a, b) {
            (Value::Object(x), Value::Object(y)) => {
                let skip = ["unused_columns", "columns", "invalid_lines"];
                for (k, va) in x {
                    if path.is_empty() && skip.contains(&k.as_str()) {
                        continue;
                    }
                    let vb = y
                        .get(k)
                        .unwrap_or_else(|| panic!("{what}: {path}.{k} missing"));
                    walk(&format!("{path}.{k}"), va, vb, tol, what, worst);
                }
            }
            (Value::Array(x), Value::Array(y)) => {
                assert_eq!(x.len(), y.len(), "{what}: {path}: {a} vs {b}");
                for (i, (va, vb)) in x.iter().zip(y).enumerate() {
                    walk(&format!("{path}[{i}]"), va, vb, tol, what, worst);
                }
            }
            (Value::Number(x), Value::Number(y)) => {
                let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
                if path.ends_with(".t_s") {
                    assert!(
                        (y - tol.time_offset_s - x).abs() <= tol.time_s,
                        "{what}: {path}: {y} − {} vs {x}",
                        tol.time_offset_s
                    );
                } else if path == ".duration_s" {
                    assert!(
                        (x - y).abs() <= 2.0 * tol.time_s,
                        "{what}: {path}: {y} vs {x}"
                    );
                } else {
                    let d = (x - y).abs() / x.abs().max(y.abs()).max(f64::MIN_POSITIVE);
                    if d > worst.0 {
                        *worst = (d, path.to_string());
                    }
                    assert!(
                        close(x, y, tol.rel, tol.abs),
                        "{what}: {path}: {y} vs {x} (rel {d:.3e}, tolerance rel {:.1e} abs {:.1e})",
                        tol.rel,
                        tol.abs
                    );
                }
            }
            _ => assert_eq!(a, b, "{what}: {path}"),
        }
    }
    let mut worst = (0.0, String::new());
    walk("", canonical, foreign, tol, what, &mut worst);
    eprintln!(
        "{what}: largest relative difference {:.3e} ({}), tolerance {:.1e}",
        worst.0, worst.1, tol.rel
    );
}

/// The canonical lines of the invalid rows, moved by the lines a foreign
/// file has before its header.
fn shifted(lines: &Value, by: u64) -> Vec<u64> {
    lines
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l.as_u64().unwrap() + by)
        .collect()
}

fn lines(v: &Value) -> Vec<u64> {
    shifted(&v["invalid_lines"], 0)
}

fn unused(v: &Value) -> Vec<String> {
    v["unused_columns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["name"].as_str().unwrap().to_string())
        .collect()
}

/// Binary round-off of a file carried without rounding: each cell is
/// within half an ulp of its decimal, and the conversions add a few more;
/// sums over 1,800 samples and the figures built on them stay far below this.
const EXACT: Tolerance = Tolerance {
    rel: 1e-10,
    abs: 1e-9,
    time_offset_s: 0.0,
    time_s: 0.0,
};

// ---------------------------------------------------------------------------
// The three loggers

/// (a) semicolons, decimal commas, German names, time in ms, empty cells and
/// NaN written as `-` and `n/a`.
#[test]
fn semicolons_with_decimal_commas() {
    let run = run();
    let dir = tempfile::tempdir().unwrap();
    let canonical = analyze(&run.csv, &repo().join("examples/rig.toml"));
    let mut text =
        String::from("Zeit [ms];TC1 Kopf;PT100 Kuehler;P_Heizer;P_Welle;Q_Kuehl;Durchfluss\n");
    for (i, r) in run.rows.iter().enumerate() {
        let invalid = if i % 2 == 0 { "-" } else { "n/a" };
        let comma = |d: Dec| d.text(',');
        let row = [
            cell(&r[0], "", |d| d.shift(3).text(',')),
            cell(&r[1], invalid, comma),
            cell(&r[2], invalid, comma),
            cell(&r[3], invalid, comma),
            cell(&r[4], invalid, comma),
            cell(&r[5], invalid, comma),
            cell(&r[6], invalid, comma),
        ];
        text.push_str(&row.join(";"));
        text.push('\n');
    }
    let table = r#"
[csv]
delimiter = ";"
decimal = ","
time = { column = "Zeit [ms]", unit = "ms" }
hot = { column = "TC1 Kopf", unit = "degC" }
cold = { column = "PT100 Kuehler", unit = "degC" }
heat_in = { column = "P_Heizer", unit = "W" }
work = { column = "P_Welle", unit = "W" }
heat_out = { column = "Q_Kuehl", unit = "W" }
"#;
    let (csv, rig) = files(&dir, "semicolon.csv", &text, &run, table);
    let foreign = analyze(&csv, &rig);
    // Milliseconds over 1000 are the seconds the canonical file writes,
    // exactly: every figure is the canonical one.
    same_report(&canonical, &foreign, EXACT, "(a) semicolons");
    assert_eq!(
        lines(&foreign),
        lines(&canonical),
        "invalid rows: - and n/a as NaN and empty"
    );
    assert_eq!(foreign["invalid_samples"], 5);
    assert_eq!(unused(&foreign), ["Durchfluss"]);
    assert_eq!(foreign["columns"][1]["column"], "TC1 Kopf");

    // The text report says once which column is not used, and where each
    // channel came from.
    let out = heatbound()
        .arg("analyze")
        .arg(&csv)
        .arg("--config")
        .arg(&rig)
        .output()
        .unwrap();
    let report = String::from_utf8(out.stdout).unwrap();
    assert_eq!(report.matches("Durchfluss").count(), 1, "{report}");
    assert!(report.contains("no channel of [csv] maps it"), "{report}");
    assert!(report.contains("heat_in read from"), "{report}");
    assert!(
        report.contains("first at lines 814, 815, 816, 1002, 1103"),
        "{report}"
    );
}

/// The canonical time as ISO 8601 local time on 2024-06-11 from 08:00
/// (`offset` appended, e.g. `+02:00`, or nothing).
fn iso(t_s: Dec, offset: &str) -> String {
    let ms = t_s.shift(3);
    assert_eq!(ms.scale, 0, "times are whole milliseconds");
    let ms = ms.units;
    let s = 8 * 3600 + ms / 1000;
    format!(
        "2024-06-11T{:02}:{:02}:{:02}.{:03}{offset}",
        s / 3600,
        s / 60 % 60,
        s % 60,
        ms % 1000
    )
}

/// 2024-06-11T08:00:00+02:00 in Unix seconds: 19 885 days after 1970-01-01
/// (54 years with 13 leap days, plus 162 days into 2024) and 6 h.
const ISO_BASE_UNIX_S: f64 = 19_885.0 * 86_400.0 + 6.0 * 3600.0;

/// (b) a preamble of four lines, ISO 8601 timestamps with a zone offset;
/// then the same local times without an offset, read in `time_zone`.
#[test]
fn a_preamble_and_iso_timestamps() {
    let run = run();
    let dir = tempfile::tempdir().unwrap();
    let canonical = analyze(&run.csv, &repo().join("examples/rig.toml"));
    let write = |offset: &str| {
        let mut text = String::from(
            "Datalogger DL-2 export\nSerial 4711\nStarted 2024-06-11 08:00\n\n\
             timestamp,T_head_K,T_jacket_F,heater_W,shaft_W,coolant_W\n",
        );
        for r in &run.rows {
            let time = iso(Dec::parse(&r[0]).unwrap(), offset);
            let row = [
                time,
                cell(&r[1], "NaN", |d| d.add(ZERO_C).text('.')),
                cell(&r[2], "NaN", |d| d.fahrenheit().text('.')),
                cell(&r[3], "", |d| d.text('.')),
                cell(&r[4], "", |d| d.text('.')),
                cell(&r[5], "", |d| d.text('.')),
            ];
            text.push_str(&row.join(","));
            text.push('\n');
        }
        text
    };
    let columns = r#"
skip_lines = 4
hot = { column = "T_head_K", unit = "K" }
cold = { column = "T_jacket_F", unit = "degF" }
heat_in = { column = "heater_W", unit = "W" }
work = { column = "shaft_W", unit = "W" }
heat_out = { column = "coolant_W", unit = "W" }
"#;
    let (csv, rig) = files(
        &dir,
        "iso-offset.csv",
        &write("+02:00"),
        &run,
        &format!("[csv]\ntime = {{ column = \"timestamp\", unit = \"iso8601\" }}{columns}"),
    );
    let with_offset = analyze(&csv, &rig);
    // The kelvin and °F cells are exact; the times are Unix seconds, whose
    // f64 carries the millisecond to within 2.4e-7 s (an ulp near 1.7e9).
    let tol = Tolerance {
        time_offset_s: ISO_BASE_UNIX_S - 0.0,
        time_s: 1e-6,
        ..EXACT
    };
    same_report(&canonical, &with_offset, tol, "(b) ISO 8601 with offsets");
    assert_eq!(lines(&with_offset), shifted(&canonical["invalid_lines"], 4));

    // The same local times without an offset, in Europe/Berlin (CEST, UTC+2
    // in June): the very same instants.
    let (csv, rig) = files(
        &dir,
        "iso-local.csv",
        &write(""),
        &run,
        &format!(
            "[csv]\ntime = {{ column = \"timestamp\", unit = \"iso8601\" }}\ntime_zone = \"Europe/Berlin\"{columns}"
        ),
    );
    let mut local = analyze(&csv, &rig);
    assert_eq!(
        local["columns"][0]["unit"],
        "iso8601, local time of Europe/Berlin without an offset"
    );
    let mut with_offset = with_offset;
    for v in [&mut local, &mut with_offset] {
        v.as_object_mut().unwrap().remove("columns");
    }
    assert_eq!(
        local, with_offset,
        "local time of Europe/Berlin = the offsets"
    );

    // Without the zone, a local time cannot be placed: an error at its line.
    let (csv, rig) = files(
        &dir,
        "iso-nozone.csv",
        &write(""),
        &run,
        &format!("[csv]\ntime = {{ column = \"timestamp\", unit = \"iso8601\" }}{columns}"),
    );
    let err = analyze_error(&csv, &rig);
    assert!(
        err.contains("line 6, column timestamp: cannot read \"2024-06-11T08:00:00.496\" as a time: no zone offset"),
        "{err}"
    );
}

/// (c) tab-separated, powers in kW, the hot side as raw type K millivolts
/// with a cold-junction column.
#[test]
fn tabs_kilowatts_and_thermocouple_millivolts() {
    let run = run();
    let type_k = TypeK::load();
    let dir = tempfile::tempdir().unwrap();
    let canonical = analyze(&run.csv, &repo().join("examples/rig.toml"));
    let mut text =
        String::from("Time\tCH1 mV\tCJ degC\tCH3 degC\tP_in kW\tP_shaft kW\tP_cool kW\n");
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for (i, r) in run.rows.iter().enumerate() {
        // The logger's terminal block warms by half a kelvin halfway
        // through: both values on the vectors' grid, so exact.
        let cj_c = if i < run.rows.len() / 2 { 23.0 } else { 23.5 };
        let mv = cell(&r[1], "NaN", |d| {
            let t = d.value();
            (lo, hi) = (lo.min(t), hi.max(t));
            let e = type_k.emf_mv(t) - type_k.emf_mv(cj_c);
            format!("{e:.prec$}", prec = MV_DECIMALS as usize)
        });
        let kw = |d: Dec| d.shift(-3).text('.');
        let row = [
            r[0].clone(),
            mv,
            format!("{cj_c:.1}"),
            r[2].clone(),
            cell(&r[3], "", kw),
            cell(&r[4], "", kw),
            cell(&r[5], "", kw),
        ];
        text.push_str(&row.join("\t"));
        text.push('\n');
    }
    let table = r#"
[csv]
delimiter = "\t"
time = { column = "Time", unit = "s" }
hot = { column = "CH1 mV", unit = "mV", sensor = "type-k", cold_junction = { column = "CJ degC", unit = "degC" } }
cold = { column = "CH3 degC", unit = "degC" }
heat_in = { column = "P_in kW", unit = "kW" }
work = { column = "P_shaft kW", unit = "kW" }
heat_out = { column = "P_cool kW", unit = "kW" }
"#;
    let (csv, rig) = files(&dir, "tabs.tsv", &text, &run, table);
    let foreign = analyze(&csv, &rig);
    // Each hot reading is off by at most δT (the millivolts' last digit);
    // every figure is a smooth function of readings no colder than 303 K
    // (30 °C, the run's start), so none moves by more than a few δT/303 K
    // relative: 10 δT/303 K allows for the heat-weighted means' (T_h/T)²
    // and the Carnot figures' two temperatures.
    let dt = mv_tolerance_k(&type_k, lo, hi);
    assert!(dt < 2e-3, "{dt} K");
    let tol = Tolerance {
        rel: 10.0 * dt / (lo + 273.15),
        abs: 1e-9,
        ..EXACT
    };
    same_report(&canonical, &foreign, tol, "(c) tabs, kW, type K mV");
    assert_eq!(lines(&foreign), lines(&canonical));
    assert_eq!(
        unused(&foreign),
        Vec::<String>::new(),
        "the CJ column is read"
    );
}

/// (d) spreadsheet serial dates, °F, mW and a Pt1000 in ohms, in columns
/// aligned with blanks.
#[test]
fn excel_days_fahrenheit_milliwatts_and_pt1000_in_aligned_columns() {
    let run = run();
    let dir = tempfile::tempdir().unwrap();
    let canonical = analyze(&run.csv, &repo().join("examples/rig.toml"));
    // 45 454.25 is 2024-06-11T06:00Z (25 569 is 1970-01-01, + 19 885 days).
    let base_days = 45_454.25;
    let mut text = format!(
        "{:>18} {:>10} {:>12} {:>12} {:>12} {:>10}\n",
        "Date", "\"Head F\"", "Jacket_Ohm", "Heater", "Shaft_mW", "Cooler"
    );
    let mut hi = f64::NEG_INFINITY;
    for r in &run.rows {
        let days = base_days + Dec::parse(&r[0]).unwrap().value() / 86_400.0;
        let ohm = cell(&r[2], "NaN", |d| {
            hi = hi.max(d.value());
            format!(
                "{:.prec$}",
                pt1000_ohm(d.value()),
                prec = OHM_DECIMALS as usize
            )
        });
        text.push_str(&format!(
            "  {days:>18.10} {:>10} {ohm:>12} {:>12} {:>12} {:>10}\n",
            cell(&r[1], "NaN", |d| d.fahrenheit().text('.')),
            cell(&r[3], "n/a", |d| d.text('.')),
            cell(&r[4], "n/a", |d| d.shift(3).text('.')),
            cell(&r[5], "n/a", |d| d.text('.')),
        ));
    }
    let table = r#"
[csv]
delimiter = " "
time = { column = "Date", unit = "excel_days" }
hot = { column = "Head F", unit = "degF" }
cold = { column = "Jacket_Ohm", unit = "ohm", sensor = "pt1000" }
heat_in = { column = "Heater", unit = "W" }
work = { column = "Shaft_mW", unit = "mW" }
heat_out = { column = "Cooler", unit = "W" }
"#;
    let (csv, rig) = files(&dir, "aligned.txt", &text, &run, table);
    let foreign = analyze(&csv, &rig);
    // Days written to 1e-10 (8.64 µs): every time lands on the canonical
    // millisecond. The cold side is off by at most the ohms' half digit over
    // dR/dt; the rest is exact.
    let dt = ohm_tolerance_k(hi);
    let tol = Tolerance {
        rel: 10.0 * dt / 290.0,
        abs: 1e-9,
        time_offset_s: ISO_BASE_UNIX_S,
        time_s: 2e-5,
    };
    same_report(&canonical, &foreign, tol, "(d) Excel days, °F, Pt1000, mW");
    assert_eq!(lines(&foreign), lines(&canonical));
}

// ---------------------------------------------------------------------------
// Errors

fn small_table(extra: &str) -> String {
    format!(
        "[csv]\ndelimiter = \";\"\ndecimal = \",\"\n{extra}\ntime = {{ column = \"Zeit\", unit = \"s\" }}\n\
         hot = {{ column = \"TC1\", unit = \"degC\" }}\ncold = {{ column = \"TC2\", unit = \"degC\" }}\n\
         heat_in = {{ column = \"P\", unit = \"kW\" }}\nwork = {{ column = \"W\", unit = \"W\" }}\n"
    )
}

fn small(dir: &TempDir, name: &str, csv: &str, table: &str) -> (PathBuf, PathBuf) {
    let path = dir.path().join(name);
    std::fs::write(&path, csv).unwrap();
    let rig = dir.path().join(format!("{name}.toml"));
    std::fs::write(&rig, table).unwrap();
    (path, rig)
}

#[test]
fn a_missing_column_is_named_with_the_header() {
    let dir = tempfile::tempdir().unwrap();
    let (csv, rig) = small(
        &dir,
        "missing.csv",
        "Zeit;TC1;TC2;Leistung;W\n0;500;25;0,4;40\n",
        &small_table(""),
    );
    let err = analyze_error(&csv, &rig);
    assert!(
        err.contains(
            "line 1, column \"P\" (csv.heat_in.column): missing required column \
             (the header has: Zeit, TC1, TC2, Leistung, W)"
        ),
        "{err}"
    );

    // A header of one column holding semicolons: the delimiter is wrong.
    let (csv, rig) = small(
        &dir,
        "delim.csv",
        "Zeit;TC1;TC2;P;W\n0;500;25;0,4;40\n",
        "[csv]\ntime = { column = \"Zeit\", unit = \"s\" }\n",
    );
    let err = analyze_error(&csv, &rig);
    assert!(err.contains("is the delimiter \";\"?"), "{err}");
}

#[test]
fn time_going_backwards_is_an_error_at_its_line() {
    let dir = tempfile::tempdir().unwrap();
    let (csv, rig) = small(
        &dir,
        "back.csv",
        "Logger\nZeit;TC1;TC2;P;W\n0;500;25;0,4;40\n1;500;25;0,4;40\n0,5;500;25;0,4;40\n",
        &small_table("skip_lines = 1"),
    );
    let err = analyze_error(&csv, &rig);
    assert!(
        err.contains("line 5, column Zeit: time 0.5 s does not increase (previous row: 1 s)"),
        "{err}"
    );
}

#[test]
fn invalid_cells_are_counted_with_their_lines() {
    let dir = tempfile::tempdir().unwrap();
    let mut text = String::from("Zeit;TC1;TC2;P;W\n");
    for i in 0..20 {
        let hot = match i {
            3 => "",
            5 => "NaN",
            7 => "-",
            9 => "n/a",
            11 => "N/A",
            13 => "nan",
            _ => "500,5",
        };
        text.push_str(&format!("{i};{hot};25;0,4;40\n"));
    }
    let (csv, rig) = small(&dir, "invalid.csv", &text, &small_table(""));
    let v = analyze(&csv, &rig);
    assert_eq!(v["samples"], 20);
    assert_eq!(v["invalid_samples"], 6);
    // The first five, by line (the header is line 1).
    assert_eq!(lines(&v), [5, 7, 9, 11, 13]);
    // A word that is no number and no invalid mark is an error.
    let (csv, rig) = small(
        &dir,
        "bad.csv",
        "Zeit;TC1;TC2;P;W\n0;warm;25;0,4;40\n",
        &small_table(""),
    );
    let err = analyze_error(&csv, &rig);
    assert!(
        err.contains("line 2, column TC1: cannot parse \"warm\" as a number"),
        "{err}"
    );
}

#[test]
fn bad_csv_tables_are_configuration_errors_naming_the_key() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("x.csv");
    std::fs::write(&csv, "Zeit;TC1;TC2;P;W\n0;500;25;0,4;40\n").unwrap();
    for (table, expected) in [
        (
            "[csv]\nhot = { column = \"TC1\", unit = \"mV\" }\n",
            "line 2, column 7: `csv.hot.sensor`: missing: unit \"mV\" is a raw signal",
        ),
        (
            "[csv]\nhot = { column = \"TC1\", unit = \"mV\", sensor = \"type-k\" }\n",
            "`csv.hot`: a thermocouple read in mV needs its cold-junction temperature",
        ),
        (
            "[csv]\ncold = { column = \"TC2\", unit = \"ohm\", sensor = \"type-t\" }\n",
            "`csv.cold.sensor`: type-t does not give \"ohm\"",
        ),
        (
            "[csv]\nheat_in = { column = \"P\", unit = \"PS\" }\n",
            "`csv.heat_in.unit`: \"PS\" is not one of W, kW or mW",
        ),
        (
            "[csv]\ndecimal = \",\"\n",
            "`csv.decimal`: a decimal comma needs another delimiter",
        ),
        (
            "[csv]\nhot = { colunm = \"TC1\" }\n",
            "unknown field `colunm`",
        ),
    ] {
        let rig = dir.path().join("rig.toml");
        std::fs::write(&rig, table).unwrap();
        let err = analyze_error(&csv, &rig);
        assert!(err.contains("rig.toml"), "{err}");
        assert!(err.contains(expected), "{table}: {err}");
    }
}

/// A rig.toml with a `[csv]` table still serves the other commands, which
/// do not read it.
#[test]
fn other_commands_accept_a_csv_table() {
    let dir = tempfile::tempdir().unwrap();
    let rig = dir.path().join("rig.toml");
    std::fs::write(&rig, format!("mode = \"engine\"\n{}", small_table(""))).unwrap();
    let capture = dir.path().join("sim.bin");
    let out = heatbound()
        .args(["simulate", "--duration-s", "2", "--config"])
        .arg(&rig)
        .arg("--out")
        .arg(&capture)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// docs/rig-config.md documents every key of the `[csv]` table, and its
/// examples are accepted (the page's other checks are doc_rig_config.rs).
#[test]
fn every_key_of_the_csv_table_is_documented() {
    use heatbound_host::csv_layout::{ColumnFile, CsvFile, JunctionFile};
    let doc = std::fs::read_to_string(repo().join("docs/rig-config.md")).unwrap();
    let column = ColumnFile {
        column: "c".into(),
        unit: Some("mV".into()),
        sensor: Some("type-k".into()),
        cold_junction: Some(JunctionFile {
            column: "cj".into(),
            unit: Some("degC".into()),
        }),
        cold_junction_c: Some(0.0),
    };
    let every = CsvFile {
        delimiter: Some(";".into()),
        decimal: Some(",".into()),
        skip_lines: Some(1),
        time_zone: Some("UTC".into()),
        time: Some(column.clone()),
        hot: Some(column.clone()),
        hot2: Some(column.clone()),
        cold: Some(column.clone()),
        heat_in: Some(column.clone()),
        work: Some(column.clone()),
        heat_out: Some(column.clone()),
    };
    let toml::Value::Table(table) = toml::Value::try_from(&every).unwrap() else {
        panic!("a table");
    };
    assert_eq!(table.len(), 11);
    for (key, value) in &table {
        assert!(
            doc.contains(&format!("| `csv.{key}` |")),
            "csv.{key} undocumented"
        );
        if let toml::Value::Table(inner) = value {
            for k in inner.keys() {
                assert!(
                    doc.contains(&format!("| `{k}` |")),
                    "csv.{key}.{k} undocumented"
                );
            }
        }
    }
    let section = &doc[doc.find("## `[csv]`").unwrap()..];
    assert!(section.matches("```toml").count() >= 2, "examples of [csv]");
}

/// Bytes altered at random (a fixed seed) through every kind of layout:
/// no panic, and whatever is accepted renders as text and as JSON, which
/// refuses NaN and infinity. The `csv_replay` fuzz target does the same
/// without end.
#[test]
fn altered_files_never_panic_under_any_layout() {
    use heatbound_host::replay::replay_with;
    use heatbound_host::rigfile::rig_from_text;
    let layouts = [
        (
            "[csv]\ndelimiter = \";\"\ndecimal = \",\"\nskip_lines = 1\ntime_zone = \"Europe/Berlin\"\n\
             time = { column = \"t\", unit = \"iso8601\" }\nhot = { column = \"a\", unit = \"mV\", sensor = \"k\", cold_junction = { column = \"cj\", unit = \"degC\" } }\n\
             cold = { column = \"b\", unit = \"ohm\", sensor = \"pt100\" }\nheat_in = { column = \"p\", unit = \"kW\" }\nwork = { column = \"w\", unit = \"mW\" }\n",
            "pre\nt;a;cj;b;p;w\n2024-03-31 01:59:59,5;20,5;23,0;109,7;0,4;40000\n2024-03-31 03:00:00;20,6;23,5;109,8;0,41;-\n",
        ),
        (
            "[csv]\ndelimiter = \"\\t\"\ntime = { column = \"t\", unit = \"excel_days\" }\nhot = { column = \"a\", unit = \"degF\" }\n\
             cold = { column = \"b\", unit = \"K\" }\nheat_in = { column = \"p\", unit = \"W\" }\nwork = { column = \"w\", unit = \"W\" }\nheat_out = { column = \"q\", unit = \"W\" }\n",
            "t\ta\tb\tp\tw\tq\n45454.25\t932\t300\t400\t40\t300\n45454.2500116\t933\t300.1\tn/a\t40\t301\n",
        ),
        (
            "[csv]\ndelimiter = \" \"\ntime = { column = \"t\", unit = \"ms\" }\nhot = { column = \"a\", unit = \"mV\", sensor = \"type-t\", cold_junction_c = 0 }\n\
             cold = { column = \"b\", unit = \"ohm\", sensor = \"pt1000\" }\nheat_in = { column = \"p\", unit = \"W\" }\nwork = { column = \"w\", unit = \"W\" }\n",
            "  t   a  \"b\"  p  w\n 0  9.288  1097.35  400 40\n1000 9.3 1097.4 400 40 \n",
        ),
    ];
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let mut next = move |n: usize| {
        // Knuth's MMIX LCG (The Art of Computer Programming, vol. 2).
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 33) as usize % n.max(1)
    };
    for (table, sample) in layouts {
        let rig = rig_from_text(table, "rig.toml").unwrap_or_else(|e| panic!("{e:?}"));
        let layout = rig.csv.as_ref().expect("a [csv] table");
        let clean = replay_with(sample.as_bytes(), &rig.config, Some(layout), None)
            .unwrap_or_else(|e| panic!("{sample}: {e}"));
        assert_eq!(clean.samples, 2);
        for _ in 0..300 {
            let mut bytes = sample.as_bytes().to_vec();
            for _ in 0..1 + next(4) {
                let at = next(bytes.len() + 1);
                match next(4) {
                    0 => bytes.insert(at, b"\"\n;,\t .-0:9nT+\xfc\x00"[next(16)]),
                    1 if at < bytes.len() => {
                        bytes.remove(at);
                    }
                    2 if at < bytes.len() => bytes[at] = next(256) as u8,
                    _ => bytes.truncate(at),
                }
            }
            if let Ok(report) = replay_with(bytes.as_slice(), &rig.config, Some(layout), None) {
                let _ = report.text("altered.csv");
                assert!(
                    report.json_text().is_ok(),
                    "{}",
                    String::from_utf8_lossy(&bytes)
                );
            }
        }
    }
}

#[test]
fn a_preamble_longer_than_the_file_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let (csv, rig) = small(
        &dir,
        "short.csv",
        "Logger 7\nSerial 1\n",
        &small_table("skip_lines = 5"),
    );
    let err = analyze_error(&csv, &rig);
    assert!(
        err.contains(
            "line 3: the file ends within the 5 lines before the header that csv.skip_lines names"
        ),
        "{err}"
    );
}
