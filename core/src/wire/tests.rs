//! Unit tests of the wire layer: COBS, the codec, the decoder and the link tracker.

use super::codec::*;
use super::decoder::*;
use super::error::*;
use super::format::*;
use super::frames::*;
use super::link::*;
use crate::config::RigConfig;
use crate::monitor::Channel;

fn roundtrip_cobs(data: &[u8]) {
    let mut enc = [0u8; 600];
    let n = cobs_encode(data, &mut enc).unwrap();
    assert!(n <= cobs_max_len(data.len()));
    assert!(!enc[..n].contains(&0));
    let m = cobs_decode_in_place(&mut enc[..n]).unwrap();
    assert_eq!(&enc[..m], data);
}

#[test]
fn cobs_roundtrips_edge_cases() {
    roundtrip_cobs(&[]);
    roundtrip_cobs(&[0]);
    roundtrip_cobs(&[0, 0]);
    roundtrip_cobs(&[1, 0, 2]);
    roundtrip_cobs(&[0xFF; 253]);
    roundtrip_cobs(&[0xFF; 254]);
    roundtrip_cobs(&[0xFF; 255]);
    let mut v = [7u8; 300];
    v[254] = 0;
    roundtrip_cobs(&v);
}

#[test]
fn cobs_matches_reference_vectors() {
    // From the COBS paper's examples (Cheshire & Baker 1999).
    let mut out = [0u8; 8];
    let n = cobs_encode(&[0x11, 0x22, 0x00, 0x33], &mut out).unwrap();
    assert_eq!(&out[..n], &[0x03, 0x11, 0x22, 0x02, 0x33]);
    let n = cobs_encode(&[0x00], &mut out).unwrap();
    assert_eq!(&out[..n], &[0x01, 0x01]);
}

#[test]
fn cobs_rejects_bad_codes() {
    assert_eq!(cobs_decode_in_place(&mut [0x05, 1, 2]), None);
    assert_eq!(cobs_decode_in_place(&mut [0x02, 0x00]), None);
}

#[test]
fn crc_is_iso_hdlc() {
    assert_eq!(CRC.checksum(b"123456789"), 0xCBF4_3926);
}

#[test]
fn summary_budget_holds() {
    assert_eq!(SUMMARY_MAX_WIRE_LEN, 80);
    // Every field travels: no integral is what the others give, and the
    // duration is not whole milliseconds.
    let worst = Summary {
        seq: u16::MAX,
        t_ms: u32::MAX,
        duration_s: 0.1234,
        heat_out_j: 1.0,
        hot_pair_integral_k_s: 1.0,
        ambient_k: Some(1.0),
        entropy_rate_w_per_k: Some(1.0),
        u_performance: Some(1.0),
        verdict: Verdict {
            consistent: Some(false),
            suspect: Some(Channel::Hot),
            bias: None,
        },
        ..Summary::default()
    };
    let mut buf = [0u8; MAX_FRAME_LEN];
    assert_eq!(
        encode(&Frame::Summary(worst), &mut buf),
        Ok(SUMMARY_MAX_WIRE_LEN)
    );
}

#[test]
fn encode_rejects_what_cannot_be_decoded() {
    let mut buf = [0u8; MAX_FRAME_LEN];
    let nan = Summary {
        work_j: f32::NAN,
        ..Summary::default()
    };
    assert_eq!(
        encode(&Frame::Summary(nan), &mut buf),
        Err(WireError::NotFinite)
    );
    let inf = Summary {
        u_bound: Some(f32::INFINITY),
        ..Summary::default()
    };
    assert_eq!(
        encode(&Frame::Summary(inf), &mut buf),
        Err(WireError::NotFinite)
    );
    let bits = Summary {
        alarms: 0x80,
        ..Summary::default()
    };
    assert_eq!(
        encode(&Frame::Summary(bits), &mut buf),
        Err(WireError::ReservedBits)
    );
    let short = &mut [0u8; 10];
    assert_eq!(
        encode(&Frame::Summary(Summary::default()), short),
        Err(WireError::BufferTooSmall)
    );
}

#[test]
fn end_stream_counts_a_tail_longer_than_the_buffer() {
    // A tail that overflowed the buffer holds no bytes, yet it is a loss,
    // and the next stream starts clean (a reconnect must not throw away
    // its first frame as overlong).
    let mut d = Decoder::<32>::new();
    d.feed(&[1u8; 200], |_| {});
    assert_eq!(d.pending(), 0);
    assert!(d.has_unfinished());
    assert_eq!(d.end_stream(), Some(Err(FrameError::Overlong)));
    assert_eq!(d.stats().overlong, 1);
    assert_eq!(d.stats().bytes_discarded, 200);
    assert!(!d.has_unfinished());
    assert_eq!(d.end_stream(), None);

    let mut buf = [0u8; MAX_FRAME_LEN];
    let n = encode(&Frame::Summary(Summary::default()), &mut buf).unwrap();
    let mut d = Decoder::<{ MAX_FRAME_LEN }>::new();
    d.feed(&[7u8; 300], |_| {});
    d.end_stream();
    let mut got = None;
    d.feed(&buf[..n], |r| got = Some(r));
    assert_eq!(got, Some(Ok(Frame::Summary(Summary::default()))));
}

#[test]
fn decoder_counts_every_loss_kind() {
    let mut d = Decoder::<32>::new();
    assert!(d.push_byte(0).is_none());
    assert_eq!(d.stats().empty_frames, 1);
    let mut r = None;
    d.feed(&[1u8; 40], |x| r = Some(x));
    d.feed(&[0], |x| r = Some(x));
    assert_eq!(r, Some(Err(FrameError::Overlong)));
    d.feed(&[5, 1, 0], |x| r = Some(x));
    assert_eq!(r, Some(Err(FrameError::Malformed(Malformed::Cobs))));
    d.feed(&[8, 1, 1, 1, 1, 1, 1, 1, 0], |x| r = Some(x));
    assert_eq!(r, Some(Err(FrameError::Crc)));
    let s = d.stats();
    assert_eq!((s.overlong, s.malformed, s.crc_errors), (1, 1, 1));
    assert_eq!(s.bytes_discarded, 40 + 2 + 8);
}

#[test]
fn unknown_version_and_kind_are_told_apart() {
    let frame_with = |version: u8, kind: u8| {
        let mut raw = [version, kind, 0, 0, 0, 0];
        let crc = CRC.checksum(&raw[..2]).to_le_bytes();
        raw[2..].copy_from_slice(&crc);
        let mut enc = [0u8; 16];
        let n = cobs_encode(&raw, &mut enc).unwrap();
        decode(&enc[..n])
    };
    // Versions 1 (before the downlink), 2 (before the diagnosis) and 3
    // (before the Summary sent only what a receiver cannot work out) are
    // other versions now.
    assert_eq!(frame_with(1, 1), Err(FrameError::UnknownVersion(1)));
    assert_eq!(frame_with(2, 1), Err(FrameError::UnknownVersion(2)));
    assert_eq!(frame_with(3, 1), Err(FrameError::UnknownVersion(3)));
    assert_eq!(frame_with(5, 1), Err(FrameError::UnknownVersion(5)));
    assert_eq!(
        frame_with(4, 9),
        Err(FrameError::Malformed(Malformed::UnknownKind(9)))
    );
    // A command (kind 16) is not an uplink frame.
    assert_eq!(
        frame_with(4, 16),
        Err(FrameError::Malformed(Malformed::UnknownKind(16)))
    );
    assert_eq!(
        frame_with(4, 1),
        Err(FrameError::Malformed(Malformed::Postcard))
    );
}

#[test]
fn link_tracker_sees_hello_then_restart() {
    let s = |seq| {
        Frame::Summary(Summary {
            seq,
            ..Summary::default()
        })
    };
    let hello = Frame::Hello(Hello::from_config(
        RigId::default(),
        (0, 0, 0),
        100,
        &RigConfig::default(),
    ));
    let mut l = LinkTracker::new();
    l.observe(&hello);
    assert_eq!(l.observe(&s(0)), Link::First);
    assert_eq!(l.observe(&s(1)), Link::InOrder);
    assert_eq!(l.observe(&hello), Link::Hello);
    assert_eq!(l.observe(&s(0)), Link::Restart);
    l.observe(&hello);
    assert_eq!(l.observe(&s(0)), Link::Restart);
    assert_eq!(l.observe(&s(0)), Link::Duplicate);
    assert_eq!(
        *l.stats(),
        LinkStats {
            summaries: 5,
            missing_summaries: 0,
            duplicates: 1,
            restarts: 2,
            hellos: 3
        }
    );
}

mod command_body {
    //! The hand-written command body parser against postcard's serde path.

    use proptest::prelude::*;

    use super::super::command_body::Command;
    use super::super::command_body::take_command;
    use super::super::error::Malformed;
    use super::super::format::CRC;
    use super::super::frames::Hello;
    use super::take_all;
    use crate::alarm::{RuleId, Severity};
    use crate::config::RigConfig;
    use crate::diagnosis::Losses;
    use crate::monitor::Mode;

    /// Postcard's bytes for a parse result, so that NaN fields compare.
    fn bytes(r: &Result<(u32, Command), Malformed>) -> Result<Vec<u8>, Malformed> {
        match r {
            Ok(v) => Ok(postcard::to_slice(v, &mut [0u8; 1024]).unwrap().to_vec()),
            Err(e) => Err(*e),
        }
    }

    fn agree(body: &[u8]) {
        let reference = take_all::<(u32, Command)>(body);
        let ours = take_command(body);
        assert_eq!(bytes(&ours), bytes(&reference), "body {body:02x?}");
    }

    /// A configuration with every field drawn from `bits` (any f64, NaN and
    /// infinities included), `flags` and `picks`.
    fn config(bits: &[u64], flags: &[bool], picks: &[u32]) -> RigConfig {
        let mut f = bits.iter().map(|b| f64::from_bits(*b));
        let mut f = move || f.next().unwrap();
        let mut b = flags.iter().copied();
        let mut b = move || b.next().unwrap();
        let mut c = RigConfig {
            mode: [Mode::Engine, Mode::HeatPump, Mode::Cooler][picks[0] as usize % 3],
            ambient_k: b().then(&mut f),
            window_samples: picks[1],
            max_gap_s: f(),
            coverage_factor: f(),
            ..RigConfig::default()
        };
        let u = &mut c.uncertainty;
        for x in [
            &mut u.hot_k,
            &mut u.hot2_k,
            &mut u.cold_k,
            &mut u.heat_in_rel,
            &mut u.work_rel,
            &mut u.heat_out_rel,
        ] {
            *x = f();
        }
        let s = &mut c.steady;
        for x in [
            &mut s.duration_s,
            &mut s.hot_band_k,
            &mut s.cold_band_k,
            &mut s.heat_in_band_rel,
            &mut s.work_band_rel,
            &mut s.heat_out_band_rel,
        ] {
            *x = f();
        }
        c.health.stuck_samples = picks[2];
        c.health.stale_s = f();
        c.health.min_temperature_k = f();
        c.health.max_temperature_k = f();
        c.alarms.near_carnot_fraction = f();
        c.alarms.hot_max_k = f();
        c.alarms.horizon_s = f();
        for (i, r) in c.alarms.rules.iter_mut().enumerate() {
            r.enabled = b();
            r.severity =
                [Severity::Advisory, Severity::Warning, Severity::Trip][picks[3 + i] as usize % 3];
            r.deadband = f();
            r.on_delay_s = f();
            r.off_delay_s = f();
            r.latching = b();
        }
        c.losses = b().then(|| Losses {
            ua_w_per_k: f(),
            u_ua_w_per_k: f(),
        });
        c
    }

    #[test]
    fn every_command_kind_parses_as_postcard_does() {
        let commands = [
            Command::HelloRequest,
            Command::Acknowledge(None),
            Command::NewRun,
            Command::Configure(RigConfig::default()),
        ]
        .into_iter()
        .chain(RuleId::ALL.map(|r| Command::Acknowledge(Some(r))));
        for command in commands {
            for counter in [0, 1, 127, 128, 16_383, 16_384, u32::MAX] {
                let mut buf = [0u8; 1024];
                let body = postcard::to_slice(&(counter, command), &mut buf).unwrap();
                let parsed = take_command(body);
                assert_eq!(parsed, Ok((counter, command)));
                agree(body);
                // Every truncation, and a byte too many.
                for n in 0..body.len() {
                    agree(&body[..n]);
                }
                let mut longer = body.to_vec();
                longer.push(0);
                agree(&longer);
            }
        }
    }

    #[test]
    fn varint_edges_parse_as_postcard_does() {
        for body in [
            &[0xFF, 0xFF, 0xFF, 0xFF, 0x0F, 0][..],
            &[0xFF, 0xFF, 0xFF, 0xFF, 0x10, 0],
            &[0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0],
            &[0x80, 0x80, 0x80, 0x80, 0x00, 0],
            &[0x80, 0x00, 0],
            &[0, 0x80, 0x00],
            &[0, 4],
            &[0, 1, 1, 7],
            &[0, 1, 1, 0x86, 0x00],
            &[0, 1, 2],
            &[],
        ] {
            agree(body);
        }
    }

    proptest! {
        #[test]
        fn any_configure_parses_as_postcard_does(
            counter in any::<u32>(),
            bits in prop::collection::vec(any::<u64>(), 60),
            flags in prop::collection::vec(any::<bool>(), 20),
            picks in prop::collection::vec(any::<u32>(), 10),
        ) {
            let command = Command::Configure(config(&bits, &flags, &picks));
            let mut buf = [0u8; 1024];
            let body = postcard::to_slice(&(counter, command), &mut buf).unwrap();
            let ours = take_command(body);
            prop_assert_eq!(bytes(&ours), Ok(body.to_vec()));
            agree(body);
        }

        #[test]
        fn config_digest_is_the_crc_of_postcards_bytes(
            bits in prop::collection::vec(any::<u64>(), 60),
            flags in prop::collection::vec(any::<bool>(), 20),
            picks in prop::collection::vec(any::<u32>(), 10),
        ) {
            let c = config(&bits, &flags, &picks);
            let mut buf = [0u8; 1024];
            let bytes = postcard::to_slice(&c, &mut buf).unwrap();
            prop_assert_eq!(Hello::config_digest(&c), CRC.checksum(bytes));
        }

        #[test]
        fn any_changed_configure_parses_as_postcard_does(
            at in any::<prop::sample::Index>(),
            to in any::<u8>(),
            cut in any::<prop::sample::Index>(),
        ) {
            let command = Command::Configure(RigConfig::default());
            let mut buf = [0u8; 1024];
            let body = postcard::to_slice(&(300u32, command), &mut buf).unwrap().to_vec();
            let mut changed = body.clone();
            changed[at.index(body.len())] = to;
            agree(&changed);
            agree(&changed[..cut.index(body.len() + 1)]);
        }

        #[test]
        fn any_bytes_parse_as_postcard_does(body in prop::collection::vec(any::<u8>(), 0..40)) {
            agree(&body);
        }
    }
}
