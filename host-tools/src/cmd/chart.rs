//! `heatbound chart LOG.sqlite [--run N] [--out PATH]`: draw one run of a
//! log as a picture with the chart renderer ([`heatbound_host::chart`]).
use std::io::Write as _;
use std::path::PathBuf;

use anyhow::{Context, Result};
use heatbound_host::chart::{default_out, write_chart};
use heatbound_host::store::RunId;
use heatbound_host::term::SAFETY_NOTE;

/// Arguments of `heatbound chart`.
#[derive(clap::Args)]
#[command(
    after_help = "Draws one run of a log written by `heatbound watch` or `heatbound demo`: \
the efficiency (or COP) and its Carnot bound, the entropy generation rate, and the hot-side and \
ambient temperatures, against rig time, with second-law alarms shaded and alarm events marked. \
Exit status 2 on unreadable input or a bad --out."
)]
pub struct Args {
    /// The log database (SQLite) to draw from.
    #[arg(value_name = "LOG.sqlite")]
    pub log: PathBuf,
    /// The run to draw (default: the latest run that has summaries).
    #[arg(long, value_name = "ID")]
    pub run: Option<RunId>,
    /// Where to write the picture: `.png` or `.svg` (default: the log's name
    /// with `.png`, beside it).
    #[arg(long, short, value_name = "PATH")]
    pub out: Option<PathBuf>,
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    let out = args.out.clone().unwrap_or_else(|| default_out(&args.log));
    let drawn = write_chart(&args.log, args.run, &out)?;
    let mut stdout = std::io::stdout().lock();
    writeln!(stdout, "{}", drawn.line()).context("writing the report")?;
    writeln!(stdout, "{}", SAFETY_NOTE).context("writing the report")?;
    stdout.flush().context("writing the report")?;
    Ok(())
}
