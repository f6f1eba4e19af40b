//! No conversion panics or returns NaN/inf, for any input (NaN and inf included).
//!
//! Property tests (proptest); the requirement is the project's own (no
//! panics, no non-finite output), not an outside source.
use heatbound::sensor::health::{ChannelHealth, HealthConfig};
use heatbound::sensor::power;
use heatbound::sensor::rtd::Rtd;
use heatbound::sensor::thermocouple::ThermocoupleType;
use heatbound::sensor::water;
use proptest::prelude::*;

fn ok_finite64<E>(r: Result<f64, E>) -> bool {
    r.map_or(true, f64::is_finite)
}
fn ok_finite32<E>(r: Result<f32, E>) -> bool {
    r.map_or(true, f32::is_finite)
}

/// Any f64 bit pattern, plus values near the interesting ranges.
fn any_f64() -> impl Strategy<Value = f64> {
    prop_oneof![
        proptest::num::f64::ANY,
        -300.0f64..1500.0,
        -10.0f64..80.0,
        Just(f64::NAN),
        Just(f64::INFINITY),
        Just(f64::NEG_INFINITY),
    ]
}

fn any_f32() -> impl Strategy<Value = f32> {
    prop_oneof![
        proptest::num::f32::ANY,
        -10.0f32..120.0,
        Just(f32::NAN),
        Just(f32::INFINITY),
        Just(f32::NEG_INFINITY),
        Just(f32::MAX),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    #[test]
    fn thermocouples_never_panic(t in any_f64(), e in any_f64(), cj in any_f64()) {
        for tc in [ThermocoupleType::K, ThermocoupleType::J, ThermocoupleType::T] {
            prop_assert!(ok_finite64(tc.emf_mv(t)));
            prop_assert!(ok_finite64(tc.seebeck_mv_per_c(t)));
            prop_assert!(ok_finite64(tc.temperature_c(e)));
            prop_assert!(ok_finite64(tc.temperature_c(e / 20.0)));
            prop_assert!(ok_finite64(tc.temperature_c_with_cold_junction(e / 20.0, cj)));
            prop_assert!(ok_finite64(tc.emf_mv_with_cold_junction(t, cj)));
        }
    }

    #[test]
    fn rtds_never_panic(t in any_f64(), r in any_f64(), r0 in any_f64()) {
        for rtd in [Rtd::PT100, Rtd::PT1000] {
            prop_assert!(ok_finite64(rtd.resistance_ohm(t)));
            prop_assert!(ok_finite64(rtd.temperature_c(r)));
            prop_assert!(ok_finite64(rtd.temperature_c(r / 3.0 + 100.0)));
        }
        if let Ok(rtd) = Rtd::new(r0) {
            prop_assert!(ok_finite64(rtd.resistance_ohm(t)));
            prop_assert!(ok_finite64(rtd.temperature_c(r)));
        }
    }

    #[test]
    fn power_never_panics(a in any_f32(), b in any_f32(), c in any_f32(), d in any_f32()) {
        prop_assert!(ok_finite32(power::electrical_power_w(a, b)));
        prop_assert!(ok_finite32(power::shaft_power_w(a, b)));
        prop_assert!(ok_finite32(power::heat_flow_w(a, b, c)));
        prop_assert!(ok_finite32(power::heat_flow_volumetric_w(a, b, c, d)));
        prop_assert!(ok_finite32(power::mass_flow_kg_s(a, b)));
        prop_assert!(ok_finite32(power::litres_per_minute_to_m3_s(a)));
        prop_assert!(ok_finite32(water::cp_j_per_kg_k(a)));
        prop_assert!(ok_finite32(water::density_kg_per_m3(a)));
    }

    #[test]
    fn health_never_panics(
        limits in proptest::collection::vec(any_f32(), 4),
        stuck in any::<u16>(),
        timeout in any::<u32>(),
        samples in proptest::collection::vec((any::<u32>(), any_f32()), 0..50),
    ) {
        let config = HealthConfig::new(limits[0], limits[1])
            .with_rate_limit_per_s(limits[2])
            .with_stuck(limits[3], stuck)
            .with_stale_timeout_ms(timeout);
        let mut ch = ChannelHealth::new(config);
        for (t, v) in samples {
            let f = ch.update(t, v);
            prop_assert!(f.bits() < 32);
            let _ = ch.check_stale(t);
        }
    }
}
