//! Second-law figures of the monitor against outside checks.
//!
//! Sources, named again beside each value:
//! - shared/REFERENCES.md "Second law for a steady engine": the steady-engine
//!   check (S_gen 1.16667 W/K, exergy destroyed 350 W) and Curzon & Ahlborn,
//!   Am. J. Phys. 43, 22 (1975), Table I (from memory, ±0.01);
//! - DESIGN.md §4 definitions, recomputed independently in f64 by
//!   `common::Trapezoid`;
//! - hand derivations in this file.
mod common;

use common::{SplitMix, Trapezoid, config, sample};
use heatbound::config::{Mode, RigConfig, RigFile};
use heatbound::monitor::{Channel, Invalid, Metrics, Monitor, Pushed, Sample};
use heatbound::num::Real;
use heatbound_verification::rel_diff;

fn close(what: &str, got: Option<f64>, want: f64, tol: f64) {
    let got = got.unwrap_or_else(|| panic!("{what}: not available"));
    let rel = rel_diff(got, want);
    assert!(
        rel <= tol,
        "{what}: got {got}, want {want}, relative difference {rel:e} > {tol:e}"
    );
}

fn f64s<R: Real>(m: &Metrics<R>) -> [(&'static str, Option<f64>); 8] {
    let f = |x: Option<R>| x.map(R::to_f64);
    [
        ("efficiency", f(m.efficiency)),
        ("carnot_efficiency", f(m.carnot_efficiency)),
        ("hot_mean_k", f(m.hot_mean_k)),
        ("cold_mean_k", f(m.cold_mean_k)),
        ("entropy_generated_j_per_k", f(m.entropy_generated_j_per_k)),
        ("entropy_rate_w_per_k", f(m.entropy_rate_w_per_k)),
        ("exergy_destroyed_j", f(m.exergy_destroyed_j)),
        ("carnot_margin", f(m.carnot_margin)),
    ]
}

/// Steady engine through the monitor: `n` samples 1 s apart, window 60.
fn steady_run<R: Real>(
    cfg: &RigConfig,
    n: u32,
    th: f64,
    tc: f64,
    qi: f64,
    w: f64,
    qo: Option<f64>,
) -> (Metrics<R>, Metrics<R>) {
    let mut m: Monitor<64, R> = Monitor::new(cfg).unwrap();
    for i in 0..n {
        assert_ne!(
            m.push(&sample::<R>(i * 1000, th, tc, qi, w, qo)),
            Pushed::Invalid(Invalid::RepeatedTime)
        );
    }
    (m.totals_metrics(), m.window_metrics())
}

fn steady_engine_check<R: Real>(tol: f64) {
    let cfg = RigConfig::default();
    // REFERENCES.md steady-engine check: Q_h = 1000 W, W = 150 W, T_h = 600 K, T_c = 300 K.
    let (totals, window) = steady_run::<R>(&cfg, 3601, 600.0, 300.0, 1000.0, 150.0, None);
    for (which, m, seconds) in [("totals", totals, 3600.0), ("window", window, 59.0)] {
        let what = |k: &str| format!("{} {which} {k}", core::any::type_name::<R>());
        close(&what("duration"), Some(m.duration_s.to_f64()), seconds, tol);
        // REFERENCES.md: S_gen = 1.16667 W/K (rounded to 6 figures there, so 5e-6 slack).
        close(
            &what("σ̇"),
            m.entropy_rate_w_per_k.map(R::to_f64),
            1.16667,
            5e-6,
        );
        // Hand derivation: the unrounded value is 850/300 − 1000/600 = 7/6 W/K.
        close(
            &what("σ̇ exact"),
            m.entropy_rate_w_per_k.map(R::to_f64),
            7.0 / 6.0,
            tol,
        );
        close(
            &what("S_gen"),
            m.entropy_generated_j_per_k.map(R::to_f64),
            7.0 / 6.0 * seconds,
            tol,
        );
        // REFERENCES.md: with T0 = T_c (the default), exergy destroyed is 350 W ...
        close(
            &what("exergy"),
            m.exergy_destroyed_j.map(R::to_f64),
            350.0 * seconds,
            tol,
        );
        // ... which equals W_rev − W = η_C·Q_h − W = 0.5·1000 − 150 (REFERENCES.md).
        let w_rev = m.carnot_efficiency.unwrap().to_f64() * m.heat_in_j.to_f64();
        close(
            &what("W_rev − W"),
            m.exergy_destroyed_j.map(R::to_f64),
            w_rev - m.work_j.to_f64(),
            tol,
        );
        close(&what("η"), m.efficiency.map(R::to_f64), 0.15, tol);
        close(&what("η_C"), m.carnot_efficiency.map(R::to_f64), 0.5, tol);
        // Hand derivation: η_CA = 1 − √(1/2).
        close(
            &what("η_CA"),
            m.curzon_ahlborn_efficiency.map(R::to_f64),
            1.0 - 0.5_f64.sqrt(),
            tol,
        );
        close(
            &what("second-law efficiency"),
            m.second_law_efficiency.map(R::to_f64),
            0.3,
            tol,
        );
        close(&what("T0"), m.ambient_k.map(R::to_f64), 300.0, tol);
    }
}

#[test]
fn steady_engine_reference_check_f64() {
    steady_engine_check::<f64>(1e-12);
}

#[test]
fn steady_engine_reference_check_f32() {
    steady_engine_check::<f32>(2e-6);
}

#[test]
fn curzon_ahlborn_table_one() {
    // Curzon & Ahlborn, Am. J. Phys. 43, 22 (1975), Table I via REFERENCES.md
    // (from memory: tolerance ±0.01). Temperatures in °C; 0 °C = 273.15 K (SI).
    let rows = [
        ("coal steam plant", 25.0, 565.0, 0.64, 0.40, 0.36),
        ("heavy-water reactor", 25.0, 300.0, 0.48, 0.28, 0.30),
        ("geothermal", 80.0, 250.0, 0.32, 0.175, 0.16),
    ];
    for (plant, tc_c, th_c, eta_c, eta_ca, observed) in rows {
        let (th, tc) = (
            th_c + heatbound::ZERO_CELSIUS_K,
            tc_c + heatbound::ZERO_CELSIUS_K,
        );
        let (m, _) = steady_run::<f32>(
            &RigConfig::default(),
            121,
            th,
            tc,
            1000.0,
            1000.0 * observed,
            None,
        );
        let got_c = f64::from(m.carnot_efficiency.unwrap());
        let got_ca = f64::from(m.curzon_ahlborn_efficiency.unwrap());
        assert!(
            (got_c - eta_c).abs() <= 0.01,
            "{plant}: η_C {got_c} vs {eta_c}"
        );
        assert!(
            (got_ca - eta_ca).abs() <= 0.01,
            "{plant}: η_CA {got_ca} vs {eta_ca}"
        );
        // The observed efficiencies of Table I are below Carnot, so the
        // monitor must find S_gen > 0 (second law, REFERENCES.md).
        assert!(m.entropy_generated_j_per_k.unwrap() > 0.0, "{plant}");
        assert!(m.carnot_margin.unwrap() > 0.0, "{plant}");
    }
}

#[test]
fn heat_out_measured_with_balance_residual_and_ambient() {
    // Hand derivation in this file: Q_h = 1000 W, W = 150 W, Q_out = 800 W
    // measured, so Q_loss = 50 W lost to the room at T0 = 293.15 K.
    // S_gen rate = 800/300 + 50/293.15 − 1000/600 = 1 + 50/293.15 W/K, and
    // T0·S_gen = 293.15 + 50 = 343.15 W.
    let cfg = config(RigFile {
        ambient_k: Some(293.15),
        ..Default::default()
    });
    let (m, w) = steady_run::<f64>(&cfg, 601, 600.0, 300.0, 1000.0, 150.0, Some(800.0));
    for (which, m, secs) in [("totals", m, 600.0), ("window", w, 59.0)] {
        close(which, m.balance_residual_j, 50.0 * secs, 1e-12);
        close(which, m.entropy_rate_w_per_k, 1.0 + 50.0 / 293.15, 1e-12);
        close(which, m.exergy_destroyed_j, 343.15 * secs, 1e-12);
        close(which, m.ambient_k, 293.15, 1e-15);
        close(which, m.cold_mean_k, 300.0, 1e-12);
        close(which, Some(m.heat_out_j), 800.0 * secs, 1e-12);
    }
    // Default T0 = cold-side mean = 300 K: S_gen rate = 800/300 + 50/300 − 1000/600 = 7/6
    // (hand derivation: with T0 = T_c the lost heat counts as rejected heat).
    let (m, _) = steady_run::<f64>(
        &RigConfig::default(),
        601,
        600.0,
        300.0,
        1000.0,
        150.0,
        Some(800.0),
    );
    close("default T0", m.entropy_rate_w_per_k, 7.0 / 6.0, 1e-12);
    close("default T0", m.ambient_k, 300.0, 1e-12);
}

#[test]
fn heat_pump_and_cooler_against_carnot_cop() {
    // Hand derivation in this file: 1000 W delivered at 320 K, 400 W of work,
    // so 600 W drawn at 280 K (inferred). COP_heating = 2.5 against
    // 320/40 = 8; COP_cooling = 1.5 against 280/40 = 7;
    // S_gen rate = 1000/320 − 600/280 ≥ 0, and T0·S_gen with T0 = 280 K is
    // W − W_rev = 400 − 1000/8 = 275 W.
    let sgen = 1000.0 / 320.0 - 600.0 / 280.0;
    for (mode, cop, carnot) in [(Mode::HeatPump, 2.5, 8.0), (Mode::Cooler, 1.5, 7.0)] {
        let cfg = config(RigFile {
            mode: Some(mode),
            ..Default::default()
        });
        for measured in [None, Some(600.0)] {
            let (m, _) = steady_run::<f64>(&cfg, 301, 320.0, 280.0, 1000.0, 400.0, measured);
            let what = format!("{mode} measured={}", measured.is_some());
            close(&what, m.cop, cop, 1e-12);
            close(&what, m.carnot_cop, carnot, 1e-12);
            close(&what, m.carnot_margin, carnot - cop, 1e-12);
            close(&what, m.second_law_efficiency, cop / carnot, 1e-12);
            close(&what, m.entropy_rate_w_per_k, sgen, 1e-12);
            close(&what, m.exergy_destroyed_j.map(|x| x / 300.0), 275.0, 1e-12);
            assert_eq!(
                m.efficiency, None,
                "{what}: no engine efficiency in reverse"
            );
            assert_eq!(m.carnot_efficiency, None, "{what}");
        }
        // Measured cold heat 620 W: residual W + Q_cold − Q_hot = 20 W lost at
        // T0 = 293.15 K; S_gen = 1000/320 − 620/280 + 20/293.15 (hand derivation).
        let cfg = config(RigFile {
            mode: Some(mode),
            ambient_k: Some(293.15),
            ..Default::default()
        });
        let (m, _) = steady_run::<f64>(&cfg, 301, 320.0, 280.0, 1000.0, 400.0, Some(620.0));
        close(
            "reverse residual",
            m.balance_residual_j,
            20.0 * 300.0,
            1e-12,
        );
        close(
            "reverse S_gen",
            m.entropy_rate_w_per_k,
            1000.0 / 320.0 - 620.0 / 280.0 + 20.0 / 293.15,
            1e-12,
        );
    }
    // A heat pump claiming COP 10 > 8 (heat delivered 1000 W for 100 W of work)
    // must show negative entropy production (second law, REFERENCES.md).
    let cfg = config(RigFile {
        mode: Some(Mode::HeatPump),
        ..Default::default()
    });
    let (m, _) = steady_run::<f64>(&cfg, 301, 320.0, 280.0, 1000.0, 100.0, None);
    assert!(m.carnot_margin.unwrap() < 0.0);
    assert!(m.entropy_generated_j_per_k.unwrap() < 0.0);
}

/// A deterministic run with varying temperatures and powers, every 100 ms.
fn varying_sample<R: Real>(i: u32, rng: &mut SplitMix, measured: bool) -> Sample<R> {
    let x = f64::from(i) * 1e-3;
    let th = 650.0 + 120.0 * (0.7 * x).sin() + 2.0 * rng.symmetric();
    let tc = 305.0 + 15.0 * (0.31 * x).cos() + 0.5 * rng.symmetric();
    let qi = 1200.0 + 300.0 * (1.3 * x).sin() + 20.0 * rng.symmetric();
    let w = 180.0 + 40.0 * (0.9 * x + 1.0).sin() + 5.0 * rng.symmetric();
    let qo = measured.then(|| (qi - w) * (0.95 + 0.02 * (0.5 * x).sin()));
    sample::<R>(i * 100, th, tc, qi, w, qo)
}

fn varying_against_trapezoid<R: Real>(tol: f64, measured: bool) {
    const WINDOW: u32 = 50;
    let cfg = config(RigFile {
        window_samples: Some(WINDOW),
        ..Default::default()
    });
    let mut m: Monitor<64, R> = Monitor::new(&cfg).unwrap();
    let mut rng = SplitMix(7);
    let n = 20_000u32;
    let mut total = Trapezoid::default();
    let mut window = Trapezoid::default();
    for i in 0..n {
        let s = varying_sample::<R>(i, &mut rng, measured);
        m.push(&s);
        // The reference sees the samples exactly as the monitor does (R values widened).
        total.push_sample(&s, false);
        if i >= n - WINDOW {
            window.push_sample(&s, false);
        }
    }
    for (which, got, r) in [
        ("totals", m.totals_metrics(), total),
        ("window", m.window_metrics(), window),
    ] {
        // Default T0, the cold-side mean: with heat out measured, the time
        // mean of T_cold; inferred, T_c (DESIGN.md §4, monitor docs).
        let t0 = measured.then(|| r.cold_time_mean_k());
        let sgen = r.entropy_generated_j_per_k(t0);
        let want = [
            r.efficiency(),
            r.carnot_efficiency(),
            r.hot_mean_k(),
            r.cold_mean_k(),
            sgen,
            sgen / r.duration_s,
            sgen * t0.unwrap_or(r.cold_mean_k()),
            r.carnot_efficiency() - r.efficiency(),
        ];
        for ((key, value), want) in f64s(&got).into_iter().zip(want) {
            close(
                &format!(
                    "{} {which} {key} measured={measured}",
                    core::any::type_name::<R>()
                ),
                value,
                want,
                tol,
            );
        }
        close(which, Some(got.heat_in_j.to_f64()), r.heat_in_j, tol);
        close(which, Some(got.work_j.to_f64()), r.work_j, tol);
        close(which, Some(got.heat_out_j.to_f64()), r.heat_out_j, tol);
    }
}

#[test]
fn varying_temperatures_match_independent_trapezoid_f64() {
    varying_against_trapezoid::<f64>(1e-9, false);
    varying_against_trapezoid::<f64>(1e-9, true);
}

#[test]
fn varying_temperatures_match_independent_trapezoid_f32() {
    // S_gen is a difference of two integrals 20× larger than it, so it loses
    // about 20× the relative precision of the integrals; 1e-5 holds with margin.
    varying_against_trapezoid::<f32>(1e-5, false);
    varying_against_trapezoid::<f32>(1e-5, true);
}

fn assert_no_nan<R: Real>(m: &Metrics<R>) {
    for (k, v) in f64s(m) {
        assert!(v.is_none_or(f64::is_finite), "{k} = {v:?}");
    }
}

#[test]
fn unavailable_when_no_heat_in() {
    // DESIGN.md §4: a ratio whose denominator is ≤ 0 is None, never NaN.
    let (m, w) = steady_run::<f32>(&RigConfig::default(), 61, 600.0, 300.0, 0.0, 0.0, None);
    for m in [m, w] {
        assert_no_nan(&m);
        assert_eq!(m.efficiency, None);
        assert_eq!(m.hot_mean_k, None);
        assert_eq!(m.cold_mean_k, None);
        assert_eq!(m.carnot_efficiency, None);
        assert_eq!(m.curzon_ahlborn_efficiency, None);
        assert_eq!(m.carnot_margin, None);
        assert_eq!(m.second_law_efficiency, None);
        assert_eq!(m.exergy_destroyed_j, None);
        assert_eq!(m.u_efficiency, None);
        assert_eq!(m.u_carnot_margin, None);
        // Zero heat and zero work: zero entropy is generated, which is a number.
        assert_eq!(m.entropy_generated_j_per_k, Some(0.0));
    }
}

#[test]
fn unavailable_when_hot_not_above_cold() {
    for (th, tc) in [(300.0, 300.0), (290.0, 300.0)] {
        let (m, w) = steady_run::<f32>(&RigConfig::default(), 61, th, tc, 1000.0, 150.0, None);
        for m in [m, w] {
            assert_no_nan(&m);
            assert_eq!(m.carnot_efficiency, None, "T_h {th} ≤ T_c {tc}");
            assert_eq!(m.curzon_ahlborn_efficiency, None);
            assert_eq!(m.carnot_margin, None);
            assert_eq!(m.second_law_efficiency, None);
            assert_eq!(m.u_carnot_efficiency, None);
            assert_eq!(m.u_carnot_margin, None);
            // η itself is still defined.
            close("η", m.efficiency.map(f64::from), 0.15, 1e-6);
            // And work from heat at a lower temperature generates negative entropy.
            assert!(m.entropy_generated_j_per_k.unwrap() < 0.0);
        }
    }
    let cfg = config(RigFile {
        mode: Some(Mode::HeatPump),
        ..Default::default()
    });
    let (m, _) = steady_run::<f32>(&cfg, 61, 300.0, 300.0, 1000.0, 150.0, None);
    assert_eq!(m.carnot_cop, None, "COP_C needs T_h > T_c");
    assert_eq!(m.carnot_margin, None);
}

#[test]
fn integration_restarts_after_a_gap() {
    // max_gap_s default 10 s (config.rs): a 10 s spacing is bridged, 10.001 s is not.
    let mut m: Monitor<64, f64> = Monitor::new(&RigConfig::default()).unwrap();
    let s = |t, q| sample::<f64>(t, 600.0, 300.0, q, 100.0, None);
    assert_eq!(m.push(&s(0, 1000.0)), Pushed::Started);
    assert_eq!(m.push(&s(1000, 1000.0)), Pushed::Integrated);
    assert_eq!(
        m.push(&s(11_000, 1000.0)),
        Pushed::Integrated,
        "exactly max_gap_s is bridged"
    );
    assert_eq!(
        m.push(&s(21_001, 2000.0)),
        Pushed::Started,
        "longer than max_gap_s restarts"
    );
    assert_eq!(m.push(&s(22_001, 2000.0)), Pushed::Integrated);
    let t = m.totals_metrics();
    // Hand derivation: 11 s at 1000 W, then 1 s at 2000 W; the 10.001 s gap is not integrated.
    assert_eq!(t.duration_s, 12.0);
    assert_eq!(t.heat_in_j, 11_000.0 + 2000.0);
    assert_eq!(m.restarts(), 1);
    assert_eq!(
        m.window_integrals().duration_s,
        12.0,
        "the window excludes the gap too"
    );
    assert!(
        (m.elapsed_s() - 22.001).abs() < 1e-9,
        "elapsed time counts the gap"
    );
}

#[test]
fn invalid_samples_are_skipped_and_bridged() {
    let mut m: Monitor<64, f64> = Monitor::new(&RigConfig::default()).unwrap();
    let s = |t, th, q| sample::<f64>(t, th, 300.0, q, 100.0, None);
    assert_eq!(m.push(&s(0, 600.0, 1000.0)), Pushed::Started);
    assert_eq!(
        m.push(&s(1000, f64::NAN, 1000.0)),
        Pushed::Invalid(Invalid::NonFinite(Channel::Hot))
    );
    assert_eq!(
        m.push(&s(2000, 600.0, f64::INFINITY)),
        Pushed::Invalid(Invalid::NonFinite(Channel::HeatIn))
    );
    // Plausible range 1..3000 K (config.rs defaults).
    assert_eq!(
        m.push(&s(3000, 5000.0, 1000.0)),
        Pushed::Invalid(Invalid::OutOfRange(Channel::Hot))
    );
    assert_eq!(
        m.push(&s(4000, 0.5, 1000.0)),
        Pushed::Invalid(Invalid::OutOfRange(Channel::Hot))
    );
    assert_eq!(
        m.push(&s(5000, 600.0, 3000.0)),
        Pushed::Integrated,
        "bridged over 5 s"
    );
    assert_eq!(
        m.push(&s(5000, 600.0, 3000.0)),
        Pushed::Invalid(Invalid::RepeatedTime)
    );
    assert_eq!(m.invalid_samples(), 5);
    assert_eq!(m.valid_samples(), 2);
    let t = m.totals_integrals();
    // Hand derivation: one trapezoid of 5 s between 1000 W and 3000 W.
    assert_eq!(t.duration_s, 5.0);
    assert_eq!(t.heat_in_j, 10_000.0);
    // A run with heat out measured rejects a sample without it.
    let mut m: Monitor<64, f64> = Monitor::new(&RigConfig::default()).unwrap();
    m.push(&sample::<f64>(0, 600.0, 300.0, 1000.0, 100.0, Some(850.0)));
    assert_eq!(
        m.push(&sample::<f64>(1000, 600.0, 300.0, 1000.0, 100.0, None)),
        Pushed::Invalid(Invalid::MissingHeatOut)
    );
}

/// Samples of the long run: 10 Hz, starting 1 day before the u32 millisecond
/// clock wraps, with slow drifts and noise on every channel.
fn long_run(samples: u64) -> (Metrics<f32>, Trapezoid) {
    let mut m: Monitor<64, f32> = Monitor::new(&RigConfig::default()).unwrap();
    let mut reference = Trapezoid::default();
    let mut rng = SplitMix(42);
    let start = u32::MAX - 86_400_000;
    for i in 0..samples {
        let hours = i as f64 / 36_000.0;
        let th = 700.0 + 50.0 * (hours * 0.26).sin() + 1.0 * rng.symmetric();
        let tc = 300.0 + 5.0 * (hours * 0.26 + 1.0).cos() + 0.2 * rng.symmetric();
        let qi = 2000.0 + 200.0 * (hours * 0.9).sin() + 10.0 * rng.symmetric();
        let w = 300.0 + 30.0 * (hours * 0.9 + 0.5).sin() + 3.0 * rng.symmetric();
        let s = sample::<f32>(start.wrapping_add((i * 100) as u32), th, tc, qi, w, None);
        assert_eq!(m.push(&s) == Pushed::Started, i == 0);
        reference.push_sample(&s, false);
    }
    (m.totals_metrics(), reference)
}

fn long_run_check(samples: u64, tol: f64) -> f64 {
    let (m, r) = long_run(samples);
    let sgen = r.entropy_generated_j_per_k(None);
    let pairs = [
        ("duration", f64::from(m.duration_s), r.duration_s),
        ("Q_in", f64::from(m.heat_in_j), r.heat_in_j),
        ("W", f64::from(m.work_j), r.work_j),
        ("T_h", f64::from(m.hot_mean_k.unwrap()), r.hot_mean_k()),
        ("T_c", f64::from(m.cold_mean_k.unwrap()), r.cold_mean_k()),
        ("η", f64::from(m.efficiency.unwrap()), r.efficiency()),
        (
            "η_C",
            f64::from(m.carnot_efficiency.unwrap()),
            r.carnot_efficiency(),
        ),
        (
            "S_gen",
            f64::from(m.entropy_generated_j_per_k.unwrap()),
            sgen,
        ),
    ];
    let mut worst = 0.0_f64;
    for (what, got, want) in pairs {
        let rel = rel_diff(got, want);
        println!("{samples} samples: {what} relative error {rel:e}");
        assert!(
            rel < tol,
            "{what}: f32 monitor {got} vs f64 reference {want}: {rel:e}"
        );
        worst = worst.max(rel);
    }
    worst
}

#[test]
fn three_days_at_10_hz_f32_totals_match_f64() {
    // 2.6 million samples keeps the default (debug) test to a few seconds.
    // Measured: worst relative error 7.7e-8 (η_C; Q_in 6.5e-9, S_gen 2.7e-8);
    // asserted < 1e-6.
    long_run_check(3 * 864_000, 1e-6);
}

/// The full 30 days at 10 Hz (25.92 million samples, across the u32
/// millisecond wrap). Run in release:
/// `cargo test --release -p heatbound-verification --test monitor_second_law -- --ignored thirty_days`
#[test]
#[ignore = "25.9 million samples: run in release, see doc comment"]
fn thirty_days_at_10_hz_f32_totals_match_f64() {
    // Measured: worst relative error 1.2e-7 (T_c; Q_in 4.3e-8, S_gen 4.7e-8),
    // about 4.5 s in release; asserted < 1e-6.
    long_run_check(30 * 864_000, 1e-6);
}
