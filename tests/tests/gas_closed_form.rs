//! Ideal-gas cycle efficiencies against their closed forms.
//!
//! Each cycle is run step by step through `heatbound::gas::Cycle` and its
//! efficiency `net work / heat in` compared with the textbook closed form
//! to a relative 1e-9, at three or more parameter sets. The formulas are
//! the cold-air-standard results quoted in shared/REFERENCES.md: "standard
//! results in engineering-thermodynamics textbooks", e.g. Çengel & Boles,
//! *Thermodynamics: An Engineering Approach*, ch. 9 (gas power cycles).
mod gas_cycles;

use gas_cycles::{brayton, carnot, diesel, dual, otto, stirling, summary, three_step};
use heatbound::MOLAR_GAS_CONSTANT;
use heatbound::gas::{Cycle, Gas, State, delta_s};
use heatbound_verification::rel_diff;

const REL_TOL: f64 = 1e-9;

fn efficiency<const N: usize>(c: &Cycle<N>) -> f64 {
    let s = c.summary().expect("non-empty");
    assert!(s.closed, "cycle does not close");
    s.efficiency
        .expect("closed cycle with heat in has an efficiency")
}

fn check(name: &str, got: f64, want: f64) {
    let d = rel_diff(got, want);
    assert!(
        d <= REL_TOL,
        "{name}: got {got}, closed form {want}, rel diff {d:e}"
    );
}

/// Otto: η = 1 − r^(1−γ). Source: textbook (REFERENCES.md, ideal-gas cycles).
fn otto_eta(gamma: f64, r: f64) -> f64 {
    1.0 - r.powf(1.0 - gamma)
}

/// Diesel: η = 1 − (rc^γ − 1)/(γ r^(γ−1) (rc − 1)). Source: textbook
/// (REFERENCES.md, ideal-gas cycles).
fn diesel_eta(gamma: f64, r: f64, rc: f64) -> f64 {
    1.0 - (rc.powf(gamma) - 1.0) / (gamma * r.powf(gamma - 1.0) * (rc - 1.0))
}

/// Dual: η = 1 − (rp rc^γ − 1)/(r^(γ−1) [(rp − 1) + γ rp (rc − 1)]).
/// Source: textbook (REFERENCES.md, ideal-gas cycles).
fn dual_eta(gamma: f64, r: f64, rp: f64, rc: f64) -> f64 {
    1.0 - (rp * rc.powf(gamma) - 1.0)
        / (r.powf(gamma - 1.0) * ((rp - 1.0) + gamma * rp * (rc - 1.0)))
}

/// Brayton: η = 1 − rp^(−(γ−1)/γ). Source: textbook (REFERENCES.md).
fn brayton_eta(gamma: f64, rp: f64) -> f64 {
    1.0 - rp.powf(-(gamma - 1.0) / gamma)
}

/// Stirling without regenerator: η = ηC / (1 + (cv/R)·ηC/ln r).
/// Source: textbook (REFERENCES.md, ideal-gas cycles).
fn stirling_eta(cv_over_r: f64, th: f64, tc: f64, r: f64) -> f64 {
    let eta_c = 1.0 - tc / th;
    eta_c / (1.0 + cv_over_r * eta_c / r.ln())
}

/// Three-step cycle (isochoric heating 1→2, adiabatic expansion 2→3 back
/// to p1, isobaric compression 3→1), derived here from first principles:
///
/// - 1→2, V const, p2 = rp·p1, so T2 = rp·T1 and Q12 = n·Cv·T1·(rp − 1) > 0.
/// - 2→3, adiabatic to p3 = p1: p V^γ = const gives V3 = V1·rp^(1/γ);
///   Q23 = 0.
/// - 3→1, p const: T3 = T1·V3/V1 = T1·rp^(1/γ), so
///   Q31 = −n·Cp·T1·(rp^(1/γ) − 1) < 0.
/// - η = 1 − |Q31|/Q12 = 1 − γ·(rp^(1/γ) − 1)/(rp − 1).
fn three_step_eta(gamma: f64, rp: f64) -> f64 {
    1.0 - gamma * (rp.powf(1.0 / gamma) - 1.0) / (rp - 1.0)
}

#[test]
fn otto_matches_closed_form() {
    for (gamma, r, t3) in [
        (1.4, 8.0, 1800.0),
        (1.3, 10.0, 2200.0),
        (5.0 / 3.0, 6.0, 1500.0),
        (1.35, 12.5, 2500.0),
    ] {
        check("Otto", efficiency(&otto(gamma, r, t3)), otto_eta(gamma, r));
    }
}

#[test]
fn diesel_matches_closed_form() {
    for (gamma, r, rc) in [
        (1.4, 18.0, 2.0),
        (1.4, 16.0, 2.5),
        (1.35, 20.0, 1.5),
        (1.3, 22.0, 3.0),
    ] {
        check(
            "Diesel",
            efficiency(&diesel(gamma, r, rc)),
            diesel_eta(gamma, r, rc),
        );
    }
}

#[test]
fn dual_matches_closed_form() {
    for (gamma, r, rp, rc) in [
        (1.4, 16.0, 1.5, 1.6),
        (1.4, 14.0, 2.0, 1.2),
        (1.33, 18.0, 1.2, 2.0),
    ] {
        check(
            "dual",
            efficiency(&dual(gamma, r, rp, rc)),
            dual_eta(gamma, r, rp, rc),
        );
    }
}

#[test]
fn dual_reduces_to_otto_and_diesel() {
    // rc → 1 is Otto, rp → 1 is Diesel (textbook limits of the dual cycle).
    check(
        "dual rc=1",
        dual_eta(1.4, 8.0, 2.0, 1.0),
        otto_eta(1.4, 8.0),
    );
    check(
        "dual rp=1",
        dual_eta(1.4, 18.0, 1.0, 2.0),
        diesel_eta(1.4, 18.0, 2.0),
    );
}

#[test]
fn brayton_matches_closed_form() {
    for (gamma, rp, t3) in [
        (1.4, 8.0, 1300.0),
        (1.4, 15.0, 1600.0),
        (1.3, 5.0, 1100.0),
        (5.0 / 3.0, 3.0, 900.0),
    ] {
        check(
            "Brayton",
            efficiency(&brayton(gamma, rp, t3)),
            brayton_eta(gamma, rp),
        );
    }
}

#[test]
fn carnot_matches_closed_form() {
    // Carnot: η = 1 − Tc/Th. Source: textbook (REFERENCES.md).
    for (gamma, th, tc, a) in [
        (1.4, 600.0, 300.0, 3.0),
        (5.0 / 3.0, 650.0, 320.0, 1.8),
        (1.3, 1200.0, 290.0, 10.0),
    ] {
        let c = carnot(gamma, th, tc, a);
        let s = summary(&c);
        check("Carnot", efficiency(&c), 1.0 - tc / th);
        check(
            "Carnot bound",
            s.carnot_efficiency.expect("closed"),
            1.0 - tc / th,
        );
        // Heat is exchanged only at Th and Tc, so the mean temperatures are
        // those (DESIGN.md §4: heat-weighted means reduce to the readings).
        check(
            "Carnot T_in",
            s.mean_heat_in_temperature_k.expect("closed"),
            th,
        );
        check(
            "Carnot T_out",
            s.mean_heat_out_temperature_k.expect("closed"),
            tc,
        );
    }
}

#[test]
fn stirling_without_regenerator_matches_closed_form() {
    for (cv_over_r, th, tc, r) in [
        (1.5, 650.0, 320.0, 1.8),
        (2.5, 900.0, 300.0, 2.0),
        (1.5, 1000.0, 350.0, 3.5),
        (3.0, 500.0, 300.0, 1.3),
    ] {
        check(
            "Stirling",
            efficiency(&stirling(cv_over_r, th, tc, r)),
            stirling_eta(cv_over_r, th, tc, r),
        );
    }
}

#[test]
fn three_step_matches_derived_closed_form() {
    for (gamma, rp) in [(1.4, 3.0), (1.4, 6.0), (5.0 / 3.0, 2.0), (1.3, 10.0)] {
        check(
            "three-step",
            efficiency(&three_step(gamma, rp)),
            three_step_eta(gamma, rp),
        );
    }
}

// ---- REFERENCES.md worked values, to the five digits stated ----------------

#[test]
fn references_worked_cycle_values() {
    // REFERENCES.md: worked example values, stated to 5 decimals.
    let otto = efficiency(&otto(1.4, 8.0, 1800.0));
    assert!((otto - 0.56472).abs() <= 5e-6, "Otto r=8: {otto}");
    let diesel = efficiency(&diesel(1.4, 18.0, 2.0));
    assert!(
        (diesel - 0.63158).abs() <= 5e-6,
        "Diesel r=18 rc=2: {diesel}"
    );
    let brayton = efficiency(&brayton(1.4, 8.0, 1300.0));
    assert!((brayton - 0.44796).abs() <= 5e-6, "Brayton rp=8: {brayton}");
}

#[test]
fn references_worked_air_entropy_change() {
    // REFERENCES.md: worked example — air, cp = 1.005, R = 0.287 kJ/(kg·K),
    // 300 K, 100 kPa → 600 K, 500 kPa: Δs = 0.23470 kJ/(kg·K).
    let (cp, r_specific) = (1.005, 0.287);
    // 1 kg of air: n·R_molar = m·R_specific.
    let moles = 287.0 / MOLAR_GAS_CONSTANT;
    let air = Gas::with_gamma(moles, cp / (cp - r_specific)).expect("valid");
    let s1 = State::from_p_t(&air, 100e3, 300.0).expect("valid");
    let s2 = State::from_p_t(&air, 500e3, 600.0).expect("valid");
    let ds_kj_per_kg_k = delta_s(&air, &s1, &s2) / 1000.0;
    assert!(
        (ds_kj_per_kg_k - 0.23470).abs() <= 5e-6,
        "Δs = {ds_kj_per_kg_k}"
    );
    // The second textbook form, cp ln(T2/T1) − R ln(p2/p1), agrees.
    let other_form = cp * 2f64.ln() - r_specific * 5f64.ln();
    assert!(rel_diff(ds_kj_per_kg_k, other_form) < 1e-12);
}
