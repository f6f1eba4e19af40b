//! The diagnosis recomputed from a Summary's raw integrals and the Hello's
//! settings, and compared with the verdict the controller sent.
//!
//! The controller diagnoses its window in f32 at each Summary
//! ([`heatbound::diagnosis::Tracker::judge`]). Everything it reads travels:
//! the integrals, the T0 it used, the uncertainties and coverage factor and
//! the configured UA (Hello), or the Summary it learned UA from. The host
//! runs the same core code in f32 on the same numbers, so an honest
//! controller's verdict is reproduced exactly: the suspect's bias is
//! compared to a millionth of itself, the rest exactly.

use heatbound::diagnosis::{
    Diagnosis, DiagnosisError, Losses, Settings, Ua, Window, judge, overlaps_learning,
};
use heatbound::wire::{Hello, Summary, Verdict};

use crate::diagnosis_report::bias_text;

/// How the host's diagnosis compares with the device's verdict.
#[derive(Clone, Debug, PartialEq)]
pub enum Agreement {
    /// Same verdict and suspect, and the same bias.
    Agrees,
    /// They differ; in words.
    Differs(String),
}

/// The diagnosis settings a Hello announces, in the controller's f32.
pub fn settings(hello: &Hello) -> Settings<f32> {
    let u = &hello.uncertainty;
    Settings {
        u: [
            u.hot_k,
            u.hot2_k,
            u.cold_k,
            u.heat_in_rel,
            u.work_rel,
            u.heat_out_rel,
        ],
        coverage_factor: hello.coverage_factor,
    }
}

/// The window a Summary describes, as the controller built it: the mean
/// temperatures from the integrals, and the T0 it used.
pub fn window(s: &Summary, hello: &Hello) -> Option<Window<f32>> {
    let d = s.duration_s;
    if !(d > 0.0 && s.entropy_in_j_per_k > 0.0 && s.entropy_out_j_per_k > 0.0) {
        return None;
    }
    let w = Window {
        reverse: s.status.mode.is_reverse(),
        duration_s: d,
        heat_in_j: s.heat_in_j,
        work_j: s.work_j,
        heat_out_j: s.heat_out_j,
        heat_out_measured: s.status.heat_out_measured,
        hot_mean_k: s.heat_in_j / s.entropy_in_j_per_k,
        cold_mean_k: s.heat_out_j / s.entropy_out_j_per_k,
        t0_k: s.ambient_k?,
        t0_is_cold_mean: hello.ambient_k.is_none(),
        hot_time_integral_k_s: s.hot_temperature_integral_k_s,
        hot_pair_k: s.status.hot2_measured.then(|| s.hot_pair_integral_k_s / d),
    };
    w.is_finite().then_some(w)
}

/// The UA a controller uses: configured (the Hello says so), or learned
/// from the first steady Summary with heat out measured, as the controller
/// learns it from the same window ([`heatbound::diagnosis::Tracker`]).
/// Follow the Summaries of one run in order.
#[derive(Clone, Debug, Default)]
pub struct UaFollower {
    learned: Option<Ua<f32>>,
    /// The (session, run) the learned UA belongs to.
    of: Option<(u32, u32)>,
}

impl UaFollower {
    /// Takes Summary `s` under `hello`: learns UA from it, as the
    /// controller does, if none is configured or learned yet in this run.
    pub fn observe(&mut self, s: &Summary, hello: &Hello) {
        let run = (hello.session, hello.run);
        if self.of != Some(run) {
            self.learned = None;
            self.of = Some(run);
        }
        if hello.losses.is_some() || self.learned.is_some() || !s.status.steady {
            return;
        }
        if let Some(w) = window(s, hello).filter(|w| w.heat_out_measured) {
            self.learned = Ua::learn(&w, &settings(hello).u, s.t_ms);
        }
    }

    /// The UA in use under `hello`, if known.
    pub fn ua(&self, hello: &Hello) -> Option<Ua<f32>> {
        match hello.losses {
            Some((ua, u)) => Some(Ua::configured(&Losses {
                ua_w_per_k: f64::from(ua),
                u_ua_w_per_k: f64::from(u),
            })),
            None => self.learned,
        }
    }
}

/// The host's diagnosis of `s` with `ua`, as the controller makes it.
pub fn recompute(
    s: &Summary,
    hello: &Hello,
    ua: Option<&Ua<f32>>,
) -> Result<Diagnosis<f32>, DiagnosisError> {
    let w = window(s, hello).ok_or(DiagnosisError::NoWindow)?;
    let overlaps = overlaps_learning(ua.and_then(|u| u.learned_at_ms), s.t_ms, w.duration_s);
    judge(&w, &settings(hello), ua, overlaps)
}

/// Compares the device's verdict in `s` with the host's recomputation
/// with `ua` (see [`UaFollower`]).
pub fn compare(s: &Summary, hello: &Hello, ua: Option<&Ua<f32>>) -> Agreement {
    let host = recompute(s, hello, ua);
    let ours = Verdict::of(&host);
    let device = &s.verdict;
    let same_bias = match (device.bias, ours.bias) {
        (Some(a), Some(b)) => (a - b).abs() <= 1e-6 * a.abs().max(b.abs()),
        (a, b) => a == b,
    };
    if device.consistent == ours.consistent && device.suspect == ours.suspect && same_bias {
        return Agreement::Agrees;
    }
    Agreement::Differs(format!(
        "device says {}, recomputed {}",
        words(device),
        match &host {
            Ok(_) => words(&ours),
            Err(e) => format!("no diagnosis ({e})"),
        }
    ))
}

/// A verdict in words.
pub fn words(v: &Verdict) -> String {
    match (v.consistent, v.suspect) {
        (None, _) => "no diagnosis".to_string(),
        (Some(true), _) => "consistent".to_string(),
        (Some(false), None) => "inconsistent, no suspect".to_string(),
        (Some(false), Some(c)) => match v.bias {
            Some(b) => format!(
                "inconsistent, suspect {} ({})",
                c.name(),
                bias_text(c, f64::from(b))
            ),
            None => format!("inconsistent, suspect {}", c.name()),
        },
    }
}
