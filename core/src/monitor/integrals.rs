//! The integrals: the integrands of a sample, the trapezoid between two, and
//! the raw sums of a window or run from which every figure follows.

use serde::Serialize;

use crate::num::{Real, lanes};

use super::sample::Sample;

/// The raw integrals of a window or run: everything the figures are derived
/// from. These travel on the wire so the host can recompute every figure.
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize)]
pub struct Integrals<R> {
    /// Integrated time, seconds (gaps excluded).
    pub duration_s: R,
    /// `Q_in = ∫q_in dt`, joules.
    pub heat_in_j: R,
    /// `W = ∫w dt`, joules.
    pub work_j: R,
    /// `Q_out`: `∫q_out dt` if measured, else `Q_in − W`, joules.
    pub heat_out_j: R,
    /// Whether heat out was measured.
    pub heat_out_measured: bool,
    /// `∫q_in/T_hot dt`, J/K.
    pub entropy_in_j_per_k: R,
    /// `∫q_out/T_cold dt`, J/K.
    pub entropy_out_j_per_k: R,
    /// `∫q_in/T_hot² dt`, J/K²: sensitivity to a hot-side offset.
    pub hot_sensitivity: R,
    /// `∫q_out/T_cold² dt`, J/K²: sensitivity to a cold-side offset.
    pub cold_sensitivity: R,
    /// With heat out inferred: `∫q_in/T_cold dt`, J/K (else 0).
    pub cold_heat_in_j_per_k: R,
    /// With heat out inferred: `∫w/T_cold dt`, J/K (else 0).
    pub cold_work_j_per_k: R,
    /// With heat out measured: `∫T_cold dt`, K·s, whose time mean is the
    /// default T0 (else 0).
    pub cold_temperature_integral_k_s: R,
    /// `∫T_hot dt`, K·s: with T0 it gives the heat lost to the room,
    /// `UA·∫(T_hot − T0) dt`.
    pub hot_temperature_integral_k_s: R,
    /// Whether a second hot-side sensor was read.
    pub hot2_measured: bool,
    /// With a second hot-side sensor: `∫(T_hot − T_hot2) dt`, K·s (else 0).
    pub hot_pair_integral_k_s: R,
}

/// How many integrals the monitor keeps beside time, and where each sits
/// in a [`Terms`]. The first eight lanes of `f32` fill two SSE registers
/// (one AVX register), which keeps the per-sample sums cheap; the last two
/// serve the diagnosis.
pub(super) const TERMS: usize = 10;
/// `q_in`.
const QI: usize = 0;
/// `w`.
const W: usize = 1;
/// `q_in/T_hot`.
const SI: usize = 2;
/// `q_in/T_hot²`.
const SI2: usize = 3;
/// Measured: `q_out/T_cold`; inferred: `q_in/T_cold`.
const CA: usize = 4;
/// Measured: `q_out`; inferred: `w/T_cold`.
const CB: usize = 5;
/// Measured: `q_out/T_cold²`; inferred: `q_in/T_cold²`.
const CA2: usize = 6;
/// Measured: `T_cold` (its time integral gives the default T0); inferred:
/// `w/T_cold²`.
const CB2: usize = 7;
/// `T_hot`.
const HT: usize = 8;
/// `T_hot − T_hot2` (0 without a second hot sensor).
const HP: usize = 9;

/// The integrands at one sample, or the contribution of one trapezoid.
/// Arrays, so that sums and trapezoids vectorise. Time is kept apart, in
/// whole milliseconds, where integer sums are exact.
pub(super) type Terms<R> = [R; TERMS];

/// The integrands of a sample.
pub(super) fn integrands<R: Real>(s: &Sample<R>, measured: bool) -> Terms<R> {
    let inv_h = R::ONE / s.t_hot_k;
    let inv_c = R::ONE / s.t_cold_k;
    let (qi, w) = (s.heat_in_w, s.work_w);
    let si = qi * inv_h;
    let th = s.t_hot_k;
    let pair = s.t_hot2_k.map_or(R::ZERO, |t2| th - t2);
    if measured {
        let qo = s.heat_out_w.unwrap_or(R::ZERO);
        let ca = qo * inv_c;
        [
            qi,
            w,
            si,
            si * inv_h,
            ca,
            qo,
            ca * inv_c,
            s.t_cold_k,
            th,
            pair,
        ]
    } else {
        let (ca, cb) = (qi * inv_c, w * inv_c);
        [
            qi,
            w,
            si,
            si * inv_h,
            ca,
            cb,
            ca * inv_c,
            cb * inv_c,
            th,
            pair,
        ]
    }
}

/// The trapezoid between integrands `a` and `b`, `dt_ms` milliseconds apart.
#[inline]
pub(super) fn trapezoid<R: Real>(a: &Terms<R>, b: &Terms<R>, dt_ms: u32) -> Terms<R> {
    let h = R::half_ms(dt_ms);
    let mut out = [R::ZERO; TERMS];
    lanes::<TERMS>(|i| out[i] = h * (a[i] + b[i]));
    out
}

/// The integrals from summed terms over `duration_ms`.
pub(super) fn integrals_of<R: Real>(
    v: &Terms<R>,
    duration_ms: u64,
    measured: bool,
    hot2: bool,
) -> Integrals<R> {
    let (cold, cold_sensitivity, heat_out_j, cold_heat_in, cold_work, cold_time) = if measured {
        (v[CA], v[CA2], v[CB], R::ZERO, R::ZERO, v[CB2])
    } else {
        (
            v[CA] - v[CB],
            v[CA2] - v[CB2],
            v[QI] - v[W],
            v[CA],
            v[CB],
            R::ZERO,
        )
    };
    Integrals {
        duration_s: R::from_ms(duration_ms),
        heat_in_j: v[QI],
        work_j: v[W],
        heat_out_j,
        heat_out_measured: measured,
        entropy_in_j_per_k: v[SI],
        entropy_out_j_per_k: cold,
        hot_sensitivity: v[SI2],
        cold_sensitivity,
        cold_heat_in_j_per_k: cold_heat_in,
        cold_work_j_per_k: cold_work,
        cold_temperature_integral_k_s: cold_time,
        hot_temperature_integral_k_s: v[HT],
        hot2_measured: hot2,
        hot_pair_integral_k_s: if hot2 { v[HP] } else { R::ZERO },
    }
}
