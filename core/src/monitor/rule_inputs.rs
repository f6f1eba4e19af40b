//! What the alarm rules read: the window figures, the latest hot-side
//! temperature and the channel faults, computed up front or on demand.

use crate::num::Real;

use super::figures::{AlarmFigures, ClearBands, Prepared};
use super::health::Faults;
use super::integrals::Integrals;
use super::trend::Trends;

/// The window's alarm inputs, from `Monitor::alarm_inputs`: its integrals,
/// from which the figures follow when the rules ask.
#[derive(Clone, Copy, Debug)]
pub struct WindowAlarmInputs<'a, R> {
    pub(super) integrals: Integrals<R>,
    pub(super) prepared: &'a Prepared<R>,
    pub(super) t_hot_k: Option<R>,
    pub(super) faults: Faults,
    pub(super) trends: Trends<R>,
}

impl<R: Real> WindowAlarmInputs<'_, R> {
    /// Every figure, uncertainties included, for inspection or logging.
    pub fn resolve(&self) -> AlarmInputs<R> {
        AlarmInputs {
            figures: self.figures_with_variances(),
            t_hot_k: self.t_hot_k,
            faults: self.faults,
            trends: self.trends,
        }
    }
}

impl<R: Real> RuleInputs for WindowAlarmInputs<'_, R> {
    type Real = R;
    #[inline]
    fn figures(&self) -> AlarmFigures<R> {
        self.integrals.alarm_figures_with::<false>(self.prepared)
    }
    fn figures_with_variances(&self) -> AlarmFigures<R> {
        self.integrals.alarm_figures_with::<true>(self.prepared)
    }
    #[inline]
    fn second_law_clear(&self, bands: &ClearBands<R>) -> bool {
        self.integrals.second_law_clear(self.prepared, bands)
    }
    fn t_hot_k(&self) -> Option<R> {
        self.t_hot_k
    }
    fn faults(&self) -> Faults {
        self.faults
    }
    fn trends(&self) -> Trends<R> {
        self.trends
    }
}

/// What the rules look at, every figure computed up front: the window
/// figures, the latest hot-side temperature and the channel faults. Replays
/// that already hold the figures build this; the monitor's live inputs are a
/// [`WindowAlarmInputs`], whose
/// `resolve()` gives this form.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AlarmInputs<R: Real> {
    /// The sliding window's figures that the rules read.
    pub figures: AlarmFigures<R>,
    /// Latest valid hot-side temperature, kelvin.
    pub t_hot_k: Option<R>,
    /// Channel faults.
    pub faults: Faults,
    /// Where the margin and the hot side are heading.
    pub trends: Trends<R>,
}

/// Where the rules read their inputs.
///
/// [`AlarmInputs`] holds every figure up front. The monitor's
/// [`WindowAlarmInputs`] works nothing out until the rules ask, and they
/// first ask [`RuleInputs::second_law_clear`]: each second-law rule tests
/// `a − k·u` with `k·u ≥ 0`, so a reading that clears with `u = 0` clears
/// whatever `u` is, and the usual reading, far from the bound, is told
/// clear from the window's sums by cross-multiplying. Only a reading near a
/// limit has its figures and their uncertainties worked out. The verdicts
/// are the same either way.
pub trait RuleInputs {
    /// The type the figures are in.
    type Real: Real;
    /// The figures; the `var_*` fields may be `None` here.
    fn figures(&self) -> AlarmFigures<Self::Real>;
    /// The figures with their variances.
    fn figures_with_variances(&self) -> AlarmFigures<Self::Real>;
    /// Whether the four second-law rules are certainly clear at `bands`,
    /// told without working out the figures; `false` when that cannot be
    /// told cheaply (the default), and the rules then read
    /// [`RuleInputs::figures_with_variances`].
    fn second_law_clear(&self, bands: &ClearBands<Self::Real>) -> bool {
        let _ = bands;
        false
    }
    /// Latest valid hot-side temperature, kelvin.
    fn t_hot_k(&self) -> Option<Self::Real>;
    /// Channel faults.
    fn faults(&self) -> Faults;
    /// The recent windows' trends.
    fn trends(&self) -> Trends<Self::Real>;
}

impl<R: Real> RuleInputs for AlarmInputs<R> {
    type Real = R;
    fn figures(&self) -> AlarmFigures<R> {
        self.figures
    }
    fn figures_with_variances(&self) -> AlarmFigures<R> {
        self.figures
    }
    fn t_hot_k(&self) -> Option<R> {
        self.t_hot_k
    }
    fn faults(&self) -> Faults {
        self.faults
    }
    fn trends(&self) -> Trends<R> {
        self.trends
    }
}
