//! `heatbound analyze`: replay a recorded run (CSV) through the monitor and
//! the alarms, and report the run totals, the final window and the alarm
//! timeline.
//!
//! The engines are [`heatbound_host::rigfile`] and [`heatbound_host::replay`].
//! A long replay shows a progress bar on stderr (bytes read, throughput,
//! time left; [`heatbound_host::term::progress_bar`]); stdout carries only
//! the report.
use std::path::PathBuf;

use anyhow::Result;
use heatbound_host::replay::replay_file_with;
use heatbound_host::rigfile::load_rig;
use heatbound_host::term::{Counting, progress_bar};

/// Arguments of `heatbound analyze`.
#[derive(clap::Args)]
pub struct Args {
    /// The recorded run: CSV with a header naming the columns time_s, hot_c or
    /// hot_k, cold_c or cold_k, heat_in_w, work_w and optionally heat_out_w and
    /// hot2_c or hot2_k. Another logger's file is read as the [csv] table of
    /// --config maps it: delimiter, decimal comma, preamble lines, column names
    /// and units (s, ms, min, h, ISO 8601, spreadsheet days; °C, K, °F,
    /// thermocouple mV, RTD ohm; W, kW, mW); see docs/rig-config.md.
    pub file: PathBuf,
    /// Rig configuration (TOML), with an optional [csv] table for another
    /// logger's layout; every key optional. Default: the built-in defaults.
    #[arg(long, value_name = "RIG.toml")]
    pub config: Option<PathBuf>,
    /// Print JSON instead of a readable report.
    #[arg(long)]
    pub json: bool,
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    let rig = load_rig(args.config.as_deref())?;
    let name = args.file.display().to_string();
    let size = std::fs::metadata(&args.file).map_or(0, |m| m.len());
    let bar = progress_bar(&format!("analyze {name}"), size, Counting::Bytes, size);
    let replay = replay_file_with(&args.file, &rig.config, rig.csv.as_ref(), Some(&bar));
    bar.finish_and_clear();
    let replay = replay?;
    if args.json {
        println!("{}", replay.json_text()?);
    } else {
        print!("{}", replay.text(&name));
    }
    Ok(())
}
