//! `heatbound watch`: decode a live stream from the controller, print a line
//! per frame and log everything to SQLite.
//!
//! Data flow (DESIGN.md §2, host branch):
//!
//! ```text
//! --serial PATH | --tcp HOST:PORT | --input FILE|-  --(read, timeout)--> bytes
//!     --> ingest::Ingest (Decoder, LinkTracker) --> store::Log (batched, WAL) --> live lines
//! link drop or stall --> outage row, reconnect with backoff 100 ms .. 5 s, same run
//! ```
//!
//! The link itself is [`heatbound_host::link`]: a malformed address or a
//! missing port is an error at once, and only a link that worked once is
//! reconnected.
//!
//! With `--serial` or `--tcp` the link is two-way: this process opens the
//! control socket ([`heatbound_host::control`]) through which `heatbound
//! ack`, `configure` and `new-run` reach the controller, seals their
//! commands with the rig's key (`--key-file`, `$HEATBOUND_KEY_FILE`, else
//! the public demo key, said so) and logs each with its reply.
//!
//! With `--publish mqtt://HOST:PORT` (or `mqtts://`) every row a lab should
//! have also goes to the broker ([`heatbound_host::mqtt::publisher`]), from
//! this log, so an outage of the broker loses nothing.
//!
//! SIGINT and SIGTERM end the run cleanly: the loop notices within one read
//! timeout, commits and closes the run. A second signal exits at once; the
//! batches already committed survive (WAL).
use std::io::IsTerminal as _;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use anyhow::{Context, Result, bail};

use heatbound_host::ingest::{Ingest, LineStyle};
use heatbound_host::keyfile;
use heatbound_host::link::{self, Bounds, LinkOptions, Source, now_ms};
use heatbound_host::live::Live;
use heatbound_host::mqtt::broker::{Broker, BrokerArgs};
use heatbound_host::mqtt::publisher::{PublishConfig, Publisher};
use heatbound_host::mqtt::topics::Topics;
use heatbound_host::store::{DEFAULT_DB, Log};
use heatbound_host::term::{self, Counting};

/// Set by the SIGINT/SIGTERM handler.
static STOP: AtomicBool = AtomicBool::new(false);

/// Arguments of `heatbound watch`.
#[derive(clap::Args)]
#[command(allow_negative_numbers = true, group(clap::ArgGroup::new("source").required(true).args(["serial", "tcp", "input"])))]
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
    #[arg(long, conflicts_with = "json")]
    pub quiet: bool,
    /// One line per summary, even on a terminal (no live console).
    #[arg(long)]
    pub plain: bool,
    /// One JSON object per frame, one per line, instead of text.
    #[arg(long)]
    pub json: bool,
    /// Seconds without a byte after which a link counts as stalled: an outage, then a reconnect.
    #[arg(long, value_name = "S", default_value_t = 10.0)]
    pub stall_s: f64,
    /// Seconds the first connection of --serial or --tcp may take to come up.
    #[arg(long, value_name = "S", default_value_t = 10.0)]
    pub connect_timeout_s: f64,
    /// The rig's command key: a file of 64 hex digits readable by you alone
    /// (default: $HEATBOUND_KEY_FILE, else the public demo key).
    #[arg(long, value_name = "FILE")]
    pub key_file: Option<PathBuf>,
    /// Also publish every frame to this MQTT broker (mqtt://HOST:PORT, or
    /// mqtts://HOST:PORT for TLS), for a lab's `heatbound lab` and dashboards.
    #[arg(long, value_name = "URL")]
    pub publish: Option<String>,
    /// How to reach the broker of --publish.
    #[command(flatten)]
    pub broker: BrokerArgs,
}

/// A duration option in seconds, checked.
fn seconds(name: &str, s: f64) -> Result<Duration> {
    if !(s.is_finite() && s > 0.0) {
        bail!("{name} {s}: must be a finite number of seconds > 0");
    }
    Ok(Duration::from_secs_f64(s.min(1e9)))
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    let deadline = match args.max_duration_s {
        Some(s) if !(s.is_finite() && s >= 0.0) => {
            bail!("--max-duration-s {s}: must be a finite number of seconds ≥ 0")
        }
        Some(s) => Some(Instant::now() + Duration::from_secs_f64(s.min(1e9))),
        None => None,
    };
    let options = LinkOptions {
        stall: seconds("--stall-s", args.stall_s)?,
        first_connect: seconds("--connect-timeout-s", args.connect_timeout_s)?,
    };
    // The source and the log are checked before anything is printed, so an
    // error is the first thing the operator reads.
    let source = match (&args.serial, &args.tcp) {
        (Some(path), _) => Some(Source::serial(path, args.baud)?),
        (None, Some(addr)) => Some(Source::tcp(addr)?),
        (None, None) => None,
    };
    link::check_log_target(&args.db)?;
    // The key is checked up front too: a key file others can read is refused.
    let (key, key_origin) = keyfile::resolve(args.key_file.as_deref())?;
    // So is the broker: its address, login and certificates.
    let publish = match &args.publish {
        Some(url) => Some((
            Broker::new(url, &args.broker)?,
            Topics::new(&args.broker.topic_root).map_err(anyhow::Error::msg)?,
        )),
        None => None,
    };
    let name = match (&source, &args.input) {
        (Some(s), _) => s.name(),
        (None, Some(p)) if p.as_os_str() == "-" => "stdin".to_string(),
        (None, Some(p)) => format!("file:{}", p.display()),
        (None, None) => bail!("no source: give --serial, --tcp or --input"),
    };
    let input = match (&source, &args.input) {
        (None, Some(p)) if p.as_os_str() != "-" => Some(
            std::fs::File::open(p)
                .with_context(|| format!("{}: cannot open the capture", p.display()))?,
        ),
        _ => None,
    };
    let log = Log::open(&args.db).context("cannot open the log")?;
    // A handler may already be installed (never in the binary); then signals
    // simply keep their default action and WAL keeps the committed batches.
    let _ = ctrlc::set_handler(|| {
        if STOP.swap(true, Ordering::SeqCst) {
            std::process::exit(130);
        }
    });
    let bounds = Bounds {
        deadline,
        stop: Some(&STOP),
    };
    // The console needs a terminal on both sides; JSON and --plain ask for lines.
    let console = source.is_some()
        && !args.plain
        && !args.json
        && !args.quiet
        && std::io::stdout().is_terminal()
        && std::io::stdin().is_terminal();
    let style = if args.json {
        LineStyle::Json
    } else {
        LineStyle::for_stdout(args.quiet)
    };
    let mut ingest = Ingest::new(log, &name, now_ms(), style)
        .with_context(|| format!("cannot start a run in {}", args.db.display()))?;
    ingest.set_summary_limit(args.max_summaries);
    let mut publish = publish;
    let mut publisher: Option<Publisher> = None;
    let mut feed = None;
    if publish.is_some() {
        let (tx, rx) = std::sync::mpsc::channel();
        ingest.set_feed(tx);
        feed = Some(rx);
    }

    let print = |line: &str| println!("{line}");
    let end = match (source, input) {
        (Some(source), _) => {
            let live = Live::start(&key, key_origin, &name, &args.db)?;
            if let (Some((broker, topics)), Some(rx)) = (publish.take(), feed.take()) {
                publisher = Some(start_publisher(
                    broker,
                    topics,
                    args,
                    ingest.run_id(),
                    rx,
                    Some(live.requester()),
                )?);
            }
            eprintln!("heatbound watch: {}", live.key_origin().describe());
            eprintln!(
                "heatbound watch: commands (`heatbound ack`, `configure`, `new-run`) reach the controller through {}",
                live.socket().display()
            );
            if console {
                let (end, done) = live.run_console(ingest, deadline, &STOP, source, options)?;
                ingest = done;
                end
            } else {
                live.run_lines(&mut ingest, &bounds, &source, options, print, |n| {
                    eprintln!("heatbound watch: {n}")
                })
            }
        }
        (None, Some(file)) => {
            if let (Some((broker, topics)), Some(rx)) = (publish.take(), feed.take()) {
                publisher = Some(start_publisher(
                    broker,
                    topics,
                    args,
                    ingest.run_id(),
                    rx,
                    None,
                )?);
            }
            // Bytes of the capture on stderr, unless the lines share the terminal.
            let size = file.metadata().map_or(0, |m| m.len());
            let bar = if args.quiet || !std::io::stdout().is_terminal() {
                term::progress_bar(&format!("watch {name}"), size, Counting::Bytes, size)
            } else {
                indicatif::ProgressBar::hidden()
            };
            let end = link::read_to_end(
                &mut ingest,
                &bounds,
                bar.wrap_read(file),
                None,
                &name,
                None,
                print,
            );
            bar.finish_and_clear();
            end
        }
        (None, None) => link::read_to_end(
            &mut ingest,
            &bounds,
            std::io::stdin().lock(),
            None,
            &name,
            None,
            print,
        ),
    };
    let end = match end {
        Ok(end) => end,
        Err(e) => {
            // Close the run before reporting, so the log says where it ended.
            let _ = ingest.finish(now_ms());
            finish_publisher(publisher);
            return Err(e.into());
        }
    };
    let totals = ingest
        .finish(now_ms())
        .with_context(|| format!("cannot close the run in {}", args.db.display()));
    finish_publisher(publisher);
    let totals = totals?;
    if args.json {
        eprintln!("{}", link::closing_line(&totals, end, &args.db));
    } else {
        println!("{}", link::closing_line(&totals, end, &args.db));
    }
    eprintln!("{}", heatbound_host::term::SAFETY_NOTE);
    Ok(())
}

/// Starts publishing run `run` of `args.db`; the publisher's news goes to
/// stderr.
fn start_publisher(
    broker: Broker,
    topics: Topics,
    args: &Args,
    run: i64,
    feed: std::sync::mpsc::Receiver<heatbound_host::ingest::Logged>,
    requests: Option<std::sync::mpsc::Sender<heatbound_host::downlink::Request>>,
) -> Result<Publisher> {
    let (tx, rx) = std::sync::mpsc::channel::<String>();
    std::thread::spawn(move || {
        for line in rx {
            eprintln!("heatbound watch: {line}");
        }
    });
    let config = PublishConfig {
        broker,
        topics,
        db: args.db.clone(),
        run,
    };
    Publisher::start(config, feed, requests, tx).context("cannot start publishing")
}

/// Publishes the rest of the run, waits for the broker, and says how it went.
fn finish_publisher(publisher: Option<Publisher>) {
    if let Some(p) = publisher {
        let t = p.finish();
        eprintln!(
            "heatbound watch: published: {} records acknowledged by the broker, {} published again after a session was lost, {} sent again at a lab's request, {} lab commands relayed, {} refused{}",
            t.acknowledged,
            t.republished,
            t.resent,
            t.relayed,
            t.refused,
            if t.unacknowledged > 0 {
                format!(
                    "; {} not yet acknowledged: they stay in the log and go out when watch next publishes",
                    t.unacknowledged
                )
            } else {
                String::new()
            }
        );
    }
}
