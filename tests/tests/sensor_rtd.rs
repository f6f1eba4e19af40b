//! Platinum RTDs against IEC 60751:2008.
//!
//! Source of the check values: IEC 60751:2008 Pt100 table (ITS-90
//! Callendar–Van Dusen), as quoted in shared/REFERENCES.md; rounded to
//! 0.0001 Ω, hence ±0.00005 Ω.
use heatbound::sensor::rtd::{Rtd, RtdError};

/// IEC 60751:2008 Pt100 table, via REFERENCES.md: (°C, Ω).
const PT100_TABLE: [(f64, f64); 7] = [
    (-200.0, 18.5201),
    (-100.0, 60.2558),
    (0.0, 100.0),
    (100.0, 138.5055),
    (200.0, 175.8560),
    (400.0, 247.0920),
    (850.0, 390.4811),
];
const TABLE_TOL_OHM: f64 = 0.00005;

/// dR/dt of a Pt100 in Ω/°C, from the table neighbours (for the inverse tolerance).
fn pt100_slope_ohm_per_c(t_c: f64) -> f64 {
    let r = |t: f64| Rtd::PT100.resistance_ohm(t).unwrap();
    let (a, b) = ((t_c - 1.0).max(-200.0), (t_c + 1.0).min(850.0));
    (r(b) - r(a)) / (b - a)
}

#[test]
fn pt100_forward_matches_iec_60751_table() {
    for (t_c, r_ohm) in PT100_TABLE {
        let got = Rtd::PT100.resistance_ohm(t_c).unwrap();
        assert!(
            (got - r_ohm).abs() <= TABLE_TOL_OHM,
            "{t_c} °C: {got} Ω vs {r_ohm} Ω"
        );
    }
}

#[test]
fn pt100_inverse_matches_iec_60751_table() {
    for (t_c, r_ohm) in PT100_TABLE {
        let got = Rtd::PT100.temperature_c(r_ohm).unwrap();
        let tol_c = TABLE_TOL_OHM / pt100_slope_ohm_per_c(t_c) + 1e-9;
        assert!(
            (got - t_c).abs() <= tol_c,
            "{r_ohm} Ω: {got} °C vs {t_c} °C"
        );
    }
}

#[test]
fn pt1000_is_ten_times_pt100() {
    // IEC 60751:2008: the same W(t) = R(t)/R0 for every R0.
    for (t_c, r_ohm) in PT100_TABLE {
        let got = Rtd::PT1000.resistance_ohm(t_c).unwrap();
        assert!(
            (got - 10.0 * r_ohm).abs() <= 10.0 * TABLE_TOL_OHM,
            "{t_c} °C: {got} Ω"
        );
        let back = Rtd::PT1000.temperature_c(10.0 * r_ohm).unwrap();
        assert!((back - Rtd::PT100.temperature_c(r_ohm).unwrap()).abs() < 1e-9);
    }
}

#[test]
fn round_trip_over_full_range() {
    let mut worst = 0.0f64;
    for rtd in [Rtd::PT100, Rtd::PT1000, Rtd::new(500.0).unwrap()] {
        for i in 0..=10_500 {
            let t = -200.0 + i as f64 * 0.1;
            let back = rtd.temperature_c(rtd.resistance_ohm(t).unwrap()).unwrap();
            worst = worst.max((back - t).abs());
        }
    }
    println!("RTD max round-trip error {worst:e} °C");
    assert!(worst < 1e-9, "{worst}");
}

#[test]
fn continuity_at_zero() {
    // C applies only below 0 °C; the quadratic and quartic branches meet at R0.
    let below = Rtd::PT100.temperature_c(100.0 - 1e-9).unwrap();
    let above = Rtd::PT100.temperature_c(100.0 + 1e-9).unwrap();
    assert!(below < 0.0 && above > 0.0 && (above - below) < 1e-8);
    assert_eq!(Rtd::PT100.temperature_c(100.0).unwrap(), 0.0);
}

#[test]
fn errors() {
    assert!(matches!(
        Rtd::PT100.resistance_ohm(-200.5),
        Err(RtdError::TemperatureOutOfRange { .. })
    ));
    assert!(matches!(
        Rtd::PT100.temperature_c(400.0),
        Err(RtdError::ResistanceOutOfRange { .. })
    ));
    assert_eq!(
        Rtd::PT100.temperature_c(400.0).unwrap_err().to_string(),
        "Pt100 resistance 400 Ω is outside the IEC 60751 range 18.5201 to 390.4811 Ω"
    );
    assert!(matches!(
        Rtd::PT1000.temperature_c(f64::NAN),
        Err(RtdError::NonFiniteResistance { .. })
    ));
    assert!(matches!(
        Rtd::PT1000.resistance_ohm(f64::NEG_INFINITY),
        Err(RtdError::NonFiniteTemperature { .. })
    ));
    assert!(matches!(Rtd::new(-100.0), Err(RtdError::InvalidR0 { .. })));
}
