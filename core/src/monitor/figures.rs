//! The figures of a window or run, worked out from its integrals: the figure
//! of merit against its Carnot bound, the entropy account, and their
//! uncertainties.

use serde::Serialize;

use crate::num::{Real, fin, ratio};

use super::integrals::Integrals;
use super::settings::{FigureSettings, Mode};
use super::uncertainty::{Budget, Partials, std_uncertainty};

/// Every figure of a window or run. `None` means *not available*.
///
/// `u_*` are standard uncertainties (coverage k = 1); multiply by the
/// configured coverage factor for expanded ones.
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize)]
pub struct Metrics<R> {
    /// Integrated time, seconds.
    pub duration_s: R,
    /// `Q_in`, joules.
    pub heat_in_j: R,
    /// `W`, joules.
    pub work_j: R,
    /// `Q_out`, joules (measured or inferred).
    pub heat_out_j: R,
    /// Energy-balance residual, joules: `Q_in − W − Q_out` for an engine,
    /// `W + Q_out − Q_in` reversed; only with heat out measured.
    pub balance_residual_j: Option<R>,
    /// `η = W/Q_in` (engine).
    pub efficiency: Option<R>,
    /// Coefficient of performance (heat pump: `Q_in/W`, cooler: `Q_out/W`).
    pub cop: Option<R>,
    /// Heat-weighted mean hot-side temperature `T_h`, kelvin.
    pub hot_mean_k: Option<R>,
    /// Heat-weighted mean cold-side temperature `T_c`, kelvin.
    pub cold_mean_k: Option<R>,
    /// `η_C = 1 − T_c/T_h` (engine).
    pub carnot_efficiency: Option<R>,
    /// Carnot COP: `T_h/(T_h − T_c)` or `T_c/(T_h − T_c)`.
    pub carnot_cop: Option<R>,
    /// `η_CA = 1 − √(T_c/T_h)` (engine).
    pub curzon_ahlborn_efficiency: Option<R>,
    /// `η_C − η` (or `COP_C − COP`).
    pub carnot_margin: Option<R>,
    /// `η/η_C` (or `COP/COP_C`).
    pub second_law_efficiency: Option<R>,
    /// `S_gen`, J/K.
    pub entropy_generated_j_per_k: Option<R>,
    /// `σ̇ = S_gen / duration`, W/K.
    pub entropy_rate_w_per_k: Option<R>,
    /// Entropy inflow rate `∫(q_in/T_hot) dt / duration`, W/K: the scale of `σ̇`.
    pub entropy_in_rate_w_per_k: Option<R>,
    /// Exergy destroyed `T0·S_gen`, joules.
    pub exergy_destroyed_j: Option<R>,
    /// T0 used, kelvin.
    pub ambient_k: Option<R>,
    /// u(η).
    pub u_efficiency: Option<R>,
    /// u(COP).
    pub u_cop: Option<R>,
    /// u(η_C).
    pub u_carnot_efficiency: Option<R>,
    /// u(COP_C).
    pub u_carnot_cop: Option<R>,
    /// u(margin).
    pub u_carnot_margin: Option<R>,
    /// u(S_gen), J/K.
    pub u_entropy_generated_j_per_k: Option<R>,
    /// u(σ̇), W/K.
    pub u_entropy_rate_w_per_k: Option<R>,
    /// u(balance residual), joules.
    pub u_balance_residual_j: Option<R>,
}

/// Whether `th` is above `tc` by more than rounding: temperatures a few
/// units in the last place apart are equal for the Carnot figures, whose
/// denominators would otherwise be rounding noise.
#[inline]
fn above<R: Real>(th: R, tc: R) -> bool {
    th - tc > R::from_f64(16.0) * R::EPSILON * th
}

/// [`FigureSettings`] in `R`, converted once rather than on every sample.
#[derive(Clone, Copy, Debug)]
pub(super) struct Prepared<R> {
    mode: Mode,
    ambient: Option<R>,
    /// Standard uncertainties: hot and cold offsets (K), then the relative
    /// scale errors of heat in, work and heat out.
    u: [R; 5],
}

impl<R: Real> Prepared<R> {
    pub(super) fn new(s: &FigureSettings) -> Self {
        let u = &s.uncertainty;
        Self {
            mode: s.mode,
            ambient: s.ambient_k.map(R::from_f64),
            u: [u.hot_k, u.cold_k, u.heat_in_rel, u.work_rel, u.heat_out_rel].map(R::from_f64),
        }
    }
}

impl<R: Real> Integrals<R> {
    /// Every figure of DESIGN §4 from these integrals.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// use heatbound::monitor::{FigureSettings, Integrals};
    /// // A steady engine for 1 s: 1000 W in, 150 W out, 600 K and 300 K.
    /// let i = Integrals {
    ///     duration_s: 1.0, heat_in_j: 1000.0, work_j: 150.0, heat_out_j: 850.0,
    ///     heat_out_measured: false,
    ///     entropy_in_j_per_k: 1000.0 / 600.0, entropy_out_j_per_k: 850.0 / 300.0,
    ///     hot_sensitivity: 1000.0 / 360000.0, cold_sensitivity: 850.0 / 90000.0,
    ///     cold_heat_in_j_per_k: 1000.0 / 300.0, cold_work_j_per_k: 150.0 / 300.0,
    ///     cold_temperature_integral_k_s: 0.0, // only used with heat out measured
    ///     hot_temperature_integral_k_s: 600.0, hot2_measured: false,
    ///     hot_pair_integral_k_s: 0.0,
    /// };
    /// let m = i.metrics(&FigureSettings::new(&RigConfig::default()));
    /// assert!((m.entropy_generated_j_per_k.unwrap() - 1.16667_f64).abs() < 1e-5);
    /// assert!((m.exergy_destroyed_j.unwrap() - 350.0).abs() < 1e-9);
    /// assert_eq!(m.carnot_efficiency, Some(0.5));
    /// ```
    pub fn metrics(&self, settings: &FigureSettings) -> Metrics<R> {
        let p = Prepared::new(settings);
        let c = self.second_law::<true>(&p);
        let u = &p.u;
        let u_s_gen = std_uncertainty(c.var_s_gen(u));
        let mut m = Metrics {
            duration_s: self.duration_s,
            heat_in_j: self.heat_in_j,
            work_j: self.work_j,
            heat_out_j: self.heat_out_j,
            hot_mean_k: c.th,
            cold_mean_k: c.tc,
            carnot_margin: c.margin(),
            second_law_efficiency: c.second_law_efficiency(),
            u_carnot_margin: std_uncertainty(c.var_margin(u)),
            balance_residual_j: c.loss,
            u_balance_residual_j: std_uncertainty(c.var_loss),
            entropy_generated_j_per_k: c.s_gen,
            u_entropy_generated_j_per_k: u_s_gen,
            entropy_rate_w_per_k: c.s_gen.and_then(|s| ratio(s, self.duration_s)),
            u_entropy_rate_w_per_k: u_s_gen.and_then(|s| ratio(s, self.duration_s)),
            entropy_in_rate_w_per_k: ratio(self.entropy_in_j_per_k, self.duration_s),
            ambient_k: c.t0,
            exergy_destroyed_j: match (c.s_gen, c.t0) {
                (Some(s), Some(t0)) => fin(s * t0),
                _ => None,
            },
            ..Metrics::default()
        };
        let u_perf = c.d_perf.and_then(|d| d.combine(u));
        let u_bound = c.d_bound.and_then(|d| d.combine(u));
        if settings.mode == Mode::Engine {
            m.efficiency = c.perf;
            m.carnot_efficiency = c.bound;
            m.u_efficiency = u_perf;
            m.u_carnot_efficiency = u_bound;
            m.curzon_ahlborn_efficiency = match (c.th, c.tc) {
                (Some(th), Some(tc)) if above(th, tc) => fin(R::ONE - (tc / th).sqrt()),
                _ => None,
            };
        } else {
            m.cop = c.perf;
            m.carnot_cop = c.bound;
            m.u_cop = u_perf;
            m.u_carnot_cop = u_bound;
        }
        m
    }

    /// The uncertainty budget of these integrals' figures: each figure's
    /// sensitivity coefficients to the five systematic inputs, from the
    /// same partials [`Integrals::metrics`] combines into its `u_*`.
    ///
    /// ```
    /// use heatbound::config::RigConfig;
    /// use heatbound::monitor::{FigureSettings, Integrals};
    /// // The steady engine of `metrics`: 1000 W in, 150 W out, 600 K and 300 K.
    /// let i: Integrals<f64> = Integrals {
    ///     duration_s: 1.0, heat_in_j: 1000.0, work_j: 150.0, heat_out_j: 850.0,
    ///     heat_out_measured: false,
    ///     entropy_in_j_per_k: 1000.0 / 600.0, entropy_out_j_per_k: 850.0 / 300.0,
    ///     hot_sensitivity: 1000.0 / 360000.0, cold_sensitivity: 850.0 / 90000.0,
    ///     cold_heat_in_j_per_k: 1000.0 / 300.0, cold_work_j_per_k: 150.0 / 300.0,
    ///     cold_temperature_integral_k_s: 0.0,
    ///     hot_temperature_integral_k_s: 600.0, hot2_measured: false,
    ///     hot_pair_integral_k_s: 0.0,
    /// };
    /// let settings = FigureSettings::new(&RigConfig::default());
    /// let b = i.budget(&settings);
    /// // η = W/Q_in: a heat-in scale error s moves it by −η·s, work by +η·s.
    /// let c = b.performance.unwrap();
    /// assert_eq!((c[2], c[3]), (-0.15, 0.15));
    /// // The squares of the contributions add up to u(η)².
    /// let u = i.metrics(&settings).u_efficiency.unwrap();
    /// assert!((b.variance(&c).unwrap().sqrt() - u).abs() < 1e-15);
    /// ```
    pub fn budget(&self, settings: &FigureSettings) -> Budget<R> {
        let p = Prepared::new(settings);
        let c = self.second_law::<true>(&p);
        // The partials of S_gen are kept in the engine's convention (the sign
        // does not matter to u); a budget shows signed coefficients.
        let sign = if settings.mode.is_reverse() {
            -R::ONE
        } else {
            R::ONE
        };
        let d_s = c.d_s.map(|d| d.scale(sign));
        // T0's partials: none when configured; the time mean of T_cold moves
        // one for one with a cold offset; T_c as the bound's T_c does.
        let d_t0 = match (p.ambient, self.heat_out_measured) {
            (Some(_), _) => Partials::default(),
            (None, true) => Partials {
                cold: R::ONE,
                ..Partials::default()
            },
            (None, false) => self.cold_mean_partials(),
        };
        // Gouy–Stodola, T0·S_gen, with T0's own partials when it is measured.
        let exergy_destroyed = match (d_s, c.s_gen, c.t0) {
            (Some(ds), Some(s), Some(t0)) => Some(ds.scale(t0).add(d_t0.scale(s))),
            _ => None,
        };
        let zero = R::ZERO;
        let (qi, w, qo) = (self.heat_in_j, self.work_j, self.heat_out_j);
        Budget {
            u: p.u,
            performance: c.d_perf.map(Partials::to_array),
            bound: c.d_bound.map(Partials::to_array),
            margin: match (c.d_perf, c.d_bound) {
                (Some(dp), Some(db)) => Some(db.sub(dp).to_array()),
                _ => None,
            },
            entropy_generated: d_s.map(Partials::to_array),
            entropy_rate: d_s
                .and_then(|d| ratio(R::ONE, self.duration_s).map(|inv| d.scale(inv).to_array())),
            exergy_destroyed: exergy_destroyed.map(Partials::to_array),
            heat_in: [zero, zero, qi, zero, zero],
            work: [zero, zero, zero, w, zero],
            heat_out: if self.heat_out_measured {
                [zero, zero, zero, zero, qo]
            } else {
                [zero, zero, qi, -w, zero]
            },
        }
    }

    /// The partials of the heat-weighted `T_c = Q_out/∫q_out/T_cold dt`: a
    /// cold offset, and with heat out inferred (`q_in − w`) the heat-in and
    /// work scales too. Zero without heat out.
    // Inlined: on the per-sample path it is dead code, and dropped.
    #[inline(always)]
    fn cold_mean_partials(&self) -> Partials<R> {
        let (qi, w, qo) = (self.heat_in_j, self.work_j, self.heat_out_j);
        let (so, so2) = (self.entropy_out_j_per_k, self.cold_sensitivity);
        let (ca, cb) = (self.cold_heat_in_j_per_k, self.cold_work_j_per_k);
        match ratio(R::ONE, so * so) {
            Some(inv) if self.heat_out_measured => Partials {
                cold: qo * so2 * inv,
                ..Partials::default()
            },
            Some(inv) => Partials {
                cold: qo * so2 * inv,
                heat_in: (qi * so - qo * ca) * inv,
                work: (qo * cb - w * so) * inv,
                ..Partials::default()
            },
            None => Partials::default(),
        }
    }

    /// σ̇ alone, W/K: the value [`Integrals::metrics`] gives, by the same
    /// operations, without the rest.
    pub fn entropy_rate(&self, settings: &FigureSettings) -> Option<R> {
        self.alarm_figures_with::<false>(&Prepared::new(settings))
            .entropy_rate_w_per_k
    }

    /// Only the figures the alarm rules read: the per-sample path, which
    /// skips everything [`Integrals::metrics`] adds for reports.
    pub fn alarm_figures(&self, settings: &FigureSettings) -> AlarmFigures<R> {
        self.alarm_figures_with::<true>(&Prepared::new(settings))
    }

    /// [`Integrals::alarm_figures`] with the settings already in `R`, and
    /// the variances only if `VARIANCES` (else `None`). No square roots: the
    /// rules compare squares of the uncertainties.
    #[inline]
    pub(super) fn alarm_figures_with<const VARIANCES: bool>(
        &self,
        p: &Prepared<R>,
    ) -> AlarmFigures<R> {
        let c = self.second_law::<VARIANCES>(p);
        let dur2 = self.duration_s * self.duration_s;
        AlarmFigures {
            heat_in_j: self.heat_in_j,
            carnot_margin: c.margin(),
            var_carnot_margin: c.var_margin(&p.u),
            second_law_efficiency: c.second_law_efficiency(),
            entropy_rate_w_per_k: c.s_gen.and_then(|s| ratio(s, self.duration_s)),
            var_entropy_rate_w_per_k: c.var_s_gen(&p.u).and_then(|v| ratio(v, dur2)),
            entropy_in_rate_w_per_k: ratio(self.entropy_in_j_per_k, self.duration_s),
            balance_residual_j: c.loss,
            var_balance_residual_j: c.var_loss,
        }
    }

    /// The mean temperatures, the figure of merit and its bound, the entropy
    /// account and, if `PARTIALS`, the partial derivatives behind their
    /// uncertainties (else those are `None`). The values do not depend on
    /// `PARTIALS`: they are the same operations either way.
    // Inlined so that the shared struct dissolves into registers on the
    // per-sample path, and the partials vanish where they are not asked for.
    #[inline(always)]
    fn second_law<const PARTIALS: bool>(&self, p: &Prepared<R>) -> SecondLaw<R> {
        let u = &p.u;
        let mode = p.mode;
        let measured = self.heat_out_measured;
        let (qi, w, qo) = (self.heat_in_j, self.work_j, self.heat_out_j);
        let (si, so) = (self.entropy_in_j_per_k, self.entropy_out_j_per_k);
        let (si2, so2) = (self.hot_sensitivity, self.cold_sensitivity);
        let (ca, cb) = (self.cold_heat_in_j_per_k, self.cold_work_j_per_k);
        let zero = R::ZERO;

        // Mean temperatures and their partials.
        let th = ratio(qi, si);
        let tc = ratio(qo, so);
        // Read only inside `PARTIALS.then`: without partials they are dead
        // code, and the compiler drops them.
        let d_th = Partials {
            hot: ratio(qi * si2, si * si).unwrap_or(zero),
            ..Partials::default()
        };
        let d_tc = self.cold_mean_partials();

        // The figure of merit and its bound.
        let (perf, d_perf, bound, d_bound) = match mode {
            Mode::Engine => {
                let eta = ratio(w, qi);
                let d_eta = eta.filter(|_| PARTIALS).map(|e| Partials {
                    heat_in: -e,
                    work: e,
                    ..Partials::default()
                });
                let (carnot, d_carnot) = match (th, tc) {
                    (Some(th), Some(tc)) if above(th, tc) => {
                        let d = PARTIALS
                            .then(|| d_tc.scale(-R::ONE / th).sub(d_th.scale(-tc / (th * th))));
                        (fin(R::ONE - tc / th), d)
                    }
                    _ => (None, None),
                };
                (eta, d_eta, carnot, d_carnot)
            }
            _ => {
                let cop = match mode {
                    Mode::HeatPump => ratio(qi, w),
                    _ => ratio(qo, w),
                };
                let d_cop = cop.filter(|_| PARTIALS).map(|c| match (mode, measured) {
                    (Mode::HeatPump, _) => Partials {
                        heat_in: c,
                        work: -c,
                        ..Partials::default()
                    },
                    (_, true) => Partials {
                        heat_out: c,
                        work: -c,
                        ..Partials::default()
                    },
                    (_, false) => {
                        let r = ratio(qi, w).unwrap_or(zero);
                        Partials {
                            heat_in: r,
                            work: -r,
                            ..Partials::default()
                        }
                    }
                });
                let (carnot, d_carnot) = match (th, tc) {
                    (Some(th), Some(tc)) if above(th, tc) => {
                        let dt = th - tc;
                        let top = if mode == Mode::HeatPump { th } else { tc };
                        // d(T_h/ΔT) = d(T_c/ΔT) = (T_h dT_c − T_c dT_h)/ΔT².
                        let d = PARTIALS
                            .then(|| d_tc.scale(th / (dt * dt)).sub(d_th.scale(tc / (dt * dt))));
                        (fin(top / dt), d)
                    }
                    _ => (None, None),
                };
                (cop, d_cop, carnot, d_carnot)
            }
        };

        // Energy balance and the entropy account, engine convention first.
        // T0: the configured ambient, else the cold-side mean. With heat out
        // measured that is the time mean of T_cold: a heat-weighted mean
        // would be undefined once the coolant stops carrying heat away.
        let t0 = match p.ambient {
            Some(t) => Some(t),
            None if measured => ratio(self.cold_temperature_integral_k_s, self.duration_s),
            None => tc,
        };
        let sign = if mode.is_reverse() { -R::ONE } else { R::ONE };
        let (loss, var_loss, s_gen, d_s) = if measured {
            let loss = qi - w - qo;
            let t = |x: R| x * x;
            let var_loss = if PARTIALS {
                fin(t(qi * u[2]) + t(w * u[3]) + t(qo * u[4]))
            } else {
                None
            };
            let (s_gen, d_s) = match t0 {
                Some(t0) if t0 > zero => {
                    let d = PARTIALS.then(|| {
                        let mut d = Partials {
                            hot: si2,
                            cold: -so2,
                            heat_in: qi / t0 - si,
                            work: -w / t0,
                            heat_out: so - qo / t0,
                        };
                        if p.ambient.is_none() {
                            // The default T0 is the time mean of T_cold, which
                            // a cold-side offset moves one for one: so does
                            // Q_loss/T0.
                            d.cold = d.cold - loss / (t0 * t0);
                        }
                        d
                    });
                    (fin(so + loss / t0 - si), d)
                }
                _ => (None, None),
            };
            (fin(loss * sign), var_loss, s_gen, d_s)
        } else {
            let d = Partials {
                hot: si2,
                cold: -so2,
                heat_in: ca - si,
                work: -cb,
                heat_out: zero,
            };
            (None, None, fin(so - si), PARTIALS.then_some(d))
        };
        SecondLaw {
            th,
            tc,
            perf,
            d_perf,
            bound,
            d_bound,
            t0,
            loss,
            var_loss,
            s_gen: s_gen.map(|s| s * sign),
            d_s,
        }
    }
}

impl<R: Real> Integrals<R> {
    /// Whether `beyond_carnot`, `negative_entropy_production`, `near_carnot`
    /// and `energy_balance` are all certainly clear on these integrals:
    /// each figure is past its rule's clear level by more than rounding (a
    /// relative [`CLEAR_MARGIN`] of the terms compared). Decided by
    /// cross-multiplying the sums, with no division and no uncertainty, so
    /// the usual sample, far from every bound, costs a few products. `false`
    /// means "work the figures out", not "raised".
    ///
    /// Where a figure does not exist (a denominator that is not positive,
    /// `T_h` not above `T_c`), its rule clears whatever the readings, and so
    /// it does here, by the same comparisons.
    pub(super) fn second_law_clear(&self, p: &Prepared<R>, b: &ClearBands<R>) -> bool {
        // The usual call, every rule normal, has no deadband but near
        // Carnot's: the terms of the others are then left out rather than
        // multiplied by zero (a software multiplication on a Cortex-M0).
        let z = R::ZERO;
        if b.beyond == z && b.entropy == z && b.balance == z {
            self.second_law_clear_at::<false>(p, b)
        } else {
            self.second_law_clear_at::<true>(p, b)
        }
    }

    /// [`Integrals::second_law_clear`], with the deadbands of
    /// `beyond_carnot`, `negative_entropy_production` and `energy_balance`
    /// read only if `BANDED` (else they are 0).
    #[inline(always)]
    fn second_law_clear_at<const BANDED: bool>(&self, p: &Prepared<R>, b: &ClearBands<R>) -> bool {
        // `x + band·y`, which is `x` when the deadbands are 0.
        let plus = |x: R, band: R, y: R| if BANDED { x + band * y } else { x };
        let eps = R::from_f32(CLEAR_MARGIN);
        let (qi, w, qo) = (self.heat_in_j, self.work_j, self.heat_out_j);
        let (si, so) = (self.entropy_in_j_per_k, self.entropy_out_j_per_k);
        // The engine's sign convention: a negation, not a multiplication
        // (a software one on a Cortex-M0).
        let reverse = p.mode.is_reverse();
        let sign = |x: R| if reverse { -x } else { x };

        // T_h = Q_in/S_in and T_c = Q_out/S_out: T_h − T_c = D/(S_in·S_out)
        // with D = Q_in·S_out − Q_out·S_in.
        let bound_rules = !(positive(si) && positive(so)) || {
            let (h, c) = (qi * so, qo * si);
            let d = h - c;
            let sd = h.abs() + c.abs();
            !positive(d)
                || match p.mode {
                    // η = W/Q_in, η_C = D/(Q_in·S_out), η/η_C = W·S_out/D.
                    Mode::Engine => {
                        !positive(qi) || {
                            let ws = w * so;
                            let beyond = plus(ws - d, b.beyond, h);
                            let near = b.near * d - ws;
                            beyond < -eps * plus(ws.abs() + sd, b.beyond, h)
                                && near > eps * (ws.abs() + b.near.abs() * sd)
                        }
                    }
                    // COP = P/W against COP_C = B/D, COP/COP_C = D/(W·N): P = Q_in,
                    // B = Q_in·S_out, N = S_out for a heat pump; P = Q_out,
                    // B = Q_out·S_in, N = S_in for a cooler.
                    _ => {
                        let (top, bound, per) = if p.mode == Mode::HeatPump {
                            (qi, h, so)
                        } else {
                            (qo, c, si)
                        };
                        !positive(w) || {
                            let beyond = plus(top * d - bound * w, b.beyond, w * d);
                            let wn = w * per;
                            beyond < -eps * (plus(top.abs(), b.beyond, w) * sd + bound.abs() * w)
                                && (!positive(top)
                                    || b.near * wn - d > eps * (b.near.abs() * wn + sd))
                        }
                    }
                }
        };
        if !bound_rules {
            return false;
        }

        // σ̇ > db·(S_in/duration), times the duration (and T0 with heat out
        // measured, where S_gen = S_out − S_in + Q_loss/T0).
        let dur = self.duration_s;
        let loss = qi - w - qo;
        let sl = qi.abs() + w.abs() + qo.abs();
        let entropy_rule = !(positive(dur) && positive(si)) || {
            let gap = so - si;
            let se = plus(so.abs() + si, b.entropy, si);
            if !self.heat_out_measured {
                plus(sign(gap), -b.entropy, si) > eps * se
            } else {
                match p.ambient {
                    Some(t0) => {
                        !positive(t0)
                            || plus(sign(gap * t0 + loss), -b.entropy, si * t0)
                                > eps * (se * t0 + sl)
                    }
                    // T0 = ∫T_cold dt / duration.
                    None => {
                        let ct = self.cold_temperature_integral_k_s;
                        !positive(ct)
                            || plus(sign(gap * ct + loss * dur), -b.entropy, si * ct)
                                > eps * (se * ct + sl * dur)
                    }
                }
            }
        };

        // Q_loss > db·Q_in, with heat out measured.
        let balance_rule = !self.heat_out_measured
            || !positive(qi)
            || plus(sign(loss), -b.balance, qi) > eps * plus(sl, b.balance, qi);

        entropy_rule && balance_rule
    }
}

/// `x > 0`, false for NaN: `!positive(x)` is "not above zero".
#[inline(always)]
fn positive<R: Real>(x: R) -> bool {
    x.is_positive()
}

/// How far past its clear level a figure must be for
/// [`Integrals::second_law_clear`] to call its rule clear, relative to the
/// terms compared: far above the rounding of either way of working it out
/// (`f32`: about 10⁻⁷ per operation).
const CLEAR_MARGIN: f32 = 1.0e-3;

/// The clear levels of the second-law rules, for
/// `RuleInputs::second_law_clear`:
/// a rule is clear when its figure is beyond its limit's deadband, on the
/// side away from the limit. Each deadband is at least 0.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ClearBands<R> {
    /// `beyond_carnot`: η − η_C (or COP − COP_C) below −this.
    pub beyond: R,
    /// `negative_entropy_production`: σ̇ above this fraction of the entropy
    /// inflow rate.
    pub entropy: R,
    /// `energy_balance`: the balance residual above this fraction of `Q_in`.
    pub balance: R,
    /// `near_carnot`: η/η_C (or COP/COP_C) below this (its fraction less its
    /// deadband).
    pub near: R,
}

/// What [`Integrals::second_law`] works out, shared by the full figures and
/// the alarms' figures.
struct SecondLaw<R> {
    th: Option<R>,
    tc: Option<R>,
    /// η, or COP reversed.
    perf: Option<R>,
    d_perf: Option<Partials<R>>,
    /// η_C, or the Carnot COP reversed.
    bound: Option<R>,
    d_bound: Option<Partials<R>>,
    t0: Option<R>,
    /// Balance residual in the mode's convention (heat out measured only).
    loss: Option<R>,
    /// u²(loss).
    var_loss: Option<R>,
    s_gen: Option<R>,
    /// Partials of the engine-convention S_gen; the sign does not matter for u.
    d_s: Option<Partials<R>>,
}

impl<R: Real> SecondLaw<R> {
    fn margin(&self) -> Option<R> {
        match (self.perf, self.bound) {
            (Some(p), Some(b)) => fin(b - p),
            _ => None,
        }
    }

    fn second_law_efficiency(&self) -> Option<R> {
        match (self.perf, self.bound) {
            (Some(p), Some(b)) => ratio(p, b),
            _ => None,
        }
    }

    fn var_margin(&self, u: &[R; 5]) -> Option<R> {
        match (self.d_perf, self.d_bound) {
            (Some(dp), Some(db)) => db.sub(dp).variance(u),
            _ => None,
        }
    }

    fn var_s_gen(&self, u: &[R; 5]) -> Option<R> {
        self.d_s.and_then(|d| d.variance(u))
    }
}

/// The window figures the alarm rules read (see [`Metrics`] for each).
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize)]
pub struct AlarmFigures<R> {
    /// `Q_in`, joules.
    pub heat_in_j: R,
    /// `η_C − η` (or `COP_C − COP`).
    pub carnot_margin: Option<R>,
    /// u²(margin): the rules compare squares, which needs no square root.
    pub var_carnot_margin: Option<R>,
    /// `η/η_C` (or `COP/COP_C`).
    pub second_law_efficiency: Option<R>,
    /// σ̇, W/K.
    pub entropy_rate_w_per_k: Option<R>,
    /// u²(σ̇), (W/K)².
    pub var_entropy_rate_w_per_k: Option<R>,
    /// Entropy inflow rate, W/K.
    pub entropy_in_rate_w_per_k: Option<R>,
    /// Balance residual, joules (heat out measured only).
    pub balance_residual_j: Option<R>,
    /// u²(balance residual), J².
    pub var_balance_residual_j: Option<R>,
}

impl<R: Real> From<&Metrics<R>> for AlarmFigures<R> {
    fn from(m: &Metrics<R>) -> Self {
        let sq = |u: Option<R>| u.map(|u| u * u);
        Self {
            heat_in_j: m.heat_in_j,
            carnot_margin: m.carnot_margin,
            var_carnot_margin: sq(m.u_carnot_margin),
            second_law_efficiency: m.second_law_efficiency,
            entropy_rate_w_per_k: m.entropy_rate_w_per_k,
            var_entropy_rate_w_per_k: sq(m.u_entropy_rate_w_per_k),
            entropy_in_rate_w_per_k: m.entropy_in_rate_w_per_k,
            balance_residual_j: m.balance_residual_j,
            var_balance_residual_j: sq(m.u_balance_residual_j),
        }
    }
}
