//! `heatbound chart LOG.sqlite [--run N] [--out PATH] [--clock device|wall]`:
//! draw one run of a log as a picture with the chart renderer
//! ([`heatbound_host::chart`]).
use std::io::Write as _;
use std::path::PathBuf;

use anyhow::{Context, Result};
use heatbound_host::chart::{ChartOptions, Clock, default_out, write_chart_with};
use heatbound_host::store::RunId;
use heatbound_host::term::SAFETY_NOTE;

/// The clock of the time axis, as `--clock` names it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum ClockArg {
    /// The controller's own sample time, as `watch` prints it, in s, min, h
    /// or days by the run's length.
    Device,
    /// The host's receive time, as UTC date and time.
    Wall,
}

/// Arguments of `heatbound chart`.
#[derive(clap::Args)]
#[command(
    after_help = "Draws one run of a log written by `heatbound watch` or `heatbound demo`: \
the efficiency (or COP) and its Carnot bound, the entropy generation rate, the hot-side, \
cold-side and ambient temperatures, and the mean powers of each window (heat in, work, heat out), \
against time, with second-law alarms shaded and alarm events marked. Link outages, controller \
restarts and runs started on command are marked on the time axis, and every line breaks there \
and at summaries missing from the sequence. Alarm times in the legend are the device's, as \
`watch` prints them. Exit status 2 on unreadable input or a bad --out."
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
    /// The time axis: `device` (the controller's sample time; sessions after
    /// a restart follow one another) or `wall` (the host's clock, UTC).
    #[arg(long, value_enum, value_name = "CLOCK", default_value = "device")]
    pub clock: ClockArg,
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    let out = args.out.clone().unwrap_or_else(|| default_out(&args.log));
    let options = ChartOptions {
        run: args.run,
        clock: match args.clock {
            ClockArg::Device => Clock::Device,
            ClockArg::Wall => Clock::Wall,
        },
    };
    let drawn = write_chart_with(&args.log, &options, &out)?;
    let mut stdout = std::io::stdout().lock();
    writeln!(stdout, "{}", drawn.line()).context("writing the report")?;
    writeln!(stdout, "{}", SAFETY_NOTE).context("writing the report")?;
    stdout.flush().context("writing the report")?;
    Ok(())
}
