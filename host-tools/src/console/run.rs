//! The console on a real terminal: raw mode and the alternate screen for
//! as long as it runs, restored on the way out (a panic included).
use std::sync::mpsc::{self, Receiver, Sender};
use std::time::Duration;

use crossterm::event::{self, Event};

use super::draw::{self, Holder};
use super::keys::{Action, View};
use super::model::Model;
use crate::downlink::{Answer, Ask, Request};
use crate::ingest::Observed;
use crate::link::now_ms;

/// What the console talks to.
pub struct Console {
    /// What the link holder observes.
    pub observed: Receiver<Observed>,
    /// Where the operator's requests go (the link holder's loop).
    pub requests: Sender<Request>,
    /// The link holder, as the console shows it.
    pub holder: Holder,
    /// Leave by itself once the run has ended (the demo), instead of
    /// waiting for `q` (watch).
    pub leave_when_ended: bool,
}

/// How often the screen is redrawn, and keys polled.
const TICK: Duration = Duration::from_millis(100);

/// Runs the console until the operator leaves (or, with
/// [`Console::leave_when_ended`], the run ends). `ended` says whether the
/// run has ended, and why.
pub fn run(mut console: Console, ended: impl Fn() -> Option<String>) -> std::io::Result<()> {
    let mut terminal = ratatui::try_init()?;
    let result = drive(&mut terminal, &mut console, &ended);
    ratatui::try_restore()?;
    result
}

fn drive(
    terminal: &mut ratatui::DefaultTerminal,
    console: &mut Console,
    ended: &impl Fn() -> Option<String>,
) -> std::io::Result<()> {
    let mut model = Model::new();
    let mut view = View::default();
    let (answer_tx, answers) = mpsc::channel::<Answer>();
    let mut ended_at: Option<i64> = None;
    loop {
        while let Ok(what) = console.observed.try_recv() {
            model.observe(&what);
        }
        let now = now_ms();
        while let Ok(answer) = answers.try_recv() {
            match answer {
                Answer::Replied {
                    counter,
                    code,
                    t_ms,
                } => view.say(
                    now,
                    format!(
                        "command {counter}: {code} at t = {:.1} s ({})",
                        f64::from(t_ms) / 1000.0,
                        code.meaning()
                    ),
                ),
                Answer::Unavailable { message, .. } => view.say(now, message),
                Answer::Noted => {}
            }
        }
        if console.holder.ended.is_none()
            && let Some(why) = ended()
        {
            console.holder.ended = Some(why);
            ended_at = Some(now);
        }
        if console.leave_when_ended && ended_at.is_some_and(|t| now - t > 1500) {
            return Ok(());
        }
        terminal.draw(|f| draw::draw(f, &model, &view, &console.holder, now))?;
        if !event::poll(TICK)? {
            continue;
        }
        let Event::Key(key) = event::read()? else {
            continue;
        };
        let Some(action) = view.key(key, &model, now_ms()) else {
            continue;
        };
        let (ask, timeout) = match action {
            Action::Quit => {
                send(
                    console,
                    Ask::Note {
                        action: "quit".into(),
                        detail: String::new(),
                    },
                    Duration::from_secs(1),
                    &answer_tx,
                );
                return Ok(());
            }
            Action::Acknowledge(rule) => (Ask::Acknowledge(rule), Duration::from_secs(10)),
            Action::NewRun => (Ask::NewRun, Duration::from_secs(20)),
            Action::Note { action, detail } => (
                Ask::Note {
                    action: action.into(),
                    detail,
                },
                Duration::from_secs(1),
            ),
        };
        if console.holder.ended.is_some() && !matches!(ask, Ask::Note { .. }) {
            view.say(
                now_ms(),
                "the run has ended: there is no link to send it on",
            );
            continue;
        }
        send(console, ask, timeout, &answer_tx);
    }
}

fn send(console: &Console, ask: Ask, timeout: Duration, answer: &Sender<Answer>) {
    let _ = console.requests.send(Request {
        origin: "console".into(),
        ask,
        timeout,
        answer: answer.clone(),
    });
}
