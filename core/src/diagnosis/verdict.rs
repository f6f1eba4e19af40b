//! The verdict: are the relations consistent, and if not, which single
//! channel's bias would make them so.

use heapless::Vec;

use crate::monitor::Channel;
use crate::num::{Real, above};

use super::error::DiagnosisError;
use super::linear::{MAX_COLS, MAX_ROWS, System};
use super::model::{COLS, COLUMNS, Relation, UA, Window, column};
use super::ua::{Ua, UaSource};

/// What the diagnosis needs besides the window: the channels' standard
/// uncertainties and the coverage factor.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Settings<R> {
    /// Standard uncertainty per channel, in [`Channel`] column order: hot
    /// (K), hot2 (K), cold (K), heat_in, work, heat_out (relative).
    pub u: [R; 6],
    /// Coverage factor k.
    pub coverage_factor: R,
}

impl<R: Real> Settings<R> {
    /// The settings of a rig configuration's uncertainties.
    pub fn new(u: &crate::monitor::Uncertainty, coverage_factor: f64) -> Settings<R> {
        Settings {
            u: [
                R::from_f64(u.hot_k),
                R::from_f64(u.hot2_k),
                R::from_f64(u.cold_k),
                R::from_f64(u.heat_in_rel),
                R::from_f64(u.work_rel),
                R::from_f64(u.heat_out_rel),
            ],
            coverage_factor: R::from_f64(coverage_factor),
        }
    }

    /// The standard uncertainty of `channel`.
    pub fn u_of(&self, channel: Channel) -> R {
        self.u[column(channel)]
    }
}

/// Why a relation was not checked.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Unavailable {
    /// The first law needs heat out measured.
    HeatOutNotMeasured,
    /// The first law needs UA: neither configured nor learned yet.
    UaNotKnown,
    /// UA was learned from this very window: the first law holds by
    /// construction and checks nothing.
    UaLearnedHere,
    /// The hot pair needs a second hot-side sensor.
    NoSecondHotSensor,
}

impl Unavailable {
    /// In words, for reports.
    pub const fn reason(self) -> &'static str {
        match self {
            Unavailable::HeatOutNotMeasured => {
                "first law not checked: heat out is not measured (it is inferred as Q_in - W)"
            }
            Unavailable::UaNotKnown => {
                "first law not checked yet: UA is not configured ([losses]) and no steady window with heat out measured has been seen to learn it from"
            }
            Unavailable::UaLearnedHere => {
                "first law not checked: UA was learned from this very window"
            }
            Unavailable::NoSecondHotSensor => "hot pair not checked: there is no second hot sensor",
        }
    }
}

/// One relation's residual, with its standard uncertainty.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Residual<R> {
    /// The residual: W (first law), W/K (second law), K (hot pair).
    pub value: R,
    /// Its standard uncertainty, same unit.
    pub u: R,
}

/// A channel whose single constant bias was estimated.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Candidate<R> {
    /// The channel.
    pub channel: Channel,
    /// The bias that best restores consistency: K for a temperature, a
    /// relative scale for a power (reading = truth·(1 + bias)).
    pub bias: R,
    /// `|bias|` over the channel's standard uncertainty.
    pub bias_over_u: R,
    /// Whether, with the bias removed, every relation is consistent.
    pub explains: bool,
    /// The GLR statistic for a bias in this channel.
    pub glr: R,
    /// The measurement test statistic.
    pub z: R,
    /// The linear GLR estimate over the active relations.
    pub bias_linear: R,
    /// The second law binds the estimate: the bias brings σ̇ to zero,
    /// the least correction that satisfies it, so the fault may be larger.
    pub second_law_binds: bool,
}

/// The diagnosis of one window.
#[derive(Clone, Debug, PartialEq)]
pub struct Diagnosis<R> {
    /// Residuals by [`Relation`] row; `None` when not available.
    pub residuals: [Option<Residual<R>>; 3],
    /// Why the first law was not checked, if it was not.
    pub first_law_unavailable: Option<Unavailable>,
    /// Whether every relation holds within `k·u`.
    pub consistent: bool,
    /// The global test statistic over the active relations.
    pub gamma: R,
    /// Active relations (equalities, and the second law when σ̇ < 0).
    pub active: u8,
    /// When inconsistent: the channels whose bias moves an active
    /// relation, the explaining ones first, each group by `bias_over_u`.
    pub candidates: Vec<Candidate<R>, 6>,
    /// The one channel that explains, when exactly one does.
    pub suspect: Option<Channel>,
}

impl<R: Real> Diagnosis<R> {
    /// The residual of `relation`, if it was checked.
    pub fn residual(&self, relation: Relation) -> Option<Residual<R>> {
        self.residuals[relation as usize]
    }

    /// Whether `relation` is in the active set.
    pub fn is_active(&self, relation: Relation) -> bool {
        self.active & (1 << relation as u8) != 0
    }

    /// The candidate for `channel`, if any.
    pub fn candidate(&self, channel: Channel) -> Option<&Candidate<R>> {
        self.candidates.iter().find(|c| c.channel == channel)
    }

    /// The suspect's candidate.
    pub fn suspect_candidate(&self) -> Option<&Candidate<R>> {
        self.suspect.and_then(|s| self.candidate(s))
    }
}

/// χ² at 95 % for 1, 2 and 3 degrees of freedom (any table of the χ²
/// distribution; `scipy.stats.chi2.ppf(0.95, dof)`).
pub const CHI2_95: [f64; 3] = [
    3.841_458_820_694_124,
    5.991_464_547_107_979,
    7.814_727_903_251_178,
];

/// At most this many refinement steps of a bias.
const MAX_STEPS: usize = 20;

/// The diagnosis of `window`: see `docs/diagnosis.md`. `ua` is the loss
/// coefficient if known; `ua_learned_here` says it was learned from this
/// same window.
pub fn diagnose<R: Real>(
    window: &Window<R>,
    settings: &Settings<R>,
    ua: Option<&Ua<R>>,
    ua_learned_here: bool,
) -> Result<Diagnosis<R>, DiagnosisError> {
    diagnose_with::<R, true>(window, settings, ua, ua_learned_here)
}

/// [`diagnose`] without the test statistics (the global test, the
/// measurement test and the GLR statistics stay zero, `bias_linear`
/// too), and with only the explaining candidates (up to the second): the
/// verdict, the suspect and its bias are the same. What a controller sends
/// needs no more, and its flash is short.
pub fn judge<R: Real>(
    window: &Window<R>,
    settings: &Settings<R>,
    ua: Option<&Ua<R>>,
    ua_learned_here: bool,
) -> Result<Diagnosis<R>, DiagnosisError> {
    diagnose_with::<R, false>(window, settings, ua, ua_learned_here)
}

fn diagnose_with<R: Real, const STATS: bool>(
    window: &Window<R>,
    settings: &Settings<R>,
    ua: Option<&Ua<R>>,
    ua_learned_here: bool,
) -> Result<Diagnosis<R>, DiagnosisError> {
    if !window.is_finite() {
        return Err(DiagnosisError::NotFinite);
    }
    let k = settings.coverage_factor;
    let first_law_unavailable = if !window.heat_out_measured {
        Some(Unavailable::HeatOutNotMeasured)
    } else if ua.is_none() {
        Some(Unavailable::UaNotKnown)
    } else if ua_learned_here {
        Some(Unavailable::UaLearnedHere)
    } else {
        None
    };
    let ua_value = ua
        .filter(|_| first_law_unavailable.is_none())
        .map(|u| u.w_per_k);
    let r = window.residuals(ua_value);
    let a = window.sensitivities(ua_value);

    // Variances per column: the channels present, then UA.
    let mut var = [R::ZERO; MAX_COLS];
    for (j, ch) in COLUMNS.iter().enumerate() {
        let present = match ch {
            Channel::Hot2 => window.hot_pair_k.is_some(),
            Channel::HeatOut => window.heat_out_measured,
            _ => true,
        };
        if present {
            var[j] = settings.u[j] * settings.u[j];
        }
    }
    if let Some(u) = ua {
        var[UA] = u.u_w_per_k * u.u_w_per_k;
    }

    // Each available residual's uncertainty, from the full covariance.
    let mut residuals = [None; 3];
    for (i, ri) in r.iter().enumerate() {
        if let Some(value) = ri {
            let v = (0..COLS).fold(R::ZERO, |s, j| s + a[i][j] * a[i][j] * var[j]);
            if v > R::ZERO && v.is_finite() && value.is_finite() {
                residuals[i] = Some(Residual {
                    value: *value,
                    u: v.sqrt(),
                });
            }
        }
    }
    let holds = |rel: usize, value: R, u: R| -> bool {
        if rel == Relation::SecondLaw as usize {
            value >= -k * u
        } else {
            value.abs() <= k * u
        }
    };
    let consistent = residuals
        .iter()
        .enumerate()
        .all(|(i, x)| x.is_none_or(|x| holds(i, x.value, x.u)));

    // The active set: the equalities, and the second law when σ̇ < 0.
    // A bit per relation, so that no index can fall outside the arrays.
    let mut active = 0u8;
    for (&rel, x) in Relation::ALL.iter().zip(&residuals) {
        if let Some(x) = x
            && (rel != Relation::SecondLaw || x.value < R::ZERO)
        {
            active |= 1 << rel as u8;
        }
    }
    let rows = || {
        Relation::ALL
            .into_iter()
            .filter(move |&rel| active & (1 << rel as u8) != 0)
    };
    let n = active.count_ones() as usize;
    let mut out = Diagnosis {
        residuals,
        first_law_unavailable,
        consistent,
        gamma: R::ZERO,
        active,
        candidates: Vec::new(),
        suspect: None,
    };
    if n == 0 {
        return Ok(out);
    }
    let rec = if STATS {
        let mut m = [[R::ZERO; MAX_COLS]; MAX_ROWS];
        let mut ract = [R::ZERO; MAX_ROWS];
        for ((dst, rv), rel) in m.iter_mut().zip(ract.iter_mut()).zip(rows()) {
            if let Some(d) = dst.get_mut(..COLS) {
                d.copy_from_slice(&a[rel as usize]);
            }
            *rv = r[rel as usize].unwrap_or(R::ZERO);
        }
        let system = System::<R>::from_parts(n, COLS, m, var)?;
        let rec = system.reconcile(&ract[..n])?;
        out.gamma = rec.gamma;
        Some(rec)
    } else {
        None
    };
    if consistent {
        return Ok(out);
    }

    // The equalities alone (at most two: the first law and the hot pair),
    // for each channel's own estimate.
    let mut eq = Rows::default();
    for (&rel, x) in Relation::ALL.iter().zip(&residuals) {
        if x.is_some() && rel != Relation::SecondLaw {
            eq.push(rel);
        }
    }
    let fit = Fit {
        window,
        ua: ua_value,
        a: &a,
        equalities: eq.weights(&a, &var).map(|w| (eq, w)),
        second_law_fails: out.is_active(Relation::SecondLaw),
        u_sigma: out.residual(Relation::SecondLaw).map_or(R::ZERO, |r| r.u),
    };
    // With a learned UA a channel's constant bias may predate the learning:
    // UA then absorbed it, and the first law as measured cannot see it, so
    // it cannot exonerate that channel either. Such a channel also
    // explains when, corrected as fitted to the hot pair alone, every other
    // relation holds, the first law holds as measured, and (for a hot-side
    // sensor) the hot pair of the learning window allows the same bias.
    let learned = ua_value.is_some() && ua.is_some_and(|u| u.source == UaSource::Learned);
    let learned_pair = ua.and_then(|u| u.learned_pair_k);
    let u_pair = residuals[Relation::HotPair as usize].map(|x| x.u);
    let pair_then_allows = |channel: Channel, b: R| match (channel, learned_pair, u_pair) {
        (Channel::Hot, Some(p), Some(u)) => (p - b).abs() <= k * u,
        (Channel::Hot2, Some(p), Some(u)) => (p + b).abs() <= k * u,
        _ => true,
    };
    let mut pair = Rows::default();
    if residuals[Relation::HotPair as usize].is_some() {
        pair.push(Relation::HotPair);
    }
    let before_learning = Fit {
        equalities: pair.weights(&a, &var).map(|w| (pair, w)),
        ..fit
    };
    let first_law_as_measured = residuals[Relation::FirstLaw as usize]
        .is_none_or(|x| holds(Relation::FirstLaw as usize, x.value, x.u));

    for (j, &channel) in COLUMNS.iter().enumerate() {
        // A candidate moves an active relation (V is positive definite,
        // so that is GLR > 0).
        let moves = rows().any(|rel| a[rel as usize].get(j).is_some_and(|&x| x != R::ZERO));
        if !above(var[j], R::ZERO) || !moves {
            continue;
        }
        let stat = |x: Option<&[R; MAX_COLS]>| x.map_or(R::ZERO, |v| v[j]);
        let linear = stat(rec.as_ref().map(|r| &r.glr_bias));
        let explains_with =
            |bias: R, first_law: bool| fit.explains(channel, bias, &residuals, first_law, k);
        let Some((mut bias, mut second_law_binds)) = fit.bias(channel, settings.u[j]) else {
            continue;
        };
        let mut explains = explains_with(bias, true);
        if !explains
            && learned
            && first_law_as_measured
            && let Some((b, binds)) = before_learning.bias(channel, settings.u[j])
            && explains_with(b, false)
            && pair_then_allows(channel, b)
        {
            (bias, second_law_binds, explains) = (b, binds, true);
        }
        let c = Candidate {
            channel,
            bias,
            bias_over_u: bias.abs() / settings.u[j],
            explains,
            glr: stat(rec.as_ref().map(|r| &r.glr)),
            z: stat(rec.as_ref().map(|r| &r.z)),
            bias_linear: linear,
            second_law_binds,
        };
        if !c.bias_over_u.is_finite() {
            continue;
        }
        if !STATS {
            // Only the suspect is wanted: the explaining candidates, and
            // no more once two explain.
            if c.explains {
                let _ = out.candidates.push(c);
                if out.candidates.len() > 1 {
                    break;
                }
            }
            continue;
        }
        // Insertion in rank order: explaining first, then by bias over u.
        let key = |c: &Candidate<R>| (!c.explains, c.bias_over_u);
        let at = out
            .candidates
            .iter()
            .position(|o| {
                let (a, b) = (key(&c), key(o));
                (!a.0 && b.0) || (a.0 == b.0 && a.1 < b.1)
            })
            .unwrap_or(out.candidates.len());
        // Capacity is one per channel: insertion cannot fail.
        let _ = out.candidates.insert(at, c);
    }
    let mut explaining = out.candidates.iter().filter(|c| c.explains);
    if let (Some(only), None) = (explaining.next(), explaining.next()) {
        out.suspect = Some(only.channel);
    }
    Ok(out)
}

/// Up to two relations (rows) a bias is fitted to.
#[derive(Clone, Copy, Debug)]
struct Rows {
    n: usize,
    i: [Relation; 2],
}

impl Default for Rows {
    fn default() -> Self {
        Self {
            n: 0,
            i: [Relation::FirstLaw; 2],
        }
    }
}

impl Rows {
    fn push(&mut self, row: Relation) {
        if let Some(slot) = self.i.get_mut(self.n) {
            *slot = row;
            self.n += 1;
        }
    }

    fn rows(&self) -> &[Relation] {
        self.i.get(..self.n).unwrap_or(&[])
    }

    // Out of line: a controller's flash is short.
    /// The inverse of these rows' covariance `A Σ Aᵀ`, in closed form;
    /// `None` when it is singular (a pivot below `1e-6` of the diagonal's
    /// scale) or there are no rows.
    #[inline(never)]
    fn weights<R: Real>(&self, a: &[[R; COLS]; 3], var: &[R; MAX_COLS]) -> Option<[[R; 2]; 2]> {
        let cov = |p: Relation, q: Relation| {
            let (p, q) = (&a[p as usize], &a[q as usize]);
            (0..COLS).fold(R::ZERO, |s, j| s + p[j] * q[j] * var[j])
        };
        match *self.rows() {
            [p] => {
                let v = cov(p, p);
                (v > R::ZERO).then(|| [[R::ONE / v, R::ZERO], [R::ZERO, R::ZERO]])
            }
            [p, q] => {
                let (vpp, vqq, vpq) = (cov(p, p), cov(q, q), cov(p, q));
                let det = vpp * vqq - vpq * vpq;
                (vpp > R::ZERO && vqq > R::ZERO && det > R::from_f64(1e-6) * vpp * vqq)
                    .then(|| [[vqq / det, -vpq / det], [-vpq / det, vpp / det]])
            }
            _ => None,
        }
    }
}

/// `xᵀ W y` for two-row vectors.
fn weighted<R: Real>(w: &[[R; 2]; 2], x: &[R; 2], y: &[R; 2]) -> R {
    x[0] * (w[0][0] * y[0] + w[0][1] * y[1]) + x[1] * (w[1][0] * y[0] + w[1][1] * y[1])
}

/// What a channel's bias is fitted to: the equalities, with the second
/// law as a constraint.
#[derive(Clone, Copy)]
struct Fit<'a, R: Real> {
    window: &'a Window<R>,
    ua: Option<R>,
    /// The sensitivities of the residuals.
    a: &'a [[R; COLS]; 3],
    /// The available equalities (first law, hot pair) and their weights.
    equalities: Option<(Rows, [[R; 2]; 2])>,
    /// Whether σ̇ is negative as measured.
    second_law_fails: bool,
    /// u(σ̇), W/K.
    u_sigma: R,
}

impl<R: Real> Fit<'_, R> {
    /// The bias of `channel` (standard uncertainty `u`) that best restores
    /// consistency, and whether the second law binds it (see
    /// `docs/diagnosis.md` §4):
    /// 1. the least-squares fit to the equalities the channel moves;
    /// 2. if σ̇ is still negative there, the nearest bias that brings σ̇ to
    ///    zero, when one exists (else the equalities' fit stands, unbound).
    ///
    /// A power channel is fitted in `x = 1/(1 + b)`, the factor that
    /// corrects its reading: the relations are affine in it, so the fit is
    /// exact and never crosses `1 + b = 0`. `None` when the equalities have
    /// no minimum among valid corrections (a temperature above 0 K, a power
    /// scale above zero), or the channel ends there invalid.
    fn bias(&self, channel: Channel, u: R) -> Option<(R, bool)> {
        let j = column(channel);
        let power = !channel.is_temperature();
        // The parameter of no correction.
        let none = if power { R::ONE } else { R::ZERO };
        let mut p = none;
        if let Some((rows, w)) = &self.equalities
            && rows
                .rows()
                .iter()
                .any(|&rel| self.a[rel as usize].get(j).is_some_and(|&x| x != R::ZERO))
        {
            p = self.least_squares(rows, w, channel, none, u)?;
        }
        let mut binds = false;
        let mut second = Rows::default();
        second.push(Relation::SecondLaw);
        let sigma = |p: R| self.rows_at(&second, channel, p).map(|r| r[0]);
        if self.second_law_fails && sigma(p)? < R::ZERO && self.a[1][j] != R::ZERO {
            let one = [[R::ONE, R::ZERO], [R::ZERO, R::ZERO]];
            if let Some(root) = self.least_squares(&second, &one, channel, p, u)
                && sigma(root)?.abs() <= self.u_sigma * R::from_f64(1e-3)
            {
                p = root;
                binds = true;
            }
        }
        let b = to_bias(power, p);
        self.window.corrected(channel, b)?;
        Some((b, binds))
    }

    /// Whether, with `bias` of `channel` removed, every relation of
    /// `residuals` holds within `k·u` (σ̇ ≥ −k·u), the first law left out
    /// unless `first_law`.
    #[inline(never)]
    fn explains(
        &self,
        channel: Channel,
        bias: R,
        residuals: &[Option<Residual<R>>; 3],
        first_law: bool,
        k: R,
    ) -> bool {
        let Some(w) = self.window.corrected(channel, bias) else {
            return false;
        };
        let rc = w.residuals(self.ua);
        residuals.iter().enumerate().all(|(i, x)| match (x, rc[i]) {
            _ if i == Relation::FirstLaw as usize && !first_law => true,
            (Some(x), Some(v)) if i == Relation::SecondLaw as usize => v >= -k * x.u,
            (Some(x), Some(v)) => v.abs() <= k * x.u,
            _ => true,
        })
    }

    /// The residuals of `rows` with parameter `p` of `channel` removed
    /// (see [`to_bias`]); `None` when the correction is not valid.
    #[inline(never)]
    fn rows_at(&self, rows: &Rows, channel: Channel, p: R) -> Option<[R; 2]> {
        let b = to_bias(!channel.is_temperature(), p);
        let r = self.window.corrected(channel, b)?.residuals(self.ua);
        let mut out = [R::ZERO; 2];
        for (o, &rel) in out.iter_mut().zip(rows.rows()) {
            *o = r[rel as usize]?;
        }
        Some(out)
    }

    /// Minimises `r(p)ᵀ W r(p)` over `rows` by Gauss–Newton from `p0`
    /// (the parameter of [`to_bias`]): the derivative of the exact
    /// corrected residuals by central differences, at most [`MAX_STEPS`]
    /// steps. A step that would leave the valid corrections is halved
    /// until it does not. `Some` only when it converges: a step below
    /// `1e-9·u`, or below the arithmetic's resolution of `p` (that last
    /// step taken).
    fn least_squares(
        &self,
        rows: &Rows,
        w: &[[R; 2]; 2],
        channel: Channel,
        p0: R,
        u: R,
    ) -> Option<R> {
        let at = |p: R| self.rows_at(rows, channel, p);
        let mut p = p0;
        let mut r = at(p)?;
        for _ in 0..MAX_STEPS {
            let h = (p.abs() + u) * R::from_f64(1e-4);
            let (rp, rm) = (at(p + h)?, at(p - h)?);
            let d = [(rp[0] - rm[0]) / (h + h), (rp[1] - rm[1]) / (h + h)];
            let den = weighted(w, &d, &d);
            if !above(den, R::ZERO) {
                return None;
            }
            let mut step = -weighted(w, &d, &r) / den;
            let (strict, resolution) = (
                u * R::from_f64(1e-9),
                R::EPSILON * R::from_f64(1e3) * (p.abs() + u),
            );
            let tol = if strict > resolution {
                strict
            } else {
                resolution
            };
            if !step.is_finite() {
                return None;
            }
            if step.abs() <= tol {
                // Converged: the last, small step too (in f32 it is what
                // lands a root within the arithmetic's reach).
                return Some(if at(p + step).is_some() { p + step } else { p });
            }
            // Halve a step that would leave the valid corrections.
            let mut next = None;
            for _ in 0..30 {
                if let Some(rn) = at(p + step) {
                    next = Some(rn);
                    break;
                }
                step = step * R::from_f64(0.5);
            }
            r = next?;
            p = p + step;
        }
        None
    }
}

/// The bias of parameter `p`: `p` itself for a temperature, `1/p − 1` for
/// a power (`p` the factor `1/(1 + b)` that corrects its reading).
fn to_bias<R: Real>(power: bool, p: R) -> R {
    if power { R::ONE / p - R::ONE } else { p }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A window of constant readings: `T_hot` 700 K, `T_cold` 300 K, 1 kW
    /// in, 200 W out as work, UA 0.5 W/K to a 295 K room, 60 s.
    fn window(hot_bias: f64, hot2_bias: Option<f64>, measured: bool) -> Window<f64> {
        let (th, tc, t0, d) = (700.0, 300.0, 295.0, 60.0);
        let (qi, w) = (1000.0 * d, 200.0 * d);
        let qo = if measured {
            qi - w - 0.5 * (th - t0) * d
        } else {
            qi - w
        };
        Window {
            reverse: false,
            duration_s: d,
            heat_in_j: qi,
            work_j: w,
            heat_out_j: qo,
            heat_out_measured: measured,
            hot_mean_k: th + hot_bias,
            cold_mean_k: tc,
            t0_k: t0,
            t0_is_cold_mean: false,
            hot_time_integral_k_s: (th + hot_bias) * d,
            hot_pair_k: hot2_bias.map(|b2| hot_bias - b2),
        }
    }

    fn settings() -> Settings<f64> {
        Settings::new(&crate::monitor::Uncertainty::default(), 2.0)
    }

    fn ua() -> Ua<f64> {
        Ua::configured(&super::super::ua::Losses {
            ua_w_per_k: 0.5,
            u_ua_w_per_k: 0.01,
        })
    }

    #[test]
    fn healthy_is_consistent_and_names_no_one() {
        let d = diagnose(
            &window(0.0, Some(0.0), true),
            &settings(),
            Some(&ua()),
            false,
        )
        .unwrap();
        assert!(d.consistent);
        assert!(d.candidates.is_empty());
        assert_eq!(d.suspect, None);
        let e = d.residual(Relation::FirstLaw).unwrap();
        assert!(e.value.abs() < 1e-9, "{e:?}");
    }

    #[test]
    fn a_hot_offset_is_named_with_all_three_relations() {
        // −40 K on hot: the pair fails, and the loss term moves by 20 W.
        let d = diagnose(
            &window(-40.0, Some(0.0), true),
            &settings(),
            Some(&ua()),
            false,
        )
        .unwrap();
        assert!(!d.consistent);
        assert_eq!(d.suspect, Some(Channel::Hot));
        let c = d.suspect_candidate().unwrap();
        assert!((c.bias + 40.0).abs() < 1e-6, "{c:?}");
    }

    #[test]
    fn the_pair_alone_cannot_tell_its_two_sensors_apart() {
        let d = diagnose(&window(30.0, Some(0.0), false), &settings(), None, false).unwrap();
        assert!(!d.consistent);
        assert_eq!(d.suspect, None);
        let names: heapless::Vec<Channel, 6> = d
            .candidates
            .iter()
            .filter(|c| c.explains)
            .map(|c| c.channel)
            .collect();
        assert_eq!(names.len(), 2);
        assert!(names.contains(&Channel::Hot) && names.contains(&Channel::Hot2));
        assert_eq!(
            d.first_law_unavailable,
            Some(Unavailable::HeatOutNotMeasured)
        );
    }

    #[test]
    fn without_ua_the_first_law_waits() {
        let d = diagnose(&window(0.0, None, true), &settings(), None, false).unwrap();
        assert_eq!(d.first_law_unavailable, Some(Unavailable::UaNotKnown));
        assert!(d.residual(Relation::FirstLaw).is_none());
        let d = diagnose(&window(0.0, None, true), &settings(), Some(&ua()), true).unwrap();
        assert_eq!(d.first_law_unavailable, Some(Unavailable::UaLearnedHere));
    }

    #[test]
    fn a_learned_ua_does_not_exonerate_a_bias_it_absorbed() {
        // Hot reads 40 K low from the start: UA is learned from a window
        // that already has the offset, so the first law as measured holds,
        // and the pair alone cannot say which element is wrong.
        let w = window(-40.0, Some(0.0), true);
        let learned = Ua::learn(&w, &settings().u, 60_000).unwrap();
        assert_eq!(learned.learned_pair_k, Some(-40.0));
        let d = diagnose(&w, &settings(), Some(&learned), false).unwrap();
        assert!(!d.consistent);
        assert_eq!(d.suspect, None, "{d:?}");
        assert!(d.candidate(Channel::Hot).is_some_and(|c| c.explains));
        assert!(d.candidate(Channel::Hot2).is_some_and(|c| c.explains));
        // Learned from a window whose pair agreed, the same offset now is
        // a new fault on hot, which the first law sees: hot is named.
        let clean = Ua::learn(&window(0.0, Some(0.0), true), &settings().u, 60_000).unwrap();
        let d = diagnose(
            &window(-80.0, Some(0.0), true),
            &settings(),
            Some(&clean),
            false,
        )
        .unwrap();
        assert_eq!(d.suspect, Some(Channel::Hot), "{d:?}");
    }

    #[test]
    fn f32_agrees_with_f64() {
        let w = window(-40.0, Some(0.0), true);
        let w32 = Window {
            reverse: false,
            duration_s: w.duration_s as f32,
            heat_in_j: w.heat_in_j as f32,
            work_j: w.work_j as f32,
            heat_out_j: w.heat_out_j as f32,
            heat_out_measured: true,
            hot_mean_k: w.hot_mean_k as f32,
            cold_mean_k: w.cold_mean_k as f32,
            t0_k: w.t0_k as f32,
            t0_is_cold_mean: false,
            hot_time_integral_k_s: w.hot_time_integral_k_s as f32,
            hot_pair_k: w.hot_pair_k.map(|x| x as f32),
        };
        let s32 = Settings::<f32>::new(&crate::monitor::Uncertainty::default(), 2.0);
        let ua32 = Ua::<f32>::configured(&super::super::ua::Losses {
            ua_w_per_k: 0.5,
            u_ua_w_per_k: 0.01,
        });
        let d = diagnose(&w32, &s32, Some(&ua32), false).unwrap();
        assert_eq!(d.suspect, Some(Channel::Hot));
        let b = d.suspect_candidate().unwrap().bias;
        assert!((b + 40.0).abs() < 1e-2, "{b}");
    }
}
