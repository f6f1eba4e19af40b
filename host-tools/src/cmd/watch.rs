//! `heatbound watch`: decode a live stream from the controller, print a line
//! per frame and log everything to SQLite.
//!
//! Data flow (DESIGN.md §2, host branch):
//!
//! ```text
//! --serial PATH | --tcp HOST:PORT | --input FILE|-  --(read, timeout)--> bytes
//!     --> ingest::Ingest (Decoder, LinkTracker) --> store::Log (batched, WAL) --> live lines
//! link drop --> outage row, reconnect with backoff 100 ms .. 5 s, same run
//! ```
//!
//! SIGINT and SIGTERM end the run cleanly: the loop notices within one read
//! timeout, commits and closes the run. A second signal exits at once; the
//! batches already committed survive (WAL).
use std::io::{ErrorKind, Read};
use std::net::TcpStream;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use anyhow::{Context, Result, bail};

use heatbound_host::ingest::{Ingest, LineStyle, Totals};
use heatbound_host::store::{DEFAULT_DB, Log};

/// How long one read waits before the loop checks the bounds, the signal
/// flag and the batch age.
const READ_TIMEOUT: Duration = Duration::from_millis(100);
/// First reconnect delay; doubles up to [`BACKOFF_MAX`].
const BACKOFF_MIN: Duration = Duration::from_millis(100);
/// Longest reconnect delay.
const BACKOFF_MAX: Duration = Duration::from_secs(5);
/// Read buffer size.
const CHUNK: usize = 64 * 1024;

/// Set by the SIGINT/SIGTERM handler.
static STOP: AtomicBool = AtomicBool::new(false);

/// Arguments of `heatbound watch`.
#[derive(clap::Args)]
#[command(group(clap::ArgGroup::new("source").required(true).args(["serial", "tcp", "input"])))]
pub struct Args {
    /// Read from a serial port (raw 8N1), e.g. /dev/ttyUSB0.
    #[arg(long, value_name = "PATH")]
    pub serial: Option<String>,
    /// Baud rate of --serial.
    #[arg(long, value_name = "B", default_value_t = 115_200, requires = "serial")]
    pub baud: u32,
    /// Connect to a TCP server (an emulator's serial socket, `heatbound simulate --listen`).
    #[arg(long, value_name = "HOST:PORT")]
    pub tcp: Option<String>,
    /// Read a capture file (raw wire bytes) to its end; `-` reads stdin.
    #[arg(long, value_name = "FILE")]
    pub input: Option<PathBuf>,
    /// The SQLite log to append the run to (created if missing).
    #[arg(long, value_name = "FILE", default_value = DEFAULT_DB)]
    pub db: PathBuf,
    /// End the run after this many seconds.
    #[arg(long, value_name = "S")]
    pub max_duration_s: Option<f64>,
    /// End the run after this many summaries.
    #[arg(long, value_name = "N")]
    pub max_summaries: Option<u64>,
    /// Do not print a line per frame (the closing summary is still printed).
    #[arg(long)]
    pub quiet: bool,
}

/// Host time, Unix milliseconds.
pub(crate) fn now_ms() -> i64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| i64::try_from(d.as_millis()).unwrap_or(i64::MAX))
}

/// Why the read loop ended.
#[derive(Clone, Copy, PartialEq, Eq)]
pub(crate) enum End {
    Eof,
    Signal,
    Duration,
    Summaries,
}

/// The bounds of the run.
pub(crate) struct Bounds {
    pub(crate) deadline: Option<Instant>,
}

impl Bounds {
    fn check(&self, ingest: &Ingest) -> Option<End> {
        if ingest.limit_reached() {
            Some(End::Summaries)
        } else if STOP.load(Ordering::Relaxed) {
            Some(End::Signal)
        } else if self.deadline.is_some_and(|d| Instant::now() >= d) {
            Some(End::Duration)
        } else {
            None
        }
    }
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    eprintln!("{}", heatbound_host::term::SAFETY_NOTE);
    let deadline = match args.max_duration_s {
        Some(s) if !(s.is_finite() && s >= 0.0) => {
            bail!("--max-duration-s {s}: must be a finite number of seconds ≥ 0")
        }
        Some(s) => Some(Instant::now() + Duration::from_secs_f64(s.min(1e9))),
        None => None,
    };
    let bounds = Bounds { deadline };
    // A handler may already be installed (never in the binary); then signals
    // simply keep their default action and WAL keeps the committed batches.
    let _ = ctrlc::set_handler(|| {
        if STOP.swap(true, Ordering::SeqCst) {
            std::process::exit(130);
        }
    });

    let log = Log::open(&args.db).with_context(|| "cannot open the log".to_string())?;
    let style = LineStyle::for_stdout(args.quiet);
    let source = if let Some(path) = &args.serial {
        format!("serial:{path}")
    } else if let Some(addr) = &args.tcp {
        format!("tcp:{addr}")
    } else {
        match &args.input {
            Some(p) if p.as_os_str() == "-" => "stdin".to_string(),
            Some(p) => format!("file:{}", p.display()),
            None => bail!("no source: give --serial, --tcp or --input"),
        }
    };
    let mut ingest = Ingest::new(log, &source, now_ms(), style)
        .with_context(|| format!("cannot start a run in {}", args.db.display()))?;
    ingest.set_summary_limit(args.max_summaries);

    let end = if let Some(path) = &args.serial {
        let (path, baud) = (path.clone(), args.baud);
        link_loop(&mut ingest, &bounds, &source, move || {
            serialport::new(&path, baud)
                .data_bits(serialport::DataBits::Eight)
                .parity(serialport::Parity::None)
                .stop_bits(serialport::StopBits::One)
                .flow_control(serialport::FlowControl::None)
                .timeout(READ_TIMEOUT)
                .open()
                .map(|p| Box::new(p) as Box<dyn Read>)
                .map_err(|e| format!("cannot open {path}: {e}"))
        })?
    } else if let Some(addr) = &args.tcp {
        let addr = addr.clone();
        link_loop(&mut ingest, &bounds, &source, move || {
            let stream =
                TcpStream::connect(&addr).map_err(|e| format!("cannot connect to {addr}: {e}"))?;
            stream
                .set_read_timeout(Some(READ_TIMEOUT))
                .map_err(|e| format!("{addr}: cannot set a read timeout: {e}"))?;
            Ok(Box::new(stream) as Box<dyn Read>)
        })?
    } else {
        match &args.input {
            Some(p) if p.as_os_str() == "-" => {
                read_to_end(&mut ingest, &bounds, std::io::stdin().lock(), "stdin")?
            }
            Some(p) => {
                let file = std::fs::File::open(p)
                    .with_context(|| format!("{}: cannot open the capture", p.display()))?;
                read_to_end(&mut ingest, &bounds, file, &p.display().to_string())?
            }
            None => bail!("no source: give --serial, --tcp or --input"),
        }
    };
    let totals = ingest
        .finish(now_ms())
        .with_context(|| format!("cannot close the run in {}", args.db.display()))?;
    println!("{}", closing_line(&totals, end, &args.db));
    Ok(())
}

fn print_line(line: &str) {
    println!("{line}");
}

/// Feeds one read's bytes and commits a batch that is due.
fn feed(ingest: &mut Ingest, bytes: &[u8], db: &str) -> Result<()> {
    let now = now_ms();
    ingest
        .feed(bytes, now, print_line)
        .and_then(|()| ingest.tick(now))
        .with_context(|| format!("cannot log to {db}"))
}

/// Reads a capture (file or stdin) to its end.
pub(crate) fn read_to_end(
    ingest: &mut Ingest,
    bounds: &Bounds,
    mut r: impl Read,
    name: &str,
) -> Result<End> {
    let db = ingest.log().path().display().to_string();
    let mut buf = vec![0u8; CHUNK];
    loop {
        if let Some(end) = bounds.check(ingest) {
            return Ok(end);
        }
        let n = match r.read(&mut buf) {
            Ok(0) => return Ok(End::Eof),
            Ok(n) => n,
            Err(e) if e.kind() == ErrorKind::Interrupted => continue,
            Err(e) => return Err(e).with_context(|| format!("{name}: cannot read")),
        };
        feed(ingest, buf.get(..n).unwrap_or(&[]), &db)?;
    }
}

/// Reads a link that may drop: on EOF or an error, records an outage and
/// reconnects with exponential backoff, in the same run.
fn link_loop(
    ingest: &mut Ingest,
    bounds: &Bounds,
    source: &str,
    mut connect: impl FnMut() -> std::result::Result<Box<dyn Read>, String>,
) -> Result<End> {
    let db = ingest.log().path().display().to_string();
    let mut buf = vec![0u8; CHUNK];
    let mut backoff = BACKOFF_MIN;
    let mut conn: Option<Box<dyn Read>> = None;
    loop {
        if let Some(end) = bounds.check(ingest) {
            return Ok(end);
        }
        let Some(stream) = conn.as_mut() else {
            match connect() {
                Ok(c) => {
                    conn = Some(c);
                    backoff = BACKOFF_MIN;
                    if ingest.totals().outages > 0 {
                        eprintln!("heatbound watch: {source}: link back");
                    }
                    ingest
                        .link_up(now_ms())
                        .with_context(|| format!("cannot log to {db}"))?;
                }
                Err(reason) => {
                    down(ingest, &reason, &db)?;
                    wait(bounds, ingest, backoff);
                    backoff = (backoff * 2).min(BACKOFF_MAX);
                }
            }
            continue;
        };
        match stream.read(&mut buf) {
            Ok(0) => {
                conn = None;
                down(ingest, &format!("{source}: connection closed"), &db)?;
                wait(bounds, ingest, backoff);
            }
            Ok(n) => feed(ingest, buf.get(..n).unwrap_or(&[]), &db)?,
            Err(e) if matches!(e.kind(), ErrorKind::WouldBlock | ErrorKind::TimedOut) => {
                ingest
                    .tick(now_ms())
                    .with_context(|| format!("cannot log to {db}"))?;
            }
            Err(e) if e.kind() == ErrorKind::Interrupted => {}
            Err(e) => {
                conn = None;
                down(ingest, &format!("{source}: read failed: {e}"), &db)?;
                wait(bounds, ingest, backoff);
            }
        }
    }
}

/// Records an outage (once per drop) and tells the operator.
fn down(ingest: &mut Ingest, reason: &str, db: &str) -> Result<()> {
    let first = ingest.totals().outages;
    ingest
        .link_down(now_ms(), reason)
        .with_context(|| format!("cannot log to {db}"))?;
    if ingest.totals().outages != first {
        eprintln!("heatbound watch: link down ({reason}); reconnecting");
    }
    Ok(())
}

/// Sleeps `delay`, waking early for a signal or the deadline.
fn wait(bounds: &Bounds, ingest: &Ingest, delay: Duration) {
    let until = Instant::now() + delay;
    while Instant::now() < until && bounds.check(ingest).is_none() {
        std::thread::sleep(Duration::from_millis(20).min(delay));
    }
}

pub(crate) fn closing_line(t: &Totals, end: End, db: &std::path::Path) -> String {
    let why = match end {
        End::Eof => "end of input",
        End::Signal => "interrupted",
        End::Duration => "--max-duration-s reached",
        End::Summaries => "--max-summaries reached",
    };
    format!(
        "run {} closed ({why}): {} frames ({} hellos, {} summaries, {} events); \
         {} lost (crc {}, overlong {}, malformed {}, unknown_version {}); \
         {} gaps ({} summaries missing), {} duplicates, {} restarts, {} outages; log {}",
        t.run_id,
        t.frames,
        t.hellos,
        t.summaries,
        t.events,
        t.losses(),
        t.crc_errors,
        t.overlong,
        t.malformed,
        t.unknown_version,
        t.gaps,
        t.missing_summaries,
        t.duplicates,
        t.restarts,
        t.outages,
        db.display()
    )
}
