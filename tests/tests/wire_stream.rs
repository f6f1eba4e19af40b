//! The decoder on a damaged stream: a seeded, deterministic simulation of a
//! noisy UART (bit flips, dropped bytes, truncations), plus the Summary size
//! budget on a real monitor.

use heatbound::alarm::{AlarmSet, Event, EventKind, RuleId, Severity};
use heatbound::config::{Mode, RigConfig};
use heatbound::monitor::{Monitor, Sample};
use heatbound::wire::{
    self, Decoder, DecoderStats, EventFrame, FaultBits, Frame, FrameError, Hello, LinkTracker,
    RigId, Status, Summary, Uncertainties, Verdict,
};

/// SplitMix64: small, seeded, good enough to place corruption.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
    fn chance(&mut self, per_million: u64) -> bool {
        self.below(1_000_000) < per_million
    }
    fn f32(&mut self, lo: f32, hi: f32) -> f32 {
        lo + (hi - lo) * (self.below(1 << 24) as f32 / (1 << 24) as f32)
    }
}

const FRAMES: usize = 10_000;
const DECODER_CAP: usize = wire::MAX_FRAME_LEN;

fn frames(rng: &mut Rng) -> Vec<Frame> {
    let mut seq: u16 = 60_000; // wraps during the run
    let mut out = Vec::with_capacity(FRAMES);
    for i in 0..FRAMES {
        let t_ms = (i as u32)
            .wrapping_mul(1000)
            .wrapping_add(u32::MAX - 3_000_000);
        let f = match rng.below(100) {
            0..5 => Frame::Hello(Hello {
                rig_id: RigId::new("stream-rig").unwrap(),
                firmware_version: (1, 0, (i % 256) as u8),
                sample_period_ms: 100,
                window_samples: 60,
                mode: Mode::Engine,
                coverage_factor: 2.0,
                ambient_k: if i % 2 == 0 { Some(293.15) } else { None },
                uncertainty: Uncertainties {
                    hot_k: 1.0,
                    cold_k: 0.1,
                    heat_in_rel: 0.01,
                    work_rel: 0.01,
                    heat_out_rel: 0.02,
                    hot2_k: 1.0,
                },
                losses: (i % 4 == 0).then_some((0.35, 0.01)),
                config_digest: i as u32,
                run: (i / 7) as u32,
                session: 0x5EED,
                last_counter: i as u32,
                keyed: i % 3 == 0,
            }),
            5..20 => Frame::Event(EventFrame {
                seq,
                event: Event {
                    t_ms,
                    rule: RuleId::from_index(i % RuleId::COUNT).unwrap(),
                    kind: EventKind::Raised,
                    severity: Severity::Warning,
                },
                verdict: Verdict::default(),
            }),
            _ => {
                seq = seq.wrapping_add(1);
                let some = |rng: &mut Rng, lo, hi| (rng.below(10) != 0).then(|| rng.f32(lo, hi));
                Frame::Summary(Summary {
                    seq,
                    t_ms,
                    duration_s: 6.0,
                    heat_in_j: rng.f32(1000.0, 9000.0),
                    work_j: rng.f32(100.0, 3000.0),
                    heat_out_j: rng.f32(1000.0, 6000.0),
                    entropy_in_j_per_k: rng.f32(1.0, 20.0),
                    entropy_out_j_per_k: rng.f32(1.0, 30.0),
                    hot_temperature_integral_k_s: rng.f32(2400.0, 5400.0),
                    hot_pair_integral_k_s: 0.0,
                    ambient_k: some(rng, 280.0, 350.0),
                    entropy_rate_w_per_k: some(rng, -0.1, 2.0),
                    u_performance: some(rng, 0.0, 0.01),
                    u_bound: some(rng, 0.0, 0.01),
                    u_margin: some(rng, 0.0, 0.01),
                    u_entropy_rate_w_per_k: some(rng, 0.0, 0.1),
                    status: Status {
                        steady: rng.below(2) == 0,
                        heat_out_measured: false,
                        trip_active: false,
                        any_fault: false,
                        hot2_measured: false,
                        mode: Mode::Engine,
                    },
                    faults: FaultBits {
                        channels: (rng.below(32)) as u8,
                        stale: false,
                    },
                    alarms: (rng.below(64)) as u8,
                    verdict: Verdict::default(),
                })
            }
        };
        out.push(f);
    }
    out
}

struct Stream {
    frames: Vec<Frame>,
    /// Index of each frame's delimiter in the clean stream.
    ends: Vec<usize>,
    clean: Vec<u8>,
}

fn stream(seed: u64) -> Stream {
    let mut rng = Rng(seed);
    let frames = frames(&mut rng);
    let mut clean = Vec::new();
    let mut ends = Vec::new();
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    for f in &frames {
        let n = wire::encode(f, &mut buf).unwrap();
        clean.extend_from_slice(&buf[..n]);
        ends.push(clean.len() - 1);
    }
    Stream {
        frames,
        ends,
        clean,
    }
}

/// The damaged stream, each byte's position in the clean stream, and which
/// clean bytes were damaged (flipped or dropped).
fn corrupt(clean: &[u8], rng: &mut Rng) -> (Vec<u8>, Vec<usize>, Vec<bool>) {
    let mut out = Vec::with_capacity(clean.len());
    let mut origin = Vec::with_capacity(clean.len());
    let mut touched = vec![false; clean.len()];
    let mut i = 0;
    while i < clean.len() {
        if rng.chance(200) {
            // A truncation: a run of up to 100 bytes never arrives.
            let run = 1 + rng.below(100) as usize;
            for t in touched.iter_mut().skip(i).take(run) {
                *t = true;
            }
            i += run;
            continue;
        }
        if rng.chance(2_000) {
            touched[i] = true; // a dropped byte
        } else if rng.chance(10_000) {
            touched[i] = true; // 1 % of bytes get a bit flipped
            out.push(clean[i] ^ (1 << rng.below(8)));
            origin.push(i);
        } else {
            out.push(clean[i]);
            origin.push(i);
        }
        i += 1;
    }
    (out, origin, touched)
}

/// Each decoder result with the stream position of the delimiter that ended it.
type Decoded = Vec<(usize, Result<Frame, FrameError>)>;

/// Byte by byte: every result with the stream position of its delimiter.
fn decode_positions(bytes: &[u8]) -> (Decoded, DecoderStats) {
    let mut d = Decoder::<DECODER_CAP>::new();
    let mut out = Vec::new();
    for (pos, &b) in bytes.iter().enumerate() {
        if let Some(r) = d.push_byte(b) {
            out.push((pos, r));
        }
    }
    (out, *d.stats())
}

#[test]
fn clean_stream_decodes_completely() {
    let s = stream(1);
    let (results, stats) = decode_positions(&s.clean);
    assert_eq!(stats.frames as usize, FRAMES);
    assert_eq!(stats.losses(), 0);
    assert_eq!(stats.bytes_discarded, 0);
    let decoded: Vec<Frame> = results.into_iter().map(|(_, r)| r.unwrap()).collect();
    assert_eq!(decoded, s.frames);

    let mut link = LinkTracker::new();
    for f in &decoded {
        link.observe(f);
    }
    let l = link.stats();
    assert_eq!((l.missing_summaries, l.duplicates, l.restarts), (0, 0, 0));
}

#[test]
fn damaged_stream_loses_only_damaged_frames_and_counts_every_loss() {
    for seed in [7u64, 8, 9] {
        let s = stream(seed);
        let mut rng = Rng(seed ^ 0xDEAD_BEEF);
        let (bytes, origin, touched) = corrupt(&s.clean, &mut rng);

        // A frame survives if none of its bytes, its delimiter nor the
        // delimiter before it was damaged.
        let mut start = 0;
        let intact: Vec<bool> = s
            .ends
            .iter()
            .map(|&end| {
                let before_ok = start == 0 || !touched[start - 1];
                let ok = before_ok && !touched[start..=end].iter().any(|&t| t);
                start = end + 1;
                ok
            })
            .collect();
        let intact_count = intact.iter().filter(|&&x| x).count();

        let (results, stats) = decode_positions(&bytes);
        let by_end: std::collections::HashMap<usize, usize> =
            s.ends.iter().enumerate().map(|(i, &e)| (e, i)).collect();

        // No damaged frame is accepted: every accepted frame ends on a
        // clean-stream delimiter and equals the frame that ended there.
        let mut recovered = vec![false; FRAMES];
        for (pos, r) in &results {
            if let Ok(frame) = r {
                let i = by_end[&origin[*pos]];
                assert_eq!(frame, &s.frames[i], "seed {seed}: wrong frame at {pos}");
                recovered[i] = true;
            }
        }
        let recovered_intact = (0..FRAMES).filter(|&i| intact[i] && recovered[i]).count();
        let share = recovered_intact as f64 / intact_count as f64;
        assert!(
            share >= 0.97,
            "seed {seed}: recovered {share:.4} of intact frames"
        );
        // Stronger, and what the decoder guarantees: every intact frame.
        assert_eq!(recovered_intact, intact_count, "seed {seed}");
        // The corruption is heavy enough to matter.
        assert!(intact_count < FRAMES * 8 / 10 && intact_count > FRAMES / 3);

        // Every delimiter ended exactly one frame, loss or empty frame.
        let delimiters = bytes.iter().filter(|&&b| b == 0).count() as u64;
        assert_eq!(
            stats.frames + stats.losses() + stats.empty_frames,
            delimiters,
            "seed {seed}: {stats:?}"
        );
        assert_eq!(
            stats.frames as usize,
            recovered.iter().filter(|&&x| x).count()
        );
        // Every byte is a delimiter, in an accepted frame, discarded or pending.
        let accepted_bytes: u64 = (0..FRAMES)
            .filter(|&i| recovered[i])
            .map(|i| (s.ends[i] - if i == 0 { 0 } else { s.ends[i - 1] + 1 }) as u64)
            .sum();
        let pending = bytes.len() - 1 - bytes.iter().rposition(|&b| b == 0).unwrap();
        assert_eq!(
            delimiters + accepted_bytes + stats.bytes_discarded + pending as u64,
            bytes.len() as u64
        );
        assert!(stats.crc_errors > 0 && stats.malformed > 0 && stats.overlong > 0);
        assert_eq!(stats.unknown_version, 0);

        // The link tracker counts the summaries that went missing.
        let mut link = LinkTracker::new();
        for (_, r) in &results {
            if let Ok(f) = r {
                link.observe(f);
            }
        }
        let summaries = |keep: &dyn Fn(usize) -> bool| {
            (0..FRAMES)
                .filter(|&i| keep(i) && matches!(s.frames[i], Frame::Summary(_)))
                .count() as u64
        };
        let first = (0..FRAMES)
            .find(|&i| recovered[i] && matches!(s.frames[i], Frame::Summary(_)))
            .unwrap();
        let last = (0..FRAMES)
            .rev()
            .find(|&i| recovered[i] && matches!(s.frames[i], Frame::Summary(_)))
            .unwrap();
        let lost_between = summaries(&|i| i > first && i < last && !recovered[i]);
        assert_eq!(link.stats().missing_summaries, lost_between, "seed {seed}");
        assert_eq!(link.stats().restarts, 0);
        assert_eq!(link.stats().duplicates, 0);

        println!(
            "seed {seed}: {} bytes, intact {intact_count}/{FRAMES}, recovered {}, {stats:?}",
            bytes.len(),
            stats.frames
        );
    }
}

#[test]
fn chunking_does_not_change_the_result() {
    let s = stream(11);
    let mut rng = Rng(99);
    let (bytes, _, _) = corrupt(&s.clean, &mut rng);
    let (reference, reference_stats) = decode_positions(&bytes);
    let reference: Vec<_> = reference.into_iter().map(|(_, r)| r).collect();

    for round in 0..5 {
        let mut d = Decoder::<DECODER_CAP>::new();
        let mut got = Vec::new();
        let mut rest = &bytes[..];
        while !rest.is_empty() {
            let n = (1 + rng.below(if round == 0 { 4 } else { 300 }) as usize).min(rest.len());
            let (chunk, tail) = rest.split_at(n);
            d.feed(chunk, |r| got.push(r));
            rest = tail;
        }
        assert_eq!(got, reference);
        assert_eq!(*d.stats(), reference_stats);
    }
    let mut whole = Decoder::<DECODER_CAP>::new();
    let mut got = Vec::new();
    whole.feed(&bytes, |r| got.push(r));
    assert_eq!(got, reference);
}

#[test]
fn restart_after_hello_is_recognised() {
    let hello = Frame::Hello(Hello::from_config(
        RigId::new("r").unwrap(),
        (1, 0, 0),
        100,
        &RigConfig::default(),
    ));
    let s = |seq| {
        Frame::Summary(Summary {
            seq,
            ..Summary::default()
        })
    };
    let mut link = LinkTracker::new();
    for f in [hello.clone(), s(0), s(1), s(2), s(5), hello, s(0), s(1)] {
        link.observe(&f);
    }
    let l = link.stats();
    assert_eq!((l.hellos, l.restarts, l.missing_summaries), (2, 1, 2));
}

fn run_monitor(config: &RigConfig, samples: u32, heat_out: bool) -> (Monitor<64>, AlarmSet) {
    let mut monitor = Monitor::<64, f32>::new(config).unwrap();
    let mut alarms = AlarmSet::new(config);
    for i in 0..samples {
        let wobble = (i % 7) as f32 * 0.3;
        monitor.push(&Sample {
            t_ms: i * 100,
            t_hot_k: 650.0 + wobble,
            t_cold_k: 305.0 - wobble,
            heat_in_w: 1500.0 + 10.0 * wobble,
            work_w: 420.0,
            heat_out_w: heat_out.then_some(1070.0 + 10.0 * wobble),
            t_hot2_k: None,
        });
        alarms.update(i * 100, &monitor.alarm_inputs());
    }
    (monitor, alarms)
}

#[test]
fn a_real_monitor_summary_fits_the_budget() {
    let config = RigConfig::default();
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    for heat_out in [false, true] {
        let (monitor, alarms) = run_monitor(&config, 500, heat_out);
        for (seq, t_ms) in [(3u16, 49_900u32), (u16::MAX, u32::MAX)] {
            let summary = Summary::from_monitor(seq, t_ms, &monitor, &alarms, Verdict::default());
            assert!(summary.performance().is_some() && summary.bound().is_some());
            assert!(summary.u_margin.is_some());
            assert_eq!(summary.status.heat_out_measured, heat_out);
            let n = wire::encode(&Frame::Summary(summary), &mut buf).unwrap();
            assert!(n <= wire::SUMMARY_MAX_WIRE_LEN, "{n} bytes");
            assert!(n <= 80, "{n} bytes");
            assert_eq!(wire::decode(&buf[..n]), Ok(Frame::Summary(summary)));

            // The host recomputes the device's figures from the integrals.
            let m = monitor.window_metrics();
            let close = |a: Option<f32>, b: Option<f32>| (a.unwrap() - b.unwrap()).abs() < 1e-5;
            assert!(close(m.efficiency, summary.performance()));
            assert!(close(m.carnot_efficiency, summary.bound()));
            assert!(close(m.hot_mean_k, summary.hot_mean_k()));
            let r = summary.integrals().metrics(monitor.settings());
            assert!(close(r.entropy_rate_w_per_k, summary.entropy_rate_w_per_k));
        }
    }
}
