//! The demo's run: a simulated controller over a loopback TCP link, and the
//! link holder with its scripted operator, shown as lines or on the live
//! console.
//!
//! ```text
//! thread: sil::play (the simulated controller) <--TCP 127.0.0.1--> Ingest + Downlink (demo key)
//!                                                                   Operator: acknowledges trips
//! lines on stdout, or the console (a terminal on both sides)
//! ```
use std::net::{Ipv4Addr, TcpListener, TcpStream};
use std::sync::atomic::AtomicBool;
use std::sync::{Arc, Mutex, mpsc};
use std::time::{Duration, Instant};

use heatbound::wire::CommandKey;

use crate::console::draw::Holder;
use crate::downlink::Downlink;
use crate::ingest::{Ingest, LineStyle, Totals};
use crate::keyfile::KeyOrigin;
use crate::link::{self, Bounds, Commands, End, LinkError, now_ms};
use crate::live;
use crate::operator::{self, Operator};
use crate::sil::{self, SimError, SimStats, Simulation};
use crate::store::{Log, StoreError};

/// How the run is shown.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Show {
    /// A line per frame (or, quiet, only alarms and replies) and the
    /// operator's words.
    Lines {
        /// Only alarms, replies and the operator.
        quiet: bool,
    },
    /// The live console.
    Console,
}

/// What the demo's run did.
#[derive(Debug)]
pub struct Played {
    /// How the run ended.
    pub end: End,
    /// What the link holder received and logged.
    pub totals: Totals,
    /// What the simulated controller did.
    pub stats: SimStats,
    /// Whether every acknowledge the operator asked for was applied.
    pub acknowledged: bool,
    /// The operator's answers, for the record.
    pub answers: Vec<String>,
    /// Wall time, seconds.
    pub elapsed_s: f64,
    /// Where the link was.
    pub link: String,
}

/// Why the demo's run could not be played.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ShowcaseError {
    /// Loopback networking failed.
    #[error("the loopback link: {}", crate::term::os_words(.0))]
    Loopback(std::io::Error),
    /// The simulated controller failed.
    #[error(transparent)]
    Sim(#[from] SimError),
    /// The link holder failed.
    #[error(transparent)]
    Link(#[from] LinkError),
    /// The log failed.
    #[error(transparent)]
    Log(#[from] StoreError),
    /// The simulated controller's thread stopped unexpectedly.
    #[error("the simulated controller stopped unexpectedly")]
    Stopped,
}

/// Leaves the console early (the operator pressed q).
static STOP: AtomicBool = AtomicBool::new(false);

/// Plays `sim` at `speed` times real time into `log`, shown as `show`.
/// `on_link` hears the link's address once it is up.
pub fn play(
    sim: Simulation,
    log: Log,
    speed: f64,
    show: Show,
    on_link: impl FnOnce(&str),
) -> Result<(Played, Ingest), ShowcaseError> {
    // Listening sockets stay on loopback.
    let listener = TcpListener::bind((Ipv4Addr::LOCALHOST, 0)).map_err(ShowcaseError::Loopback)?;
    let addr = listener.local_addr().map_err(ShowcaseError::Loopback)?;
    let name = format!("tcp:{addr}");
    on_link(&name);
    let sender = std::thread::spawn(move || -> Result<SimStats, SimError> {
        let stream = TcpStream::connect(addr).map_err(SimError::Link)?;
        sil::play(sim, stream, speed)
    });
    let (stream, _) = listener.accept().map_err(ShowcaseError::Loopback)?;
    // Reads wake every 100 ms, so commands go out promptly.
    stream
        .set_read_timeout(Some(Duration::from_millis(100)))
        .map_err(ShowcaseError::Loopback)?;
    let mut writer = stream.try_clone().map_err(ShowcaseError::Loopback)?;
    // The operator reads every line, even when only alarms are printed.
    let ingest = Ingest::new(log, &name, now_ms(), LineStyle::Plain)?;
    // The simulation, the emulator and the demo take the public demo key.
    let mut downlink = Downlink::new(&CommandKey::DEMO, KeyOrigin::Demo);
    let (requests_tx, requests) = mpsc::channel();
    let operator = Arc::new(Mutex::new(Operator::new(requests_tx.clone())));
    let started = Instant::now();
    let reader_name = name.clone();
    let (end, ingest) = match show {
        Show::Lines { quiet } => {
            let mut ingest = ingest;
            let end = link::read_to_end(
                &mut ingest,
                &Bounds::default(),
                stream,
                Some(&mut writer),
                &reader_name,
                Some(Commands {
                    downlink: &mut downlink,
                    requests: &requests,
                    status: None,
                }),
                |line| {
                    if !quiet || operator::is_event_line(line) {
                        println!("{line}");
                    }
                    for said in lock(&operator).read(line) {
                        println!("{said}");
                    }
                },
            );
            for said in lock(&operator).settle() {
                println!("{said}");
            }
            (end, ingest)
        }
        Show::Console => {
            let holder = Holder {
                source: name.clone(),
                key: "demo key".into(),
                commands: true,
                ended: None,
            };
            let op = Arc::clone(&operator);
            live::with_console(ingest, holder, requests_tx, true, &STOP, move |ingest| {
                let end = link::read_to_end(
                    ingest,
                    &Bounds {
                        deadline: None,
                        stop: Some(&STOP),
                    },
                    stream,
                    Some(&mut writer),
                    &reader_name,
                    Some(Commands {
                        downlink: &mut downlink,
                        requests: &requests,
                        status: None,
                    }),
                    // The console shows what the operator does.
                    |line| {
                        lock(&op).read(line);
                    },
                );
                lock(&op).settle();
                end
            })?
        }
    };
    let end = end?;
    let totals = ingest.totals();
    let stats = match sender.join() {
        Ok(result) => result?,
        Err(_) => return Err(ShowcaseError::Stopped),
    };
    let operator = lock(&operator);
    let answers = operator
        .outcomes()
        .iter()
        .map(|a| format!("{a:?}"))
        .collect();
    Ok((
        Played {
            end,
            totals,
            stats,
            acknowledged: operator.all_applied(),
            answers,
            elapsed_s: started.elapsed().as_secs_f64(),
            link: name,
        },
        ingest,
    ))
}

/// The operator, even if a thread holding it panicked (it only counts).
fn lock(o: &Mutex<Operator>) -> std::sync::MutexGuard<'_, Operator> {
    o.lock().unwrap_or_else(std::sync::PoisonError::into_inner)
}
