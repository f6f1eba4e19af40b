//! The diagnosis as reports show it: the `diagnosis` object of
//! `analyze --json`, and one line of words for the text report, `watch`
//! and the console.

use heatbound::diagnosis::{Diagnosis, DiagnosisError, Relation, Ua, UaSource, Unavailable};
use heatbound::monitor::Channel;
use serde::Serialize;

/// The `diagnosis` object (see `docs/diagnosis.md` and the README).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct DiagnosisJson {
    /// Whether every relation holds within `k·u`; `null` when no diagnosis
    /// could be made.
    pub consistent: Option<bool>,
    /// The one channel that explains the inconsistency, if exactly one does.
    pub suspect: Option<&'static str>,
    /// When inconsistent: every channel whose bias moves a failing
    /// relation, the explaining ones first, each group ranked by
    /// `bias_over_u`, smallest first.
    pub candidates: Vec<CandidateJson>,
    /// The relations' residuals and standard uncertainties.
    pub residuals: ResidualsJson,
    /// The global test: `rᵀV⁻¹r` over the active relations.
    pub global_test: Option<GlobalTestJson>,
    /// UA, when known.
    pub ua: Option<UaJson>,
    /// In words: the verdict, and why a relation was not checked.
    pub reason: String,
}

/// One candidate channel.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CandidateJson {
    /// `hot`, `hot2`, `cold`, `heat_in`, `work` or `heat_out`.
    pub channel: &'static str,
    /// The bias that best restores consistency (reading − truth in K for a
    /// temperature; reading/truth − 1 for a power).
    pub bias: f64,
    /// `K` or `relative`.
    pub bias_unit: &'static str,
    /// `|bias|` in units of the channel's standard uncertainty.
    pub bias_over_u: f64,
    /// Whether, with the bias removed, every relation holds.
    pub explains: bool,
    /// The GLR statistic.
    pub glr: f64,
    /// The measurement test statistic.
    pub z: f64,
}

/// The residuals; a relation not checked is `null` (the reason says why).
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct ResidualsJson {
    /// First law, W.
    pub first_law_w: Option<f64>,
    /// Its standard uncertainty, W.
    pub u_first_law_w: Option<f64>,
    /// Second law: σ̇, W/K.
    pub second_law_w_per_k: Option<f64>,
    /// Its standard uncertainty, W/K.
    pub u_second_law_w_per_k: Option<f64>,
    /// Hot pair: mean of `T_hot − T_hot2`, K.
    pub hot_pair_k: Option<f64>,
    /// Its standard uncertainty, K.
    pub u_hot_pair_k: Option<f64>,
}

/// The global test.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct GlobalTestJson {
    /// `rᵀV⁻¹r`.
    pub gamma: f64,
    /// The active relations.
    pub relations: Vec<&'static str>,
    /// The χ² quantile at 95 % for as many degrees of freedom.
    pub critical_95: f64,
}

/// UA and where it came from.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct UaJson {
    /// UA, W/K.
    pub w_per_k: f64,
    /// Its standard uncertainty, W/K.
    pub u_w_per_k: f64,
    /// `config` or `learned`.
    pub source: &'static str,
    /// When learned: the time of the window's end, s from the first row.
    pub learned_at_s: Option<f64>,
}

/// The unit of a channel's bias.
pub fn bias_unit(channel: Channel) -> &'static str {
    if channel.is_temperature() {
        "K"
    } else {
        "relative"
    }
}

/// A bias in words: `+68.2 K` or `+3.1 %`.
pub fn bias_text(channel: Channel, bias: f64) -> String {
    if channel.is_temperature() {
        format!("{bias:+.1} K")
    } else {
        format!("{:+.1} %", 100.0 * bias)
    }
}

/// A finite value, else `None`: nothing non-finite reaches a report.
fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

impl UaJson {
    /// UA as reported; `t0_s` turns its learned time (ms on the sample
    /// clock) into seconds.
    pub fn new(ua: &Ua<f64>) -> UaJson {
        UaJson {
            w_per_k: ua.w_per_k,
            u_w_per_k: ua.u_w_per_k,
            source: match ua.source {
                UaSource::Config => "config",
                UaSource::Learned => "learned",
            },
            learned_at_s: ua.learned_at_ms.map(|ms| f64::from(ms) / 1000.0),
        }
    }
}

impl DiagnosisJson {
    /// The report of a diagnosis (or of why there is none), with the UA
    /// used.
    pub fn new(result: &Result<Diagnosis<f64>, DiagnosisError>, ua: Option<&Ua<f64>>) -> Self {
        let ua = ua.map(UaJson::new);
        let d = match result {
            Ok(d) => d,
            Err(e) => {
                return DiagnosisJson {
                    consistent: None,
                    suspect: None,
                    candidates: Vec::new(),
                    residuals: ResidualsJson::default(),
                    global_test: None,
                    ua,
                    reason: format!("no diagnosis: {e}"),
                };
            }
        };
        let pick = |rel: Relation| d.residual(rel).map(|r| (finite(r.value), finite(r.u)));
        let (e, s, h) = (
            pick(Relation::FirstLaw),
            pick(Relation::SecondLaw),
            pick(Relation::HotPair),
        );
        let residuals = ResidualsJson {
            first_law_w: e.and_then(|x| x.0),
            u_first_law_w: e.and_then(|x| x.1),
            second_law_w_per_k: s.and_then(|x| x.0),
            u_second_law_w_per_k: s.and_then(|x| x.1),
            hot_pair_k: h.and_then(|x| x.0),
            u_hot_pair_k: h.and_then(|x| x.1),
        };
        let relations: Vec<&'static str> = Relation::ALL
            .iter()
            .filter(|r| d.is_active(**r))
            .map(|r| r.name())
            .collect();
        let global_test = (!relations.is_empty()).then(|| GlobalTestJson {
            gamma: finite(d.gamma).unwrap_or(0.0),
            critical_95: heatbound::diagnosis::CHI2_95
                .get(relations.len() - 1)
                .copied()
                .unwrap_or(f64::MAX),
            relations,
        });
        let candidates = if d.consistent {
            Vec::new()
        } else {
            d.candidates
                .iter()
                .filter(|c| c.bias.is_finite() && c.bias_over_u.is_finite())
                .map(|c| CandidateJson {
                    channel: c.channel.name(),
                    bias: c.bias,
                    bias_unit: bias_unit(c.channel),
                    bias_over_u: c.bias_over_u,
                    explains: c.explains,
                    glr: finite(c.glr).unwrap_or(0.0),
                    z: finite(c.z).unwrap_or(0.0),
                })
                .collect()
        };
        DiagnosisJson {
            consistent: Some(d.consistent),
            suspect: d.suspect.map(Channel::name),
            candidates,
            residuals,
            global_test,
            ua,
            reason: reason(d),
        }
    }
}

/// The verdict in words, then why a relation was not checked.
pub fn reason(d: &Diagnosis<f64>) -> String {
    let mut out = verdict(d);
    let mut missing: Vec<&str> = Vec::new();
    if let Some(why) = d.first_law_unavailable {
        missing.push(why.reason());
    }
    if d.residual(Relation::HotPair).is_none() {
        missing.push(Unavailable::NoSecondHotSensor.reason());
    }
    for m in missing {
        out.push_str("; ");
        out.push_str(m);
    }
    out
}

/// The verdict alone, in one sentence.
pub fn verdict(d: &Diagnosis<f64>) -> String {
    if d.consistent {
        return "consistent: every relation checked holds within k·u".to_string();
    }
    let failing: Vec<&str> = Relation::ALL
        .iter()
        .filter(|r| d.is_active(**r))
        .map(|r| match r {
            Relation::FirstLaw => "the energy balance",
            Relation::SecondLaw => "the second law",
            Relation::HotPair => "the two hot sensors' agreement",
        })
        .collect();
    let what = if failing.is_empty() {
        "the readings".to_string()
    } else {
        failing.join(" and ")
    };
    if let Some(c) = d.suspect_candidate() {
        return format!(
            "inconsistent ({what}); suspect: {}, which explains it alone with a bias of {} ({:.1} u)",
            c.channel.name(),
            bias_text(c.channel, c.bias),
            c.bias_over_u
        );
    }
    let explaining: Vec<&str> = d
        .candidates
        .iter()
        .filter(|c| c.explains)
        .map(|c| c.channel.name())
        .collect();
    match explaining.len() {
        0 => format!(
            "inconsistent ({what}); no single channel's bias explains it: more than one reading may be wrong, or the rig is not as configured"
        ),
        _ => format!(
            "inconsistent ({what}); no suspect: {} each explain it, and these data cannot tell them apart",
            explaining.join(", ")
        ),
    }
}
