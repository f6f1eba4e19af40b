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
use std::io::Read;
use std::net::TcpStream;
use std::path::PathBuf;
use std::sync::atomic::Ordering;
use std::time::{Duration, Instant};

use anyhow::{Context, Result, bail};

use heatbound_host::ingest::{Ingest, LineStyle};
use heatbound_host::link::{
    Bounds, READ_TIMEOUT, STOP, closing_line, link_loop, now_ms, read_to_end,
};
use heatbound_host::store::{DEFAULT_DB, Log};

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
