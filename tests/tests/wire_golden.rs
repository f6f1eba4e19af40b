//! Golden bytes, one per frame kind: the encoding is a spec
//! (docs/wire-format.md shows the same hex), so a change here is a protocol
//! change and must bump `PROTOCOL_VERSION`.

use heatbound::alarm::{Event, EventKind, RuleId, Severity};
use heatbound::config::Mode;
use heatbound::wire::{
    self, EventFrame, FaultBits, Frame, Hello, RigId, Status, Summary, Uncertainties,
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
        },
        config_digest: 0x1234_5678,
    })
}

fn summary() -> Frame {
    Frame::Summary(Summary {
        seq: 513,
        t_ms: 120_000,
        duration_s: 6.0,
        heat_in_j: 6000.0,
        work_j: 1800.0,
        heat_out_j: 4200.0,
        entropy_in_j_per_k: 10.0,
        entropy_out_j_per_k: 14.0,
        hot_mean_k: Some(600.0),
        ambient_k: Some(300.0),
        performance: Some(0.3),
        bound: Some(0.5),
        entropy_rate_w_per_k: Some(0.666_666_7),
        u_performance: Some(0.004),
        u_bound: Some(0.002),
        u_margin: Some(0.0045),
        u_entropy_rate_w_per_k: None,
        status: Status {
            steady: true,
            heat_out_measured: false,
            trip_active: false,
            any_fault: false,
        },
        faults: FaultBits {
            channels: 0,
            stale: false,
        },
        alarms: 0,
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
    })
}

const HELLO_HEX: &str = "02010862656e63682d31010101010101010106010203643c010101074001339392430103803f0101173e0ad7a33b0ad7a33b0ad7233cf8acd19101adc0819300";
const SUMMARY_HEX: &str = "0801018104c0a9070103c0400480bb450103e14404408345010320410103604101031644010796439a99993e0101123fabaa2a3f6f12833b6f12033bbc74933b0104c07f0101059f645e0800";
const EVENT_HEX: &str = "080102810488e814010602d631529200";

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
    check(hello(), HELLO_HEX);
}

#[test]
fn summary_golden() {
    check(summary(), SUMMARY_HEX);
}

#[test]
fn event_golden() {
    check(event(), EVENT_HEX);
}
