//! A scripted operator: the demo's engineer at the bench, who acknowledges
//! each trip alarm over the link as soon as it is raised, as they would
//! with `heatbound ack`.
//!
//! ```text
//! live lines (Ingest) --> Operator::read --> "raised RULE trip" --> downlink::Request (ack RULE)
//! downlink::Answer --> Operator::settle --> said (for the demo to print), kept for its verdict
//! ```
use std::sync::mpsc;
use std::time::Duration;

use heatbound::alarm::RuleId;
use heatbound::wire::ReplyCode;

use crate::downlink::{Answer, Ask, Request};

/// Whether a live line is an alarm event or a command's reply.
pub fn is_event_line(line: &str) -> bool {
    ["raised ", "cleared ", "acknowledged ", "reply to command "]
        .iter()
        .any(|w| line.contains(w))
}

/// The demo's operator: acknowledges each trip alarm over the link as soon
/// as it is raised, as an engineer at the bench would with `heatbound ack`.
pub struct Operator {
    requests: mpsc::Sender<Request>,
    answer: mpsc::Sender<Answer>,
    answers: mpsc::Receiver<Answer>,
    asked: usize,
    outcomes: Vec<Answer>,
}

impl Operator {
    /// An operator whose requests go to `requests` (the link holder's loop).
    pub fn new(requests: mpsc::Sender<Request>) -> Operator {
        let (answer, answers) = mpsc::channel();
        Operator {
            requests,
            answer,
            answers,
            asked: 0,
            outcomes: Vec::new(),
        }
    }

    /// The answers so far.
    pub fn outcomes(&self) -> &[Answer] {
        &self.outcomes
    }

    /// Reads one live line; asks, or reports an answer, when it is time.
    /// Returns what the operator says.
    pub fn read(&mut self, line: &str) -> Vec<String> {
        let mut said = Vec::new();
        if let Some(rule) = raised_trip(line) {
            self.asked += 1;
            said.push(format!("operator: acknowledging {rule} over the link"));
            let _ = self.requests.send(Request {
                origin: "demo operator".into(),
                ask: Ask::Acknowledge(Some(rule)),
                timeout: Duration::from_secs(10),
                answer: self.answer.clone(),
            });
        }
        said.extend(self.settle());
        said
    }

    /// Takes the answers that have come; returns what the operator says.
    pub fn settle(&mut self) -> Vec<String> {
        let mut said = Vec::new();
        while let Ok(answer) = self.answers.try_recv() {
            match &answer {
                Answer::Replied {
                    counter,
                    code,
                    t_ms,
                } => said.push(format!(
                    "operator: command {counter} {} at t = {:.1} s ({})",
                    code,
                    f64::from(*t_ms) / 1000.0,
                    code.meaning()
                )),
                Answer::Unavailable { message, .. } => said.push(format!("operator: {message}")),
                Answer::Noted => {}
            }
            self.outcomes.push(answer);
        }
        said
    }

    /// Whether every acknowledge asked for was applied, and there was one.
    pub fn all_applied(&self) -> bool {
        self.asked > 0
            && self.outcomes.len() == self.asked
            && self.outcomes.iter().all(|a| {
                matches!(
                    a,
                    Answer::Replied {
                        code: ReplyCode::Applied,
                        ..
                    }
                )
            })
    }
}

/// The rule of a live line that says a trip alarm was raised.
fn raised_trip(line: &str) -> Option<RuleId> {
    let rest = line.split("raised ").nth(1)?;
    let mut words = rest.split(' ');
    let rule = RuleId::parse(words.next()?)?;
    (words.next()? == "trip").then_some(rule)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_trip_raises_only() {
        assert_eq!(
            raised_trip("raised beyond_carnot trip at t=500.4 s"),
            Some(RuleId::BeyondCarnot)
        );
        // With terminal highlighting around it.
        assert_eq!(
            raised_trip("\x1b[1;31mraised over_temperature trip at t=3.0 s\x1b[0m"),
            Some(RuleId::OverTemperature)
        );
        assert_eq!(
            raised_trip("raised near_carnot advisory at t=465.0 s"),
            None
        );
        assert_eq!(raised_trip("cleared beyond_carnot trip at t=546.0 s"), None);
        assert!(is_event_line(
            "acknowledged beyond_carnot trip at t=501.1 s"
        ));
        assert!(!is_event_line("t=1.0s η=0.172"));
    }
}
