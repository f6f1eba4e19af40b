//! The controller: one monitor, its alarms and both directions of the link,
//! as every controller runs them (a board, the emulator, the simulation).
//!
//! ```text
//! Sample --> Controller::step --> Monitor::push --> AlarmSet::update --> Event frames
//!                                  every summary period --> Summary, then a pending
//!                                  new run or configuration is applied --> Reply, Hello
//! UART RX bytes --> Controller::receive --> CommandReceiver (bounded)
//!                   --> authentic? fresh counter? --> acknowledge now / new run or
//!                       configuration at the next window boundary --> Reply
//! ```
//!
//! Where it sits: downstream of [`wire`](crate::wire), and the last stop in
//! core. It reads no clock and touches no device: the caller passes the
//! sample time and hands every outgoing frame to a callback, which encodes
//! it onto its UART or into a buffer.
//!
//! ## Commands
//! - Every command with a good CRC gets a [`Reply`]; line noise (a bad CRC,
//!   an overlong frame) gets none and is only counted.
//! - A Hello request changes nothing and is always answered.
//! - Every other command needs a key, a tag that verifies for this rig and
//!   this session, and a counter above the last one accepted. Anything else
//!   changes no state at all.
//! - An acknowledge acts at once. A new run or a configuration waits for
//!   the next window boundary (the next Summary), so no window mixes two
//!   settings; its Reply comes when it is applied, followed by a Hello with
//!   the new run counter and digest. A second one while one waits is `busy`.
//! - A new configuration keeps every alarm's state (a trip stays a trip
//!   until its condition clears under the new limits) and starts a new run.

use crate::alarm::{AlarmSet, EventKind, Events};
use crate::config::RigConfig;
use crate::diagnosis::Tracker;
use crate::monitor::{Monitor, MonitorError, Pushed, Sample};
use crate::wire::{
    Addressee, Authenticator, Command, CommandKey, CommandReceiver, EventFrame, Frame, FrameError,
    Hello, MAX_COMMAND_LEN, ReceiverStats, Reply, ReplyCode, RigId, Summary, Verdict,
};

/// Who the controller is and how often it reports.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ControllerSettings {
    /// The rig's identifier, sent in the Hello.
    pub rig_id: RigId,
    /// Firmware version (major, minor, patch), sent in the Hello.
    pub firmware_version: (u8, u8, u8),
    /// Nominal sample period, ms (sent in the Hello; the caller keeps it).
    pub sample_period_ms: u32,
    /// Summary period in sample time, ms (at least 1).
    pub summary_period_ms: u32,
    /// Hello repetition period in sample time, ms; 0 = only at start and
    /// when something in it changes.
    pub hello_period_ms: u32,
}

/// What one [`Controller::step`] did.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Step {
    /// What the monitor did with the sample.
    pub pushed: Pushed,
    /// Alarm events the sample raised (each sent as an Event frame).
    pub events: usize,
    /// Whether a Summary was sent.
    pub summary_sent: bool,
    /// Whether the trip output should be high after the step.
    pub trip: bool,
}

/// Replies sent, by outcome.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ControlStats {
    /// Replies sent, indexed like [`ReplyCode::ALL`].
    pub replies: [u32; ReplyCode::ALL.len()],
}

impl ControlStats {
    /// Replies with `code`.
    pub fn count(&self, code: ReplyCode) -> u32 {
        ReplyCode::ALL
            .iter()
            .position(|c| *c == code)
            .and_then(|i| self.replies.get(i).copied())
            .unwrap_or(0)
    }

    fn add(&mut self, code: ReplyCode) {
        if let Some(n) = ReplyCode::ALL
            .iter()
            .position(|c| *c == code)
            .and_then(|i| self.replies.get_mut(i))
        {
            *n = n.saturating_add(1);
        }
    }
}

/// What waits for the window boundary.
// No heap in core: a configuration waits by value, and there is only one.
#[allow(clippy::large_enum_variant)]
#[derive(Clone, Copy, Debug)]
enum Pending {
    NewRun { counter: u32 },
    Configure { counter: u32, config: RigConfig },
}

/// An accepted or refused command, once the receiver has let go of it.
#[allow(clippy::large_enum_variant)] // short-lived, on the stack
enum Incoming {
    Accepted { counter: u32, command: Command },
    Refused { counter: u32, code: ReplyCode },
}

/// The controller: monitor, alarms, the frames it streams and the commands
/// it answers. `N` is the monitor's window capacity (the firmware uses 64).
///
/// ```
/// use heatbound::alarm::{EventKind, RuleId};
/// use heatbound::config::RigConfig;
/// use heatbound::control::{Controller, ControllerSettings};
/// use heatbound::monitor::Sample;
/// use heatbound::wire::{self, Addressee, Authenticator, Command, CommandFrame, CommandKey,
///                       Frame, ReplyCode, RigId};
///
/// let settings = ControllerSettings { rig_id: RigId::new("doc").unwrap(),
///     firmware_version: (0, 1, 0), sample_period_ms: 1000, summary_period_ms: 1000,
///     hello_period_ms: 0 };
/// let key = CommandKey::DEMO;
/// let mut c = Controller::<64>::new(&settings, &RigConfig::default(), Some(&key), 42)?;
/// let mut frames = Vec::new();
/// c.start(0, &mut |f: &Frame| frames.push(f.clone()));
/// // 60 % against a 50 % Carnot bound: beyond_carnot raises and trips.
/// for i in 1..=20u32 {
///     let s = Sample { t_ms: i * 1000, t_hot_k: 600.0, t_cold_k: 300.0,
///                      heat_in_w: 500.0, work_w: 300.0, heat_out_w: None, t_hot2_k: None };
///     c.step(&s, &mut |f: &Frame| frames.push(f.clone()));
/// }
/// assert!(c.alarms().is_active(RuleId::BeyondCarnot));
///
/// // The host acknowledges it, sealed with the key for this rig and session.
/// let to = Addressee { rig_id: settings.rig_id, session: 42 };
/// let ack = CommandFrame { counter: 1, command: Command::Acknowledge(None) };
/// let mut buf = [0; wire::MAX_COMMAND_LEN];
/// let n = wire::encode_command(&ack, Some(&Authenticator::new(&key)), &to, &mut buf).unwrap();
/// frames.clear();
/// c.receive(&buf[..n], 20_000, &mut |f: &Frame| frames.push(f.clone()));
/// assert!(frames.iter().any(|f| matches!(f, Frame::Event(e) if e.event.kind == EventKind::Acknowledged)));
/// assert!(frames.iter().any(|f| matches!(f, Frame::Reply(r) if r.code == ReplyCode::Applied)));
///
/// // The same bytes again are a replay: refused, nothing changes.
/// frames.clear();
/// c.receive(&buf[..n], 20_000, &mut |f: &Frame| frames.push(f.clone()));
/// assert!(matches!(frames[..], [Frame::Reply(r)] if r.code == ReplyCode::Replayed));
/// # Ok::<(), heatbound::monitor::MonitorError>(())
/// ```
pub struct Controller<const N: usize> {
    monitor: Monitor<N>,
    alarms: AlarmSet,
    tracker: Tracker<f32>,
    config: RigConfig,
    hello: Hello,
    auth: Option<Authenticator>,
    receiver: CommandReceiver<MAX_COMMAND_LEN>,
    pending: Option<Pending>,
    summary_period_ms: u32,
    hello_period_ms: u32,
    started: bool,
    last_seq: Option<u16>,
    summary_from_ms: Option<u32>,
    hello_from_ms: u32,
    stats: ControlStats,
}

impl<const N: usize> Controller<N> {
    /// A controller running `config`, answering commands sealed with `key`
    /// (none: it accepts only Hello requests), in boot session `session`
    /// (draw it from a random source at every start-up where there is one).
    /// Fails only if the monitor cannot run `config`.
    pub fn new(
        settings: &ControllerSettings,
        config: &RigConfig,
        key: Option<&CommandKey>,
        session: u32,
    ) -> Result<Self, MonitorError> {
        let mut hello = Hello::from_config(
            settings.rig_id,
            settings.firmware_version,
            settings.sample_period_ms,
            config,
        );
        hello.session = session;
        hello.keyed = key.is_some();
        Ok(Controller {
            monitor: Monitor::new(config)?,
            alarms: AlarmSet::new(config),
            tracker: Tracker::new(config),
            config: *config,
            hello,
            auth: key.map(Authenticator::new),
            receiver: CommandReceiver::new(),
            pending: None,
            summary_period_ms: settings.summary_period_ms.max(1),
            hello_period_ms: settings.hello_period_ms,
            started: false,
            last_seq: None,
            summary_from_ms: None,
            hello_from_ms: 0,
            stats: ControlStats::default(),
        })
    }

    /// Boot at `t_ms`: the summary period starts and a Hello goes out.
    pub fn start(&mut self, t_ms: u32, out: &mut impl FnMut(&Frame)) {
        self.started = true;
        self.summary_from_ms = Some(t_ms);
        self.send_hello(t_ms, out);
    }

    /// One sample: push, update the alarms, send their events now, a
    /// Hello when due and a Summary when the summary period has passed;
    /// after a Summary, apply a waiting new run or configuration.
    pub fn step(&mut self, sample: &Sample, out: &mut impl FnMut(&Frame)) -> Step {
        let t_ms = sample.t_ms;
        if !self.started {
            self.start(t_ms, out);
        }
        let pushed = self.monitor.push(sample);
        let events = self.alarms.update(t_ms, &self.monitor.alarm_inputs());
        self.send_events(&events, t_ms, out);

        if self.hello_period_ms > 0 && t_ms.wrapping_sub(self.hello_from_ms) >= self.hello_period_ms
        {
            self.send_hello(t_ms, out);
        }
        let summary_sent = match self.summary_from_ms {
            None => {
                self.summary_from_ms = Some(t_ms);
                false
            }
            Some(from) if t_ms.wrapping_sub(from) >= self.summary_period_ms => {
                self.summary_from_ms = Some(t_ms);
                self.send_summary(t_ms, out);
                self.apply_pending(t_ms, out);
                true
            }
            Some(_) => false,
        };
        Step {
            pushed,
            events: events.len(),
            summary_sent,
            trip: self.alarms.trip_active(),
        }
    }

    /// Bytes from the link at sample time `t_ms`: every command they
    /// complete is checked and answered. Costs O(1) per byte, whatever
    /// arrives.
    // Kept out of line: inlined at each call site, the command path (MAC,
    // configuration check) would be copied into every caller's image.
    #[inline(never)]
    pub fn receive(&mut self, bytes: &[u8], t_ms: u32, out: &mut impl FnMut(&Frame)) {
        let to = Addressee {
            rig_id: self.hello.rig_id,
            session: self.hello.session,
        };
        for &b in bytes {
            let Some(result) = self.receiver.push_byte(b) else {
                continue;
            };
            let incoming = match result {
                // Line noise: nothing can be trusted, not even the counter.
                Err(FrameError::Crc | FrameError::Overlong) => continue,
                Err(_) => Incoming::Refused {
                    counter: 0,
                    code: ReplyCode::Malformed,
                },
                Ok(rx) => {
                    let (counter, command) = (rx.frame.counter, rx.frame.command);
                    match (&command, self.auth.as_ref()) {
                        (Command::HelloRequest, _) => Incoming::Accepted { counter, command },
                        (_, None) => Incoming::Refused {
                            counter,
                            code: ReplyCode::NoKey,
                        },
                        (_, Some(auth)) if !rx.authentic(auth, &to) => Incoming::Refused {
                            counter,
                            code: ReplyCode::FailedAuthentication,
                        },
                        _ if counter <= self.hello.last_counter => Incoming::Refused {
                            counter,
                            code: ReplyCode::Replayed,
                        },
                        _ => Incoming::Accepted { counter, command },
                    }
                }
            };
            match incoming {
                Incoming::Refused { counter, code } => self.reply(counter, t_ms, code, out),
                Incoming::Accepted { counter, command } => {
                    self.execute(counter, command, t_ms, out)
                }
            }
        }
    }

    /// The operator acknowledges every active alarm at `t_ms` (a button on
    /// the controller): the events go out at once. Returns their number.
    pub fn acknowledge_all(&mut self, t_ms: u32, out: &mut impl FnMut(&Frame)) -> usize {
        let events = self.alarms.acknowledge_all(t_ms);
        self.send_events(&events, t_ms, out);
        events.len()
    }

    /// The monitor.
    pub fn monitor(&self) -> &Monitor<N> {
        &self.monitor
    }

    /// The alarms.
    pub fn alarms(&self) -> &AlarmSet {
        &self.alarms
    }

    /// The configuration in use.
    pub fn config(&self) -> &RigConfig {
        &self.config
    }

    /// The Hello as it would go out now.
    pub fn hello(&self) -> &Hello {
        &self.hello
    }

    /// Whether the trip output should be high.
    pub fn trip_active(&self) -> bool {
        self.alarms.trip_active()
    }

    /// The command receiver's counters.
    pub fn receiver_stats(&self) -> &ReceiverStats {
        self.receiver.stats()
    }

    /// Replies sent, by outcome.
    pub fn stats(&self) -> &ControlStats {
        &self.stats
    }

    /// The `seq` of the latest Summary sent.
    pub fn last_seq(&self) -> Option<u16> {
        self.last_seq
    }

    fn execute(&mut self, counter: u32, command: Command, t_ms: u32, out: &mut impl FnMut(&Frame)) {
        if !matches!(command, Command::HelloRequest) {
            self.hello.last_counter = counter;
        }
        let code = match command {
            Command::HelloRequest => {
                self.send_hello(t_ms, out);
                ReplyCode::Applied
            }
            Command::Acknowledge(rule) => {
                let events = match rule {
                    Some(rule) => self.alarms.acknowledge(rule, t_ms),
                    None => self.alarms.acknowledge_all(t_ms),
                };
                self.send_events(&events, t_ms, out);
                ReplyCode::Applied
            }
            _ if self.pending.is_some() => ReplyCode::Busy,
            Command::NewRun => {
                self.pending = Some(Pending::NewRun { counter });
                return;
            }
            Command::Configure(config) => {
                if config.check().is_err() || Monitor::<N>::fits(&config).is_err() {
                    ReplyCode::InvalidConfiguration
                } else {
                    self.pending = Some(Pending::Configure { counter, config });
                    return;
                }
            }
        };
        self.reply(counter, t_ms, code, out);
    }

    /// At a window boundary: a waiting new run or configuration takes effect.
    fn apply_pending(&mut self, t_ms: u32, out: &mut impl FnMut(&Frame)) {
        let Some(pending) = self.pending.take() else {
            return;
        };
        let (counter, config) = match pending {
            Pending::NewRun { counter } => (counter, self.config),
            Pending::Configure { counter, config } => (counter, config),
        };
        let monitor = match Monitor::new(&config) {
            Ok(m) => m,
            Err(_) => {
                self.reply(counter, t_ms, ReplyCode::InvalidConfiguration, out);
                return;
            }
        };
        self.monitor = monitor;
        // A new run learns its UA afresh.
        self.tracker = Tracker::new(&config);
        if config != self.config {
            let events = self.alarms.reconfigure(&config, t_ms);
            self.send_events(&events, t_ms, out);
            self.config = config;
            let Hello {
                rig_id,
                firmware_version,
                sample_period_ms,
                run,
                session,
                last_counter,
                keyed,
                ..
            } = self.hello;
            self.hello = Hello {
                run,
                session,
                last_counter,
                keyed,
                ..Hello::from_config(rig_id, firmware_version, sample_period_ms, &config)
            };
        }
        self.hello.run = self.hello.run.wrapping_add(1);
        self.reply(counter, t_ms, ReplyCode::Applied, out);
        self.send_hello(t_ms, out);
    }

    fn reply(&mut self, counter: u32, t_ms: u32, code: ReplyCode, out: &mut impl FnMut(&Frame)) {
        self.stats.add(code);
        out(&Frame::Reply(Reply {
            counter,
            t_ms,
            code,
        }));
    }

    /// Each event as a frame; a second-law or energy-balance raise carries
    /// the diagnosis of the window at that moment.
    fn send_events(&mut self, events: &Events, t_ms: u32, out: &mut impl FnMut(&Frame)) {
        for event in events {
            let verdict = if event.kind == EventKind::Raised && event.rule.is_consistency() {
                Verdict::of(&self.tracker.judge(&self.monitor, t_ms))
            } else {
                Verdict::default()
            };
            out(&Frame::Event(EventFrame {
                seq: self.last_seq.unwrap_or(0),
                event,
                verdict,
            }));
        }
    }

    fn send_summary(&mut self, t_ms: u32, out: &mut impl FnMut(&Frame)) {
        let seq = self.last_seq.map_or(0, |s| s.wrapping_add(1));
        self.last_seq = Some(seq);
        // UA is learned from a Summary's window, so that the host can learn
        // it from the same Summary.
        self.tracker.observe(&self.monitor, t_ms);
        let verdict = Verdict::of(&self.tracker.judge(&self.monitor, t_ms));
        let s = Summary::from_monitor(seq, t_ms, &self.monitor, &self.alarms, verdict);
        out(&Frame::Summary(s));
    }

    fn send_hello(&mut self, t_ms: u32, out: &mut impl FnMut(&Frame)) {
        self.hello_from_ms = t_ms;
        out(&Frame::Hello(self.hello));
    }
}
