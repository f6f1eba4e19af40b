//! A report from a recorded CSV file, in one pass over it: the replay of
//! `heatbound analyze` (its run totals, with the run's own sensitivity
//! integrals for a budget with signed coefficients, and its alarms), and,
//! row by row beside it, the controller the firmware runs, whose summaries
//! go into a temporary log ([`super::summaries`]) that the log report's
//! own code reads for the steady periods and the chart. There is no record
//! to audit: the verdict is the replay's own checks of the readings.

use std::path::Path;

use heatbound::alarm::EventKind;
use heatbound::config::RigConfig;
use heatbound::monitor::FigureSettings;
use heatbound::wire::Hello;

use super::format::{count, duration, fixed, si, sig, utc};
use super::from_log::{Times, file_name, read_frames};
use super::sections::{self, Extra};
use super::summaries::{self, Finished, Summaries};
use super::{
    AlarmRow, Alarms, Chart, Check, Fact, Kind, MAX_ALARM_ROWS, Outcome, Report, ReportError,
    RowKind, Steady, Totals, Verdict,
};
use crate::chart::{ChartOptions, Clock, svg_chart};
use crate::csv_layout::CsvLayout;
use crate::replay::{Replay, Row, replay_file_following};
use crate::store::Log;

/// The summary period a CSV file's summaries are made at when none is
/// given, ms: the firmware example's.
pub const DEFAULT_SUMMARY_PERIOD_MS: u32 = 1000;

/// Makes the report of the CSV file at `path`, laid out as `layout` says
/// (`None`: the default layout), replayed with `config`; `config_name` is
/// the `rig.toml` it came from (`None`: the built-in defaults). The steady
/// periods and the chart come from the summaries a controller running
/// `config` would send every `summary_period_ms` of the file's time.
/// `progress`, if given, follows the replay.
///
/// ```
/// use heatbound::config::RigConfig;
/// use heatbound_host::report::{DEFAULT_SUMMARY_PERIOD_MS, from_csv};
/// let dir = tempfile::tempdir().unwrap();
/// let csv = dir.path().join("run.csv");
/// std::fs::write(&csv, "time_s,hot_c,cold_c,heat_in_w,work_w\n0,500,25,400,40\n1,500,25,400,40\n").unwrap();
/// let r = from_csv(&csv, &RigConfig::default(), None, None, DEFAULT_SUMMARY_PERIOD_MS, None).unwrap();
/// // η = 40/400, and the shares of its budget sum to 1.
/// assert_eq!(r.budgets[0].estimate, Some(0.1));
/// assert!((r.budgets[0].share_sum().unwrap() - 1.0).abs() < 1e-12);
/// ```
pub fn from_csv(
    path: &Path,
    config: &RigConfig,
    layout: Option<&CsvLayout>,
    config_name: Option<&Path>,
    summary_period_ms: u32,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<Report, ReportError> {
    let settings = FigureSettings::new(config);
    let mut windows = Summaries::new(config, summary_period_ms)?;
    let replay = replay_file_following(path, config, layout, progress, |row: &Row| {
        windows.push(row);
    })?;
    let windows = windows.finish()?;
    let measured = replay.heat_out_measured.unwrap_or(false);
    let m = &replay.totals;
    let k = config.coverage_factor;
    let budget = replay.totals_integrals.budget(&settings);
    let budgets = sections::budget_tables(&budget, m, k, config.mode, measured);
    let mut budget_notes = sections::budget_notes();
    budget_notes.push(
        "From a CSV replay: the coefficients are the run's own, from the sensitivity integrals \
         the replay's monitor keeps sample by sample (∫q_in/T_hot² dt and the like)."
            .to_owned(),
    );
    let totals = Totals {
        figures: *m,
        k,
        rows: sections::total_rows(m, &Extra::of(&budget), k, &settings, measured),
        notes: vec![format!(
            "From a CSV replay: the run's own integrals over {} samples, as `heatbound analyze` \
             gives them.",
            replay.samples
        )],
    };
    let (steady, chart) = from_summaries(&windows, config, &replay)?;
    let name = path.display().to_string();
    Ok(Report {
        kind: Kind::Csv,
        title: format!("Replay of {}", file_name(path)),
        input: name.clone(),
        facts: facts(&name, config, config_name, &replay, &settings, &windows),
        losses: losses(&replay),
        verdict: verdict(&replay, k),
        totals,
        budgets,
        budget_notes,
        steady,
        alarms: alarms(&replay),
        chart,
    })
}

/// How the summaries were made, for the notes.
fn made_how(w: &Finished) -> String {
    format!(
        "computed from the file's samples by the same monitor the controller runs (heatbound's \
         controller, in its f32, with this configuration), which sent a summary of its window \
         every {} of the file's time",
        duration(f64::from(w.summary_period_ms) / 1000.0)
    )
}

/// The steady periods and the chart, from the summaries' temporary log.
fn from_summaries(
    w: &Finished,
    config: &RigConfig,
    replay: &Replay,
) -> Result<(Steady, Chart), ReportError> {
    let share = format!(
        "The share of the run that was steady is the replay's, sample by sample, as `heatbound \
         analyze` gives it; the run {} steady.",
        if replay.steady_at_end {
            "ended"
        } else {
            "did not end"
        }
    );
    if w.summaries == 0 {
        let why = format!(
            "No summary: the file spans less than one summary period ({}).",
            duration(f64::from(w.summary_period_ms) / 1000.0)
        );
        return Ok((
            Steady {
                fraction: replay.steady_fraction,
                periods: Vec::new(),
                more: 0,
                note: Some(format!("{why} {share}")),
            },
            Chart::None(why),
        ));
    }
    let log = Log::open_read(&w.path)?;
    let times = Times::File {
        first_s: w.first_s,
        unix: w.unix_time,
    };
    let mut read = read_frames(&log, w.run, config, times)?;
    drop(log);
    let mut steady = read.steady.finish();
    steady.fraction = replay.steady_fraction;
    steady.note = Some(format!(
        "The steady periods are {}, as a log's are from a controller's summaries. {} {share}",
        made_how(w),
        steady.note.unwrap_or_default(),
    ));
    let clock = if w.unix_time {
        Clock::Wall
    } else {
        Clock::Device
    };
    let chart = match svg_chart(
        &w.path,
        &ChartOptions {
            run: Some(w.run),
            clock,
        },
    ) {
        Ok(c) => Chart::Svg {
            svg: c.svg,
            caption: format!(
                "{} summaries, from {} to {}: the chart is {}. Its time axis is {}; \"rig {}\" \
                 names that controller, not the rig, and the device's times are the file's. \
                 Lines break where the file has a gap longer than max_gap_s; second-law alarms \
                 (as that controller raised them) are shaded.",
                c.summaries,
                at(w.first_s + c.t_s.0, w.unix_time),
                at(w.first_s + c.t_s.1, w.unix_time),
                made_how(w),
                if w.unix_time {
                    "the file's time, UTC"
                } else if w.file_clock {
                    "the file's time"
                } else {
                    "counted from the file's first row"
                },
                summaries::RIG_ID,
            ),
        },
        Err(e) => Chart::None(format!(
            "The chart could not be drawn: {}",
            crate::term::error_line(&e)
        )),
    };
    Ok((steady, chart))
}

/// A replay's time: seconds of the logger's clock, or UTC.
pub(super) fn at(t_s: f64, unix: bool) -> String {
    if unix && t_s.is_finite() {
        // Unix seconds of a spreadsheet or ISO 8601 time: well inside i64 ms.
        #[allow(clippy::cast_possible_truncation)]
        let ms = (t_s * 1000.0).round().clamp(-9.0e15, 9.0e15) as i64;
        utc(ms)
    } else {
        format!("t = {} s", fixed(Some(t_s), 1))
    }
}

/// The header's facts.
fn facts(
    name: &str,
    config: &RigConfig,
    config_name: Option<&Path>,
    r: &Replay,
    settings: &FigureSettings,
    w: &Finished,
) -> Vec<Fact> {
    let mut f = vec![
        Fact::new("File", name),
        Fact::new(
            "Configuration",
            config_name.map_or_else(
                || "the built-in defaults (no --config)".to_owned(),
                |p| p.display().to_string(),
            ),
        ),
        Fact::new(
            "Configuration digest",
            format!(
                "{:08x} (as a controller running this configuration reports it)",
                Hello::config_digest(config)
            ),
        ),
        Fact::new(
            "Rig and firmware",
            "not recorded in a CSV file: the file's own name and the configuration identify the run",
        ),
        Fact::new("Mode", config.mode.as_str().replace('_', " ")),
        Fact::new("Uncertainties", sections::uncertainty_words(settings)),
        Fact::new(
            "Coverage factor",
            format!("k = {}", sig(config.coverage_factor, 3)),
        ),
        Fact::new(
            "Time span",
            format!(
                "{} from the first row to the last{}",
                duration(r.duration_s),
                if r.unix_time {
                    " (the file's times are dates)"
                } else {
                    ""
                }
            ),
        ),
        Fact::new(
            "Samples",
            format!(
                "{} rows; heat out {}; {}",
                r.samples,
                if r.heat_out_measured == Some(true) {
                    "measured"
                } else {
                    "not measured (inferred as Q_in − W)"
                },
                if r.hot2_measured == Some(true) {
                    "a second hot-side sensor"
                } else {
                    "one hot-side sensor"
                }
            ),
        ),
    ];
    f.push(Fact::new(
        "Summaries",
        format!(
            "{} made from the samples by heatbound's controller, one every {} of the file's              time, for the steady periods and the chart (its Hello's sample period: {} ms, the              median spacing of the first rows)",
            w.summaries,
            duration(f64::from(w.summary_period_ms) / 1000.0),
            w.sample_period_ms
        ),
    ));
    if !r.read_columns.is_empty() {
        let cols: Vec<String> = r
            .read_columns
            .iter()
            .map(|c| format!("{}: {} ({})", c.channel, c.column, c.unit))
            .collect();
        f.push(Fact::new("Columns read", cols.join("; ")));
    }
    if let Some(ua) = &r.diagnosis.ua {
        f.push(Fact::new(
            "UA (heat lost to the room)",
            format!(
                "{} ± {} W/K (standard), {}",
                sig(ua.w_per_k, 3),
                sig(ua.u_w_per_k, 2),
                ua.source
            ),
        ));
    }
    f
}

/// What the replay skipped.
fn losses(r: &Replay) -> Vec<Fact> {
    let lines: Vec<String> = r.invalid_lines.iter().map(u64::to_string).collect();
    let mut f = vec![
        Fact::new(
            "Invalid samples",
            if lines.is_empty() {
                r.invalid_samples.to_string()
            } else {
                format!(
                    "{} (counted and skipped; first at lines {})",
                    r.invalid_samples,
                    lines.join(", ")
                )
            },
        ),
        Fact::new(
            "Gaps not bridged",
            format!(
                "{} (integration restarted after a spacing longer than max_gap_s)",
                r.restarts
            ),
        ),
    ];
    if !r.unused_columns.is_empty() {
        let cols: Vec<String> = r
            .unused_columns
            .iter()
            .map(|c| format!("{} ({})", c.name, c.why))
            .collect();
        f.push(Fact::new("Columns not used", cols.join(", ")));
    }
    f
}

/// The replay's own checks: the second law and the energy balance over the
/// run, the diagnosis of its final window, and the consistency alarms.
fn verdict(r: &Replay, k: f64) -> Verdict {
    let m = &r.totals;
    let mut checks = vec![Check {
        name: "Record (audit)".to_owned(),
        outcome: Outcome::NotApplicable,
        summary: "a CSV file carries no frames, sequence numbers, checksums or device figures: \
                  there is no record to re-check; every figure here is computed from the samples"
            .to_owned(),
        details: Vec::new(),
    }];
    let second_law = match (
        m.carnot_margin,
        m.u_carnot_margin,
        m.entropy_rate_w_per_k,
        m.u_entropy_rate_w_per_k,
    ) {
        (Some(margin), Some(um), Some(rate), Some(ur)) => {
            let ok = margin >= -k * um && rate >= -k * ur;
            Check {
                name: "Second law (run totals)".to_owned(),
                outcome: if ok { Outcome::Pass } else { Outcome::Fail },
                summary: format!(
                    "margin {} against −k·u = {}, σ̇ {} W/K against −k·u = {} W/K",
                    sig(margin, 3),
                    sig(-k * um, 2),
                    sig(rate, 3),
                    sig(-k * ur, 2)
                ),
                details: Vec::new(),
            }
        }
        _ => Check {
            name: "Second law (run totals)".to_owned(),
            outcome: Outcome::NotApplicable,
            summary: "the margin or σ̇ is not available (no heat in, or T_h not above T_c)"
                .to_owned(),
            details: Vec::new(),
        },
    };
    checks.push(second_law);
    if let (Some(loss), Some(ul)) = (m.balance_residual_j, m.u_balance_residual_j) {
        checks.push(Check {
            name: "Energy balance (run totals)".to_owned(),
            outcome: if loss >= -k * ul {
                Outcome::Pass
            } else {
                Outcome::Fail
            },
            summary: format!(
                "Q_loss {} against −k·u = {}: no more energy may leave than enters",
                si(loss, "J"),
                si(-k * ul, "J")
            ),
            details: Vec::new(),
        });
    }
    let d = &r.diagnosis;
    checks.push(Check {
        name: "Diagnosis (final window)".to_owned(),
        outcome: match d.consistent {
            Some(true) => Outcome::Pass,
            Some(false) => Outcome::Fail,
            None => Outcome::NotApplicable,
        },
        summary: d.reason.clone(),
        details: Vec::new(),
    });
    let raised: Vec<String> = r
        .events
        .iter()
        .filter(|e| e.event.kind == EventKind::Raised && e.event.rule.is_consistency())
        .map(|e| format!("{}: {}", at(e.t_s, r.unix_time), e.event.rule))
        .collect();
    checks.push(Check {
        name: "Consistency alarms".to_owned(),
        outcome: if raised.is_empty() {
            Outcome::Pass
        } else {
            Outcome::Fail
        },
        summary: format!(
            "{} of beyond_carnot, negative_entropy_production or energy_balance during the replay",
            count(u64::try_from(raised.len()).unwrap_or(0), "raise", "raises")
        ),
        details: raised.into_iter().take(5).collect(),
    });
    // Consistent only if the second law could be judged at all: a run with
    // no heat in, or no rows, is not judged, whatever else passed.
    let failed = checks.iter().any(|c| c.outcome == Outcome::Fail);
    let judged = checks
        .iter()
        .any(|c| c.name.starts_with("Second law") && c.outcome == Outcome::Pass);
    let pass = if failed {
        Some(false)
    } else {
        judged.then_some(true)
    };
    Verdict {
        pass,
        headline: match pass {
            Some(true) => "Readings consistent".to_owned(),
            Some(false) => "Readings NOT consistent".to_owned(),
            None => "Not judged".to_owned(),
        },
        basis: "A replay of a recorded file: the audit's checks of a controller's record do not \
                apply. These are the replay's own checks of the readings against the first and \
                second laws, at the coverage factor k."
            .to_owned(),
        checks,
    }
}

/// The replay's alarm timeline, with the diagnosis at each consistency raise.
fn alarms(r: &Replay) -> Alarms {
    let mut per: std::collections::BTreeMap<&'static str, (u64, f64, Option<f64>)> =
        std::collections::BTreeMap::new();
    let mut rows = Vec::new();
    for e in &r.events {
        let ev = &e.event;
        let entry = per.entry(ev.rule.as_str()).or_insert((0, 0.0, None));
        match ev.kind {
            EventKind::Raised => {
                entry.0 += 1;
                entry.2.get_or_insert(e.t_s);
            }
            EventKind::Cleared => {
                if let Some(since) = entry.2.take() {
                    entry.1 += (e.t_s - since).max(0.0);
                }
            }
            EventKind::Acknowledged => {}
        }
        if rows.len() < MAX_ALARM_ROWS {
            rows.push(AlarmRow {
                device_time: at(e.t_s, r.unix_time),
                wall_time: "—".to_owned(),
                rule: ev.rule.as_str().to_owned(),
                kind: match ev.kind {
                    EventKind::Raised => RowKind::Raised,
                    EventKind::Cleared => RowKind::Cleared,
                    EventKind::Acknowledged => RowKind::Acknowledged,
                },
                severity: ev.severity.to_string(),
                detail: e
                    .diagnosis
                    .as_ref()
                    .map_or_else(String::new, |d| d.reason.clone()),
            });
        }
    }
    let end = r.events.last().map_or(0.0, |e| e.t_s);
    Alarms {
        per_rule: per
            .iter()
            .map(|(rule, (raised, active, open))| {
                let active = active + open.map_or(0.0, |since| (end - since).max(0.0));
                Fact::new(
                    *rule,
                    format!(
                        "raised {}, active {} in all",
                        count(*raised, "time", "times"),
                        duration(active)
                    ),
                )
            })
            .collect(),
        more: r.events.len().saturating_sub(MAX_ALARM_ROWS),
        rows,
        note: Some(
            "Times are the file's. A replay has no operator: nothing is acknowledged, and a \
             latching alarm stays raised. At each consistency raise, the diagnosis of that \
             window."
                .to_owned(),
        ),
    }
}
