//! The controller's end of the downlink: what each command does and when,
//! what is refused and why, and that nothing on the downlink changes the
//! controller's state unless it carries a valid tag and a fresh counter.
//!
//! The scenario numbers (600 K / 300 K, 500 W in, 300 W out) are invented
//! for the test: 60 % against a 50 % Carnot bound, so `beyond_carnot`
//! raises and trips under the default settings.
use heatbound::alarm::{AlarmState, RuleId};
use heatbound::config::RigConfig;
use heatbound::control::{Controller, ControllerSettings};
use heatbound::monitor::Sample;
use heatbound::wire::{
    self, Addressee, Authenticator, Command, CommandFrame, CommandKey, Frame, Hello, ReplyCode,
    RigId,
};
use proptest::prelude::*;

const SESSION: u32 = 0x0BAD_CAFE;

fn settings() -> ControllerSettings {
    ControllerSettings {
        rig_id: RigId::new("rig-under-test").unwrap(),
        firmware_version: (0, 1, 0),
        sample_period_ms: 1000,
        summary_period_ms: 1000,
        hello_period_ms: 0,
    }
}

fn to() -> Addressee {
    Addressee {
        rig_id: settings().rig_id,
        session: SESSION,
    }
}

fn impossible(t_s: u32) -> Sample {
    Sample {
        t_ms: t_s * 1000,
        t_hot_k: 600.0,
        t_cold_k: 300.0,
        heat_in_w: 500.0,
        work_w: 300.0,
        heat_out_w: None,
        t_hot2_k: None,
    }
}

/// A controller holding `key` whose `beyond_carnot` is active, at t = 20 s.
fn tripped(key: Option<&CommandKey>) -> Controller<64> {
    let mut c = Controller::<64>::new(&settings(), &RigConfig::default(), key, SESSION).unwrap();
    c.start(0, &mut |_: &Frame| {});
    for t in 1..=20 {
        c.step(&impossible(t), &mut |_: &Frame| {});
    }
    assert!(c.alarms().is_active(RuleId::BeyondCarnot));
    assert!(c.trip_active());
    c
}

fn seal(counter: u32, command: Command, key: &CommandKey, to: &Addressee) -> Vec<u8> {
    let mut buf = [0u8; wire::MAX_COMMAND_LEN];
    let frame = CommandFrame { counter, command };
    let n = wire::encode_command(&frame, Some(&Authenticator::new(key)), to, &mut buf).unwrap();
    buf[..n].to_vec()
}

fn receive(c: &mut Controller<64>, bytes: &[u8], t_ms: u32) -> Vec<Frame> {
    let mut out = Vec::new();
    c.receive(bytes, t_ms, &mut |f: &Frame| out.push(f.clone()));
    out
}

fn step(c: &mut Controller<64>, t_s: u32) -> Vec<Frame> {
    let mut out = Vec::new();
    c.step(&impossible(t_s), &mut |f: &Frame| out.push(f.clone()));
    out
}

fn replies(frames: &[Frame]) -> Vec<(u32, ReplyCode)> {
    frames
        .iter()
        .filter_map(|f| match f {
            Frame::Reply(r) => Some((r.counter, r.code)),
            _ => None,
        })
        .collect()
}

/// Everything a command could change.
fn state(c: &Controller<64>) -> (Vec<AlarmState>, Hello, RigConfig) {
    (
        RuleId::ALL.iter().map(|r| c.alarms().state(*r)).collect(),
        *c.hello(),
        *c.config(),
    )
}

#[test]
fn an_acknowledge_acts_at_once_and_a_replay_is_refused() {
    let key = CommandKey::DEMO;
    let mut c = tripped(Some(&key));
    let ack = seal(
        1,
        Command::Acknowledge(Some(RuleId::BeyondCarnot)),
        &key,
        &to(),
    );
    let out = receive(&mut c, &ack, 20_000);
    assert_eq!(replies(&out), [(1, ReplyCode::Applied)]);
    assert_eq!(
        c.alarms().state(RuleId::BeyondCarnot),
        AlarmState::Active { acked: true }
    );
    // Acknowledged is not cleared: the trip stays while the condition holds.
    assert!(c.trip_active());
    assert_eq!(c.hello().last_counter, 1);

    let before = state(&c);
    assert_eq!(
        replies(&receive(&mut c, &ack, 20_000)),
        [(1, ReplyCode::Replayed)]
    );
    // A lower counter, freshly sealed, is as stale as a replay.
    let older = seal(0, Command::Acknowledge(None), &key, &to());
    assert_eq!(
        replies(&receive(&mut c, &older, 20_000)),
        [(0, ReplyCode::Replayed)]
    );
    assert_eq!(state(&c), before);
}

#[test]
fn a_command_for_another_rig_session_or_key_fails_authentication() {
    let key = CommandKey::DEMO;
    let other_key = CommandKey::from_bytes([7; 32]);
    let mut c = tripped(Some(&key));
    let before = state(&c);
    let cases = [
        seal(5, Command::Acknowledge(None), &other_key, &to()),
        seal(
            5,
            Command::Acknowledge(None),
            &key,
            &Addressee {
                session: SESSION + 1,
                ..to()
            },
        ),
        seal(
            5,
            Command::Acknowledge(None),
            &key,
            &Addressee {
                rig_id: RigId::new("another-rig").unwrap(),
                ..to()
            },
        ),
    ];
    for bytes in &cases {
        assert_eq!(
            replies(&receive(&mut c, bytes, 20_000)),
            [(5, ReplyCode::FailedAuthentication)]
        );
    }
    assert_eq!(state(&c), before);
    assert_eq!(c.hello().last_counter, 0);
}

#[test]
fn without_a_key_only_a_hello_request_is_answered() {
    let mut c = tripped(None);
    assert!(!c.hello().keyed);
    let before = state(&c);
    let ack = seal(1, Command::Acknowledge(None), &CommandKey::DEMO, &to());
    assert_eq!(
        replies(&receive(&mut c, &ack, 20_000)),
        [(1, ReplyCode::NoKey)]
    );
    assert_eq!(state(&c), before);
    let mut buf = [0u8; wire::MAX_COMMAND_LEN];
    let hello = CommandFrame {
        counter: 0,
        command: Command::HelloRequest,
    };
    let n = wire::encode_command(&hello, None, &to(), &mut buf).unwrap();
    let out = receive(&mut c, &buf[..n], 20_000);
    assert!(matches!(out[0], Frame::Hello(h) if !h.keyed && h.session == SESSION));
    assert_eq!(replies(&out), [(0, ReplyCode::Applied)]);
}

#[test]
fn a_configuration_waits_for_the_window_boundary_then_a_hello_carries_its_digest() {
    let key = CommandKey::DEMO;
    let mut c = tripped(Some(&key));
    let mut config = RigConfig::default();
    config.alarms.hot_max_k = 900.0;
    let bytes = seal(3, Command::Configure(config), &key, &to());
    // Nothing yet: it waits for the next Summary.
    assert!(receive(&mut c, &bytes, 20_500).is_empty());
    assert_eq!(c.config(), &RigConfig::default());
    // A second one while the first waits is busy.
    let again = seal(4, Command::NewRun, &key, &to());
    assert_eq!(
        replies(&receive(&mut c, &again, 20_600)),
        [(4, ReplyCode::Busy)]
    );

    let out = step(&mut c, 21);
    let kinds: Vec<&str> = out
        .iter()
        .map(|f| match f {
            Frame::Summary(_) => "summary",
            Frame::Reply(_) => "reply",
            Frame::Hello(_) => "hello",
            Frame::Event(_) => "event",
        })
        .collect();
    // The summary closes the window under the old settings; then the reply,
    // then the Hello of the new configuration and run.
    assert_eq!(kinds, ["summary", "reply", "hello"]);
    assert_eq!(replies(&out), [(3, ReplyCode::Applied)]);
    let Frame::Hello(hello) = out[2] else {
        unreachable!()
    };
    assert_eq!(hello.config_digest, Hello::config_digest(&config));
    assert_ne!(
        hello.config_digest,
        Hello::config_digest(&RigConfig::default())
    );
    assert_eq!(hello.run, 1);
    assert_eq!(c.config(), &config);
    // The alarm it was raised under stays raised: the trip holds.
    assert!(c.alarms().is_active(RuleId::BeyondCarnot));
    assert!(c.trip_active());
    // The run totals started afresh.
    assert_eq!(c.monitor().valid_samples(), 0);
}

#[test]
fn an_invalid_or_oversized_configuration_is_refused_and_changes_nothing() {
    let key = CommandKey::DEMO;
    let mut c = tripped(Some(&key));
    let before = state(&c);
    // A window the 64-sample monitor cannot hold.
    let too_long = RigConfig {
        window_samples: 100,
        ..RigConfig::default()
    };
    let bytes = seal(1, Command::Configure(too_long), &key, &to());
    assert_eq!(
        replies(&receive(&mut c, &bytes, 20_000)),
        [(1, ReplyCode::InvalidConfiguration)]
    );
    step(&mut c, 21);
    assert_eq!(state(&c).0, before.0);
    assert_eq!(c.config(), &RigConfig::default());
    assert_eq!(c.hello().config_digest, before.1.config_digest);
}

#[test]
fn a_new_run_restarts_the_totals_and_counts_up() {
    let key = CommandKey::DEMO;
    let mut c = tripped(Some(&key));
    let bytes = seal(1, Command::NewRun, &key, &to());
    assert!(receive(&mut c, &bytes, 20_500).is_empty());
    let out = step(&mut c, 21);
    assert_eq!(replies(&out), [(1, ReplyCode::Applied)]);
    assert_eq!(c.hello().run, 1);
    assert_eq!(c.monitor().valid_samples(), 0);
    let out = step(&mut c, 22);
    assert!(replies(&out).is_empty());
    assert_eq!(c.monitor().valid_samples(), 1);
}

#[test]
fn an_endless_stream_without_a_delimiter_costs_nothing_and_the_next_command_works() {
    let key = CommandKey::DEMO;
    let mut c = tripped(Some(&key));
    let noise = vec![0xA5u8; 1 << 20];
    assert!(receive(&mut c, &noise, 20_000).is_empty());
    let ack = seal(1, Command::Acknowledge(None), &key, &to());
    let out = receive(&mut c, &ack, 20_000);
    // The noise has no delimiter, so the command's own delimiter ends one
    // overlong frame (noise and command together), which is never
    // answered: no receiver can tell where the noise stopped. The command
    // after it is applied.
    assert!(replies(&out).is_empty());
    assert_eq!(c.receiver_stats().overlong, 1);
    let again = seal(2, Command::Acknowledge(None), &key, &to());
    assert_eq!(
        replies(&receive(&mut c, &again, 20_000)),
        [(2, ReplyCode::Applied)]
    );
    // A delimiter first resynchronises: no overlong frame eats the command.
    let mut resync = vec![0xA5u8; 4096];
    resync.push(0);
    resync.extend(seal(3, Command::Acknowledge(None), &key, &to()));
    assert_eq!(
        replies(&receive(&mut c, &resync, 20_000)),
        [(3, ReplyCode::Applied)]
    );
    assert_eq!(c.receiver_stats().overlong, 2);
}

/// Bytes that are not a valid sealed fresh command: noise, or a valid one
/// damaged, replayed or sealed wrongly.
fn valid(counter: u32, which: u8) -> Vec<u8> {
    let command = match which % 4 {
        0 => Command::Acknowledge(None),
        1 => Command::NewRun,
        2 => Command::Acknowledge(Some(RuleId::BeyondCarnot)),
        _ => Command::Configure(RigConfig::default()),
    };
    seal(counter, command, &CommandKey::DEMO, &to())
}

fn hostile() -> impl Strategy<Value = Vec<u8>> {
    prop_oneof![
        // Noise, delimiters included.
        proptest::collection::vec(any::<u8>(), 0..600),
        // A valid command with one byte changed (not its delimiter).
        (1u32..1000, any::<u8>(), any::<usize>(), 1u8..=255).prop_map(|(counter, which, at, x)| {
            let mut b = valid(counter, which);
            let i = at % (b.len() - 1);
            b[i] ^= x;
            b
        }),
        // A valid command cut short, then a delimiter.
        (1u32..1000, any::<u8>(), any::<usize>()).prop_map(|(counter, which, cut)| {
            let mut b = valid(counter, which);
            let n = 1 + cut % (b.len() - 1);
            b.truncate(n - 1);
            b.push(0);
            b
        }),
        // A stale counter (the controller has accepted 1000), correctly sealed.
        (0u32..=1000, any::<u8>()).prop_map(|(counter, which)| valid(counter, which)),
        // Sealed for another session.
        (1001u32..2000, any::<u8>()).prop_map(|(counter, _)| {
            seal(
                counter,
                Command::NewRun,
                &CommandKey::DEMO,
                &Addressee {
                    session: SESSION ^ 1,
                    ..to()
                },
            )
        }),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(512))]

    /// No sequence of bytes on the downlink changes the controller's
    /// state unless it carries a valid tag and a fresh counter.
    #[test]
    fn no_hostile_bytes_change_the_controller(chunks in proptest::collection::vec(hostile(), 1..6)) {
        let key = CommandKey::DEMO;
        let mut c = tripped(Some(&key));
        // The controller has accepted counter 1000 (an acknowledge).
        let ack = seal(1000, Command::Acknowledge(Some(RuleId::NearCarnot)), &key, &to());
        receive(&mut c, &ack, 20_000);
        prop_assert_eq!(c.hello().last_counter, 1000);
        let before = state(&c);
        for bytes in &chunks {
            for r in replies(&receive(&mut c, bytes, 20_000)) {
                prop_assert_ne!(r.1, ReplyCode::Applied);
            }
        }
        // Nothing is waiting for the window boundary either.
        step(&mut c, 21);
        prop_assert_eq!(state(&c), before);
    }
}
