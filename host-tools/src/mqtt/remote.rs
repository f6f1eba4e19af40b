//! A command from the lab: sealed here with the rig's key, carried by the
//! broker, passed on by the rig's `watch`, checked by the controller.
//!
//! ```text
//! ROOT/rigs/RIG/status (retained) --> controller {rig_id, session, last_counter}
//!     --> seal (rig key, counter last_counter + 1) --> ROOT/rigs/RIG/command
//!     --> watch (seal checked, refused and logged if it fails) --> controller
//!     --> ROOT/rigs/RIG/command-result {counter, outcome, message}
//! ```
//!
//! The broker sees the sealed bytes only: without the key it cannot make
//! one, and a command it replays carries a counter the controller has
//! already seen.
use std::time::{Duration, Instant};

use heatbound::wire::{
    self, Addressee, Authenticator, Command, CommandFrame, CommandKey, ReplyCode, RigId,
};
use rumqttc::{Client, Event, Packet, QoS, RecvTimeoutError};

use super::broker::{self, Broker};
use super::topics::{Leaf, Topics};

/// Why a command from the lab did not get an answer.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum RemoteError {
    /// The broker refused the login.
    #[error("the broker {broker} refused the login: {reason}")]
    Login {
        /// The broker.
        broker: String,
        /// Its words.
        reason: String,
    },
    /// Nothing arrived in time.
    #[error("{0}")]
    NoAnswer(String),
    /// The rig's status says it cannot take a command.
    #[error("rig {rig}: {reason}")]
    NotReachable {
        /// The rig.
        rig: String,
        /// Why.
        reason: String,
    },
}

/// What the rig's `watch` published about the command.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Outcome {
    /// The command's counter.
    pub counter: u32,
    /// The controller's reply code (`applied`, `replayed`, ...), or the
    /// watch's reason for not passing it on (`refused`, `no_link`, ...).
    pub outcome: String,
    /// The watch's words, when it did not pass the command on.
    pub message: String,
}

impl Outcome {
    /// Whether the controller applied the command.
    pub fn applied(&self) -> bool {
        self.outcome == ReplyCode::Applied.as_str()
    }

    /// Whether the controller answered (applied or refused); otherwise the
    /// command never reached it.
    pub fn answered(&self) -> bool {
        ReplyCode::ALL.iter().any(|c| c.as_str() == self.outcome)
    }
}

/// The controller a rig's retained status names.
#[derive(Debug, serde::Deserialize)]
struct Status {
    state: String,
    #[serde(default)]
    why: Option<String>,
    #[serde(default)]
    controller: Option<Controller>,
}

#[derive(Debug, serde::Deserialize)]
struct Controller {
    rig_id: String,
    session: u32,
    last_counter: u32,
}

#[derive(Debug, serde::Deserialize)]
struct Result {
    counter: u32,
    outcome: String,
    #[serde(default)]
    message: String,
}

/// Seals `command` for `rig`'s controller with `key` and sends it through
/// `broker`; waits up to `timeout` for the rig's `watch` to say what
/// became of it.
pub fn send(
    broker: &Broker,
    topics: &Topics,
    rig: &str,
    key: &CommandKey,
    command: Command,
    timeout: Duration,
) -> std::result::Result<Outcome, RemoteError> {
    let status_topic = topics.rig(rig, Leaf::Status);
    let result_topic = topics.rig(rig, Leaf::CommandResult);
    let mut options = broker.options(&format!("heatbound-ask-{}", std::process::id()), None);
    options.set_clean_session(true);
    let (client, mut connection) = Client::new(options, 16);
    let deadline = Instant::now() + timeout;
    let mut status_seen = false;
    let mut sent: Option<u32> = None;
    let mut last_error = None;
    let answer = loop {
        let left = deadline.saturating_duration_since(Instant::now());
        if left.is_zero() {
            let words = match (sent, status_seen, last_error) {
                (Some(counter), _, _) => format!(
                    "rig {rig}: command {counter} was sent, but its watch said nothing within {} s (is the watch running with --publish?)",
                    timeout.as_secs_f64()
                ),
                (None, true, _) => unreachable_words(rig),
                (None, false, Some(e)) => {
                    format!("cannot reach the broker {}: {e}", broker.url.name())
                }
                (None, false, None) => format!(
                    "no status for rig {rig} on {} within {} s: no watch publishes it (check --rig and --topic-root)",
                    broker.url.name(),
                    timeout.as_secs_f64()
                ),
            };
            break Err(RemoteError::NoAnswer(words));
        };
        match connection.recv_timeout(left.min(Duration::from_millis(250))) {
            Ok(Ok(Event::Incoming(Packet::ConnAck(_)))) => {
                let _ = client.try_subscribe(&result_topic, QoS::AtLeastOnce);
                let _ = client.try_subscribe(&status_topic, QoS::AtLeastOnce);
            }
            Ok(Ok(Event::Incoming(Packet::Publish(p)))) if p.topic == status_topic => {
                status_seen = true;
                if sent.is_some() {
                    continue;
                }
                let status: Status = match serde_json::from_slice(&p.payload) {
                    Ok(s) => s,
                    Err(e) => {
                        break Err(RemoteError::NotReachable {
                            rig: rig.into(),
                            reason: format!("its status is not the JSON this tool expects: {e}"),
                        });
                    }
                };
                if status.state != "online" {
                    break Err(RemoteError::NotReachable {
                        rig: rig.into(),
                        reason: format!(
                            "its watch is {}{}",
                            status.state,
                            status.why.map(|w| format!(" ({w})")).unwrap_or_default()
                        ),
                    });
                }
                let Some(c) = status.controller else {
                    break Err(RemoteError::NotReachable {
                        rig: rig.into(),
                        reason: unreachable_words(rig),
                    });
                };
                let bytes = match seal(&c, key, command) {
                    Ok(b) => b,
                    Err(reason) => {
                        break Err(RemoteError::NotReachable {
                            rig: rig.into(),
                            reason,
                        });
                    }
                };
                let counter = c.last_counter.saturating_add(1);
                if client
                    .try_publish(
                        topics.rig(rig, Leaf::Command),
                        QoS::AtLeastOnce,
                        false,
                        bytes,
                    )
                    .is_ok()
                {
                    sent = Some(counter);
                }
            }
            Ok(Ok(Event::Incoming(Packet::Publish(p)))) if p.topic == result_topic => {
                let Ok(r) = serde_json::from_slice::<Result>(&p.payload) else {
                    continue;
                };
                if Some(r.counter) == sent {
                    break Ok(Outcome {
                        counter: r.counter,
                        outcome: r.outcome,
                        message: r.message,
                    });
                }
            }
            Ok(Ok(_)) | Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => {
                break Err(RemoteError::NoAnswer(format!(
                    "the connection to {} closed",
                    broker.url.name()
                )));
            }
            Ok(Err(e)) => {
                if broker::login_refused(&e) {
                    break Err(RemoteError::Login {
                        broker: broker.url.name(),
                        reason: broker::describe(&e),
                    });
                }
                last_error = Some(broker::describe(&e));
                std::thread::sleep(Duration::from_millis(250));
            }
        }
    };
    let _ = client.try_disconnect();
    let _ = connection.recv_timeout(Duration::from_millis(200));
    answer
}

fn unreachable_words(rig: &str) -> String {
    format!(
        "rig {rig}'s watch reports no controller on its link (a capture, or the link is down): no command can reach it"
    )
}

/// `command` for the controller `c` describes, sealed with `key`, with the
/// counter above the last one it has seen.
fn seal(
    c: &Controller,
    key: &CommandKey,
    command: Command,
) -> std::result::Result<Vec<u8>, String> {
    let rig_id = RigId::new(&c.rig_id).map_err(|_| {
        format!(
            "its status names the controller {:?}, not a rig id",
            c.rig_id
        )
    })?;
    let to = Addressee {
        rig_id,
        session: c.session,
    };
    let frame = CommandFrame {
        counter: c.last_counter.saturating_add(1),
        command,
    };
    let mut buf = [0u8; wire::MAX_COMMAND_LEN];
    let n = wire::encode_command(&frame, Some(&Authenticator::new(key)), &to, &mut buf)
        .map_err(|e| format!("cannot encode the command: {e}"))?;
    Ok(buf.get(..n).unwrap_or_default().to_vec())
}
