//! The operator's keys, and the console's own state that they change.
//!
//! ```text
//! key --> View::key --> (the view changes) + Option<Action> for the link holder
//! ```
//!
//! | key | what |
//! |---|---|
//! | `↑` `↓` (`k` `j`) | select an alarm |
//! | `a` | acknowledge the selected alarm |
//! | `A` | acknowledge every alarm |
//! | `n` | start a new run (asks to confirm with `y`) |
//! | `p`, space | pause or resume the trends |
//! | `+` `-` | longer or shorter span |
//! | `c` | temperatures in °C and K, or °C alone |
//! | `?` | help |
//! | `q`, Esc, Ctrl-C | leave |
use crossterm::event::{KeyCode, KeyEvent, KeyEventKind, KeyModifiers};
use heatbound::alarm::RuleId;

use super::model::{AlarmStatus, Model, SPANS_S};

/// What the operator asked the link holder for.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Action {
    /// Acknowledge one rule, or every alarm.
    Acknowledge(Option<RuleId>),
    /// Start a new run (confirmed).
    NewRun,
    /// Something that sends nothing, for the log.
    Note {
        /// What.
        action: &'static str,
        /// With what.
        detail: String,
    },
    /// Leave the console.
    Quit,
}

/// The console's own state.
#[derive(Clone, Debug, PartialEq)]
pub struct View {
    /// The trends are frozen at this host time, Unix ms.
    pub paused_at: Option<i64>,
    /// Index into [`SPANS_S`].
    pub span: usize,
    /// Temperatures in °C alone.
    pub celsius_only: bool,
    /// The selected row of the alarm list.
    pub selected: usize,
    /// The help overlay is open.
    pub help: bool,
    /// A new run waits for `y`.
    pub confirm_new_run: bool,
    /// The latest thing said to the operator, with its host time.
    pub message: Option<(i64, String)>,
}

impl Default for View {
    fn default() -> Self {
        View {
            paused_at: None,
            span: 1,
            celsius_only: false,
            selected: 0,
            help: false,
            confirm_new_run: false,
            message: None,
        }
    }
}

impl View {
    /// The span shown, seconds.
    pub fn span_s(&self) -> u32 {
        SPANS_S.get(self.span).copied().unwrap_or(300)
    }

    /// Says `text` at `now_ms`.
    pub fn say(&mut self, now_ms: i64, text: impl Into<String>) {
        self.message = Some((now_ms, text.into()));
    }

    /// Takes one key at host time `now_ms`.
    pub fn key(&mut self, key: KeyEvent, model: &Model, now_ms: i64) -> Option<Action> {
        if key.kind == KeyEventKind::Release {
            return None;
        }
        let ctrl_c =
            key.modifiers.contains(KeyModifiers::CONTROL) && matches!(key.code, KeyCode::Char('c'));
        if ctrl_c {
            return Some(Action::Quit);
        }
        if self.confirm_new_run {
            self.confirm_new_run = false;
            return if matches!(key.code, KeyCode::Char('y' | 'Y')) {
                self.say(
                    now_ms,
                    "new run asked for: it starts at the next window boundary",
                );
                Some(Action::NewRun)
            } else {
                self.say(now_ms, "new run cancelled");
                Some(Action::Note {
                    action: "new_run_cancelled",
                    detail: String::new(),
                })
            };
        }
        if self.help {
            // Any key closes the help; q still leaves.
            self.help = false;
            return match key.code {
                KeyCode::Char('q') => Some(Action::Quit),
                _ => None,
            };
        }
        let rows = model.alarms.len();
        match key.code {
            KeyCode::Char('q') | KeyCode::Esc => Some(Action::Quit),
            KeyCode::Up | KeyCode::Char('k') => {
                self.selected = self.selected.saturating_sub(1);
                None
            }
            KeyCode::Down | KeyCode::Char('j') => {
                if self.selected + 1 < rows {
                    self.selected += 1;
                }
                None
            }
            KeyCode::Char('a') => match model.alarms.get(self.selected) {
                Some(row) if matches!(row.status, AlarmStatus::Active) => {
                    self.say(now_ms, format!("acknowledging {} …", row.rule));
                    Some(Action::Acknowledge(Some(row.rule)))
                }
                Some(row) => {
                    self.say(
                        now_ms,
                        format!(
                            "{} is {}: nothing to acknowledge",
                            row.rule,
                            row.status.word()
                        ),
                    );
                    None
                }
                None => {
                    self.say(now_ms, "no alarm selected");
                    None
                }
            },
            KeyCode::Char('A') => {
                self.say(now_ms, "acknowledging every alarm …");
                Some(Action::Acknowledge(None))
            }
            KeyCode::Char('n') => {
                self.confirm_new_run = true;
                None
            }
            KeyCode::Char('p' | ' ') => {
                let (action, detail) = match self.paused_at {
                    Some(_) => {
                        self.paused_at = None;
                        ("resume", "trends follow the link again")
                    }
                    None => {
                        self.paused_at = Some(now_ms);
                        ("pause", "trends frozen; the log goes on")
                    }
                };
                self.say(now_ms, detail);
                Some(Action::Note {
                    action,
                    detail: String::new(),
                })
            }
            KeyCode::Char('+' | '=') | KeyCode::Char('-' | '_') => {
                let longer = matches!(key.code, KeyCode::Char('+' | '='));
                self.span = if longer {
                    (self.span + 1).min(SPANS_S.len() - 1)
                } else {
                    self.span.saturating_sub(1)
                };
                let span = span_words(self.span_s());
                self.say(now_ms, format!("span {span}"));
                Some(Action::Note {
                    action: "span",
                    detail: span,
                })
            }
            KeyCode::Char('c') => {
                self.celsius_only = !self.celsius_only;
                let units = if self.celsius_only {
                    "°C"
                } else {
                    "°C and K"
                };
                self.say(now_ms, format!("temperatures in {units}"));
                Some(Action::Note {
                    action: "units",
                    detail: units.into(),
                })
            }
            KeyCode::Char('?' | 'h') => {
                self.help = true;
                Some(Action::Note {
                    action: "help",
                    detail: String::new(),
                })
            }
            _ => None,
        }
    }
}

/// A span in words: `5 min`, `1 h`.
pub fn span_words(s: u32) -> String {
    if s >= 3600 {
        format!("{} h", s / 3600)
    } else if s >= 60 {
        format!("{} min", s / 60)
    } else {
        format!("{s} s")
    }
}
