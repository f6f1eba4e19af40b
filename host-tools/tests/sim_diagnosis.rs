//! The consistency diagnosis on the simulated bench rig: each fault
//! scenario, run at 10 Hz through the controller's `Monitor<64, f32>` and a
//! `diagnosis::Tracker<f32>` shown the window once a second (as the
//! controller does at each Summary), ends with the verdict the available
//! relations allow; the healthy rig stays consistent.
//!
//! ```text
//! Rig::sample --> Monitor<64, f32> --(every 1 s)--> Tracker::observe (learns UA) + Tracker::diagnose
//! ```
//!
//! Three configurations, all with T0 = the rig's room (`sil::default_config`):
//!
//! | setup | first law | why |
//! |---|---|---|
//! | `Default` | never | no `[losses]`, and UA is never learned: the default steady band for heat out (5 % max − min over 60 s) is narrower than the calorimeter's noise (1σ ≈ 1.7 % a sample: √2 × 0.05 K of RTD noise on a 4.25 K rise; 600 samples span about 6.5σ ≈ 11 %), so the monitor never reports the rig steady |
//! | `Losses` | from the start | `[losses]` = the rig's own UA (`Truth::room_ua_w_per_k`, 0.155 W/K) with a standard uncertainty of 10 % |
//! | `Learned` | from about 66 s | no `[losses]`; `[steady] heat_out_band_rel = 0.15` (about 9σ of that noise), so UA is learned from the first steady window, at 60 s, before any fault |
//!
//! What each relation can tell (`docs/diagnosis.md` §6), for this rig:
//! - the second law alone: a hot thermocouple reading low, or a work
//!   reading high, is explained by hot, heat_in and work alike: no suspect;
//! - the hot pair alone moves only `hot` and `hot2`: it cannot tell which;
//!   hot also moves the second law, which here has a wide margin
//!   (σ̇ ≈ 0.64 W/K, u ≈ 0.006 W/K), so a hot error that leaves it
//!   satisfied is not told from a hot2 error by it;
//! - the first law (heat out measured, UA known) moves with every power by
//!   its own share and with hot by `UA·b`: the three powers cannot be told
//!   apart, but it clears `hot` of a 150 K error (23 W against a band of
//!   about 14 W).
//!
//! Expected sizes come from the scenarios' own constants
//! (`heatbound_firmware_example::rig::scenario`). A named suspect's bias
//! must be within 10 % of the injected error: loose enough for the noise
//! and the window's f32 integrals, tight enough to tell the fault's size.

use heatbound::config::RigConfig;
use heatbound::diagnosis::{Diagnosis, Losses, Relation, Tracker, Ua, UaSource, Unavailable};
use heatbound::monitor::{Channel, Monitor};
use heatbound::wire::{self, Decoder, Frame};
use heatbound_firmware_example::rig::{Rig, RigParams, Scenario, scenario};
use heatbound_host::sil::{self, SimOptions, Simulation};

/// Sample period, ms (10 Hz, as the firmware).
const DT_MS: u32 = 100;

/// The diagnosis runs once a second, as the controller's Summaries do.
const DIAGNOSE_EVERY_MS: u32 = 1000;

/// Ten minutes: every fault is at its bound by then (thermocouple-drift
/// from 526 s, hot2-drift from 570 s), so the last window sees a constant
/// error.
const FAULT_RUN_S: u32 = 600;

/// The healthy runs' length.
const STEADY_RUN_S: u32 = 1800;

/// The relative standard uncertainty given to the configured UA: a round
/// figure for a loss coefficient measured in a separate test (the one the
/// rig learns comes out at about 9 %).
const U_UA_REL: f64 = 0.10;

/// The steady band for heat out in the `Learned` setup (see the module docs).
const LEARNING_HEAT_OUT_BAND: f64 = 0.15;

/// How close a named suspect's bias must be to the injected error, relative.
const BIAS_TOLERANCE: f32 = 0.10;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Setup {
    Default,
    Losses,
    Learned,
}

const SETUPS: [Setup; 3] = [Setup::Default, Setup::Losses, Setup::Learned];

/// The rig with or without its second hot thermocouple.
fn rig(scenario: Scenario, hot2: bool, seed: u64) -> Rig {
    let params = RigParams {
        hot2,
        ..RigParams::bench_stirling()
    };
    Rig::new(params, scenario, seed).expect("the bench parameters are valid")
}

/// The rig's own UA, from its truth at the start (every scenario here
/// starts at the set-point steady state, where it is exact).
fn true_ua(rig: &Rig) -> f32 {
    rig.truth()
        .room_ua_w_per_k()
        .expect("the head is above the room")
}

fn config(setup: Setup, rig: &Rig) -> RigConfig {
    let mut c = sil::default_config(rig);
    match setup {
        Setup::Default => {}
        Setup::Losses => {
            let ua = f64::from(true_ua(rig));
            c.losses = Some(Losses {
                ua_w_per_k: ua,
                u_ua_w_per_k: U_UA_REL * ua,
            });
        }
        Setup::Learned => c.steady.heat_out_band_rel = LEARNING_HEAT_OUT_BAND,
    }
    c
}

/// What a run gave.
struct Outcome {
    /// The diagnosis of the last window.
    last: Diagnosis<f32>,
    /// UA at the end.
    ua: Option<Ua<f32>>,
    /// Every diagnosis made, with its time, ms.
    seen: Vec<(u32, Diagnosis<f32>)>,
    /// The rig's own UA.
    true_ua: f32,
    /// The monitor's steady fraction at the end.
    steady_fraction: Option<f32>,
    /// The rig at the end (its truth).
    rig: Rig,
}

impl Outcome {
    fn first_inconsistent_s(&self) -> Option<f64> {
        self.seen
            .iter()
            .find(|(_, d)| !d.consistent)
            .map(|(t, _)| f64::from(*t) / 1000.0)
    }

    fn first_suspect_s(&self, channel: Channel) -> Option<f64> {
        self.seen
            .iter()
            .find(|(_, d)| d.suspect == Some(channel))
            .map(|(t, _)| f64::from(*t) / 1000.0)
    }
}

fn run(scenario: Scenario, hot2: bool, setup: Setup, seed: u64, duration_s: u32) -> Outcome {
    let mut rig = rig(scenario, hot2, seed);
    let true_ua = true_ua(&rig);
    let config = config(setup, &rig);
    let mut monitor: Monitor<64, f32> = Monitor::new(&config).expect("a valid configuration");
    let mut tracker = Tracker::<f32>::new(&config);
    let mut seen = Vec::new();
    for i in 0..=duration_s * 1000 / DT_MS {
        let t_ms = i * DT_MS;
        monitor.push(&rig.sample(t_ms));
        if t_ms > 0 && t_ms.is_multiple_of(DIAGNOSE_EVERY_MS) {
            tracker.observe(&monitor, t_ms);
            let d = tracker
                .diagnose(&monitor, t_ms)
                .unwrap_or_else(|e| panic!("{scenario} {setup:?}: no diagnosis at {t_ms} ms: {e}"));
            seen.push((t_ms, d));
        }
        rig.step(DT_MS as f32 / 1000.0);
    }
    let last = seen.last().expect("at least one diagnosis").1.clone();
    Outcome {
        last,
        ua: tracker.ua().copied(),
        seen,
        true_ua,
        steady_fraction: monitor.steady_fraction(),
        rig,
    }
}

/// The channels whose bias, removed, restores every relation.
fn explaining(d: &Diagnosis<f32>) -> Vec<Channel> {
    d.candidates
        .iter()
        .filter(|c| c.explains)
        .map(|c| c.channel)
        .collect()
}

/// A readable account of a diagnosis for failure messages.
fn show(d: &Diagnosis<f32>) -> String {
    let mut out = format!(
        "consistent {}, suspect {:?}, first law {:?}",
        d.consistent, d.suspect, d.first_law_unavailable
    );
    for rel in Relation::ALL {
        if let Some(r) = d.residual(rel) {
            out += &format!("; {} {:.4} (u {:.4})", rel.name(), r.value, r.u);
        }
    }
    for c in &d.candidates {
        out += &format!(
            "; {}: bias {:.4}, explains {}, binds {}",
            c.channel.name(),
            c.bias,
            c.explains,
            c.second_law_binds
        );
    }
    out
}

/// The injected channel is the one suspect, with its bias within 10 % of
/// the injected size.
fn assert_isolated(what: &str, o: &Outcome, channel: Channel, injected: f32) {
    let d = &o.last;
    assert!(!d.consistent, "{what}: {}", show(d));
    assert_eq!(d.suspect, Some(channel), "{what}: {}", show(d));
    let b = d.suspect_candidate().expect("the suspect's candidate").bias;
    assert!(
        ((b - injected) / injected).abs() <= BIAS_TOLERANCE,
        "{what}: bias {b}, injected {injected}: {}",
        show(d)
    );
}

/// Inconsistent, no suspect, and the injected channel among those that
/// explain (with at least one other).
fn assert_not_isolable(what: &str, o: &Outcome, channel: Channel) -> Vec<Channel> {
    let d = &o.last;
    assert!(!d.consistent, "{what}: {}", show(d));
    assert_eq!(d.suspect, None, "{what}: {}", show(d));
    let e = explaining(d);
    assert!(
        e.contains(&channel),
        "{what}: {} not among {e:?}: {}",
        channel.name(),
        show(d)
    );
    e
}

/// The first law's availability matches the setup.
fn assert_first_law(what: &str, o: &Outcome, setup: Setup) {
    let d = &o.last;
    match setup {
        Setup::Default => {
            assert_eq!(
                d.first_law_unavailable,
                Some(Unavailable::UaNotKnown),
                "{what}"
            );
            assert!(o.ua.is_none(), "{what}: {:?}", o.ua);
        }
        Setup::Losses | Setup::Learned => {
            assert_eq!(d.first_law_unavailable, None, "{what}: {}", show(d));
        }
    }
}

#[test]
fn the_healthy_rig_stays_consistent_for_30_minutes() {
    for seed in [1, 2, 3] {
        for setup in SETUPS {
            for hot2 in [false, true] {
                let what = format!("steady, seed {seed}, {setup:?}, hot2 {hot2}");
                let o = run(Scenario::Steady, hot2, setup, seed, STEADY_RUN_S);
                for (t, d) in &o.seen {
                    assert!(d.consistent, "{what} at {t} ms: {}", show(d));
                    assert!(d.candidates.is_empty() && d.suspect.is_none(), "{what}");
                }
                assert_first_law(&what, &o, setup);
                assert_eq!(o.last.residual(Relation::HotPair).is_some(), hot2, "{what}");
            }
        }
    }
}

#[test]
fn ua_is_learned_only_with_a_steady_band_that_fits_the_calorimeter() {
    for seed in [1, 2, 3] {
        // The default band: never steady, so never learned (module docs).
        let o = run(Scenario::Steady, false, Setup::Default, seed, FAULT_RUN_S);
        assert_eq!(o.steady_fraction, Some(0.0), "seed {seed}");
        assert!(o.ua.is_none());
        // A band the noise fits: learned at the first steady window, 60 s
        // (the steady test's duration), and it agrees with the truth within
        // its own propagated uncertainty.
        let o = run(Scenario::Steady, false, Setup::Learned, seed, FAULT_RUN_S);
        let ua = o.ua.expect("UA learned");
        assert_eq!(ua.source, UaSource::Learned);
        assert!(
            ua.learned_at_ms
                .is_some_and(|t| (60_000..=61_000).contains(&t)),
            "seed {seed}: {ua:?}"
        );
        assert!(
            (ua.w_per_k - o.true_ua).abs() <= ua.u_w_per_k,
            "seed {seed}: learned {ua:?}, true {}",
            o.true_ua
        );
    }
}

#[test]
fn thermocouple_drift_is_named_once_the_first_law_is_there() {
    for setup in SETUPS {
        let what = format!("thermocouple-drift, {setup:?}");
        let o = run(Scenario::ThermocoupleDrift, false, setup, 1, FAULT_RUN_S);
        assert_first_law(&what, &o, setup);
        let t = o.rig.truth();
        // The scenario's own bound, reached at 526 s: 90 % of the head's
        // excess over the room.
        let injected = -scenario::DRIFT_LIMIT * (t.t_head_k - t.ambient_k);
        match setup {
            // The second law alone: hot, heat_in and work all restore it.
            Setup::Default => {
                let e = assert_not_isolable(&what, &o, Channel::Hot);
                assert!(e.len() >= 2, "{what}: {e:?}");
            }
            // The first law: only hot moves both it (by UA·b ≈ 52 W) and
            // the second law the right way.
            Setup::Losses | Setup::Learned => {
                assert_isolated(&what, &o, Channel::Hot, injected);
            }
        }
        println!(
            "{what}: inconsistent from {:?} s, hot named from {:?} s; {}",
            o.first_inconsistent_s(),
            o.first_suspect_s(Channel::Hot),
            show(&o.last)
        );
    }
}

#[test]
fn thermocouple_drift_with_a_second_hot_sensor_is_named_by_the_pair() {
    // The pair and the second law both move with hot, the second law not
    // with hot2: hot alone explains both, with or without the first law.
    for setup in SETUPS {
        let what = format!("thermocouple-drift + hot2, {setup:?}");
        let o = run(Scenario::ThermocoupleDrift, true, setup, 1, FAULT_RUN_S);
        let t = o.rig.truth();
        let injected = -scenario::DRIFT_LIMIT * (t.t_head_k - t.ambient_k);
        assert_isolated(&what, &o, Channel::Hot, injected);
        println!(
            "{what}: inconsistent from {:?} s, hot named from {:?} s",
            o.first_inconsistent_s(),
            o.first_suspect_s(Channel::Hot)
        );
    }
}

#[test]
fn power_meter_scale_error_with_the_first_law_names_no_one() {
    // Work and heat_in restore both laws alike; heat_out the first law but
    // not the second. No suspect; work's own bias is the scenario's.
    for setup in [Setup::Losses, Setup::Learned] {
        let what = format!("power-meter-scale-error, {setup:?}");
        let o = run(Scenario::PowerMeterScaleError, false, setup, 1, FAULT_RUN_S);
        assert_first_law(&what, &o, setup);
        let e = assert_not_isolable(&what, &o, Channel::Work);
        assert!(e.contains(&Channel::HeatIn), "{what}: {e:?}");
        let injected = scenario::WORK_SCALE_ERROR - 1.0;
        let c = o.last.candidate(Channel::Work).expect("work's candidate");
        assert!(!c.second_law_binds, "{what}: {}", show(&o.last));
        assert!(
            ((c.bias - injected) / injected).abs() <= BIAS_TOLERANCE,
            "{what}: work's bias {} against {injected}",
            c.bias
        );
        println!(
            "{what}: inconsistent from {:?} s; {}",
            o.first_inconsistent_s(),
            show(&o.last)
        );
    }
}

#[test]
fn power_meter_scale_error_with_the_second_law_alone_names_no_one() {
    // Work ×4 makes σ̇ negative (−0.24 W/K); lowering work by 20 %, raising
    // heat_in by 25 %, lowering the cold reading or raising the hot one
    // would each bring it back: the second law alone cannot tell them
    // apart (docs/diagnosis.md §6, first row), so no channel is named.
    let what = "power-meter-scale-error, Default";
    let o = run(
        Scenario::PowerMeterScaleError,
        false,
        Setup::Default,
        1,
        FAULT_RUN_S,
    );
    assert_first_law(what, &o, Setup::Default);
    assert_not_isolable(what, &o, Channel::Work);
}

#[test]
fn hot2_drift_is_told_from_hot_only_by_the_first_law() {
    let injected = -scenario::HOT2_DRIFT_LIMIT_K;
    for setup in SETUPS {
        let what = format!("hot2-drift, {setup:?}");
        let o = run(Scenario::Hot2Drift, false, setup, 1, FAULT_RUN_S);
        assert_first_law(&what, &o, setup);
        let pair = o
            .last
            .residual(Relation::HotPair)
            .expect("the pair is checked");
        // The pair reads T_hot − T_hot2 = the drift, 150 K.
        assert!((pair.value + injected).abs() < 1.0, "{what}: {pair:?}");
        match setup {
            // The pair alone: hot +150 K or hot2 −150 K, and the second law
            // has room for either.
            Setup::Default => {
                let e = assert_not_isolable(&what, &o, Channel::Hot2);
                assert_eq!(e.len(), 2, "{what}: {e:?}");
                assert!(e.contains(&Channel::Hot), "{what}: {e:?}");
            }
            // Moving hot by 150 K moves the first law by UA·150 K ≈ 23 W,
            // beyond its band: hot is cleared, hot2 named.
            Setup::Losses | Setup::Learned => {
                assert_isolated(&what, &o, Channel::Hot2, injected);
            }
        }
        println!(
            "{what}: inconsistent from {:?} s, hot2 named from {:?} s; {}",
            o.first_inconsistent_s(),
            o.first_suspect_s(Channel::Hot2),
            show(&o.last)
        );
    }
}

#[test]
fn a_cold_offset_of_25_k_breaks_no_relation_on_this_rig() {
    // The cold reading enters the second law only as Q_out/T_c: 25 K high
    // lowers σ̇ by about 0.09 W/K, from 0.64 W/K, far from −k·u ≈ −0.012
    // W/K; and with T0 configured it does not enter the first law at all
    // (scenario::COLD_OFFSET_K). A gross error the relations cannot see.
    for setup in SETUPS {
        let what = format!("cold-offset, {setup:?}");
        let o = run(Scenario::ColdOffset, false, setup, 1, FAULT_RUN_S);
        assert_first_law(&what, &o, setup);
        for (t, d) in &o.seen {
            assert!(d.consistent, "{what} at {t} ms: {}", show(d));
        }
        let sigma = o.last.residual(Relation::SecondLaw).expect("σ̇");
        assert!(sigma.value > 0.4 && sigma.value < 0.6, "{what}: {sigma:?}");
    }
}

#[test]
fn a_heater_scale_error_fails_only_the_first_law_and_names_no_one() {
    let injected = scenario::HEATER_SCALE_ERROR - 1.0;
    for setup in SETUPS {
        let what = format!("heater-scale-error, {setup:?}");
        let o = run(Scenario::HeaterScaleError, false, setup, 1, FAULT_RUN_S);
        assert_first_law(&what, &o, setup);
        match setup {
            // A heater reading 15 % high only widens the second law's
            // margin (σ̇ 0.64 → 0.78 W/K): nothing to see without the
            // first law.
            Setup::Default => {
                for (t, d) in &o.seen {
                    assert!(d.consistent, "{what} at {t} ms: {}", show(d));
                }
            }
            // The first law is 75 W out; heat_in, work and heat_out each
            // restore it and leave the second law satisfied: no suspect.
            Setup::Losses | Setup::Learned => {
                let e = assert_not_isolable(&what, &o, Channel::HeatIn);
                assert!(
                    e.contains(&Channel::Work) && e.contains(&Channel::HeatOut),
                    "{what}: {e:?}"
                );
                assert!(!o.last.is_active(Relation::SecondLaw), "{what}");
                let c = o
                    .last
                    .candidate(Channel::HeatIn)
                    .expect("heat_in's candidate");
                assert!(
                    ((c.bias - injected) / injected).abs() <= BIAS_TOLERANCE,
                    "{what}: heat_in's bias {} against {injected}",
                    c.bias
                );
                println!(
                    "{what}: inconsistent from {:?} s; {}",
                    o.first_inconsistent_s(),
                    show(&o.last)
                );
            }
        }
    }
}

/// The losses of `rig` as `rig.toml` writes them, with T0 the rig's room.
fn rig_toml(rig: &Rig) -> String {
    let ua = f64::from(true_ua(rig));
    format!(
        "ambient_k = {}\n\n[losses]\nua_w_per_k = {ua}\nu_ua_w_per_k = {}\n",
        sil::decimal_f64(rig.params().ambient_k),
        U_UA_REL * ua
    )
}

#[test]
fn the_simulated_controller_sends_the_verdict_in_its_summaries() {
    // hot2-drift implies the second element; with [losses] the controller
    // names hot2 (it runs the same diagnosis, without the statistics).
    let options = SimOptions {
        scenario: Scenario::Hot2Drift,
        duration_s: f64::from(FAULT_RUN_S),
        ..SimOptions::default()
    };
    let rig = options.rig().expect("a valid rig");
    assert!(rig.has_hot2());
    let config = config(Setup::Losses, &rig);
    let mut sim = Simulation::new(&options, &config).expect("a simulation");
    let mut frames = Vec::new();
    while sim.next_tick(&mut frames).is_some() {}
    let last = frames
        .iter()
        .rev()
        .find_map(|f| match f {
            Frame::Summary(s) => Some(*s),
            _ => None,
        })
        .expect("a summary");
    assert!(last.status.hot2_measured);
    let v = last.verdict;
    assert_eq!(v.consistent, Some(false), "{v:?}");
    assert_eq!(v.suspect, Some(Channel::Hot2), "{v:?}");
    let b = v.bias.expect("the suspect's bias");
    let injected = -scenario::HOT2_DRIFT_LIMIT_K;
    assert!(((b - injected) / injected).abs() <= BIAS_TOLERANCE, "{v:?}");
    assert_eq!(sim.stats().last_verdict, Some(v));
    assert!(sim.stats().first_inconsistent_ms.is_some());

    // The healthy rig with --hot2: consistent in every summary.
    let options = SimOptions {
        hot2: true,
        duration_s: f64::from(FAULT_RUN_S),
        ..SimOptions::default()
    };
    let mut sim = Simulation::new(&options, &config).expect("a simulation");
    while sim.next_tick(&mut frames).is_some() {}
    assert_eq!(sim.stats().first_inconsistent_ms, None);
    assert_eq!(
        sim.stats().last_verdict.and_then(|v| v.consistent),
        Some(true)
    );
}

#[test]
fn simulate_names_hot2_with_the_rigs_losses_in_rig_toml() {
    let dir = tempfile::TempDir::new().expect("temp dir");
    let toml = dir.path().join("rig.toml");
    let rig = rig(Scenario::Hot2Drift, false, 1);
    std::fs::write(&toml, rig_toml(&rig)).expect("write rig.toml");
    let out = assert_cmd::Command::cargo_bin("heatbound")
        .expect("the heatbound binary")
        .args([
            "simulate",
            "--scenario",
            "hot2-drift",
            "--out",
            "-",
            "--config",
        ])
        .arg(&toml)
        .output()
        .expect("run heatbound");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    assert!(stderr.contains("two hot thermocouples"), "{stderr}");
    assert!(
        stderr.contains("last summary: inconsistent, suspect hot2"),
        "{stderr}"
    );
    let mut decoder = Decoder::<{ wire::MAX_FRAME_LEN }>::new();
    let mut last = None;
    decoder.feed(&out.stdout, |r| {
        if let Ok(Frame::Summary(s)) = r {
            last = Some(s);
        }
    });
    let v = last.expect("a summary").verdict;
    assert_eq!(v.suspect, Some(Channel::Hot2), "{v:?}");
}

#[test]
fn simulate_hot2_flag_sends_the_second_sensor() {
    let out = assert_cmd::Command::cargo_bin("heatbound")
        .expect("the heatbound binary")
        .args(["simulate", "--hot2", "--duration-s", "30", "--out", "-"])
        .output()
        .expect("run heatbound");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut decoder = Decoder::<{ wire::MAX_FRAME_LEN }>::new();
    let mut summaries = Vec::new();
    decoder.feed(&out.stdout, |r| {
        if let Ok(Frame::Summary(s)) = r {
            summaries.push(s);
        }
    });
    assert_eq!(summaries.len(), 30);
    assert!(summaries.iter().all(|s| s.status.hot2_measured));
    assert!(
        summaries
            .iter()
            .all(|s| s.verdict.consistent != Some(false))
    );
}
