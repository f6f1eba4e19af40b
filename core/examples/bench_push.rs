//! Per-sample cost of `Monitor::push` plus the alarm update, for callgrind.
//!
//! DESIGN.md §6 budget: ≤ 1,000 x86-64 instructions per sample, the same at
//! N = 16 and N = 1024. Run `bench/callgrind.sh`, which builds this in release
//! and counts the instructions inside [`push_and_alarm`] only.
//!
//! `cargo run --release -p heatbound --example bench_push -- 16 100000`
use std::hint::black_box;

use heatbound::alarm::AlarmSet;
use heatbound::config::{RigConfig, RigFile};
use heatbound::monitor::{Monitor, Sample};

/// Samples measured after the warm-up, unless given on the command line.
const SAMPLES: u32 = 100_000;
/// Samples pushed first (window filled, steady buckets cycling) and not counted.
const WARM_UP: u32 = 5_000;

/// The measured work: one push and one alarm update.
#[inline(never)]
fn push_and_alarm<const N: usize>(
    monitor: &mut Monitor<N>,
    alarms: &mut AlarmSet,
    s: &Sample,
) -> usize {
    monitor.push(s);
    alarms.update(s.t_ms, &monitor.alarm_inputs()).len()
}

/// A deterministic 10 Hz sample with small variations on every channel.
fn sample(i: u32) -> Sample {
    let wobble = ((i.wrapping_mul(2_654_435_761) >> 16) & 0xff) as f32 / 255.0 - 0.5;
    Sample {
        t_ms: i.wrapping_mul(100),
        t_hot_k: 650.0 + 2.0 * wobble,
        t_cold_k: 300.0 + 0.5 * wobble,
        heat_in_w: 1000.0 + 10.0 * wobble,
        work_w: 150.0 - 3.0 * wobble,
        heat_out_w: None,
        t_hot2_k: None,
    }
}

fn run<const N: usize>(samples: u32) {
    let config: RigConfig = RigFile {
        window_samples: Some(N as u32),
        ..Default::default()
    }
    .validate()
    .expect("valid bench config");
    let mut monitor: Monitor<N> = Monitor::new(&config).expect("window fits");
    let mut alarms = AlarmSet::new(&config);
    let mut events = 0usize;
    for i in 0..WARM_UP {
        events += push_and_alarm(&mut monitor, &mut alarms, &sample(i));
    }
    for i in WARM_UP..WARM_UP + samples {
        events += push_and_alarm(black_box(&mut monitor), &mut alarms, black_box(&sample(i)));
    }
    let m = monitor.window_metrics();
    println!(
        "N = {N}: {samples} samples after {WARM_UP} warm-up, {events} events, window η = {:?}",
        m.efficiency
    );
}

fn main() {
    let mut args = std::env::args().skip(1);
    let n: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(16);
    let samples: u32 = args.next().and_then(|a| a.parse().ok()).unwrap_or(SAMPLES);
    match n {
        16 => run::<16>(samples),
        1024 => run::<1024>(samples),
        other => panic!("N = {other}: only 16 and 1024 are built"),
    }
}
