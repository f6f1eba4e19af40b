//! Builders of the standard ideal-gas cycles, shared by the `gas_*` suites.
//!
//! Each runs the cycle through `heatbound::gas::Cycle` from 1 mol at
//! 100 kPa and 300 K unless stated; the closed forms they are checked
//! against live beside the checks.
#![allow(dead_code)] // each suite uses a different subset

use heatbound::gas::{Cycle, CycleSummary, EndCondition, Gas, Process, State};

/// Capacity of the test cycles.
pub const CAP: usize = 8;

/// Start pressure of the builders [Pa].
pub const P1_PA: f64 = 100_000.0;
/// Start temperature of the builders [K].
pub const T1_K: f64 = 300.0;

/// `moles` of gas with heat-capacity ratio `gamma`.
pub fn gas(moles: f64, gamma: f64) -> Gas {
    Gas::with_gamma(moles, gamma).expect("valid gas")
}

/// Runs `steps` from `start` and returns the cycle; panics (failing the
/// test) if a step cannot be made.
pub fn run(gas: Gas, start: State, steps: &[(Process, EndCondition)]) -> Cycle<CAP> {
    let mut c = Cycle::new(gas, start);
    for (i, (p, e)) in steps.iter().enumerate() {
        c.push(*p, *e)
            .unwrap_or_else(|err| panic!("step {}: {err}", i + 1));
    }
    c
}

/// The summary of a cycle built by [`run`].
pub fn summary(c: &Cycle<CAP>) -> CycleSummary {
    c.summary().expect("non-empty cycle")
}

fn start(g: &Gas) -> State {
    State::from_p_t(g, P1_PA, T1_K).expect("valid start")
}

use EndCondition as E;
use Process as P;

/// Otto: adiabatic compression by `r`, isochoric heating to `t3_k`,
/// adiabatic expansion by `r`, isochoric cooling.
pub fn otto(gamma: f64, r: f64, t3_k: f64) -> Cycle<CAP> {
    let g = gas(1.0, gamma);
    let s = start(&g);
    run(
        g,
        s,
        &[
            (P::Adiabatic, E::VolumeRatio(1.0 / r)),
            (P::Isochoric, E::TemperatureK(t3_k)),
            (P::Adiabatic, E::VolumeRatio(r)),
            (P::Isochoric, E::ToStart),
        ],
    )
}

/// Diesel: adiabatic compression by `r`, isobaric heating with cut-off
/// ratio `rc`, adiabatic expansion to V1, isochoric cooling.
pub fn diesel(gamma: f64, r: f64, rc: f64) -> Cycle<CAP> {
    let g = gas(1.0, gamma);
    let s = start(&g);
    run(
        g,
        s,
        &[
            (P::Adiabatic, E::VolumeRatio(1.0 / r)),
            (P::Isobaric, E::VolumeRatio(rc)),
            (P::Adiabatic, E::VolumeM3(s.volume_m3())),
            (P::Isochoric, E::ToStart),
        ],
    )
}

/// Dual (limited pressure): adiabatic compression by `r`, isochoric
/// heating by pressure ratio `rp`, isobaric heating by `rc`, adiabatic
/// expansion to V1, isochoric cooling.
pub fn dual(gamma: f64, r: f64, rp: f64, rc: f64) -> Cycle<CAP> {
    let g = gas(1.0, gamma);
    let s = start(&g);
    run(
        g,
        s,
        &[
            (P::Adiabatic, E::VolumeRatio(1.0 / r)),
            (P::Isochoric, E::PressureRatio(rp)),
            (P::Isobaric, E::VolumeRatio(rc)),
            (P::Adiabatic, E::VolumeM3(s.volume_m3())),
            (P::Isochoric, E::ToStart),
        ],
    )
}

/// Brayton (Joule): adiabatic compression by pressure ratio `rp`, isobaric
/// heating to `t3_k`, adiabatic expansion to p1, isobaric cooling.
pub fn brayton(gamma: f64, rp: f64, t3_k: f64) -> Cycle<CAP> {
    let g = gas(1.0, gamma);
    let s = start(&g);
    run(
        g,
        s,
        &[
            (P::Adiabatic, E::PressureRatio(rp)),
            (P::Isobaric, E::TemperatureK(t3_k)),
            (P::Adiabatic, E::PressurePa(P1_PA)),
            (P::Isobaric, E::ToStart),
        ],
    )
}

/// Carnot between `th_k` and `tc_k`, isothermal expansion ratio `a`,
/// starting at 1 MPa and `th_k`.
pub fn carnot(gamma: f64, th_k: f64, tc_k: f64, a: f64) -> Cycle<CAP> {
    let g = gas(1.0, gamma);
    let s = State::from_p_t(&g, 1e6, th_k).expect("valid start");
    // State 4 lies on the start's adiabat at tc: T V^(γ−1) = const.
    let v4 = s.volume_m3() * (th_k / tc_k).powf(1.0 / (gamma - 1.0));
    run(
        g,
        s,
        &[
            (P::Isothermal, E::VolumeRatio(a)),
            (P::Adiabatic, E::TemperatureK(tc_k)),
            (P::Isothermal, E::VolumeM3(v4)),
            (P::Adiabatic, E::ToStart),
        ],
    )
}

/// Stirling without regenerator, gas with `cv/R = cv_over_r`, between
/// `th_k` and `tc_k`, compression ratio `r`, starting at `tc_k`.
pub fn stirling(cv_over_r: f64, th_k: f64, tc_k: f64, r: f64) -> Cycle<CAP> {
    let g = gas(1.0, 1.0 + 1.0 / cv_over_r);
    let s = State::from_p_t(&g, P1_PA, tc_k).expect("valid start");
    run(
        g,
        s,
        &[
            (P::Isothermal, E::VolumeRatio(1.0 / r)),
            (P::Isochoric, E::TemperatureK(th_k)),
            (P::Isothermal, E::VolumeRatio(r)),
            (P::Isochoric, E::ToStart),
        ],
    )
}

/// Three-step cycle: isochoric heating by pressure ratio `rp`, adiabatic
/// expansion back to p1, isobaric compression back to the start.
pub fn three_step(gamma: f64, rp: f64) -> Cycle<CAP> {
    let g = gas(1.0, gamma);
    let s = start(&g);
    run(
        g,
        s,
        &[
            (P::Isochoric, E::PressureRatio(rp)),
            (P::Adiabatic, E::PressurePa(P1_PA)),
            (P::Isobaric, E::ToStart),
        ],
    )
}

/// A polytropic loop: compression by `r` with exponent `k1`, isochoric
/// heating by pressure ratio `rp`, expansion back to V1 with exponent `k2`,
/// isochoric return to the start.
pub fn polytropic_loop(gamma: f64, r: f64, k1: f64, rp: f64, k2: f64) -> Cycle<CAP> {
    let g = gas(1.0, gamma);
    let s = start(&g);
    run(
        g,
        s,
        &[
            (P::Polytropic { exponent: k1 }, E::VolumeRatio(1.0 / r)),
            (P::Isochoric, E::PressureRatio(rp)),
            (P::Polytropic { exponent: k2 }, E::VolumeM3(s.volume_m3())),
            (P::Isochoric, E::ToStart),
        ],
    )
}
