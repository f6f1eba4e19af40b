//! Properties of the monitor and alarms over random inputs (proptest).
//!
//! Sources:
//! - DESIGN.md §4: `S_gen ≥ 0 ⇔ η ≤ η_C` when heat out is inferred, and no
//!   figure is ever NaN or inf (`None` instead);
//! - the alarm rules' definitions (DESIGN.md §4): the live inputs, which
//!   work out uncertainties only when a rule is within its deadband, give
//!   the same verdicts as every figure computed up front;
//! - hand derivation in this file: with heat out inferred and the
//!   heat-weighted means, S_gen = Q_out/T_c − Q_in/T_h = (Q_in/T_c)(η_C − η)
//!   exactly, so the sign of S_gen is the sign of the Carnot margin.
mod common;

use common::{config, sample};
use heatbound::alarm::{AlarmSet, RuleId};
use heatbound::config::{AlarmsFile, Mode, RigFile, RuleFile, UncertaintyFile};
use heatbound::monitor::{Metrics, Monitor, Sample};
use heatbound::num::Real;
use proptest::prelude::*;

/// Every `Option` figure of `m`, by name.
fn options<R: Real>(m: &Metrics<R>) -> [(&'static str, Option<R>); 27] {
    [
        ("balance_residual_j", m.balance_residual_j),
        ("efficiency", m.efficiency),
        ("cop", m.cop),
        ("hot_mean_k", m.hot_mean_k),
        ("cold_mean_k", m.cold_mean_k),
        ("carnot_efficiency", m.carnot_efficiency),
        ("carnot_cop", m.carnot_cop),
        ("curzon_ahlborn_efficiency", m.curzon_ahlborn_efficiency),
        ("carnot_margin", m.carnot_margin),
        ("second_law_efficiency", m.second_law_efficiency),
        ("entropy_generated_j_per_k", m.entropy_generated_j_per_k),
        ("entropy_rate_w_per_k", m.entropy_rate_w_per_k),
        ("entropy_in_rate_w_per_k", m.entropy_in_rate_w_per_k),
        ("exergy_destroyed_j", m.exergy_destroyed_j),
        ("ambient_k", m.ambient_k),
        ("u_efficiency", m.u_efficiency),
        ("u_cop", m.u_cop),
        ("u_carnot_efficiency", m.u_carnot_efficiency),
        ("u_carnot_cop", m.u_carnot_cop),
        ("u_carnot_margin", m.u_carnot_margin),
        ("u_entropy_generated_j_per_k", m.u_entropy_generated_j_per_k),
        ("u_entropy_rate_w_per_k", m.u_entropy_rate_w_per_k),
        ("u_balance_residual_j", m.u_balance_residual_j),
        // Not figures, but they feed the alarms: keep them finite as well.
        (
            "duration_s (as option)",
            Some(m.duration_s).filter(|_| m.entropy_rate_w_per_k.is_some()),
        ),
        (
            "heat_in_j (as option)",
            Some(m.heat_in_j).filter(|_| m.efficiency.is_some()),
        ),
        (
            "work_j (as option)",
            Some(m.work_j).filter(|_| m.efficiency.is_some()),
        ),
        (
            "heat_out_j (as option)",
            Some(m.heat_out_j).filter(|_| m.cold_mean_k.is_some()),
        ),
    ]
}

fn assert_finite<R: Real>(which: &str, m: &Metrics<R>) -> Result<(), TestCaseError> {
    for (k, v) in options(m) {
        prop_assert!(v.is_none_or(|x| x.is_finite()), "{which} {k} = {v:?}");
    }
    Ok(())
}

/// A reading: mostly plausible, sometimes any f32 at all (NaN, ±inf,
/// subnormals, ±3.4e38 included).
fn reading(lo: f32, hi: f32) -> impl Strategy<Value = f32> {
    prop_oneof![6 => lo..hi, 1 => proptest::num::f32::ANY, 1 => Just(f32::NAN), 1 => Just(0.0f32)]
}

/// Time steps: normal, repeated, long gaps and arbitrary jumps (wraps).
fn step() -> impl Strategy<Value = u32> {
    prop_oneof![6 => 1u32..2_000, 1 => Just(0u32), 1 => 10_000u32..60_000, 1 => any::<u32>()]
}

type Raw = (u32, f32, f32, f32, f32, Option<f32>);

fn raw() -> impl Strategy<Value = Raw> {
    (
        step(),
        reading(250.0, 1500.0),
        reading(200.0, 400.0),
        reading(-10.0, 5000.0),
        reading(-100.0, 2000.0),
        proptest::option::weighted(0.3, reading(0.0, 5000.0)),
    )
}

fn fuzz<R: Real>(
    start_ms: u32,
    mode: Mode,
    ambient: bool,
    raws: &[Raw],
) -> Result<(), TestCaseError> {
    let cfg = config(RigFile {
        mode: Some(mode),
        window_samples: Some(16),
        ambient_k: ambient.then_some(293.15),
        ..Default::default()
    });
    let mut monitor: Monitor<16, R> = Monitor::new(&cfg).unwrap();
    let mut alarms = AlarmSet::new(&cfg);
    let mut t = start_ms;
    for (i, &(dt, th, tc, qi, w, qo)) in raws.iter().enumerate() {
        t = t.wrapping_add(dt);
        let s = Sample {
            t_ms: t,
            t_hot_k: R::from_f32(th),
            t_cold_k: R::from_f32(tc),
            heat_in_w: R::from_f32(qi),
            work_w: R::from_f32(w),
            heat_out_w: qo.map(R::from_f32),
            t_hot2_k: None,
        };
        monitor.push(&s);
        let inputs = monitor.alarm_inputs();
        prop_assert_eq!(
            alarms.limits().verdicts(&inputs),
            alarms.limits().verdicts(&inputs.resolve())
        );
        let _ = alarms.update(t, &inputs);
        if i % 7 == 3 {
            let _ = alarms.acknowledge_all(t);
        }
        assert_finite("window", &monitor.window_metrics())?;
        assert_finite("totals", &monitor.totals_metrics())?;
        prop_assert!(monitor.steady_fraction().is_none_or(|x| x.is_finite()));
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 512, ..ProptestConfig::default() })]

    #[test]
    fn no_nan_or_inf_f32(start in any::<u32>(), mode in 0usize..3, ambient in any::<bool>(), raws in proptest::collection::vec(raw(), 1..80)) {
        fuzz::<f32>(start, [Mode::Engine, Mode::HeatPump, Mode::Cooler][mode], ambient, &raws)?;
    }

    #[test]
    fn no_nan_or_inf_f64(start in any::<u32>(), mode in 0usize..3, ambient in any::<bool>(), raws in proptest::collection::vec(raw(), 1..80)) {
        fuzz::<f64>(start, [Mode::Engine, Mode::HeatPump, Mode::Cooler][mode], ambient, &raws)?;
    }

    #[test]
    fn entropy_generation_has_the_sign_of_the_carnot_margin(
        tc in 200.0f64..600.0,
        dt_hot in 1.0f64..1000.0,
        qi in 1.0f64..1e4,
        frac in -0.5f64..0.95,
        swing in 0.0f64..0.2,
        n in 2u32..60,
    ) {
        // Constant (swing = 0) or slowly varying temperatures and powers.
        let cfg = config(RigFile { window_samples: Some(60), ..Default::default() });
        let mut m: Monitor<64, f64> = Monitor::new(&cfg).unwrap();
        for i in 0..n {
            let x = f64::from(i) / 60.0;
            let th = tc + dt_hot;
            m.push(&sample::<f64>(i * 1000, th * (1.0 + swing * x.sin()), tc * (1.0 + 0.5 * swing * x.cos()), qi * (1.0 + swing * x), qi * frac * (1.0 - swing * x), None));
        }
        let t = m.totals_metrics();
        let (Some(eta), Some(s), Some(th_mean), Some(tc_mean)) = (t.efficiency, t.entropy_generated_j_per_k, t.hot_mean_k, t.cold_mean_k) else {
            // With these ranges these figures must exist.
            return Err(TestCaseError::fail(format!("figures missing: {t:?}")));
        };
        // A strong cold swing can bring T_h ≤ T_c: η_C is then unavailable,
        // but 1 − T_c/T_h still fixes the sign of S_gen.
        let carnot = 1.0 - tc_mean / th_mean;
        match t.carnot_efficiency {
            Some(c) => prop_assert!((c - carnot).abs() <= 1e-15 && th_mean > tc_mean),
            None => prop_assert!(th_mean <= tc_mean, "η_C missing with T_h {th_mean} > T_c {tc_mean}"),
        }
        // The identity S_gen·T_c/Q_in = η_C − η, to f64 rounding.
        let scaled = s * tc_mean / t.heat_in_j;
        prop_assert!((scaled - (carnot - eta)).abs() <= 1e-12 * (1.0 + carnot.abs() + eta.abs()), "{scaled} vs {}", carnot - eta);
        // Hence the second law: η ≤ η_C ⇒ S_gen ≥ 0 (tolerance: rounding of S_gen).
        let tol = 1e-12 * t.entropy_in_rate_w_per_k.unwrap() * t.duration_s;
        if eta <= carnot {
            prop_assert!(s >= -tol, "η {eta} ≤ η_C {carnot} but S_gen {s}");
        } else {
            prop_assert!(s <= tol, "η {eta} > η_C {carnot} but S_gen {s}");
        }
    }
}

/// Verdicts on the live inputs and on every figure computed up front, for a
/// steady engine whose efficiency sits `offset` from its Carnot bound (and,
/// with heat out measured, whose balance closes to within `residual` of Q_in).
fn lazy_matches_eager(
    th: f64,
    tc: f64,
    qi: f64,
    offset: f64,
    residual: Option<f64>,
    ambient: bool,
) -> Result<(), TestCaseError> {
    let cfg = config(RigFile {
        window_samples: Some(8),
        ambient_k: ambient.then_some(293.15),
        ..Default::default()
    });
    let mut monitor: Monitor<8> = Monitor::new(&cfg).unwrap();
    let alarms = AlarmSet::new(&cfg);
    let eta = (1.0 - tc / th + offset).clamp(0.0, 1.0);
    let w = qi * eta;
    for i in 0..20u32 {
        let heat_out_w = residual.map(|r| qi - w - r * qi);
        monitor.push(&sample::<f32>(i * 100, th, tc, qi, w, heat_out_w));
        let inputs = monitor.alarm_inputs();
        prop_assert_eq!(
            alarms.limits().verdicts(&inputs),
            alarms.limits().verdicts(&inputs.resolve())
        );
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2048, ..ProptestConfig::default() })]

    #[test]
    fn live_inputs_give_the_verdicts_of_full_figures_near_the_bounds(
        th in 400.0f64..900.0,
        tc in 280.0f64..350.0,
        qi in 10.0f64..5000.0,
        offset in -0.05f64..0.05,
        residual in proptest::option::of(-0.05f64..0.05),
        ambient in any::<bool>(),
    ) {
        lazy_matches_eager(th, tc, qi, offset, residual, ambient)?;
    }
}

/// A steady machine in `mode` whose figure of merit sits `offset` (relative)
/// from its Carnot bound, swinging by `swing` over the run, so that rules
/// raise, hold and clear; with heat out measured, the balance closes to
/// within `residual` of the heat in. Every sample, the live inputs must give
/// the verdicts of every figure computed up front, and an alarm set updated
/// from the live inputs must emit the events, and reach the states, of one
/// driven by the up-front verdicts. With `precise` channels (uncertainties
/// far below the deadbands) the rules also hold within their deadbands.
///
/// Check values: the definitions of DESIGN.md §4 (η = W/Q_in against
/// 1 − T_c/T_h; heat pump Q_in/W against T_h/(T_h − T_c); cooler Q_out/W
/// against T_c/(T_h − T_c)), worked out in f64 here.
#[allow(clippy::too_many_arguments)]
fn live_alarms_match_eager(
    mode: Mode,
    th: f64,
    tc: f64,
    power: f64,
    offset: f64,
    swing: f64,
    residual: Option<f64>,
    ambient: bool,
    precise: bool,
) -> Result<(), TestCaseError> {
    let rule = |deadband| {
        Some(RuleFile {
            deadband: Some(deadband),
            on_delay_s: Some(0.0),
            off_delay_s: Some(0.5),
            ..Default::default()
        })
    };
    let cfg = config(RigFile {
        mode: Some(mode),
        window_samples: Some(8),
        ambient_k: ambient.then_some(293.15),
        uncertainty: precise.then(|| UncertaintyFile {
            hot_k: Some(0.01),
            cold_k: Some(0.01),
            heat_in_rel: Some(1e-4),
            work_rel: Some(1e-4),
            heat_out_rel: Some(1e-4),
            ..Default::default()
        }),
        alarms: precise.then(|| AlarmsFile {
            // Raised only past the bound, and held only close to it, so
            // that the other rules' deadbands are not hidden behind it.
            near_carnot_fraction: Some(1.0),
            near_carnot: rule(0.001),
            beyond_carnot: rule(0.05),
            negative_entropy_production: rule(0.05),
            energy_balance: rule(0.05),
            ..Default::default()
        }),
        ..Default::default()
    });
    let mut monitor: Monitor<8> = Monitor::new(&cfg).unwrap();
    let mut live = AlarmSet::new(&cfg);
    let mut eager = AlarmSet::new(&cfg);
    for i in 0..60u32 {
        let x = 1.0 + offset + swing * (f64::from(i) / 5.0).sin();
        // (heat in, work, heat out), heat out by the first law before the residual.
        let (qi, w, qo) = match mode {
            Mode::Engine => {
                let w = power * (1.0 - tc / th) * x;
                (power, w, power - w)
            }
            Mode::HeatPump => {
                let w = power / (th / (th - tc) * x);
                (power, w, power - w)
            }
            Mode::Cooler => {
                let w = power / (tc / (th - tc) * x);
                (power + w, w, power)
            }
        };
        let heat_out_w = residual.map(|r| qo - r * qi);
        let t = i * 250;
        monitor.push(&sample::<f32>(t, th, tc, qi, w, heat_out_w));
        let inputs = monitor.alarm_inputs();
        let resolved = inputs.resolve();
        let verdicts = eager.limits().verdicts(&resolved);
        prop_assert_eq!(live.limits().verdicts(&inputs), verdicts, "sample {}", i);
        prop_assert_eq!(
            live.update(t, &inputs),
            eager.apply(t, &verdicts),
            "sample {}",
            i
        );
        for id in RuleId::ALL {
            prop_assert_eq!(live.state(id), eager.state(id), "sample {} {:?}", i, id);
        }
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2048, ..ProptestConfig::default() })]

    #[test]
    fn live_alarms_match_full_figures_in_every_mode(
        mode in 0usize..3,
        th in 400.0f64..900.0,
        tc in 250.0f64..350.0,
        power in 1.0f64..5000.0,
        offset in prop_oneof![-0.6f64..0.05, -0.02f64..0.02],
        swing in prop_oneof![Just(0.0f64), 0.0f64..0.1],
        residual in proptest::option::of(-0.05f64..0.05),
        ambient in any::<bool>(),
        precise in any::<bool>(),
    ) {
        let mode = [Mode::Engine, Mode::HeatPump, Mode::Cooler][mode];
        live_alarms_match_eager(mode, th, tc, power, offset, swing, residual, ambient, precise)?;
    }
}
