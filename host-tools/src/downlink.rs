//! The host's end of the downlink: what operators ask of the controller,
//! sealed with the rig's key, written on the link that `watch` (or `demo`)
//! holds, logged, and matched with the controller's replies.
//!
//! ```text
//! Request (control socket, the demo's operator) --> Downlink::submit
//!     --> wait for a Hello (rig id, session, last counter) --> seal --> link writer
//!     --> commands row (origin, host time, counter, sealed bytes)
//! link reader --> Ingest (Reply frames logged) --> Downlink::poll
//!     --> matched by counter --> commands row settled --> Answer to whoever asked
//! ```
//!
//! The counter of each command is one above the larger of the last one
//! this host sent and the last one the controller reports accepting (its
//! Hello), so a restarted `watch` picks up where the controller is. When a
//! link comes up, the controller is asked for a Hello at once (that request
//! needs no key), so commands can be sealed without waiting for the
//! periodic one.
use std::collections::VecDeque;
use std::io::Write;
use std::sync::mpsc::Sender;
use std::time::{Duration, Instant};

use heatbound::alarm::RuleId;
use heatbound::config::RigConfig;
use heatbound::wire::{
    self, Addressee, Authenticator, Command, CommandFrame, CommandKey, Hello, ReplyCode,
};

use crate::ingest::Ingest;
use crate::keyfile::KeyOrigin;
use crate::link::now_ms;
use crate::store::StoreError;

/// What an operator asks for.
#[derive(Clone, Debug, PartialEq)]
pub enum Ask {
    /// A Hello, now.
    Hello,
    /// Acknowledge one rule's alarm, or every alarm.
    Acknowledge(Option<RuleId>),
    /// Start a new run at the next window boundary.
    NewRun,
    /// Replace the configuration at the next window boundary.
    Configure(Box<RigConfig>),
    /// A command sealed elsewhere (by a holder of the key), sent as it is.
    Forward(Vec<u8>),
    /// A command sealed elsewhere that came through a broker: sent as it is
    /// only if its seal verifies under this holder's key for the
    /// controller's session; else refused, and the refusal logged.
    Relay(Vec<u8>),
    /// An operator's action that sends nothing (pausing the trends,
    /// changing the span, leaving): logged only.
    Note {
        /// What was done (`pause`, `span`, `quit`, ...).
        action: String,
        /// With what (`5 min`, ...).
        detail: String,
    },
}

impl Ask {
    fn name(&self) -> &'static str {
        match self {
            Ask::Hello => "hello",
            Ask::Acknowledge(_) => "ack",
            Ask::NewRun => "new_run",
            Ask::Configure(_) => "configure",
            Ask::Forward(_) => "forward",
            Ask::Relay(_) => "relay",
            Ask::Note { .. } => "note",
        }
    }
}

/// One request, and where its answer goes.
#[derive(Debug)]
pub struct Request {
    /// Who asks (`heatbound ack`, `demo`, the console), for the log.
    pub origin: String,
    /// What.
    pub ask: Ask,
    /// How long to wait for the controller's Reply (and for its Hello
    /// first, if none has arrived yet).
    pub timeout: Duration,
    /// Where the answer goes.
    pub answer: Sender<Answer>,
}

/// What became of a request.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Answer {
    /// The controller replied.
    Replied {
        /// The command's counter.
        counter: u32,
        /// Applied, or why not.
        code: ReplyCode,
        /// The controller's sample time of the reply, ms.
        t_ms: u32,
    },
    /// An action that sends nothing was logged.
    Noted,
    /// The request never reached the controller, or no reply came.
    Unavailable {
        /// Why, in a word: `no_link`, `no_hello`, `no_reply`, `invalid`, `busy`.
        reason: &'static str,
        /// Why, in a sentence.
        message: String,
    },
}

impl Answer {
    fn unavailable(reason: &'static str, message: impl Into<String>) -> Answer {
        Answer::Unavailable {
            reason,
            message: message.into(),
        }
    }
}

/// A command on its way, waiting for its Reply.
#[derive(Debug)]
struct Sent {
    counter: u32,
    log_id: i64,
    deadline: Instant,
    waited: Duration,
    answer: Sender<Answer>,
}

/// A request waiting for the controller's first Hello.
#[derive(Debug)]
struct Queued {
    request: Request,
    deadline: Instant,
}

/// The host's end of the downlink.
pub struct Downlink {
    auth: Authenticator,
    key_origin: KeyOrigin,
    next_counter: u32,
    queued: VecDeque<Queued>,
    sent: Vec<Sent>,
}

/// Most requests a link holder keeps waiting at once; beyond, `busy`.
const MAX_WAITING: usize = 64;

impl Downlink {
    /// A downlink that seals with `key`, which came from `origin`.
    pub fn new(key: &CommandKey, origin: KeyOrigin) -> Downlink {
        Downlink {
            auth: Authenticator::new(key),
            key_origin: origin,
            next_counter: 1,
            queued: VecDeque::new(),
            sent: Vec::new(),
        }
    }

    /// Where the key came from.
    pub fn key_origin(&self) -> &KeyOrigin {
        &self.key_origin
    }

    /// Requests waiting for a Hello or a Reply.
    pub fn waiting(&self) -> usize {
        self.queued.len() + self.sent.len()
    }

    /// A link came up: ask the controller who it is, so commands can be
    /// sealed for its session. The request is logged like any other.
    pub fn link_up(
        &mut self,
        ingest: &mut Ingest,
        writer: &mut dyn Write,
        now: Instant,
    ) -> Result<(), StoreError> {
        let (tx, _rx) = std::sync::mpsc::channel();
        let request = Request {
            origin: "link up".into(),
            ask: Ask::Hello,
            timeout: Duration::from_secs(5),
            answer: tx,
        };
        // No Hello is needed to ask for one: it goes unsealed, to no one in particular.
        let to = Addressee {
            rig_id: Default::default(),
            session: 0,
        };
        self.send(request, &to, ingest, Some(writer), now)
    }

    /// Takes a request: sends it now if the controller has introduced
    /// itself, else keeps it until its Hello arrives or the timeout.
    pub fn submit(
        &mut self,
        request: Request,
        ingest: &mut Ingest,
        writer: Option<&mut dyn Write>,
        now: Instant,
    ) -> Result<(), StoreError> {
        if let Ask::Note { action, detail } = &request.ask {
            ingest.note_action(now_ms(), &request.origin, action, detail)?;
            let _ = request.answer.send(Answer::Noted);
            return Ok(());
        }
        let Some(writer) = writer else {
            let _ = request.answer.send(Answer::unavailable(
                "no_link",
                "this heatbound holds no link to a controller now (a capture or stdin is read, or the link is down)",
            ));
            return Ok(());
        };
        if self.waiting() >= MAX_WAITING {
            let _ = request.answer.send(Answer::unavailable(
                "busy",
                "too many commands are waiting for the controller; try again",
            ));
            return Ok(());
        }
        match ingest.latest_hello().copied() {
            Some(hello) => self.send(request, &addressee(&hello), ingest, Some(writer), now),
            None => {
                let deadline = now + request.timeout;
                self.queued.push_back(Queued { request, deadline });
                Ok(())
            }
        }
    }

    /// After each read of the link: settles the commands that were
    /// answered, sends what waited for a Hello, and gives up on what is
    /// overdue.
    pub fn poll(
        &mut self,
        ingest: &mut Ingest,
        mut writer: Option<&mut dyn Write>,
        now: Instant,
    ) -> Result<(), StoreError> {
        for (reply, host_ms) in ingest.take_replies() {
            if reply.code == ReplyCode::Applied {
                self.next_counter = self.next_counter.max(reply.counter.saturating_add(1));
            }
            let Some(i) = self.sent.iter().position(|s| s.counter == reply.counter) else {
                continue;
            };
            let sent = self.sent.remove(i);
            ingest
                .log_mut()
                .settle_command(sent.log_id, host_ms, Some(reply.code))?;
            let _ = sent.answer.send(Answer::Replied {
                counter: reply.counter,
                code: reply.code,
                t_ms: reply.t_ms,
            });
        }
        if let Some(hello) = ingest.latest_hello().copied() {
            while let Some(q) = self.queued.pop_front() {
                let w = writer.as_mut().map(|w| &mut **w as &mut dyn Write);
                self.send(q.request, &addressee(&hello), ingest, w, now)?;
            }
        }
        let mut i = 0;
        while let Some(s) = self.sent.get(i) {
            if now < s.deadline {
                i += 1;
                continue;
            }
            let s = self.sent.remove(i);
            ingest.log_mut().settle_command(s.log_id, now_ms(), None)?;
            let _ = s.answer.send(Answer::unavailable(
                "no_reply",
                format!(
                    "the controller did not reply within {:.0} s",
                    s.waited.as_secs_f64()
                ),
            ));
        }
        while self.queued.front().is_some_and(|q| now >= q.deadline) {
            if let Some(q) = self.queued.pop_front() {
                let _ = q.request.answer.send(Answer::unavailable(
                    "no_hello",
                    format!(
                        "the controller has not sent a Hello within {:.0} s, so the command cannot be sealed for it",
                        q.request.timeout.as_secs_f64()
                    ),
                ));
            }
        }
        Ok(())
    }

    /// The link dropped: whatever waits for it is told so. A command
    /// already sent may still have been carried out; its log row says
    /// `no_reply`.
    pub fn link_down(&mut self, ingest: &mut Ingest) -> Result<(), StoreError> {
        for s in self.sent.drain(..) {
            ingest.log_mut().settle_command(s.log_id, now_ms(), None)?;
            let _ = s.answer.send(Answer::unavailable(
                "no_link",
                "the link to the controller dropped before it replied; the command may or may not have been carried out",
            ));
        }
        for q in self.queued.drain(..) {
            let _ = q.request.answer.send(Answer::unavailable(
                "no_link",
                "the link to the controller dropped before the command could be sent",
            ));
        }
        Ok(())
    }

    /// Seals, logs and writes one request.
    fn send(
        &mut self,
        request: Request,
        to: &Addressee,
        ingest: &mut Ingest,
        writer: Option<&mut dyn Write>,
        now: Instant,
    ) -> Result<(), StoreError> {
        if let Ask::Relay(bytes) = &request.ask
            && let Some((counter, name, detail)) = self.forged(bytes, to)
        {
            // Logged with what it claimed to be, and never written to the link.
            let run = ingest.run_id();
            let detail =
                format!("refused {detail}: its seal does not verify under this watch's key");
            let log_id = ingest.log_mut().insert_command(
                run,
                now_ms(),
                &request.origin,
                name,
                &detail,
                counter,
                to.session,
                bytes,
            )?;
            ingest
                .log_mut()
                .settle_command_as(log_id, now_ms(), None, Some("refused"))?;
            let _ = request.answer.send(Answer::unavailable(
                "refused",
                format!(
                    "{detail} for rig {} session {} (forged, or sealed with another key or for another session); not sent",
                    to.rig_id.as_str(),
                    to.session
                ),
            ));
            return Ok(());
        }
        let last_accepted = ingest.latest_hello().map_or(0, |h| h.last_counter);
        let (counter, name, detail, bytes) = match self.seal(&request.ask, to, last_accepted) {
            Ok(sealed) => sealed,
            Err(message) => {
                let _ = request.answer.send(Answer::unavailable("invalid", message));
                return Ok(());
            }
        };
        let run = ingest.run_id();
        let log_id = ingest.log_mut().insert_command(
            run,
            now_ms(),
            &request.origin,
            name,
            &detail,
            counter,
            to.session,
            &bytes,
        )?;
        let written = match writer {
            Some(w) => w.write_all(&bytes).and_then(|()| w.flush()),
            None => Err(std::io::Error::from(std::io::ErrorKind::NotConnected)),
        };
        if let Err(e) = written {
            ingest
                .log_mut()
                .settle_command_as(log_id, now_ms(), None, Some("not_sent"))?;
            let _ = request.answer.send(Answer::unavailable(
                "no_link",
                format!("cannot write to the link: {}", crate::term::os_words(&e)),
            ));
            return Ok(());
        }
        self.sent.push(Sent {
            counter,
            log_id,
            deadline: now + request.timeout,
            waited: request.timeout,
            answer: request.answer,
        });
        Ok(())
    }

    /// For relayed `bytes` that are a well-formed command whose seal does
    /// not verify for `to`: its counter, name and description. `None` for
    /// an authentic command, and for bytes that are no command at all
    /// (refused by [`Downlink::seal`] as invalid).
    fn forged(&self, bytes: &[u8], to: &Addressee) -> Option<(u32, &'static str, String)> {
        let body = bytes.strip_suffix(&[0]).unwrap_or(bytes);
        let mut copy = body.to_vec();
        let received = wire::decode_command(&mut copy).ok()?;
        if received.authentic(&self.auth, to) {
            return None;
        }
        let c = received.frame.command;
        Some((received.frame.counter, c.name(), describe(&c)))
    }

    /// The bytes of `ask` for `to`: (counter, command name, detail, bytes).
    fn seal(
        &mut self,
        ask: &Ask,
        to: &Addressee,
        last_accepted: u32,
    ) -> Result<(u32, &'static str, String, Vec<u8>), String> {
        let mut buf = [0u8; wire::MAX_COMMAND_LEN];
        let (frame, sealed, detail) = match ask {
            Ask::Forward(bytes) | Ask::Relay(bytes) => {
                let body = bytes.strip_suffix(&[0]).unwrap_or(bytes);
                let mut copy = body.to_vec();
                let received = wire::decode_command(&mut copy).map_err(|e| {
                    format!("the forwarded bytes are not a command of this protocol: {e}")
                })?;
                let name = received.frame.command.name();
                let mut out = body.to_vec();
                out.push(0);
                return Ok((
                    received.frame.counter,
                    name,
                    format!("forwarded {}", describe(&received.frame.command)),
                    out,
                ));
            }
            Ask::Hello => (
                CommandFrame {
                    counter: 0,
                    command: Command::HelloRequest,
                },
                false,
                String::new(),
            ),
            other => {
                let command = match other {
                    Ask::Acknowledge(rule) => Command::Acknowledge(*rule),
                    Ask::NewRun => Command::NewRun,
                    Ask::Configure(config) => {
                        config
                            .check()
                            .map_err(|e| format!("the configuration does not validate: {e}"))?;
                        Command::Configure(**config)
                    }
                    Ask::Hello | Ask::Forward(_) | Ask::Relay(_) | Ask::Note { .. } => {
                        Command::HelloRequest
                    }
                };
                let counter = self.next_counter.max(last_accepted.saturating_add(1));
                self.next_counter = counter.saturating_add(1);
                (CommandFrame { counter, command }, true, describe(&command))
            }
        };
        let n = wire::encode_command(&frame, sealed.then_some(&self.auth), to, &mut buf)
            .map_err(|e| format!("cannot encode the {} command: {e}", ask.name()))?;
        Ok((
            frame.counter,
            frame.command.name(),
            detail,
            buf.get(..n).unwrap_or_default().to_vec(),
        ))
    }
}

/// Who a Hello says the controller is.
fn addressee(hello: &Hello) -> Addressee {
    Addressee {
        rig_id: hello.rig_id,
        session: hello.session,
    }
}

/// What a command carried, for the log.
fn describe(command: &Command) -> String {
    match command {
        Command::HelloRequest => String::new(),
        Command::Acknowledge(None) => "all".into(),
        Command::Acknowledge(Some(rule)) => rule.as_str().into(),
        Command::NewRun => String::new(),
        Command::Configure(config) => format!("config {:08x}", Hello::config_digest(config)),
    }
}
