//! Instruction counts of the per-sample work (DESIGN §6), measured with
//! SysTick in QEMU run with `-icount shift=0`.
//!
//! With `-icount shift=0` the emulated clock advances exactly 1 ns per
//! instruction, so SysTick on its core clock counts one tick per
//! `1e9 / f_core` instructions: 40 on mps2-an386 (25 MHz), 62.5 on microbit
//! (16 MHz). Rather than trusting the board's nominal clock, each run
//! calibrates: it times [`hw::known_block`] (a straight run of
//! [`hw::KNOWN_BLOCK_INSTRUCTIONS`] `nop`s) and an empty region, and scales
//! every reading by `instructions / (ticks(block) − ticks(empty))`. The
//! empty region's ticks are the measurement overhead and are subtracted from
//! every reading. One tick is tens of instructions, so a single reading is
//! that coarse; the mean over thousands of samples is not.
//!
//! ```text
//! Rig (thermocouple-drift, seed 1) --sample--> [ Monitor::push + AlarmSet::update ]  per sample
//!                           every 10th sample --> [ Summary::from_monitor + wire::encode ]
//! encode_command(Acknowledge(None), demo key) --bytes--> [ Controller::receive ]  per command
//!                                                          (CRC, COBS, decode, HMAC check, counter, Reply)
//! ```
//!
//! The commands are built on the device, outside the timed region, each
//! with a fresh counter: one sealed with [`CommandKey::DEMO`] for the
//! controller's rig and session (accepted and applied), one sealed with
//! another key (refused: failed authentication; the MAC check costs the
//! same whatever the key, so this is the cost of refusing a forged
//! command). The timed region is the whole of `Controller::receive`,
//! including the callback that encodes its Reply into a buffer, as the
//! firmware's App does before writing it to the UART.
//!
//! These are instruction counts, not cycles: QEMU models no pipeline, wait
//! states or FPU latency.

use core::hint::black_box;
use core::sync::atomic::{Ordering, compiler_fence};

use cortex_m::peripheral::SYST;
use cortex_m::peripheral::syst::SystClkSource;
use heatbound::alarm::AlarmSet;
use heatbound::config::RigConfig;
use heatbound::control::{Controller, ControllerSettings};
use heatbound::diagnosis::Tracker;
use heatbound::monitor::{Monitor, Pushed, Sample};
use heatbound::wire::{
    self, Addressee, Authenticator, Command, CommandFrame, CommandKey, Frame, MAX_COMMAND_LEN,
    MAX_FRAME_LEN, ReplyCode, RigId, Summary, Verdict,
};
use heatbound_firmware_example::rig::{Rig, Scenario};

use crate::hw;

/// SysTick's full 24-bit reload.
const RELOAD: u32 = 0x00FF_FFFF;

/// Samples before measuring starts (the window fills, the alarms settle).
pub const WARM_UP_SAMPLES: u32 = 100;

/// Samples measured: by default 5,900, which is 590 s of
/// `thermocouple-drift` at 10 Hz after the warm-up, through the drift, the
/// alarms and their latching (`HEATBOUND_MEASURE_SAMPLES` at build time).
pub const MEASURED_SAMPLES: u32 = crate::build_env::MEASURE_SAMPLES;

/// Sample period, ms.
const DT_MS: u32 = 100;

/// Summaries are built every this many samples (1 s at 10 Hz).
const SUMMARY_EVERY: u32 = 10;

/// Commands timed of each kind (accepted, refused). Their counters run
/// 1 to 120, so every counter is a one-byte varint and every command is
/// the same length.
const COMMANDS: u32 = 60;

/// The rig id the measured controller announces. It does not change the
/// cost: the tag covers it as its 16 padded bytes, whatever it says.
const COMMAND_RIG_ID: &str = "measure";

/// The measured controller's session (any: the tag covers it as 4 bytes).
const COMMAND_SESSION: u32 = 0x5EED_5EEC;

/// The measured controller's window, samples: 8, not the firmware's 64.
/// Building a `Controller<64>` puts about 10 KB of temporaries on the stack
/// (the monitor's `Result` and the controller's), which left the M0 about
/// 650 bytes of its 16 KiB. A command never touches the monitor, so only
/// code layout differs: on mps2-an386 a `Controller<64>` measured 60
/// instructions (0.8 %) fewer for an accepted command and 80 fewer for a
/// refused one.
const COMMAND_WINDOW: usize = 8;

/// A key that is not the controller's: 32 bytes, any value but the demo
/// key's.
const WRONG_KEY: CommandKey = CommandKey::from_bytes([0xA5; CommandKey::LEN]);

/// Statistics of a measured quantity, in SysTick ticks.
#[derive(Clone, Copy, Debug)]
pub struct Ticks {
    n: u32,
    sum: u64,
    min: u32,
    max: u32,
}

impl Ticks {
    const fn new() -> Self {
        Ticks {
            n: 0,
            sum: 0,
            min: u32::MAX,
            max: 0,
        }
    }

    fn add(&mut self, ticks: u32) {
        self.n += 1;
        self.sum += u64::from(ticks);
        self.min = self.min.min(ticks);
        self.max = self.max.max(ticks);
    }

    fn mean(&self) -> f32 {
        if self.n == 0 {
            0.0
        } else {
            self.sum as f32 / self.n as f32
        }
    }
}

/// Instruction counts of a measured quantity (overhead subtracted).
#[derive(Clone, Copy, Debug)]
pub struct Instructions {
    /// Readings.
    pub n: u32,
    /// Mean.
    pub mean: f32,
    /// Smallest reading.
    pub min: f32,
    /// Largest reading.
    pub max: f32,
}

/// What a measurement run found.
#[derive(Clone, Copy, Debug)]
pub struct Report {
    /// Instructions per SysTick tick (calibrated).
    pub instructions_per_tick: f32,
    /// Ticks of the empty measured region (the overhead).
    pub overhead_ticks: f32,
    /// Ticks of the known block, overhead included.
    pub calibration_ticks: f32,
    /// `Monitor::push` + `AlarmSet::update`, per sample.
    pub push_update: Instructions,
    /// `Monitor::push` + `AlarmSet::update` on the host benchmark's
    /// synthetic stream (`core/examples/bench_push.rs`: steady readings with
    /// a small wobble, no heat-out channel), for comparison with callgrind.
    pub push_update_synthetic: Instructions,
    /// One `libm::sqrtf` (software on Arm: libm has no Arm `vsqrt` path),
    /// for reading the totals.
    pub sqrtf: Instructions,
    /// `Summary::from_monitor` + `wire::encode`, per summary.
    pub summary_encode: Instructions,
    /// The diagnosis at summary rate, per summary: `Tracker::observe` (UA
    /// learning) and `Tracker::judge`, on the thermocouple-drift stream
    /// (inconsistent from about 200 s on, so the candidates are fitted).
    pub summary_diagnose: Instructions,
    /// `Controller::receive` of a sealed `Acknowledge(None)`, accepted and
    /// applied (no alarm active, so its only frame is the Reply), on a
    /// controller with a [`COMMAND_WINDOW`]-sample window.
    pub command_ack: Instructions,
    /// `Controller::receive` of the same command sealed with another key,
    /// refused with `failed_authentication`.
    pub command_bad_mac: Instructions,
    /// The window capacity measured.
    pub window: usize,
    /// Samples the monitor counted invalid (0 on this stream).
    pub invalid: u32,
}

/// A started SysTick counting core-clock ticks down from [`RELOAD`].
struct Counter {
    _syst: SYST,
}

impl Counter {
    fn new(mut syst: SYST) -> Self {
        syst.disable_interrupt();
        syst.set_clock_source(SystClkSource::Core);
        syst.set_reload(RELOAD);
        syst.clear_current();
        syst.enable_counter();
        Counter { _syst: syst }
    }

    /// Ticks taken by `f` (one wrap at most: 0.67 s of emulated time).
    #[inline(always)]
    fn time<T>(&self, f: impl FnOnce() -> T) -> (u32, T) {
        compiler_fence(Ordering::SeqCst);
        let start = SYST::get_current();
        compiler_fence(Ordering::SeqCst);
        let out = black_box(f());
        compiler_fence(Ordering::SeqCst);
        let end = SYST::get_current();
        compiler_fence(Ordering::SeqCst);
        (start.wrapping_sub(end) & RELOAD, out)
    }
}

fn scale(t: &Ticks, overhead: f32, per_tick: f32) -> Instructions {
    let f = |ticks: f32| ((ticks - overhead) * per_tick).max(0.0);
    Instructions {
        n: t.n,
        mean: f(t.mean()),
        min: f(t.min as f32),
        max: f(t.max as f32),
    }
}

/// Calibrates SysTick, then measures the per-sample work and the summary
/// on a `Monitor<N>` over the simulated `thermocouple-drift` rig (seed 1,
/// `RigConfig::default()`).
pub fn run<const N: usize>(syst: SYST) -> Report {
    let counter = Counter::new(syst);

    let mut empty = Ticks::new();
    let mut block = Ticks::new();
    for _ in 0..64 {
        empty.add(counter.time(|| ()).0);
        block.add(counter.time(hw::known_block).0);
    }
    let overhead = empty.mean();
    let calibration = block.mean();
    let per_tick = hw::KNOWN_BLOCK_INSTRUCTIONS as f32 / (calibration - overhead);

    let config = RigConfig::default();
    let (push_update, summary_encode, summary_diagnose, invalid) =
        rig_stream::<N>(&counter, &config);
    let push_update_synthetic = synthetic::<N>(&counter, &config);
    let (command_ack, command_bad_mac) = commands(&counter, &config);
    let mut sqrt = Ticks::new();
    for i in 0..256u32 {
        let x = black_box(300.0 + i as f32);
        sqrt.add(counter.time(|| libm::sqrtf(x)).0);
    }

    Report {
        instructions_per_tick: per_tick,
        overhead_ticks: overhead,
        calibration_ticks: calibration,
        push_update: scale(&push_update, overhead, per_tick),
        summary_encode: scale(&summary_encode, overhead, per_tick),
        summary_diagnose: scale(&summary_diagnose, overhead, per_tick),
        push_update_synthetic: scale(&push_update_synthetic, overhead, per_tick),
        sqrtf: scale(&sqrt, overhead, per_tick),
        command_ack: scale(&command_ack, overhead, per_tick),
        command_bad_mac: scale(&command_bad_mac, overhead, per_tick),
        window: N,
        invalid,
    }
}

/// Push + update ticks per sample and summary + encode ticks per summary
/// on the simulated rig; samples counted invalid. Not inlined, so its
/// monitor is off the stack before [`synthetic`] builds another.
#[inline(never)]
fn rig_stream<const N: usize>(counter: &Counter, config: &RigConfig) -> (Ticks, Ticks, Ticks, u32) {
    let mut rig = Rig::bench_stirling(Scenario::ThermocoupleDrift, 1);
    let mut monitor = match Monitor::<N>::new(config) {
        Ok(m) => m,
        Err(_) => panic!("the default configuration suits the monitor"),
    };
    let mut alarms = AlarmSet::new(config);
    let mut tracker = Tracker::<f32>::new(config);
    let mut push_update = Ticks::new();
    let mut summary_encode = Ticks::new();
    let mut summary_diagnose = Ticks::new();
    let mut invalid = 0u32;
    let mut buf = [0u8; MAX_FRAME_LEN];

    for i in 1..=(WARM_UP_SAMPLES + MEASURED_SAMPLES) {
        let t_ms = i * DT_MS;
        rig.step(DT_MS as f32 / 1000.0);
        let sample = black_box(rig.sample(t_ms));
        let (ticks, pushed) = counter.time(|| {
            let pushed = monitor.push(&sample);
            let events = alarms.update(t_ms, &monitor.alarm_inputs());
            (pushed, events)
        });
        if matches!(pushed.0, Pushed::Invalid(_)) {
            invalid += 1;
        }
        if i > WARM_UP_SAMPLES {
            push_update.add(ticks);
        }
        if i % SUMMARY_EVERY == 0 {
            let seq = (i / SUMMARY_EVERY) as u16;
            let (ticks, verdict) = counter.time(|| {
                tracker.observe(&monitor, t_ms);
                Verdict::of(&tracker.judge(&monitor, t_ms))
            });
            if i > WARM_UP_SAMPLES {
                summary_diagnose.add(ticks);
            }
            let (ticks, _) = counter.time(|| {
                let s = Summary::from_monitor(seq, t_ms, &monitor, &alarms, verdict);
                wire::encode(&Frame::Summary(s), &mut buf)
            });
            if i > WARM_UP_SAMPLES {
                summary_encode.add(ticks);
            }
        }
    }

    (push_update, summary_encode, summary_diagnose, invalid)
}

/// The host benchmark's sample `i` (`core/examples/bench_push.rs`).
fn synthetic_sample(i: u32) -> Sample {
    let wobble = ((i.wrapping_mul(2_654_435_761) >> 16) & 0xff) as f32 / 255.0 - 0.5;
    Sample {
        t_ms: i.wrapping_mul(DT_MS),
        t_hot_k: 650.0 + 2.0 * wobble,
        t_cold_k: 300.0 + 0.5 * wobble,
        heat_in_w: 1000.0 + 10.0 * wobble,
        work_w: 150.0 - 3.0 * wobble,
        heat_out_w: None,
        t_hot2_k: None,
    }
}

/// Push + update ticks on [`synthetic_sample`]s, after the same warm-up.
#[inline(never)]
fn synthetic<const N: usize>(counter: &Counter, config: &RigConfig) -> Ticks {
    let mut ticks = Ticks::new();
    let Ok(mut monitor) = Monitor::<N>::new(config) else {
        return ticks;
    };
    let mut alarms = AlarmSet::new(config);
    for i in 1..=(WARM_UP_SAMPLES + MEASURED_SAMPLES) {
        let sample = black_box(synthetic_sample(i));
        let t_ms = sample.t_ms;
        let (t, _) = counter.time(|| {
            let pushed = monitor.push(&sample);
            let events = alarms.update(t_ms, &monitor.alarm_inputs());
            (pushed, events)
        });
        if i > WARM_UP_SAMPLES {
            ticks.add(t);
        }
    }
    ticks
}

/// `Controller::receive` ticks of [`COMMANDS`] sealed `Acknowledge(None)`
/// commands under the demo key (each applied) and as many under
/// [`WRONG_KEY`] (each refused), alternating, each with a fresh counter and
/// built before its timed region. Panics (QEMU exits with 1) if any reply
/// is not the one expected, so a wrong path is never reported as a cost.
/// Not inlined, so its controller is off the stack afterwards.
#[inline(never)]
fn commands(counter: &Counter, config: &RigConfig) -> (Ticks, Ticks) {
    let Ok(rig_id) = RigId::new(COMMAND_RIG_ID) else {
        panic!("the measurement's rig id is valid");
    };
    let settings = ControllerSettings {
        rig_id,
        firmware_version: (0, 1, 0),
        sample_period_ms: DT_MS,
        summary_period_ms: SUMMARY_EVERY * DT_MS,
        hello_period_ms: 0,
    };
    let key = CommandKey::DEMO;
    let config = RigConfig {
        window_samples: COMMAND_WINDOW as u32,
        ..*config
    };
    // Borrowed where it was built, not moved out of the `Result`: one copy
    // of the controller fewer on the stack.
    let mut built =
        Controller::<COMMAND_WINDOW>::new(&settings, &config, Some(&key), COMMAND_SESSION);
    let Ok(controller) = built.as_mut() else {
        panic!("the default configuration suits the controller");
    };
    let to = Addressee {
        rig_id,
        session: COMMAND_SESSION,
    };
    let good = Authenticator::new(&key);
    let wrong = Authenticator::new(&WRONG_KEY);
    let mut reply = [0u8; MAX_FRAME_LEN];
    let mut out = |f: &Frame| {
        let _ = black_box(wire::encode(f, &mut reply));
    };
    controller.start(0, &mut out);

    let mut ack = Ticks::new();
    let mut bad_mac = Ticks::new();
    let mut buf = [0u8; MAX_COMMAND_LEN];
    for i in 1..=2 * COMMANDS {
        let accepted = i % 2 == 1;
        let frame = CommandFrame {
            counter: i,
            command: Command::Acknowledge(None),
        };
        let auth = if accepted { &good } else { &wrong };
        let Ok(n) = wire::encode_command(&frame, Some(auth), &to, &mut buf) else {
            panic!("an acknowledge fits a command buffer");
        };
        let bytes = black_box(buf.get(..n).unwrap_or(&[]));
        let t_ms = i * DT_MS;
        let (ticks, ()) = counter.time(|| controller.receive(bytes, t_ms, &mut out));
        if accepted {
            ack.add(ticks);
        } else {
            bad_mac.add(ticks);
        }
    }
    let stats = controller.stats();
    let replies: u32 = stats.replies.iter().sum();
    if stats.count(ReplyCode::Applied) != COMMANDS
        || stats.count(ReplyCode::FailedAuthentication) != COMMANDS
        || replies != 2 * COMMANDS
    {
        panic!("the measured commands were not answered as expected");
    }
    (ack, bad_mac)
}

/// Prints `report` to semihosting stderr as `key=value` lines that
/// `scripts/measure.sh` parses.
pub fn print(board: &str, report: &Report) {
    use cortex_m_semihosting::heprintln;
    heprintln!("measure.board={}", board);
    heprintln!("measure.window={}", report.window);
    heprintln!(
        "measure.calibration: {} nops = {} ticks, empty region = {} ticks, {} instructions/tick",
        hw::KNOWN_BLOCK_INSTRUCTIONS,
        report.calibration_ticks,
        report.overhead_ticks,
        report.instructions_per_tick
    );
    heprintln!(
        "measure.instructions_per_tick={}",
        report.instructions_per_tick
    );
    heprintln!("measure.overhead_ticks={}", report.overhead_ticks);
    for (name, m) in [
        ("push_update", &report.push_update),
        ("summary_encode", &report.summary_encode),
        ("summary_diagnose", &report.summary_diagnose),
        ("push_update_synthetic", &report.push_update_synthetic),
        ("libm_sqrtf", &report.sqrtf),
        ("command_ack", &report.command_ack),
        ("command_bad_mac", &report.command_bad_mac),
    ] {
        heprintln!(
            "measure.{}: n={} mean={} min={} max={}",
            name,
            m.n,
            m.mean as u32,
            m.min as u32,
            m.max as u32
        );
    }
    heprintln!("measure.invalid={}", report.invalid);
}
