//! Power channels (worked examples) and channel health flags.
//!
//! Sources: P = V·I and P = 2π·n·τ/60 are definitions (SI); the calorimetric
//! example uses IAPWS-95 cp and ρ at 0.101325 MPa (PyPI `iapws`, see
//! tests/vectors/water_iapws95.csv). Health semantics are common practice.
use heatbound::sensor::health::{ChannelHealth, HealthConfig, HealthFlags};
use heatbound::sensor::power::{self, PowerError};
use heatbound_verification::rel_diff;

#[test]
fn electrical_power_worked_example() {
    // A 48 V heater cartridge drawing 6.25 A: 300 W (definition P = V·I).
    assert_eq!(power::electrical_power_w(48.0, 6.25).unwrap(), 300.0);
    assert_eq!(power::electrical_power_w(-12.0, 2.0).unwrap(), -24.0);
    assert!(matches!(
        power::electrical_power_w(f32::MAX, 2.0),
        Err(PowerError::Overflow { .. })
    ));
    assert!(matches!(
        power::electrical_power_w(1.0, f32::INFINITY),
        Err(PowerError::NonFinite { input: "current_a" })
    ));
}

#[test]
fn shaft_power_worked_example() {
    // 1200 rpm at 1.5 N·m: ω = 2π·1200/60 = 125.664 rad/s, P = 188.496 W (SI definition).
    let p = power::shaft_power_w(1200.0, 1.5).unwrap();
    assert!(rel_diff(f64::from(p), 188.495_559) < 1e-6, "{p}");
    assert!(power::shaft_power_w(f32::NAN, 1.0).is_err());
}

#[test]
fn calorimetric_worked_example() {
    // Cooling water 0.1 kg/s, 15 → 25 °C. IAPWS-95 (PyPI iapws) cp(20 °C) = 4184.05 J/(kg·K):
    // Q = 0.1 · 4184.05 · 10 = 4184.05 W.
    let q = power::heat_flow_w(0.1, 15.0, 25.0).unwrap();
    assert!(rel_diff(f64::from(q), 4184.05) < 1e-4, "{q}");
    // Same loop metered as 6 L/min at the 15 °C inlet: ρ(15 °C) = 999.10 kg/m³ (IAPWS-95).
    let v = power::litres_per_minute_to_m3_s(6.0).unwrap();
    let q_v = power::heat_flow_volumetric_w(v, 15.0, 15.0, 25.0).unwrap();
    assert!(
        rel_diff(f64::from(q_v), 1e-4 * 999.10 * 4184.05 * 10.0) < 1e-4,
        "{q_v}"
    );
    // Water above the fit range is a typed error.
    assert!(matches!(
        power::heat_flow_w(0.1, 50.0, 99.0),
        Err(PowerError::Water(_))
    ));
}

fn config() -> HealthConfig {
    HealthConfig::new(0.0, 500.0)
        .with_rate_limit_per_s(10.0)
        .with_stuck(0.05, 5)
        .with_stale_timeout_ms(1_000)
}

#[test]
fn non_finite_raised_and_cleared() {
    let mut ch = ChannelHealth::new(config());
    assert!(ch.update(0, 20.0).is_ok());
    assert_eq!(ch.update(100, f32::NAN), HealthFlags::NON_FINITE);
    assert_eq!(ch.update(200, f32::NEG_INFINITY), HealthFlags::NON_FINITE);
    assert!(ch.update(300, 20.1).is_ok());
}

#[test]
fn out_of_range_raised_and_cleared() {
    let mut ch = ChannelHealth::new(config());
    assert_eq!(ch.update(0, -1.0), HealthFlags::OUT_OF_RANGE);
    assert!(ch.update(1_000, 1.0).is_ok());
    assert_eq!(ch.update(100_000, 501.0), HealthFlags::OUT_OF_RANGE);
    assert!(ch.update(200_000, 499.0).is_ok());
}

#[test]
fn rate_raised_and_cleared() {
    let mut ch = ChannelHealth::new(config());
    assert!(ch.update(0, 100.0).is_ok());
    assert!(ch.update(1_000, 109.0).is_ok()); // 9 per second
    assert_eq!(ch.update(1_100, 111.0), HealthFlags::RATE); // 20 per second
    assert!(ch.update(2_100, 112.0).is_ok());
    // Same time stamp: a change beyond the resolution is an infinite rate.
    assert_eq!(ch.update(2_100, 113.0), HealthFlags::RATE);
}

#[test]
fn stuck_raised_and_cleared() {
    let mut ch = ChannelHealth::new(config());
    for i in 0..4 {
        assert!(
            ch.update(i * 100, 50.0 + 0.01 * i as f32).is_ok(),
            "sample {i}"
        );
    }
    assert_eq!(ch.update(400, 50.02), HealthFlags::STUCK); // 5th within 0.05
    assert_eq!(ch.update(500, 50.0), HealthFlags::STUCK);
    assert!(ch.update(600, 50.5).is_ok()); // moved: cleared
}

#[test]
fn stale_raised_and_cleared() {
    let mut ch = ChannelHealth::new(config());
    assert_eq!(ch.check_stale(0), HealthFlags::STALE); // nothing yet
    ch.update(10_000, 20.0);
    assert!(ch.check_stale(11_000).is_ok());
    assert_eq!(ch.check_stale(11_001), HealthFlags::STALE);
    // A non-finite sample does not refresh the channel.
    ch.update(11_500, f32::NAN);
    assert_eq!(ch.check_stale(11_600), HealthFlags::STALE);
    ch.update(12_000, 20.5);
    assert!(ch.check_stale(12_500).is_ok());
}

#[test]
fn u32_millisecond_wrap() {
    let mut ch = ChannelHealth::new(config());
    let t0 = u32::MAX - 499;
    assert!(ch.update(t0, 100.0).is_ok());
    // 1000 ms later, across the wrap: 9 per second, no RATE.
    let t1 = t0.wrapping_add(1_000);
    assert_eq!(t1, 500);
    assert!(ch.update(t1, 109.0).is_ok());
    assert!(ch.check_stale(t1.wrapping_add(1_000)).is_ok());
    assert_eq!(ch.check_stale(t1.wrapping_add(1_001)), HealthFlags::STALE);
    // A fast change across the wrap is still seen.
    let mut ch = ChannelHealth::new(config());
    ch.update(u32::MAX, 100.0);
    assert_eq!(ch.update(99, 105.0), HealthFlags::RATE); // 5 in 100 ms
}

#[test]
fn flags_combine() {
    let mut ch = ChannelHealth::new(config());
    ch.update(0, 100.0);
    let f = ch.update(100, 600.0);
    assert_eq!(f, HealthFlags::OUT_OF_RANGE | HealthFlags::RATE);
    assert_eq!(f.to_string(), "out_of_range|rate");
}
