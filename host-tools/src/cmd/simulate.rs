//! `heatbound simulate`: run the simulated bench rig through the
//! controller's monitor and alarms ([`heatbound_host::sil`]) and emit the wire
//! stream a controller would send, to a file, stdout or a TCP peer.
//!
//! ```text
//! options --> sil::Simulation --> frames --> wire::encode --> sink (file | stdout | TCP)
//!                                                 (paced at F x real time if asked)
//! TCP peers' commands --> Inbox --> Simulation::receive --> Reply, events, Hello --> sink
//! run summary (alarms, the controller's last verdict) + caution --> stderr
//! ```
//!
//! The stream is deterministic: the same options and seed give the same
//! bytes, whatever the pacing or the sink, as long as no command arrives.
//! Over TCP (`--listen`, `--connect`) the simulated controller answers
//! commands as a real one would, sealed with `--key-file` or, without one,
//! the public demo key.
use std::fs::File;
use std::io::{BufWriter, IsTerminal as _, Write};
use std::net::{IpAddr, Ipv4Addr, TcpListener, TcpStream};
use std::path::PathBuf;
use std::time::{Duration, Instant};

use anyhow::{Context, Result, bail};
use heatbound::alarm::EventKind;
use heatbound::wire::Frame;
use heatbound_firmware_example::rig::{Rig, Scenario};

use heatbound::wire::RigId;
use heatbound_host::fanout::{Fanout, Inbox};
use heatbound_host::keyfile;
use heatbound_host::sil::{self, SimOptions, Simulation};

/// Arguments of `heatbound simulate`.
#[derive(clap::Args)]
#[command(allow_negative_numbers = true, after_help = sil::simulate_help())]
pub struct Args {
    /// Rig scenario to run (listed below).
    #[arg(long, value_name = "NAME", default_value = "steady", value_parser = parse_scenario)]
    pub scenario: Scenario,
    /// Give the rig's head a second thermocouple, sent as t_hot2_k, so the
    /// controller checks the two against each other (hot2-drift implies it).
    #[arg(long)]
    pub hot2: bool,
    /// Sample rate, Hz.
    #[arg(long, value_name = "R", default_value_t = 10.0)]
    pub rate_hz: f64,
    /// Simulated duration, seconds of sample time.
    #[arg(long, value_name = "D", default_value_t = 600.0)]
    pub duration_s: f64,
    /// Noise seed: the same seed gives the same bytes.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
    /// Seconds of sample time between summaries.
    #[arg(long, value_name = "P", default_value_t = 1.0)]
    pub summary_period_s: f64,
    /// Controller configuration (TOML), as for `analyze`.
    #[arg(long, value_name = "RIG.toml")]
    pub config: Option<PathBuf>,
    /// Write the stream to FILE (`-` = stdout).
    #[arg(long, short, alias = "output", value_name = "FILE", conflicts_with_all = ["listen", "connect"])]
    pub out: Option<PathBuf>,
    /// Serve the stream on TCP PORT to every client that connects, from the
    /// first (0 = any free port; the address is printed on stderr).
    #[arg(long, value_name = "PORT", conflicts_with = "connect")]
    pub listen: Option<u16>,
    /// Address to listen on with --listen.
    #[arg(long, value_name = "ADDR", default_value_t = IpAddr::V4(Ipv4Addr::LOCALHOST), requires = "listen")]
    pub bind: IpAddr,
    /// Connect to HOST:PORT and stream to it.
    #[arg(long, value_name = "HOST:PORT")]
    pub connect: Option<String>,
    /// Rig time played per second of wall time (0 = as fast as possible), as for `demo`.
    #[arg(
        long,
        alias = "realtime-factor",
        value_name = "F",
        default_value_t = 0.0
    )]
    pub speed: f64,
    /// Put the scenario's fault right at this rig time, seconds (reseat the
    /// thermocouple, reopen the coolant valve, correct the shunt setting).
    #[arg(long, value_name = "S")]
    pub repair_at_s: Option<f64>,
    /// Damage one frame on the wire at this rig time, seconds, as line
    /// noise would (the host then counts a CRC loss).
    #[arg(long, value_name = "S")]
    pub line_noise_at_s: Option<f64>,
    /// The rig id the simulated controller announces (up to 16 printable ASCII characters).
    #[arg(long, value_name = "ID", default_value = sil::RIG_ID)]
    pub rig_id: String,
    /// The command key the simulated controller accepts: a file of 64 hex
    /// digits readable by you alone (default: $HEATBOUND_KEY_FILE, else the
    /// public demo key).
    #[arg(long, value_name = "FILE")]
    pub key_file: Option<PathBuf>,
}

fn parse_scenario(s: &str) -> Result<Scenario, String> {
    Scenario::parse(s).map_err(|e| e.to_string())
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    let f = args.speed;
    if !(f.is_finite() && f >= 0.0) {
        bail!("--speed {f}: must be a finite factor ≥ 0");
    }
    let Ok(rig_id) = RigId::new(&args.rig_id) else {
        bail!(
            "--rig-id {}: a rig id is at most 16 printable ASCII characters",
            heatbound_host::term::excerpt(&args.rig_id, 40)
        );
    };
    let options = SimOptions {
        scenario: args.scenario,
        seed: args.seed,
        rate_hz: args.rate_hz,
        duration_s: args.duration_s,
        summary_period_s: args.summary_period_s,
        rig_id,
        repair_at_s: args.repair_at_s,
        hot2: args.hot2,
    };
    if let Some(r) = args.repair_at_s
        && !(r.is_finite() && r >= 0.0)
    {
        bail!("--repair-at-s {r}: must be a finite number of seconds ≥ 0");
    }
    let (key, key_origin) = keyfile::resolve(args.key_file.as_deref())?;
    let config = match &args.config {
        Some(path) => heatbound_host::rigfile::load_config(Some(path))?,
        None => sil::default_config(&Rig::bench_stirling(args.scenario, args.seed)),
    };
    let mut sim = Simulation::with_key(&options, &config, Some(&key))?;
    let (mut sink, target, inbox) = open_sink(args)?;
    if inbox.is_some() {
        eprintln!("heatbound simulate: {}", key_origin.describe());
    }

    let start = Instant::now();
    let mut frames: Vec<Frame> = Vec::with_capacity(8);
    let mut bytes: Vec<u8> = Vec::with_capacity(4096);
    let mut written: u64 = 0;
    let mut noise_at_ms = args
        .line_noise_at_s
        .filter(|s| s.is_finite() && *s >= 0.0)
        .map(|s| (s * 1000.0).min(f64::from(u32::MAX)) as u32);
    while let Some(t_ms) = sim.next_tick(&mut frames) {
        if let Some(inbox) = &inbox {
            for command in inbox.take() {
                sim.receive(&command, &mut frames);
            }
        }
        for frame in &frames {
            let at = bytes.len();
            sil::encode_into(frame, &mut bytes)?;
            if noise_at_ms.is_some_and(|n| t_ms >= n) {
                noise_at_ms = None;
                // A flipped bit inside the frame, never a delimiter made or lost.
                let end = bytes.len().saturating_sub(1);
                if let Some(b) = bytes
                    .get_mut(at + 2..end)
                    .and_then(|frame| frame.iter_mut().find(|b| **b > 1))
                {
                    *b ^= 0x01;
                }
            }
        }
        frames.clear();
        if f > 0.0 {
            let due = Duration::from_secs_f64(f64::from(t_ms) / 1000.0 / f);
            if let Some(wait) = due.checked_sub(start.elapsed()) {
                std::thread::sleep(wait);
            }
        }
        if !bytes.is_empty() && (f > 0.0 || bytes.len() >= 4096) {
            sink.write_all(&bytes)
                .with_context(|| format!("writing the stream to {target}"))?;
            if f > 0.0 {
                sink.flush()
                    .with_context(|| format!("writing the stream to {target}"))?;
            }
            written += bytes.len() as u64;
            bytes.clear();
        }
    }
    sink.write_all(&bytes)
        .and_then(|()| sink.flush())
        .with_context(|| format!("writing the stream to {target}"))?;
    written += bytes.len() as u64;

    eprint!("{}", run_summary(args, &sim, written, &target));
    Ok(())
}

/// Opens the stream's destination; returns it with a name for messages,
/// and where commands from TCP peers arrive.
fn open_sink(args: &Args) -> Result<(Box<dyn Write>, String, Option<Inbox>)> {
    if let Some(port) = args.listen {
        let listener = TcpListener::bind((args.bind, port))
            .with_context(|| format!("cannot listen on {}:{port}", args.bind))?;
        let addr = listener.local_addr().context("listening socket")?;
        eprintln!("heatbound simulate: listening on {addr}");
        // Every client that connects is served; one that stops reading is
        // dropped, so it cannot stall the run.
        let (inbox, feed) = Inbox::new();
        let fanout = Fanout::accept_first(listener, Some(feed), |n| {
            eprintln!("heatbound simulate: {n}")
        })
        .with_context(|| format!("accepting a client on {addr}"))?;
        return Ok((
            Box::new(fanout),
            format!("the clients of {addr}"),
            Some(inbox),
        ));
    }
    if let Some(peer) = &args.connect {
        let stream = TcpStream::connect(peer.as_str())
            .with_context(|| format!("cannot connect to {peer}"))?;
        let _ = stream.set_nodelay(true);
        let (inbox, feed) = Inbox::new();
        if let Ok(reader) = stream.try_clone() {
            feed.listen_to(reader);
        }
        return Ok((Box::new(BufWriter::new(stream)), peer.clone(), Some(inbox)));
    }
    match &args.out {
        Some(path) if path.as_os_str() != "-" => {
            let file = File::create(path)
                .with_context(|| format!("{}: cannot create the file", path.display()))?;
            Ok((
                Box::new(BufWriter::new(file)),
                path.display().to_string(),
                None,
            ))
        }
        explicit => {
            let stdout = std::io::stdout();
            if explicit.is_none() && stdout.is_terminal() {
                bail!(
                    "refusing to write the binary stream to a terminal: give --out FILE, \
                     --out - or redirect stdout"
                );
            }
            Ok((
                Box::new(BufWriter::new(stdout.lock())),
                "stdout".to_owned(),
                None,
            ))
        }
    }
}

/// The run summary printed on stderr.
fn run_summary(args: &Args, sim: &Simulation, bytes: u64, target: &str) -> String {
    use std::fmt::Write as _;
    let s = sim.stats();
    let mut out = String::new();
    let _ = writeln!(
        out,
        "heatbound simulate: rig {}, scenario {}{}, seed {}, {} samples at {} Hz ({} invalid), \
         config digest {:#010x}",
        sim.hello().rig_id,
        args.scenario,
        if sim.rig().has_hot2() {
            " (two hot thermocouples)"
        } else {
            ""
        },
        args.seed,
        s.samples,
        args.rate_hz,
        s.invalid_samples,
        sim.hello().config_digest
    );
    let _ = writeln!(
        out,
        "  {} frames ({} hello, {} summary, {} event, {} reply), {bytes} bytes to {target}",
        s.frames(),
        s.hellos,
        s.summaries,
        s.events,
        s.replies
    );
    let raised: Vec<String> = s
        .alarm_events
        .iter()
        .filter(|e| e.kind == EventKind::Raised)
        .map(|e| {
            format!(
                "{} at {:.1} s ({})",
                e.rule,
                f64::from(e.t_ms) / 1000.0,
                e.severity
            )
        })
        .collect();
    if raised.is_empty() {
        let _ = writeln!(out, "  alarms raised: none");
    } else {
        let _ = writeln!(out, "  alarms raised: {}", raised.join(", "));
    }
    let _ = match (s.first_inconsistent_ms, &s.last_verdict) {
        (_, None) => writeln!(out, "  diagnosis: no summary sent"),
        (None, Some(v)) => writeln!(
            out,
            "  diagnosis: {} throughout",
            heatbound_host::verdict_check::words(v)
        ),
        (Some(t), Some(v)) => writeln!(
            out,
            "  diagnosis: inconsistent from {:.1} s; last summary: {}",
            f64::from(t) / 1000.0,
            heatbound_host::verdict_check::words(v)
        ),
    };
    let _ = writeln!(out, "{}", heatbound_host::term::SAFETY_NOTE);
    out
}
