//! A report from a recorded CSV file: the replay of `heatbound analyze`,
//! then one replay per input with only that input's uncertainty, whose
//! `u` of each figure is that input's contribution `|c_i|·u(x_i)` (the
//! monitor's own arithmetic: their squares add up to the full replay's
//! `u²`). There is no record to audit: the verdict is the replay's own
//! checks of the readings.

use std::path::Path;

use heatbound::alarm::EventKind;
use heatbound::config::RigConfig;
use heatbound::monitor::{FigureSettings, Metrics, Uncertainty};
use heatbound::wire::Hello;

use super::budget::{BudgetTable, figures};
use super::format::{count, duration, fixed, si, sig, utc};
use super::from_log::file_name;
use super::sections::{self, Extra, merit};
use super::{
    AlarmRow, Alarms, Chart, Check, Fact, Kind, MAX_ALARM_ROWS, Outcome, Report, ReportError,
    RowKind, Steady, Totals, Verdict,
};
use crate::csv_layout::CsvLayout;
use crate::replay::{Replay, replay_file_with};

/// Makes the report of the CSV file at `path`, laid out as `layout` says
/// (`None`: the default layout), replayed with `config`; `config_name` is
/// the `rig.toml` it came from (`None`: the built-in defaults). `progress`,
/// if given, follows each replay in turn.
///
/// ```
/// use heatbound::config::RigConfig;
/// let dir = tempfile::tempdir().unwrap();
/// let csv = dir.path().join("run.csv");
/// std::fs::write(&csv, "time_s,hot_c,cold_c,heat_in_w,work_w\n0,500,25,400,40\n1,500,25,400,40\n").unwrap();
/// let r = heatbound_host::report::from_csv(&csv, &RigConfig::default(), None, None, None).unwrap();
/// // η = 40/400, and the shares of its budget sum to 1.
/// assert_eq!(r.budgets[0].estimate, Some(0.1));
/// assert!((r.budgets[0].share_sum().unwrap() - 1.0).abs() < 1e-12);
/// ```
pub fn from_csv(
    path: &Path,
    config: &RigConfig,
    layout: Option<&CsvLayout>,
    config_name: Option<&Path>,
    progress: Option<&indicatif::ProgressBar>,
) -> Result<Report, ReportError> {
    let settings = FigureSettings::new(config);
    let u = &config.uncertainty;
    let u_in = [u.hot_k, u.cold_k, u.heat_in_rel, u.work_rel, u.heat_out_rel];
    let replay = replay_file_with(path, config, layout, progress)?;
    let measured = replay.heat_out_measured.unwrap_or(false);
    // One replay per input that can contribute, with that input alone.
    let mut parts: [Option<Metrics<f64>>; 5] = [None; 5];
    for (i, part) in parts.iter_mut().enumerate() {
        let ui = u_in.get(i).copied().unwrap_or(0.0);
        if ui == 0.0 || (i == 4 && !measured) {
            continue;
        }
        let mut alone = *config;
        alone.uncertainty = only(&config.uncertainty, i);
        *part = Some(replay_file_with(path, &alone, layout, progress)?.totals);
    }
    let m = &replay.totals;
    let k = config.coverage_factor;
    let mode = config.mode;
    let contributions = |pick: &dyn Fn(&Metrics<f64>) -> Option<f64>| -> [Option<f64>; 5] {
        std::array::from_fn(|i| match parts.get(i).copied().flatten() {
            Some(p) => pick(&p),
            None => Some(0.0),
        })
    };
    let [(perf, u_perf), (bound, u_bound)] = merit(m, mode);
    let [f_perf, f_bound, f_margin, f_rate] = figures(mode.is_reverse());
    let table = |f, est, u_c, pick: &dyn Fn(&Metrics<f64>) -> Option<f64>| {
        BudgetTable::from_contributions(f, est, u_in, contributions(pick), u_c, k, measured)
    };
    let budgets = vec![
        table(f_perf, perf, u_perf, &|p| merit(p, mode)[0].1),
        table(f_bound, bound, u_bound, &|p| merit(p, mode)[1].1),
        table(f_margin, m.carnot_margin, m.u_carnot_margin, &|p| {
            p.u_carnot_margin
        }),
        table(
            f_rate,
            m.entropy_rate_w_per_k,
            m.u_entropy_rate_w_per_k,
            &|p| p.u_entropy_rate_w_per_k,
        ),
    ];
    // The energies' uncertainties are their scale errors (DESIGN §4).
    let extra = Extra {
        heat_in: Some(m.heat_in_j.abs() * u.heat_in_rel),
        work: Some(m.work_j.abs() * u.work_rel),
        heat_out: Some(if measured {
            m.heat_out_j.abs() * u.heat_out_rel
        } else {
            (m.heat_in_j * u.heat_in_rel).hypot(m.work_j * u.work_rel)
        }),
        // T0 exact: T0·u(S_gen); a measured T0 moves with the cold offset,
        // which a replay's figures do not separate.
        exergy: config
            .ambient_k
            .zip(m.u_entropy_generated_j_per_k)
            .map(|(t0, u)| t0 * u),
    };
    let totals = Totals {
        figures: *m,
        k,
        rows: sections::total_rows(m, &extra, k, &settings, measured),
        notes: vec![format!(
            "From a CSV replay: the run's own integrals over {} samples, as `heatbound analyze` \
             gives them.",
            replay.samples
        )],
    };
    let name = path.display().to_string();
    Ok(Report {
        kind: Kind::Csv,
        title: format!("Replay of {}", file_name(path)),
        input: name.clone(),
        facts: facts(&name, config, config_name, &replay, &settings),
        losses: losses(&replay),
        verdict: verdict(&replay, k),
        totals,
        budgets,
        budget_notes: sections::budget_notes(false),
        steady: Steady {
            fraction: replay.steady_fraction,
            periods: Vec::new(),
            more: 0,
            note: Some(format!(
                "A replay keeps the share of the run that was steady and whether it ended \
                 steady ({}), not the periods themselves: the steady periods and their figures \
                 are listed for a log.",
                if replay.steady_at_end {
                    "it did"
                } else {
                    "it did not"
                }
            )),
        },
        alarms: alarms(&replay),
        chart: Chart::None(
            "The chart is drawn from a log's summaries, a window per summary; a CSV replay keeps \
             the run's totals and its final window, not a series of windows."
                .to_owned(),
        ),
    })
}

/// `u` with every input but `i` (in the order of the budget) at zero.
fn only(u: &Uncertainty, i: usize) -> Uncertainty {
    let keep = |j: usize, x: f64| if i == j { x } else { 0.0 };
    Uncertainty {
        hot_k: keep(0, u.hot_k),
        cold_k: keep(1, u.cold_k),
        heat_in_rel: keep(2, u.heat_in_rel),
        work_rel: keep(3, u.work_rel),
        heat_out_rel: keep(4, u.heat_out_rel),
        hot2_k: u.hot2_k,
    }
}

/// A replay's time: seconds of the logger's clock, or UTC.
fn at(t_s: f64, unix: bool) -> String {
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
