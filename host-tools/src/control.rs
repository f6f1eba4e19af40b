//! The local control socket: how `heatbound ack`, `configure` and `new-run`
//! reach the process that holds the link to the controller (`watch`, or
//! `demo`).
//!
//! ```text
//! heatbound ack --> find the socket --> {"ask":"ack",...}\n --> Server (in watch)
//!     --> downlink::Request --> the link holder's loop --> the controller --> Reply
//!     <-- {"result":"replied","code":"applied",...}\n <-- Answer
//! ```
//!
//! The socket is a Unix domain socket, never a network port: it lives in a
//! folder only its owner may enter (`$XDG_RUNTIME_DIR/heatbound`, else
//! `/tmp/heatbound-UID`, mode 700), and the socket itself is mode 600. Each
//! link holder binds `watch-PID.sock` there, so with one `watch` running
//! for the user the commands find it with no options; with several,
//! `--rig ID` picks one by the rig id of its controller's Hello. One JSON
//! object per line each way, one request per connection
//! (`docs/control-socket.md`).
use std::io::{BufRead, BufReader, ErrorKind, Write};
use std::os::unix::fs::{MetadataExt, PermissionsExt};
use std::os::unix::net::{UnixListener, UnixStream};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Sender};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::Duration;

use heatbound::alarm::RuleId;
use heatbound::config::RigConfig;
use heatbound::wire::ReplyCode;
use serde::{Deserialize, Serialize};

use crate::downlink::{Answer, Ask, Request};

/// The longest request line a server reads (a configuration is about 2 kB).
const MAX_LINE: u64 = 64 * 1024;
/// How long a server waits for a client to send its request.
const READ_TIMEOUT: Duration = Duration::from_secs(5);
/// Timeout of a request that does not set one, seconds.
pub const DEFAULT_TIMEOUT_S: f64 = 15.0;

/// A request on the socket.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct WireRequest {
    /// Who asks, for the log.
    #[serde(default)]
    pub origin: String,
    /// How long to wait for the controller, seconds.
    #[serde(default)]
    pub timeout_s: Option<f64>,
    /// What.
    #[serde(flatten)]
    pub ask: WireAsk,
}

/// What a request asks, as it travels.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "ask", rename_all = "snake_case")]
pub enum WireAsk {
    /// Acknowledge one rule (`rule`), or all of them (`rule` absent or null).
    Ack {
        /// The rule id, e.g. `beyond_carnot`.
        #[serde(default)]
        rule: Option<RuleId>,
    },
    /// Start a new run.
    NewRun,
    /// Replace the configuration.
    Configure {
        /// The whole validated configuration.
        config: Box<RigConfig>,
    },
    /// Ask the controller for a Hello.
    Hello,
    /// Send a command sealed elsewhere, as hexadecimal bytes.
    Forward {
        /// The frame on the wire, delimiter optional.
        frame_hex: String,
    },
    /// Who is at the other end: no command is sent.
    Status,
}

/// An answer on the socket.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "result", rename_all = "snake_case")]
pub enum WireAnswer {
    /// The controller replied.
    Replied {
        /// The command's counter.
        counter: u32,
        /// `applied`, or the reason it was refused.
        code: String,
        /// The code in words.
        meaning: String,
        /// The controller's sample time of the reply, ms.
        t_ms: u32,
    },
    /// The command did not reach the controller, or no reply came.
    Unavailable {
        /// `no_link`, `no_hello`, `no_reply`, `invalid`, `busy`, `bad_request`.
        reason: String,
        /// Why, in a sentence.
        message: String,
    },
    /// The link holder's state.
    Status(LinkStatus),
}

/// What a link holder tells about itself.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct LinkStatus {
    /// The process.
    pub pid: u32,
    /// Where it reads from (`tcp:127.0.0.1:4000`, `serial:/dev/ttyUSB0`).
    pub source: String,
    /// The log it writes.
    pub db: String,
    /// Whether the link is up now.
    pub link_up: bool,
    /// The rig id of the latest Hello, if any.
    pub rig_id: Option<String>,
    /// The controller's run counter.
    pub run: Option<u32>,
    /// Whether the controller holds a command key.
    pub controller_keyed: Option<bool>,
    /// Where the host's key came from.
    pub key: String,
}

impl From<Answer> for WireAnswer {
    fn from(a: Answer) -> Self {
        match a {
            Answer::Replied {
                counter,
                code,
                t_ms,
            } => WireAnswer::Replied {
                counter,
                code: code.as_str().into(),
                meaning: code.meaning().into(),
                t_ms,
            },
            Answer::Unavailable { reason, message } => WireAnswer::Unavailable {
                reason: reason.into(),
                message,
            },
            Answer::Noted => WireAnswer::Unavailable {
                reason: "invalid".into(),
                message: "not a command".into(),
            },
        }
    }
}

/// What went wrong reaching a link holder.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ControlError {
    /// No link holder runs for this user.
    #[error(
        "no heatbound watch is running for this user (no control socket in {dir}); start `heatbound watch --serial PATH` or `--tcp HOST:PORT` first"
    )]
    NoWatch {
        /// The socket folder.
        dir: PathBuf,
    },
    /// Several run, and none was chosen.
    #[error("{count} heatbound watch processes are running ({rigs}); choose one with --rig ID")]
    Ambiguous {
        /// How many.
        count: usize,
        /// Their rigs.
        rigs: String,
    },
    /// None runs for the rig asked for.
    #[error("no heatbound watch is connected to rig {rig} (running: {rigs})")]
    NoSuchRig {
        /// The rig asked for.
        rig: String,
        /// The rigs there are.
        rigs: String,
    },
    /// The socket folder is not safe to use.
    #[error("{dir}: {why}; refusing to use it for the control socket")]
    UnsafeDir {
        /// The folder.
        dir: PathBuf,
        /// What is wrong.
        why: String,
    },
    /// Talking on the socket failed.
    #[error("{path}: {why}")]
    Io {
        /// The socket.
        path: PathBuf,
        /// The OS's words, or what was wrong with the answer.
        why: String,
    },
}

/// The folder of the control sockets, made (mode 700) if missing, and
/// checked: owned by this user, entered by no one else.
pub fn socket_dir() -> Result<PathBuf, ControlError> {
    let base = std::env::var_os("XDG_RUNTIME_DIR")
        .map(PathBuf::from)
        .filter(|p| p.is_absolute() && p.is_dir());
    let uid = rustix::process::getuid().as_raw();
    let dir = match base {
        Some(b) => b.join("heatbound"),
        None => std::env::temp_dir().join(format!("heatbound-{uid}")),
    };
    let unsafe_dir = |why: String| ControlError::UnsafeDir {
        dir: dir.clone(),
        why,
    };
    match std::fs::create_dir(&dir) {
        Ok(()) => std::fs::set_permissions(&dir, std::fs::Permissions::from_mode(0o700))
            .map_err(|e| unsafe_dir(crate::term::os_words(&e)))?,
        Err(e) if e.kind() == ErrorKind::AlreadyExists => {}
        Err(e) => return Err(unsafe_dir(crate::term::os_words(&e))),
    }
    let meta =
        std::fs::symlink_metadata(&dir).map_err(|e| unsafe_dir(crate::term::os_words(&e)))?;
    if !meta.is_dir() {
        return Err(unsafe_dir("not a folder".into()));
    }
    if meta.uid() != uid {
        return Err(unsafe_dir(format!(
            "owned by user {}, not by you",
            meta.uid()
        )));
    }
    if meta.mode() & 0o077 != 0 {
        return Err(unsafe_dir(format!(
            "others may enter it (mode {:03o})",
            meta.mode() & 0o777
        )));
    }
    Ok(dir)
}

/// A link holder's control socket, served by a thread until dropped.
pub struct Server {
    path: PathBuf,
    stop: Arc<AtomicBool>,
    thread: Option<JoinHandle<()>>,
}

impl Server {
    /// Binds `watch-PID.sock` in [`socket_dir`] and serves it: each request
    /// goes to `requests` (the link holder's loop); `status` answers
    /// `status` requests.
    pub fn start(
        requests: Sender<Request>,
        status: Arc<Mutex<LinkStatus>>,
    ) -> Result<Server, ControlError> {
        let dir = socket_dir()?;
        let path = dir.join(format!("watch-{}.sock", std::process::id()));
        let _ = std::fs::remove_file(&path);
        let io = |e: std::io::Error| ControlError::Io {
            path: path.clone(),
            why: crate::term::os_words(&e),
        };
        let listener = UnixListener::bind(&path).map_err(io)?;
        std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o600)).map_err(io)?;
        listener.set_nonblocking(true).map_err(io)?;
        let stop = Arc::new(AtomicBool::new(false));
        let thread = {
            let stop = Arc::clone(&stop);
            std::thread::spawn(move || accept_loop(&listener, &requests, &status, &stop))
        };
        Ok(Server {
            path,
            stop,
            thread: Some(thread),
        })
    }

    /// The socket's path.
    pub fn path(&self) -> &Path {
        &self.path
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::SeqCst);
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
        let _ = std::fs::remove_file(&self.path);
    }
}

fn accept_loop(
    listener: &UnixListener,
    requests: &Sender<Request>,
    status: &Arc<Mutex<LinkStatus>>,
    stop: &AtomicBool,
) {
    while !stop.load(Ordering::SeqCst) {
        match listener.accept() {
            Ok((stream, _)) => {
                let requests = requests.clone();
                let status = Arc::clone(status);
                std::thread::spawn(move || serve(stream, &requests, &status));
            }
            Err(e) if e.kind() == ErrorKind::WouldBlock => {
                std::thread::sleep(Duration::from_millis(20));
            }
            Err(_) => std::thread::sleep(Duration::from_millis(20)),
        }
    }
}

/// Answers one connection: one request line, one answer line.
fn serve(stream: UnixStream, requests: &Sender<Request>, status: &Arc<Mutex<LinkStatus>>) {
    let _ = stream.set_nonblocking(false);
    let _ = stream.set_read_timeout(Some(READ_TIMEOUT));
    let mut line = String::new();
    let Ok(reader) = stream.try_clone() else {
        return;
    };
    let read = BufReader::new(reader.take(MAX_LINE)).read_line(&mut line);
    let answer = match read {
        Ok(_) => handle(&line, requests, status),
        Err(e) => WireAnswer::Unavailable {
            reason: "bad_request".into(),
            message: format!("cannot read the request: {}", crate::term::os_words(&e)),
        },
    };
    let mut stream = stream;
    if let Ok(mut text) = serde_json::to_string(&answer) {
        text.push('\n');
        let _ = stream.write_all(text.as_bytes());
    }
}

use std::io::Read as _;

fn handle(line: &str, requests: &Sender<Request>, status: &Arc<Mutex<LinkStatus>>) -> WireAnswer {
    let bad = |message: String| WireAnswer::Unavailable {
        reason: "bad_request".into(),
        message,
    };
    let request: WireRequest = match serde_json::from_str(line.trim()) {
        Ok(r) => r,
        Err(e) => return bad(format!("not a request: {e}")),
    };
    let timeout_s = request.timeout_s.unwrap_or(DEFAULT_TIMEOUT_S);
    if !(timeout_s.is_finite() && timeout_s > 0.0 && timeout_s <= 3600.0) {
        return bad(format!("timeout_s {timeout_s} is not in (0, 3600]"));
    }
    let ask = match request.ask {
        WireAsk::Status => {
            return WireAnswer::Status(status.lock().map(|s| s.clone()).unwrap_or_default());
        }
        WireAsk::Ack { rule } => Ask::Acknowledge(rule),
        WireAsk::NewRun => Ask::NewRun,
        WireAsk::Configure { config } => Ask::Configure(config),
        WireAsk::Hello => Ask::Hello,
        WireAsk::Forward { frame_hex } => match unhex(&frame_hex) {
            Some(bytes) => Ask::Forward(bytes),
            None => return bad("frame_hex is not hexadecimal bytes".into()),
        },
    };
    let (tx, rx) = mpsc::channel();
    let timeout = Duration::from_secs_f64(timeout_s);
    let origin = if request.origin.is_empty() {
        "control socket".to_string()
    } else {
        crate::term::excerpt(&request.origin, 80)
    };
    let sent = requests.send(Request {
        origin,
        ask,
        timeout,
        answer: tx,
    });
    if sent.is_err() {
        return WireAnswer::Unavailable {
            reason: "no_link".into(),
            message: "the link holder is shutting down".into(),
        };
    }
    // The link holder answers within the timeout (it times requests out
    // itself); the margin covers a busy loop.
    match rx.recv_timeout(timeout + Duration::from_secs(5)) {
        Ok(answer) => answer.into(),
        Err(_) => WireAnswer::Unavailable {
            reason: "no_reply".into(),
            message: "the link holder did not answer in time".into(),
        },
    }
}

fn unhex(text: &str) -> Option<Vec<u8>> {
    let text = text.trim();
    if !text.len().is_multiple_of(2) {
        return None;
    }
    (0..text.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(text.get(i..i + 2)?, 16).ok())
        .collect()
}

/// Finds the socket of the link holder to talk to: `rig` picks one by the
/// rig id of its controller when several run.
pub fn find(rig: Option<&str>) -> Result<PathBuf, ControlError> {
    let dir = socket_dir()?;
    let mut live: Vec<(PathBuf, LinkStatus)> = Vec::new();
    let entries = std::fs::read_dir(&dir).map_err(|e| ControlError::Io {
        path: dir.clone(),
        why: crate::term::os_words(&e),
    })?;
    for entry in entries.flatten() {
        let path = entry.path();
        let name = entry.file_name();
        let name = name.to_string_lossy();
        if !(name.starts_with("watch-") && name.ends_with(".sock")) {
            continue;
        }
        match call(&path, &status_request()) {
            Ok(WireAnswer::Status(s)) => live.push((path, s)),
            Ok(_) => {}
            Err(_) => {
                // Nobody listens: a socket left by a process that died.
                if UnixStream::connect(&path).is_err() {
                    let _ = std::fs::remove_file(&path);
                }
            }
        }
    }
    let rigs = || {
        live.iter()
            .map(|(_, s)| {
                format!(
                    "{} (pid {})",
                    s.rig_id.as_deref().unwrap_or("rig not yet known"),
                    s.pid
                )
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    match rig {
        Some(rig) => {
            let found: Vec<&(PathBuf, LinkStatus)> = live
                .iter()
                .filter(|(_, s)| s.rig_id.as_deref() == Some(rig))
                .collect();
            match found.as_slice() {
                [(path, _)] => Ok(path.clone()),
                [] if live.is_empty() => Err(ControlError::NoWatch { dir }),
                [] => Err(ControlError::NoSuchRig {
                    rig: rig.to_string(),
                    rigs: rigs(),
                }),
                more => Err(ControlError::Ambiguous {
                    count: more.len(),
                    rigs: rigs(),
                }),
            }
        }
        None => match live.as_slice() {
            [] => Err(ControlError::NoWatch { dir }),
            [(path, _)] => Ok(path.clone()),
            more => Err(ControlError::Ambiguous {
                count: more.len(),
                rigs: rigs(),
            }),
        },
    }
}

fn status_request() -> WireRequest {
    WireRequest {
        origin: String::new(),
        timeout_s: None,
        ask: WireAsk::Status,
    }
}

/// Sends `request` on the socket at `path` and waits for the answer.
pub fn call(path: &Path, request: &WireRequest) -> Result<WireAnswer, ControlError> {
    let io = |e: std::io::Error| ControlError::Io {
        path: path.to_path_buf(),
        why: crate::term::os_words(&e),
    };
    let mut stream = UnixStream::connect(path).map_err(io)?;
    let wait = request
        .timeout_s
        .unwrap_or(DEFAULT_TIMEOUT_S)
        .clamp(0.0, 3600.0)
        + 10.0;
    stream
        .set_read_timeout(Some(Duration::from_secs_f64(wait)))
        .map_err(io)?;
    let mut text = serde_json::to_string(request).map_err(|e| ControlError::Io {
        path: path.to_path_buf(),
        why: format!("cannot write the request: {e}"),
    })?;
    text.push('\n');
    stream.write_all(text.as_bytes()).map_err(io)?;
    let mut line = String::new();
    BufReader::new(stream.take(MAX_LINE))
        .read_line(&mut line)
        .map_err(io)?;
    serde_json::from_str(line.trim()).map_err(|e| ControlError::Io {
        path: path.to_path_buf(),
        why: format!("the link holder's answer is not readable: {e}"),
    })
}

/// The exit code of a command's answer: 0 applied, 1 refused by the
/// controller, 2 not reached.
pub fn exit_code(answer: &WireAnswer) -> u8 {
    match answer {
        WireAnswer::Replied { code, .. } if code == ReplyCode::Applied.as_str() => 0,
        WireAnswer::Replied { .. } => 1,
        _ => 2,
    }
}

/// Sends `request` to the link holder at `socket`, or the one [`find`]
/// picks for `rig`, and waits for its answer.
pub fn ask(
    socket: Option<&Path>,
    rig: Option<&str>,
    request: &WireRequest,
) -> Result<WireAnswer, ControlError> {
    let path = match socket {
        Some(p) => p.to_path_buf(),
        None => find(rig)?,
    };
    call(&path, request)
}

/// The answer to `what` in one line for the operator.
///
/// ```
/// use heatbound_host::control::{WireAnswer, describe};
/// let a = WireAnswer::Replied { counter: 4, code: "replayed".into(),
///     meaning: "the controller refused a repeated command counter".into(), t_ms: 1500 };
/// assert_eq!(describe(&a, "ack"),
///     "ack refused: replayed (the controller refused a repeated command counter), command 4 at t = 1.5 s");
/// ```
pub fn describe(answer: &WireAnswer, what: &str) -> String {
    match answer {
        WireAnswer::Replied {
            counter,
            code,
            meaning,
            t_ms,
        } => {
            let verdict = if code == ReplyCode::Applied.as_str() {
                "applied".to_string()
            } else {
                format!("refused: {code} ({meaning})")
            };
            format!(
                "{what} {verdict}, command {counter} at t = {:.1} s",
                f64::from(*t_ms) / 1000.0
            )
        }
        WireAnswer::Unavailable { reason, message } => {
            format!("{what} not carried out ({reason}): {message}")
        }
        WireAnswer::Status(s) => format!(
            "{} on {} (pid {}), link {}",
            s.rig_id.as_deref().unwrap_or("rig not yet known"),
            s.source,
            s.pid,
            if s.link_up { "up" } else { "down" }
        ),
    }
}
