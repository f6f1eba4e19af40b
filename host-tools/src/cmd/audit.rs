//! `heatbound audit (FILE | DB)`: re-check a raw capture or a log database
//! with the audit engine (`heatbound_host::audit`) and say whether the record can
//! be trusted.
//!
//! ```text
//! FILE (raw bytes) --wire::Decoder--> Received frames + DecoderStats --+
//! DB (SQLite log)  --store reader---> Received frames + link errors  --+--> audit::audit --> report / JSON
//! ```
//!
//! The input kind is decided by content, not by name: a file that starts
//! with the 16-byte SQLite header is a log database, anything else a raw
//! capture.
use std::fs::File;
use std::io::{BufReader, Read, Write as _};
use std::path::{Path, PathBuf};

use anyhow::{Context, Result, bail};
use heatbound::wire::{self, Decoder, DecoderStats};

use heatbound::config::RigConfig;
use heatbound_host::audit::{self, Input, Received, Report};
use heatbound_host::store::Log;

/// The first 16 bytes of every SQLite 3 database file.
const SQLITE_HEADER: &[u8; 16] = b"SQLite format 3\0";

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
    #[arg(long, value_name = "ID")]
    pub run: Option<i64>,
    /// Print JSON instead of a readable report.
    #[arg(long)]
    pub json: bool,
}

/// Runs the subcommand. Exits the process with status 1 when the record is
/// not trustworthy (after printing the report); errors are status 2.
pub fn run(args: &Args) -> Result<()> {
    let config = crate::cmd::analyze::load_config(args.config.as_deref())?;
    let name = args.input.display().to_string();
    let report = if is_database(&args.input)? {
        audit_database(&args.input, args.run, &config)?
    } else {
        if args.run.is_some() {
            bail!("{name}: --run applies to a log database, and this is a raw capture");
        }
        let (frames, decoder) = read_capture(&args.input)?;
        audit::audit(
            &Input {
                frames: &frames,
                decoder,
                link_errors: &[],
            },
            &config,
        )
    };
    let mut stdout = std::io::stdout().lock();
    if args.json {
        let text = serde_json::to_string_pretty(&report).context("encoding the report")?;
        writeln!(stdout, "{text}").context("writing the report")?;
    } else {
        write!(stdout, "{}", report.text(&name)).context("writing the report")?;
        writeln!(stdout, "{}", crate::SAFETY_NOTE).context("writing the report")?;
    }
    stdout.flush().context("writing the report")?;
    if !report.trustworthy {
        std::process::exit(1);
    }
    Ok(())
}

/// Whether `path` starts with the SQLite header.
fn is_database(path: &Path) -> Result<bool> {
    let mut head = [0u8; 16];
    let mut file = File::open(path).with_context(|| format!("{}: cannot open", path.display()))?;
    let mut got = 0;
    while got < head.len() {
        match file.read(&mut head[got..]) {
            Ok(0) => break,
            Ok(n) => got += n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e).with_context(|| format!("{}: cannot read", path.display())),
        }
    }
    Ok(got == head.len() && &head == SQLITE_HEADER)
}

/// Decodes a raw capture with the core decoder.
pub fn read_capture(path: &Path) -> Result<(Vec<Received>, DecoderStats)> {
    let file = File::open(path).with_context(|| format!("{}: cannot open", path.display()))?;
    let mut reader = BufReader::new(file);
    let mut decoder = Decoder::<{ wire::MAX_FRAME_LEN }>::new();
    let mut frames = Vec::new();
    let mut buf = [0u8; 64 * 1024];
    loop {
        let n = match reader.read(&mut buf) {
            Ok(0) => break,
            Ok(n) => n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(e).with_context(|| format!("{}: cannot read", path.display())),
        };
        decoder.feed(&buf[..n], |r| {
            if let Ok(frame) = r {
                frames.push(Received {
                    host_ms: None,
                    frame,
                });
            }
        });
    }
    // An unterminated tail is a frame cut off by the end of the capture: a
    // loss, whatever its length.
    // A complete frame that lacks only its final delimiter is kept, as
    // `watch` keeps it.
    if let Some(Ok(frame)) = decoder.end_stream() {
        frames.push(Received {
            host_ms: None,
            frame,
        });
    }
    Ok((frames, *decoder.stats()))
}

/// Audits a run (the latest unless `run` is given) of the log database at `path`.
pub(crate) fn audit_database(path: &Path, run: Option<i64>, config: &RigConfig) -> Result<Report> {
    let log = Log::open_read(path)?;
    Ok(audit::audit_log(&log, run, config)?)
}
