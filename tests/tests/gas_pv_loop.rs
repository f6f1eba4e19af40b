//! Measured p-V loops: indicated work and the polytropic-exponent fit.
//!
//! An ideal cycle's p-V loop is sampled (evenly in volume along each step,
//! corners included) and its trapezoid-rule area compared with the cycle's
//! analytic net work: the trapezoid rule's error is O(h²) (textbook
//! numerical analysis), so doubling the samples should quarter the error.
mod gas_cycles;

use gas_cycles::{CAP, otto, stirling, summary};
use heatbound::gas::{
    Cycle, Process, PvError, indicated_power_w, indicated_work_j, polytropic_exponent,
};

/// Samples the loop of `c` with `m` points per expansion/compression step
/// and one (its start) per isochoric step; returns (p, V).
fn sample(c: &Cycle<CAP>, m: usize) -> (Vec<f64>, Vec<f64>) {
    let gamma = c.gas().gamma();
    let (mut p, mut v) = (Vec::new(), Vec::new());
    for step in c.steps() {
        let (pa, va) = (step.start.pressure_pa(), step.start.volume_m3());
        let vb = step.end.volume_m3();
        let k = match step.process {
            Process::Isochoric => {
                p.push(pa);
                v.push(va);
                continue;
            }
            Process::Isothermal => 1.0,
            Process::Adiabatic => gamma,
            Process::Isobaric => 0.0,
            Process::Polytropic { exponent } => exponent,
            _ => unreachable!("no other processes in these cycles"),
        };
        for j in 0..m {
            let vj = va + (vb - va) * j as f64 / m as f64;
            v.push(vj);
            p.push(pa * (va / vj).powf(k));
        }
    }
    (p, v)
}

/// Relative error of the sampled loop's work at `total` samples per cycle
/// for a cycle with two curved steps and two isochores.
fn rel_error(c: &Cycle<CAP>, total: usize) -> f64 {
    let m = total / 2 - 1;
    let (p, v) = sample(c, m);
    assert_eq!(p.len(), total);
    let w = indicated_work_j(&p, &v).expect("valid loop");
    let exact = summary(c).net_work_j;
    ((w - exact) / exact).abs()
}

#[test]
fn sampled_otto_loop_converges_quadratically() {
    let c = otto(1.4, 8.0, 1800.0);
    let sizes = [36, 72, 144, 288, 576, 1152];
    let errors: Vec<f64> = sizes.iter().map(|&n| rel_error(&c, n)).collect();
    for (pair, n) in errors.windows(2).zip(sizes) {
        let order = (pair[0] / pair[1]).log2();
        // Second order: the error falls by ~4× per doubling (order ≈ 2);
        // the first pair is still slightly off the asymptote.
        assert!(
            (1.8..2.2).contains(&order),
            "M = {n} → {}: order {order}",
            2 * n
        );
    }
    // At 360 samples per cycle (180 per adiabat) the trapezoid area is
    // within 1.5e-4 relative of the analytic net work of this Otto cycle
    // (measured 1.25e-4; 36 samples give 1.4e-2, 1152 give 1.2e-5).
    let e360 = rel_error(&c, 360);
    assert!(e360 < 1.5e-4, "rel error at 360 samples: {e360:e}");
}

#[test]
fn sampled_stirling_loop_converges_quadratically() {
    let c = stirling(1.5, 650.0, 320.0, 1.8);
    let e90 = rel_error(&c, 90);
    let e180 = rel_error(&c, 180);
    let e360 = rel_error(&c, 360);
    assert!(
        (e90 / e180 - 4.0).abs() < 0.3 && (e180 / e360 - 4.0).abs() < 0.3,
        "{e90:e} {e180:e} {e360:e}"
    );
    // At 360 samples: within 2.5e-6 relative of the analytic net work
    // (measured 1.96e-6; the isotherms curve less than the Otto adiabats).
    assert!(e360 < 2.5e-6, "rel error at 360 samples: {e360:e}");
}

#[test]
fn indicated_power_of_the_sampled_loop() {
    // 1 cycle per revolution at 1200 rpm: P = W·rpm/60 (definition).
    let c = stirling(1.5, 650.0, 320.0, 1.8);
    let (p, v) = sample(&c, 1000);
    let w = indicated_work_j(&p, &v).expect("valid loop");
    let power = indicated_power_w(w, 1200.0).expect("valid speed");
    assert!((power - 20.0 * w).abs() < 1e-12 * power.abs());
}

#[test]
fn polytropic_fit_recovers_the_exponent() {
    // Synthetic p V^k = C data: the least-squares slope of ln p on ln V is
    // exactly −k (definition of the polytrope), up to rounding.
    for k in [0.0, 0.5, 1.0, 1.25, 1.3, 1.4, 5.0 / 3.0, 2.2] {
        for (v0, v1, n) in [(1e-4, 1e-3, 50), (2e-5, 2.1e-5, 8), (0.3, 0.05, 2)] {
            let v: Vec<f64> = (0..n)
                .map(|i| v0 + (v1 - v0) * i as f64 / (n - 1) as f64)
                .collect();
            let p: Vec<f64> = v.iter().map(|x| 3e5 * (v0 / x).powf(k)).collect();
            let fit = polytropic_exponent(&p, &v).expect("valid data");
            assert!((fit - k).abs() < 1e-9, "k = {k}: fit {fit}");
        }
    }
}

#[test]
fn polytropic_fit_on_a_sampled_adiabat_gives_gamma() {
    let c = otto(1.4, 8.0, 1800.0);
    let (p, v) = sample(&c, 100);
    // The first 100 samples are the adiabatic compression.
    let fit = polytropic_exponent(&p[..100], &v[..100]).expect("valid data");
    assert!((fit - 1.4).abs() < 1e-9, "fit {fit}");
}

#[test]
fn bad_pv_input_is_a_typed_error() {
    assert_eq!(
        polytropic_exponent(&[1e5, 2e5, 3e5], &[1e-3, 2e-3]),
        Err(PvError::LengthMismatch {
            pressures: 3,
            volumes: 2
        })
    );
    assert_eq!(
        polytropic_exponent(&[1e5], &[1e-3]),
        Err(PvError::TooFewPoints { needed: 2, got: 1 })
    );
    assert_eq!(
        polytropic_exponent(&[1e5, -2e5], &[1e-3, 2e-3]),
        Err(PvError::NonPositive { index: 1 })
    );
    assert_eq!(
        polytropic_exponent(&[1e5, 2e5], &[1e-3, 1e-3]),
        Err(PvError::NoVolumeSpread)
    );
    assert_eq!(
        indicated_work_j(&[1e5, 2e5, 3e5], &[1e-3, 2e-3]),
        Err(PvError::LengthMismatch {
            pressures: 3,
            volumes: 2
        })
    );
}
