//! `heatbound ack`, `heatbound configure` and `heatbound new-run`: what an
//! operator asks of the controller, through the `watch` (or `demo`) that
//! holds its link.
//!
//! ```text
//! arguments --> control socket (found, or --socket) --> watch --> sealed command
//!     --> controller --> Reply --> one line; exit 0 applied, 1 refused, 2 not reached
//! ```
//!
//! The key stays with the `watch`: these commands never read it. The one
//! exception is `ack --broker`, from the lab: there is no local `watch`, so
//! the command is sealed here with the rig's key (`--key-file`) and carried
//! by the broker to the rig's `watch --publish`
//! ([`heatbound_host::mqtt::remote`]).
use std::path::{Path, PathBuf};
use std::time::Duration;

use anyhow::{Result, bail};
use heatbound::alarm::RuleId;
use heatbound::wire::{Command, Hello};
use heatbound_host::control::{self, WireAnswer, WireAsk, WireRequest};
use heatbound_host::keyfile;
use heatbound_host::mqtt::broker::{Broker, BrokerArgs};
use heatbound_host::mqtt::remote;
use heatbound_host::mqtt::topics::Topics;

const EXIT_STATUS: &str = "Exit status: 0 when the controller applied the command, 1 when it \
refused it (the reason is printed), 2 when no watch or no controller could be reached.";

/// Which link holder to ask, and how long to wait.
#[derive(clap::Args)]
pub struct Target {
    /// The rig whose watch to use, when several run.
    #[arg(long, value_name = "ID")]
    pub rig: Option<String>,
    /// The control socket to use, instead of finding it.
    #[arg(long, value_name = "PATH")]
    pub socket: Option<PathBuf>,
    /// Seconds to wait for the controller's reply (a new run or a
    /// configuration waits for the next window boundary).
    #[arg(long, value_name = "S", default_value_t = 15.0)]
    pub timeout_s: f64,
}

/// Arguments of `heatbound ack`.
#[derive(clap::Args)]
#[command(after_help = EXIT_STATUS)]
pub struct AckArgs {
    /// The rule to acknowledge (e.g. beyond_carnot); without it, every active alarm.
    #[arg(long, value_name = "ID", value_parser = parse_rule)]
    pub rule: Option<RuleId>,
    #[command(flatten)]
    pub target: Target,
    /// From the lab: send it through this MQTT broker (mqtt://HOST:PORT or
    /// mqtts://) to the `watch --publish` of --rig, sealed here with the
    /// rig's key.
    #[arg(long, value_name = "URL", requires = "rig", conflicts_with = "socket")]
    pub broker: Option<String>,
    /// With --broker: the rig's command key, a file of 64 hex digits
    /// readable by you alone (default: $HEATBOUND_KEY_FILE, else the public
    /// demo key).
    #[arg(long, value_name = "FILE", requires = "broker")]
    pub key_file: Option<PathBuf>,
    /// With --broker: how to reach it.
    #[command(flatten)]
    pub connection: BrokerArgs,
}

/// Arguments of `heatbound configure`.
#[derive(clap::Args)]
#[command(after_help = EXIT_STATUS)]
pub struct ConfigureArgs {
    /// The new configuration (rig.toml), checked here before it is sent.
    #[arg(value_name = "RIG.toml")]
    pub config: PathBuf,
    #[command(flatten)]
    pub target: Target,
}

/// Arguments of `heatbound new-run`.
#[derive(clap::Args)]
#[command(after_help = EXIT_STATUS)]
pub struct NewRunArgs {
    #[command(flatten)]
    pub target: Target,
}

fn parse_rule(s: &str) -> Result<RuleId, String> {
    RuleId::parse(s).ok_or_else(|| {
        let ids: Vec<&str> = RuleId::ALL.iter().map(|r| r.as_str()).collect();
        format!("unknown rule {s:?}; the rules are {}", ids.join(", "))
    })
}

/// Runs `heatbound ack`.
pub fn ack(args: &AckArgs) -> Result<()> {
    let what = match args.rule {
        Some(rule) => format!("acknowledge {rule}"),
        None => "acknowledge all".to_string(),
    };
    if let Some(url) = &args.broker {
        return ack_through_broker(args, url, &what);
    }
    send(&args.target, "ack", WireAsk::Ack { rule: args.rule }, &what)
}

/// `ack --broker`: seals the acknowledge for the rig's controller session
/// (from the rig's retained status) and waits for its watch's answer.
fn ack_through_broker(args: &AckArgs, url: &str, what: &str) -> Result<()> {
    let t = args.target.timeout_s;
    if !(t.is_finite() && t > 0.0 && t <= 3600.0) {
        bail!("--timeout-s {t}: must be a number of seconds in (0, 3600]");
    }
    let Some(rig) = args.target.rig.as_deref() else {
        bail!("--broker needs --rig: the rig to send the acknowledge to");
    };
    let broker = Broker::new(url, &args.connection)?;
    let topics = Topics::new(&args.connection.topic_root).map_err(anyhow::Error::msg)?;
    let (key, origin) = keyfile::resolve(args.key_file.as_deref())?;
    eprintln!("heatbound ack: {}", origin.describe());
    let outcome = remote::send(
        &broker,
        &topics,
        rig,
        &key,
        Command::Acknowledge(args.rule),
        Duration::from_secs_f64(t),
    )?;
    let line = format!(
        "rig {rig}: {what} (command {} through {}): {}{}",
        outcome.counter,
        broker.url.name(),
        outcome.outcome,
        if outcome.message.is_empty() {
            String::new()
        } else {
            format!(": {}", outcome.message)
        }
    );
    if outcome.applied() {
        println!("{line}");
        Ok(())
    } else if outcome.answered() || outcome.outcome == "refused" {
        println!("{line}");
        std::process::exit(1)
    } else {
        bail!("{line}")
    }
}

/// Runs `heatbound configure`.
pub fn configure(args: &ConfigureArgs) -> Result<()> {
    let config = heatbound_host::rigfile::load_config(Some(Path::new(&args.config)))?;
    let what = format!(
        "configure {} (digest {:08x})",
        args.config.display(),
        Hello::config_digest(&config)
    );
    send(
        &args.target,
        "configure",
        WireAsk::Configure {
            config: Box::new(config),
        },
        &what,
    )
}

/// Runs `heatbound new-run`.
pub fn new_run(args: &NewRunArgs) -> Result<()> {
    send(&args.target, "new-run", WireAsk::NewRun, "new run")
}

/// Asks, prints the answer in one line and leaves with its exit status.
fn send(target: &Target, command: &str, ask: WireAsk, what: &str) -> Result<()> {
    let t = target.timeout_s;
    if !(t.is_finite() && t > 0.0 && t <= 3600.0) {
        bail!("--timeout-s {t}: must be a number of seconds in (0, 3600]");
    }
    let request = WireRequest {
        origin: format!("heatbound {command} (pid {})", std::process::id()),
        timeout_s: Some(t),
        ask,
    };
    let answer = control::ask(target.socket.as_deref(), target.rig.as_deref(), &request)?;
    let line = control::describe(&answer, what);
    match (control::exit_code(&answer), &answer) {
        (0, _) => {
            println!("{line}");
            Ok(())
        }
        (1, WireAnswer::Replied { .. }) => {
            println!("{line}");
            std::process::exit(1)
        }
        _ => bail!("{line}"),
    }
}
