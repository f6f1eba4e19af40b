//! The lab's view of its rigs: one line per rig (state, η against η_C or
//! COP against COP_C, σ̇, active alarms, the consistency check, age of the
//! last frame), or one JSON object per update.
use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write as _;

use heatbound::alarm::RuleId;
use heatbound::wire::Frame;
use serde_json::{Value, json};

/// What the lab knows of one rig.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RigView {
    /// `online`, `offline` (its watch said so, or the broker did for a lost
    /// watch), `ended` (the run closed), or `-` (no status yet).
    pub state: String,
    /// Host receive time of the latest frame, Unix ms.
    pub last_frame_host_ms: Option<i64>,
    /// The rig runs as a heat pump (COP) rather than an engine (η).
    pub reverse: bool,
    /// η or COP of the latest summary.
    pub performance: Option<f32>,
    /// Its Carnot bound.
    pub bound: Option<f32>,
    /// σ̇, W/K.
    pub entropy_rate_w_per_k: Option<f32>,
    /// The rules active in the latest summary.
    pub alarms: Vec<&'static str>,
    /// The latest check: `consistent`, `suspect CHANNEL`, `inconsistent`.
    pub check: Option<String>,
    /// Summaries seen.
    pub summaries: u64,
    /// The latest thing worth saying (a refused record, a hole given up).
    pub note: Option<String>,
}

/// Every rig, and which changed since the last look.
#[derive(Debug, Default)]
pub struct Overview {
    rigs: BTreeMap<String, RigView>,
    changed: BTreeSet<String>,
}

impl Overview {
    fn rig(&mut self, rig: &str) -> &mut RigView {
        self.changed.insert(rig.to_string());
        self.rigs.entry(rig.to_string()).or_insert_with(|| RigView {
            state: "-".into(),
            ..RigView::default()
        })
    }

    /// A frame of `rig`, received at `host_ms`.
    pub fn frame(&mut self, rig: &str, frame: &Frame, host_ms: i64) {
        let view = self.rig(rig);
        view.last_frame_host_ms = Some(view.last_frame_host_ms.map_or(host_ms, |t| t.max(host_ms)));
        match frame {
            Frame::Hello(h) => view.reverse = h.mode.is_reverse(),
            Frame::Summary(s) => {
                view.summaries += 1;
                view.reverse = s.status.mode.is_reverse();
                view.performance = s.performance();
                view.bound = s.bound();
                view.entropy_rate_w_per_k = s.entropy_rate_w_per_k;
                view.alarms = RuleId::ALL
                    .into_iter()
                    .filter(|r| s.alarms & (1 << r.index()) != 0)
                    .map(RuleId::as_str)
                    .collect();
                view.check = s
                    .verdict
                    .consistent
                    .map(|ok| match (ok, s.verdict.suspect) {
                        (true, _) => "consistent".to_string(),
                        (false, Some(c)) => format!("suspect {}", c.name()),
                        (false, None) => "inconsistent".to_string(),
                    });
            }
            _ => {}
        }
    }

    /// The retained status message of `rig`.
    pub fn status(&mut self, rig: &str, payload: &[u8]) {
        let state = serde_json::from_slice::<Value>(payload)
            .ok()
            .and_then(|v| v.get("state").and_then(Value::as_str).map(str::to_string));
        let view = self.rig(rig);
        view.state = match state {
            Some(s) if s == "online" || s == "offline" => s,
            _ => "?".into(),
        };
    }

    /// The run of `rig` ended.
    pub fn run_ended(&mut self, rig: &str) {
        let view = self.rig(rig);
        if view.state != "offline" {
            view.state = "ended".into();
        }
    }

    /// Something worth saying about `rig`.
    pub fn note(&mut self, rig: &str, text: String) {
        self.rig(rig).note = Some(text);
    }

    /// The rigs that changed since the last call.
    pub fn take_changed(&mut self) -> Vec<String> {
        std::mem::take(&mut self.changed).into_iter().collect()
    }

    /// Every rig, by id.
    pub fn rigs(&self) -> impl Iterator<Item = (&String, &RigView)> {
        self.rigs.iter()
    }

    /// One rig as a JSON object, at `now_ms`.
    pub fn json(&self, rig: &str, now_ms: i64) -> Option<Value> {
        let v = self.rigs.get(rig)?;
        let (perf, bound) = if v.reverse {
            ("cop", "cop_carnot")
        } else {
            ("efficiency", "carnot_efficiency")
        };
        Some(json!({
            "rig": rig,
            "state": v.state,
            perf: v.performance.map(f64::from).filter(|x| x.is_finite()),
            bound: v.bound.map(f64::from).filter(|x| x.is_finite()),
            "entropy_rate_w_per_k": v.entropy_rate_w_per_k.map(f64::from).filter(|x| x.is_finite()),
            "alarms": v.alarms,
            "check": v.check,
            "summaries": v.summaries,
            "last_frame_age_s": v.last_frame_host_ms.map(|t| (now_ms - t).max(0) as f64 / 1000.0),
            "note": v.note,
        }))
    }

    /// The table: a header, then one line per rig, at `now_ms`.
    pub fn table(&self, now_ms: i64) -> String {
        let mut out = format!(
            "{:<16} {:<7} {:>15} {:>11} {:>9} {:>7}  {:<20} {}\n",
            "rig", "state", "η | COP", "bound", "σ̇ W/K", "age s", "check", "alarms"
        );
        for (rig, v) in &self.rigs {
            let num = |x: Option<f32>, d: usize| match x.filter(|x| x.is_finite()) {
                Some(x) => format!("{x:.d$}"),
                None => "-".into(),
            };
            let perf = format!(
                "{} {}",
                if v.reverse { "COP" } else { "η" },
                num(v.performance, 4)
            );
            let age = match v.last_frame_host_ms {
                Some(t) => format!("{:.1}", (now_ms - t).max(0) as f64 / 1000.0),
                None => "-".into(),
            };
            let alarms = if v.alarms.is_empty() {
                "none".to_string()
            } else {
                v.alarms.join(",")
            };
            let _ = writeln!(
                out,
                "{:<16} {:<7} {:>15} {:>11} {:>9} {:>7}  {:<20} {}",
                rig,
                v.state,
                perf,
                num(v.bound, 4),
                num(v.entropy_rate_w_per_k, 4),
                age,
                v.check.as_deref().unwrap_or("-"),
                alarms
            );
        }
        out
    }
}
