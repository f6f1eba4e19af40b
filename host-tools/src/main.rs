//! `heatbound`: the host tool.
use std::process::ExitCode;

use clap::{Parser, Subcommand};

mod cmd;

/// Cautions printed beside reports and in the help text.
pub const SAFETY_NOTE: &str = "Caution: heat-engine rigs have hot surfaces, pressurised parts, \
rotating parts and electric heaters. heatbound alarms are monitoring aids, not a safety-rated \
interlock: keep hardwired cut-outs, relief devices and guards in place, and follow local codes \
and licensed practice.";

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
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Cycle(args) => cmd::cycle::run(&args),
        Command::Convert(args) => cmd::convert::run(&args),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            // One line, the whole cause chain: file, place and reason.
            eprintln!("heatbound: error: {err:#}");
            ExitCode::from(2)
        }
    }
}
