//! `heatbound cycle`: ideal-gas reference cycles and paths.
//!
//!
//! Parses its arguments, evaluates the file with
//! [`heatbound_host::cycle_file`] and prints a table or JSON; errors name the
//! file, the part of it and the reason on one line.

use std::path::PathBuf;

use anyhow::{Context, Result};
use heatbound_host::cycle_file::evaluate_file;

/// Arguments of `heatbound cycle`.
#[derive(clap::Args)]
pub struct Args {
    /// The cycle file (TOML).
    pub file: PathBuf,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    let file = args.file.display().to_string();
    let report = evaluate_file(&args.file).context(file.clone())?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report.json())?);
    } else {
        print!("{}", report.table(&file));
    }
    Ok(())
}
