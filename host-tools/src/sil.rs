//! Software in the loop: the simulated bench rig driven through the same
//! controller the firmware runs, producing the controller's wire stream and
//! answering its commands.
//!
//! Data flow (DESIGN.md §2, with the rig standing in for the sensors):
//!
//! ```text
//! Rig::sample(t_ms) --> control::Controller<64> (Monitor<64, f32> + AlarmSet + diagnosis + link) --> frames
//! commands (bytes from the host) --> Controller::receive --> Reply, Event and Hello frames
//! frames --> wire::encode --> bytes (file, stdout, TCP)
//! ```
//!
//! The controller is [`heatbound::control::Controller`], the firmware's own
//! in the controller's precision, so a simulated capture is what a real
//! controller would send, and a command is answered as a real controller
//! would answer it. Time is the sample index times the sample period;
//! nothing here reads a clock, so the same options and seed give the same
//! bytes. Pacing to real time is the caller's business.
//!
//! Each Summary carries the controller's verdict on its window (consistent,
//! or which single channel's bias explains the inconsistency). With a second
//! hot thermocouple ([`SimOptions::hot2`], or the `hot2-drift` scenario) the
//! hot pair is checked too; the first law needs UA, from `[losses]` in the
//! configuration or learned from a steady window.
//!
//! The simulation is not a real controller: with no key given it answers
//! commands sealed with the public [`CommandKey::DEMO`], and it has no
//! random source, so its session number comes from the seed.
use heatbound::alarm::Event;
use heatbound::config::RigConfig;
use heatbound::control::{Controller, ControllerSettings};
use heatbound::monitor::MonitorError;
use heatbound::wire::{self, CommandKey, Frame, Hello, RigId, Verdict};
use heatbound_firmware_example::rig::{ParamsError, Rig, RigParams, Scenario};
use std::io::Write as _;
use std::net::TcpStream;
use std::time::{Duration, Instant};

use crate::fanout::Inbox;

/// The rig identifier the simulation announces in its Hello.
pub const RIG_ID: &str = "bench-sim";

/// The firmware version the simulation announces in its Hello.
pub const FIRMWARE_VERSION: (u8, u8, u8) = (0, 1, 0);

/// Window capacity of the simulated controller's monitor, samples.
pub const WINDOW_CAPACITY: usize = 64;

/// A Hello is repeated after this many summary periods, so a host that
/// joins mid-stream learns the settings within a minute (at 1 s summaries).
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
    /// The rig's identifier in its Hello.
    pub rig_id: RigId,
    /// Rig time at which the scenario's fault is put right ([`Rig::repair`]),
    /// if it is.
    pub repair_at_s: Option<f64>,
    /// Whether the rig's head carries a second thermocouple, sent as
    /// `t_hot2_k` ([`RigParams::hot2`]); `hot2-drift` fits one regardless.
    pub hot2: bool,
}

impl Default for SimOptions {
    fn default() -> Self {
        Self {
            scenario: Scenario::Steady,
            seed: 1,
            rate_hz: 10.0,
            duration_s: 600.0,
            summary_period_s: 1.0,
            // A fixed, valid identifier: cannot fail.
            rig_id: RigId::new(RIG_ID).unwrap_or_default(),
            repair_at_s: None,
            hot2: false,
        }
    }
}

impl SimOptions {
    /// The rig these options simulate: the bench defaults
    /// ([`RigParams::bench_stirling`]), with a second hot thermocouple if
    /// asked for.
    ///
    /// ```
    /// use heatbound_firmware_example::rig::Scenario;
    /// use heatbound_host::sil::SimOptions;
    /// let rig = SimOptions { hot2: true, ..SimOptions::default() }.rig()?;
    /// assert!(rig.sample(0).t_hot2_k.is_some());
    /// let rig = SimOptions { scenario: Scenario::Hot2Drift, ..SimOptions::default() }.rig()?;
    /// assert!(rig.has_hot2());
    /// # Ok::<(), heatbound_firmware_example::rig::ParamsError>(())
    /// ```
    pub fn rig(&self) -> Result<Rig, ParamsError> {
        let params = RigParams {
            hot2: self.hot2,
            ..RigParams::bench_stirling()
        };
        Rig::new(params, self.scenario, self.seed)
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
    /// The rig's parameters are out of range.
    #[error("the simulated rig cannot be built: {0}")]
    Rig(#[from] ParamsError),
    /// A frame could not be encoded (a core invariant broke).
    #[error("cannot encode a frame: {0}")]
    Encode(#[from] wire::WireError),
    /// The host's end of the link went away.
    #[error("the host closed the link: {}", crate::term::os_words(.0))]
    Link(std::io::Error),
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
    /// Reply frames emitted (answers to commands).
    pub replies: u64,
    /// Every alarm event, in order.
    pub alarm_events: Vec<Event>,
    /// Each change of the trip output: sample time, ms, and the new level.
    pub trip_changes: Vec<(u32, bool)>,
    /// When the fault was put right, ms of rig time.
    pub repaired_at_ms: Option<u32>,
    /// The verdict of the latest Summary, if one was sent.
    pub last_verdict: Option<Verdict>,
    /// Sample time of the first Summary whose verdict was "inconsistent", ms.
    pub first_inconsistent_ms: Option<u32>,
}

impl SimStats {
    /// Frames of every kind.
    pub fn frames(&self) -> u64 {
        self.hellos + self.summaries + self.events + self.replies
    }

    fn count(&mut self, frame: &Frame) {
        match frame {
            Frame::Hello(_) => self.hellos += 1,
            Frame::Summary(s) => {
                self.summaries += 1;
                self.last_verdict = Some(s.verdict);
                if s.verdict.consistent == Some(false) && self.first_inconsistent_ms.is_none() {
                    self.first_inconsistent_ms = Some(s.t_ms);
                }
            }
            Frame::Event(e) => {
                self.events += 1;
                self.alarm_events.push(e.event);
            }
            Frame::Reply(_) => self.replies += 1,
        }
    }
}

/// The simulated controller: a rig and the firmware's controller.
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound_host::sil::{SimOptions, Simulation};
/// let options = SimOptions { duration_s: 5.0, ..SimOptions::default() };
/// let mut sim = Simulation::new(&options, &RigConfig::default())?;
/// let mut frames = Vec::new();
/// while let Some(_t_ms) = sim.next_tick(&mut frames) {}
/// assert_eq!(sim.stats().summaries, 5);
/// assert!(sim.hello().keyed); // the public demo key
/// # Ok::<(), heatbound_host::sil::SimError>(())
/// ```
pub struct Simulation {
    rig: Rig,
    controller: Controller<WINDOW_CAPACITY>,
    dt_s: f32,
    sample_period_ms: f64,
    samples_total: u64,
    index: u64,
    t_ms: u32,
    repair_at_ms: Option<u32>,
    trip: bool,
    stats: SimStats,
}

impl Simulation {
    /// A simulation of `options` on a controller configured with `config`,
    /// answering commands sealed with the public demo key.
    pub fn new(options: &SimOptions, config: &RigConfig) -> Result<Self, SimError> {
        Simulation::with_key(options, config, Some(&CommandKey::DEMO))
    }

    /// The same with the command key `key` (`None`: the controller accepts
    /// no command but a Hello request).
    pub fn with_key(
        options: &SimOptions,
        config: &RigConfig,
        key: Option<&CommandKey>,
    ) -> Result<Self, SimError> {
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
        let period_ms = sample_period_ms.round().max(1.0) as u32;
        let summary_period_ms = (p * 1000.0).round() as u32;
        let settings = ControllerSettings {
            rig_id: options.rig_id,
            firmware_version: FIRMWARE_VERSION,
            sample_period_ms: period_ms,
            summary_period_ms,
            hello_period_ms: summary_period_ms.saturating_mul(HELLO_EVERY),
        };
        Ok(Self {
            rig: options.rig()?,
            controller: Controller::new(&settings, config, key, session(options.seed))?,
            dt_s: (1.0 / rate) as f32,
            sample_period_ms,
            samples_total: (d * rate).floor() as u64 + 1,
            index: 0,
            t_ms: 0,
            repair_at_ms: options
                .repair_at_s
                .filter(|s| s.is_finite() && *s >= 0.0)
                .map(|s| (s * 1000.0).min(f64::from(u32::MAX)) as u32),
            trip: false,
            stats: SimStats::default(),
        })
    }

    /// Runs one sample: appends to `frames` the frames it produces (a Hello
    /// first at the start, then any alarm events, then a Hello and a summary
    /// when due) and returns the sample time, or `None` once the duration is
    /// done.
    pub fn next_tick(&mut self, frames: &mut Vec<Frame>) -> Option<u32> {
        if self.index >= self.samples_total {
            return None;
        }
        let t_ms = (self.index as f64 * self.sample_period_ms).round() as u32;
        if self.repair_at_ms.is_some_and(|r| t_ms >= r) && self.stats.repaired_at_ms.is_none() {
            self.rig.repair();
            self.stats.repaired_at_ms = Some(t_ms);
        }
        let stats = &mut self.stats;
        let mut out = |f: &Frame| {
            stats.count(f);
            frames.push(f.clone());
        };
        if self.index == 0 {
            self.controller.start(0, &mut out);
        }
        // Sample the state at t, then advance: the reading at t = 0 is the
        // initial state, as in the rig's own scenario tests.
        let sample = self.rig.sample(t_ms);
        let step = self.controller.step(&sample, &mut out);
        if step.trip != self.trip {
            self.trip = step.trip;
            stats.trip_changes.push((t_ms, step.trip));
        }
        self.rig.step(self.dt_s);
        self.t_ms = t_ms;
        self.index += 1;
        self.stats.samples = self.index;
        self.stats.invalid_samples = self.controller.monitor().invalid_samples();
        Some(t_ms)
    }

    /// Bytes from the host at the latest sample time: each command they
    /// complete is answered, and its frames (a Reply, events, a Hello) are
    /// appended to `frames`.
    pub fn receive(&mut self, bytes: &[u8], frames: &mut Vec<Frame>) {
        let stats = &mut self.stats;
        self.controller.receive(bytes, self.t_ms, &mut |f: &Frame| {
            stats.count(f);
            frames.push(f.clone());
        });
        let trip = self.controller.trip_active();
        if trip != self.trip {
            self.trip = trip;
            self.stats.trip_changes.push((self.t_ms, trip));
        }
    }

    /// The Hello this controller sends now.
    pub fn hello(&self) -> &Hello {
        self.controller.hello()
    }

    /// The simulated rig, with its truth.
    pub fn rig(&self) -> &Rig {
        &self.rig
    }

    /// The controller: monitor, alarms, trip output, link state.
    pub fn controller(&self) -> &Controller<WINDOW_CAPACITY> {
        &self.controller
    }

    /// Counters so far.
    pub fn stats(&self) -> &SimStats {
        &self.stats
    }
}

/// The simulation's session number: it has no random source, so the
/// session comes from the seed (the same seed gives the same bytes).
fn session(seed: u64) -> u32 {
    (seed ^ (seed >> 32)) as u32 ^ 0x5EED_5EED
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

/// Plays the simulation into `stream` as a controller would over its
/// link, paced at `speed` (> 0) times real time, answering the commands
/// that come back on it. Ends by closing the connection both ways, so the
/// host sees the end of the stream.
pub fn play(mut sim: Simulation, mut stream: TcpStream, speed: f64) -> Result<SimStats, SimError> {
    let (inbox, feed) = Inbox::new();
    feed.listen_to(stream.try_clone().map_err(SimError::Link)?);
    let start = Instant::now();
    let mut frames = Vec::new();
    let mut bytes = Vec::new();
    while let Some(t_ms) = sim.next_tick(&mut frames) {
        for command in inbox.take() {
            sim.receive(&command, &mut frames);
        }
        for frame in frames.drain(..) {
            encode_into(&frame, &mut bytes)?;
        }
        if bytes.is_empty() {
            continue;
        }
        let due = Duration::from_secs_f64(f64::from(t_ms) / 1000.0 / speed);
        if let Some(wait) = due.checked_sub(start.elapsed()) {
            std::thread::sleep(wait);
        }
        stream.write_all(&bytes).map_err(SimError::Link)?;
        bytes.clear();
    }
    stream.flush().map_err(SimError::Link)?;
    let _ = stream.shutdown(std::net::Shutdown::Both);
    Ok(sim.stats().clone())
}

/// The text after `heatbound simulate`'s options: each scenario with what
/// it does, then the configuration and where the output goes.
pub fn simulate_help() -> String {
    use std::fmt::Write as _;
    let mut out = String::from("Scenarios (faults begin at 120 s):\n");
    let width = Scenario::ALL
        .iter()
        .map(|s| s.name().len())
        .max()
        .unwrap_or(0);
    for s in Scenario::ALL {
        let _ = writeln!(out, "  {:<width$}  {}", s.name(), s.description());
    }
    // The rig's own loss coefficient, from its set-point truth.
    let ua = Rig::bench_stirling(Scenario::Steady, 1)
        .truth()
        .room_ua_w_per_k()
        .unwrap_or(f32::NAN);
    let _ = write!(
        out,
        "\nWithout --config the built-in defaults are used with ambient_k set to the rig's room \
temperature (293.15 K): the rig measures heat out, so its balance residual is heat lost \
to the room. With --config the file is used as written.\n\
Each summary carries the controller's verdict: whether the second law, the first law and \
(with --hot2) the two hot sensors agree, and which one channel's bias explains it when \
they do not. The first law needs UA: give [losses] in --config (this rig's UA is \
{ua:.3} W/K), or let the controller learn it from a steady window (this rig's calorimeter \
is steady only with [steady] heat_out_band_rel = 0.15).\n\
The stream goes to stdout unless --out, --listen or --connect is given; the run \
summary goes to stderr.",
    );
    out
}
