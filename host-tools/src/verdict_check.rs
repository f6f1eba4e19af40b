//! The diagnosis recomputed from a Summary's raw integrals and the Hello's
//! settings, and compared with the verdict the controller sent.
//!
//! The controller diagnoses its window in f32; the host recomputes in f64
//! from the integrals the Summary carries. Where a residual sits on the
//! edge of its band (`k·u`), rounding can tip the verdict either way: such
//! a summary is *borderline* and not held against the device. The test is
//! to recompute with `k` moved by ±0.1 %: if that changes the verdict, the
//! summary is borderline.

use heatbound::diagnosis::{
    Diagnosis, DiagnosisError, Losses, Settings, Ua, UaSource, Window, diagnose, overlaps_learning,
};
use heatbound::monitor::{FigureSettings, Uncertainty};
use heatbound::wire::{Hello, Summary, Verdict};

use crate::diagnosis_report::bias_text;

/// How the host's diagnosis compares with the device's verdict.
#[derive(Clone, Debug, PartialEq)]
pub enum Agreement {
    /// Same verdict and suspect, and the suspect's bias within tolerance.
    Agrees,
    /// The verdict sits on the edge of a band: not compared.
    Borderline,
    /// They differ; in words.
    Differs(String),
}

/// The relative change of the coverage factor that tests for a borderline
/// verdict.
const K_WIGGLE: f64 = 1e-3;

/// The diagnosis settings a Hello announces.
pub fn settings(hello: &Hello, coverage_factor: f64) -> Settings<f64> {
    let u = &hello.uncertainty;
    let un = Uncertainty {
        hot_k: f64::from(u.hot_k),
        hot2_k: f64::from(u.hot2_k),
        cold_k: f64::from(u.cold_k),
        heat_in_rel: f64::from(u.heat_in_rel),
        work_rel: f64::from(u.work_rel),
        heat_out_rel: f64::from(u.heat_out_rel),
    };
    Settings::new(&un, coverage_factor)
}

/// The UA a controller uses: configured (the Hello says so), or learned
/// from the first steady Summary with heat out measured, as the controller
/// learns it from the same window ([`heatbound::diagnosis::Tracker`]).
/// Follow the Summaries of one run in order.
#[derive(Clone, Debug, Default)]
pub struct UaFollower {
    learned: Option<Ua<f64>>,
    /// The (session, run) the learned UA belongs to.
    of: Option<(u32, u32)>,
}

impl UaFollower {
    /// Takes Summary `s` under `hello`: learns UA from it, in f32 as the
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
        let figures = FigureSettings {
            mode: s.status.mode,
            ambient_k: hello.ambient_k.map(f64::from),
            uncertainty: Uncertainty::default(),
        };
        let Some(w) = Window::<f32>::from_integrals(&s.integrals(), &figures) else {
            return;
        };
        if !w.heat_out_measured {
            return;
        }
        let u32s = settings(hello, 1.0).u.map(|u| u as f32);
        self.learned = Ua::learn(&w, &u32s, s.t_ms).map(|u| Ua {
            w_per_k: f64::from(u.w_per_k),
            u_w_per_k: f64::from(u.u_w_per_k),
            source: UaSource::Learned,
            learned_at_ms: u.learned_at_ms,
        });
    }

    /// The UA in use under `hello`, if known.
    pub fn ua(&self, hello: &Hello) -> Option<Ua<f64>> {
        match hello.losses {
            Some((ua, u)) => Some(Ua::configured(&Losses {
                ua_w_per_k: f64::from(ua),
                u_ua_w_per_k: f64::from(u),
            })),
            None => self.learned,
        }
    }
}

/// The window a Summary describes, with the T0 the device used.
pub fn window(s: &Summary, hello: &Hello) -> Option<Window<f64>> {
    let f = f64::from;
    let d = f(s.duration_s);
    let (qi, qo) = (f(s.heat_in_j), f(s.heat_out_j));
    let (si, so) = (f(s.entropy_in_j_per_k), f(s.entropy_out_j_per_k));
    if !(d > 0.0 && si > 0.0 && so > 0.0) {
        return None;
    }
    let w = Window {
        reverse: s.status.mode.is_reverse(),
        duration_s: d,
        heat_in_j: qi,
        work_j: f(s.work_j),
        heat_out_j: qo,
        heat_out_measured: s.status.heat_out_measured,
        hot_mean_k: qi / si,
        cold_mean_k: qo / so,
        t0_k: f(s.ambient_k?),
        t0_is_cold_mean: hello.ambient_k.is_none(),
        hot_time_integral_k_s: f(s.hot_temperature_integral_k_s),
        hot_pair_k: s
            .status
            .hot2_measured
            .then(|| f(s.hot_pair_integral_k_s) / d),
    };
    (w.is_finite() && w.hot_mean_k > 0.0 && w.cold_mean_k > 0.0).then_some(w)
}

/// The host's diagnosis of `s`, with the coverage factor `k` and `ua`.
pub fn recompute(
    s: &Summary,
    hello: &Hello,
    ua: Option<&Ua<f64>>,
    k: f64,
) -> Result<Diagnosis<f64>, DiagnosisError> {
    let w = window(s, hello).ok_or(DiagnosisError::NoWindow)?;
    let overlaps = overlaps_learning(ua.and_then(|u| u.learned_at_ms), s.t_ms, w.duration_s);
    diagnose(&w, &settings(hello, k), ua, overlaps)
}

/// The verdict of a host diagnosis, as the device would send it.
fn verdict_of(d: &Result<Diagnosis<f64>, DiagnosisError>) -> (Option<bool>, Option<&'static str>) {
    match d {
        Ok(d) => (Some(d.consistent), d.suspect.map(|c| c.name())),
        Err(_) => (None, None),
    }
}

/// Compares the device's verdict in `s` with the host's recomputation
/// with `ua` (see [`UaFollower`]).
pub fn compare(s: &Summary, hello: &Hello, ua: Option<&Ua<f64>>) -> Agreement {
    let k = f64::from(hello.coverage_factor);
    let host = recompute(s, hello, ua, k);
    let device = (s.verdict.consistent, s.verdict.suspect.map(|c| c.name()));
    let ours = verdict_of(&host);
    let wiggled =
        [1.0 - K_WIGGLE, 1.0 + K_WIGGLE].map(|f| verdict_of(&recompute(s, hello, ua, k * f)));
    if wiggled.iter().any(|v| *v != ours) {
        return Agreement::Borderline;
    }
    if device != ours {
        return Agreement::Differs(format!(
            "device says {}, recomputed {}",
            words(&s.verdict),
            match &host {
                Ok(d) => match d.suspect_candidate() {
                    Some(c) => format!(
                        "inconsistent, suspect {} ({})",
                        c.channel.name(),
                        bias_text(c.channel, c.bias)
                    ),
                    None if d.consistent => "consistent".to_string(),
                    None => "inconsistent, no suspect".to_string(),
                },
                Err(e) => format!("no diagnosis ({e})"),
            }
        ));
    }
    if let (Ok(d), Some(b)) = (&host, s.verdict.bias)
        && let Some(c) = d.suspect_candidate()
    {
        let u = settings(hello, k).u_of(c.channel);
        let tolerance = 1e-3 * c.bias.abs() + 1e-2 * u;
        if (f64::from(b) - c.bias).abs() > tolerance {
            return Agreement::Differs(format!(
                "suspect {}: device's bias {}, recomputed {}",
                c.channel.name(),
                bias_text(c.channel, f64::from(b)),
                bias_text(c.channel, c.bias)
            ));
        }
    }
    Agreement::Agrees
}

/// A device verdict in words.
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
