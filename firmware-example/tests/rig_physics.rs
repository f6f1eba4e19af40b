//! The simulated rig obeys the first and second laws on its true quantities,
//! is deterministic, and produces no NaN except the deliberate open
//! thermocouple.

mod common;

use common::DT_S;
use heatbound_firmware_example::rig::{Rig, RigParams, Scenario, Truth};
use proptest::prelude::*;

fn stored_energy_j(p: &RigParams, t: &Truth) -> f64 {
    f64::from(p.head_capacity_j_per_k) * (f64::from(t.t_head_k) - f64::from(p.ambient_k))
        + f64::from(p.cold_capacity_j_per_k) * (f64::from(t.t_cold_k) - f64::from(p.ambient_k))
}

/// Integrates the true flows with the rig's own step and returns
/// (∫P dt, residual ∫P − ΔU − ∫W − ∫Q_coolant − ∫Q_room), joules.
fn energy_account(scenario: Scenario, duration_s: f64) -> (f64, f64) {
    let mut rig = Rig::bench_stirling(scenario, 1);
    let p = *rig.params();
    let u0 = stored_energy_j(&p, &rig.truth());
    let (mut e_in, mut e_out) = (0.0f64, 0.0f64);
    let dt = f64::from(DT_S);
    let n = (duration_s / dt).round() as u32;
    for _ in 0..n {
        let t = rig.truth();
        e_in += f64::from(t.heater_w) * dt;
        e_out += (f64::from(t.work_w)
            + f64::from(t.coolant_heat_w)
            + f64::from(t.head_room_loss_w)
            + f64::from(t.cold_room_loss_w))
            * dt;
        rig.step(DT_S);
    }
    let du = stored_energy_j(&p, &rig.truth()) - u0;
    (e_in, e_in - du - e_out)
}

#[test]
fn energy_balance_closes_in_every_scenario() {
    for s in Scenario::ALL {
        let (e_in, residual) = energy_account(s, 1800.0);
        // Rounding of f32 flows and temperatures only: far below 1e-5 of the
        // heat put in over 30 minutes (900 kJ).
        assert!(
            residual.abs() < 1e-5 * e_in + 1.0,
            "{s}: residual {residual} J of {e_in} J"
        );
    }
}

#[test]
fn steady_state_energy_flows_balance_and_do_not_drift() {
    let mut rig = Rig::bench_stirling(Scenario::Steady, 1);
    let t0 = rig.truth();
    let out = t0.work_w + t0.coolant_heat_w + t0.room_loss_w();
    assert!((t0.heater_w - out).abs() < 0.05, "{t0:?}");
    assert!((t0.engine_heat_in_w - t0.work_w - t0.engine_heat_out_w).abs() < 1e-3);
    for _ in 0..18_000 {
        rig.step(DT_S);
    }
    let t1 = rig.truth();
    assert!((t1.t_head_k - t0.t_head_k).abs() < 0.05, "{t0:?} {t1:?}");
    assert!((t1.t_cold_k - t0.t_cold_k).abs() < 0.05, "{t0:?} {t1:?}");
}

/// The entropy generated in one step, W/K, from the balance
/// `σ = dS/dt + Q_coolant/T_c + Q_room/T_0 − P/T_h`, with dS/dt from the
/// step's temperature changes, and a bound on its rounding error.
fn entropy_from_balance(p: &RigParams, a: &Truth, b: &Truth, dt: f64) -> (f64, f64) {
    let (th, tc, t0) = (
        f64::from(a.t_head_k),
        f64::from(a.t_cold_k),
        f64::from(a.ambient_k),
    );
    let ch = f64::from(p.head_capacity_j_per_k);
    let cc = f64::from(p.cold_capacity_j_per_k);
    let ds = ch * (f64::from(b.t_head_k) - th) / (dt * th)
        + cc * (f64::from(b.t_cold_k) - tc) / (dt * tc);
    let sigma = ds + f64::from(a.coolant_heat_w) / tc + f64::from(a.room_loss_w()) / t0
        - f64::from(a.heater_w) / th;
    // One f32 ulp of each temperature, over the step, in W/K.
    let ulp = |t: f64| t * f64::from(f32::EPSILON);
    let tol = 2.0 * (ch * ulp(th) / (dt * th) + cc * ulp(tc) / (dt * tc)) + 1e-6;
    (sigma, tol)
}

#[test]
fn entropy_generation_is_never_negative() {
    let dt = f64::from(DT_S);
    for s in Scenario::ALL {
        let mut rig = Rig::bench_stirling(s, 1);
        let p = *rig.params();
        let mut total = 0.0f64;
        for i in 0..9_000 {
            let a = rig.truth();
            rig.step(DT_S);
            let b = rig.truth();
            let (sigma, tol) = entropy_from_balance(&p, &a, &b, dt);
            assert!(
                sigma >= -tol,
                "{s} step {i}: σ = {sigma} W/K (tolerance {tol})"
            );
            assert!(a.entropy_generation_w_per_k >= 0.0);
            // The rig's own term-by-term figure agrees with the balance.
            let own = f64::from(a.entropy_generation_w_per_k);
            assert!(
                (sigma - own).abs() <= tol + 1e-4 * own.abs() + 1e-5,
                "{s} step {i}: balance {sigma}, rig {own}"
            );
            total += sigma * dt;
        }
        assert!(total > 0.0, "{s}: ∫σ dt = {total}");
    }
}

#[test]
fn steady_entropy_account_without_storage_is_positive() {
    // In steady state the monitor's account needs no stored-entropy term:
    // Q_coolant/T_c + Q_room/T_0 − P/T_h ≥ 0, and equals the rig's σ.
    let t = Rig::bench_stirling(Scenario::Steady, 1).truth();
    let s = t.coolant_heat_w / t.t_cold_k + t.room_loss_w() / t.ambient_k - t.heater_w / t.t_head_k;
    assert!(s > 0.0, "{s}");
    assert!((s - t.entropy_generation_w_per_k).abs() < 1e-3, "{s} {t:?}");
}

#[test]
fn true_efficiency_never_exceeds_carnot() {
    for s in Scenario::ALL {
        let mut rig = Rig::bench_stirling(s, 1);
        for i in 0..9_000 {
            let t = rig.truth();
            let eta_c = t.carnot_efficiency;
            if let Some(eta) = t.engine_efficiency() {
                assert!(eta <= eta_c, "{s} step {i}: η = {eta}, η_C = {eta_c}");
                assert!(eta <= 0.36 * eta_c + 1e-6, "{s} step {i}: f > f_peak");
            }
            if let Some(eta) = t.rig_efficiency() {
                assert!(eta <= eta_c, "{s} step {i}");
            }
            assert!(t.work_w >= 0.0 && t.coolant_heat_w >= 0.0);
            rig.step(DT_S);
        }
    }
}

#[test]
fn same_seed_gives_bit_identical_samples_and_different_seeds_differ() {
    for s in Scenario::ALL {
        let mut a = Rig::bench_stirling(s, 77);
        let mut b = Rig::bench_stirling(s, 77);
        let mut c = Rig::bench_stirling(s, 78);
        let mut differ = 0;
        for i in 0..3_000u32 {
            let (x, y, z) = (a.sample(i * 100), b.sample(i * 100), c.sample(i * 100));
            let bits = |s: &heatbound::monitor::Sample| {
                [
                    s.t_hot_k.to_bits(),
                    s.t_cold_k.to_bits(),
                    s.heat_in_w.to_bits(),
                    s.work_w.to_bits(),
                    s.heat_out_w.map_or(0, f32::to_bits),
                    s.t_hot2_k.map_or(0, f32::to_bits),
                ]
            };
            assert_eq!(bits(&x), bits(&y), "{s} sample {i}");
            if bits(&x) != bits(&z) {
                differ += 1;
            }
            a.step(DT_S);
            b.step(DT_S);
            c.step(DT_S);
        }
        assert!(differ > 2_900, "{s}: only {differ} samples differ");
        assert_eq!(
            a.truth(),
            c.truth(),
            "{s}: the seed must not touch the truth"
        );
    }
}

#[test]
fn readings_are_pure_functions_of_state_and_time_stamp() {
    let rig = Rig::bench_stirling(Scenario::Steady, 5);
    let first = rig.sample(1_000);
    let _ = rig.sample(2_000);
    let _ = rig.measured(3_000);
    assert_eq!(first, rig.sample(1_000));
}

#[test]
fn no_nan_except_the_open_thermocouple() {
    for s in Scenario::ALL {
        let mut rig = Rig::bench_stirling(s, 3);
        for i in 0..12_000u32 {
            let t = rig.truth();
            for (name, x) in [
                ("t_head_k", t.t_head_k),
                ("t_cold_k", t.t_cold_k),
                ("coolant_outlet_k", t.coolant_outlet_k),
                ("work_w", t.work_w),
                ("coolant_heat_w", t.coolant_heat_w),
                ("stored_energy_j", t.stored_energy_j),
                ("sigma", t.entropy_generation_w_per_k),
            ] {
                assert!(x.is_finite(), "{s} step {i}: truth {name} = {x}");
            }
            let m = rig.sample(i * 100);
            let open = s == Scenario::OpenThermocouple && rig.time_s() >= 120.0;
            assert_eq!(m.t_hot_k.is_nan(), open, "{s} step {i}");
            assert!(m.t_cold_k.is_finite() && m.heat_in_w.is_finite() && m.work_w.is_finite());
            assert!(m.heat_out_w.is_some_and(f32::is_finite), "{s} step {i}");
            assert_eq!(m.t_hot2_k.is_some(), s.needs_hot2(), "{s} step {i}");
            assert!(m.t_hot2_k.is_none_or(f32::is_finite), "{s} step {i}");
            rig.step(DT_S);
        }
    }
}

#[test]
fn noise_has_the_configured_spread() {
    let rig = Rig::bench_stirling(Scenario::Steady, 11);
    let truth = rig.truth();
    let n = 20_000u32;
    let mut sums = [(0.0f64, 0.0f64); 3];
    for i in 0..n {
        let s = rig.sample(i * 100);
        let devs = [
            f64::from(s.t_hot_k - truth.t_head_k),
            f64::from(s.t_cold_k - truth.t_cold_k),
            f64::from(s.heat_in_w / truth.heater_w - 1.0),
        ];
        for (acc, d) in sums.iter_mut().zip(devs) {
            acc.0 += d;
            acc.1 += d * d;
        }
    }
    let sd = |(s, s2): (f64, f64)| {
        let m = s / f64::from(n);
        (s2 / f64::from(n) - m * m).sqrt()
    };
    let expect = [0.3, 0.05, 0.003];
    for (k, (acc, want)) in sums.into_iter().zip(expect).enumerate() {
        let got = sd(acc);
        assert!(
            (got / want - 1.0).abs() < 0.1,
            "channel {k}: σ = {got}, want {want}"
        );
    }
}

#[test]
fn long_steps_are_sub_stepped() {
    let mut fine = Rig::bench_stirling(Scenario::WarmUp, 1);
    let mut coarse = Rig::bench_stirling(Scenario::WarmUp, 1);
    for _ in 0..30 {
        for _ in 0..100 {
            fine.step(0.1);
        }
        coarse.step(10.0);
    }
    let (f, c) = (fine.truth(), coarse.truth());
    assert!((f.t_s - c.t_s).abs() < 1e-6);
    assert!((f.t_head_k - c.t_head_k).abs() < 0.5, "{f:?} {c:?}");
    assert!((f.t_cold_k - c.t_cold_k).abs() < 0.1, "{f:?} {c:?}");
}

#[test]
fn coolant_loss_truth() {
    let mut rig = Rig::bench_stirling(Scenario::CoolantLoss, 1);
    let before = rig.truth();
    for _ in 0..3_000 {
        rig.step(DT_S); // to 300 s: the flow has been zero for 150 s
    }
    let after = rig.truth();
    assert_eq!(after.coolant_flow_kg_s, 0.0);
    assert_eq!(after.coolant_heat_w, 0.0);
    assert!(after.t_cold_k > before.t_cold_k + 20.0, "{after:?}");
    assert!(after.t_head_k > before.t_head_k, "{after:?}");
    assert!(after.carnot_efficiency < before.carnot_efficiency);
    assert!(after.engine_efficiency() < before.engine_efficiency());
    let q = rig.sample(300_000).heat_out_w.unwrap_or(f32::NAN);
    assert!(q.abs() < 1.0, "measured heat out {q} W");
}

#[test]
fn thermocouple_drift_changes_the_reading_not_the_truth() {
    let mut drift = Rig::bench_stirling(Scenario::ThermocoupleDrift, 4);
    let mut steady = Rig::bench_stirling(Scenario::Steady, 4);
    for _ in 0..2_400 {
        drift.step(DT_S);
        steady.step(DT_S);
    }
    // 240 s: two minutes of drift at 50 K/min, 100 K low.
    assert_eq!(drift.truth(), steady.truth());
    let d = steady.sample(240_000).t_hot_k - drift.sample(240_000).t_hot_k;
    assert!((d - 100.0).abs() < 0.1, "{d}");
    for _ in 0..6_000 {
        drift.step(DT_S);
    }
    // Bounded at 90 % of the head's excess over ambient.
    let t = drift.truth();
    let reading = drift.sample(840_000).t_hot_k;
    let floor = t.ambient_k + 0.1 * (t.t_head_k - t.ambient_k);
    assert!((reading - floor).abs() < 1.5, "{reading} vs {floor}");
}

#[test]
fn power_meter_scale_error_is_four_times_the_truth() {
    let mut rig = Rig::bench_stirling(Scenario::PowerMeterScaleError, 4);
    let before = rig.sample(0).work_w / rig.truth().work_w;
    for _ in 0..1_300 {
        rig.step(DT_S);
    }
    let after = rig.sample(130_000).work_w / rig.truth().work_w;
    assert!((before - 1.0).abs() < 0.02 && (after - 4.0).abs() < 0.08);
}

#[test]
fn the_second_hot_thermocouple_has_its_own_noise_at_the_first_ones_level() {
    let dual = RigParams {
        hot2: true,
        ..RigParams::bench_stirling()
    };
    let rig = Rig::new(dual, Scenario::Steady, 11).unwrap();
    let truth = rig.truth().t_head_k;
    let n = 20_000u32;
    let (mut s1, mut s2, mut s11, mut s22, mut s12) = (0.0f64, 0.0, 0.0, 0.0, 0.0);
    for i in 0..n {
        let s = rig.sample(i * 100);
        let d1 = f64::from(s.t_hot_k - truth);
        let d2 = f64::from(s.t_hot2_k.expect("a second element") - truth);
        s1 += d1;
        s2 += d2;
        s11 += d1 * d1;
        s22 += d2 * d2;
        s12 += d1 * d2;
    }
    let n = f64::from(n);
    let (m1, m2) = (s1 / n, s2 / n);
    let (v1, v2) = (s11 / n - m1 * m1, s22 / n - m2 * m2);
    let corr = (s12 / n - m1 * m2) / (v1 * v2).sqrt();
    let want = f64::from(dual.noise.thermocouple_k);
    assert!((v2.sqrt() / want - 1.0).abs() < 0.1, "σ₂ = {}", v2.sqrt());
    assert!(m2.abs() < 0.02, "mean {m2}");
    // Independent of the first element: |r| within about 3/√n.
    assert!(corr.abs() < 0.03, "correlation {corr}");
}

#[test]
fn hot2_drift_changes_the_second_reading_only() {
    let mut drift = Rig::bench_stirling(Scenario::Hot2Drift, 4);
    let dual = RigParams {
        hot2: true,
        ..RigParams::bench_stirling()
    };
    let mut steady = Rig::new(dual, Scenario::Steady, 4).unwrap();
    assert!(drift.has_hot2());
    for _ in 0..2_400 {
        drift.step(DT_S);
        steady.step(DT_S);
    }
    // 240 s: two minutes of drift at 20 K/min, 40 K low; nothing else moves.
    assert_eq!(drift.truth(), steady.truth());
    let (a, b) = (steady.sample(240_000), drift.sample(240_000));
    assert_eq!(a.t_hot_k, b.t_hot_k);
    assert_eq!(a.t_cold_k, b.t_cold_k);
    let d = a.t_hot2_k.unwrap() - b.t_hot2_k.unwrap();
    assert!((d - 40.0).abs() < 0.01, "{d}");
    for _ in 0..6_000 {
        drift.step(DT_S);
        steady.step(DT_S);
    }
    // 840 s: at the bound.
    let d = steady.sample(840_000).t_hot2_k.unwrap() - drift.sample(840_000).t_hot2_k.unwrap();
    let limit = heatbound_firmware_example::rig::scenario::HOT2_DRIFT_LIMIT_K;
    assert!((d - limit).abs() < 0.01, "{d}");
    drift.repair();
    let d = steady.sample(840_000).t_hot2_k.unwrap() - drift.sample(840_000).t_hot2_k.unwrap();
    assert_eq!(d, 0.0);
}

#[test]
fn cold_offset_reads_25_k_high_and_leaves_the_calorimetry_alone() {
    let mut fault = Rig::bench_stirling(Scenario::ColdOffset, 4);
    let mut steady = Rig::bench_stirling(Scenario::Steady, 4);
    let before = fault.sample(0).t_cold_k - steady.sample(0).t_cold_k;
    for _ in 0..1_300 {
        fault.step(DT_S);
        steady.step(DT_S);
    }
    assert_eq!(fault.truth(), steady.truth());
    let (a, b) = (steady.sample(130_000), fault.sample(130_000));
    assert_eq!(before, 0.0);
    assert!((b.t_cold_k - a.t_cold_k - 25.0).abs() < 1e-3, "{a:?} {b:?}");
    assert_eq!(a.heat_out_w, b.heat_out_w);
    assert_eq!(a.t_hot_k, b.t_hot_k);
}

#[test]
fn heater_scale_error_reads_15_percent_high() {
    let mut rig = Rig::bench_stirling(Scenario::HeaterScaleError, 4);
    let before = rig.sample(0).heat_in_w / rig.truth().heater_w;
    for _ in 0..1_300 {
        rig.step(DT_S);
    }
    let after = rig.sample(130_000).heat_in_w / rig.truth().heater_w;
    // Noise: 0.3 % a reading.
    assert!(
        (before - 1.0).abs() < 0.02 && (after - 1.15).abs() < 0.02,
        "{before} {after}"
    );
}

#[test]
fn invalid_parameters_are_rejected() {
    let mut p = RigParams::bench_stirling();
    p.peak_carnot_fraction = 1.0;
    assert!(Rig::new(p, Scenario::Steady, 0).is_err());
    let mut p = RigParams::bench_stirling();
    p.coolant_flow_kg_s = f32::NAN;
    assert!(Rig::new(p, Scenario::Steady, 0).is_err());
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]

    /// Across the operating envelope the steady start balances, the engine
    /// stays below Carnot, and arbitrary steps keep the state finite with
    /// σ ≥ 0.
    #[test]
    fn physics_holds_across_the_envelope(
        heater in 50.0f32..900.0,
        flow in 0.0f32..0.06,
        load in 0.0f32..2.0,
        inlet in 280.0f32..305.0,
        steps in proptest::collection::vec(0.001f32..60.0, 1..40),
        scenario in 0usize..Scenario::ALL.len(),
    ) {
        let mut p = RigParams::bench_stirling();
        p.heater_power_w = heater;
        p.coolant_flow_kg_s = flow;
        p.load = load;
        p.coolant_inlet_k = inlet;
        let mut rig = Rig::new(p, Scenario::ALL[scenario], 9).unwrap();
        let t = rig.truth();
        if Scenario::ALL[scenario].starts_hot() {
            let out = t.work_w + t.coolant_heat_w + t.room_loss_w();
            prop_assert!((t.heater_w - out).abs() < 1e-3 * t.heater_w + 0.05, "{t:?}");
        }
        for dt in steps {
            rig.step(dt);
            let t = rig.truth();
            prop_assert!(t.t_head_k.is_finite() && t.t_cold_k.is_finite());
            prop_assert!(t.entropy_generation_w_per_k >= 0.0);
            if let Some(eta) = t.engine_efficiency() {
                prop_assert!(eta <= t.carnot_efficiency);
            }
            let s = rig.sample(1);
            prop_assert!(s.t_cold_k.is_finite() && s.work_w.is_finite());
        }
    }
}
