//! Many rigs, one lab, against a real broker: Debian's mosquitto, started
//! by each test on a free loopback port with a config the test writes (a
//! password file; a TLS listener with certificates the test makes), and
//! stopped by it.
//!
//! Without `mosquitto` on the PATH these tests say so and pass, unless
//! `HEATBOUND_REQUIRE_BROKER` is set (`.ci/run` sets it after installing
//! the broker), when they fail.
use std::collections::BTreeMap;
use std::io::{BufRead, BufReader};
use std::net::TcpListener;
use std::os::unix::fs::PermissionsExt;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::mpsc::{self, Receiver};
use std::time::{Duration, Instant};

use assert_cmd::cargo::CommandCargoExt as _;
use heatbound::wire::{
    self, Addressee, Authenticator, Command as WireCommand, CommandFrame, CommandKey, RigId,
};
use rusqlite::{Connection, OpenFlags};

const USER: &str = "bench";
const PASSWORD: &str = "correct horse";

fn heatbound() -> Command {
    Command::cargo_bin("heatbound").unwrap()
}

/// Whether the broker is here; panics if it must be and is not.
fn broker_available() -> bool {
    let found = Command::new("mosquitto")
        .arg("-h")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok();
    if !found {
        assert!(
            std::env::var_os("HEATBOUND_REQUIRE_BROKER").is_none(),
            "mosquitto is not installed, and HEATBOUND_REQUIRE_BROKER says the broker tests must run"
        );
        eprintln!(
            "SKIPPED: mosquitto is not installed (apt-get install mosquitto); broker tests not run"
        );
    }
    found
}

fn free_port() -> u16 {
    TcpListener::bind("127.0.0.1:0")
        .unwrap()
        .local_addr()
        .unwrap()
        .port()
}

/// Forwards a child's lines to a channel, draining after the receiver is gone.
fn lines_of(r: impl std::io::Read + Send + 'static) -> Receiver<String> {
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        for line in BufReader::new(r).lines().map_while(Result::ok) {
            let _ = tx.send(line);
        }
    });
    rx
}

fn is_root() -> bool {
    rustix::process::geteuid().is_root()
}

/// Files mosquitto reads: owned by its user when it runs as root (it drops
/// to `mosquitto`), readable by it alone.
fn hand_to_broker(path: &Path) {
    std::fs::set_permissions(path, std::fs::Permissions::from_mode(0o600)).unwrap();
    if is_root() {
        let ok = Command::new("chown")
            .arg("mosquitto:mosquitto")
            .arg(path)
            .status()
            .unwrap();
        assert!(ok.success(), "chown {} for the broker", path.display());
    }
}

/// A mosquitto on a loopback port, with a password file.
struct Broker {
    dir: PathBuf,
    port: u16,
    conf: PathBuf,
    child: Option<Child>,
    log: PathBuf,
}

impl Broker {
    /// Writes the config (`extra` lines appended) and starts the broker.
    fn start(dir: &Path, extra: &str) -> Broker {
        let dir = dir.join("broker");
        std::fs::create_dir_all(&dir).unwrap();
        // The broker's user must reach its files.
        std::fs::set_permissions(&dir, std::fs::Permissions::from_mode(0o755)).unwrap();
        if let Some(parent) = dir.parent() {
            std::fs::set_permissions(parent, std::fs::Permissions::from_mode(0o755)).unwrap();
        }
        let passwd = dir.join("passwd");
        let made = Command::new("mosquitto_passwd")
            .args(["-c", "-b"])
            .arg(&passwd)
            .args([USER, PASSWORD])
            .status()
            .unwrap();
        assert!(made.success(), "mosquitto_passwd");
        hand_to_broker(&passwd);
        let port = free_port();
        let conf = dir.join("mosquitto.conf");
        std::fs::write(
            &conf,
            format!(
                "listener {port} 127.0.0.1\nallow_anonymous false\npassword_file {}\npersistence false\nmax_queued_messages 100000\nlog_dest stderr\nlog_type error\nlog_type warning\nlog_type notice\n{extra}",
                passwd.display()
            ),
        )
        .unwrap();
        let mut broker = Broker {
            log: dir.join("broker.log"),
            dir,
            port,
            conf,
            child: None,
        };
        broker.spawn();
        broker
    }

    fn spawn(&mut self) {
        let log = std::fs::OpenOptions::new()
            .create(true)
            .append(true)
            .open(&self.log)
            .unwrap();
        let child = Command::new("mosquitto")
            .arg("-c")
            .arg(&self.conf)
            .stdout(Stdio::null())
            .stderr(log)
            .spawn()
            .unwrap();
        self.child = Some(child);
        let deadline = Instant::now() + Duration::from_secs(10);
        while std::net::TcpStream::connect(("127.0.0.1", self.port)).is_err() {
            assert!(
                Instant::now() < deadline,
                "mosquitto did not start: {}",
                self.log_text()
            );
            std::thread::sleep(Duration::from_millis(50));
        }
    }

    fn url(&self) -> String {
        format!("mqtt://127.0.0.1:{}", self.port)
    }

    /// SIGKILL: nothing saved, every connection cut.
    fn kill(&mut self) {
        if let Some(mut c) = self.child.take() {
            let _ = c.kill();
            let _ = c.wait();
        }
    }

    fn log_text(&self) -> String {
        std::fs::read_to_string(&self.log).unwrap_or_default()
    }
}

impl Drop for Broker {
    fn drop(&mut self) {
        self.kill();
        let _ = &self.dir;
    }
}

/// Kills every child left when a test ends, passing or failing.
#[derive(Default)]
struct Children(Vec<Child>);

impl Drop for Children {
    fn drop(&mut self) {
        for c in &mut self.0 {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

fn sigterm(child: &mut Child) -> std::process::ExitStatus {
    let _ = Command::new("kill")
        .args(["-TERM", &child.id().to_string()])
        .status();
    child.wait().unwrap()
}

/// A simulated rig serving its stream; returns it and its address.
fn simulate(rig: &str, runtime: &Path) -> (Child, String) {
    let mut sim = heatbound()
        .args([
            "simulate",
            "--listen",
            "0",
            "--speed",
            "10",
            "--duration-s",
            "3000",
            "--rig-id",
            rig,
        ])
        .env("XDG_RUNTIME_DIR", runtime)
        .env_remove("HEATBOUND_KEY_FILE")
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let lines = lines_of(sim.stderr.take().unwrap());
    let addr = loop {
        let line = lines
            .recv_timeout(Duration::from_secs(20))
            .expect("simulate says where it listens");
        if let Some(a) = line.strip_prefix("heatbound simulate: listening on ") {
            break a.to_string();
        }
    };
    (sim, addr)
}

fn watch(addr: &str, db: &Path, broker: &str, runtime: &Path, err: &Path) -> Child {
    let err = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(err)
        .unwrap();
    heatbound()
        .args([
            "watch",
            "--tcp",
            addr,
            "--quiet",
            "--publish",
            broker,
            "--db",
        ])
        .arg(db)
        .env("XDG_RUNTIME_DIR", runtime)
        .env("HEATBOUND_MQTT_USER", USER)
        .env("HEATBOUND_MQTT_PASSWORD", PASSWORD)
        .env_remove("HEATBOUND_KEY_FILE")
        .stdout(Stdio::null())
        .stderr(err)
        .spawn()
        .unwrap()
}

fn read_only(path: &Path) -> Connection {
    Connection::open_with_flags(path, OpenFlags::SQLITE_OPEN_READ_ONLY).unwrap()
}

/// (seq, t_ms) of every summary of `rig` in `db` (every run; in a lab log,
/// the runs named for the rig). Empty while the log is being created.
fn summaries(db: &Path, rig: Option<&str>) -> Vec<(i64, i64)> {
    let Ok(c) = Connection::open_with_flags(db, OpenFlags::SQLITE_OPEN_READ_ONLY) else {
        return Vec::new();
    };
    let sql = match rig {
        None => "SELECT seq, t_ms FROM summaries WHERE ?1 IS NULL",
        Some(_) => {
            "SELECT s.seq, s.t_ms FROM summaries s JOIN runs r ON r.id = s.run_id WHERE r.rig = ?1"
        }
    };
    let Ok(mut st) = c.prepare(sql) else {
        return Vec::new();
    };
    let mut out: Vec<(i64, i64)> = st
        .query_map([rig], |r| Ok((r.get(0)?, r.get(1)?)))
        .map(|rows| rows.filter_map(Result::ok).collect())
        .unwrap_or_default();
    out.sort_unstable();
    out
}

/// (seq, t_ms) of the summaries a rig's watch received before `host_ms`.
fn received_before(db: &Path, host_ms: i64) -> Vec<(i64, i64)> {
    let Ok(c) = Connection::open_with_flags(db, OpenFlags::SQLITE_OPEN_READ_ONLY) else {
        return Vec::new();
    };
    let Ok(mut st) = c.prepare("SELECT seq, t_ms FROM summaries WHERE host_ms < ?1") else {
        return Vec::new();
    };
    st.query_map([host_ms], |r| Ok((r.get(0)?, r.get(1)?)))
        .map(|rows| rows.filter_map(Result::ok).collect())
        .unwrap_or_default()
}

fn wait_until(what: &str, timeout: Duration, mut ok: impl FnMut() -> bool) {
    let deadline = Instant::now() + timeout;
    while !ok() {
        assert!(Instant::now() < deadline, "timed out waiting for {what}");
        std::thread::sleep(Duration::from_millis(200));
    }
}

/// A command for `rig`'s current session, sealed with `key`.
fn sealed_ack(rig_db: &Path, key: &CommandKey) -> Vec<u8> {
    let c = read_only(rig_db);
    let (rig, session, last): (String, u32, u32) = c
        .query_row(
            "SELECT rig_id, session, last_counter FROM hellos ORDER BY run_id DESC, ord DESC LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .unwrap();
    let to = Addressee {
        rig_id: RigId::new(&rig).unwrap(),
        session,
    };
    let frame = CommandFrame {
        counter: last + 1,
        command: WireCommand::Acknowledge(None),
    };
    let mut buf = [0u8; wire::MAX_COMMAND_LEN];
    let n = wire::encode_command(&frame, Some(&Authenticator::new(key)), &to, &mut buf).unwrap();
    buf[..n].to_vec()
}

/// Publishes `payload` on `topic` with the test's login and waits for one
/// message on `answer_topic`.
fn publish_and_wait(port: u16, topic: &str, payload: Vec<u8>, answer_topic: &str) -> String {
    use rumqttc::{Client, Event, MqttOptions, Packet, QoS};
    let mut o = MqttOptions::new(format!("test-{}", std::process::id()), "127.0.0.1", port);
    o.set_credentials(USER, PASSWORD);
    o.set_keep_alive(Duration::from_secs(5));
    let (client, mut conn) = Client::new(o, 16);
    let deadline = Instant::now() + Duration::from_secs(30);
    let mut sent = false;
    while Instant::now() < deadline {
        match conn.recv_timeout(Duration::from_millis(200)) {
            Ok(Ok(Event::Incoming(Packet::ConnAck(_)))) => {
                client.subscribe(answer_topic, QoS::AtLeastOnce).unwrap();
            }
            Ok(Ok(Event::Incoming(Packet::SubAck(_)))) if !sent => {
                client
                    .publish(topic, QoS::AtLeastOnce, false, payload.clone())
                    .unwrap();
                sent = true;
            }
            Ok(Ok(Event::Incoming(Packet::Publish(p)))) if p.topic == answer_topic => {
                return String::from_utf8_lossy(&p.payload).into_owned();
            }
            _ => {}
        }
    }
    panic!("no answer on {answer_topic}");
}

#[test]
fn three_rigs_a_broker_restart_and_a_watch_restart_lose_nothing() {
    if !broker_available() {
        return;
    }
    let mut dir = tempfile::tempdir().unwrap();
    if std::env::var_os("HEATBOUND_KEEP_TEST_DIR").is_some() {
        dir.disable_cleanup(true);
        eprintln!("test files in {}", dir.path().display());
    }
    let root = dir.path();
    let runtime = root.join("run");
    std::fs::create_dir(&runtime).unwrap();
    std::fs::set_permissions(&runtime, std::fs::Permissions::from_mode(0o700)).unwrap();
    let mut broker = Broker::start(root, "");
    let url = broker.url();
    let mut kids = Children::default();

    let lab_db = root.join("lab.sqlite");
    let lab_err = root.join("lab.err");
    let lab = heatbound()
        .args(["lab", "--broker", &url, "--json", "--db"])
        .arg(&lab_db)
        .env("HEATBOUND_MQTT_USER", USER)
        .env("HEATBOUND_MQTT_PASSWORD", PASSWORD)
        .stdout(Stdio::null())
        .stderr(std::fs::File::create(&lab_err).unwrap())
        .spawn()
        .unwrap();
    kids.0.push(lab);

    let rigs = ["rig-1", "rig-2", "rig-3"];
    let mut addrs = Vec::new();
    let mut watches = BTreeMap::new();
    for rig in rigs {
        let (sim, addr) = simulate(rig, &runtime);
        kids.0.push(sim);
        let db = root.join(format!("{rig}.sqlite"));
        let w = watch(&addr, &db, &url, &runtime, &root.join(format!("{rig}.err")));
        watches.insert(rig, w);
        addrs.push(addr);
    }
    wait_until(
        "30 summaries of each rig in the lab",
        Duration::from_secs(60),
        || lab_db.exists() && rigs.iter().all(|r| summaries(&lab_db, Some(r)).len() >= 30),
    );

    // The broker dies (nothing persisted) and comes back on the same port.
    broker.kill();
    std::thread::sleep(Duration::from_secs(2));
    broker.spawn();
    // A watch dies without a word and is started again on the same log.
    let w2 = watches.get_mut("rig-2").unwrap();
    let _ = w2.kill();
    let _ = w2.wait();
    std::thread::sleep(Duration::from_secs(1));
    let again = watch(
        &addrs[1],
        &root.join("rig-2.sqlite"),
        &url,
        &runtime,
        &root.join("rig-2.err"),
    );
    watches.insert("rig-2", again);
    let before: usize = summaries(&lab_db, None).len();
    wait_until(
        "the lab to go on after the restarts",
        Duration::from_secs(60),
        || summaries(&lab_db, None).len() >= before + 60,
    );

    // A forged acknowledge, straight to the broker: refused by rig-1's watch.
    let forged = sealed_ack(&root.join("rig-1.sqlite"), &CommandKey::from_bytes([7; 32]));
    let answer = publish_and_wait(
        broker.port,
        "heatbound/rigs/rig-1/command",
        forged,
        "heatbound/rigs/rig-1/command-result",
    );
    assert!(answer.contains("\"outcome\":\"refused\""), "{answer}");
    // From the lab, `ack --broker` seals with the rig's key for the session
    // the rig's retained status names; the controller applies it.
    let ack_from_lab = || {
        heatbound()
            .args([
                "ack",
                "--broker",
                &url,
                "--rig",
                "rig-3",
                "--timeout-s",
                "30",
            ])
            .env("HEATBOUND_MQTT_USER", USER)
            .env("HEATBOUND_MQTT_PASSWORD", PASSWORD)
            .env_remove("HEATBOUND_KEY_FILE")
            .output()
            .unwrap()
    };
    let out = ack_from_lab();
    let said = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success() && said.contains("acknowledge all") && said.contains(": applied"),
        "a genuine acknowledge from the lab should be applied: {said} {}",
        String::from_utf8_lossy(&out.stderr)
    );
    // The rig's own log holds it, relayed from the lab and applied.
    let applied: i64 = read_only(&root.join("rig-3.sqlite"))
        .query_row(
            "SELECT count(*) FROM commands WHERE origin LIKE 'lab via %' AND outcome = 'applied'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(
        applied, 1,
        "the lab's acknowledge is in rig-3's log, applied"
    );
    // A second one right after: the status has caught up with the counter.
    std::thread::sleep(Duration::from_secs(3));
    let again = ack_from_lab();
    assert!(
        again.status.success(),
        "{}",
        String::from_utf8_lossy(&again.stdout)
    );

    // While every watch still runs (and can answer), the lab catches up
    // with every rig's log, the killed watch's rows included.
    let settled_at = heatbound_host::link::now_ms() + 2_000;
    wait_until(
        "the lab to catch up with every rig",
        Duration::from_secs(60),
        || {
            rigs.iter().all(|r| {
                let lab = summaries(&lab_db, Some(r));
                let own = received_before(&root.join(format!("{r}.sqlite")), settled_at);
                own.iter().all(|s| lab.binary_search(s).is_ok())
            }) && heatbound_host::link::now_ms() > settled_at + 1_000
        },
    );
    // The watches end cleanly: they publish what is left and say so.
    for (rig, w) in watches.iter_mut() {
        let status = sigterm(w);
        assert!(status.success(), "{rig}'s watch ended with {status}");
    }
    let rig_logs: BTreeMap<&str, Vec<(i64, i64)>> = rigs
        .iter()
        .map(|r| (*r, summaries(&root.join(format!("{r}.sqlite")), None)))
        .collect();
    wait_until(
        "every rig's summaries in the lab",
        Duration::from_secs(60),
        || {
            rigs.iter().all(|r| {
                let lab = summaries(&lab_db, Some(r));
                rig_logs[r].iter().all(|s| lab.binary_search(s).is_ok())
            })
        },
    );
    let mut lab = kids.0.remove(0);
    assert!(sigterm(&mut lab).success(), "lab ended badly");
    let lab_text = std::fs::read_to_string(&lab_err).unwrap();
    let closing = lab_text
        .lines()
        .find(|l| l.contains("records taken"))
        .unwrap_or_else(|| panic!("the lab's closing line: {lab_text}"));
    eprintln!("{closing}");
    for rig in rigs {
        let text = std::fs::read_to_string(root.join(format!("{rig}.err"))).unwrap();
        for line in text.lines().filter(|l| l.contains("published:")) {
            eprintln!("{rig}: {line}");
        }
    }

    for rig in rigs {
        let lab = summaries(&lab_db, Some(rig));
        // Exactly once: no summary twice.
        let mut unique = lab.clone();
        unique.dedup();
        assert_eq!(
            unique.len(),
            lab.len(),
            "{rig}: a summary twice in the lab log"
        );
        // Every summary of the rig's own log is there.
        for s in &rig_logs[rig] {
            assert!(
                lab.binary_search(s).is_ok(),
                "{rig}: summary {s:?} missing from the lab"
            );
        }
        // Anything more can only be rows the killed watch published before
        // its last batch reached its own disk.
        let extra = lab.len() - rig_logs[rig].len();
        if rig == "rig-2" {
            assert!(
                extra <= 10,
                "{rig}: {extra} summaries the rig's log does not have"
            );
        } else {
            assert_eq!(extra, 0, "{rig}: summaries the rig's log does not have");
        }
        let audit = heatbound()
            .args(["audit", "--rig", rig])
            .arg(&lab_db)
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&audit.stdout);
        assert!(audit.status.success(), "audit --rig {rig}:\n{text}");
        assert!(text.contains("every one trustworthy"), "{text}");
        if rig == "rig-2" {
            // The restarted watch joined the stream between a summary and
            // the Hello it asked for: the summaries before that Hello are
            // the same controller session, checked with its settings, in
            // the rig's own log as in the lab's.
            assert!(text.contains("rig rig-2, run"), "{text}");
            let own = heatbound()
                .args(["audit", "--run", "2"])
                .arg(root.join("rig-2.sqlite"))
                .output()
                .unwrap();
            let own_text = String::from_utf8_lossy(&own.stdout);
            assert!(own.status.success(), "rig-2's own log, run 2:\n{own_text}");
        }
    }
    // The forged command is in rig-1's log, refused, and never sent.
    let refused: i64 = read_only(&root.join("rig-1.sqlite"))
        .query_row(
            "SELECT count(*) FROM commands WHERE outcome = 'refused' AND origin LIKE 'lab via %'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(refused, 1, "the forged acknowledge is logged as refused");
}

#[test]
fn a_wrong_password_is_refused_and_said() {
    if !broker_available() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path(), "");
    let login = dir.path().join("login.toml");
    std::fs::write(&login, "user = \"bench\"\npassword = \"not-the-pw-7x\"\n").unwrap();
    std::fs::set_permissions(&login, std::fs::Permissions::from_mode(0o600)).unwrap();
    let out = heatbound()
        .args([
            "lab",
            "--broker",
            &broker.url(),
            "--max-duration-s",
            "2",
            "--broker-login",
        ])
        .arg(&login)
        .arg("--db")
        .arg(dir.path().join("lab.sqlite"))
        .env_remove("HEATBOUND_MQTT_USER")
        .env_remove("HEATBOUND_MQTT_PASSWORD")
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("refused the login"), "{err}");
    // The password is never echoed.
    assert!(!err.contains("not-the-pw-7x"), "{err}");
    let log = broker.log_text();
    assert!(
        log.contains("not authorised"),
        "the broker logs the refusal: {log}"
    );
    // A login file others can read is refused before anything connects.
    std::fs::set_permissions(&login, std::fs::Permissions::from_mode(0o644)).unwrap();
    let out = heatbound()
        .args([
            "lab",
            "--broker",
            &broker.url(),
            "--max-duration-s",
            "1",
            "--broker-login",
        ])
        .arg(&login)
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("chmod 600"));
}

#[test]
fn tls_with_a_client_certificate_carries_a_capture_to_the_lab() {
    if !broker_available() {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let root = dir.path();
    // A CA, a server certificate for 127.0.0.1 and a client certificate.
    let ca_key = rcgen::KeyPair::generate().unwrap();
    let mut ca_params = rcgen::CertificateParams::new(Vec::<String>::new()).unwrap();
    ca_params.is_ca = rcgen::IsCa::Ca(rcgen::BasicConstraints::Unconstrained);
    ca_params
        .distinguished_name
        .push(rcgen::DnType::CommonName, "heatbound test CA");
    let ca = ca_params.self_signed(&ca_key).unwrap();
    let issuer = rcgen::Issuer::new(ca_params, ca_key);
    let server_key = rcgen::KeyPair::generate().unwrap();
    let server = rcgen::CertificateParams::new(vec!["127.0.0.1".to_string()])
        .unwrap()
        .signed_by(&server_key, &issuer)
        .unwrap();
    let client_key = rcgen::KeyPair::generate().unwrap();
    let mut client_params = rcgen::CertificateParams::new(Vec::<String>::new()).unwrap();
    client_params
        .distinguished_name
        .push(rcgen::DnType::CommonName, "bench-pc");
    let client = client_params.signed_by(&client_key, &issuer).unwrap();
    let bdir = root.join("broker");
    std::fs::create_dir_all(&bdir).unwrap();
    let write = |name: &str, text: String| {
        let p = bdir.join(name);
        std::fs::write(&p, text).unwrap();
        p
    };
    let ca_pem = write("ca.pem", ca.pem());
    let server_pem = write("server.pem", server.pem());
    let server_key_pem = write("server.key", server_key.serialize_pem());
    let client_pem = root.join("client.pem");
    std::fs::write(&client_pem, client.pem()).unwrap();
    let client_key_pem = root.join("client.key");
    std::fs::write(&client_key_pem, client_key.serialize_pem()).unwrap();
    std::fs::set_permissions(&client_key_pem, std::fs::Permissions::from_mode(0o600)).unwrap();
    for p in [&ca_pem, &server_pem, &server_key_pem] {
        hand_to_broker(p);
    }
    let tls_port = free_port();
    let broker = Broker::start(
        root,
        &format!(
            "listener {tls_port} 127.0.0.1\ncafile {}\ncertfile {}\nkeyfile {}\nrequire_certificate true\n",
            ca_pem.display(),
            server_pem.display(),
            server_key_pem.display()
        ),
    );
    let url = format!("mqtts://127.0.0.1:{tls_port}");
    let capture = root.join("run.bin");
    let made = heatbound()
        .args([
            "simulate",
            "--duration-s",
            "60",
            "--rig-id",
            "tls-rig",
            "--out",
        ])
        .arg(&capture)
        .output()
        .unwrap();
    assert!(made.status.success());
    let lab_db = root.join("lab.sqlite");
    let tls_args = |c: &mut Command| {
        c.arg("--ca")
            .arg(&ca_pem)
            .arg("--client-cert")
            .arg(&client_pem)
            .arg("--client-key")
            .arg(&client_key_pem)
            .env("HEATBOUND_MQTT_USER", USER)
            .env("HEATBOUND_MQTT_PASSWORD", PASSWORD);
    };
    let mut lab = heatbound();
    lab.args([
        "lab",
        "--broker",
        &url,
        "--json",
        "--max-duration-s",
        "20",
        "--db",
    ])
    .arg(&lab_db)
    .stdout(Stdio::null())
    .stderr(Stdio::piped());
    tls_args(&mut lab);
    let mut lab = lab.spawn().unwrap();
    let lab_lines = lines_of(lab.stderr.take().unwrap());
    loop {
        let line = lab_lines
            .recv_timeout(Duration::from_secs(20))
            .expect("the lab connects over TLS");
        if line.contains("connected to mqtts://") {
            break;
        }
    }
    let mut watch = heatbound();
    watch
        .args(["watch", "--quiet", "--publish", &url, "--input"])
        .arg(&capture)
        .arg("--db")
        .arg(root.join("rig.sqlite"));
    tls_args(&mut watch);
    let out = watch.output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    assert!(err.contains("records acknowledged by the broker"), "{err}");
    wait_until(
        "the capture's summaries in the lab",
        Duration::from_secs(20),
        || summaries(&lab_db, Some("tls-rig")).len() == 60,
    );
    assert!(sigterm(&mut lab).success());
    drop(broker);
    // Without the client certificate the broker does not let the lab in.
    let mut bare = heatbound();
    bare.args(["lab", "--broker", &url, "--max-duration-s", "2", "--ca"])
        .arg(&ca_pem)
        .arg("--db")
        .arg(root.join("other.sqlite"))
        .env("HEATBOUND_MQTT_USER", USER)
        .env("HEATBOUND_MQTT_PASSWORD", PASSWORD);
    let _ = bare.output().unwrap();
}
