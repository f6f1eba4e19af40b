//! First-order propagation of the channels' systematic errors (GUM,
//! JCGM 100:2008): the partial derivatives of a figure, its combined
//! standard uncertainty, and the budget that lists each input's share.

use serde::Serialize;

use crate::num::{Real, fin};

use super::sample::Channel;

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

    pub(super) fn add(self, o: Self) -> Self {
        Self {
            hot: self.hot + o.hot,
            cold: self.cold + o.cold,
            heat_in: self.heat_in + o.heat_in,
            work: self.work + o.work,
            heat_out: self.heat_out + o.heat_out,
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

    /// The partials in the order of [`Budget::INPUTS`].
    pub(super) fn to_array(self) -> [R; 5] {
        [self.hot, self.cold, self.heat_in, self.work, self.heat_out]
    }
}

/// The uncertainty budget of a window or run (GUM §5.1.3, and the layout of
/// JCGM 100:2008 H.1): for each figure, its sensitivity coefficients
/// `c_i = ∂f/∂x_i` to the five systematic inputs, and the inputs' standard
/// uncertainties `u(x_i)`. Each input contributes `u_i(f) = |c_i|·u(x_i)`,
/// and `u_c(f)² = Σ u_i(f)²` is exactly the variance behind the figure's
/// `u_*` in the monitor's `Metrics`: the coefficients are the partials
/// the monitor combines, not a second derivation.
///
/// The five inputs are independent of one another, so the budget has no
/// correlation terms. The figures themselves are correlated (the margin is
/// `η_C − η`, both moved by the same inputs), which is why the margin has
/// coefficients of its own rather than a sum of two budgets.
///
/// `None` where the figure, or its uncertainty, is not available.
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize)]
pub struct Budget<R> {
    /// `u(x_i)` in the order of [`Budget::INPUTS`]: kelvin for the two
    /// temperature offsets, relative (1 = 100 %) for the three power scales.
    pub u: [R; 5],
    /// `∂η/∂x_i` (engine) or `∂COP/∂x_i` (heat pump, cooler).
    pub performance: Option<[R; 5]>,
    /// `∂η_C/∂x_i` or `∂COP_C/∂x_i`.
    pub bound: Option<[R; 5]>,
    /// `∂(η_C − η)/∂x_i` or `∂(COP_C − COP)/∂x_i`.
    pub margin: Option<[R; 5]>,
    /// `∂S_gen/∂x_i`, J/K per kelvin or per unit of relative scale.
    pub entropy_generated: Option<[R; 5]>,
    /// `∂σ̇/∂x_i`, W/K per kelvin or per unit of relative scale.
    pub entropy_rate: Option<[R; 5]>,
    /// `∂(T0·S_gen)/∂x_i`, J per kelvin or per unit of relative scale: the
    /// exergy destroyed, with `T0` itself measured when it is the cold-side
    /// mean (a configured `T0` is exact).
    pub exergy_destroyed: Option<[R; 5]>,
    /// `∂Q_in/∂x_i`, J per unit of relative scale.
    pub heat_in: [R; 5],
    /// `∂W/∂x_i`, J per unit of relative scale.
    pub work: [R; 5],
    /// `∂Q_out/∂x_i`, J per unit of relative scale: its own scale error
    /// when measured, those of heat in and work when inferred (`Q_in − W`).
    pub heat_out: [R; 5],
}

impl<R: Real> Budget<R> {
    /// The inputs, in the order of every array: the hot- and cold-side
    /// temperature offsets, then the heat-in, work and heat-out scale errors.
    pub const INPUTS: [Channel; 5] = [
        Channel::Hot,
        Channel::Cold,
        Channel::HeatIn,
        Channel::Work,
        Channel::HeatOut,
    ];

    /// Each input's contribution `c_i·u(x_i)` to the figure whose
    /// coefficients are `c` (signed: its square is the input's share of the
    /// variance).
    pub fn contributions(&self, c: &[R; 5]) -> [R; 5] {
        let mut out = [R::ZERO; 5];
        for ((o, ci), ui) in out.iter_mut().zip(c).zip(&self.u) {
            *o = *ci * *ui;
        }
        out
    }

    /// `Σ (c_i·u(x_i))²`, summed as the monitor sums it: the squared
    /// combined standard uncertainty of the figure whose coefficients are `c`.
    pub fn variance(&self, c: &[R; 5]) -> Option<R> {
        let [hot, cold, heat_in, work, heat_out] = *c;
        Partials {
            hot,
            cold,
            heat_in,
            work,
            heat_out,
        }
        .variance(&self.u)
    }
}

/// The standard uncertainty from a variance, if finite.
#[inline]
pub(super) fn std_uncertainty<R: Real>(var: Option<R>) -> Option<R> {
    var.and_then(|v| fin(v.sqrt()))
}
