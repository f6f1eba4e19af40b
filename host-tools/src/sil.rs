//! Software in the loop: the simulated bench rig driven through the same
//! core code the controller runs, producing the controller's wire stream.
//!
//! Data flow (DESIGN.md §2, with the rig standing in for the sensors):
//!
//! ```text
//! Rig::sample(t_ms) --> Monitor<64, f32>::push --> AlarmSet::update --> Frame::Event
//!                       every summary period   --> Summary::from_monitor --> Frame::Summary
//! start, then every HELLO_EVERY summaries      --> Hello::from_config    --> Frame::Hello
//! frames --> wire::encode --> bytes (file, stdout, TCP)
//! ```
//!
//! The monitor is `Monitor<64, f32>` and the alarms an [`AlarmSet`]: the
//! controller's types in the controller's precision, so a simulated capture
//! is what a real controller would send. Time is the sample index times the
//! sample period; nothing here reads a clock, so the same options and seed
//! give the same bytes. Pacing to real time is the caller's business.
use heatbound::alarm::{AlarmSet, Event};
use heatbound::config::RigConfig;
use heatbound::monitor::{Monitor, MonitorError};
use heatbound::wire::{self, EventFrame, Frame, Hello, RigId, Summary};
use heatbound_firmware_example::rig::{Rig, Scenario};

/// The rig identifier the simulation announces in its Hello.
pub const RIG_ID: &str = "bench-sim";

/// The firmware version the simulation announces in its Hello.
pub const FIRMWARE_VERSION: (u8, u8, u8) = (0, 1, 0);

/// Window capacity of the simulated controller's monitor, samples.
pub const WINDOW_CAPACITY: usize = 64;

/// A Hello is repeated after this many summaries, so a host that joins
/// mid-stream learns the settings within a minute (at 1 s summaries).
pub const HELLO_EVERY: u32 = 60;

/// What a simulation runs.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SimOptions {
    /// The rig's scenario.
    pub scenario: Scenario,
    /// The rig's noise seed.
    pub seed: u64,
    /// Sample rate, Hz (0 < rate ≤ 1000).
    pub rate_hz: f64,
    /// Simulated duration, seconds of sample time (≥ 0).
    pub duration_s: f64,
    /// Seconds of sample time between summaries (≥ one sample period).
    pub summary_period_s: f64,
}

impl Default for SimOptions {
    fn default() -> Self {
        Self {
            scenario: Scenario::Steady,
            seed: 1,
            rate_hz: 10.0,
            duration_s: 600.0,
            summary_period_s: 1.0,
        }
    }
}

/// Why a simulation cannot start.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SimError {
    /// The sample rate is not in (0, 1000] Hz.
    #[error("the sample rate must be finite, above 0 and at most 1000 Hz (got {0})")]
    Rate(f64),
    /// The duration is negative, not finite or too long for the u32 ms clock.
    #[error("the duration must be finite, at least 0 s and under 49 days (got {0})")]
    Duration(f64),
    /// The summary period is shorter than a sample or not finite.
    #[error("the summary period must be finite and at least one sample period (got {0} s)")]
    SummaryPeriod(f64),
    /// The configuration does not suit the controller's monitor.
    #[error("the configuration does not fit the simulated controller: {0}")]
    Monitor(#[from] MonitorError),
    /// A frame could not be encoded (a core invariant broke).
    #[error("cannot encode a frame: {0}")]
    Encode(#[from] wire::WireError),
}

/// Counters of a run so far.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct SimStats {
    /// Samples pushed.
    pub samples: u64,
    /// Samples the monitor rejected as invalid.
    pub invalid_samples: u64,
    /// Hello frames emitted.
    pub hellos: u64,
    /// Summary frames emitted.
    pub summaries: u64,
    /// Event frames emitted.
    pub events: u64,
    /// Every alarm event, in order.
    pub alarm_events: Vec<Event>,
}

impl SimStats {
    /// Frames of every kind.
    pub fn frames(&self) -> u64 {
        self.hellos + self.summaries + self.events
    }
}

/// The simulated controller: a rig, its monitor and its alarms.
///
/// ```ignore
/// let mut sim = Simulation::new(&SimOptions::default(), &config)?;
/// let mut frames = Vec::new();
/// while let Some(t_ms) = sim.next_tick(&mut frames) { /* send frames */ frames.clear(); }
/// ```
pub struct Simulation {
    rig: Rig,
    monitor: Monitor<WINDOW_CAPACITY, f32>,
    alarms: AlarmSet,
    hello: Hello,
    dt_s: f32,
    sample_period_ms: f64,
    summary_period_ms: u32,
    samples_total: u64,
    index: u64,
    next_summary_ms: u32,
    seq: u16,
    last_seq_sent: u16,
    summaries_since_hello: u32,
    stats: SimStats,
}

impl Simulation {
    /// A simulation of `options` on a controller configured with `config`.
    pub fn new(options: &SimOptions, config: &RigConfig) -> Result<Self, SimError> {
        let rate = options.rate_hz;
        if !(rate.is_finite() && rate > 0.0 && rate <= 1000.0) {
            return Err(SimError::Rate(rate));
        }
        let d = options.duration_s;
        if !(d.is_finite() && d >= 0.0 && d * 1000.0 < f64::from(u32::MAX)) {
            return Err(SimError::Duration(d));
        }
        let sample_period_ms = 1000.0 / rate;
        let p = options.summary_period_s;
        if !(p.is_finite() && p * 1000.0 >= sample_period_ms - 1e-9 && p * 1000.0 < 1e9) {
            return Err(SimError::SummaryPeriod(p));
        }
        let monitor = Monitor::new(config)?;
        // A fixed, valid identifier: cannot fail.
        let rig_id = RigId::new(RIG_ID).unwrap_or_default();
        let period_ms = sample_period_ms.round().max(1.0) as u32;
        let summary_period_ms = (p * 1000.0).round() as u32;
        Ok(Self {
            rig: Rig::bench_stirling(options.scenario, options.seed),
            monitor,
            alarms: AlarmSet::new(config),
            hello: Hello::from_config(rig_id, FIRMWARE_VERSION, period_ms, config),
            dt_s: (1.0 / rate) as f32,
            sample_period_ms,
            summary_period_ms,
            samples_total: (d * rate).floor() as u64 + 1,
            index: 0,
            next_summary_ms: summary_period_ms,
            seq: 0,
            last_seq_sent: 0,
            summaries_since_hello: 0,
            stats: SimStats::default(),
        })
    }

    /// Runs one sample: appends to `frames` the frames it produces (a Hello
    /// first at the start, then any alarm events, then a summary when one
    /// is due) and returns the sample time, or `None` once the duration is
    /// done.
    pub fn next_tick(&mut self, frames: &mut Vec<Frame>) -> Option<u32> {
        if self.index >= self.samples_total {
            return None;
        }
        if self.index == 0 {
            frames.push(Frame::Hello(self.hello));
            self.stats.hellos += 1;
        }
        let t_ms = (self.index as f64 * self.sample_period_ms).round() as u32;
        // Sample the state at t, then advance: the reading at t = 0 is the
        // initial state, as in the rig's own scenario tests.
        let sample = self.rig.sample(t_ms);
        self.monitor.push(&sample);
        for event in self.alarms.update(t_ms, &self.monitor.alarm_inputs()) {
            frames.push(Frame::Event(EventFrame {
                seq: self.last_seq_sent,
                event,
            }));
            self.stats.events += 1;
            self.stats.alarm_events.push(event);
        }
        if t_ms >= self.next_summary_ms {
            if self.summaries_since_hello >= HELLO_EVERY {
                frames.push(Frame::Hello(self.hello));
                self.stats.hellos += 1;
                self.summaries_since_hello = 0;
            }
            let summary = Summary::from_monitor(self.seq, t_ms, &self.monitor, &self.alarms);
            frames.push(Frame::Summary(summary));
            self.stats.summaries += 1;
            self.summaries_since_hello += 1;
            self.last_seq_sent = self.seq;
            self.seq = self.seq.wrapping_add(1);
            self.next_summary_ms = self.next_summary_ms.saturating_add(self.summary_period_ms);
        }
        self.rig.step(self.dt_s);
        self.index += 1;
        self.stats.samples = self.index;
        self.stats.invalid_samples = self.monitor.invalid_samples();
        Some(t_ms)
    }

    /// The Hello this controller sends.
    pub fn hello(&self) -> &Hello {
        &self.hello
    }

    /// Counters so far.
    pub fn stats(&self) -> &SimStats {
        &self.stats
    }
}

/// Appends the wire encoding of `frame` to `out`.
pub fn encode_into(frame: &Frame, out: &mut Vec<u8>) -> Result<usize, SimError> {
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    let n = wire::encode(frame, &mut buf)?;
    out.extend_from_slice(&buf[..n]);
    Ok(n)
}

/// The configuration a simulation uses when none is given: the defaults,
/// with T0 set to the rig's room temperature.
///
/// The rig measures heat out (coolant calorimetry), so the energy-balance
/// residual is heat lost to the room and is charged to the entropy account
/// at T0. The default T0, the cold-side mean, is the wrong temperature for
/// that loss and is undefined once the measured heat out collapses
/// (`coolant-loss`), where it would raise a spurious second-law alarm; the
/// room temperature is what a bench engineer would configure.
pub fn default_config(rig: &Rig) -> RigConfig {
    RigConfig {
        ambient_k: Some(decimal_f64(rig.params().ambient_k)),
        ..RigConfig::default()
    }
}

/// `x` as the f64 of its shortest decimal form (293.15_f32 becomes 293.15,
/// not 293.149993896484375): the value a person would have written in
/// `rig.toml`, so configurations built from f32 settings digest alike.
pub fn decimal_f64(x: f32) -> f64 {
    x.to_string().parse().unwrap_or(f64::from(x))
}
