//! Properties of the consistency diagnosis over random rigs and faults.
//!
//! Each case is an engine window built from true, constant quantities that
//! satisfy both laws and the loss model exactly (the first law
//! `Q_in = W + Q_out + UA·(T_hot − T0)·D`; the second law holds because
//! the efficiency is kept below Carnot's), read through sensors with one
//! injected constant bias. What must hold, by the method's definitions
//! (docs/diagnosis.md), whatever the numbers:
//! - a healthy window is consistent;
//! - when the diagnosis names a suspect, it is the injected channel, with
//!   a bias within the channel's standard uncertainty of the injected one;
//! - when a fault is detected, the injected channel is among the
//!   candidates that explain it (unless the second law binds its estimate,
//!   which then is the least correction, not the fault);
//! - with all three relations, a hot or hot2 fault the first law sees
//!   (UA·|b| beyond three times its band) is named;
//! - a power-meter fault of a few percent (it moves only the first law,
//!   which the three meters move alike) is not named.
use heatbound::diagnosis::{Diagnosis, Losses, Settings, Ua, Window, diagnose};
use heatbound::monitor::{Channel, Uncertainty};
use proptest::prelude::*;

/// A rig's true state and how it is instrumented.
#[derive(Clone, Copy, Debug)]
struct Rig {
    t_hot_k: f64,
    t_cold_k: f64,
    t0_k: f64,
    heat_in_w: f64,
    /// Efficiency as a fraction of Carnot's.
    carnot_fraction: f64,
    ua_w_per_k: f64,
    heat_out_measured: bool,
    hot2: bool,
}

fn rig() -> impl Strategy<Value = Rig> {
    (
        450.0..900.0f64,
        285.0..330.0f64,
        0.3..0.8f64,
        200.0..3000.0f64,
        0.1..0.5f64,
        any::<bool>(),
        any::<bool>(),
    )
        .prop_map(
            |(t_hot_k, t_cold_k, carnot_fraction, heat_in_w, ua, measured, hot2)| Rig {
                t_hot_k,
                t_cold_k,
                t0_k: t_cold_k - 5.0,
                heat_in_w,
                carnot_fraction,
                // The loss to the room a fraction of the heat in.
                ua_w_per_k: ua * heat_in_w / (t_hot_k - t_cold_k + 5.0) * 0.5,
                heat_out_measured: measured,
                hot2,
            },
        )
}

/// The window the sensors report, with `bias` on `channel` (K for a
/// temperature; reading = truth·(1 + b) for a power).
fn window(r: &Rig, fault: Option<(Channel, f64)>) -> Window<f64> {
    let d = 60.0;
    let eta = r.carnot_fraction * (1.0 - r.t_cold_k / r.t_hot_k);
    let (qi, w) = (r.heat_in_w * d, eta * r.heat_in_w * d);
    let loss = r.ua_w_per_k * (r.t_hot_k - r.t0_k) * d;
    let qo_true = if r.heat_out_measured {
        qi - w - loss
    } else {
        qi - w
    };
    let b = |c: Channel| fault.filter(|f| f.0 == c).map_or(0.0, |f| f.1);
    let (th, th2, tc) = (
        r.t_hot_k + b(Channel::Hot),
        r.t_hot_k + b(Channel::Hot2),
        r.t_cold_k + b(Channel::Cold),
    );
    let (qi_r, w_r) = (
        qi * (1.0 + b(Channel::HeatIn)),
        w * (1.0 + b(Channel::Work)),
    );
    let qo_r = if r.heat_out_measured {
        qo_true * (1.0 + b(Channel::HeatOut))
    } else {
        qi_r - w_r
    };
    Window {
        reverse: false,
        duration_s: d,
        heat_in_j: qi_r,
        work_j: w_r,
        heat_out_j: qo_r,
        heat_out_measured: r.heat_out_measured,
        hot_mean_k: th,
        cold_mean_k: tc,
        t0_k: r.t0_k,
        t0_is_cold_mean: false,
        hot_time_integral_k_s: th * d,
        hot_pair_k: r.hot2.then_some(th - th2),
    }
}

fn settings() -> Settings<f64> {
    Settings::new(&Uncertainty::default(), 2.0)
}

fn ua(r: &Rig) -> Ua<f64> {
    Ua::configured(&Losses {
        ua_w_per_k: r.ua_w_per_k,
        u_ua_w_per_k: 0.01 * r.ua_w_per_k,
    })
}

fn judge(r: &Rig, fault: Option<(Channel, f64)>) -> Diagnosis<f64> {
    let u = ua(r);
    diagnose(&window(r, fault), &settings(), Some(&u), false).expect("a diagnosis")
}

fn channel() -> impl Strategy<Value = Channel> {
    prop::sample::select(Channel::ALL.to_vec())
}

/// A fault of `size` standard uncertainties of `channel`, either sign.
fn bias(channel: Channel, size: f64, negative: bool) -> f64 {
    let u = settings().u_of(channel);
    let b = size * u;
    if negative { -b } else { b }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    #[test]
    fn a_healthy_window_is_consistent(r in rig()) {
        let d = judge(&r, None);
        prop_assert!(d.consistent, "{r:?}: {d:?}");
        prop_assert!(d.candidates.is_empty() && d.suspect.is_none());
    }

    #[test]
    fn a_named_suspect_is_the_injected_channel_with_its_bias(
        r in rig(), c in channel(), size in 3.0..200.0f64, negative in any::<bool>()
    ) {
        let present = match c {
            Channel::Hot2 => r.hot2,
            Channel::HeatOut => r.heat_out_measured,
            _ => true,
        };
        prop_assume!(present);
        let b = bias(c, size, negative);
        prop_assume!(c.is_temperature() || b > -0.9);
        let d = judge(&r, Some((c, b)));
        if let Some(s) = d.suspect_candidate() {
            prop_assert_eq!(s.channel, c, "{:?} {:?}: {:?}", r, (c, b), d);
            if !s.second_law_binds {
                let u = settings().u_of(c);
                // A power's bias comes back as a scale: the same number.
                prop_assert!((s.bias - b).abs() <= u, "{:?} {:?}: {:?}", r, (c, b), s);
            }
        }
        if !d.consistent {
            let ours = d.candidate(c);
            let bound = ours.is_some_and(|o| o.second_law_binds);
            prop_assert!(
                bound || ours.is_some_and(|o| o.explains),
                "{:?} {:?}: injected channel not among the explaining: {:?}", r, (c, b), d
            );
        }
        if matches!(c, Channel::HeatIn | Channel::Work | Channel::HeatOut) && size <= 10.0 {
            // A meter fault of a few percent moves only the first law, which
            // the three meters move alike: no one is named.
            prop_assert!(d.suspect.is_none(), "{:?} {:?}: {:?}", r, (c, b), d);
        }
    }

    #[test]
    fn with_all_three_relations_a_hot_side_fault_the_first_law_sees_is_named(
        r in rig(), hot2_faulty in any::<bool>(), negative in any::<bool>(), extra in 1.5..4.0f64
    ) {
        let r = Rig { heat_out_measured: true, hot2: true, ..r };
        let c = if hot2_faulty { Channel::Hot2 } else { Channel::Hot };
        // The first law's band, k·u(r_E), and the bias that moves the loss
        // term beyond it `extra` times.
        let healthy = judge(&r, None);
        let u_e = healthy.residual(heatbound::diagnosis::Relation::FirstLaw).unwrap().u;
        let size = extra * 2.0 * u_e / r.ua_w_per_k;
        prop_assume!(size < 0.5 * (r.t_hot_k - r.t_cold_k));
        let b = if negative { -size } else { size };
        let d = judge(&r, Some((c, b)));
        prop_assert!(!d.consistent);
        prop_assert_eq!(d.suspect, Some(c), "{:?} {:?}: {:?}", r, (c, b), d);
    }
}
