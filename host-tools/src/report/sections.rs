//! What the log and the CSV paths share: the run totals' lines, figures
//! with their expanded uncertainty, the budgets of the monitor's figures,
//! and a steady period's cells.

use heatbound::config::Mode;
use heatbound::monitor::{Budget, FigureSettings, Metrics};

use super::budget::{BudgetTable, figures};
use super::format::{NA, duration, fixed, kelvin, prefixed, si, sig};
use super::{SteadyPeriod, TotalRow};

/// Standard uncertainties that [`Metrics`] does not carry.
#[derive(Clone, Copy, Debug, Default)]
pub(super) struct Extra {
    /// u(Q_in), J.
    pub heat_in: Option<f64>,
    /// u(W), J.
    pub work: Option<f64>,
    /// u(Q_out), J.
    pub heat_out: Option<f64>,
    /// u(T0·S_gen), J.
    pub exergy: Option<f64>,
}

impl Extra {
    /// From the monitor's budget.
    pub fn of(b: &Budget<f64>) -> Extra {
        let u = |c: Option<&[f64; 5]>| c.and_then(|c| b.variance(c)).map(f64::sqrt);
        Extra {
            heat_in: u(Some(&b.heat_in)),
            work: u(Some(&b.work)),
            heat_out: u(Some(&b.heat_out)),
            exergy: u(b.exergy_destroyed.as_ref()),
        }
    }
}

/// The figure of merit and its bound, with their standard uncertainties.
pub(super) fn merit(m: &Metrics<f64>, mode: Mode) -> [(Option<f64>, Option<f64>); 2] {
    if mode.is_reverse() {
        [(m.cop, m.u_cop), (m.carnot_cop, m.u_carnot_cop)]
    } else {
        [
            (m.efficiency, m.u_efficiency),
            (m.carnot_efficiency, m.u_carnot_efficiency),
        ]
    }
}

/// A finite value, else `None`.
fn finite(x: Option<f64>) -> Option<f64> {
    x.filter(|x| x.is_finite())
}

/// Decimals that show `u` to two significant digits.
fn decimals_for(u: f64) -> usize {
    if !(u.is_finite() && u > 0.0) {
        return 4;
    }
    // Two significant digits of U, at most 12 decimals.
    #[allow(clippy::cast_possible_truncation)]
    let d = 1 - u.log10().floor() as i32;
    usize::try_from(d.clamp(0, 12)).unwrap_or(0)
}

/// `value ± U` of a dimensionless figure: `0.1923 ± 0.0042`.
pub(super) fn pm(value: Option<f64>, u: Option<f64>, k: f64) -> String {
    let (Some(v), big_u) = (finite(value), finite(u).map(|u| u * k)) else {
        return NA.to_owned();
    };
    match big_u {
        Some(bu) => {
            let d = decimals_for(bu);
            format!("{} ± {}", fixed(Some(v), d), fixed(Some(bu), d))
        }
        None => fixed(Some(v), 4),
    }
}

/// `value ± U unit` with an SI prefix suited to the value.
pub(super) fn pm_si(value: Option<f64>, u: Option<f64>, k: f64, unit: &str) -> String {
    let Some(v) = finite(value) else {
        return NA.to_owned();
    };
    let (f, unit) = prefixed(v, unit);
    format!("{} {unit}", pm(Some(v / f), finite(u).map(|u| u / f), k))
}

/// One line of the run totals.
fn row(
    quantity: &str,
    symbol: &str,
    value: String,
    expanded: String,
    relative: String,
    note: impl Into<String>,
) -> TotalRow {
    TotalRow {
        quantity: quantity.to_owned(),
        symbol: symbol.to_owned(),
        value,
        expanded,
        relative,
        note: note.into(),
    }
}

/// `U` relative to `v`, as a percentage.
fn relative(v: Option<f64>, u: Option<f64>, k: f64) -> String {
    match (finite(v), finite(u)) {
        (Some(v), Some(u)) if v != 0.0 => format!("{} %", sig(100.0 * k * u / v.abs(), 2)),
        _ => String::new(),
    }
}

/// An energy (or any SI quantity) line: value and U in the same prefix.
fn si_row(
    quantity: &str,
    symbol: &str,
    v: Option<f64>,
    u: Option<f64>,
    k: f64,
    unit: &str,
    note: impl Into<String>,
) -> TotalRow {
    let value = finite(v);
    let (f, unit_p) = prefixed(value.unwrap_or(0.0), unit);
    let expanded = match finite(u) {
        Some(u) => {
            let d = decimals_for(k * u / f);
            format!("{} {unit_p}", fixed(Some(k * u / f), d))
        }
        None => "—".to_owned(),
    };
    let shown = match (value, finite(u)) {
        (Some(v), Some(u)) => format!(
            "{} {unit_p}",
            fixed(Some(v / f), decimals_for(k * u / f).max(1))
        ),
        (Some(v), None) => si(v, unit),
        _ => NA.to_owned(),
    };
    row(quantity, symbol, shown, expanded, relative(v, u, k), note)
}

/// A dimensionless figure's line.
fn plain_row(
    quantity: &str,
    symbol: &str,
    v: Option<f64>,
    u: Option<f64>,
    k: f64,
    note: impl Into<String>,
) -> TotalRow {
    let (value, expanded) = match (finite(v), finite(u)) {
        (Some(v), Some(u)) => {
            let d = decimals_for(k * u);
            (fixed(Some(v), d), fixed(Some(k * u), d))
        }
        (Some(v), None) => (fixed(Some(v), 4), "—".to_owned()),
        _ => (NA.to_owned(), "—".to_owned()),
    };
    row(quantity, symbol, value, expanded, relative(v, u, k), note)
}

/// The run totals' lines.
pub(super) fn total_rows(
    m: &Metrics<f64>,
    extra: &Extra,
    k: f64,
    settings: &FigureSettings,
    heat_out_measured: bool,
) -> Vec<TotalRow> {
    let mode = settings.mode;
    let dur = finite(Some(m.duration_s)).filter(|d| *d > 0.0);
    let mean = |j: f64| dur.map(|d| si(j / d, "W"));
    let mean_note = |j: f64| mean(j).map_or_else(String::new, |p| format!("mean {p}"));
    let [(perf, u_perf), (bound, u_bound)] = merit(m, mode);
    let (perf_name, bound_name, sym_p, sym_b, sym_m) = if mode.is_reverse() {
        let what = if mode == Mode::HeatPump {
            "heat delivered over work"
        } else {
            "heat drawn over work"
        };
        (
            format!("Coefficient of performance ({what})"),
            "Carnot COP",
            "COP",
            "COP_C",
            "COP_C − COP",
        )
    } else {
        (
            "Efficiency".to_owned(),
            "Carnot efficiency",
            "η",
            "η_C",
            "η_C − η",
        )
    };
    let mut rows = vec![
        row(
            "Integrated time",
            "Δt",
            dur.map_or_else(|| NA.to_owned(), duration),
            "—".to_owned(),
            String::new(),
            "gaps longer than max_gap_s are not integrated",
        ),
        si_row(
            "Heat in",
            "Q_in",
            Some(m.heat_in_j),
            extra.heat_in,
            k,
            "J",
            mean_note(m.heat_in_j),
        ),
        si_row(
            "Work",
            "W",
            Some(m.work_j),
            extra.work,
            k,
            "J",
            mean_note(m.work_j),
        ),
        si_row(
            "Heat out",
            "Q_out",
            Some(m.heat_out_j),
            extra.heat_out,
            k,
            "J",
            if heat_out_measured {
                mean_note(m.heat_out_j)
            } else {
                "not measured: Q_in − W".to_owned()
            },
        ),
    ];
    if heat_out_measured {
        rows.push(si_row(
            "Energy-balance residual",
            "Q_loss",
            m.balance_residual_j,
            m.u_balance_residual_j,
            k,
            "J",
            "heat lost to the room (Q_in − W − Q_out)",
        ));
    }
    rows.push(plain_row(&perf_name, sym_p, perf, u_perf, k, ""));
    rows.push(plain_row(bound_name, sym_b, bound, u_bound, k, ""));
    rows.push(plain_row(
        "Carnot margin",
        sym_m,
        m.carnot_margin,
        m.u_carnot_margin,
        k,
        "below zero: beyond the bound",
    ));
    rows.push(plain_row(
        "Second-law efficiency",
        if mode.is_reverse() {
            "COP/COP_C"
        } else {
            "η/η_C"
        },
        m.second_law_efficiency,
        None,
        k,
        "",
    ));
    for (name, sym, t, note) in [
        (
            "Hot-side mean temperature",
            "T_h",
            m.hot_mean_k,
            "heat-weighted",
        ),
        (
            "Cold-side mean temperature",
            "T_c",
            m.cold_mean_k,
            "heat-weighted",
        ),
        (
            "Ambient temperature used",
            "T0",
            m.ambient_k,
            if settings.ambient_k.is_some() {
                "configured"
            } else if heat_out_measured {
                "not configured: the cold side's time mean"
            } else {
                "not configured: T_c"
            },
        ),
    ] {
        rows.push(row(
            name,
            sym,
            kelvin(t),
            "—".to_owned(),
            String::new(),
            note,
        ));
    }
    rows.push(si_row(
        "Entropy generated",
        "S_gen",
        m.entropy_generated_j_per_k,
        m.u_entropy_generated_j_per_k,
        k,
        "J/K",
        "",
    ));
    rows.push(si_row(
        "Entropy generation rate",
        "σ̇",
        m.entropy_rate_w_per_k,
        m.u_entropy_rate_w_per_k,
        k,
        "W/K",
        "below zero: against the second law",
    ));
    rows.push(si_row(
        "Exergy destroyed",
        "T0·S_gen",
        m.exergy_destroyed_j,
        extra.exergy,
        k,
        "J",
        if extra.exergy.is_none() && m.exergy_destroyed_j.is_some() {
            "U not separated: T0 is measured"
        } else {
            ""
        },
    ));
    rows
}

/// The budgets of the four figures, from the monitor's budget.
pub(super) fn budget_tables(
    b: &Budget<f64>,
    m: &Metrics<f64>,
    k: f64,
    mode: Mode,
    heat_out_measured: bool,
) -> Vec<BudgetTable> {
    let [perf, bound] = merit(m, mode);
    let [f_perf, f_bound, f_margin, f_rate] = figures(mode.is_reverse());
    vec![
        BudgetTable::from_coefficients(
            f_perf,
            perf.0,
            b,
            b.performance.as_ref(),
            k,
            heat_out_measured,
        ),
        BudgetTable::from_coefficients(f_bound, bound.0, b, b.bound.as_ref(), k, heat_out_measured),
        BudgetTable::from_coefficients(
            f_margin,
            m.carnot_margin,
            b,
            b.margin.as_ref(),
            k,
            heat_out_measured,
        ),
        BudgetTable::from_coefficients(
            f_rate,
            m.entropy_rate_w_per_k,
            b,
            b.entropy_rate.as_ref(),
            k,
            heat_out_measured,
        ),
    ]
}

/// The configured standard uncertainties in words.
pub(super) fn uncertainty_words(s: &FigureSettings) -> String {
    let u = &s.uncertainty;
    let pct = |x: f64| format!("{} %", sig(100.0 * x, 3));
    format!(
        "T_hot {} K, T_cold {} K, heat in {}, work {}, heat out {} (standard, k = 1)",
        sig(u.hot_k, 3),
        sig(u.cold_k, 3),
        pct(u.heat_in_rel),
        pct(u.work_rel),
        pct(u.heat_out_rel)
    )
}

/// What the budget section says about the model.
pub(super) fn budget_notes() -> Vec<String> {
    vec![
        "Model (GUM, JCGM 100:2008, §5.1): each channel's standard uncertainty is a \
         systematic error shared by every sample: an offset of a temperature (estimate 0 K) \
         or a scale factor of a power (estimate 1). The sensitivity coefficients c_i = ∂y/∂x_i \
         are the partial derivatives the monitor combines into u_c(y); each input contributes \
         u_i(y) = |c_i|·u(x_i), and its share is u_i(y)²/u_c(y)²."
            .to_owned(),
        "The five inputs are independent of one another, so there are no correlation terms \
         and the shares sum to 1. The figures are correlated with each other (the margin moves \
         with η and η_C through the same inputs), which is why the margin has a budget of \
         its own: u(η_C − η) is not √(u(η)² + u(η_C)²)."
            .to_owned(),
    ]
}

/// The cells of a steady period's figures.
pub(super) fn steady_cells(
    m: &Metrics<f64>,
    k: f64,
    mode: Mode,
    from: String,
    to: String,
    wall: String,
    summaries: u64,
) -> SteadyPeriod {
    let dur = finite(Some(m.duration_s)).filter(|d| *d > 0.0);
    let mean = |j: f64| dur.map_or_else(|| NA.to_owned(), |d| si(j / d, "W"));
    let [(p, up), (b, ub)] = merit(m, mode);
    SteadyPeriod {
        from,
        to,
        wall,
        length: dur.map_or_else(|| NA.to_owned(), duration),
        summaries,
        t_h: fixed(m.hot_mean_k, 1),
        t_c: fixed(m.cold_mean_k, 1),
        heat_in: mean(m.heat_in_j),
        work: mean(m.work_j),
        performance: pm(p, up, k),
        bound: pm(b, ub, k),
        margin: pm(m.carnot_margin, m.u_carnot_margin, k),
        entropy_rate: pm_si(m.entropy_rate_w_per_k, m.u_entropy_rate_w_per_k, k, "W/K"),
    }
}
