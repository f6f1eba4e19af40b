//! GUM uncertainties of the monitor's figures against independent results.
//!
//! Sources:
//! - the law of propagation, GUM JCGM 100:2008 §5.1.2: u_c² = Σ(∂f/∂x_i)² u²(x_i)
//!   for the five systematic errors (hot and cold offsets, three power scales);
//! - (a) hand derivations in this file for constant temperatures;
//! - (b) `tests/vectors/gum_cases.json`, written by `tests/tools/gum_vectors.py`
//!   with PyPI `uncertainties` 3.2.3 (first-order propagation with exact
//!   derivatives) for runs with varying temperatures and powers. First order is
//!   exact in both, so they must agree to rounding: 1e-9 relative.
mod common;

use common::{config, sample};
use heatbound::config::{Mode, RigFile, UncertaintyFile};
use heatbound::monitor::{Metrics, Monitor};
use heatbound_verification::rel_diff;
use serde_json::Value;

/// Uncertainties used by the hand derivations (chosen, not defaults).
const U_HOT_K: f64 = 1.5;
const U_COLD_K: f64 = 0.3;
const U_IN: f64 = 0.01;
const U_W: f64 = 0.008;
const U_OUT: f64 = 0.02;

fn rig(mode: Mode, ambient_k: Option<f64>, window: u32) -> heatbound::config::RigConfig {
    config(RigFile {
        mode: Some(mode),
        ambient_k,
        window_samples: Some(window),
        uncertainty: Some(UncertaintyFile {
            hot_k: Some(U_HOT_K),
            cold_k: Some(U_COLD_K),
            heat_in_rel: Some(U_IN),
            work_rel: Some(U_W),
            heat_out_rel: Some(U_OUT),
            hot2_k: None,
        }),
        ..Default::default()
    })
}

/// 61 samples, 1 s apart, of a steady engine; returns the totals.
fn steady_engine(
    t_hot_k: f64,
    t_cold_k: f64,
    q_in: f64,
    w: f64,
    q_out: Option<f64>,
    ambient_k: Option<f64>,
) -> Metrics<f64> {
    let mut m: Monitor<64, f64> = Monitor::new(&rig(Mode::Engine, ambient_k, 60)).unwrap();
    for i in 0..61u32 {
        m.push(&sample::<f64>(i * 1000, t_hot_k, t_cold_k, q_in, w, q_out));
    }
    m.totals_metrics()
}

fn close(what: &str, got: Option<f64>, want: f64, tol: f64) {
    let got = got.unwrap_or_else(|| panic!("{what}: not available"));
    let rel = rel_diff(got, want);
    assert!(
        rel <= tol,
        "{what}: got {got:e}, want {want:e}, relative difference {rel:e} > {tol:e}"
    );
}

#[test]
fn engine_heat_out_inferred_constant_temperatures_by_hand() {
    let (th, tc, qi, w) = (600.0, 300.0, 1000.0, 150.0);
    let m = steady_engine(th, tc, qi, w, None, None);
    let eta = w / qi;
    // Hand derivation in this file: η = W/Q scales with the work and inversely
    // with the heat-in scale error, so u(η)/η = √(u_w² + u_q²).
    let u_eta = eta * (U_W * U_W + U_IN * U_IN).sqrt();
    // Hand derivation: η_C = 1 − Tc/Th, ∂/∂Tc = −1/Th, ∂/∂Th = Tc/Th².
    let u_carnot = ((U_COLD_K / th).powi(2) + (tc * U_HOT_K / (th * th)).powi(2)).sqrt();
    // Hand derivation: with constant temperatures and heat out inferred, the
    // mean T_c does not move with the power scales (Q_out and ∫q_out/T_cold
    // scale together), so scale errors enter only η and temperature errors
    // only η_C: the partials of the margin separate and add in quadrature.
    let u_margin = (u_eta * u_eta + u_carnot * u_carnot).sqrt();
    // Hand derivation: σ̇ = (q_in − w)/Tc − q_in/Th; partials ∂/∂Th = q_in/Th²,
    // ∂/∂Tc = −(q_in − w)/Tc², ∂/∂s_in = q_in/Tc − q_in/Th, ∂/∂s_w = −w/Tc.
    let u_sigma = ((qi / (th * th) * U_HOT_K).powi(2)
        + ((qi - w) / (tc * tc) * U_COLD_K).powi(2)
        + ((qi / tc - qi / th) * U_IN).powi(2)
        + (w / tc * U_W).powi(2))
    .sqrt();
    close("u(η)", m.u_efficiency, u_eta, 1e-12);
    close("u(η_C)", m.u_carnot_efficiency, u_carnot, 1e-12);
    close("u(margin)", m.u_carnot_margin, u_margin, 1e-12);
    close("u(σ̇)", m.u_entropy_rate_w_per_k, u_sigma, 1e-12);
    // u(S_gen) is u(σ̇) times the 60 s integrated.
    close(
        "u(S_gen)",
        m.u_entropy_generated_j_per_k,
        u_sigma * 60.0,
        1e-12,
    );
    assert_eq!(
        m.u_balance_residual_j, None,
        "no balance residual with heat out inferred"
    );
}

#[test]
fn engine_heat_out_measured_constant_temperatures_by_hand() {
    let (th, tc, qi, w, qo, t0) = (600.0, 300.0, 1000.0, 150.0, 800.0, 293.15);
    let m = steady_engine(th, tc, qi, w, Some(qo), Some(t0));
    let u_eta = w / qi * (U_W * U_W + U_IN * U_IN).sqrt();
    let u_carnot = ((U_COLD_K / th).powi(2) + (tc * U_HOT_K / (th * th)).powi(2)).sqrt();
    // Hand derivation: measured T_c = Q_out/∫q_out/T_cold depends on the cold
    // offset only, so the margin's partials again separate.
    let u_margin = (u_eta * u_eta + u_carnot * u_carnot).sqrt();
    // Hand derivation: σ̇ = q_out/Tc + (q_in − w − q_out)/T0 − q_in/Th with a
    // configured (exact) T0.
    let u_sigma = ((qi / (th * th) * U_HOT_K).powi(2)
        + (qo / (tc * tc) * U_COLD_K).powi(2)
        + ((qi / t0 - qi / th) * U_IN).powi(2)
        + (w / t0 * U_W).powi(2)
        + ((qo / tc - qo / t0) * U_OUT).powi(2))
    .sqrt();
    // Hand derivation: Q_loss = Q_in − W − Q_out, per second.
    let u_loss = ((qi * U_IN).powi(2) + (w * U_W).powi(2) + (qo * U_OUT).powi(2)).sqrt() * 60.0;
    close("u(η)", m.u_efficiency, u_eta, 1e-12);
    close("u(η_C)", m.u_carnot_efficiency, u_carnot, 1e-12);
    close("u(margin)", m.u_carnot_margin, u_margin, 1e-12);
    close("u(σ̇)", m.u_entropy_rate_w_per_k, u_sigma, 1e-12);
    close("u(Q_loss)", m.u_balance_residual_j, u_loss, 1e-12);
}

#[test]
fn engine_heat_out_measured_default_ambient_propagates_through_t0() {
    // T0 defaults to the cold-side mean, itself a measured figure: with
    // Q_loss ≠ 0 the cold offset moves S_gen also through Q_loss/T0.
    let (th, tc, qi, w, qo) = (600.0, 300.0, 1000.0, 150.0, 800.0);
    let m = steady_engine(th, tc, qi, w, Some(qo), None);
    // Hand derivation: T0 = Tc, so σ̇ = q_out/Tc + (q_in − w − q_out)/Tc − q_in/Th
    // = (q_in − w)/Tc − q_in/Th; the heat-out scale cancels, and
    // ∂/∂Tc = −(q_in − w)/Tc², ∂/∂s_in = q_in/Tc − q_in/Th, ∂/∂s_w = −w/Tc.
    let u_sigma = ((qi / (th * th) * U_HOT_K).powi(2)
        + ((qi - w) / (tc * tc) * U_COLD_K).powi(2)
        + ((qi / tc - qi / th) * U_IN).powi(2)
        + (w / tc * U_W).powi(2))
    .sqrt();
    close("u(σ̇)", m.u_entropy_rate_w_per_k, u_sigma, 1e-12);
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn expected(case: &Value, key: &str) -> (f64, f64) {
    let e = &case["expected"][key];
    (num(&e["value"]), num(&e["u"]))
}

/// The case's mode, and a monitor with its samples pushed (the window
/// holds them all, so window and totals are the whole run).
fn replayed(case: &Value) -> (Mode, Box<Monitor<256, f64>>) {
    let name = case["name"].as_str().unwrap();
    let mode = match case["mode"].as_str().unwrap() {
        "engine" => Mode::Engine,
        "heat_pump" => Mode::HeatPump,
        "cooler" => Mode::Cooler,
        other => panic!("{name}: unknown mode {other}"),
    };
    let u = &case["uncertainty"];
    let samples = case["samples"].as_array().unwrap();
    let cfg = config(RigFile {
        mode: Some(mode),
        ambient_k: case["ambient_k"].as_f64(),
        window_samples: Some(samples.len() as u32),
        uncertainty: Some(UncertaintyFile {
            hot_k: Some(num(&u["hot_k"])),
            cold_k: Some(num(&u["cold_k"])),
            heat_in_rel: Some(num(&u["heat_in_rel"])),
            work_rel: Some(num(&u["work_rel"])),
            heat_out_rel: Some(num(&u["heat_out_rel"])),
            hot2_k: None,
        }),
        ..Default::default()
    });
    let mut m: Monitor<256, f64> = Monitor::new(&cfg).unwrap();
    for s in samples {
        m.push(&sample::<f64>(
            s["t_ms"].as_u64().unwrap() as u32,
            num(&s["t_hot_k"]),
            num(&s["t_cold_k"]),
            num(&s["heat_in_w"]),
            num(&s["work_w"]),
            s["heat_out_w"].as_f64(),
        ));
    }
    assert_eq!(m.invalid_samples(), 0, "{name}");
    (mode, Box::new(m))
}

#[test]
fn varying_runs_match_pypi_uncertainties_vectors() {
    let text = include_str!("../vectors/gum_cases.json");
    let doc: Value = serde_json::from_str(text).unwrap();
    let cases = doc["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 7, "every generated case is checked");
    let mut worst = 0.0_f64;
    for case in cases {
        let name = case["name"].as_str().unwrap();
        let (mode, m) = replayed(case);
        // The window holds every sample, so it must equal the totals.
        for (which, got) in [
            ("totals", m.totals_metrics()),
            ("window", m.window_metrics()),
        ] {
            let mut check = |key: &str, value: Option<f64>, u: Option<f64>| {
                let (want, want_u) = expected(case, key);
                let tol = 1e-9;
                let what = format!("{name} {which} {key}");
                close(&what, value, want, tol);
                close(&format!("u({what})"), u, want_u, tol);
                worst = worst.max(rel_diff(u.unwrap(), want_u));
            };
            if mode == Mode::Engine {
                check("efficiency", got.efficiency, got.u_efficiency);
                check(
                    "carnot_efficiency",
                    got.carnot_efficiency,
                    got.u_carnot_efficiency,
                );
            } else {
                check("cop", got.cop, got.u_cop);
                check("carnot_cop", got.carnot_cop, got.u_carnot_cop);
            }
            check("carnot_margin", got.carnot_margin, got.u_carnot_margin);
            check(
                "entropy_generated_j_per_k",
                got.entropy_generated_j_per_k,
                got.u_entropy_generated_j_per_k,
            );
            check(
                "entropy_rate_w_per_k",
                got.entropy_rate_w_per_k,
                got.u_entropy_rate_w_per_k,
            );
            if case["measured"].as_bool().unwrap() {
                check(
                    "balance_residual_j",
                    got.balance_residual_j,
                    got.u_balance_residual_j,
                );
            } else {
                assert_eq!(got.balance_residual_j, None, "{name}");
            }
            close(
                &format!("{name} {which} hot mean"),
                got.hot_mean_k,
                expected(case, "hot_mean_k").0,
                1e-12,
            );
            close(
                &format!("{name} {which} cold mean"),
                got.cold_mean_k,
                expected(case, "cold_mean_k").0,
                1e-12,
            );
        }
    }
    // Measured: worst relative disagreement of any u_* over every case is
    // below 1e-13 (f64 rounding of two different summation orders).
    println!("worst relative difference of any u_* from the vectors: {worst:e}");
    assert!(worst < 1e-12, "worst relative difference {worst:e}");
}

#[test]
fn correlations_matter_with_varying_temperatures() {
    // From the PyPI `uncertainties` vectors: with a varying cold side and heat
    // out inferred, the heat-in and work scale errors move T_c too, so the
    // margin's uncertainty is not the quadrature sum of u(η) and u(η_C). A
    // monitor that squared before combining would fail the vector test above;
    // this pins that the vectors exercise that difference.
    let doc: Value = serde_json::from_str(include_str!("../vectors/gum_cases.json")).unwrap();
    let case = &doc["cases"][0];
    assert_eq!(case["name"], "engine_inferred");
    let (_, u_eta) = expected(case, "efficiency");
    let (_, u_c) = expected(case, "carnot_efficiency");
    let (_, u_margin) = expected(case, "carnot_margin");
    let quadrature = (u_eta * u_eta + u_c * u_c).sqrt();
    assert!(
        rel_diff(u_margin, quadrature) > 1e-6,
        "u(margin) {u_margin:e} vs quadrature {quadrature:e}"
    );
}

#[test]
fn budget_matches_pypi_uncertainties_sensitivities() {
    // Source: the `sensitivity` of every figure in tests/vectors/gum_cases.json,
    // PyPI `uncertainties` 3.2.3's own derivatives ∂f/∂x_i (GUM §5.1.3,
    // c_i), written by tests/tools/gum_vectors.py. Each coefficient the
    // monitor's budget gives must match, and the squares of the
    // contributions c_i·u(x_i) must add up to the figure's u_c² (GUM eq. 10),
    // so that the shares a report prints sum to 1.
    let doc: Value = serde_json::from_str(include_str!("../vectors/gum_cases.json")).unwrap();
    let names = ["hot", "cold", "heat_in", "work", "heat_out"];
    let mut checked = 0;
    for case in doc["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let (mode, m) = replayed(case);
        let budget = m.totals_integrals().budget(m.settings());
        let totals = m.totals_metrics();
        let (perf, bound) = if mode == Mode::Engine {
            ("efficiency", "carnot_efficiency")
        } else {
            ("cop", "carnot_cop")
        };
        for (key, c, u_c) in [
            (
                perf,
                budget.performance,
                totals.u_efficiency.or(totals.u_cop),
            ),
            (
                bound,
                budget.bound,
                totals.u_carnot_efficiency.or(totals.u_carnot_cop),
            ),
            ("carnot_margin", budget.margin, totals.u_carnot_margin),
            (
                "entropy_generated_j_per_k",
                budget.entropy_generated,
                totals.u_entropy_generated_j_per_k,
            ),
            (
                "entropy_rate_w_per_k",
                budget.entropy_rate,
                totals.u_entropy_rate_w_per_k,
            ),
            // Figures whose u only the budget gives: against the vectors' u.
            ("exergy_destroyed_j", budget.exergy_destroyed, None),
            ("heat_in_j", Some(budget.heat_in), None),
            ("work_j", Some(budget.work), None),
            ("heat_out_j", Some(budget.heat_out), None),
        ] {
            let what = format!("{name} {key}");
            let c = c.unwrap_or_else(|| panic!("{what}: no budget"));
            let want = &case["expected"][key];
            let u_c = u_c.unwrap_or_else(|| num(&want["u"]));
            let contributions = budget.contributions(&c);
            for (i, input) in names.iter().enumerate() {
                let want_c = num(&want["sensitivity"][input]);
                // Against the figure's own u: a coefficient that is zero in
                // the model (heat out when inferred) compares at zero.
                let diff = (c[i] - want_c).abs() * budget.u[i];
                assert!(
                    diff <= 1e-9 * num(&want["u"]),
                    "{what}: c({input}) = {:e}, uncertainties gives {want_c:e}",
                    c[i]
                );
            }
            let shares: f64 = contributions.iter().map(|x| x * x / (u_c * u_c)).sum();
            assert!(
                (shares - 1.0).abs() < 1e-12,
                "{what}: shares sum to {shares}"
            );
            let var = budget.variance(&c).unwrap();
            close(&format!("u_c({what})"), Some(var.sqrt()), u_c, 1e-12);
            close(
                &format!("u_c({what}) against the vectors"),
                Some(var.sqrt()),
                num(&want["u"]),
                1e-9,
            );
            checked += 1;
        }
    }
    assert_eq!(checked, 7 * 9, "every figure of every case");
}
