//! Golden bytes, one per frame and command kind: the encoding is a spec
//! (docs/wire-format.md shows the same hex), so a change here is a protocol
//! change and must bump `PROTOCOL_VERSION`.
//!
//! The golden bytes are not heatbound's own output: they come from
//! `tests/tools/gen_wire_golden.py`, which builds each frame from the
//! specification with Python's struct, zlib.crc32, hmac/hashlib
//! (HMAC-SHA-256) and PyPI `cobs` 1.2.1, into
//! `tests/vectors/wire_v4_golden.txt`.

use heatbound::alarm::{Event, EventKind, RuleId, Severity};
use heatbound::config::{Mode, RigConfig};
use heatbound::monitor::Channel;
use heatbound::wire::{
    self, Addressee, Authenticator, Command, CommandFrame, CommandKey, EventFrame, FaultBits,
    Frame, Hello, Reply, ReplyCode, RigId, Status, Summary, Uncertainties, Verdict,
};

fn hello() -> Frame {
    Frame::Hello(Hello {
        rig_id: RigId::new("bench-1").unwrap(),
        firmware_version: (1, 2, 3),
        sample_period_ms: 100,
        window_samples: 60,
        mode: Mode::Engine,
        coverage_factor: 2.0,
        ambient_k: Some(293.15),
        uncertainty: Uncertainties {
            hot_k: 1.0,
            cold_k: 0.125,
            heat_in_rel: 0.005,
            work_rel: 0.005,
            heat_out_rel: 0.01,
            hot2_k: 1.5,
        },
        losses: Some((0.35, 0.01)),
        config_digest: 0x1234_5678,
        run: 3,
        session: 0x0BAD_CAFE,
        last_counter: 5,
        keyed: true,
    })
}

fn summary() -> Frame {
    Frame::Summary(Summary {
        seq: 513,
        t_ms: 120_000,
        // 6000 ms as a controller makes them: 6000 × 1e-3 in f32.
        duration_s: 6.000_000_5,
        heat_in_j: 6000.0,
        work_j: 1800.0,
        heat_out_j: 4200.0,
        entropy_in_j_per_k: 10.0,
        entropy_out_j_per_k: 14.0,
        hot_temperature_integral_k_s: 3600.0,
        hot_pair_integral_k_s: 240.0,
        ambient_k: Some(300.0),
        // (14 − 10)/6.0000005 in f32, as the generator works it out.
        entropy_rate_w_per_k: Some(0.666_666_6),
        u_performance: Some(0.004),
        u_bound: Some(0.002),
        u_margin: Some(0.0045),
        u_entropy_rate_w_per_k: None,
        status: Status {
            steady: true,
            heat_out_measured: false,
            trip_active: false,
            any_fault: false,
            hot2_measured: true,
            mode: Mode::Engine,
        },
        faults: FaultBits {
            channels: 0,
            stale: false,
        },
        alarms: 0,
        verdict: Verdict {
            consistent: Some(false),
            suspect: Some(Channel::Hot),
            bias: Some(40.0),
        },
    })
}

/// Heat out measured with T0 configured: σ̇ is not sent, and the decoder
/// works it out from the integrals; `0.333_731_44` is the value
/// `tests/tools/gen_wire_golden.py` works out by the specification's
/// binary32 operations (`((S_out + Q_loss/T0) − S_in)/duration`).
fn summary_measured() -> Frame {
    Frame::Summary(Summary {
        seq: 7,
        t_ms: 5000,
        duration_s: 1.0005,
        heat_in_j: 500.0,
        work_j: 100.0,
        heat_out_j: 390.0,
        entropy_in_j_per_k: 1.0,
        entropy_out_j_per_k: 1.3,
        hot_temperature_integral_k_s: 250.0,
        hot_pair_integral_k_s: 0.0,
        ambient_k: Some(295.0),
        entropy_rate_w_per_k: Some(0.333_731_44),
        u_performance: Some(0.01),
        u_bound: Some(0.02),
        u_margin: Some(0.03),
        u_entropy_rate_w_per_k: Some(0.04),
        status: Status {
            steady: true,
            heat_out_measured: true,
            trip_active: false,
            any_fault: false,
            hot2_measured: false,
            mode: Mode::Engine,
        },
        faults: FaultBits {
            channels: 0,
            stale: false,
        },
        alarms: 1,
        verdict: Verdict::default(),
    })
}

fn event() -> Frame {
    Frame::Event(EventFrame {
        seq: 513,
        event: Event {
            t_ms: 341_000,
            rule: RuleId::BeyondCarnot,
            kind: EventKind::Raised,
            severity: Severity::Trip,
        },
        verdict: Verdict {
            consistent: Some(false),
            suspect: Some(Channel::Hot),
            bias: None,
        },
    })
}

fn reply() -> Frame {
    Frame::Reply(Reply {
        counter: 7,
        t_ms: 341_500,
        code: ReplyCode::Applied,
    })
}

/// The golden frame `name` from `tests/vectors/wire_v4_golden.txt`.
fn golden(name: &str) -> String {
    let text = include_str!("../vectors/wire_v4_golden.txt");
    text.lines()
        .find_map(|l| l.strip_prefix(name)?.strip_prefix(' '))
        .unwrap_or_else(|| panic!("no golden frame {name}"))
        .to_string()
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

fn unhex(s: &str) -> Vec<u8> {
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap())
        .collect()
}

fn check(frame: Frame, golden: &str) {
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    let n = wire::encode(&frame, &mut buf).unwrap();
    assert_eq!(hex(&buf[..n]), golden, "encoding of {frame:?} changed");
    assert_eq!(wire::decode(&unhex(golden)), Ok(frame));
}

#[test]
fn hello_golden() {
    check(hello(), &golden("hello"));
}

#[test]
fn summary_golden() {
    check(summary(), &golden("summary"));
}

#[test]
fn summary_measured_golden() {
    check(summary_measured(), &golden("summary_measured"));
}

#[test]
fn event_golden() {
    check(event(), &golden("event"));
}

#[test]
fn reply_golden() {
    check(reply(), &golden("reply"));
}

/// The rig and session the golden commands are sealed for.
fn addressee() -> Addressee {
    Addressee {
        rig_id: RigId::new("bench-1").unwrap(),
        session: 0x0BAD_CAFE,
    }
}

fn check_command(frame: CommandFrame, sealed: bool, golden: &str) {
    let auth = Authenticator::new(&CommandKey::DEMO);
    let mut buf = [0u8; wire::MAX_COMMAND_LEN];
    let n = wire::encode_command(&frame, sealed.then_some(&auth), &addressee(), &mut buf).unwrap();
    assert_eq!(hex(&buf[..n]), golden, "encoding of {frame:?} changed");
    let mut bytes = unhex(golden);
    bytes.pop(); // the delimiter
    let received = wire::decode_command(&mut bytes).unwrap();
    assert_eq!(received.frame, frame);
    assert_eq!(received.authentic(&auth, &addressee()), sealed);
    // Sealed for another session or another rig, the same bytes fail.
    let other_session = Addressee {
        session: 0x0BAD_CAFF,
        ..addressee()
    };
    let other_rig = Addressee {
        rig_id: RigId::new("bench-2").unwrap(),
        ..addressee()
    };
    assert!(!received.authentic(&auth, &other_session));
    assert!(!received.authentic(&auth, &other_rig));
}

#[test]
fn command_goldens() {
    let c = |counter, command| CommandFrame { counter, command };
    check_command(c(0, Command::HelloRequest), false, &golden("command_hello"));
    check_command(
        c(7, Command::Acknowledge(Some(RuleId::BeyondCarnot))),
        true,
        &golden("command_ack_rule"),
    );
    check_command(
        c(8, Command::Acknowledge(None)),
        true,
        &golden("command_ack_all"),
    );
    check_command(c(9, Command::NewRun), true, &golden("command_new_run"));
    check_command(
        c(10, Command::Configure(RigConfig::default())),
        true,
        &golden("command_configure"),
    );
}
