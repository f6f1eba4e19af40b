//! `heatbound demo`: the whole chain in one process, with no hardware.
//!
//! ```text
//! sender thread:   sil::Simulation (thermocouple-drift, paced) <--wire bytes--> TCP 127.0.0.1
//! this thread:     TCP --> Ingest (decoder, link tracker, SQLite log, live lines)
//!                  the operator's acknowledge --> Downlink (demo key) --> TCP --> Reply
//! afterwards:      the log --> audit --> report; the log --> chart (PNG beside it) and the
//!                  HTML test report (beside it too); where each is
//! ```
//!
//! The simulated bench rig runs the same controller as the firmware
//! (`control::Controller`: monitor, alarms, both link directions). Ten
//! minutes of rig time play in about 20 s: the hot thermocouple starts to
//! read low at 120 s, the apparent efficiency climbs past the Carnot bound
//! of the readings, and `beyond_carnot` is raised and trips. The demo's
//! operator acknowledges it over the link, as `heatbound ack` would; the
//! trip output stays on while the condition holds. At 540 s the
//! thermocouple is reseated, the readings fall back under the bound, the
//! alarm clears and the trip output drops.
use std::io::{IsTerminal as _, Write as _};
use std::path::{Path, PathBuf};

use anyhow::{Context, Result, bail};
use heatbound::alarm::{EventKind, RuleId};
use heatbound_firmware_example::rig::{Rig, Scenario};
use heatbound_host::link::{self, End, now_ms};
use heatbound_host::showcase::{self, Show};
use heatbound_host::sil::{self, SimOptions, Simulation};
use heatbound_host::store::Log;
use heatbound_host::term;

/// Arguments of `heatbound demo`.
#[derive(clap::Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "The demo starts a fresh log at --db: an existing heatbound log of that \
name is replaced, any other file is refused and left untouched. It ends with the audit of \
what it logged, and draws its chart and writes its HTML test report beside the log (--db \
heatbound-demo.sqlite: heatbound-demo.png and heatbound-demo.html; an existing file of that name \
that is not a heatbound report is refused and left untouched)."
)]
pub struct Args {
    /// The log database the demo writes.
    #[arg(long, value_name = "FILE", default_value = "heatbound-demo.sqlite")]
    pub db: PathBuf,
    /// Rig time played per second of wall time (the operator answers in
    /// wall time, so at most 1000).
    #[arg(long, value_name = "F", default_value_t = 30.0)]
    pub speed: f64,
    /// Only print alarm events and the closing report, not a line per summary.
    #[arg(long)]
    pub quiet: bool,
    /// A line per summary even on a terminal (no live console).
    #[arg(long)]
    pub plain: bool,
}

/// What the demo plays.
const SCENARIO: Scenario = Scenario::ThermocoupleDrift;
/// Ten minutes of rig time: the drift starts at 120 s and the readings pass
/// the Carnot bound about six minutes later.
const DURATION_S: f64 = 600.0;
/// When the thermocouple is reseated, s of rig time.
const REPAIR_S: f64 = 540.0;

/// Runs the subcommand.
pub fn run(args: &Args) -> Result<()> {
    if !(args.speed.is_finite() && args.speed > 0.0 && args.speed <= 1000.0) {
        bail!(
            "--speed {}: must be a factor above 0 and at most 1000 (the demo's operator answers in wall time)",
            args.speed
        );
    }
    if heatbound_host::chart::default_out(&args.db) == args.db {
        bail!(
            "--db {}: the chart drawn beside it would replace the log; name it .sqlite",
            args.db.display()
        );
    }
    let report_out = heatbound_host::report::default_out(&args.db);
    if report_out == args.db {
        bail!(
            "--db {}: the report written beside it would replace the log; name it .sqlite",
            args.db.display()
        );
    }
    // Refuse a --db that is not a heatbound log, or a chart's or a report's
    // place that holds another file, before anything starts.
    link::check_log_target(&args.db)?;
    heatbound_host::chart::check_out(&heatbound_host::chart::default_out(&args.db))?;
    heatbound_host::report::check_target(&report_out, &[&args.db])?;
    println!("heatbound demo: a simulated bench Stirling engine, streamed over loopback TCP");
    println!("{}", heatbound_host::term::SAFETY_NOTE);
    println!();

    let options = SimOptions {
        scenario: SCENARIO,
        // Two hot thermocouples: when the first drifts, the diagnosis can
        // say which one.
        hot2: true,
        duration_s: DURATION_S,
        repair_at_s: Some(REPAIR_S),
        ..SimOptions::default()
    };
    let config = sil::default_config(&Rig::bench_stirling(options.scenario, options.seed));
    let sim = Simulation::new(&options, &config).context("cannot set up the simulated rig")?;
    println!("scenario {}: {}", SCENARIO.name(), SCENARIO.description());
    println!(
        "playing {DURATION_S:.0} s of rig time at {}x, {} Hz sampling, a summary per second",
        args.speed, options.rate_hz
    );

    fresh_log(&args.db)?;
    let log = Log::open(&args.db).context("cannot open the demo log")?;
    // The console needs a terminal on both sides; --plain and --quiet ask for lines.
    let show = if !args.plain
        && !args.quiet
        && std::io::stdout().is_terminal()
        && std::io::stdin().is_terminal()
    {
        Show::Console
    } else {
        Show::Lines { quiet: args.quiet }
    };
    let (played, ingest) = showcase::play(sim, log, args.speed, show, |link| {
        println!("controller link: {link}");
        println!();
    })?;
    let totals = ingest
        .finish(now_ms())
        .with_context(|| format!("cannot close the run in {}", args.db.display()))?;
    let (end, stats) = (played.end, &played.stats);
    println!();
    println!("{}", link::closing_line(&totals, end, &args.db));
    println!(
        "streamed {} samples as {} frames in {:.1} s",
        stats.samples,
        stats.frames(),
        played.elapsed_s
    );
    for e in &stats.alarm_events {
        println!(
            "  alarm {} at t = {:.1} s: {} ({})",
            e.kind,
            f64::from(e.t_ms) / 1000.0,
            e.rule,
            e.severity
        );
    }
    if let Some(t) = stats.repaired_at_ms {
        println!(
            "  the hot thermocouple was reseated at t = {:.1} s",
            f64::from(t) / 1000.0
        );
    }
    for (t, on) in &stats.trip_changes {
        println!(
            "  trip output {} at t = {:.1} s",
            if *on { "on" } else { "off" },
            f64::from(*t) / 1000.0
        );
    }

    // Re-check what was logged, from the database, as `heatbound audit` would.
    let report = heatbound_host::capture::audit_database(&args.db, None, &config)?;
    println!();
    print!("{}", report.text(&args.db.display().to_string()));
    // Draw it, as `heatbound chart` would.
    let chart = heatbound_host::chart::default_out(&args.db);
    heatbound_host::chart::write_chart(&args.db, None, &chart)?;
    // And report on it, as `heatbound report` would.
    let page = heatbound_host::report::from_log(&args.db, None, &config)?;
    heatbound_host::report::write(&page, &report_out, &[&args.db])?;
    let shown = |p: &Path| std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf());
    println!();
    println!("log written to {}", shown(&args.db).display());
    println!("chart written to {}", shown(&chart).display());
    println!("report written to {}", shown(&report_out).display());
    let db = args.db.display().to_string();
    println!("re-check it with `{}`", term::how_to_run(&["audit", &db]));
    println!("redraw it with `{}`", term::how_to_run(&["chart", &db]));
    println!("{}", heatbound_host::term::SAFETY_NOTE);
    std::io::stdout().flush().context("writing the report")?;

    let raised = stats
        .alarm_events
        .iter()
        .any(|e| e.rule == RuleId::BeyondCarnot && e.kind == EventKind::Raised);
    if !raised {
        bail!("the demo ended without raising beyond_carnot: the scenario did not play out");
    }
    if !played.acknowledged {
        bail!(
            "the demo's acknowledges were not all applied: {}",
            played.answers.join("; ")
        );
    }
    if stats.trip_changes.last().is_none_or(|(_, on)| *on) {
        bail!("the trip output did not drop after the fault was put right");
    }
    if !report.trustworthy || end != End::Eof {
        bail!("the demo's own log did not pass its audit");
    }
    Ok(())
}

/// Removes a previous heatbound log (and its WAL files), so the demo starts
/// fresh; [`link::check_log_target`] has refused anything else.
fn fresh_log(db: &Path) -> Result<()> {
    for suffix in ["", "-wal", "-shm"] {
        let mut name = db.as_os_str().to_owned();
        name.push(suffix);
        match std::fs::remove_file(&name) {
            Ok(()) => {}
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
            Err(e) => {
                return Err(e)
                    .with_context(|| format!("cannot replace {}", PathBuf::from(name).display()));
            }
        }
    }
    Ok(())
}
