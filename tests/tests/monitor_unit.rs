//! Monitor checks moved out of monitor.rs, so that monitor imports neither
//! config nor alarm (the one-way flow of the core's layout).

use heatbound::alarm::AlarmSet;
use heatbound::config::RigConfig;
use heatbound::monitor::*;

fn steady(t_ms: u32) -> Sample {
    steady_in(t_ms)
}

/// [`steady`] in `R`.
fn steady_in<R: heatbound::num::Real>(t_ms: u32) -> Sample<R> {
    let r = R::from_f64;
    Sample {
        t_ms,
        t_hot_k: r(600.0),
        t_cold_k: r(300.0),
        heat_in_w: r(1000.0),
        work_w: r(150.0),
        heat_out_w: None,
        t_hot2_k: None,
    }
}

fn small_window() -> RigConfig {
    RigFile {
        window_samples: Some(16),
        ..Default::default()
    }
    .validate()
    .unwrap()
}

#[test]
fn monitor_and_alarms_fit_the_ram_budget() {
    let monitor = core::mem::size_of::<Monitor<64>>();
    let alarms = core::mem::size_of::<AlarmSet>();
    assert!(
        monitor + alarms <= 8 * 1024,
        "monitor {monitor} + alarms {alarms} bytes"
    );
}

#[test]
fn window_slides_over_the_last_n_samples() {
    let config = RigFile {
        window_samples: Some(4),
        ..Default::default()
    }
    .validate()
    .unwrap();
    let mut m: Monitor<8, f64> = Monitor::new(&config).unwrap();
    for i in 0..10u32 {
        let s = Sample {
            t_ms: i * 1000,
            t_hot_k: 600.0,
            t_cold_k: 300.0,
            heat_in_w: f64::from(i),
            work_w: 0.0,
            heat_out_w: None,
            t_hot2_k: None,
        };
        m.push(&s);
    }
    // Last four samples: q_in = 6, 7, 8, 9 W at 1 s spacing.
    let w = m.window_integrals();
    assert_eq!(w.duration_s, 3.0);
    assert_eq!(w.heat_in_j, 6.5 + 7.5 + 8.5);
    assert_eq!(m.totals_integrals().heat_in_j, 40.5);
}

use heatbound::config::RigFile;

#[test]
fn gap_restarts_integration_and_invalid_samples_are_bridged() {
    let mut m: Monitor<64, f64> = Monitor::new(&RigConfig::default()).unwrap();
    let s = |t_ms: u32, q: f64| Sample {
        t_ms,
        t_hot_k: 600.0,
        t_cold_k: 300.0,
        heat_in_w: q,
        work_w: 0.0,
        heat_out_w: None,
        t_hot2_k: None,
    };
    assert_eq!(m.push(&s(0, 1.0)), Pushed::Started);
    assert_eq!(m.push(&s(1000, 1.0)), Pushed::Integrated);
    assert!(matches!(
        m.push(&s(2000, f64::NAN)),
        Pushed::Invalid(Invalid::NonFinite(Channel::HeatIn))
    ));
    assert_eq!(m.push(&s(3000, 1.0)), Pushed::Integrated); // bridged over 2 s
    assert_eq!(m.push(&s(30_000, 1.0)), Pushed::Started); // 27 s > max_gap_s = 10 s
    assert_eq!(m.push(&s(31_000, 1.0)), Pushed::Integrated);
    assert_eq!(m.totals_integrals().duration_s, 4.0);
    assert_eq!(m.invalid_samples(), 1);
    assert_eq!(m.restarts(), 1);
}

#[test]
fn millisecond_clock_wrap_is_a_normal_step() {
    let mut m: Monitor<16, f64> = Monitor::new(&small_window()).unwrap();
    let start = u32::MAX - 1500;
    for i in 0..4u32 {
        let s = Sample {
            t_ms: start.wrapping_add(i * 1000),
            t_hot_k: 600.0,
            t_cold_k: 300.0,
            heat_in_w: 1000.0,
            work_w: 150.0,
            heat_out_w: None,
            t_hot2_k: None,
        };
        m.push(&s);
    }
    assert_eq!(m.totals_integrals().duration_s, 3.0);
    assert_eq!(m.restarts(), 0);
}

#[test]
fn nothing_available_before_two_samples() {
    let mut m: Monitor<16> = Monitor::new(&small_window()).unwrap();
    m.push(&steady(0));
    let w = m.window_metrics();
    assert_eq!(w.efficiency, None);
    assert_eq!(w.carnot_efficiency, None);
    assert_eq!(w.entropy_rate_w_per_k, None);
}

/// Every kind of bad reading on every channel is refused with its own
/// reason, in `f32` and `f64`, and never integrated: NaN and infinities as
/// non-finite, temperatures outside the configured range and powers beyond
/// ±`MAX_POWER_W` as out of range. A temperature range too wide for the
/// monitor's type (1e300 K does not fit an `f32`) still refuses infinity.
#[test]
fn each_bad_reading_is_refused_with_its_reason() {
    fn run<R: heatbound::num::Real + core::fmt::Debug>(config: &RigConfig, wide: bool) {
        let r = R::from_f64;
        let good = |t_ms: u32| Sample::<R> {
            heat_out_w: Some(r(850.0)),
            t_hot2_k: Some(r(601.0)),
            ..steady_in(t_ms)
        };
        let p = f64::from(MAX_POWER_W) * 2.0;
        let mut cases = std::vec![];
        for bad in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
            cases.push((Channel::Hot, bad, Invalid::NonFinite(Channel::Hot)));
            cases.push((Channel::Cold, bad, Invalid::NonFinite(Channel::Cold)));
            cases.push((Channel::Hot2, bad, Invalid::NonFinite(Channel::Hot2)));
            cases.push((Channel::HeatIn, bad, Invalid::NonFinite(Channel::HeatIn)));
            cases.push((Channel::Work, bad, Invalid::NonFinite(Channel::Work)));
            cases.push((Channel::HeatOut, bad, Invalid::NonFinite(Channel::HeatOut)));
        }
        for c in [Channel::HeatIn, Channel::Work, Channel::HeatOut] {
            cases.push((c, p, Invalid::OutOfRange(c)));
            cases.push((c, -p, Invalid::OutOfRange(c)));
        }
        if !wide {
            // The default range is 1 K to 3000 K.
            for c in [Channel::Hot, Channel::Cold, Channel::Hot2] {
                cases.push((c, 0.5, Invalid::OutOfRange(c)));
                cases.push((c, 3500.0, Invalid::OutOfRange(c)));
            }
        }
        for (channel, value, expected) in cases {
            let mut m: Monitor<64, R> = Monitor::new(config).unwrap();
            assert_eq!(m.push(&good(0)), Pushed::Started);
            let mut s = good(1000);
            let v = r(value);
            match channel {
                Channel::Hot => s.t_hot_k = v,
                Channel::Cold => s.t_cold_k = v,
                Channel::Hot2 => s.t_hot2_k = Some(v),
                Channel::HeatIn => s.heat_in_w = v,
                Channel::Work => s.work_w = v,
                Channel::HeatOut => s.heat_out_w = Some(v),
            }
            assert_eq!(
                m.push(&s),
                Pushed::Invalid(expected),
                "{channel:?} = {value} ({})",
                core::any::type_name::<R>()
            );
            assert_eq!(m.valid_samples(), 1);
            assert_eq!(m.totals_integrals().duration_s, R::ZERO);
        }
    }
    let default = RigConfig::default();
    let mut wide = default;
    wide.health.max_temperature_k = 1e300;
    run::<f32>(&default, false);
    run::<f64>(&default, false);
    run::<f32>(&wide, true);
    run::<f64>(&wide, true);
}

/// A temperature range with a NaN end (a configuration built by hand, not
/// through `RigFile::validate`) admits no reading, as a comparison with
/// NaN would have it.
#[test]
fn a_nan_temperature_bound_admits_nothing() {
    let mut config = RigConfig::default();
    config.health.max_temperature_k = f64::NAN;
    let mut m: Monitor<64> = Monitor::new(&config).unwrap();
    assert_eq!(
        m.push(&steady(0)),
        Pushed::Invalid(Invalid::OutOfRange(Channel::Hot))
    );
    let mut m: Monitor<64, f64> = Monitor::new(&config).unwrap();
    assert_eq!(
        m.push(&steady_in::<f64>(0)),
        Pushed::Invalid(Invalid::OutOfRange(Channel::Hot))
    );
}
