//! The loss to the room, `UA·(T_hot − T0)`: configured, or learned from
//! the first steady window.

use serde::{Deserialize, Serialize};

use crate::num::{Real, above};

use super::model::{COLUMNS, Window};

/// `[losses]` in `rig.toml`: the hot side's loss coefficient to the room.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Losses {
    /// UA, W/K.
    pub ua_w_per_k: f64,
    /// Its standard uncertainty, W/K.
    pub u_ua_w_per_k: f64,
}

/// Where a UA came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[serde(rename_all = "snake_case")]
pub enum UaSource {
    /// `[losses]` in the configuration.
    Config,
    /// Learned from the first steady window with heat out measured.
    Learned,
}

/// A loss coefficient with its uncertainty.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Ua<R> {
    /// UA, W/K.
    pub w_per_k: R,
    /// Its standard uncertainty, W/K.
    pub u_w_per_k: R,
    /// Configured or learned.
    pub source: UaSource,
    /// When learned: the end of the window it was learned from, ms (the
    /// sample clock).
    pub learned_at_ms: Option<u32>,
    /// When learned with a second hot sensor: the mean `T_hot − T_hot2` of
    /// that window, K. A hot-side bias that predates the learning must
    /// have shown there too.
    pub learned_pair_k: Option<R>,
}

/// The least `(H − T0·D)/D`, K, from which UA is learned: below it the
/// hot side is too close to the room for its loss to be told from the
/// meters' errors.
const MIN_EXCESS_K: f64 = 5.0;

impl<R: Real> Ua<R> {
    /// The configured UA.
    pub fn configured(losses: &Losses) -> Ua<R> {
        Ua {
            w_per_k: R::from_f64(losses.ua_w_per_k),
            u_w_per_k: R::from_f64(losses.u_ua_w_per_k),
            source: UaSource::Config,
            learned_at_ms: None,
            learned_pair_k: None,
        }
    }

    /// UA learned from `window`, `UA = s·(Q_in − W − Q_out)/(H − T0·D)`,
    /// with its uncertainty propagated from the channels' (`u` per channel
    /// in `COLUMNS` order). `None` without heat out measured, or when
    /// the hot side is within `MIN_EXCESS_K` of T0.
    ///
    /// A later window's first law treats this uncertainty as independent
    /// of that window's errors. The same systematic errors move both, so
    /// near the operating point UA was learned at they largely cancel; but
    /// keeping that correlation would leave the first law an uncertainty
    /// of almost nothing there, and any unsteadiness (which the
    /// systematic model does not describe) would read as a fault. Treated
    /// as independent, the first law's band is wider than strictly needed,
    /// which errs toward "consistent".
    pub fn learn(window: &Window<R>, u: &[R; 6], t_ms: u32) -> Option<Ua<R>> {
        if !window.heat_out_measured {
            return None;
        }
        let x = window.excess_k_s();
        if !above(x, R::from_f64(MIN_EXCESS_K) * window.duration_s) {
            return None;
        }
        let s = window.sign();
        let (qi, w, qo) = (window.heat_in_j, window.work_j, window.heat_out_j);
        let ua = s * (qi - w - qo) / x;
        let d = window.duration_s;
        let zero = R::ZERO;
        // An error e of a channel moves the readings, and so UA, by:
        let g = [
            -ua * d / x,
            zero,
            if window.t0_is_cold_mean {
                ua * d / x
            } else {
                zero
            },
            s * qi / x,
            -s * w / x,
            -s * qo / x,
        ];
        let var = COLUMNS
            .iter()
            .enumerate()
            .fold(zero, |acc, (j, _)| acc + g[j] * g[j] * u[j] * u[j]);
        let out = Ua {
            w_per_k: ua,
            u_w_per_k: var.sqrt(),
            source: UaSource::Learned,
            learned_at_ms: Some(t_ms),
            learned_pair_k: window.hot_pair_k,
        };
        (ua.is_finite() && out.u_w_per_k.is_finite() && g.iter().all(|v| v.is_finite()))
            .then_some(out)
    }
}
