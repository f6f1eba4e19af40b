//! Helpers shared by the integration suites.
//!
//! Each suite includes this file with `mod common;` and uses only part of it.
#![allow(dead_code)]

use heatbound::config::{RigConfig, RigFile};
use heatbound::monitor::Sample;
use heatbound::num::Real;

/// Validates `file`, panicking with the error if it is rejected.
pub fn config(file: RigFile) -> RigConfig {
    file.validate()
        .unwrap_or_else(|e| panic!("test configuration rejected: {e}"))
}

/// A sample in `R` from f64 readings.
pub fn sample<R: Real>(
    t_ms: u32,
    t_hot_k: f64,
    t_cold_k: f64,
    heat_in_w: f64,
    work_w: f64,
    heat_out_w: Option<f64>,
) -> Sample<R> {
    Sample {
        t_ms,
        t_hot_k: R::from_f64(t_hot_k),
        t_cold_k: R::from_f64(t_cold_k),
        heat_in_w: R::from_f64(heat_in_w),
        work_w: R::from_f64(work_w),
        heat_out_w: heat_out_w.map(R::from_f64),
        t_hot2_k: None,
    }
}

/// An independent f64 recomputation of DESIGN.md §4: plain trapezoid sums of
/// the integrands between consecutive accepted points, written without any
/// of the monitor's code.
#[derive(Clone, Copy, Debug, Default)]
pub struct Trapezoid {
    pub duration_s: f64,
    pub heat_in_j: f64,
    pub work_j: f64,
    pub heat_out_j: f64,
    pub entropy_in_j_per_k: f64,
    pub entropy_out_j_per_k: f64,
    /// `∫T_cold dt`, K·s: its time mean is the default T0 with heat out measured.
    pub cold_temperature_integral_k_s: f64,
    prev: Option<(u32, [f64; 6])>,
}

impl Trapezoid {
    /// Integrand values of one sample: q_in, w, q_out (inferred as q_in − w
    /// when `heat_out_w` is `None`), q_in/T_hot, q_out/T_cold, T_cold.
    fn integrands(
        t_hot_k: f64,
        t_cold_k: f64,
        heat_in_w: f64,
        work_w: f64,
        heat_out_w: Option<f64>,
    ) -> [f64; 6] {
        let q_out = heat_out_w.unwrap_or(heat_in_w - work_w);
        [
            heat_in_w,
            work_w,
            q_out,
            heat_in_w / t_hot_k,
            q_out / t_cold_k,
            t_cold_k,
        ]
    }

    /// Adds a sample in any `R`, widened exactly to f64; joins it to the
    /// previous one unless `restart`.
    pub fn push_sample<R: Real>(&mut self, s: &Sample<R>, restart: bool) {
        let v = Self::integrands(
            s.t_hot_k.to_f64(),
            s.t_cold_k.to_f64(),
            s.heat_in_w.to_f64(),
            s.work_w.to_f64(),
            s.heat_out_w.map(R::to_f64),
        );
        if let (Some((t0, a)), false) = (self.prev, restart) {
            let dt = f64::from(s.t_ms.wrapping_sub(t0)) * 1e-3;
            self.duration_s += dt;
            self.heat_in_j += 0.5 * dt * (a[0] + v[0]);
            self.work_j += 0.5 * dt * (a[1] + v[1]);
            self.heat_out_j += 0.5 * dt * (a[2] + v[2]);
            self.entropy_in_j_per_k += 0.5 * dt * (a[3] + v[3]);
            self.entropy_out_j_per_k += 0.5 * dt * (a[4] + v[4]);
            self.cold_temperature_integral_k_s += 0.5 * dt * (a[5] + v[5]);
        }
        self.prev = Some((s.t_ms, v));
    }

    /// `T_h = Q_in / ∫q_in/T_hot dt`.
    pub fn hot_mean_k(&self) -> f64 {
        self.heat_in_j / self.entropy_in_j_per_k
    }

    /// `T_c = Q_out / ∫q_out/T_cold dt`.
    pub fn cold_mean_k(&self) -> f64 {
        self.heat_out_j / self.entropy_out_j_per_k
    }

    /// The default T0 with heat out measured: the time mean of `T_cold`.
    pub fn cold_time_mean_k(&self) -> f64 {
        self.cold_temperature_integral_k_s / self.duration_s
    }

    /// `η = W / Q_in`.
    pub fn efficiency(&self) -> f64 {
        self.work_j / self.heat_in_j
    }

    /// `η_C = 1 − T_c/T_h`.
    pub fn carnot_efficiency(&self) -> f64 {
        1.0 - self.cold_mean_k() / self.hot_mean_k()
    }

    /// Engine `S_gen = ∫q_out/T_cold + Q_loss/T0 − ∫q_in/T_hot`; pass
    /// `t0_k = None` for heat out inferred (no loss term).
    pub fn entropy_generated_j_per_k(&self, t0_k: Option<f64>) -> f64 {
        let loss = match t0_k {
            Some(t0) => (self.heat_in_j - self.work_j - self.heat_out_j) / t0,
            None => 0.0,
        };
        self.entropy_out_j_per_k + loss - self.entropy_in_j_per_k
    }
}

/// A small deterministic generator (SplitMix64), so long runs need no crate.
#[derive(Clone, Debug)]
pub struct SplitMix(pub u64);

impl SplitMix {
    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// Uniform in [−1, 1).
    pub fn symmetric(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 52) as f64 - 1.0
    }
}
