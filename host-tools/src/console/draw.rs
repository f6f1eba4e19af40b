//! One screen of the console, from the model and the view.
//!
//! ```text
//!  heatbound · rig · firmware · mode · run              span · live/paused   header
//!  ✔ HEALTHY / ● ADVISORY / ▲ WARNING / ✖ TRIP / ✖ LINK DOWN — what and why    verdict
//!  trends: η vs η_C ±k·u │ σ̇ and zero │ T_h, T_c │ powers  ║ now: window    body
//!                                                           ║ run totals
//!  alarms: symbol, state, rule, severity, raised, acknowledged or cleared       alarms
//!  link: frames, losses, gaps, restarts, last frame, commands                  link
//!  keys, or the latest answer                                                   keys
//! ```
//!
//! Every colour comes with a symbol or a word, so the screen reads without
//! colour. Every text is fitted to its width at a word boundary, so nothing
//! is cut mid-word, from 80 × 24 up.
use heatbound::ZERO_CELSIUS_K;
use heatbound::alarm::Severity;
use heatbound::config::Mode;
use heatbound::wire::Verdict;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Clear, Dataset, GraphType, Paragraph};

use super::keys::{View, span_words};
use super::model::{AlarmRow, AlarmStatus, Model, Point};
use crate::diagnosis_report::bias_text;

/// What the console knows about the link holder itself.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Holder {
    /// Where the bytes come from.
    pub source: String,
    /// `demo key`, `key file`, or why commands are not possible.
    pub key: String,
    /// Whether commands can be sent at all (a link that can be written).
    pub commands: bool,
    /// The run ended (end of input, interrupted): why.
    pub ended: Option<String>,
}

/// Draws the whole screen at host time `now_ms`.
pub fn draw(frame: &mut Frame, model: &Model, view: &View, holder: &Holder, now_ms: i64) {
    let area = frame.area();
    let alarm_rows =
        (model.alarms.len().clamp(1, 6) as u16).min(area.height.saturating_sub(18) / 2 + 1);
    let [header, verdict, body, alarms, link, keys] = Layout::vertical([
        Constraint::Length(1),
        Constraint::Length(1),
        Constraint::Min(8),
        Constraint::Length(alarm_rows + 1),
        Constraint::Length(1),
        Constraint::Length(1),
    ])
    .areas(area);
    draw_header(frame, header, model, view, holder);
    draw_verdict(frame, verdict, model, now_ms);
    let side = if area.width >= 120 { 40 } else { 34 };
    let [trends, readouts] =
        Layout::horizontal([Constraint::Min(40), Constraint::Length(side)]).areas(body);
    draw_trends(frame, trends, model, view, now_ms);
    draw_readouts(frame, readouts, model, view);
    draw_alarms(frame, alarms, model, view);
    draw_link(frame, link, model, holder, now_ms);
    draw_keys(frame, keys, view, holder, now_ms);
    if view.help {
        draw_help(frame, area);
    } else if view.confirm_new_run {
        draw_confirm(frame, area);
    }
}

/// `text` cut to `width` characters at a word boundary, with `…` when cut.
pub fn fit(text: &str, width: usize) -> String {
    if text.chars().count() <= width {
        return text.to_string();
    }
    if width == 0 {
        return String::new();
    }
    // Leading spaces are kept: they separate a span from the one before.
    let body = text.trim_start_matches(' ');
    let mut out = " ".repeat(text.len() - body.len());
    let lead = out.len();
    for word in body.split(' ') {
        let add = if out.len() == lead { 0 } else { 1 } + word.chars().count();
        if out.chars().count() + add + 1 > width {
            break;
        }
        if out.len() != lead {
            out.push(' ');
        }
        out.push_str(word);
    }
    out.push('…');
    out
}

/// Spans whose total is fitted to `width`: later spans are dropped whole
/// (or cut at a word) when they do not fit.
fn fit_spans<'a>(spans: Vec<Span<'a>>, width: usize) -> Line<'a> {
    let mut used = 0;
    let mut out = Vec::new();
    for s in spans {
        let n = s.content.chars().count();
        if used + n <= width {
            used += n;
            out.push(s);
        } else {
            let left = width.saturating_sub(used);
            if left > 3 {
                let cut = fit(&s.content, left);
                if cut.trim().chars().count() > 1 {
                    out.push(Span::styled(cut, s.style));
                }
            }
            break;
        }
    }
    Line::from(out)
}

const DIM: Style = Style::new().fg(Color::DarkGray);
const TITLE: Style = Style::new().add_modifier(Modifier::BOLD);

fn severity_style(s: Severity) -> (Style, &'static str, &'static str) {
    match s {
        Severity::Trip => (
            Style::new().fg(Color::Red).add_modifier(Modifier::BOLD),
            "✖",
            "TRIP",
        ),
        Severity::Warning => (Style::new().fg(Color::Yellow), "▲", "WARNING"),
        Severity::Advisory => (Style::new().fg(Color::Cyan), "●", "ADVISORY"),
    }
}

fn draw_header(frame: &mut Frame, area: Rect, model: &Model, view: &View, holder: &Holder) {
    let mut spans = vec![Span::styled(" heatbound", TITLE)];
    if let Some(h) = &model.hello {
        let (a, b, c) = h.firmware_version;
        spans.push(Span::raw(format!(" · rig {}", h.rig_id)));
        spans.push(Span::raw(format!(" · {}", h.mode)));
        spans.push(Span::raw(format!(" · run {}", h.run)));
        spans.push(Span::styled(format!(" · firmware {a}.{b}.{c}"), DIM));
    } else {
        spans.push(Span::raw(format!(
            " · {} · waiting for the controller's Hello",
            holder.source
        )));
    }
    let right = match view.paused_at {
        Some(_) => format!("span {} · ⏸ PAUSED ", span_words(view.span_s())),
        None => format!("span {} · ▶ live ", span_words(view.span_s())),
    };
    let width = area.width as usize;
    let left_width = width.saturating_sub(right.chars().count() + 1);
    let left = fit_spans(spans, left_width);
    let pad = width.saturating_sub(left.width() + right.chars().count());
    let mut line = left.spans;
    line.push(Span::raw(" ".repeat(pad)));
    line.push(Span::styled(right, DIM));
    frame.render_widget(
        Paragraph::new(Line::from(line)).style(Style::new().bg(Color::Indexed(236))),
        area,
    );
}

fn draw_verdict(frame: &mut Frame, area: Rect, model: &Model, now_ms: i64) {
    let width = area.width as usize;
    let raised: Vec<String> = model
        .alarms
        .iter()
        .filter(|r| matches!(r.status, AlarmStatus::Active | AlarmStatus::Acknowledged))
        .map(|r| {
            if r.status == AlarmStatus::Acknowledged {
                format!("{} (acknowledged)", r.rule)
            } else {
                r.rule.to_string()
            }
        })
        .collect();
    let (style, text) = if let Some((since, why)) = &model.link_down {
        (
            Style::new()
                .fg(Color::White)
                .bg(Color::Red)
                .add_modifier(Modifier::BOLD),
            format!(" ✖ LINK DOWN for {} — {}", ago(now_ms - since), why),
        )
    } else if model.latest.is_none() {
        (DIM, " … waiting for the first summary".to_string())
    } else if let Some(worst) = model.worst() {
        let (style, sym, word) = severity_style(worst);
        let trip = if model.trip() {
            " · trip output ON"
        } else {
            ""
        };
        (
            style,
            format!(" {sym} {word}{trip} — {}", raised.join(", ")),
        )
    } else {
        let margin = margin_words(model);
        (
            Style::new().fg(Color::Green).add_modifier(Modifier::BOLD),
            format!(" ✔ HEALTHY — no alarm{margin}"),
        )
    };
    frame.render_widget(Paragraph::new(fit(&text, width)).style(style), area);
}

/// How close the rig runs to its bound, in words.
fn margin_words(model: &Model) -> String {
    let Some((s, _)) = model.latest else {
        return String::new();
    };
    let k = model.coverage_factor();
    match (s.performance(), s.bound()) {
        (Some(p), Some(b)) if b > 0.0 => {
            let u = s
                .u_margin
                .map_or(String::new(), |u| format!(" ± {:.3}", k * u));
            let what = if model.mode() == Mode::Engine {
                "η/η_C"
            } else {
                "COP/COP_C"
            };
            format!(
                "; margin to the Carnot bound {:.3}{u}, {what} = {:.0} %",
                b - p,
                100.0 * p / b
            )
        }
        _ => String::new(),
    }
}

/// A duration in words: `4.2 s`, `3 min 5 s`.
fn ago(ms: i64) -> String {
    let s = ms.max(0) as f64 / 1000.0;
    if s < 60.0 {
        format!("{s:.1} s")
    } else if s < 3600.0 {
        format!("{} min {} s", (s / 60.0) as u64, (s % 60.0) as u64)
    } else {
        format!(
            "{} h {} min",
            (s / 3600.0) as u64,
            ((s % 3600.0) / 60.0) as u64
        )
    }
}

/// Lines of one series: one Vec of points per unbroken stretch.
type Lines = Vec<Vec<(f64, f64)>>;

/// One trend: its title and the series to draw.
struct Trend<'a> {
    title: Vec<Span<'a>>,
    /// (colour, lines, dim band?) per series.
    series: Vec<(Color, Lines, bool)>,
    zero_line: bool,
}

/// A series of the visible points, split at breaks: one Vec per line.
fn segments(points: &[&Point], x_now: f64, value: impl Fn(&Point) -> Option<f64>) -> Lines {
    let mut out: Lines = Vec::new();
    for p in points {
        let x = p.x_s - x_now;
        match value(p).filter(|v| v.is_finite()) {
            Some(y) => {
                if p.breaks || out.is_empty() {
                    out.push(Vec::new());
                }
                if let Some(last) = out.last_mut() {
                    last.push((x, y));
                }
            }
            None => out.push(Vec::new()),
        }
    }
    out.retain(|s| !s.is_empty());
    out
}

fn draw_trends(frame: &mut Frame, area: Rect, model: &Model, view: &View, now_ms: i64) {
    let now = model.x_now(view.paused_at.unwrap_or(now_ms));
    let span = f64::from(view.span_s());
    let visible: Vec<&Point> = model
        .points
        .iter()
        .filter(|p| p.x_s >= now - span && p.x_s <= now)
        .collect();
    let k = f64::from(model.coverage_factor());
    let (perf, bound) = if model.mode() == Mode::Engine {
        ("η", "η_C")
    } else {
        ("COP", "COP_C")
    };
    let c_only = view.celsius_only;
    let temp = move |t: f32| {
        if c_only {
            f64::from(t) - ZERO_CELSIUS_K
        } else {
            f64::from(t)
        }
    };
    let band = |f: fn(&Point) -> Option<(f32, f32)>, sign: f64| {
        segments(&visible, now, move |p| {
            f(p).map(|(v, u)| f64::from(v) + sign * k * f64::from(u))
        })
    };
    let mid = |f: fn(&Point) -> Option<(f32, f32)>| {
        segments(&visible, now, move |p| f(p).map(|(v, _)| f64::from(v)))
    };
    let trends = [
        Trend {
            title: vec![
                Span::styled(format!(" ▬ {perf}"), Style::new().fg(Color::LightBlue)),
                Span::styled(format!("  ▬ {bound}"), Style::new().fg(Color::LightRed)),
                Span::styled(format!("  ··· ±{k}u"), DIM),
            ],
            series: vec![
                (Color::Blue, band(|p| p.performance, 1.0), true),
                (Color::Blue, band(|p| p.performance, -1.0), true),
                (Color::Red, band(|p| p.bound, 1.0), true),
                (Color::Red, band(|p| p.bound, -1.0), true),
                (Color::LightBlue, mid(|p| p.performance), false),
                (Color::LightRed, mid(|p| p.bound), false),
            ],
            zero_line: false,
        },
        Trend {
            title: vec![
                Span::styled(" ▬ σ̇ W/K", Style::new().fg(Color::LightMagenta)),
                Span::styled(format!("  ··· ±{k}u  ─ zero"), DIM),
            ],
            series: vec![
                (Color::Magenta, band(|p| p.entropy_rate, 1.0), true),
                (Color::Magenta, band(|p| p.entropy_rate, -1.0), true),
                (Color::LightMagenta, mid(|p| p.entropy_rate), false),
            ],
            zero_line: true,
        },
        Trend {
            title: vec![
                Span::styled(" ▬ T_hot", Style::new().fg(Color::LightRed)),
                Span::styled("  ▬ T_cold", Style::new().fg(Color::LightCyan)),
                Span::styled(if c_only { "  °C" } else { "  K" }, DIM),
            ],
            series: vec![
                (
                    Color::LightRed,
                    segments(&visible, now, move |p| p.t_hot_k.map(temp)),
                    false,
                ),
                (
                    Color::LightCyan,
                    segments(&visible, now, move |p| p.t_cold_k.map(temp)),
                    false,
                ),
            ],
            zero_line: false,
        },
        Trend {
            title: vec![
                Span::styled(" ▬ Q_in", Style::new().fg(Color::LightRed)),
                Span::styled("  ▬ W", Style::new().fg(Color::LightGreen)),
                Span::styled("  ▬ Q_out", Style::new().fg(Color::LightCyan)),
                Span::styled("  W", DIM),
            ],
            series: (0..3)
                .map(|i| {
                    let colour = [Color::LightRed, Color::LightGreen, Color::LightCyan][i];
                    (
                        colour,
                        segments(&visible, now, move |p| p.powers_w.map(|w| f64::from(w[i]))),
                        false,
                    )
                })
                .collect(),
            zero_line: false,
        },
    ];
    let rows = Layout::vertical([Constraint::Ratio(1, 4); 4]).split(area);
    let span_s = f64::from(view.span_s());
    for (trend, row) in trends.iter().zip(rows.iter()) {
        draw_trend(frame, *row, trend, span_s);
    }
}

fn draw_trend(frame: &mut Frame, area: Rect, trend: &Trend, span_s: f64) {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for (_, segs, _) in &trend.series {
        for seg in segs {
            for &(_, y) in seg {
                lo = lo.min(y);
                hi = hi.max(y);
            }
        }
    }
    if trend.zero_line {
        lo = lo.min(0.0);
        hi = hi.max(0.0);
    }
    let block = Block::new()
        .borders(Borders::TOP)
        .border_style(DIM)
        .title(fit_spans(trend.title.clone(), area.width as usize));
    if !lo.is_finite() || !hi.is_finite() {
        frame.render_widget(
            Paragraph::new(Span::styled("no data in the span", DIM)).block(block),
            area,
        );
        return;
    }
    if hi - lo < 1e-9 {
        lo -= 0.5;
        hi += 0.5;
    }
    let pad = (hi - lo) * 0.05;
    let (lo, hi) = (lo - pad, hi + pad);
    let zero = [(-span_s, 0.0), (0.0, 0.0)];
    let mut datasets = Vec::new();
    if trend.zero_line {
        datasets.push(
            Dataset::default()
                .data(&zero)
                .graph_type(GraphType::Line)
                .marker(Marker::Braille)
                .style(Style::new().fg(Color::Gray)),
        );
    }
    for (colour, segs, dim) in &trend.series {
        for seg in segs {
            let style = if *dim {
                Style::new().fg(*colour).add_modifier(Modifier::DIM)
            } else {
                Style::new().fg(*colour)
            };
            datasets.push(
                Dataset::default()
                    .data(seg)
                    .graph_type(if *dim {
                        GraphType::Scatter
                    } else {
                        GraphType::Line
                    })
                    .marker(Marker::Braille)
                    .style(style),
            );
        }
    }
    let chart = Chart::new(datasets)
        .block(block)
        .x_axis(Axis::default().bounds([-span_s, 0.0]))
        .y_axis(
            Axis::default()
                .bounds([lo, hi])
                .labels([short(lo), short(hi)])
                .style(DIM),
        )
        .hidden_legend_constraints((Constraint::Length(0), Constraint::Length(0)));
    frame.render_widget(chart, area);
}

/// A number in 6 characters, right-aligned.
fn short(x: f64) -> String {
    let a = x.abs();
    let text = if a >= 100_000.0 {
        format!("{:.0}k", x / 1000.0)
    } else if a >= 1000.0 {
        format!("{x:.0}")
    } else if a >= 10.0 {
        format!("{x:.1}")
    } else {
        format!("{x:.3}")
    };
    format!("{text:>6}")
}

fn draw_readouts(frame: &mut Frame, area: Rect, model: &Model, view: &View) {
    let width = area.width.saturating_sub(2) as usize;
    let k = model.coverage_factor();
    let mut lines: Vec<Line> = Vec::new();
    let heading = |t: &str| Line::from(Span::styled(fit(t, width), TITLE));
    let (perf, bound) = if model.mode() == Mode::Engine {
        ("η", "η_C")
    } else {
        ("COP", "COP_C")
    };
    lines.push(heading(&format!("Window (±U, k = {k})")));
    let latest = model.latest.map(|(s, _)| s);
    let pm = |v: Option<f32>, u: Option<f32>, unit: &str| match (v, u) {
        (Some(v), Some(u)) => format!("{v:.3} ± {:.3}{unit}", k * u),
        (Some(v), None) => format!("{v:.3}{unit}"),
        _ => "n/a".to_string(),
    };
    if let Some(s) = latest {
        let m = s.metrics();
        let (performance, bound_value) = if model.mode() == Mode::Engine {
            (m.efficiency, m.carnot_efficiency)
        } else {
            (m.cop, m.carnot_cop)
        };
        let margin = bound_value.zip(performance).map(|(b, p)| b - p);
        for (name, value) in [
            (perf, pm(performance, s.u_performance, "")),
            (bound, pm(bound_value, s.u_bound, "")),
            ("margin", pm(margin, s.u_margin, "")),
            (
                "σ̇",
                pm(s.entropy_rate_w_per_k, s.u_entropy_rate_w_per_k, " W/K"),
            ),
        ] {
            lines.push(Line::from(fit(&format!("{name:<7}{value}"), width)));
        }
        let t_c = (s.entropy_out_j_per_k > 0.0).then(|| s.heat_out_j / s.entropy_out_j_per_k);
        for (name, t) in [("T_hot", m.hot_mean_k), ("T_cold", t_c)] {
            let text = match t {
                Some(t) if view.celsius_only => {
                    format!("{name:<7}{:.1} °C", f64::from(t) - ZERO_CELSIUS_K)
                }
                Some(t) => format!("{name:<7}{:.1} °C  {t:.1} K", f64::from(t) - ZERO_CELSIUS_K),
                None => format!("{name:<7}n/a"),
            };
            lines.push(Line::from(fit(&text, width)));
        }
        if s.duration_s > 0.0 {
            let w = |e: f32| e / s.duration_s;
            lines.push(Line::from(fit(
                &format!(
                    "Q_in {:.0} W  W {:.0} W  Q_out {:.0} W",
                    w(s.heat_in_j),
                    w(s.work_j),
                    w(s.heat_out_j)
                ),
                width,
            )));
        }
        let steady = if s.status.steady {
            Span::styled("steady ✔ yes", Style::new().fg(Color::Green))
        } else {
            Span::styled("steady ✗ not yet", DIM)
        };
        lines.push(Line::from(steady));
        lines.push(verdict_line(&s.verdict, width));
        let when = |t: Option<f32>| match t {
            None => "—".to_string(),
            Some(t) if t <= 0.0 => "reached".to_string(),
            Some(t) => format!("{t:.0} s"),
        };
        let ttl = &model.time_to_limit;
        let hot = if model.hot_max_k.is_some() {
            format!("  T_max {}", when(ttl.hot_max_s))
        } else {
            String::new()
        };
        let ahead = ttl.sooner().is_some();
        lines.push(Line::from(Span::styled(
            fit(
                &format!("limit in: Carnot {}{hot}", when(ttl.carnot_bound_s)),
                width,
            ),
            if ahead {
                Style::new().fg(Color::Yellow)
            } else {
                DIM
            },
        )));
    } else {
        lines.push(Line::from(Span::styled("no summary yet", DIM)));
    }
    let t = &model.totals;
    lines.push(heading(&format!(
        "Run {} totals ({})",
        t.run,
        if t.seconds > 0.0 {
            ago((t.seconds * 1000.0) as i64)
        } else {
            "none yet".into()
        }
    )));
    let [q_in, w, q_out] = t.energies_j;
    lines.push(Line::from(fit(
        &format!("Q_in {}  W {}", joules(q_in), joules(w)),
        width,
    )));
    lines.push(Line::from(fit(&format!("Q_out {}", joules(q_out)), width)));
    let mode = model.mode();
    let opt = |v: Option<f64>| v.map_or("n/a".to_string(), |v| format!("{v:.3}"));
    lines.push(Line::from(fit(
        &format!(
            "{perf} {}  {bound} {}",
            opt(t.performance(mode)),
            opt(t.bound(mode))
        ),
        width,
    )));
    let block = Block::new().borders(Borders::LEFT).border_style(DIM);
    let inner_height = area.height as usize;
    lines.truncate(inner_height);
    frame.render_widget(Paragraph::new(lines).block(block), area);
}

/// The controller's diagnosis of the latest window, in one line.
fn verdict_line(v: &Verdict, width: usize) -> Line<'static> {
    let (text, style) = match (v.consistent, v.suspect) {
        (None, _) => ("check  n/a (no window yet)".to_string(), DIM),
        (Some(true), _) => (
            "check  consistent ✔".to_string(),
            Style::new().fg(Color::Green),
        ),
        (Some(false), Some(c)) => (
            format!(
                "check  ✖ suspect {}{}",
                c.name(),
                v.bias.map_or(String::new(), |b| format!(
                    " ({})",
                    bias_text(c, f64::from(b))
                ))
            ),
            Style::new().fg(Color::Red).add_modifier(Modifier::BOLD),
        ),
        (Some(false), None) => (
            "check  ✖ no single sensor".to_string(),
            Style::new().fg(Color::Red),
        ),
    };
    Line::from(Span::styled(fit(&text, width), style))
}

/// Joules in a readable unit.
fn joules(j: f64) -> String {
    let a = j.abs();
    if a >= 1e6 {
        format!("{:.2} MJ", j / 1e6)
    } else if a >= 1e3 {
        format!("{:.1} kJ", j / 1e3)
    } else {
        format!("{j:.0} J")
    }
}

fn draw_alarms(frame: &mut Frame, area: Rect, model: &Model, view: &View) {
    let width = area.width as usize;
    let heading = format!(
        "  {:<15}{:<28}{:<9}{:<10}{}",
        "Alarms", "rule", "severity", "raised", "ack / cleared"
    );
    let mut lines = vec![Line::from(Span::styled(fit(&heading, width), TITLE))];
    if model.alarms.is_empty() {
        lines.push(Line::from(Span::styled(
            fit("  none raised in this run", width),
            DIM,
        )));
    }
    let rows = area.height.saturating_sub(1) as usize;
    // Keep the selected row in view.
    let first = view.selected.saturating_sub(rows.saturating_sub(1));
    for (i, row) in model.alarms.iter().enumerate().skip(first).take(rows) {
        lines.push(alarm_line(row, i == view.selected, width));
    }
    frame.render_widget(Paragraph::new(lines), area);
}

fn alarm_line(row: &AlarmRow, selected: bool, width: usize) -> Line<'static> {
    let (style, sym, _) = severity_style(row.severity);
    let (state_style, state): (Style, String) = match row.status {
        AlarmStatus::Pending => (Style::new().fg(Color::Yellow), "◌ pending".into()),
        AlarmStatus::Active => (style, format!("{sym} active")),
        AlarmStatus::Acknowledged => (Style::new().fg(Color::Magenta), "✔ acknowledged".into()),
        AlarmStatus::Cleared => (DIM, "○ cleared".into()),
    };
    let t = |ms: Option<u32>| {
        ms.map_or(String::new(), |ms| {
            format!("{:.1} s", f64::from(ms) / 1000.0)
        })
    };
    let when = t(row.raised_t_ms);
    // Both times where there is room, else the latest.
    let after = match (row.acked_t_ms, row.cleared_t_ms) {
        (Some(a), Some(c)) if width >= 100 => {
            format!("ack {} · cleared {}", t(Some(a)), t(Some(c)))
        }
        (_, Some(c)) => format!("cleared {}", t(Some(c))),
        (Some(a), None) => format!("ack {}", t(Some(a))),
        _ => String::new(),
    };
    // The diagnosis when a second-law or energy-balance alarm was raised.
    let after = match (row.verdict.consistent, row.verdict.suspect) {
        (Some(false), Some(c)) => format!("{after}  suspect {}", c.name()),
        (Some(false), None) => format!("{after}  no single sensor"),
        _ => after,
    };
    let marker = if selected { "▶ " } else { "  " };
    let spans = vec![
        Span::styled(marker.to_string(), TITLE),
        Span::styled(format!("{state:<15}"), state_style),
        Span::raw(format!("{:<28}", row.rule.as_str())),
        Span::styled(format!("{:<9}", row.severity.as_str()), style),
        Span::raw(format!("{when:<10}")),
        Span::styled(after, DIM),
    ];
    fit_spans(spans, width)
}

fn draw_link(frame: &mut Frame, area: Rect, model: &Model, holder: &Holder, now_ms: i64) {
    let width = area.width as usize;
    let t = &model.link;
    let fresh = model.fresh_news(now_ms, 15_000);
    let (state, state_style) = match (&model.link_down, &holder.ended) {
        (_, Some(why)) => (format!("■ ended ({why})"), DIM),
        (Some(_), None) => ("✖ down".to_string(), Style::new().fg(Color::Red)),
        (None, None) => ("● up".to_string(), Style::new().fg(Color::Green)),
    };
    let last = model
        .last_frame_ms
        .map_or("no frame yet".to_string(), |at| {
            format!("last {} ago", ago(now_ms - at))
        });
    let other = t.overlong + t.malformed + t.unknown_version;
    let losses_style = if t.losses() > 0 {
        Style::new().fg(Color::Yellow)
    } else {
        Style::default()
    };
    let commands = if holder.commands {
        match model.hello.map(|h| h.keyed) {
            Some(false) => "commands: ✗ controller has no key".to_string(),
            _ => format!("commands ✔ {}", holder.key),
        }
    } else {
        "commands: ✗ no way back".to_string()
    };
    let news = (!fresh.is_empty()).then(|| {
        Span::styled(
            format!(" ⚠ {} ", fresh.join(", ")),
            Style::new().fg(Color::Black).bg(Color::Yellow),
        )
    });
    let long = vec![
        Span::styled(" link ", TITLE),
        Span::styled(state.clone(), state_style),
        Span::raw(format!(" · {} frames · ", t.frames)),
        Span::styled(
            format!(
                "lost {} (CRC {}, other {})",
                t.losses(),
                t.crc_errors,
                other
            ),
            losses_style,
        ),
        Span::raw(format!(
            " · gaps {} · restarts {} · outages {} · {last} · ",
            t.gaps, t.restarts, t.outages
        )),
        Span::raw(commands.clone()),
    ];
    let age = model
        .last_frame_ms
        .map_or("no frame yet".to_string(), |at| {
            format!("{} ago", ago(now_ms - at))
        });
    let crc = if t.losses() > 0 {
        format!(" ({} CRC)", t.crc_errors)
    } else {
        String::new()
    };
    let outages = if t.outages > 0 {
        format!(" · outages {}", t.outages)
    } else {
        String::new()
    };
    let short = vec![
        Span::styled(" link ", TITLE),
        Span::styled(state, state_style),
        Span::raw(format!(" · {} frames · ", t.frames)),
        Span::styled(format!("lost {}{crc}", t.losses()), losses_style),
        Span::raw(format!(
            " · gaps {} · restarts {}{outages} · {age} · ",
            t.gaps, t.restarts
        )),
        Span::raw(if holder.commands && model.hello.is_none_or(|h| h.keyed) {
            "commands ✔".to_string()
        } else {
            "commands ✗".to_string()
        }),
    ];
    let len = |v: &[Span]| v.iter().map(|s| s.content.chars().count()).sum::<usize>();
    let news_len = news.as_ref().map_or(0, |n| n.content.chars().count());
    let mut spans = if len(&long) + news_len <= width {
        long
    } else {
        short
    };
    if let Some(n) = news {
        spans.insert(2, n);
    }
    frame.render_widget(Paragraph::new(fit_spans(spans, width)), area);
}

fn draw_keys(frame: &mut Frame, area: Rect, view: &View, holder: &Holder, now_ms: i64) {
    let width = area.width as usize;
    let fresh = view.message.as_ref().filter(|(at, _)| now_ms - at < 8_000);
    let line = match fresh {
        Some((_, text)) => Line::from(Span::styled(
            fit(&format!(" » {text}"), width),
            Style::new().fg(Color::White).add_modifier(Modifier::BOLD),
        )),
        None => {
            let keys = if holder.commands {
                " a ack · A ack all · n new run · p pause · +/- span · c °C/K · ? help · q quit"
            } else {
                " p pause · +/- span · c °C/K · ? help · q quit"
            };
            Line::from(Span::styled(fit(keys, width), DIM))
        }
    };
    frame.render_widget(Paragraph::new(line), area);
}

/// A box of `w × h` centred in `area` (clipped to it).
fn centred(area: Rect, w: u16, h: u16) -> Rect {
    let w = w.min(area.width);
    let h = h.min(area.height);
    Rect {
        x: area.x + (area.width - w) / 2,
        y: area.y + (area.height - h) / 2,
        width: w,
        height: h,
    }
}

fn draw_help(frame: &mut Frame, area: Rect) {
    let text = [
        "↑ ↓   select an alarm",
        "a     acknowledge the selected alarm",
        "A     acknowledge every alarm",
        "n     start a new run (asks first)",
        "p     pause or resume the trends",
        "+ -   longer or shorter span",
        "c     °C and K, or °C alone",
        "q     leave (the log is closed cleanly)",
        "",
        "✖ trip  ▲ warning  ● advisory  ◌ pending",
        "✔ acknowledged  ○ cleared",
        "Acknowledged is not cleared: a trip stays",
        "on while its condition holds.",
        "Any key closes this help.",
    ];
    let w = 48;
    let rect = centred(area, w, text.len() as u16 + 2);
    let inner = rect.width.saturating_sub(2) as usize;
    let lines: Vec<Line> = text.iter().map(|t| Line::from(fit(t, inner))).collect();
    frame.render_widget(Clear, rect);
    frame.render_widget(
        Paragraph::new(lines).block(Block::bordered().title(Span::styled(" Help ", TITLE))),
        rect,
    );
}

fn draw_confirm(frame: &mut Frame, area: Rect) {
    let text = [
        "Start a new run?",
        "The controller's run totals start afresh",
        "at its next window boundary.",
        "",
        "y = yes, any other key = no",
    ];
    let rect = centred(area, 46, text.len() as u16 + 2);
    let inner = rect.width.saturating_sub(2) as usize;
    let lines: Vec<Line> = text.iter().map(|t| Line::from(fit(t, inner))).collect();
    frame.render_widget(Clear, rect);
    frame.render_widget(
        Paragraph::new(lines).block(
            Block::bordered()
                .border_style(Style::new().fg(Color::Yellow))
                .title(Span::styled(" New run ", TITLE)),
        ),
        rect,
    );
}
