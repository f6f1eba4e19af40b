//! Entropy as a state function of the ideal gas.
//!
//! Δs = cv ln(T2/T1) + R ln(v2/v1) (REFERENCES.md, ideal-gas cycles:
//! textbook). So ΔS along any two paths between the same states agrees,
//! a reversible adiabat has ΔS = 0, a free expansion has ΔS = nR ln(V2/V1)
//! although Q = W = 0, and a closed cycle returns ΔS to zero.
mod gas_cycles;

use gas_cycles::{
    CAP, brayton, carnot, diesel, dual, gas, otto, polytropic_loop, run, stirling, summary,
    three_step,
};
use heatbound::MOLAR_GAS_CONSTANT;
use heatbound::gas::{Cycle, EndCondition as E, Gas, Process as P, State, delta_s};
use heatbound_verification::rel_diff;

/// ΔS between two states from the closed form n·Cv·ln(T2/T1) + n·R·ln(V2/V1)
/// (ideal gas, any thermodynamics text: common practice), computed here from
/// the states' temperatures and volumes, not with the core's `delta_s`.
/// Returns ΔS and the sum of the two terms' magnitudes, the scale for a
/// rounding tolerance.
fn closed_form(g: &Gas, a: &State, b: &State) -> (f64, f64) {
    let n = g.moles_mol();
    let thermal = n * g.cv_molar_j_per_mol_k() * (b.temperature_k() / a.temperature_k()).ln();
    let volume = n * MOLAR_GAS_CONSTANT * (b.volume_m3() / a.volume_m3()).ln();
    (thermal + volume, thermal.abs() + volume.abs())
}

fn path_delta_s(c: &Cycle<CAP>) -> f64 {
    c.steps().iter().map(|s| s.delta_s_j_per_k).sum()
}

#[test]
fn two_paths_between_the_same_states_agree() {
    let g = gas(1.0, 1.4);
    let a = State::from_p_t(&g, 1e5, 300.0).expect("valid");
    let b = State::from_p_t(&g, 4e5, 700.0).expect("valid");
    // Path 1: isothermal to p_b, then isobaric to T_b.
    let path1 = run(
        g,
        a,
        &[
            (P::Isothermal, E::PressurePa(4e5)),
            (P::Isobaric, E::TemperatureK(700.0)),
        ],
    );
    // Path 2: isochoric to T_b, then isothermal to p_b.
    let path2 = run(
        g,
        a,
        &[
            (P::Isochoric, E::TemperatureK(700.0)),
            (P::Isothermal, E::PressurePa(4e5)),
        ],
    );
    // Path 3: adiabatic to p_b, then isobaric to T_b.
    let path3 = run(
        g,
        a,
        &[
            (P::Adiabatic, E::PressurePa(4e5)),
            (P::Isobaric, E::TemperatureK(700.0)),
        ],
    );
    // Path 4: polytropic k = 1.2 to V_b, then isochoric to T_b.
    let path4 = run(
        g,
        a,
        &[
            (P::Polytropic { exponent: 1.2 }, E::VolumeM3(b.volume_m3())),
            (P::Isochoric, E::TemperatureK(700.0)),
        ],
    );
    let direct = delta_s(&g, &a, &b);
    for (i, p) in [&path1, &path2, &path3, &path4].into_iter().enumerate() {
        assert!(p.current().approx_eq(&b), "path {} ends elsewhere", i + 1);
        let d = rel_diff(path_delta_s(p), direct);
        assert!(d < 1e-12, "path {}: rel diff {d:e}", i + 1);
        let d = rel_diff(summary(p).total_delta_s_j_per_k, direct);
        assert!(d < 1e-12, "path {} summary: rel diff {d:e}", i + 1);
    }
    // Textbook second form, n(cp ln(T2/T1) − R ln(p2/p1)).
    let other = g.heat_capacity_p_j_per_k() * (700.0f64 / 300.0).ln() - g.nr_j_per_k() * 4f64.ln();
    assert!(rel_diff(direct, other) < 1e-12);
}

#[test]
fn free_expansion_generates_nr_ln_ratio() {
    // Joule free expansion into vacuum: Q = W = 0, so ΔU = 0 and T is
    // unchanged (ideal gas); ΔS = nR ln(V2/V1) (textbook).
    for (moles, ratio) in [(1.0, 2.0), (0.05, 10.0), (3.0, 1.25)] {
        let g = gas(moles, 1.4);
        let before = State::from_v_t(&g, 0.01, 300.0).expect("valid");
        let after = State::from_v_t(&g, 0.01 * ratio, 300.0).expect("valid");
        let ds = delta_s(&g, &before, &after);
        let want = moles * MOLAR_GAS_CONSTANT * f64::ln(ratio);
        assert!(rel_diff(ds, want) < 1e-12, "ΔS = {ds}, nR ln r = {want}");
        assert!(
            ds > 0.0,
            "an irreversible adiabatic change generates entropy"
        );
    }
}

#[test]
fn adiabatic_steps_have_zero_entropy_change() {
    let g = gas(1.0, 1.4);
    let s = State::from_p_t(&g, 1e5, 300.0).expect("valid");
    for end in [
        E::VolumeRatio(0.1),
        E::PressureRatio(20.0),
        E::TemperatureK(900.0),
        E::VolumeM3(1.0),
    ] {
        let step = P::Adiabatic.run(&g, &s, end, &s).expect("reachable");
        assert_eq!(step.delta_s_j_per_k, 0.0);
        assert_eq!(step.heat_j, 0.0);
        // The state function agrees to rounding.
        assert!(delta_s(&g, &step.start, &step.end).abs() < 1e-12 * g.nr_j_per_k());
        // The stored ΔS against the closed form from the step's end states:
        // fails if the end state is off the adiabat.
        let (want, scale) = closed_form(&g, &step.start, &step.end);
        assert!(scale > 1.0, "premise: both terms are large ({scale} J/K)");
        assert!(
            (step.delta_s_j_per_k - want).abs() <= 1e-12 * scale,
            "{end:?}: stored ΔS {} against the closed form {want}",
            step.delta_s_j_per_k
        );
    }
}

#[test]
fn closed_reversible_cycles_return_entropy_to_zero() {
    let cycles = [
        ("Otto", otto(1.4, 8.0, 1800.0)),
        ("Diesel", diesel(1.4, 18.0, 2.0)),
        ("dual", dual(1.4, 16.0, 1.5, 1.6)),
        ("Brayton", brayton(1.4, 8.0, 1300.0)),
        ("Carnot", carnot(1.4, 600.0, 300.0, 3.0)),
        ("Stirling", stirling(1.5, 650.0, 320.0, 1.8)),
        ("three-step", three_step(1.4, 4.0)),
        ("polytropic loop", polytropic_loop(1.4, 6.0, 1.3, 2.5, 1.25)),
    ];
    for (name, c) in cycles {
        let s = summary(&c);
        assert!(s.closed, "{name} does not close");
        assert_eq!(
            s.total_delta_s_j_per_k, 0.0,
            "{name}: state-function ΔS over a closed cycle"
        );
        let scale: f64 = c.steps().iter().map(|s| s.delta_s_j_per_k.abs()).sum();
        assert!(
            path_delta_s(&c).abs() <= 1e-12 * scale,
            "{name}: Σ step ΔS = {:e}",
            path_delta_s(&c)
        );
        // Each step's ΔS against the closed form from its own end states,
        // and the cycle total against the sum of those.
        let g = c.gas();
        let (mut total, mut total_scale) = (0.0, 0.0);
        for (i, step) in c.steps().iter().enumerate() {
            let (want, scale) = closed_form(g, &step.start, &step.end);
            assert!(
                (step.delta_s_j_per_k - want).abs() <= 1e-12 * scale.max(g.nr_j_per_k()),
                "{name} step {}: ΔS {} against the closed form {want}",
                i + 1,
                step.delta_s_j_per_k
            );
            total += want;
            total_scale += scale;
        }
        assert!(
            total_scale > 0.0,
            "{name}: premise, the cycle changes state"
        );
        assert!(
            (s.total_delta_s_j_per_k - total).abs() <= 1e-12 * total_scale,
            "{name}: total ΔS {} against Σ closed form {total:e}",
            s.total_delta_s_j_per_k
        );
        assert!(
            (path_delta_s(&c) - total).abs() <= 1e-12 * total_scale,
            "{name}: Σ step ΔS against Σ closed form"
        );
        // Energy closes too: ΣQ − ΣW = ΣΔU = 0 around the loop.
        assert!((s.heat_in_j - s.heat_out_j - s.net_work_j).abs() <= 1e-12 * s.heat_in_j);
    }
}
