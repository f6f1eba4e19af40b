//! The live console in a real terminal: `watch` runs in tmux against a
//! simulated controller, and the test reads the screen with
//! `capture-pane` and presses keys with `send-keys`, at 80×24, 120×40 and
//! 200×60, over a run in which `beyond_carnot` is raised, acknowledged from
//! a key and cleared, and one frame is damaged on the wire.
//!
//! Needs tmux, so it is not part of `cargo test`; `.ci/run` runs it:
//!
//! ```sh
//! cargo test -p heatbound-host --test console_tmux -- --ignored --nocapture
//! ```
//!
//! With `HEATBOUND_CONSOLE_CAPTURE=DIR` the captures are also written
//! there (`docs/console-80x24.txt` in the README comes from one).
use std::os::unix::fs::PermissionsExt;
use std::path::PathBuf;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use rusqlite::{Connection, OpenFlags};

/// The tmux server of this test alone.
const SOCKET: &str = "heatbound-console-test";
const SESSION: &str = "console";

fn tmux(args: &[&str]) -> String {
    let out = Command::new("tmux")
        .args(["-L", SOCKET])
        .args(args)
        .output()
        .expect("tmux runs (apt-get install tmux)");
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn screen() -> String {
    tmux(&["capture-pane", "-p", "-t", SESSION])
}

/// Waits until the screen shows `text`; returns the screen.
fn wait_for(text: &str, within: Duration) -> String {
    let until = Instant::now() + within;
    loop {
        let s = screen();
        if s.contains(text) {
            return s;
        }
        assert!(
            Instant::now() < until,
            "no {text:?} on the screen within {within:?}:\n{s}"
        );
        std::thread::sleep(Duration::from_millis(150));
    }
}

fn resize(w: u16, h: u16) -> String {
    tmux(&[
        "resize-window",
        "-t",
        SESSION,
        "-x",
        &w.to_string(),
        "-y",
        &h.to_string(),
    ]);
    std::thread::sleep(Duration::from_millis(600));
    let s = screen();
    let rows: Vec<&str> = s.lines().collect();
    assert_eq!(rows.len(), h as usize, "{w}x{h}:\n{s}");
    s
}

/// Words that a screen cut mid-way would show as a shorter prefix.
fn no_word_cut(s: &str, size: &str) {
    const WORDS: [&str; 8] = [
        "beyond_carnot",
        "negative_entropy_production",
        "acknowledged",
        "restarts",
        "commands",
        "Window",
        "heatbound",
        "cleared",
    ];
    for token in s.split(|c: char| c.is_whitespace() || "·(),;:│".contains(c)) {
        let token = token.trim_end_matches('…');
        if token.chars().count() < 4 {
            continue;
        }
        for word in WORDS {
            let cut = word.starts_with(token) && word != token;
            let whole_shorter = ["acknowledge", "command"].contains(&token);
            assert!(
                !cut || whole_shorter,
                "{size}: {token:?} looks like {word:?} cut short:\n{s}"
            );
        }
    }
}

fn save(dir: &Option<PathBuf>, name: &str, s: &str) {
    if let Some(dir) = dir {
        std::fs::create_dir_all(dir).unwrap();
        std::fs::write(dir.join(name), s).unwrap();
    }
}

struct Cleanup(Child);

impl Drop for Cleanup {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
        tmux(&["kill-server"]);
    }
}

#[test]
#[ignore = "needs tmux; .ci/run runs it"]
fn the_console_in_tmux() {
    let bin = assert_cmd::cargo::cargo_bin("heatbound");
    let dir = tempfile::tempdir().unwrap();
    let runtime = dir.path().join("run");
    std::fs::create_dir(&runtime).unwrap();
    std::fs::set_permissions(&runtime, std::fs::Permissions::from_mode(0o700)).unwrap();
    let db = dir.path().join("console.sqlite");
    let capture_dir = std::env::var_os("HEATBOUND_CONSOLE_CAPTURE").map(PathBuf::from);

    // thermocouple-drift at 25x: a frame damaged at 300 s (12 s), beyond_carnot
    // at 500 s (20 s), the thermocouple reseated at 560 s (22.4 s).
    let mut sim = Command::new(&bin)
        .args([
            "simulate",
            "--scenario",
            "thermocouple-drift",
            "--hot2",
            "--speed",
            "25",
            "--duration-s",
            "900",
            "--repair-at-s",
            "560",
            "--line-noise-at-s",
            "300",
            "--listen",
            "0",
        ])
        .env("XDG_RUNTIME_DIR", &runtime)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let addr = {
        use std::io::{BufRead, BufReader};
        let mut lines = BufReader::new(sim.stderr.take().unwrap()).lines();
        let addr = loop {
            let line = lines.next().expect("simulate says where").unwrap();
            if let Some(a) = line.strip_prefix("heatbound simulate: listening on ") {
                break a.to_string();
            }
        };
        // Keep draining simulate's notices, or it would stop on a full pipe.
        std::thread::spawn(move || for _ in lines {});
        addr
    };
    let _cleanup = Cleanup(sim);
    tmux(&["kill-server"]);
    let command = format!(
        "XDG_RUNTIME_DIR={} {} watch --tcp {addr} --db {}",
        runtime.display(),
        bin.display(),
        db.display()
    );
    tmux(&[
        "new-session",
        "-d",
        "-s",
        SESSION,
        "-x",
        "80",
        "-y",
        "24",
        &command,
    ]);

    // Healthy first, with the link line and the keys.
    let s = wait_for("✔ HEALTHY", Duration::from_secs(15));
    assert!(s.contains(" link ● up"), "{s}");
    assert!(s.contains("? help"), "{s}");
    no_word_cut(&s, "80x24");
    // The damaged frame shows on the link line when it happens.
    let s = wait_for("⚠ 1 frame(s) lost", Duration::from_secs(20));
    save(&capture_dir, "console-loss-80x24.txt", &s);
    no_word_cut(&s, "80x24");

    // beyond_carnot raises and trips.
    let s = wait_for("✖ TRIP", Duration::from_secs(20));
    let s = if s.contains("beyond_carnot") {
        s
    } else {
        wait_for("beyond_carnot", Duration::from_secs(5))
    };
    no_word_cut(&s, "80x24");
    // Select it (the newest alarm is listed first) and acknowledge it.
    // The alarm rows: between the list's heading and the link line.
    let alarms: Vec<&str> = s
        .lines()
        .skip_while(|r| !r.trim_start().starts_with("Alarms"))
        .skip(1)
        .take_while(|r| !r.starts_with(" link "))
        .collect();
    let at = alarms
        .iter()
        .position(|r| r.contains("beyond_carnot"))
        .unwrap_or_else(|| panic!("no beyond_carnot row:\n{s}"));
    for _ in 0..at {
        tmux(&["send-keys", "-t", SESSION, "Down"]);
    }
    tmux(&["send-keys", "-t", SESSION, "a"]);
    let s = wait_for("applied", Duration::from_secs(10));
    let row = s
        .lines()
        .find(|r| r.contains("beyond_carnot") && r.contains("acknowledged"))
        .unwrap_or_else(|| panic!("the row did not change state:\n{s}"));
    assert!(row.contains("✔ acknowledged"), "{row}");
    // Acknowledged is not cleared: the trip stays while the condition holds.
    assert!(
        s.lines().nth(1).is_some_and(|l| l.contains("✖ TRIP")),
        "{s}"
    );
    save(&capture_dir, "console-80x24.txt", &s);

    // The same screen at the other sizes.
    for (w, h) in [(120, 40), (200, 60)] {
        let s = resize(w, h);
        assert!(s.contains("✔ acknowledged"), "{w}x{h}:\n{s}");
        assert!(s.contains("Window (±U, k = 2)"), "{w}x{h}:\n{s}");
        no_word_cut(&s, &format!("{w}x{h}"));
        save(&capture_dir, &format!("console-{w}x{h}.txt"), &s);
    }

    // The thermocouple is reseated: beyond_carnot clears.
    let s = wait_for("○ cleared", Duration::from_secs(20));
    assert!(
        s.lines()
            .any(|r| r.contains("beyond_carnot") && r.contains("○ cleared")),
        "{s}"
    );
    // The latched negative_entropy_production holds the trip until it is
    // acknowledged too: A acknowledges everything, and the rig is healthy.
    tmux(&["send-keys", "-t", SESSION, "A"]);
    let s = wait_for("✔ HEALTHY", Duration::from_secs(15));
    no_word_cut(&s, "200x60");
    let s = resize(80, 24);
    no_word_cut(&s, "80x24");

    // Help, then leave.
    tmux(&["send-keys", "-t", SESSION, "?"]);
    let s = wait_for("Help", Duration::from_secs(5));
    assert!(s.contains("acknowledge every alarm"), "{s}");
    tmux(&["send-keys", "-t", SESSION, "Escape"]);
    tmux(&["send-keys", "-t", SESSION, "q"]);
    let until = Instant::now() + Duration::from_secs(10);
    // watch leaves, and its tmux session with it.
    while Command::new("tmux")
        .args(["-L", SOCKET, "has-session", "-t", SESSION])
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success())
    {
        assert!(Instant::now() < until, "watch did not leave on q");
        std::thread::sleep(Duration::from_millis(200));
    }

    // Every operator action is in the log, with its host time.
    let log = Connection::open_with_flags(&db, OpenFlags::SQLITE_OPEN_READ_ONLY).unwrap();
    let commands: Vec<(String, String, String)> = log
        .prepare("SELECT origin, detail, outcome FROM commands WHERE command = 'ack' ORDER BY id")
        .unwrap()
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert_eq!(
        commands,
        [
            ("console".into(), "beyond_carnot".into(), "applied".into()),
            ("console".into(), "all".into(), "applied".into())
        ]
    );
    let actions: Vec<String> = log
        .prepare("SELECT action FROM operator_actions ORDER BY id")
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert_eq!(
        actions.last().map(String::as_str),
        Some("quit"),
        "{actions:?}"
    );
    let acked: i64 = log
        .query_row(
            "SELECT count(*) FROM events WHERE rule = 'beyond_carnot' AND kind = 'acknowledged'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(acked, 1);
    let lost: i64 = log
        .query_row(
            "SELECT coalesce(sum(count), 0) FROM link_errors WHERE kind = 'crc'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(lost, 1);
}
