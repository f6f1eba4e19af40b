//! `heatbound audit (FILE | DB)`: re-check a raw capture or a log database
//! with the audit engine (`heatbound_host::audit`) and say whether the record can
//! be trusted.
//!
//! ```text
//! FILE (raw bytes) --wire::Decoder--> Received frames + DecoderStats --+
//! DB (SQLite log)  --store reader---> Received frames + link errors  --+--> audit::audit --> report / JSON
//! ```
//!
//! The readers are [`heatbound_host::capture`]. The input kind is decided by content, not by name: a file that starts
//! with the 16-byte SQLite header is a log database, anything else a raw
//! capture.
//!
//! A long audit shows a progress bar on stderr
//! ([`heatbound_host::term::progress_bar`]): bytes while a capture is
//! decoded, then frames while they are read from a log and checked.
//! stdout carries only the report.
use std::io::Write as _;
use std::path::PathBuf;

use anyhow::{Context, Result, bail};
use heatbound_host::audit::{self, Input, LogFacts};
use heatbound_host::capture::{
    audit_database_with_progress, is_database, read_capture_with_progress,
};
use heatbound_host::term::{Counting, SAFETY_NOTE, progress_bar};

/// Arguments of `heatbound audit`.
#[derive(clap::Args)]
#[command(
    after_help = "Exit status: 0 the record is trustworthy; 1 it is not (lost or \
damaged frames, sequence gaps, figures that do not recompute, unflagged second-law violations \
or inconsistent alarms); 2 usage or input error (unreadable file, bad configuration)."
)]
pub struct Args {
    /// A raw capture of the controller's byte stream, or a heatbound log
    /// database (recognised by its SQLite header).
    pub input: PathBuf,
    /// Rig configuration (TOML) the controller runs, for the alarm delays and
    /// deadbands the Hello does not carry. Default: the built-in defaults.
    #[arg(long, value_name = "RIG.toml")]
    pub config: Option<PathBuf>,
    /// With a database: the run to audit (default: the latest).
    #[arg(long, value_name = "ID", conflicts_with = "rig")]
    pub run: Option<i64>,
    /// With a database (a lab log, or a watch log): audit every run of this
    /// rig, each on its own; trustworthy only if every one is.
    #[arg(long, value_name = "ID")]
    pub rig: Option<String>,
    /// Print JSON instead of a readable report.
    #[arg(long)]
    pub json: bool,
}

/// Runs the subcommand. Exits the process with status 1 when the record is
/// not trustworthy (after printing the report); errors are status 2.
pub fn run(args: &Args) -> Result<()> {
    let config = heatbound_host::rigfile::load_config(args.config.as_deref())?;
    let name = args.input.display().to_string();
    let size = std::fs::metadata(&args.input).map_or(0, |m| m.len());
    let label = format!("audit {name}");
    if let Some(rig) = &args.rig {
        return audit_rig(args, rig, &config);
    }
    let report = if is_database(&args.input)? {
        // Frames, read and then checked: the engine sets the length.
        let bar = progress_bar(&label, 0, Counting::Frames, size);
        let report = audit_database_with_progress(&args.input, args.run, &config, Some(&bar));
        bar.finish_and_clear();
        report?
    } else {
        if args.run.is_some() {
            bail!("{name}: --run applies to a log database, and this is a raw capture");
        }
        let bar = progress_bar(&label, size, Counting::Bytes, size);
        bar.set_prefix("decoding");
        let read = read_capture_with_progress(&args.input, Some(&bar));
        bar.finish_and_clear();
        let (frames, decoder) = read?;
        // Not one frame: this is no capture of ours (an empty file, a CSV,
        // random bytes), so there is nothing to judge. Unreadable, not
        // untrustworthy.
        if frames.is_empty() {
            bail!(
                "{name}: not a heatbound capture or log: no frame in its {size} bytes \
                 (give a capture from `simulate`/`watch --input`, or a log database)"
            );
        }
        let len = u64::try_from(frames.len()).unwrap_or(u64::MAX);
        let bar = progress_bar(&label, len, Counting::Frames, size);
        let input = Input {
            frames: &frames,
            decoder,
            link_errors: &[],
        };
        let report = audit::audit_with_progress(&input, &LogFacts::default(), &config, Some(&bar));
        bar.finish_and_clear();
        report
    };
    let mut stdout = std::io::stdout().lock();
    if args.json {
        let text = serde_json::to_string_pretty(&report).context("encoding the report")?;
        writeln!(stdout, "{text}").context("writing the report")?;
    } else {
        write!(stdout, "{}", report.text(&name)).context("writing the report")?;
        writeln!(stdout, "{}", SAFETY_NOTE).context("writing the report")?;
    }
    stdout.flush().context("writing the report")?;
    if !report.trustworthy {
        std::process::exit(1);
    }
    Ok(())
}

/// `--rig ID`: every run of the rig, a report each, then the verdict.
fn audit_rig(args: &Args, rig: &str, config: &heatbound::config::RigConfig) -> Result<()> {
    let name = args.input.display().to_string();
    if !is_database(&args.input)? {
        bail!("{name}: --rig applies to a log database, and this is a raw capture");
    }
    let log = heatbound_host::store::Log::open_read(&args.input)?;
    let runs = log.runs_of_rig(rig)?;
    drop(log);
    if runs.is_empty() {
        bail!("{name}: no run of rig {rig:?} (no run is named for it, and no Hello names it)");
    }
    let mut reports = Vec::new();
    for run in &runs {
        let bar = progress_bar(&format!("audit {name} run {run}"), 0, Counting::Frames, 0);
        let report = audit_database_with_progress(&args.input, Some(*run), config, Some(&bar));
        bar.finish_and_clear();
        reports.push((*run, report?));
    }
    let trustworthy = reports.iter().all(|(_, r)| r.trustworthy);
    let mut stdout = std::io::stdout().lock();
    if args.json {
        let value = serde_json::json!({
            "rig": rig,
            "trustworthy": trustworthy,
            "runs": reports.iter().map(|(run, r)| serde_json::json!({"run": run, "report": r})).collect::<Vec<_>>(),
        });
        let text = serde_json::to_string_pretty(&value).context("encoding the report")?;
        writeln!(stdout, "{text}").context("writing the report")?;
    } else {
        for (run, report) in &reports {
            write!(
                stdout,
                "{}",
                report.text(&format!("{name}, rig {rig}, run {run}"))
            )
            .context("writing the report")?;
            writeln!(stdout).context("writing the report")?;
        }
        let bad: Vec<String> = reports
            .iter()
            .filter(|(_, r)| !r.trustworthy)
            .map(|(run, _)| run.to_string())
            .collect();
        if bad.is_empty() {
            writeln!(
                stdout,
                "rig {rig}: {} runs, every one trustworthy",
                reports.len()
            )
        } else {
            writeln!(
                stdout,
                "rig {rig}: {} runs, NOT trustworthy: run {}",
                reports.len(),
                bad.join(", ")
            )
        }
        .context("writing the report")?;
        writeln!(stdout, "{}", SAFETY_NOTE).context("writing the report")?;
    }
    stdout.flush().context("writing the report")?;
    if !trustworthy {
        std::process::exit(1);
    }
    Ok(())
}
