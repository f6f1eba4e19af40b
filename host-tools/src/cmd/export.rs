//! `heatbound export LOG.sqlite [--run N] --out FILE.csv [--force]`: one run
//! of a log as CSV, one row per summary ([`heatbound_host::export`];
//! the columns are in docs/export.md).
//!
//! Which run is taken goes to stderr before the export starts; a long
//! export shows a progress bar there ([`heatbound_host::term::progress_bar`]);
//! stdout gets the one-line result.
use std::io::Write as _;
use std::path::PathBuf;

use anyhow::{Context, Result};
use heatbound_host::export::{choose_run, export_run};
use heatbound_host::store::RunId;
use heatbound_host::term::{Counting, progress_bar};

/// Arguments of `heatbound export`.
#[derive(clap::Args)]
#[command(
    after_help = "Writes one run of a log written by `heatbound watch` or `heatbound demo` as CSV: \
one row per summary, with the host's receive time (ISO 8601, UTC) and the controller's clock \
(seconds), every figure with its unit in the column name, and each alarm and fault bit as a \
named 0/1 column (alarm_beyond_carnot, …, fault_hot, …, fault_stale). A figure that is not \
available is an empty cell. The columns are listed in docs/export.md. An existing file is \
replaced only with --force. Exit status 2 on unreadable input or a bad --out."
)]
pub struct Args {
    /// The log database (SQLite) to export from.
    #[arg(value_name = "LOG.sqlite")]
    pub log: PathBuf,
    /// The run to export (default: the latest run that has summaries).
    #[arg(long, value_name = "ID")]
    pub run: Option<RunId>,
    /// Where to write the CSV file.
    #[arg(long, short, value_name = "FILE.csv")]
    pub out: PathBuf,
    /// Replace --out if it exists.
    #[arg(long)]
    pub force: bool,
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    let (store, chosen, runs) = choose_run(&args.log, args.run)?;
    eprintln!(
        "heatbound export: {}: {}",
        args.log.display(),
        chosen.line(runs)
    );
    let size = std::fs::metadata(&args.log).map_or(0, |m| m.len());
    let bar = progress_bar(
        &format!("export run {}", chosen.run.id),
        chosen.run.summaries,
        Counting::Rows,
        size,
    );
    let written = export_run(
        &store,
        &args.log,
        &chosen,
        &args.out,
        args.force,
        Some(&bar),
    );
    bar.finish_and_clear();
    let rows = written?;
    let mut stdout = std::io::stdout().lock();
    writeln!(
        stdout,
        "export: {} (run {}, {rows} summaries)",
        args.out.display(),
        chosen.run.id
    )
    .context("writing the report")?;
    stdout.flush().context("writing the report")?;
    Ok(())
}
