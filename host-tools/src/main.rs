//! `heatbound`: the host tool.
use std::process::ExitCode;

use clap::{CommandFactory as _, Parser, Subcommand};

mod cmd;
use heatbound_host::term::SAFETY_NOTE;

#[derive(Parser)]
#[command(name = "heatbound", version, about = "Thermodynamic checks for heat-engine test rigs", after_help = SAFETY_NOTE)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Compute an ideal-gas reference cycle or path from a TOML file.
    Cycle(cmd::cycle::Args),
    /// Convert a sensor reading (thermocouple EMF, RTD resistance) to temperature or back.
    Convert(cmd::convert::Args),
    /// Replay a recorded run (CSV) through the monitor and alarms.
    Analyze(cmd::analyze::Args),
    /// Decode a live stream, print a line per summary and log everything to SQLite.
    Watch(cmd::watch::Args),
    /// Collect every rig that a `watch --publish` sends to the lab's MQTT broker into one log, and show them.
    Lab(cmd::lab::Args),
    /// Run the simulated bench rig through the monitor and alarms and emit the wire stream.
    Simulate(cmd::simulate::Args),
    /// Re-check a capture or a log database; exit non-zero when it is not trustworthy.
    Audit(cmd::audit::Args),
    /// Draw one run of a log as a picture (PNG or SVG): η (or COP) and its Carnot bound, σ̇, temperatures, alarms.
    Chart(cmd::chart::Args),
    /// Write one run of a log as CSV: a row per summary, wall-clock and rig time, alarms and faults as named columns.
    Export(cmd::export::Args),
    /// Write one run (a log, or a CSV replayed) as a self-contained HTML test report, printable to PDF.
    Report(cmd::report::Args),
    /// Run the whole chain with no hardware: a simulated rig streams over loopback TCP into the log, then the log is audited, charted and reported.
    Demo(cmd::demo::Args),
    /// Acknowledge an alarm on the controller, through the running `watch`, or from the lab through the MQTT broker.
    Ack(cmd::operate::AckArgs),
    /// Send a new configuration (rig.toml) to the controller, through the running `watch`.
    Configure(cmd::operate::ConfigureArgs),
    /// Start a new run on the controller (its run totals start afresh), through the running `watch`.
    NewRun(cmd::operate::NewRunArgs),
    /// Print the shell completion script for bash, zsh, fish, elvish or powershell.
    Completions(cmd::shell::CompletionsArgs),
    /// Print the man page heatbound(1) as roff, or write one page per command with --out DIR.
    Man(cmd::shell::ManArgs),
}

/// A usage error as one line: clap's message up to its first blank line,
/// joined, without the `error: ` prefix.
fn usage_line(err: &clap::Error) -> String {
    let rendered = err.render().to_string();
    let message: Vec<&str> = rendered
        .lines()
        .map(str::trim)
        .skip_while(|l| l.is_empty())
        .take_while(|l| !l.is_empty())
        .collect();
    let reason = message.join(" ");
    let reason = reason.trim_start_matches("error:").trim();
    format!("{reason} (see `heatbound --help`)")
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(err) => {
            use clap::error::ErrorKind;
            return match err.kind() {
                ErrorKind::DisplayHelp
                | ErrorKind::DisplayVersion
                | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand => {
                    let _ = err.print();
                    if err.kind() == ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand {
                        ExitCode::from(2)
                    } else {
                        ExitCode::SUCCESS
                    }
                }
                _ => {
                    eprintln!("heatbound: error: {}", usage_line(&err));
                    ExitCode::from(2)
                }
            };
        }
    };
    let result = match cli.command {
        Command::Cycle(args) => cmd::cycle::run(&args),
        Command::Convert(args) => cmd::convert::run(&args),
        Command::Analyze(args) => cmd::analyze::run(&args),
        Command::Watch(args) => cmd::watch::run(&args),
        Command::Simulate(args) => cmd::simulate::run(&args),
        Command::Lab(args) => cmd::lab::run(&args),
        Command::Audit(args) => cmd::audit::run(&args),
        Command::Chart(args) => cmd::chart::run(&args),
        Command::Export(args) => cmd::export::run(&args),
        Command::Report(args) => cmd::report::run(&args),
        Command::Demo(args) => cmd::demo::run(&args),
        Command::Ack(args) => cmd::operate::ack(&args),
        Command::Configure(args) => cmd::operate::configure(&args),
        Command::NewRun(args) => cmd::operate::new_run(&args),
        Command::Completions(args) => cmd::shell::completions(&args, Cli::command()),
        Command::Man(args) => cmd::shell::man(&args, Cli::command()),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            // One line: file, place and reason, each cause once.
            eprintln!(
                "heatbound: error: {}",
                heatbound_host::term::error_line(err.as_ref())
            );
            ExitCode::from(2)
        }
    }
}
