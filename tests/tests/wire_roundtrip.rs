//! encode → decode is the identity for every valid frame, and every encoded
//! frame fits the documented sizes.

use heatbound::alarm::{Event, EventKind, RuleId, Severity};
use heatbound::config::Mode;
use heatbound::monitor::Channel;
use heatbound::wire::{
    self, EventFrame, FaultBits, Frame, Hello, Reply, ReplyCode, RigId, Status, Summary,
    Uncertainties, Verdict,
};
use proptest::prelude::*;

fn finite() -> impl Strategy<Value = f32> {
    prop_oneof![
        Just(0.0f32),
        Just(-0.0f32),
        Just(f32::MAX),
        Just(f32::MIN_POSITIVE),
        any::<f32>().prop_filter("finite", |x| x.is_finite()),
        -1e6f32..1e6f32,
    ]
}

fn figure() -> impl Strategy<Value = Option<f32>> {
    prop_oneof![1 => Just(None), 3 => finite().prop_map(Some)]
}

fn status() -> impl Strategy<Value = Status> {
    (any::<[bool; 5]>(), mode()).prop_map(
        |(
            [
                steady,
                heat_out_measured,
                trip_active,
                any_fault,
                hot2_measured,
            ],
            mode,
        )| Status {
            steady,
            heat_out_measured,
            trip_active,
            any_fault,
            hot2_measured,
            mode,
        },
    )
}

/// A verdict as a controller sends it: a suspect (with its bias in a
/// summary) only when inconsistent.
fn verdict(with_bias: bool) -> impl Strategy<Value = Verdict> {
    (
        0u8..3,
        proptest::option::of(0usize..Channel::ALL.len()),
        finite(),
    )
        .prop_map(move |(state, suspect, bias)| {
            let consistent = [None, Some(true), Some(false)][usize::from(state)];
            let suspect = suspect
                .filter(|_| consistent == Some(false))
                .map(|i| Channel::ALL[i]);
            Verdict {
                consistent,
                suspect,
                bias: suspect.and(Some(bias)).filter(|_| with_bias),
            }
        })
}

prop_compose! {
    fn summary()(seq in any::<u16>(), t_ms in any::<u32>(), integrals in [finite(), finite(),
        finite(), finite(), finite(), finite(), finite(), finite()],
        f in proptest::collection::vec(figure(), 6),
        status in status(), channels in 0u8..64, stale in any::<bool>(), alarms in 0u8..64,
        verdict in verdict(true))
        -> Summary {
        Summary {
            seq, t_ms,
            duration_s: integrals[0], heat_in_j: integrals[1], work_j: integrals[2],
            heat_out_j: integrals[3], entropy_in_j_per_k: integrals[4],
            entropy_out_j_per_k: integrals[5], hot_temperature_integral_k_s: integrals[6],
            hot_pair_integral_k_s: integrals[7],
            ambient_k: f[0], entropy_rate_w_per_k: f[1], u_performance: f[2], u_bound: f[3],
            u_margin: f[4], u_entropy_rate_w_per_k: f[5],
            status, faults: FaultBits { channels, stale }, alarms, verdict,
        }
    }
}

fn mode() -> impl Strategy<Value = Mode> {
    prop_oneof![Just(Mode::Engine), Just(Mode::HeatPump), Just(Mode::Cooler)]
}

prop_compose! {
    fn hello()(id in "[ -~]{0,16}", fw in any::<(u8, u8, u8)>(), period in any::<u32>(),
        window in any::<u16>(), mode in mode(), k in finite(),
        ambient in prop_oneof![Just(None), finite().prop_map(Some)],
        u in [finite(), finite(), finite(), finite(), finite(), finite()], digest in any::<u32>(),
        run in any::<u32>(), session in any::<u32>(), last_counter in any::<u32>(),
        keyed in any::<bool>(), losses in proptest::option::of((finite(), finite())))
        -> Hello {
        Hello {
            rig_id: RigId::new(&id).unwrap(),
            firmware_version: fw, sample_period_ms: period, window_samples: window, mode,
            coverage_factor: k, ambient_k: ambient,
            uncertainty: Uncertainties { hot_k: u[0], cold_k: u[1], heat_in_rel: u[2],
                work_rel: u[3], heat_out_rel: u[4], hot2_k: u[5] },
            losses,
            config_digest: digest, run, session, last_counter, keyed,
        }
    }
}

fn event() -> impl Strategy<Value = EventFrame> {
    (
        any::<u16>(),
        any::<u32>(),
        0usize..RuleId::COUNT,
        prop_oneof![
            Just(EventKind::Raised),
            Just(EventKind::Cleared),
            Just(EventKind::Acknowledged)
        ],
        prop_oneof![
            Just(Severity::Advisory),
            Just(Severity::Warning),
            Just(Severity::Trip)
        ],
        verdict(false),
    )
        .prop_map(|(seq, t_ms, rule, kind, severity, verdict)| EventFrame {
            seq,
            event: Event {
                t_ms,
                rule: RuleId::from_index(rule).unwrap(),
                kind,
                severity,
            },
            verdict,
        })
}

fn frame() -> impl Strategy<Value = Frame> {
    prop_oneof![
        summary().prop_map(Frame::Summary),
        hello().prop_map(Frame::Hello),
        event().prop_map(Frame::Event),
        (any::<u32>(), any::<u32>(), 0usize..ReplyCode::ALL.len()).prop_map(
            |(counter, t_ms, i)| {
                Frame::Reply(Reply {
                    counter,
                    t_ms,
                    code: ReplyCode::ALL[i],
                })
            }
        ),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    #[test]
    fn encode_decode_is_identity(frame in frame()) {
        let mut buf = [0u8; wire::MAX_FRAME_LEN];
        let n = wire::encode(&frame, &mut buf).unwrap();
        prop_assert_eq!(buf[n - 1], 0);
        prop_assert!(!buf[..n - 1].contains(&0));
        if let Frame::Summary(_) = frame {
            prop_assert!(n <= wire::SUMMARY_MAX_WIRE_LEN);
        }
        prop_assert_eq!(wire::decode(&buf[..n]), Ok(frame.clone()));
        // And through the streaming decoder, byte by byte.
        let mut d = wire::Decoder::<{ wire::MAX_FRAME_LEN }>::new();
        let mut got = Vec::new();
        d.feed(&buf[..n], |r| got.push(r));
        prop_assert_eq!(got, vec![Ok(frame)]);
    }

    #[test]
    fn a_missing_figure_roundtrips_as_none(s in summary(), which in 0usize..6) {
        // None travels as the NaN sentinel and must come back as None.
        let mut s = s;
        let slots = [&mut s.ambient_k, &mut s.entropy_rate_w_per_k, &mut s.u_performance,
            &mut s.u_bound, &mut s.u_margin, &mut s.u_entropy_rate_w_per_k];
        *slots.into_iter().nth(which).unwrap() = None;
        let mut buf = [0u8; wire::MAX_FRAME_LEN];
        let n = wire::encode(&Frame::Summary(s), &mut buf).unwrap();
        prop_assert_eq!(wire::decode(&buf[..n]), Ok(Frame::Summary(s)));
    }
}

#[test]
fn worst_case_sizes() {
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    // Every field travels (protocol 4): no integral is what the others
    // give, σ̇ is not what the integrals give, the duration is not whole ms.
    let worst_summary = Summary {
        seq: u16::MAX,
        t_ms: u32::MAX,
        duration_s: 0.1234,
        heat_out_j: 1.0,
        hot_pair_integral_k_s: 1.0,
        ambient_k: Some(1.0),
        entropy_rate_w_per_k: Some(1.0),
        u_performance: Some(1.0),
        u_bound: Some(1.0),
        u_margin: Some(1.0),
        u_entropy_rate_w_per_k: Some(1.0),
        alarms: 0x3F,
        verdict: Verdict {
            consistent: Some(false),
            suspect: Some(Channel::Hot2),
            bias: Some(1.0),
        },
        ..Summary::default()
    };
    let n = wire::encode(&Frame::Summary(worst_summary), &mut buf).unwrap();
    assert_eq!(n, wire::SUMMARY_MAX_WIRE_LEN);
    assert!(n <= 80);

    let worst_hello = Hello {
        rig_id: RigId::new("0123456789abcdef").unwrap(),
        firmware_version: (255, 255, 255),
        sample_period_ms: u32::MAX,
        window_samples: u16::MAX,
        mode: Mode::Cooler,
        coverage_factor: 2.0,
        ambient_k: Some(293.15),
        uncertainty: Uncertainties::default(),
        losses: Some((1.0, 1.0)),
        config_digest: u32::MAX,
        run: u32::MAX,
        session: u32::MAX,
        last_counter: u32::MAX,
        keyed: true,
    };
    let n = wire::encode(&Frame::Hello(worst_hello), &mut buf).unwrap();
    // Version 1's 70 bytes, plus three u32 varints at their longest (5
    // bytes each) and the commands byte (version 2); plus u(hot2), the
    // configured losses (1 + 8) (version 3).
    assert_eq!(n, 99);
    assert!(n <= wire::MAX_FRAME_LEN);

    let worst_reply = wire::Reply {
        counter: u32::MAX,
        t_ms: u32::MAX,
        code: wire::ReplyCode::NoKey,
    };
    let n = wire::encode(&Frame::Reply(worst_reply), &mut buf).unwrap();
    assert_eq!(n, 19);

    // Commands: the longest of each, every varint at its longest.
    use heatbound::config::RigConfig;
    use heatbound::wire::{Addressee, Authenticator, Command, CommandFrame, CommandKey};
    let auth = Authenticator::new(&CommandKey::DEMO);
    let to = Addressee {
        rig_id: RigId::new("0123456789abcdef").unwrap(),
        session: u32::MAX,
    };
    let mut cbuf = [0u8; wire::MAX_COMMAND_LEN];
    let mut command_len = |command| {
        let frame = CommandFrame {
            counter: u32::MAX,
            command,
        };
        wire::encode_command(&frame, Some(&auth), &to, &mut cbuf).unwrap()
    };
    assert_eq!(
        command_len(Command::Acknowledge(Some(RuleId::SensorFault))),
        24
    );
    assert_eq!(command_len(Command::NewRun), 22);
    let mut big = RigConfig {
        ambient_k: Some(293.15),
        window_samples: u32::MAX,
        ..RigConfig::default()
    };
    big.health.stuck_samples = u32::MAX;
    big.losses = Some(heatbound::config::Losses {
        ua_w_per_k: 0.35,
        u_ua_w_per_k: 0.01,
    });
    let n = command_len(Command::Configure(big));
    // Version 2's 348 bytes, plus u(hot2) (8), the losses (1 + 16), the
    // horizon (8) and the seventh rule, limit_ahead (27).
    assert_eq!(n, 408);
    assert!(n <= wire::MAX_COMMAND_LEN);

    let worst_event = EventFrame {
        seq: u16::MAX,
        event: Event {
            t_ms: u32::MAX,
            rule: RuleId::SensorFault,
            kind: EventKind::Acknowledged,
            severity: Severity::Trip,
        },
        verdict: Verdict {
            consistent: Some(false),
            suspect: Some(Channel::Hot2),
            bias: None,
        },
    };
    let n = wire::encode(&Frame::Event(worst_event), &mut buf).unwrap();
    assert_eq!(n, 20);
}

prop_compose! {
    /// A Summary whose optional integrals are what a receiver works out
    /// (`Q_out = Q_in − W`, no pair integral, σ̇ from the integrals, whole
    /// milliseconds), as a controller's are, with the rest arbitrary.
    fn predictable_summary()(s in summary(), ms in 0u32..(1 << 21), entropy_rate in any::<bool>())
        -> Summary {
        let mut s = s;
        s.duration_s = ms as f32 * 1e-3;
        s.heat_out_j = s.heat_in_j - s.work_j;
        s.hot_pair_integral_k_s = 0.0;
        if entropy_rate {
            s.entropy_rate_w_per_k = s.metrics().entropy_rate_w_per_k;
        }
        s
    }
}

proptest! {
    /// Protocol 4 leaves out what a receiver works out; the round trip stays
    /// exact, and each field left out saves its 4 bytes (the duration 1 to 3).
    #[test]
    fn predicted_fields_round_trip(s in predictable_summary()) {
        prop_assume!(s.heat_out_j.is_finite());
        let mut buf = [0u8; wire::MAX_FRAME_LEN];
        let n = wire::encode(&Frame::Summary(s), &mut buf).unwrap();
        prop_assert_eq!(wire::decode(&buf[..n]), Ok(Frame::Summary(s)));
        // The same with σ̇ left out of both, and every integral sent in one.
        let mut lean = s;
        lean.entropy_rate_w_per_k = lean.metrics().entropy_rate_w_per_k;
        let mut full = lean;
        full.duration_s = f32::from_bits(s.duration_s.to_bits() ^ 1);
        full.heat_out_j = f32::from_bits(s.heat_out_j.to_bits() ^ 1);
        full.hot_pair_integral_k_s = 1.0;
        full.entropy_rate_w_per_k = full.metrics().entropy_rate_w_per_k;
        let n = wire::encode(&Frame::Summary(lean), &mut buf).unwrap();
        let mut long = [0u8; wire::MAX_FRAME_LEN];
        let m = wire::encode(&Frame::Summary(full), &mut long).unwrap();
        prop_assert!(m >= n + 9, "{} bytes with every integral sent, {} without", m, n);
    }
}

/// A controller's own Summaries, one window of 60 samples at 100 ms after
/// half a minute, with heat out inferred and measured: σ̇ and the duration
/// are what a receiver works out, so the frame is 59 or 63 bytes (`seq`
/// 513 and `t_ms` 1,000,000 take 2 and 3 bytes).
#[test]
fn controller_summaries_fit_64_bytes() {
    use heatbound::alarm::AlarmSet;
    use heatbound::config::RigConfig;
    use heatbound::monitor::{Monitor, Sample};
    for (measured, expected) in [(false, 59), (true, 63)] {
        let config = RigConfig {
            window_samples: 60,
            ..RigConfig::default()
        };
        let mut monitor = Monitor::<64>::new(&config).unwrap();
        for i in 0..300u32 {
            let x = i as f32 * 0.01;
            monitor.push(&Sample {
                t_ms: 970_100 + i * 100,
                t_hot_k: 600.0 + x.sin(),
                t_cold_k: 300.0 + 0.5 * x.cos(),
                heat_in_w: 1000.0 + 3.0 * x.sin(),
                work_w: 150.0 + x.cos(),
                heat_out_w: measured.then_some(840.0 + 2.0 * x.cos()),
                t_hot2_k: None,
            });
        }
        let s = Summary::from_monitor(
            513,
            1_000_000,
            &monitor,
            &AlarmSet::new(&config),
            Verdict::default(),
        );
        assert!(s.entropy_rate_w_per_k.is_some() && s.u_margin.is_some());
        let mut buf = [0u8; wire::MAX_FRAME_LEN];
        let n = wire::encode(&Frame::Summary(s), &mut buf).unwrap();
        assert_eq!(n, expected, "heat out measured: {measured}");
        assert_eq!(wire::decode(&buf[..n]), Ok(Frame::Summary(s)));
    }
}
