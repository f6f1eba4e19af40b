//! Alarm rules and their state machines.
//!
//! Sources:
//! - DESIGN.md §4 "Alarm rules": the rule table, deadband, on/off-delay,
//!   latching with acknowledge, severities and the trip output;
//! - ISA-18.2 / IEC 62682 terms via REFERENCES.md "Steady state and alarms"
//!   (common practice): an alarm must not chatter on a value at its limit;
//! - config.rs defaults: on/off-delay 5 s, hot_max_k 1100 K with a 1 %
//!   (11 K) deadband, k = 2, near_carnot_fraction 0.75, trip rules latch;
//! - hand derivations in this file for the thresholds of each scenario.
mod common;

use common::{SplitMix, config, sample};
use heatbound::alarm::{
    AlarmInputs, AlarmSet, AlarmState, Event, EventKind, Events, Limits, RuleId, Severity, Verdict,
};
use heatbound::config::{AlarmsFile, RigConfig, RigFile, RuleFile};
use heatbound::monitor::{AlarmFigures, Faults, Line, Metrics, Monitor, Sample, Trends};

const RAISE: Verdict = Verdict::Raise { since_ms: None };

/// Verdicts with `rule` at `v` and every other rule clear.
fn only(rule: RuleId, v: Verdict) -> [Verdict; RuleId::COUNT] {
    let mut all = [Verdict::Clear; RuleId::COUNT];
    all[rule.index()] = v;
    all
}

fn kinds(events: &Events) -> Vec<(u32, RuleId, EventKind)> {
    events.iter().map(|e| (e.t_ms, e.rule, e.kind)).collect()
}

fn rule_config(rule: RuleId, on: f64, off: f64, latching: bool) -> RigConfig {
    let r = Some(RuleFile {
        on_delay_s: Some(on),
        off_delay_s: Some(off),
        latching: Some(latching),
        ..Default::default()
    });
    let mut a = AlarmsFile::default();
    match rule {
        RuleId::OverTemperature => a.over_temperature = r,
        RuleId::NearCarnot => a.near_carnot = r,
        RuleId::BeyondCarnot => a.beyond_carnot = r,
        RuleId::NegativeEntropyProduction => a.negative_entropy_production = r,
        RuleId::EnergyBalance => a.energy_balance = r,
        RuleId::SensorFault => a.sensor_fault = r,
        RuleId::LimitAhead => a.limit_ahead = r,
    }
    config(RigFile {
        alarms: Some(a),
        ..Default::default()
    })
}

#[test]
fn on_delay_needs_the_condition_without_a_break() {
    let rule = RuleId::NearCarnot; // advisory, non-latching by default (config.rs)
    let mut a = AlarmSet::new(&RigConfig::default());
    assert!(a.apply(0, &only(rule, RAISE)).is_empty());
    assert_eq!(a.state(rule), AlarmState::Pending { since_ms: 0 });
    assert!(
        a.apply(4999, &only(rule, RAISE)).is_empty(),
        "default on-delay 5 s (config.rs)"
    );
    assert!(!a.is_active(rule));
    // A Hold breaks the on-delay: it restarts on the next Raise.
    assert!(a.apply(5000, &only(rule, Verdict::Hold)).is_empty());
    assert_eq!(a.state(rule), AlarmState::Normal);
    assert!(a.apply(6000, &only(rule, RAISE)).is_empty());
    assert_eq!(a.state(rule), AlarmState::Pending { since_ms: 6000 });
    let e = a.apply(11_000, &only(rule, RAISE));
    assert_eq!(kinds(&e), [(11_000, rule, EventKind::Raised)]);
    assert_eq!(e.first().map(|e| e.severity), Some(Severity::Advisory));
    assert_eq!(a.state(rule), AlarmState::Active { acked: false });
}

#[test]
fn off_delay_needs_the_clear_condition_without_a_break() {
    let rule = RuleId::NearCarnot;
    let mut a = AlarmSet::new(&rule_config(rule, 0.0, 5.0, false));
    assert_eq!(
        kinds(&a.apply(100, &only(rule, RAISE))),
        [(100, rule, EventKind::Raised)],
        "on-delay 0 raises at once"
    );
    assert!(a.apply(1000, &only(rule, Verdict::Clear)).is_empty());
    assert_eq!(
        a.state(rule),
        AlarmState::Clearing {
            since_ms: 1000,
            acked: false
        }
    );
    assert!(a.is_active(rule), "still annunciated while clearing");
    // Inside the deadband again: back to Active, the off-delay restarts.
    assert!(a.apply(3000, &only(rule, Verdict::Hold)).is_empty());
    assert_eq!(a.state(rule), AlarmState::Active { acked: false });
    assert!(a.apply(4000, &only(rule, Verdict::Clear)).is_empty());
    assert!(a.apply(8999, &only(rule, Verdict::Clear)).is_empty());
    assert_eq!(
        kinds(&a.apply(9000, &only(rule, Verdict::Clear))),
        [(9000, rule, EventKind::Cleared)]
    );
    assert_eq!(a.state(rule), AlarmState::Normal);
}

#[test]
fn deadband_sits_below_the_limit() {
    // config.rs: over_temperature at hot_max_k = 1100 K, deadband 1 % = 11 K.
    let limits = Limits::new(&RigConfig::default());
    let at = |t: f32| {
        let inputs = AlarmInputs {
            figures: AlarmFigures::<f32>::default(),
            t_hot_k: Some(t),
            faults: Faults::default(),
            trends: Trends::default(),
        };
        limits.verdicts(&inputs)[RuleId::OverTemperature.index()]
    };
    assert_eq!(at(1100.5), RAISE);
    assert_eq!(at(1100.0), Verdict::Hold, "at the limit is not beyond it");
    assert_eq!(at(1089.5), Verdict::Hold);
    assert_eq!(at(1088.5), Verdict::Clear);
    // Just either side of both edges, so that the deadband is pinned to
    // better than 1 % of its 11 K (0.11 K): ±0.01 K.
    assert_eq!(at(1100.01), RAISE);
    assert_eq!(at(1089.01), Verdict::Hold, "0.01 K inside the deadband");
    assert_eq!(at(1088.99), Verdict::Clear, "0.01 K beyond the deadband");
    // Not evaluable (no valid hot reading yet) counts as clear.
    let none = AlarmInputs {
        figures: AlarmFigures::<f32>::default(),
        t_hot_k: None,
        faults: Faults::default(),
        trends: Trends::default(),
    };
    assert_eq!(limits.verdicts(&none), [Verdict::Clear; RuleId::COUNT]);
}

#[test]
fn latching_trip_holds_the_pin_until_cleared_and_acknowledged() {
    let rule = RuleId::BeyondCarnot; // trip, latching by default (config.rs)
    let mut a = AlarmSet::new(&RigConfig::default());
    a.apply(0, &only(rule, RAISE));
    assert!(!a.trip_active(), "pending does not trip");
    assert_eq!(
        kinds(&a.apply(5000, &only(rule, RAISE))),
        [(5000, rule, EventKind::Raised)]
    );
    assert!(a.trip_active());
    assert_eq!(a.active_mask(), 1 << rule.index());
    // The condition clears for the off-delay: latched, still annunciated, no event.
    a.apply(6000, &only(rule, Verdict::Clear));
    assert!(a.apply(11_000, &only(rule, Verdict::Clear)).is_empty());
    assert_eq!(a.state(rule), AlarmState::Unacknowledged);
    assert!(a.trip_active(), "a latched trip keeps the pin");
    // A returning condition re-activates it silently.
    assert!(a.apply(12_000, &only(rule, RAISE)).is_empty());
    assert_eq!(a.state(rule), AlarmState::Active { acked: false });
    a.apply(13_000, &only(rule, Verdict::Clear));
    a.apply(18_000, &only(rule, Verdict::Clear));
    assert_eq!(a.state(rule), AlarmState::Unacknowledged);
    // Acknowledge resets it: acknowledged, then cleared, both at the acknowledge time.
    assert_eq!(
        kinds(&a.acknowledge(rule, 20_000)),
        [
            (20_000, rule, EventKind::Acknowledged),
            (20_000, rule, EventKind::Cleared)
        ]
    );
    assert_eq!(a.state(rule), AlarmState::Normal);
    assert!(!a.trip_active());
    assert!(
        a.acknowledge(rule, 21_000).is_empty(),
        "nothing to acknowledge"
    );
}

#[test]
fn acknowledged_while_active_clears_after_the_off_delay() {
    let rule = RuleId::OverTemperature; // trip, latching
    let mut a = AlarmSet::new(&RigConfig::default());
    a.apply(0, &only(rule, RAISE));
    a.apply(5000, &only(rule, RAISE));
    assert_eq!(
        kinds(&a.acknowledge_all(7000)),
        [(7000, rule, EventKind::Acknowledged)]
    );
    assert_eq!(a.state(rule), AlarmState::Active { acked: true });
    assert!(
        a.trip_active(),
        "acknowledging does not clear a trip whose condition holds"
    );
    assert!(a.acknowledge(rule, 7500).is_empty(), "already acknowledged");
    a.apply(8000, &only(rule, Verdict::Clear));
    assert_eq!(
        a.state(rule),
        AlarmState::Clearing {
            since_ms: 8000,
            acked: true
        }
    );
    assert_eq!(
        kinds(&a.apply(13_000, &only(rule, Verdict::Clear))),
        [(13_000, rule, EventKind::Cleared)]
    );
    assert!(!a.trip_active());
    // Acknowledge during Clearing also counts.
    a.apply(20_000, &only(rule, RAISE));
    a.apply(25_000, &only(rule, RAISE));
    a.apply(26_000, &only(rule, Verdict::Clear));
    assert_eq!(
        kinds(&a.acknowledge(rule, 27_000)),
        [(27_000, rule, EventKind::Acknowledged)]
    );
    assert_eq!(
        a.state(rule),
        AlarmState::Clearing {
            since_ms: 26_000,
            acked: true
        }
    );
    assert_eq!(
        kinds(&a.apply(31_000, &only(rule, Verdict::Clear))),
        [(31_000, rule, EventKind::Cleared)]
    );
}

#[test]
fn every_state_transition() {
    // DESIGN.md §4 state machine, each (state, verdict) pair once; rule with
    // on-delay 5 s, off-delay 5 s, latching on; verdict at t = 10 000 ms.
    use AlarmState::*;
    let rule = RuleId::NearCarnot;
    let cases: [(AlarmState, Verdict, u32, AlarmState, Option<EventKind>); 16] = [
        (Normal, RAISE, 10_000, Pending { since_ms: 10_000 }, None),
        (
            Normal,
            Verdict::Raise {
                since_ms: Some(4000),
            },
            10_000,
            Active { acked: false },
            Some(EventKind::Raised),
        ),
        (Normal, Verdict::Hold, 10_000, Normal, None),
        (Normal, Verdict::Clear, 10_000, Normal, None),
        (
            Pending { since_ms: 6000 },
            RAISE,
            10_000,
            Pending { since_ms: 6000 },
            None,
        ),
        (
            Pending { since_ms: 5000 },
            RAISE,
            10_000,
            Active { acked: false },
            Some(EventKind::Raised),
        ),
        (
            Pending { since_ms: 6000 },
            Verdict::Hold,
            10_000,
            Normal,
            None,
        ),
        (
            Active { acked: false },
            Verdict::Hold,
            10_000,
            Active { acked: false },
            None,
        ),
        (
            Active { acked: true },
            RAISE,
            10_000,
            Active { acked: true },
            None,
        ),
        (
            Active { acked: false },
            Verdict::Clear,
            10_000,
            Clearing {
                since_ms: 10_000,
                acked: false,
            },
            None,
        ),
        (
            Clearing {
                since_ms: 6000,
                acked: false,
            },
            Verdict::Clear,
            10_000,
            Clearing {
                since_ms: 6000,
                acked: false,
            },
            None,
        ),
        (
            Clearing {
                since_ms: 5000,
                acked: false,
            },
            Verdict::Clear,
            10_000,
            Unacknowledged,
            None,
        ),
        (
            Clearing {
                since_ms: 5000,
                acked: true,
            },
            Verdict::Clear,
            10_000,
            Normal,
            Some(EventKind::Cleared),
        ),
        (
            Clearing {
                since_ms: 6000,
                acked: true,
            },
            Verdict::Hold,
            10_000,
            Active { acked: true },
            None,
        ),
        (Unacknowledged, RAISE, 10_000, Active { acked: false }, None),
        (Unacknowledged, Verdict::Clear, 10_000, Unacknowledged, None),
    ];
    let cfg = rule_config(rule, 5.0, 5.0, true);
    for (from, verdict, t, to, event) in cases {
        let mut a = AlarmSet::new(&cfg);
        // Drive the rule into `from` through the public interface.
        match from {
            Normal => {}
            Pending { since_ms } => {
                a.apply(since_ms, &only(rule, RAISE));
            }
            Active { acked } => {
                a.apply(0, &only(rule, Verdict::Raise { since_ms: Some(0) }));
                a.apply(5000, &only(rule, RAISE));
                if acked {
                    a.acknowledge(rule, 5000);
                }
            }
            Clearing { since_ms, acked } => {
                a.apply(0, &only(rule, RAISE));
                a.apply(5000, &only(rule, RAISE));
                if acked {
                    a.acknowledge(rule, since_ms);
                }
                a.apply(since_ms, &only(rule, Verdict::Clear));
            }
            Unacknowledged => {
                a.apply(0, &only(rule, RAISE));
                a.apply(5000, &only(rule, RAISE));
                a.apply(5000, &only(rule, Verdict::Clear));
                a.apply(9000, &only(rule, Verdict::Clear));
                // The off-delay runs out: latched.
                a.apply(10_000, &only(rule, Verdict::Clear));
            }
        }
        assert_eq!(a.state(rule), from, "setup of {from:?}");
        let e = a.apply(t, &only(rule, verdict));
        assert_eq!(a.state(rule), to, "{from:?} + {verdict:?}");
        assert_eq!(e.first().map(|e| e.kind), event, "{from:?} + {verdict:?}");
        if let Some(e) = e.first() {
            assert_eq!(e.t_ms, t, "events carry the sample time");
        }
    }
    // A disabled rule never leaves Normal.
    let off = config(RigFile {
        alarms: Some(AlarmsFile {
            near_carnot: Some(RuleFile {
                enabled: Some(false),
                ..Default::default()
            }),
            ..Default::default()
        }),
        ..Default::default()
    });
    let mut a = AlarmSet::new(&off);
    for t in [0, 10_000, 20_000] {
        assert!(a.apply(t, &only(rule, RAISE)).is_empty());
    }
    assert_eq!(a.state(rule), Normal);
}

/// The monitor and the alarms of one rig, with every event logged.
struct Rig {
    monitor: Monitor<64>,
    alarms: AlarmSet,
    events: Vec<Event>,
    times: Vec<u32>,
}

impl Rig {
    fn new(cfg: &RigConfig) -> Self {
        Self {
            monitor: Monitor::new(cfg).unwrap(),
            alarms: AlarmSet::new(cfg),
            events: Vec::new(),
            times: Vec::new(),
        }
    }

    fn push(&mut self, s: Sample) {
        self.monitor.push(&s);
        let e = self.alarms.update(s.t_ms, &self.monitor.alarm_inputs());
        self.events.extend(e);
        self.times.push(s.t_ms);
    }

    fn of(&self, rule: RuleId, kind: EventKind) -> Vec<u32> {
        self.events
            .iter()
            .filter(|e| e.rule == rule && e.kind == kind)
            .map(|e| e.t_ms)
            .collect()
    }

    fn all_at_sample_times(&self) {
        for e in &self.events {
            assert!(
                self.times.contains(&e.t_ms),
                "{e:?} is not at a sample time"
            );
        }
    }
}

#[test]
fn no_chatter_at_the_limit() {
    // T_hot sits at hot_max_k = 1100 K with ±0.1 K noise for an hour at 1 Hz
    // (ISA-18.2 practice via REFERENCES.md: no chattering alarms).
    let mut rig = Rig::new(&RigConfig::default());
    let mut rng = SplitMix(3);
    for i in 0..3600u32 {
        rig.push(sample(
            i * 1000,
            1100.0 + 0.1 * rng.symmetric(),
            300.0,
            1000.0,
            150.0,
            None,
        ));
    }
    let raised = rig.of(RuleId::OverTemperature, EventKind::Raised);
    assert!(raised.len() <= 1, "raised {raised:?}");
    assert!(
        rig.of(RuleId::OverTemperature, EventKind::Cleared)
            .is_empty()
    );
    // This seed does cross the limit for 5 s in a row, so the check has teeth.
    assert_eq!(raised.len(), 1);
    assert_eq!(rig.events.len(), 1, "no other rule fires: {:?}", rig.events);
    rig.all_at_sample_times();
}

#[test]
fn drifting_hot_thermocouple_raises_beyond_carnot() {
    // True T_h 800 K; the reading falls to 350 K over an hour at 1 Hz with
    // η = 0.3 and T_c = 300 K. Hand derivation: the apparent η_C = 1 − 300/T
    // falls below η = 0.3 at T = 428.57 K, and below η/0.75 = 0.4 (near_carnot)
    // at T = 500 K.
    let mut rig = Rig::new(&RigConfig::default());
    let hot = |i: u32| 800.0 - 450.0 * f64::from(i) / 3600.0;
    for i in 0..=3600u32 {
        rig.push(sample(i * 1000, hot(i), 300.0, 1000.0, 300.0, None));
    }
    let beyond = rig.of(RuleId::BeyondCarnot, EventKind::Raised);
    assert_eq!(beyond.len(), 1, "{:?}", rig.events);
    let t_beyond = hot(beyond[0] / 1000);
    assert!(
        t_beyond < 428.57,
        "raised with the reading at {t_beyond} K, above the Carnot crossing"
    );
    assert!(t_beyond > 400.0, "raised late, at {t_beyond} K");
    let near = rig.of(RuleId::NearCarnot, EventKind::Raised);
    assert_eq!(near.len(), 1);
    assert!(near[0] < beyond[0], "near_carnot warns first");
    assert!(hot(near[0] / 1000) < 500.0);
    let negative = rig.of(RuleId::NegativeEntropyProduction, EventKind::Raised);
    assert_eq!(
        negative.len(),
        1,
        "the same fault through the entropy account"
    );
    assert!(rig.alarms.trip_active());
    rig.all_at_sample_times();
}

/// An hour of a steady engine at 600 K / 300 K (η_C = 0.5) with efficiency
/// `eta`; returns the rig and the last window's figures.
fn steady_engine(eta: f64, heat_out_w: Option<f64>) -> (Rig, Metrics<f32>) {
    let mut rig = Rig::new(&RigConfig::default());
    for i in 0..3600u32 {
        rig.push(sample(
            i * 1000,
            600.0,
            300.0,
            1000.0,
            1000.0 * eta,
            heat_out_w,
        ));
    }
    let m = rig.monitor.window_metrics();
    (rig, m)
}

#[test]
fn excursion_inside_the_uncertainty_does_not_raise() {
    // η = 0.505 against η_C = 0.5: beyond Carnot by 0.005, but u(margin) with
    // the default uncertainties is 0.0042 (hand derivation:
    // √((0.505·√2·0.00577)² + (0.144/600)² + (300·1.155/600²)²)), k·u = 0.0084.
    let (rig, m) = steady_engine(0.505, None);
    let excess = -m.carnot_margin.unwrap();
    let ku = 2.0 * m.u_carnot_margin.unwrap();
    assert!(excess > 0.0 && excess < ku, "premise: 0 < {excess} < {ku}");
    assert!(rig.of(RuleId::BeyondCarnot, EventKind::Raised).is_empty());
    // σ̇ = 495/300 − 1000/600 = −0.0167 W/K against k·u(σ̇) = 0.028 W/K (hand derivation).
    let s = m.entropy_rate_w_per_k.unwrap();
    let ku_s = 2.0 * m.u_entropy_rate_w_per_k.unwrap();
    assert!(s < 0.0 && -s < ku_s, "premise: 0 < {} < {ku_s}", -s);
    assert!(
        rig.of(RuleId::NegativeEntropyProduction, EventKind::Raised)
            .is_empty()
    );
    // It is implausibly close to the bound, though.
    assert_eq!(rig.of(RuleId::NearCarnot, EventKind::Raised), [6000]);

    // η = 0.52: 0.02 beyond, more than k·u, so both second-law rules raise
    // after the 5 s on-delay (the first window figure exists at t = 1 s).
    let (rig, m) = steady_engine(0.52, None);
    assert!(-m.carnot_margin.unwrap() > 2.0 * m.u_carnot_margin.unwrap());
    assert_eq!(rig.of(RuleId::BeyondCarnot, EventKind::Raised), [6000]);
    assert_eq!(
        rig.of(RuleId::NegativeEntropyProduction, EventKind::Raised),
        [6000]
    );
    assert!(rig.alarms.trip_active());
}

#[test]
fn energy_balance_with_heat_out_measured() {
    // Q_in 1000 W, W 150 W, Q_out 900 W measured: Q_loss = −50 W against
    // k·u(Q_loss) = 2·√((1000·0.00577)² + (150·0.00577)² + (900·0.01155)²) = 23.8 W
    // (hand derivation, default uncertainties).
    let (rig, m) = steady_engine(0.15, Some(900.0));
    assert!(-m.balance_residual_j.unwrap() > 2.0 * m.u_balance_residual_j.unwrap());
    assert_eq!(rig.of(RuleId::EnergyBalance, EventKind::Raised), [6000]);
    assert!(
        !rig.alarms.trip_active(),
        "energy_balance is a warning (config.rs)"
    );
    // Q_out 870 W: −20 W against k·u = 23.2 W, inside the uncertainty.
    let (rig, m) = steady_engine(0.15, Some(870.0));
    let (loss, ku) = (
        m.balance_residual_j.unwrap(),
        2.0 * m.u_balance_residual_j.unwrap(),
    );
    assert!(loss < 0.0 && -loss < ku, "premise: 0 < {} < {ku}", -loss);
    assert!(rig.events.is_empty(), "{:?}", rig.events);
    // Heat out inferred: the rule is not evaluable and never raises.
    let (rig, m) = steady_engine(0.15, None);
    assert_eq!(m.balance_residual_j, None);
    assert!(rig.events.is_empty());
}

#[test]
fn over_temperature_raises_latches_and_clears_on_acknowledge() {
    let mut rig = Rig::new(&RigConfig::default());
    let mut t = 0;
    let mut run = |rig: &mut Rig, hot: f64, seconds: u32| {
        for _ in 0..seconds {
            rig.push(sample(t, hot, 300.0, 1000.0, 150.0, None));
            t += 1000;
        }
    };
    run(&mut rig, 1000.0, 10);
    run(&mut rig, 1120.0, 10); // above 1100 K from t = 10 s
    assert_eq!(rig.of(RuleId::OverTemperature, EventKind::Raised), [15_000]);
    assert!(rig.alarms.trip_active());
    run(&mut rig, 1095.0, 30); // inside the 11 K deadband: held
    assert_eq!(
        rig.alarms.state(RuleId::OverTemperature),
        AlarmState::Active { acked: false }
    );
    run(&mut rig, 1080.0, 30); // clear of the deadband: latched, not cleared
    assert_eq!(
        rig.alarms.state(RuleId::OverTemperature),
        AlarmState::Unacknowledged
    );
    assert!(rig.alarms.trip_active());
    assert!(
        rig.of(RuleId::OverTemperature, EventKind::Cleared)
            .is_empty()
    );
    let e = rig.alarms.acknowledge(RuleId::OverTemperature, 80_000);
    assert_eq!(
        kinds(&e),
        [
            (80_000, RuleId::OverTemperature, EventKind::Acknowledged),
            (80_000, RuleId::OverTemperature, EventKind::Cleared)
        ]
    );
    assert!(!rig.alarms.trip_active());
}

#[test]
fn sensor_fault_from_a_run_of_nan_samples() {
    let mut rig = Rig::new(&RigConfig::default());
    let mut t = 0;
    let mut run = |rig: &mut Rig, hot: f64, seconds: u32| {
        for _ in 0..seconds {
            rig.push(sample(t, hot, 300.0, 1000.0, 150.0, None));
            t += 1000;
        }
    };
    run(&mut rig, 600.0, 20);
    run(&mut rig, f64::NAN, 4); // 20..23 s: shorter than the 5 s on-delay
    run(&mut rig, 600.0, 10);
    assert!(
        rig.of(RuleId::SensorFault, EventKind::Raised).is_empty(),
        "{:?}",
        rig.events
    );
    run(&mut rig, f64::NAN, 10); // from 34 s: raised 5 s after the first NaN
    assert_eq!(rig.of(RuleId::SensorFault, EventKind::Raised), [39_000]);
    assert_eq!(rig.events[0].severity, Severity::Warning);
    run(&mut rig, 600.0, 10); // valid from 44 s, cleared after the 5 s off-delay
    assert_eq!(rig.of(RuleId::SensorFault, EventKind::Cleared), [49_000]);
    rig.all_at_sample_times();
}

#[test]
fn sensor_fault_from_a_stale_gap() {
    // stale_s defaults to max_gap_s = 10 s (config.rs).
    let mut rig = Rig::new(&RigConfig::default());
    for i in 0..10u32 {
        rig.push(sample(i * 1000, 600.0, 300.0, 1000.0, 150.0, None));
    }
    // 30 s of silence: the channels were stale since 9 s, longer than the
    // on-delay, so the first sample after the gap raises it.
    rig.push(sample(39_000, 600.0, 300.0, 1000.0, 150.0, None));
    assert_eq!(rig.of(RuleId::SensorFault, EventKind::Raised), [39_000]);
    for i in 40..50u32 {
        rig.push(sample(i * 1000, 600.0, 300.0, 1000.0, 150.0, None));
    }
    assert_eq!(rig.of(RuleId::SensorFault, EventKind::Cleared), [45_000]);
    // A gap within stale_s does not raise.
    let mut rig = Rig::new(&RigConfig::default());
    for t in [0, 1000, 11_000, 12_000, 13_000] {
        rig.push(sample(t, 600.0, 300.0, 1000.0, 150.0, None));
    }
    assert!(rig.events.is_empty(), "{:?}", rig.events);
}

#[test]
fn near_carnot_above_three_quarters_of_the_bound() {
    // η_C = 0.5 (600 K / 300 K): η = 0.38 is 0.76 of Carnot, above the
    // default fraction 0.75 (config.rs, from memory via REFERENCES.md).
    let (rig, m) = steady_engine(0.38, None);
    assert!((m.second_law_efficiency.unwrap() - 0.76).abs() < 1e-5);
    assert_eq!(rig.of(RuleId::NearCarnot, EventKind::Raised), [6000]);
    assert!(!rig.alarms.trip_active(), "near_carnot is advisory");
    assert_eq!(rig.events.len(), 1, "{:?}", rig.events);
    // η = 0.37 is 0.74 of Carnot: not raised.
    let (rig, _) = steady_engine(0.37, None);
    assert!(rig.events.is_empty(), "{:?}", rig.events);
}

/// Window figures with only the second-law quantities of one rule set, in
/// `f64`; every other figure not evaluable.
fn figures(f: impl FnOnce(&mut AlarmFigures<f64>)) -> AlarmInputs<f64> {
    let mut figures = AlarmFigures::<f64>::default();
    f(&mut figures);
    AlarmInputs {
        figures,
        t_hot_k: None,
        faults: Faults::default(),
        trends: Trends::default(),
    }
}

/// Runs `rule` (on-delay 0, off-delay 2 s, not latching) through raise,
/// hold inside the deadband, and clear beyond it, at 1 s steps:
/// DESIGN.md §4 "Alarm rules": a rule raises when its reading is beyond the
/// limit by more than k·u, stays raised while it is back inside the
/// deadband, and clears once it is beyond the deadband for the off-delay.
fn raise_hold_clear(
    rule: RuleId,
    raise: AlarmInputs<f64>,
    hold: AlarmInputs<f64>,
    clear: AlarmInputs<f64>,
) {
    let limits = Limits::new(&RigConfig::default());
    let v = |i: &AlarmInputs<f64>| limits.verdicts(i)[rule.index()];
    assert_eq!(v(&raise), RAISE, "{rule:?}: raise point");
    assert_eq!(v(&hold), Verdict::Hold, "{rule:?}: inside the deadband");
    assert_eq!(v(&clear), Verdict::Clear, "{rule:?}: beyond the deadband");

    let mut a = AlarmSet::new(&rule_config(rule, 0.0, 2.0, false));
    assert_eq!(
        kinds(&a.update(0, &raise)),
        [(0, rule, EventKind::Raised)],
        "{rule:?}: on-delay 0 raises at once"
    );
    for t in [1000, 2000, 3000, 4000] {
        assert!(a.update(t, &hold).is_empty(), "{rule:?} at {t} ms");
        assert_eq!(
            a.state(rule),
            AlarmState::Active { acked: false },
            "{rule:?}: held inside the deadband at {t} ms"
        );
    }
    assert!(a.update(5000, &clear).is_empty());
    assert!(a.update(6999, &clear).is_empty(), "{rule:?}: off-delay 2 s");
    assert!(a.is_active(rule));
    assert_eq!(
        kinds(&a.update(7000, &clear)),
        [(7000, rule, EventKind::Cleared)],
        "{rule:?}: cleared after the off-delay"
    );
    assert_eq!(a.state(rule), AlarmState::Normal);
}

#[test]
fn beyond_carnot_raises_holds_in_its_deadband_and_clears() {
    // DESIGN.md §4: raise when η − η_C > k·u(margin). Defaults (config.rs):
    // k = 2, deadband 0.01 efficiency points. With u(margin) = 0.002,
    // k·u = 0.004: raise for margin < −0.004, hold while
    // −margin − k·u ≥ −0.01, i.e. margin ≤ 0.006, clear above (hand derivation).
    let at = |margin: f64| {
        figures(|f| {
            f.carnot_margin = Some(margin);
            f.var_carnot_margin = Some(0.002 * 0.002);
        })
    };
    raise_hold_clear(RuleId::BeyondCarnot, at(-0.02), at(0.005), at(0.007));
}

#[test]
fn negative_entropy_production_raises_holds_in_its_deadband_and_clears() {
    // DESIGN.md §4: raise when σ̇ < −k·u(σ̇). Deadband 0.01 of the entropy
    // inflow rate (config.rs), here 2 W/K: 0.02 W/K. With u(σ̇) = 0.005 W/K,
    // k·u = 0.01 W/K: raise for σ̇ < −0.01, hold while −σ̇ − 0.01 ≥ −0.02,
    // i.e. σ̇ ≤ 0.01 W/K, clear above (hand derivation).
    let at = |sigma: f64| {
        figures(|f| {
            f.entropy_rate_w_per_k = Some(sigma);
            f.var_entropy_rate_w_per_k = Some(0.005 * 0.005);
            f.entropy_in_rate_w_per_k = Some(2.0);
        })
    };
    raise_hold_clear(
        RuleId::NegativeEntropyProduction,
        at(-0.05),
        at(0.005),
        at(0.015),
    );
}

#[test]
fn energy_balance_raises_holds_in_its_deadband_and_clears() {
    // DESIGN.md §4: raise when Q_loss < −k·u(Q_loss). Deadband 0.01 of Q_in
    // (config.rs), here 10 kJ: 100 J. With u(Q_loss) = 25 J, k·u = 50 J:
    // raise for Q_loss < −50 J, hold while −Q_loss − 50 ≥ −100, i.e.
    // Q_loss ≤ 50 J, clear above (hand derivation).
    let at = |loss: f64| {
        figures(|f| {
            f.heat_in_j = 10_000.0;
            f.balance_residual_j = Some(loss);
            f.var_balance_residual_j = Some(25.0 * 25.0);
        })
    };
    raise_hold_clear(RuleId::EnergyBalance, at(-200.0), at(30.0), at(60.0));
}

/// `limit_ahead`: the hot side rising 0.5 K/s from 1000 K reaches the
/// default `hot_max_k` (1100 K, config.rs) in 200 s, inside the default
/// 600 s horizon; at 0.1 K/s it takes 1000 s, beyond it. The deadband is
/// 60 s of horizon (config.rs). The arithmetic is the test's own.
#[test]
fn limit_ahead_raises_when_a_limit_is_projected_within_the_horizon() {
    let limits = Limits::new(&RigConfig::default());
    let heading = |slope: f32, u_slope: f32| {
        let inputs = AlarmInputs {
            figures: AlarmFigures::<f32>::default(),
            t_hot_k: Some(1000.0),
            faults: Faults::default(),
            trends: Trends {
                carnot_margin: None,
                t_hot_k: Some(Line {
                    value: 1000.0,
                    slope_per_s: slope,
                    u_slope_per_s: u_slope,
                }),
            },
        };
        limits.verdicts(&inputs)[RuleId::LimitAhead.index()]
    };
    assert_eq!(heading(0.5, 0.01), RAISE, "200 s ahead");
    assert_eq!(heading(0.1, 0.001), Verdict::Clear, "1000 s ahead");
    // 100 K at 100/630 K/s: 630 s, within the 60 s deadband past 600 s.
    assert_eq!(heading(100.0 / 630.0, 0.001), Verdict::Hold);
    // A slope within k = 2 standard errors of zero is no trend.
    assert_eq!(heading(0.5, 0.3), Verdict::Clear);
    // Falling: no crossing.
    assert_eq!(heading(-0.5, 0.01), Verdict::Clear);
}
