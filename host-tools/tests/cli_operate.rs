//! The two-way link end to end on the host: a simulated controller
//! (`simulate --listen`), the `watch` that holds its link, and the
//! operator's `heatbound ack`, `configure` and `new-run`; forged and
//! replayed commands; key files; no watch at all.
//!
//! Each test gives its processes a control-socket folder of its own
//! (`XDG_RUNTIME_DIR`), so tests running at once never find each other's
//! `watch`.
use std::io::{BufRead, BufReader};
use std::os::unix::fs::PermissionsExt;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Output, Stdio};
use std::sync::mpsc::{self, Receiver};
use std::time::{Duration, Instant};

use assert_cmd::cargo::CommandCargoExt as _;
use heatbound::config::RigConfig;
use heatbound::wire::{
    self, Addressee, Authenticator, Command as WireCommand, CommandFrame, CommandKey, Hello, RigId,
};
use heatbound_host::control::{self, WireAnswer, WireAsk, WireRequest};
use rusqlite::{Connection, OpenFlags};
use tempfile::TempDir;

/// A simulated controller and the `watch` attached to it.
struct Bench {
    dir: TempDir,
    runtime: PathBuf,
    db: PathBuf,
    sim: Child,
    watch: Child,
}

impl Drop for Bench {
    fn drop(&mut self) {
        let _ = self.sim.kill();
        let _ = self.watch.kill();
        let _ = self.sim.wait();
        let _ = self.watch.wait();
    }
}

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").unwrap()
}

/// A control-socket folder only this user may enter.
fn runtime_dir(dir: &Path) -> PathBuf {
    let runtime = dir.join("run");
    std::fs::create_dir(&runtime).unwrap();
    std::fs::set_permissions(&runtime, std::fs::Permissions::from_mode(0o700)).unwrap();
    runtime
}

/// Forwards a child's lines to a channel, and keeps draining them after
/// the receiver is gone (a child writing to a closed pipe would die).
fn lines_of(r: impl std::io::Read + Send + 'static) -> Receiver<String> {
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        for line in BufReader::new(r).lines().map_while(Result::ok) {
            let _ = tx.send(line);
        }
    });
    rx
}

/// Starts `simulate` with `sim_args`, then `watch` on it with `watch_args`.
fn bench(sim_args: &[&str], watch_args: &[&str]) -> Bench {
    let dir = tempfile::tempdir().unwrap();
    let runtime = runtime_dir(dir.path());
    let db = dir.path().join("bench.sqlite");
    let mut sim = heatbound()
        .args(["simulate", "--listen", "0"])
        .args(sim_args)
        .env("XDG_RUNTIME_DIR", &runtime)
        .env_remove("HEATBOUND_KEY_FILE")
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let sim_err = lines_of(sim.stderr.take().unwrap());
    let addr = loop {
        let line = sim_err
            .recv_timeout(Duration::from_secs(10))
            .expect("simulate says where it listens");
        if let Some(addr) = line.strip_prefix("heatbound simulate: listening on ") {
            break addr.to_string();
        }
    };
    let watch = heatbound()
        .args(["watch", "--tcp", &addr, "--db"])
        .arg(&db)
        .args(watch_args)
        .env("XDG_RUNTIME_DIR", &runtime)
        .env_remove("HEATBOUND_KEY_FILE")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    Bench {
        dir,
        runtime,
        db,
        sim,
        watch,
    }
}

impl Bench {
    /// Runs `heatbound ARGS` as an operator would, beside this bench.
    fn operator(&self, args: &[&str]) -> Output {
        heatbound()
            .args(args)
            .env("XDG_RUNTIME_DIR", &self.runtime)
            .output()
            .unwrap()
    }

    fn read_log(&self) -> Connection {
        Connection::open_with_flags(&self.db, OpenFlags::SQLITE_OPEN_READ_ONLY).unwrap()
    }

    /// `sql` (a count) in the log, 0 while the log is not there yet.
    fn count(&self, sql: &str) -> i64 {
        Connection::open_with_flags(&self.db, OpenFlags::SQLITE_OPEN_READ_ONLY)
            .and_then(|c| c.query_row(sql, [], |r| r.get(0)))
            .unwrap_or(0)
    }

    /// Ends the run: `watch` is interrupted and closes its run, then the
    /// simulation stops.
    fn stop(mut self) -> (TempDir, PathBuf) {
        // The watch first, so its run ends cleanly rather than with a drop.
        let pid = self.watch.id().to_string();
        let _ = Command::new("kill").args(["-INT", &pid]).status();
        let status = self.watch.wait().unwrap();
        assert!(status.success(), "watch ended with {status}");
        let _ = self.sim.kill();
        let _ = self.sim.wait();
        let dir = tempfile::tempdir().unwrap();
        let old = std::mem::replace(&mut self.dir, dir);
        (old, self.db.clone())
    }
}

fn text(o: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

/// Sends `ask` straight to the watch's control socket.
fn ask(bench: &Bench, ask: WireAsk) -> WireAnswer {
    let socket = std::fs::read_dir(bench.runtime.join("heatbound"))
        .unwrap()
        .flatten()
        .map(|e| e.path())
        .find(|p| p.extension().is_some_and(|x| x == "sock"))
        .expect("the watch's control socket");
    control::call(
        &socket,
        &WireRequest {
            origin: "test".into(),
            timeout_s: Some(10.0),
            ask,
        },
    )
    .unwrap()
}

fn code_of(answer: &WireAnswer) -> &str {
    match answer {
        WireAnswer::Replied { code, .. } => code,
        other => panic!("no reply: {other:?}"),
    }
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

#[test]
fn ack_configure_and_new_run_reach_the_controller_and_forgeries_do_not() {
    // beyond_carnot is raised at 500 s of rig time (thermocouple-drift);
    // the thermocouple is reseated at 600 s. At 40x that is 12.5 s and 15 s.
    let bench = bench(
        &[
            "--scenario",
            "thermocouple-drift",
            "--speed",
            "40",
            "--duration-s",
            "700",
            "--repair-at-s",
            "600",
        ],
        &["--quiet"],
    );
    // --quiet prints no frames; the log tells when the alarm is up.
    bench.wait_for_log(
        "SELECT count(*) FROM events WHERE rule = 'beyond_carnot' AND kind = 'raised'",
        Duration::from_secs(40),
    );

    let ack = bench.operator(&["ack", "--rule", "beyond_carnot"]);
    assert_eq!(ack.status.code(), Some(0), "{}", text(&ack));
    assert!(
        text(&ack).contains("acknowledge beyond_carnot applied"),
        "{}",
        text(&ack)
    );

    let rig = bench.dir.path().join("rig.toml");
    std::fs::write(&rig, "ambient_k = 293.15\n[alarms]\nhot_max_k = 900.0\n").unwrap();
    let configure = bench.operator(&["configure", rig.to_str().unwrap()]);
    assert_eq!(configure.status.code(), Some(0), "{}", text(&configure));
    // What the file validates to, as the controller must now run it.
    let expected = heatbound::config::RigFile {
        ambient_k: Some(293.15),
        alarms: Some(heatbound::config::AlarmsFile {
            hot_max_k: Some(900.0),
            ..Default::default()
        }),
        ..Default::default()
    }
    .validate()
    .unwrap();
    assert_ne!(
        Hello::config_digest(&expected),
        Hello::config_digest(&RigConfig::default())
    );
    let digest = format!("{:08x}", Hello::config_digest(&expected));
    assert!(text(&configure).contains(&digest), "{}", text(&configure));

    let new_run = bench.operator(&["new-run"]);
    assert_eq!(new_run.status.code(), Some(0), "{}", text(&new_run));

    // A forgery: sealed for this rig and session, with another key.
    let (rig_id, session, last): (String, u32, u32) = bench
        .read_log()
        .query_row(
            "SELECT rig_id, session, last_counter FROM hellos ORDER BY ord DESC LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .unwrap();
    let to = Addressee {
        rig_id: RigId::new(&rig_id).unwrap(),
        session,
    };
    let mut buf = [0u8; wire::MAX_COMMAND_LEN];
    let forged = CommandFrame {
        counter: last + 100,
        command: WireCommand::Acknowledge(None),
    };
    let n = wire::encode_command(
        &forged,
        Some(&Authenticator::new(&CommandKey::from_bytes([0x42; 32]))),
        &to,
        &mut buf,
    )
    .unwrap();
    let answer = ask(
        &bench,
        WireAsk::Forward {
            frame_hex: hex(&buf[..n]),
        },
    );
    assert_eq!(code_of(&answer), "failed_authentication");
    assert_eq!(control::exit_code(&answer), 1);

    // A replay: the applied acknowledge's own bytes, sent again.
    let sealed: Vec<u8> = bench
        .read_log()
        .query_row(
            "SELECT sealed FROM commands WHERE command = 'ack' AND outcome = 'applied'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    let answer = ask(
        &bench,
        WireAsk::Forward {
            frame_hex: hex(&sealed),
        },
    );
    assert_eq!(code_of(&answer), "replayed");

    // The thermocouple is reseated at 600 s: the condition clears, and the
    // acknowledged alarm with it. negative_entropy_production, raised by
    // the same fault and latching, was never acknowledged: it holds the
    // trip until the operator acknowledges everything.
    bench.wait_for_log(
        "SELECT count(*) FROM events WHERE rule = 'beyond_carnot' AND kind = 'cleared'",
        Duration::from_secs(30),
    );
    bench.wait_for_log(
        "SELECT count(*) FROM summaries WHERE t_ms > 610000 AND status & 4 != 0",
        Duration::from_secs(10),
    );
    let ack_all = bench.operator(&["ack"]);
    assert_eq!(ack_all.status.code(), Some(0), "{}", text(&ack_all));
    bench.wait_for_log(
        "SELECT count(*) FROM events WHERE rule = 'negative_entropy_production' AND kind = 'cleared'",
        Duration::from_secs(10),
    );
    let (_dir, db) = bench.stop();

    let log = Connection::open_with_flags(&db, OpenFlags::SQLITE_OPEN_READ_ONLY).unwrap();
    let commands: Vec<(String, String, String, Option<String>)> = log
        .prepare("SELECT origin, command, outcome, reply_code FROM commands ORDER BY id")
        .unwrap()
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    let find = |command: &str, outcome: &str, code: &str| {
        commands
            .iter()
            .any(|c| c.1 == command && c.2 == outcome && c.3.as_deref() == Some(code))
    };
    assert!(find("ack", "applied", "applied"), "{commands:?}");
    assert!(find("configure", "applied", "applied"), "{commands:?}");
    assert!(find("new_run", "applied", "applied"), "{commands:?}");
    assert!(
        find("ack", "rejected", "failed_authentication"),
        "{commands:?}"
    );
    assert!(find("ack", "rejected", "replayed"), "{commands:?}");
    assert!(
        commands
            .iter()
            .any(|c| c.0.starts_with("heatbound ack (pid ")),
        "{commands:?}"
    );
    // The controller's own record: the acknowledge, then the clear.
    let kinds: Vec<String> = log
        .prepare("SELECT kind FROM events WHERE rule = 'beyond_carnot' ORDER BY ord")
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert_eq!(kinds, ["raised", "acknowledged", "cleared"]);
    // The trip stayed on while the acknowledged condition held, and dropped
    // once it cleared: status bit 2 of the summaries.
    let trips: Vec<(i64, i64)> = log
        .prepare("SELECT t_ms, status & 4 FROM summaries ORDER BY ord")
        .unwrap()
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    let ack_t: i64 = log
        .query_row(
            "SELECT t_ms FROM events WHERE rule = 'beyond_carnot' AND kind = 'acknowledged'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    let clear_t: i64 = log
        .query_row(
            "SELECT max(t_ms) FROM events WHERE kind = 'cleared' AND severity = 'trip'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    let latched: Vec<String> = log
        .prepare("SELECT kind FROM events WHERE rule = 'negative_entropy_production' ORDER BY ord")
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    // Raised, held after its condition cleared, reset by the acknowledge.
    assert_eq!(latched, ["raised", "acknowledged", "cleared"]);
    assert!(
        trips
            .iter()
            .filter(|(t, _)| *t > ack_t && *t < 600_000)
            .all(|(_, trip)| *trip != 0),
        "the trip dropped before the condition cleared"
    );
    assert!(
        trips
            .iter()
            .filter(|(t, _)| *t > clear_t)
            .all(|(_, trip)| *trip == 0),
        "the trip stayed after every trip alarm cleared"
    );
    // The configuration and the new run: Hellos with the new digest and
    // higher run counters.
    let hellos: Vec<(u32, i64)> = log
        .prepare("SELECT config_digest, run_counter FROM hellos ORDER BY ord")
        .unwrap()
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert!(
        hellos
            .iter()
            .any(|(d, run)| *d == Hello::config_digest(&expected) && *run >= 1),
        "{hellos:?}"
    );
    assert!(hellos.iter().any(|(_, run)| *run == 2), "{hellos:?}");
    drop(log);

    // The log still audits: new runs and configurations are announced.
    let audit = heatbound().arg("audit").arg(&db).output().unwrap();
    assert_eq!(audit.status.code(), Some(0), "{}", text(&audit));
}

impl Bench {
    /// Waits until `sql` (a count) is above zero in the log.
    fn wait_for_log(&self, sql: &str, within: Duration) {
        let until = Instant::now() + within;
        loop {
            if self.count(sql) > 0 {
                return;
            }
            assert!(Instant::now() < until, "{sql}: nothing within {within:?}");
            std::thread::sleep(Duration::from_millis(200));
        }
    }
}

/// A key file of `bytes`, with permission bits `mode`.
fn key_file(dir: &Path, name: &str, bytes: [u8; 32], mode: u32) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, hex(&bytes)).unwrap();
    std::fs::set_permissions(&path, std::fs::Permissions::from_mode(mode)).unwrap();
    path
}

#[test]
fn a_key_file_others_can_read_is_refused_and_keys_must_match() {
    let dir = tempfile::tempdir().unwrap();
    let open = key_file(dir.path(), "open.key", [1; 32], 0o644);
    let out = heatbound()
        .args(["watch", "--tcp", "127.0.0.1:9", "--db"])
        .arg(dir.path().join("x.sqlite"))
        .arg("--key-file")
        .arg(&open)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "{}", text(&out));
    assert!(
        text(&out).contains("can be read by others"),
        "{}",
        text(&out)
    );
    // The key itself is never printed.
    assert!(!text(&out).contains(&hex(&[1; 32])), "{}", text(&out));

    let rig_key = key_file(dir.path(), "rig.key", [7; 32], 0o600);
    let other_key = key_file(dir.path(), "other.key", [8; 32], 0o600);
    let sim = [
        "--scenario",
        "steady",
        "--speed",
        "20",
        "--duration-s",
        "300",
    ];
    let mut sim_args = sim.to_vec();
    sim_args.extend(["--key-file", rig_key.to_str().unwrap()]);

    // The same key on both ends: applied.
    let bench_ok = bench(
        &sim_args,
        &["--quiet", "--key-file", rig_key.to_str().unwrap()],
    );
    wait_for_hello(&bench_ok);
    let out = bench_ok.operator(&["ack"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    drop(bench_ok);

    // Another key at the watch: the controller refuses, exit 1.
    let bench_bad = bench(
        &sim_args,
        &["--quiet", "--key-file", other_key.to_str().unwrap()],
    );
    wait_for_hello(&bench_bad);
    let out = bench_bad.operator(&["ack"]);
    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    assert!(
        text(&out).contains("failed_authentication"),
        "{}",
        text(&out)
    );
}

/// Waits until the watch has the controller's Hello.
fn wait_for_hello(bench: &Bench) {
    bench.wait_for_log("SELECT count(*) FROM hellos", Duration::from_secs(20));
}

#[test]
fn with_no_watch_running_the_commands_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let runtime = runtime_dir(dir.path());
    for args in [vec!["ack"], vec!["new-run"]] {
        let out = heatbound()
            .args(&args)
            .env("XDG_RUNTIME_DIR", &runtime)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "{}", text(&out));
        assert!(
            text(&out).contains("no heatbound watch is running"),
            "{}",
            text(&out)
        );
    }
    // A configuration is checked before anything is sent.
    let bad = dir.path().join("bad.toml");
    std::fs::write(&bad, "window_samples = 1\n").unwrap();
    let out = heatbound()
        .args(["configure"])
        .arg(&bad)
        .env("XDG_RUNTIME_DIR", &runtime)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "{}", text(&out));
    assert!(text(&out).contains("window_samples"), "{}", text(&out));
}
