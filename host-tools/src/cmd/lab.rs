//! `heatbound lab --broker URL`: collect every rig that a `watch
//! --publish` sends to the lab's broker into one log, and show them, a line
//! per rig.
//!
//! ```text
//! broker ROOT/rigs/+/records --> mqtt::collector (verify, each row once, holes asked for) --> lab log
//! broker ROOT/rigs/+/status  --> mqtt::overview --> a table per second | --json: an object per change
//! ```
use std::io::IsTerminal as _;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use anyhow::{Context, Result, bail};
use heatbound_host::link::now_ms;
use heatbound_host::mqtt::broker::{self, Broker, BrokerArgs};
use heatbound_host::mqtt::collector::Collector;
use heatbound_host::mqtt::topics::{Leaf, Topics};
use rumqttc::{Client, Event, Packet, QoS};

/// Set by the SIGINT/SIGTERM handler.
static STOP: AtomicBool = AtomicBool::new(false);

/// The lab log's default file, in the current directory.
pub const DEFAULT_LAB_DB: &str = "heatbound-lab.sqlite";

/// Arguments of `heatbound lab`.
#[derive(clap::Args)]
pub struct Args {
    /// The lab's broker: mqtt://HOST:PORT, or mqtts://HOST:PORT for TLS.
    #[arg(long, value_name = "URL")]
    pub broker: String,
    /// The lab log: every rig's runs, with the rig named (created if missing).
    #[arg(long, value_name = "FILE", default_value = DEFAULT_LAB_DB)]
    pub db: PathBuf,
    /// One JSON object per rig update, one per line, instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Stop after this many seconds.
    #[arg(long, value_name = "S")]
    pub max_duration_s: Option<f64>,
    /// Seconds a hole in a rig's rows may stay open, asked for again every
    /// 2 s, before it is given up as lost.
    #[arg(long, value_name = "S", default_value_t = 120.0)]
    pub give_up_s: f64,
    /// How to reach the broker.
    #[command(flatten)]
    pub connection: BrokerArgs,
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    let broker = Broker::new(&args.broker, &args.connection)?;
    let topics = Topics::new(&args.connection.topic_root).map_err(anyhow::Error::msg)?;
    let give_up = match args.give_up_s {
        s if s.is_finite() && s > 0.0 => Duration::from_secs_f64(s.min(1e6)),
        s => bail!("--give-up-s {s}: must be a finite number of seconds > 0"),
    };
    let deadline = match args.max_duration_s {
        Some(s) if !(s.is_finite() && s >= 0.0) => {
            bail!("--max-duration-s {s}: must be a finite number of seconds ≥ 0")
        }
        Some(s) => Some(Instant::now() + Duration::from_secs_f64(s.min(1e9))),
        None => None,
    };
    heatbound_host::link::check_log_target(&args.db)?;
    let mut collector = Collector::open(&args.db, give_up)
        .with_context(|| format!("cannot open the lab log {}", args.db.display()))?;
    let _ = ctrlc::set_handler(|| {
        if STOP.swap(true, Ordering::SeqCst) {
            std::process::exit(130);
        }
    });
    // The same log keeps the same session on the broker across restarts.
    let client_id = format!("heatbound-lab-{:x}", collector.log().log_id()?);
    let (client, mut connection) = Client::new(broker.options(&client_id, None), 4096);
    eprintln!(
        "heatbound lab: collecting {} from {} into {}",
        topics.every_rig(Leaf::Records),
        broker.url.name(),
        args.db.display()
    );
    let table = !args.json && std::io::stdout().is_terminal();
    let mut last_error: Option<String> = None;
    let mut shown = Instant::now();
    let mut ticked = Instant::now();
    let mut backoff = Duration::from_millis(250);
    let mut connected_once = false;
    while !STOP.load(Ordering::SeqCst) && deadline.is_none_or(|d| Instant::now() < d) {
        match connection.recv_timeout(Duration::from_millis(50)) {
            Ok(Ok(Event::Incoming(Packet::ConnAck(_)))) => {
                backoff = Duration::from_millis(250);
                if last_error.take().is_some() {
                    eprintln!("heatbound lab: broker {} is back", broker.url.name());
                } else if !connected_once {
                    eprintln!("heatbound lab: connected to {}", broker.url.name());
                }
                connected_once = true;
                for leaf in [Leaf::Records, Leaf::Status] {
                    client
                        .try_subscribe(topics.every_rig(leaf), QoS::AtLeastOnce)
                        .context("cannot subscribe")?;
                }
                // What the broker held for the lab while it was away may be
                // gone: every open run is asked for the rest.
                for ask in collector.resync() {
                    let _ = client.try_publish(
                        topics.rig(&ask.rig, Leaf::Resend),
                        QoS::AtLeastOnce,
                        false,
                        ask.body,
                    );
                }
            }
            Ok(Ok(Event::Incoming(Packet::Publish(p)))) => match topics.parse(&p.topic) {
                Some((rig, Leaf::Records)) => collector
                    .take(&rig, &p.payload)
                    .with_context(|| format!("cannot log a record of rig {rig}"))?,
                Some((rig, Leaf::Status)) => collector
                    .status(&rig, &p.payload)
                    .with_context(|| format!("cannot log the status of rig {rig}"))?,
                _ => {}
            },
            Ok(Ok(_)) => {}
            Ok(Err(e)) => {
                let words = broker::describe(&e);
                if last_error.as_deref() != Some(words.as_str()) {
                    eprintln!(
                        "heatbound lab: broker {}: {words}; retrying",
                        broker.url.name()
                    );
                    last_error = Some(words);
                }
                let wait = if broker::login_refused(&e) {
                    Duration::from_secs(30)
                } else {
                    backoff
                };
                // Back soon: whatever the broker lost while the lab was away is
                // asked for again only once it is back.
                backoff = (backoff * 2).min(Duration::from_secs(1));
                let until = Instant::now() + wait;
                while Instant::now() < until && !STOP.load(Ordering::SeqCst) {
                    std::thread::sleep(Duration::from_millis(50));
                }
            }
            Err(rumqttc::RecvTimeoutError::Timeout) => {}
            Err(rumqttc::RecvTimeoutError::Disconnected) => break,
        }
        if ticked.elapsed() >= Duration::from_millis(100) {
            ticked = Instant::now();
            for ask in collector.tick().context("cannot commit the lab log")? {
                let _ = client.try_publish(
                    topics.rig(&ask.rig, Leaf::Resend),
                    QoS::AtLeastOnce,
                    false,
                    ask.body,
                );
            }
        }
        if shown.elapsed() >= Duration::from_secs(1) {
            shown = Instant::now();
            show(&mut collector, args.json, table);
        }
    }
    let _ = client.try_disconnect();
    let _ = connection.recv_timeout(Duration::from_millis(200));
    show(&mut collector, args.json, table);
    let t = collector
        .close()
        .with_context(|| format!("cannot close the lab log {}", args.db.display()))?;
    let ms = |x: Option<u64>| x.map_or_else(|| "-".to_string(), |v| format!("{v} ms"));
    eprintln!(
        "heatbound lab: {} records taken, {} duplicates dropped, {} recovered after {} resend requests, {} holes given up, {} messages refused; latency from the rig's watch to this log: p50 {}, p99 {} over {} frames; log {}",
        t.taken,
        t.duplicates,
        t.recovered,
        t.resend_requests,
        t.lost,
        t.refused,
        ms(t.latency_p50_ms),
        ms(t.latency_p99_ms),
        t.timed,
        args.db.display()
    );
    eprintln!("{}", heatbound_host::term::SAFETY_NOTE);
    Ok(())
}

/// Prints what changed: the whole table on a terminal, else a line (or a
/// JSON object) per rig that changed.
fn show(collector: &mut Collector, json: bool, table: bool) {
    let now = now_ms();
    let changed = collector.overview.take_changed();
    if table {
        print!("\x1b[H\x1b[2J{}", collector.overview.table(now));
        return;
    }
    if changed.is_empty() {
        return;
    }
    if json {
        for rig in changed {
            if let Some(v) = collector.overview.json(&rig, now) {
                println!("{v}");
            }
        }
    } else {
        let text = collector.overview.table(now);
        let mut lines = text.lines();
        let header = lines.next().unwrap_or_default();
        println!("{header}");
        for line in lines {
            if changed.iter().any(|r| line.starts_with(r.as_str())) {
                println!("{line}");
            }
        }
    }
}
