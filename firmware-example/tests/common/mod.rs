//! Shared helpers: run a scenario through the real monitor and alarms.

#![allow(dead_code)]

use heatbound::alarm::{AlarmSet, EventKind, RuleId};
use heatbound::config::RigConfig;
use heatbound::monitor::Monitor;
use heatbound_firmware_example::rig::{Rig, Scenario};

/// Sample period of the runs, seconds (10 Hz).
pub const DT_S: f32 = 0.1;

/// One alarm event of a run.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Seen {
    /// Sample time, seconds.
    pub t_s: f64,
    /// The rule.
    pub rule: RuleId,
    /// What happened.
    pub kind: EventKind,
}

/// What a run produced.
#[derive(Debug, Default)]
pub struct Run {
    /// Every alarm event, in order.
    pub events: Vec<Seen>,
    /// Samples the monitor rejected.
    pub invalid_samples: u64,
    /// Highest true head temperature, K.
    pub max_head_k: f32,
    /// Final true state.
    pub last_head_k: f32,
    /// Final true cold-side temperature, K.
    pub last_cold_k: f32,
    /// Final measured heat out, W.
    pub last_heat_out_w: f32,
}

impl Run {
    /// When `rule` was first raised, seconds.
    pub fn first_raised(&self, rule: RuleId) -> Option<f64> {
        self.events
            .iter()
            .find(|e| e.rule == rule && e.kind == EventKind::Raised)
            .map(|e| e.t_s)
    }

    /// The rules raised, each once, with the first time.
    pub fn raised(&self) -> Vec<(RuleId, f64)> {
        RuleId::ALL
            .into_iter()
            .filter_map(|r| self.first_raised(r).map(|t| (r, t)))
            .collect()
    }
}

/// Runs `scenario` for `duration_s` at 10 Hz through `Monitor<64>` and an
/// `AlarmSet` built from `config`.
pub fn run(scenario: Scenario, seed: u64, duration_s: f64, config: &RigConfig) -> Run {
    let mut rig = Rig::bench_stirling(scenario, seed);
    let mut monitor: Monitor<64> = Monitor::new(config).expect("valid config");
    let mut alarms = AlarmSet::new(config);
    let mut out = Run::default();
    let n = (duration_s / f64::from(DT_S)).round() as u32;
    for i in 0..=n {
        let t_ms = i * 100;
        let s = rig.sample(t_ms);
        monitor.push(&s);
        for e in alarms.update(t_ms, &monitor.alarm_inputs()) {
            out.events.push(Seen {
                t_s: f64::from(e.t_ms) / 1000.0,
                rule: e.rule,
                kind: e.kind,
            });
        }
        let truth = rig.truth();
        out.max_head_k = out.max_head_k.max(truth.t_head_k);
        out.last_head_k = truth.t_head_k;
        out.last_cold_k = truth.t_cold_k;
        out.last_heat_out_w = s.heat_out_w.unwrap_or(f32::NAN);
        rig.step(DT_S);
    }
    out.invalid_samples = monitor.invalid_samples();
    out
}
