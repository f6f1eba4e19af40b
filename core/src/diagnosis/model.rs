//! The model of a window: the quantities a diagnosis works from, the
//! residuals of the relations among them, a channel's bias removed, and
//! the residuals' sensitivities to each channel's error.

use crate::monitor::{Channel, FigureSettings, Integrals, Mode};
use crate::num::{Real, above, ratio};

/// The columns of the sensitivity matrix: the six channels in
/// [`COLUMNS`] order, then UA.
pub(super) const COLS: usize = 7;
/// Channels in column order.
pub(super) const COLUMNS: [Channel; 6] = [
    Channel::Hot,
    Channel::Hot2,
    Channel::Cold,
    Channel::HeatIn,
    Channel::Work,
    Channel::HeatOut,
];
/// The UA column.
pub(super) const UA: usize = 6;

/// The column of `channel`.
pub(super) const fn column(channel: Channel) -> usize {
    match channel {
        Channel::Hot => 0,
        Channel::Hot2 => 1,
        Channel::Cold => 2,
        Channel::HeatIn => 3,
        Channel::Work => 4,
        Channel::HeatOut => 5,
    }
}

/// The relations a diagnosis checks, in row order.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Relation {
    /// The first law: heat in = work + heat out + heat lost to the room.
    FirstLaw = 0,
    /// The second law: entropy generation is not negative.
    SecondLaw = 1,
    /// The two hot-side sensors agree.
    HotPair = 2,
}

impl Relation {
    /// Every relation, in row order.
    pub const ALL: [Relation; 3] = [Relation::FirstLaw, Relation::SecondLaw, Relation::HotPair];

    /// The relation's name in reports.
    pub const fn name(self) -> &'static str {
        match self {
            Relation::FirstLaw => "first_law",
            Relation::SecondLaw => "second_law",
            Relation::HotPair => "hot_pair",
        }
    }
}

/// What one window gives a diagnosis: the monitor's integrals, reduced to
/// the few quantities the relations need (see `docs/diagnosis.md` §2).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Window<R> {
    /// Engine (`false`) or heat pump / cooler (`true`): the reversed
    /// machine's energy and entropy accounts change sign.
    pub reverse: bool,
    /// Integrated time `D`, s.
    pub duration_s: R,
    /// `Q_in`, J.
    pub heat_in_j: R,
    /// `W`, J.
    pub work_j: R,
    /// `Q_out`, J: measured, else `Q_in − W`.
    pub heat_out_j: R,
    /// Whether heat out was measured.
    pub heat_out_measured: bool,
    /// Heat-weighted mean hot-side temperature `T_h`, K.
    pub hot_mean_k: R,
    /// Heat-weighted mean cold-side temperature `T_c`, K.
    pub cold_mean_k: R,
    /// T0, K.
    pub t0_k: R,
    /// Whether T0 is the cold side's mean (a cold-side offset moves it),
    /// rather than a configured ambient.
    pub t0_is_cold_mean: bool,
    /// `∫T_hot dt`, K·s.
    pub hot_time_integral_k_s: R,
    /// `∫(T_hot − T_hot2) dt / D`, K, with a second hot sensor.
    pub hot_pair_k: Option<R>,
}

impl<R: Real> Window<R> {
    /// The window of `integrals` with the figures' settings; `None` when
    /// the window holds no time or no heat on either side (the mean
    /// temperatures are then undefined).
    pub fn from_integrals(i: &Integrals<R>, settings: &FigureSettings) -> Option<Window<R>> {
        let d = i.duration_s;
        if !above(d, R::ZERO) {
            return None;
        }
        let th = ratio(i.heat_in_j, i.entropy_in_j_per_k).filter(|t| *t > R::ZERO)?;
        let tc = ratio(i.heat_out_j, i.entropy_out_j_per_k).filter(|t| *t > R::ZERO)?;
        let (t0, cold_mean) = match settings.ambient_k {
            Some(t) => (R::from_f64(t), false),
            None if i.heat_out_measured => (ratio(i.cold_temperature_integral_k_s, d)?, true),
            None => (tc, true),
        };
        let pair = if i.hot2_measured {
            Some(ratio(i.hot_pair_integral_k_s, d)?)
        } else {
            None
        };
        let w = Window {
            reverse: settings.mode != Mode::Engine,
            duration_s: d,
            heat_in_j: i.heat_in_j,
            work_j: i.work_j,
            heat_out_j: i.heat_out_j,
            heat_out_measured: i.heat_out_measured,
            hot_mean_k: th,
            cold_mean_k: tc,
            t0_k: t0,
            t0_is_cold_mean: cold_mean,
            hot_time_integral_k_s: i.hot_temperature_integral_k_s,
            hot_pair_k: pair,
        };
        w.is_finite().then_some(w)
    }

    /// Whether every quantity is a finite number and the temperatures
    /// are above 0 K.
    pub fn is_finite(&self) -> bool {
        let all = [
            self.duration_s,
            self.heat_in_j,
            self.work_j,
            self.heat_out_j,
            self.hot_mean_k,
            self.cold_mean_k,
            self.t0_k,
            self.hot_time_integral_k_s,
            self.hot_pair_k.unwrap_or(R::ZERO),
        ];
        all.iter().all(|x| x.is_finite())
            && self.hot_mean_k > R::ZERO
            && self.cold_mean_k > R::ZERO
            && self.t0_k > R::ZERO
            && self.duration_s > R::ZERO
    }

    /// `+1` for an engine, `−1` reversed.
    pub(super) fn sign(&self) -> R {
        if self.reverse { -R::ONE } else { R::ONE }
    }

    /// `H − T0·D`, K·s: the time integral of `T_hot − T0`.
    pub(super) fn excess_k_s(&self) -> R {
        self.hot_time_integral_k_s - self.t0_k * self.duration_s
    }

    /// The window with the bias `b` of `channel` removed: `None` when that
    /// leaves a temperature at or below 0 K or a power scale at or below
    /// zero (`1 + b ≤ 0`), or the channel is absent.
    pub(super) fn corrected(&self, channel: Channel, b: R) -> Option<Window<R>> {
        if !b.is_finite() {
            return None;
        }
        let mut w = *self;
        match channel {
            Channel::Hot => {
                w.hot_mean_k = w.hot_mean_k - b;
                w.hot_time_integral_k_s = w.hot_time_integral_k_s - b * w.duration_s;
                w.hot_pair_k = w.hot_pair_k.map(|p| p - b);
            }
            Channel::Hot2 => w.hot_pair_k = Some(w.hot_pair_k? + b),
            Channel::Cold => {
                w.cold_mean_k = w.cold_mean_k - b;
                if w.t0_is_cold_mean {
                    w.t0_k = w.t0_k - b;
                }
            }
            Channel::HeatIn | Channel::Work | Channel::HeatOut => {
                let scale = R::ONE + b;
                if !above(scale, R::ZERO) {
                    return None;
                }
                match channel {
                    Channel::HeatIn => w.heat_in_j = w.heat_in_j / scale,
                    Channel::Work => w.work_j = w.work_j / scale,
                    _ if w.heat_out_measured => w.heat_out_j = w.heat_out_j / scale,
                    _ => return None,
                }
                if !w.heat_out_measured {
                    w.heat_out_j = w.heat_in_j - w.work_j;
                }
            }
        }
        // The window was valid and `b` is finite: only the temperatures a
        // correction lowers can leave the valid range.
        (w.hot_mean_k > R::ZERO && w.cold_mean_k > R::ZERO && w.t0_k > R::ZERO).then_some(w)
    }

    /// The residuals: the first law's (W, with `ua` W/K, and only with
    /// heat out measured), the second law's σ̇ (W/K), and the hot pair's
    /// difference (K, with a second hot sensor).
    pub(super) fn residuals(&self, ua: Option<R>) -> [Option<R>; 3] {
        let d = self.duration_s;
        let s = self.sign();
        let (qi, w, qo) = (self.heat_in_j, self.work_j, self.heat_out_j);
        let (th, tc, t0) = (self.hot_mean_k, self.cold_mean_k, self.t0_k);
        let first = match ua {
            Some(ua) if self.heat_out_measured => {
                Some((s * (qi - w - qo) - ua * self.excess_k_s()) / d)
            }
            _ => None,
        };
        let second = if self.heat_out_measured {
            // Q_out/T_c + (Q_in − W − Q_out)/T0 − Q_in/T_h, with the heat-out
            // terms grouped: a corrected Q_out may grow without bound, and
            // the two terms would then cancel in rounding.
            s * (qo * (R::ONE / tc - R::ONE / t0) + (qi - w) / t0 - qi / th) / d
        } else {
            s * ((qi - w) / tc - qi / th) / d
        };
        [first, Some(second), self.hot_pair_k]
    }

    /// The sensitivities of the residuals to each column's error at zero
    /// bias: `a[row][col]`, where an error `e` of a channel (reading =
    /// truth + e, or truth·(1 + e)) moves residual `row` by `a[row][col]·e`.
    /// `ua` is the loss coefficient.
    pub(super) fn sensitivities(&self, ua: Option<R>) -> [[R; COLS]; 3] {
        let d = self.duration_s;
        let s = self.sign();
        let (qi, w, qo) = (self.heat_in_j, self.work_j, self.heat_out_j);
        let (th, tc, t0) = (self.hot_mean_k, self.cold_mean_k, self.t0_k);
        let zero = R::ZERO;
        let mut a = [[zero; COLS]; 3];
        let ua_v = ua.unwrap_or(zero);
        let cold_mean = self.t0_is_cold_mean;
        if self.heat_out_measured {
            // First law, s·(Q_in − W − Q_out)/D − UA·(H − T0·D)/D.
            let e = &mut a[0];
            e[0] = -ua_v;
            e[2] = if cold_mean { ua_v } else { zero };
            e[3] = s * qi / d;
            e[4] = -s * w / d;
            e[5] = -s * qo / d;
            e[UA] = -self.excess_k_s() / d;
            // Second law, s·[Q_out/T_c + (Q_in − W − Q_out)/T0 − Q_in/T_h]/D.
            let loss = qi - w - qo;
            let r = &mut a[1];
            r[0] = s * qi / (th * th) / d;
            r[2] = -s * (qo / (tc * tc) + if cold_mean { loss / (t0 * t0) } else { zero }) / d;
            r[3] = s * qi * (R::ONE / t0 - R::ONE / th) / d;
            r[4] = -s * w / t0 / d;
            r[5] = s * qo * (R::ONE / tc - R::ONE / t0) / d;
        } else {
            // Second law, s·[(Q_in − W)/T_c − Q_in/T_h]/D.
            let r = &mut a[1];
            r[0] = s * qi / (th * th) / d;
            r[2] = -s * (qi - w) / (tc * tc) / d;
            r[3] = s * qi * (R::ONE / tc - R::ONE / th) / d;
            r[4] = -s * w / tc / d;
        }
        if self.hot_pair_k.is_some() {
            a[2][0] = R::ONE;
            a[2][1] = -R::ONE;
        }
        a
    }
}
