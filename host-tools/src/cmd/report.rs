//! `heatbound report (LOG.sqlite [--run N] | FILE.csv [--config rig.toml] [--summary-period S]) [--out report.html]`:
//! one run as a self-contained HTML test report, from the report engine
//! ([`heatbound_host::report`]).
//!
//! The input kind is decided by content, not by name: a file that starts
//! with the SQLite header is a log, anything else a recorded CSV file.
use std::io::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result, bail};
use heatbound_host::capture::is_database;
use heatbound_host::report::{check_target, default_out, from_csv, from_log, write};
use heatbound_host::rigfile::load_rig;
use heatbound_host::term::{Counting, SAFETY_NOTE, progress_bar};

/// Arguments of `heatbound report`.
#[derive(clap::Args)]
#[command(
    after_help = "Writes one HTML file that needs nothing else: no network, the font, style and \
charts embedded. Open it in a browser, or print it to PDF (A4; the chart on a landscape page). \
It holds the run's header (rig, firmware, configuration digest, time span, losses and gaps), the \
verdict with each check, the run totals with their expanded uncertainties, the GUM uncertainty \
budget of η, η_C, the margin and σ̇, the steady periods, the alarm timeline with the diagnosis at \
each raise, and the chart. An existing file at --out is replaced only if it is an earlier \
heatbound report. Exit status 2 on unreadable input or a bad --out."
)]
pub struct Args {
    /// A log database written by `heatbound watch` or `heatbound demo`, or
    /// a recorded run as CSV (as `heatbound analyze` reads it).
    #[arg(value_name = "LOG.sqlite|FILE.csv")]
    pub input: PathBuf,
    /// With a log: the run to report on (default: the latest run that has
    /// summaries).
    #[arg(long, value_name = "ID")]
    pub run: Option<i64>,
    /// Rig configuration (TOML). A CSV file is replayed with it (and read as
    /// its [csv] table says); a log's audit takes from it what the Hello
    /// does not carry. Default: the built-in defaults.
    #[arg(long, value_name = "RIG.toml")]
    pub config: Option<PathBuf>,
    /// With a CSV file: the summary period, seconds of the file's time. The
    /// steady periods and the chart are drawn from the summaries that a
    /// controller running the configuration would send this often.
    #[arg(long, value_name = "SECONDS", default_value_t = 1.0)]
    pub summary_period: f64,
    /// Where to write the page (default: the input's name with `.html`,
    /// beside it).
    #[arg(long, short, value_name = "PATH")]
    pub out: Option<PathBuf>,
}

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    let rig = load_rig(args.config.as_deref())?;
    let out = args.out.clone().unwrap_or_else(|| default_out(&args.input));
    let mut inputs: Vec<&Path> = vec![&args.input];
    if let Some(config) = &args.config {
        inputs.push(config);
    }
    // Refuse a bad --out before the work, not after it.
    check_target(&out, &inputs)?;
    let name = args.input.display().to_string();
    let report = if is_database(&args.input)? {
        from_log(&args.input, args.run, &rig.config)?
    } else {
        if args.run.is_some() {
            bail!("{name}: --run applies to a log database, and this is a CSV file");
        }
        let period_ms = args.summary_period * 1000.0;
        if !(period_ms.is_finite() && (1.0..1e9).contains(&period_ms.round())) {
            bail!(
                "--summary-period: must be at least 0.001 s and under 10^6 s (got {})",
                args.summary_period
            );
        }
        // Checked above: a whole number of ms from 1 to under 10^9.
        #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)]
        let period_ms = period_ms.round() as u32;
        let size = std::fs::metadata(&args.input).map_or(0, |m| m.len());
        let bar = progress_bar(&format!("report {name}"), size, Counting::Bytes, size);
        let report = from_csv(
            &args.input,
            &rig.config,
            rig.csv.as_ref(),
            args.config.as_deref(),
            period_ms,
            Some(&bar),
        );
        bar.finish_and_clear();
        report?
    };
    let written = write(&report, &out, &inputs)?;
    let mut stdout = std::io::stdout().lock();
    writeln!(stdout, "{}", written.line()).context("writing the report")?;
    writeln!(stdout, "verdict: {}", report.verdict.headline).context("writing the report")?;
    writeln!(stdout, "{SAFETY_NOTE}").context("writing the report")?;
    stdout.flush().context("writing the report")?;
    Ok(())
}
