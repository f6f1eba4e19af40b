//! First-order propagation of the channels' systematic errors (GUM,
//! JCGM 100:2008): the partial derivatives of a figure, and its combined
//! standard uncertainty.

use crate::num::{Real, fin};

/// Partial derivatives of one figure with respect to the five systematic
/// errors: hot offset, cold offset (K), heat-in, work and heat-out scale.
#[derive(Clone, Copy, Debug, Default)]
pub(super) struct Partials<R> {
    pub(super) hot: R,
    pub(super) cold: R,
    pub(super) heat_in: R,
    pub(super) work: R,
    pub(super) heat_out: R,
}

impl<R: Real> Partials<R> {
    pub(super) fn sub(self, o: Self) -> Self {
        Self {
            hot: self.hot - o.hot,
            cold: self.cold - o.cold,
            heat_in: self.heat_in - o.heat_in,
            work: self.work - o.work,
            heat_out: self.heat_out - o.heat_out,
        }
    }

    pub(super) fn scale(self, s: R) -> Self {
        Self {
            hot: self.hot * s,
            cold: self.cold * s,
            heat_in: self.heat_in * s,
            work: self.work * s,
            heat_out: self.heat_out * s,
        }
    }

    /// `Σ (∂f/∂x_i · u_i)²`, GUM eq. (10) for uncorrelated inputs: the
    /// squared combined standard uncertainty.
    pub(super) fn variance(self, u: &[R; 5]) -> Option<R> {
        let t = |d: R, ui: R| {
            let x = d * ui;
            x * x
        };
        fin(t(self.hot, u[0])
            + t(self.cold, u[1])
            + t(self.heat_in, u[2])
            + t(self.work, u[3])
            + t(self.heat_out, u[4]))
    }

    /// `√(Σ (∂f/∂x_i · u_i)²)`: the combined standard uncertainty.
    pub(super) fn combine(self, u: &[R; 5]) -> Option<R> {
        std_uncertainty(self.variance(u))
    }
}

/// The standard uncertainty from a variance, if finite.
#[inline]
pub(super) fn std_uncertainty<R: Real>(var: Option<R>) -> Option<R> {
    var.and_then(|v| fin(v.sqrt()))
}
