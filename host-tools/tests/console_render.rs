//! The console's screen, drawn with ratatui's `TestBackend` at the sizes
//! an engineer's terminal has, from a simulated run (thermocouple-drift:
//! `beyond_carnot` raised, acknowledged over the link, then cleared once
//! the thermocouple is reseated).
use heatbound::alarm::RuleId;
use heatbound::wire::{self, Addressee, Authenticator, Command, CommandFrame, CommandKey, Frame};
use heatbound_firmware_example::rig::{Rig, Scenario};
use heatbound_host::console::draw::{Holder, draw, fit};
use heatbound_host::console::keys::{Action, View};
use heatbound_host::console::model::{AlarmStatus, Model};
use heatbound_host::ingest::{Observed, Totals};
use heatbound_host::sil::{self, SimOptions, Simulation};
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use ratatui::buffer::Buffer;

/// Host time of rig time 0, Unix ms.
const T0: i64 = 1_800_000_000_000;

/// A model fed the simulated run up to `until_s` of rig time, with the
/// operator's acknowledge at 505 s and the repair at 540 s.
fn model_until(until_s: u32) -> Model {
    let options = SimOptions {
        scenario: Scenario::ThermocoupleDrift,
        duration_s: f64::from(until_s),
        repair_at_s: Some(540.0),
        ..SimOptions::default()
    };
    let config = sil::default_config(&Rig::bench_stirling(options.scenario, options.seed));
    let mut sim = Simulation::new(&options, &config).unwrap();
    let mut model = Model::new();
    let mut frames = Vec::new();
    let mut acked = false;
    let mut totals = Totals::default();
    while let Some(t_ms) = sim.next_tick(&mut frames) {
        if t_ms >= 505_000 && !acked {
            acked = true;
            let to = Addressee {
                rig_id: sim.hello().rig_id,
                session: sim.hello().session,
            };
            let ack = CommandFrame {
                counter: 1,
                command: Command::Acknowledge(None),
            };
            let mut buf = [0u8; wire::MAX_COMMAND_LEN];
            let n = wire::encode_command(
                &ack,
                Some(&Authenticator::new(&CommandKey::DEMO)),
                &to,
                &mut buf,
            )
            .unwrap();
            sim.receive(&buf[..n], &mut frames);
        }
        for frame in frames.drain(..) {
            totals.frames += 1;
            if matches!(frame, Frame::Summary(_)) {
                totals.summaries += 1;
            }
            model.observe(&Observed::Frame {
                frame,
                host_ms: T0 + i64::from(t_ms),
            });
        }
    }
    model.observe(&Observed::Totals(totals));
    model
}

fn holder() -> Holder {
    Holder {
        source: "tcp:127.0.0.1:4000".into(),
        key: "demo key".into(),
        commands: true,
        ended: None,
    }
}

/// The screen as text, one string per row.
fn render(model: &Model, view: &View, w: u16, h: u16, now_s: u32) -> Vec<String> {
    let mut terminal = Terminal::new(TestBackend::new(w, h)).unwrap();
    terminal
        .draw(|f| draw(f, model, view, &holder(), T0 + i64::from(now_s) * 1000))
        .unwrap();
    rows(terminal.backend().buffer())
}

fn rows(buffer: &Buffer) -> Vec<String> {
    let area = buffer.area;
    (0..area.height)
        .map(|y| {
            (0..area.width)
                .map(|x| buffer[(x, y)].symbol().to_string())
                .collect::<String>()
        })
        .collect()
}

const SIZES: [(u16, u16); 3] = [(80, 24), (120, 40), (200, 60)];

/// Words the screen may show; any of them appearing cut short (a prefix
/// followed by a letter-less end) would be a word cut mid-way.
const WORDS: [&str; 10] = [
    "beyond_carnot",
    "negative_entropy_production",
    "acknowledged",
    "heatbound",
    "Window",
    "totals",
    "frames",
    "restarts",
    "commands",
    "span",
];

/// Words that are prefixes of others in `WORDS` and whole words themselves.
const WHOLE: [&str; 2] = ["acknowledge", "frame"];

fn no_word_cut(screen: &[String]) {
    for row in screen {
        for token in row.split(|c: char| c.is_whitespace() || "·()|,;:".contains(c)) {
            let token = token.trim_end_matches('…');
            if token.len() < 4 || WHOLE.contains(&token) {
                continue;
            }
            for word in WORDS {
                if word.starts_with(token)
                    && word != token
                    && !word.starts_with(&format!("{token}_"))
                {
                    panic!("{token:?} looks like {word:?} cut short in row {row:?}");
                }
            }
        }
    }
}

#[test]
fn a_tripped_acknowledged_alarm_reads_at_every_size() {
    let model = model_until(520);
    let row = model
        .alarms
        .iter()
        .find(|r| r.rule == RuleId::BeyondCarnot)
        .unwrap();
    assert_eq!(row.status, AlarmStatus::Acknowledged);
    assert!(model.trip());
    for (w, h) in SIZES {
        let screen = render(&model, &View::default(), w, h, 520);
        let text = screen.join("\n");
        assert_eq!(screen.len(), h as usize);
        // The verdict says trip in words, not only in red.
        assert!(screen[1].contains("✖ TRIP"), "{w}x{h}:\n{text}");
        assert!(screen[1].contains("trip output ON"), "{w}x{h}:\n{text}");
        // The alarm list: symbol, state, rule, severity, times.
        let alarm = screen
            .iter()
            .skip(2)
            .find(|r| r.contains("beyond_carnot") && r.contains("✔ acknowledged"))
            .unwrap_or_else(|| panic!("{w}x{h}: no acknowledged beyond_carnot row:\n{text}"));
        assert!(alarm.contains("trip"), "{alarm}");
        assert!(alarm.contains("500.3 s"), "{alarm}");
        assert!(alarm.contains("ack 505.0 s"), "{alarm}");
        assert!(text.contains("▶ "), "the selected row is marked:\n{text}");
        // The readouts and the link line.
        assert!(text.contains("Window (±U, k = 2)"), "{w}x{h}:\n{text}");
        assert!(text.contains("T_hot"), "{w}x{h}:\n{text}");
        assert!(text.contains("°C"), "{w}x{h}:\n{text}");
        assert!(text.contains(" link "), "{w}x{h}:\n{text}");
        assert!(text.contains("lost 0"), "{w}x{h}:\n{text}");
        no_word_cut(&screen);
    }
}

#[test]
fn a_healthy_rig_shows_its_margin_and_a_cleared_alarm_stays_listed() {
    let model = model_until(600);
    for (w, h) in SIZES {
        let screen = render(&model, &View::default(), w, h, 600);
        let text = screen.join("\n");
        assert!(screen[1].contains("✔ HEALTHY"), "{w}x{h}:\n{text}");
        assert!(screen[1].contains("margin"), "{w}x{h}:\n{text}");
        assert!(
            screen
                .iter()
                .any(|r| r.contains("cleared") && r.contains("beyond_carnot")),
            "{w}x{h}:\n{text}"
        );
        no_word_cut(&screen);
    }
    // The run totals came from the summaries: Q_in over ~600 s at ~500 W.
    let q_in = model.totals.energies_j[0];
    assert!((2.7e5..3.3e5).contains(&q_in), "{q_in}");
}

#[test]
fn a_loss_shows_on_the_link_line_when_it_happens() {
    let mut model = model_until(60);
    let mut totals = model.link;
    totals.crc_errors += 1;
    model.observe(&Observed::Totals(totals));
    let screen = render(&model, &View::default(), 80, 24, 60);
    let link = screen
        .iter()
        .find(|r| r.contains(" link "))
        .expect("a link line");
    assert!(link.contains("⚠ 1 frame(s) lost"), "{link}");
    assert!(link.contains("lost 1"), "{link}");
    // Fifteen seconds later the news is gone; the count stays.
    let later = render(&model, &View::default(), 80, 24, 80);
    let link = later.iter().find(|r| r.contains(" link ")).unwrap();
    assert!(!link.contains("⚠"), "{link}");
    assert!(link.contains("lost 1"), "{link}");
}

#[test]
fn an_outage_shows_at_once() {
    let mut model = model_until(60);
    model.observe(&Observed::Link {
        up: false,
        reason: Some("tcp:127.0.0.1:4000: connection closed".into()),
        host_ms: T0 + 61_000,
    });
    let screen = render(&model, &View::default(), 80, 24, 65);
    assert!(screen[1].contains("✖ LINK DOWN for 4.0 s"), "{}", screen[1]);
    assert!(screen.iter().any(|r| r.contains("✖ down")));
}

#[test]
fn keys_select_acknowledge_confirm_and_are_noted() {
    use crossterm::event::{KeyCode, KeyEvent, KeyModifiers};
    let key = |c: KeyCode| KeyEvent::new(c, KeyModifiers::NONE);
    let model = model_until(503);
    let mut view = View::default();
    // The newest alarm first; find beyond_carnot and acknowledge it.
    let at = model
        .alarms
        .iter()
        .position(|r| r.rule == RuleId::BeyondCarnot)
        .unwrap();
    for _ in 0..at {
        assert_eq!(view.key(key(KeyCode::Down), &model, 0), None);
    }
    assert_eq!(
        view.key(key(KeyCode::Char('a')), &model, 0),
        Some(Action::Acknowledge(Some(RuleId::BeyondCarnot)))
    );
    // A new run needs a confirmation; anything but y cancels.
    assert_eq!(view.key(key(KeyCode::Char('n')), &model, 0), None);
    assert!(view.confirm_new_run);
    let screen = {
        let mut terminal = Terminal::new(TestBackend::new(80, 24)).unwrap();
        terminal
            .draw(|f| draw(f, &model, &view, &holder(), T0 + 503_000))
            .unwrap();
        rows(terminal.backend().buffer())
    };
    assert!(screen.join("\n").contains("Start a new run?"));
    assert!(matches!(
        view.key(key(KeyCode::Char('x')), &model, 0),
        Some(Action::Note {
            action: "new_run_cancelled",
            ..
        })
    ));
    view.key(key(KeyCode::Char('n')), &model, 0);
    assert_eq!(
        view.key(key(KeyCode::Char('y')), &model, 0),
        Some(Action::NewRun)
    );
    // Pause, span and units are noted for the log.
    assert!(matches!(
        view.key(key(KeyCode::Char('p')), &model, 7),
        Some(Action::Note {
            action: "pause",
            ..
        })
    ));
    assert_eq!(view.paused_at, Some(7));
    assert!(matches!(
        view.key(key(KeyCode::Char('+')), &model, 8),
        Some(Action::Note { action: "span", .. })
    ));
    assert_eq!(view.span_s(), 900);
    assert_eq!(
        view.key(key(KeyCode::Char('q')), &model, 9),
        Some(Action::Quit)
    );
}

#[test]
fn fitting_cuts_at_words() {
    assert_eq!(fit("link down: connection closed", 16), "link down:…");
    assert_eq!(fit("short", 16), "short");
    assert_eq!(fit("abcdefghijklmnop", 5), "…");
}

#[test]
#[ignore = "prints the screens, for a person to look at: cargo test --test console_render -- --ignored --nocapture"]
fn print_screens() {
    for (until, now) in [(520, 520), (600, 600)] {
        let model = model_until(until);
        for (w, h) in SIZES {
            println!("{w}x{h} at {now} s:");
            for row in render(&model, &View::default(), w, h, now) {
                println!("|{row}|");
            }
        }
    }
}
