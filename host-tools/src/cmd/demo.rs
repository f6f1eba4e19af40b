//! `heatbound demo`: the whole chain in one process, with no hardware.
//!
//! ```text
//! sender thread:   sil::Simulation (thermocouple-drift, paced) <--wire bytes--> TCP 127.0.0.1
//! this thread:     TCP --> Ingest (decoder, link tracker, SQLite log, live lines)
//!                  the operator's acknowledge --> Downlink (demo key) --> TCP --> Reply
//! afterwards:      the log --> audit --> report; the log --> chart (PNG beside it); where both are
//! ```
//!
//! The simulated bench rig runs the same controller as the firmware
//! (`control::Controller`: monitor, alarms, both link directions). Ten
//! minutes of rig time play in about 20 s: the hot thermocouple starts to
//! read low at 120 s, the apparent efficiency climbs past the Carnot bound
//! of the readings, and `beyond_carnot` is raised and trips. The demo's
//! operator acknowledges it over the link, as `heatbound ack` would; the
//! trip output stays on while the condition holds. At 540 s the
//! thermocouple is reseated, the readings fall back under the bound, the
//! alarm clears and the trip output drops.
use std::io::Write as _;
use std::net::{Ipv4Addr, TcpListener, TcpStream};
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::thread;
use std::time::{Duration, Instant};

use anyhow::{Context, Result, bail};
use heatbound::alarm::{EventKind, RuleId};
use heatbound::wire::{CommandKey, ReplyCode};
use heatbound_firmware_example::rig::{Rig, Scenario};
use heatbound_host::downlink::{Answer, Ask, Downlink, Request};
use heatbound_host::fanout::Inbox;
use heatbound_host::ingest::{Ingest, LineStyle};
use heatbound_host::keyfile::KeyOrigin;
use heatbound_host::link::{self, Bounds, Commands, End, now_ms};
use heatbound_host::store::Log;

use heatbound_host::sil::{self, SimOptions, SimStats, Simulation};

/// Arguments of `heatbound demo`.
#[derive(clap::Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "The demo starts a fresh log at --db: an existing heatbound log of that \
name is replaced, any other file is refused and left untouched. It ends with the audit of \
what it logged, and draws its chart beside the log (--db heatbound-demo.sqlite: \
heatbound-demo.png)."
)]
pub struct Args {
    /// The log database the demo writes.
    #[arg(long, value_name = "FILE", default_value = "heatbound-demo.sqlite")]
    pub db: PathBuf,
    /// Rig time played per second of wall time (the operator answers in
    /// wall time, so at most 1000).
    #[arg(long, value_name = "F", default_value_t = 30.0)]
    pub speed: f64,
    /// Only print alarm events and the closing report, not a line per summary.
    #[arg(long)]
    pub quiet: bool,
}

/// What the demo plays.
const SCENARIO: Scenario = Scenario::ThermocoupleDrift;
/// Ten minutes of rig time: the drift starts at 120 s and the readings pass
/// the Carnot bound about six minutes later.
const DURATION_S: f64 = 600.0;
/// When the thermocouple is reseated, s of rig time.
const REPAIR_S: f64 = 540.0;

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    if !(args.speed.is_finite() && args.speed > 0.0 && args.speed <= 1000.0) {
        bail!(
            "--speed {}: must be a factor above 0 and at most 1000 (the demo's operator answers in wall time)",
            args.speed
        );
    }
    if heatbound_host::chart::default_out(&args.db) == args.db {
        bail!(
            "--db {}: the chart drawn beside it would replace the log; name it .sqlite",
            args.db.display()
        );
    }
    // Refuse a --db that is not a heatbound log before anything starts.
    link::check_log_target(&args.db)?;
    println!("heatbound demo: a simulated bench Stirling engine, streamed over loopback TCP");
    println!("{}", heatbound_host::term::SAFETY_NOTE);
    println!();

    let options = SimOptions {
        scenario: SCENARIO,
        duration_s: DURATION_S,
        repair_at_s: Some(REPAIR_S),
        ..SimOptions::default()
    };
    let config = sil::default_config(&Rig::bench_stirling(options.scenario, options.seed));
    let sim = Simulation::new(&options, &config).context("cannot set up the simulated rig")?;
    println!("scenario {}: {}", SCENARIO.name(), SCENARIO.description());
    println!(
        "playing {DURATION_S:.0} s of rig time at {}x, {} Hz sampling, a summary per second",
        args.speed, options.rate_hz
    );

    fresh_log(&args.db)?;
    let log = Log::open(&args.db).context("cannot open the demo log")?;

    // Listening sockets stay on loopback.
    let listener =
        TcpListener::bind((Ipv4Addr::LOCALHOST, 0)).context("cannot listen on loopback")?;
    let addr = listener
        .local_addr()
        .context("cannot read the listening address")?;
    println!("controller link: tcp://{addr}");
    println!();

    let speed = args.speed;
    let sender = thread::spawn(move || -> Result<SimStats> {
        let stream =
            TcpStream::connect(addr).with_context(|| format!("cannot connect to {addr}"))?;
        send(sim, stream, speed)
    });
    let (stream, _) = listener
        .accept()
        .context("the simulated controller did not connect")?;
    // Reads wake every 100 ms, so the operator's commands go out promptly.
    stream
        .set_read_timeout(Some(Duration::from_millis(100)))
        .context("cannot set a read timeout on the link")?;
    let mut writer = stream
        .try_clone()
        .context("cannot write to the simulated controller")?;

    // The operator reads every line, even when the demo prints only alarms.
    let style = LineStyle::for_stdout(false);
    let mut ingest = Ingest::new(log, &format!("tcp:{addr}"), now_ms(), style)
        .with_context(|| format!("cannot start a run in {}", args.db.display()))?;
    // The simulation, the emulator and the demo take the public demo key.
    let mut downlink = Downlink::new(&CommandKey::DEMO, KeyOrigin::Demo);
    let (requests_tx, requests) = mpsc::channel();
    let (answer_tx, answers) = mpsc::channel();
    let mut operator = Operator {
        requests: requests_tx,
        answer: answer_tx,
        answers,
        asked: 0,
        outcomes: Vec::new(),
    };
    let started = Instant::now();
    let end = link::read_to_end(
        &mut ingest,
        &Bounds::default(),
        stream,
        Some(&mut writer),
        &format!("tcp:{addr}"),
        Some(Commands {
            downlink: &mut downlink,
            requests: &requests,
            status: None,
        }),
        |line| {
            if !args.quiet || is_event_line(line) {
                println!("{line}");
            }
            operator.read(line);
        },
    )?;
    operator.settle();
    let totals = ingest
        .finish(now_ms())
        .with_context(|| format!("cannot close the run in {}", args.db.display()))?;
    let stats = match sender.join() {
        Ok(result) => result?,
        Err(_) => bail!("the simulated controller stopped unexpectedly"),
    };
    println!();
    println!("{}", link::closing_line(&totals, end, &args.db));
    println!(
        "streamed {} samples as {} frames in {:.1} s",
        stats.samples,
        stats.frames(),
        started.elapsed().as_secs_f64()
    );
    for e in &stats.alarm_events {
        println!(
            "  alarm {} at t = {:.1} s: {} ({})",
            e.kind,
            f64::from(e.t_ms) / 1000.0,
            e.rule,
            e.severity
        );
    }
    if let Some(t) = stats.repaired_at_ms {
        println!(
            "  the hot thermocouple was reseated at t = {:.1} s",
            f64::from(t) / 1000.0
        );
    }
    for (t, on) in &stats.trip_changes {
        println!(
            "  trip output {} at t = {:.1} s",
            if *on { "on" } else { "off" },
            f64::from(*t) / 1000.0
        );
    }

    // Re-check what was logged, from the database, as `heatbound audit` would.
    let report = heatbound_host::capture::audit_database(&args.db, None, &config)?;
    println!();
    print!("{}", report.text(&args.db.display().to_string()));
    // Draw it, as `heatbound chart` would.
    let chart = heatbound_host::chart::default_out(&args.db);
    heatbound_host::chart::write_chart(&args.db, None, &chart)?;
    let shown = std::fs::canonicalize(&args.db).unwrap_or_else(|_| args.db.clone());
    let chart_shown = std::fs::canonicalize(&chart).unwrap_or_else(|_| chart.clone());
    println!();
    println!("log written to {}", shown.display());
    println!("chart written to {}", chart_shown.display());
    println!("re-check it with `heatbound audit {}`", args.db.display());
    println!("redraw it with `heatbound chart {}`", args.db.display());
    println!("{}", heatbound_host::term::SAFETY_NOTE);
    std::io::stdout().flush().context("writing the report")?;

    let raised = stats
        .alarm_events
        .iter()
        .any(|e| e.rule == RuleId::BeyondCarnot && e.kind == EventKind::Raised);
    if !raised {
        bail!("the demo ended without raising beyond_carnot: the scenario did not play out");
    }
    if !operator.all_applied() {
        bail!(
            "the demo's acknowledges were not all applied: {:?}",
            operator.outcomes
        );
    }
    if stats.trip_changes.last().is_none_or(|(_, on)| *on) {
        bail!("the trip output did not drop after the fault was put right");
    }
    if !report.trustworthy || end != End::Eof {
        bail!("the demo's own log did not pass its audit");
    }
    Ok(())
}

/// Removes a previous heatbound log (and its WAL files), so the demo starts
/// fresh; [`link::check_log_target`] has refused anything else.
fn fresh_log(db: &Path) -> Result<()> {
    for suffix in ["", "-wal", "-shm"] {
        let mut name = db.as_os_str().to_owned();
        name.push(suffix);
        match std::fs::remove_file(&name) {
            Ok(()) => {}
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
            Err(e) => {
                return Err(e)
                    .with_context(|| format!("cannot replace {}", PathBuf::from(name).display()));
            }
        }
    }
    Ok(())
}

/// Whether a live line is an alarm event or a command's reply.
fn is_event_line(line: &str) -> bool {
    ["raised ", "cleared ", "acknowledged ", "reply to command "]
        .iter()
        .any(|w| line.contains(w))
}

/// The demo's operator: acknowledges each trip alarm over the link as soon
/// as it is raised, as an engineer at the bench would with `heatbound ack`.
struct Operator {
    requests: mpsc::Sender<Request>,
    answer: mpsc::Sender<Answer>,
    answers: mpsc::Receiver<Answer>,
    asked: usize,
    outcomes: Vec<Answer>,
}

impl Operator {
    /// Reads one live line; asks, or reports an answer, when it is time.
    fn read(&mut self, line: &str) {
        if let Some(rule) = raised_trip(line) {
            self.asked += 1;
            println!("operator: acknowledging {rule} over the link");
            let _ = self.requests.send(Request {
                origin: "demo operator".into(),
                ask: Ask::Acknowledge(Some(rule)),
                timeout: Duration::from_secs(10),
                answer: self.answer.clone(),
            });
        }
        self.settle();
    }

    /// Reports the answers that have come.
    fn settle(&mut self) {
        while let Ok(answer) = self.answers.try_recv() {
            match &answer {
                Answer::Replied {
                    counter,
                    code,
                    t_ms,
                } => println!(
                    "operator: command {counter} {} at t = {:.1} s ({})",
                    code,
                    f64::from(*t_ms) / 1000.0,
                    code.meaning()
                ),
                Answer::Unavailable { message, .. } => println!("operator: {message}"),
            }
            self.outcomes.push(answer);
        }
    }

    /// Whether every acknowledge asked for was applied, and there was one.
    fn all_applied(&self) -> bool {
        self.asked > 0
            && self.outcomes.len() == self.asked
            && self.outcomes.iter().all(|a| {
                matches!(
                    a,
                    Answer::Replied {
                        code: ReplyCode::Applied,
                        ..
                    }
                )
            })
    }
}

/// The rule of a live line that says a trip alarm was raised.
fn raised_trip(line: &str) -> Option<RuleId> {
    let rest = line.split("raised ").nth(1)?;
    let mut words = rest.split(' ');
    let rule = RuleId::parse(words.next()?)?;
    (words.next()? == "trip").then_some(rule)
}

/// Plays the simulation into `stream`, paced at `speed` times real time,
/// answering the commands that come back on it.
fn send(mut sim: Simulation, mut stream: TcpStream, speed: f64) -> Result<SimStats> {
    let (inbox, feed) = Inbox::new();
    feed.listen_to(
        stream
            .try_clone()
            .context("cannot read commands from the host")?,
    );
    let start = Instant::now();
    let mut frames = Vec::new();
    let mut bytes = Vec::new();
    while let Some(t_ms) = sim.next_tick(&mut frames) {
        for command in inbox.take() {
            sim.receive(&command, &mut frames);
        }
        for frame in frames.drain(..) {
            sil::encode_into(&frame, &mut bytes)?;
        }
        if bytes.is_empty() {
            continue;
        }
        let due = Duration::from_secs_f64(f64::from(t_ms) / 1000.0 / speed);
        if let Some(wait) = due.checked_sub(start.elapsed()) {
            thread::sleep(wait);
        }
        stream
            .write_all(&bytes)
            .context("the host closed the link")?;
        bytes.clear();
    }
    stream.flush().context("the host closed the link")?;
    // Closes the connection for the reader of commands too, so the host
    // sees the end of the stream.
    let _ = stream.shutdown(std::net::Shutdown::Both);
    Ok(sim.stats().clone())
}
