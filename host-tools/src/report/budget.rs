//! The uncertainty budget as a report shows it (GUM, JCGM 100:2008, §5.1.3
//! and the tables of annex H): one row per input quantity with its
//! estimate, standard uncertainty, sensitivity coefficient, contribution
//! and share of the combined variance.
//!
//! The model's inputs are the five systematic errors of the monitor
//! ([`heatbound::monitor::Budget`]): an offset of each temperature (estimate
//! 0 K) and a scale factor of each power (estimate 1). They are independent,
//! so a budget has no correlation rows and its shares sum to 1.

use heatbound::monitor::{Budget, Channel};

/// One input quantity's line of a budget.
#[derive(Clone, Debug, PartialEq)]
pub struct BudgetRow {
    /// The input.
    pub input: Channel,
    /// Its symbol.
    pub quantity: &'static str,
    /// What it is, in words.
    pub description: &'static str,
    /// Its unit: `K` for an offset, empty for a scale factor.
    pub unit: &'static str,
    /// Its estimate: 0 K for an offset, 1 for a scale factor.
    pub estimate: f64,
    /// Its standard uncertainty `u(x_i)`.
    pub u: f64,
    /// The sensitivity coefficient `c_i = ∂y/∂x_i`; its magnitude only
    /// when [`BudgetTable::signed`] is false. `None` when not known (an
    /// input with no uncertainty, from a replay).
    pub sensitivity: Option<f64>,
    /// The contribution `u_i(y) = |c_i|·u(x_i)`, in the figure's unit.
    pub contribution: f64,
    /// `u_i(y)²/u_c(y)²`; `None` when `u_c` is zero or unknown.
    pub share: Option<f64>,
    /// Why the row contributes nothing, when it does not by construction.
    pub note: Option<&'static str>,
}

/// The budget of one figure.
#[derive(Clone, Debug, PartialEq)]
pub struct BudgetTable {
    /// The figure's symbol: `η`, `η_C`, `η_C − η`, `σ̇` (or the COPs).
    pub symbol: &'static str,
    /// What it is, in words.
    pub name: &'static str,
    /// Its unit (empty when it has none).
    pub unit: &'static str,
    /// Its value.
    pub estimate: Option<f64>,
    /// The combined standard uncertainty `u_c(y)`.
    pub u_c: Option<f64>,
    /// The coverage factor.
    pub k: f64,
    /// Whether the coefficients carry their sign.
    pub signed: bool,
    /// One row per input, in the order of [`Budget::INPUTS`].
    pub rows: Vec<BudgetRow>,
}

/// Symbol, name, unit and estimate of each input, in the order of
/// [`Budget::INPUTS`].
const INPUTS: [(&str, &str, &str, f64); 5] = [
    ("δT_hot", "hot-side temperature offset", "K", 0.0),
    ("δT_cold", "cold-side temperature offset", "K", 0.0),
    ("s_in", "heat-in scale factor", "", 1.0),
    ("s_W", "work scale factor", "", 1.0),
    ("s_out", "heat-out scale factor", "", 1.0),
];

/// What a figure is, for its table.
#[derive(Clone, Copy, Debug)]
pub struct Figure {
    /// Its symbol.
    pub symbol: &'static str,
    /// Its name.
    pub name: &'static str,
    /// Its unit.
    pub unit: &'static str,
}

/// The four figures a budget is shown for, by mode: performance, bound,
/// margin, σ̇.
pub fn figures(reverse: bool) -> [Figure; 4] {
    let f = |symbol, name, unit| Figure { symbol, name, unit };
    if reverse {
        [
            f("COP", "coefficient of performance", ""),
            f("COP_C", "Carnot COP", ""),
            f("COP_C − COP", "Carnot margin", ""),
            f("σ̇", "entropy generation rate", "W/K"),
        ]
    } else {
        [
            f("η", "efficiency W/Q_in", ""),
            f("η_C", "Carnot efficiency 1 − T_c/T_h", ""),
            f("η_C − η", "Carnot margin", ""),
            f("σ̇", "entropy generation rate", "W/K"),
        ]
    }
}

/// A finite value, else `None`.
fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// Why a row contributes nothing by construction.
fn note_for(i: usize, heat_out_measured: bool) -> Option<&'static str> {
    (i == 4 && !heat_out_measured).then_some("heat out not measured: Q_out = Q_in − W")
}

impl BudgetTable {
    /// The table of a figure from the monitor's budget: `c` its signed
    /// coefficients (`None` when the figure has none), `u` the inputs'
    /// standard uncertainties. The combined uncertainty is the monitor's
    /// own sum ([`Budget::variance`]).
    pub fn from_coefficients(
        figure: Figure,
        estimate: Option<f64>,
        budget: &Budget<f64>,
        c: Option<&[f64; 5]>,
        k: f64,
        heat_out_measured: bool,
    ) -> BudgetTable {
        let var = c.and_then(|c| budget.variance(c));
        let u_c = var.and_then(|v| finite(v.sqrt()));
        let contributions = c.map(|c| budget.contributions(c));
        let rows = INPUTS
            .iter()
            .enumerate()
            .zip(Budget::<f64>::INPUTS)
            .map(|((i, &(quantity, description, unit, x)), input)| {
                let u = budget.u.get(i).copied().unwrap_or(0.0);
                let ci = c.and_then(|c| c.get(i).copied()).and_then(finite);
                let contribution = contributions
                    .and_then(|k| k.get(i).copied())
                    .and_then(finite)
                    .map_or(0.0, f64::abs);
                BudgetRow {
                    input,
                    quantity,
                    description,
                    unit,
                    estimate: x,
                    u,
                    sensitivity: ci,
                    contribution,
                    share: share(contribution, var),
                    note: note_for(i, heat_out_measured),
                }
            })
            .collect();
        BudgetTable {
            symbol: figure.symbol,
            name: figure.name,
            unit: figure.unit,
            estimate: estimate.and_then(finite),
            u_c,
            k,
            signed: true,
            rows,
        }
    }

    /// The sum of the shares: 1 whenever `u_c` is known and not zero.
    pub fn share_sum(&self) -> Option<f64> {
        self.rows.iter().map(|r| r.share).sum()
    }
}

/// `u_i²/u_c²`.
fn share(contribution: f64, var: Option<f64>) -> Option<f64> {
    var.filter(|v| *v > 0.0)
        .and_then(|v| finite(contribution * contribution / v))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shares_sum_to_one_and_zero_uncertainty_has_none() {
        // η = 0.15 with u(s_in) = u(s_W) = 0.01: contributions 0.0015 each
        // (hand derivation: ∂η/∂s_in = −η, ∂η/∂s_W = +η), half the variance each.
        let budget = Budget {
            u: [1.0, 0.5, 0.01, 0.01, 0.02],
            ..Budget::default()
        };
        let c = [0.0, 0.0, -0.15, 0.15, 0.0];
        let t = BudgetTable::from_coefficients(
            figures(false)[0],
            Some(0.15),
            &budget,
            Some(&c),
            2.0,
            false,
        );
        assert_eq!(t.share_sum().map(|s| (s * 1e12).round() / 1e12), Some(1.0));
        assert!((t.rows[2].share.unwrap() - 0.5).abs() < 1e-12);
        assert!((t.u_c.unwrap() - 0.0015 * 2f64.sqrt()).abs() < 1e-15);
        assert_eq!(t.rows[4].note, note_for(4, false));
        // No coefficients: nothing to share, and no NaN.
        let t = BudgetTable::from_coefficients(figures(false)[1], None, &budget, None, 2.0, true);
        assert_eq!(t.u_c, None);
        assert!(
            t.rows
                .iter()
                .all(|r| r.share.is_none() && r.contribution == 0.0)
        );
    }
}
