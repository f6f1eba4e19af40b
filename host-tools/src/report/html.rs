//! A [`Report`] as one self-contained HTML page: inline style, the font as
//! a `data:` URL, the chart as inline SVG, and a Content-Security-Policy
//! that lets the browser load nothing else. Every text from the input is
//! escaped.

use std::fmt::Write as _;

use super::budget::{BudgetRow, BudgetTable};
use super::format::{NA, escape, fixed, sig};
use super::{AlarmRow, Chart, Check, Fact, Kind, Outcome, Report, RowKind};
use crate::term::SAFETY_NOTE;

/// The generator the page names in its `<meta name="generator">`: how
/// [`super::check_target`] knows a page of ours.
pub const GENERATOR: &str = "heatbound report";

/// The policy: nothing but inline style, and fonts and images from `data:`.
const CSP: &str = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; font-src data:";

/// The page's style. A neutral palette of our own: ink on white, slate for
/// structure, muted green and red for outcomes only.
const STYLE: &str = r#"
:root {
  --ink: #1d2125; --muted: #5d656d; --rule: #d6dadf; --panel: #f3f4f6;
  --slate: #3d5a6c; --pass: #2f6a3e; --pass-bg: #e5efe7; --fail: #8f2d2d;
  --fail-bg: #f5e3e1; --na: #62676d; --na-bg: #eceef0; --raise: #8a5a12;
}
* { box-sizing: border-box; }
html { font-family: "Heatbound Sans", "DejaVu Sans", sans-serif; color: var(--ink); background: #fff; }
body { margin: 0; font-size: 14px; line-height: 1.45; }
.page { max-width: 1120px; margin: 0 auto; padding: 28px 32px 40px; }
.masthead { display: flex; justify-content: space-between; align-items: flex-start; gap: 24px;
  border-bottom: 3px solid var(--slate); padding-bottom: 14px; margin-bottom: 8px; }
.kicker { text-transform: uppercase; letter-spacing: 0.12em; font-size: 11px; color: var(--muted); margin: 0; }
h1 { font-size: 24px; margin: 2px 0 4px; font-weight: bold; }
.sub { color: var(--muted); margin: 0; }
.badge { border-radius: 4px; padding: 8px 14px; font-weight: bold; font-size: 16px; white-space: nowrap; border: 1px solid; }
.badge small { display: block; font-weight: normal; font-size: 11px; }
.pass { color: var(--pass); background: var(--pass-bg); border-color: var(--pass); }
.fail { color: var(--fail); background: var(--fail-bg); border-color: var(--fail); }
.na { color: var(--na); background: var(--na-bg); border-color: var(--na); }
h2 { font-size: 17px; color: var(--slate); border-bottom: 1px solid var(--rule); padding-bottom: 3px; margin: 28px 0 10px; }
h3 { font-size: 14px; margin: 16px 0 6px; }
p.note, ul.notes { color: var(--muted); font-size: 12.5px; }
ul.notes { padding-left: 18px; margin: 6px 0; }
table { border-collapse: collapse; width: 100%; font-size: 13px; }
th, td { text-align: left; vertical-align: top; padding: 4px 8px; border-bottom: 1px solid var(--rule); }
thead th { background: var(--panel); border-bottom: 1px solid #b9bfc6; font-weight: bold; font-size: 12px; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
td.num { white-space: nowrap; }
table.facts th { width: 26%; font-weight: normal; color: var(--muted); }
tfoot td { font-weight: bold; border-top: 1px solid #b9bfc6; }
.outcome { display: inline-block; min-width: 46px; text-align: center; border-radius: 3px; padding: 0 6px;
  font-size: 11.5px; font-weight: bold; border: 1px solid; }
.details { margin: 3px 0 0; padding-left: 16px; color: var(--muted); font-size: 12px; }
.budget { margin-bottom: 18px; }
table.budget { table-layout: fixed; }
.budget th:nth-child(1) { width: 25%; } .budget th:nth-child(2) { width: 9%; }
.budget th:nth-child(3) { width: 17%; } .budget th:nth-child(4) { width: 18%; }
.budget th:nth-child(5) { width: 15%; } .budget th:nth-child(6) { width: 16%; }
.budget small, .steady small { color: var(--muted); }
.steady th:nth-child(2) { width: 21%; }
.budget caption { text-align: left; font-weight: bold; padding: 4px 0; caption-side: top; }
.budget caption span { font-weight: normal; color: var(--muted); }
.share { display: flex; align-items: center; gap: 6px; justify-content: flex-end; }
.share .bar { display: inline-block; height: 8px; background: var(--slate); border-radius: 1px; }
.share .track { display: inline-block; width: 60px; height: 8px; background: var(--panel); }
tr.raised td.kind { color: var(--raise); font-weight: bold; }
tr.command td { color: var(--muted); }
.chart { width: 100%; height: auto; display: block; border: 1px solid var(--rule); }
.chart text { font-family: "Heatbound Sans", "DejaVu Sans", sans-serif; }
figure { margin: 0; }
code { font-family: inherit; background: var(--panel); border: 1px solid var(--rule); border-radius: 2px; padding: 0 3px; }
figcaption { color: var(--muted); font-size: 12px; margin-top: 4px; }
footer { margin-top: 32px; border-top: 3px solid var(--slate); padding-top: 10px; }
.caution { background: var(--panel); border-left: 4px solid var(--fail); padding: 8px 12px; font-size: 13px; }
.made { color: var(--muted); font-size: 11.5px; }
@page { size: A4; margin: 14mm 12mm 14mm; }
@page landscape { size: A4 landscape; margin: 10mm; }
@media print {
  body { font-size: 9pt; }
  .page { max-width: none; padding: 0; }
  h1 { font-size: 16pt; }
  h2 { font-size: 12pt; margin-top: 14pt; break-after: avoid; }
  table { font-size: 8pt; }
  thead { display: table-header-group; }
  tr, .budget, .caution, figure { break-inside: avoid; }
  table.steady td.num { white-space: normal; }
  #budget, #steady { break-before: page; }
  #charts.drawn { page: landscape; break-before: page; }
  #charts.drawn h2 { margin-top: 0; }
  #charts .chart { max-height: 128mm; width: auto; margin: 0 auto; }
  footer.after-chart { page: landscape; margin-top: 8pt; padding-top: 4pt; break-inside: avoid; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
"#;

/// `bytes` as standard base64 (RFC 4648 §4), for a `data:` URL.
fn base64(bytes: &[u8]) -> String {
    const ABC: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk.first().copied().unwrap_or(0),
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        let sextet = |shift: u32| char::from(ABC[((n >> shift) & 63) as usize]);
        out.push(sextet(18));
        out.push(sextet(12));
        out.push(if chunk.len() > 1 { sextet(6) } else { '=' });
        out.push(if chunk.len() > 2 { sextet(0) } else { '=' });
    }
    out
}

/// The `@font-face` of the chart's own font, embedded.
fn font_face() -> String {
    format!(
        "/* DejaVu Sans, embedded: Copyright (c) 2003 Bitstream, Inc.; DejaVu changes are in the \
         public domain. Licence: host-tools/assets/DejaVuSans-LICENSE.txt. */\n\
         @font-face {{ font-family: \"Heatbound Sans\"; font-style: normal; font-weight: normal; \
         src: url(data:font/ttf;base64,{}) format(\"truetype\"); }}\n",
        base64(crate::chart::FONT_TTF)
    )
}

/// The SVG element ready to inline: no XML prolog, no namespace attribute
/// (HTML puts `<svg>` in its namespace), scaled by CSS through its viewBox.
fn inline_svg(svg: &str, label: &str) -> String {
    let body = match svg.find("<svg") {
        Some(i) => svg.get(i..).unwrap_or(""),
        None => return String::new(),
    };
    let Some(end) = body.find('>') else {
        return String::new();
    };
    let (open, rest) = body.split_at(end);
    let view_box = open
        .split("viewBox=\"")
        .nth(1)
        .and_then(|v| v.split('"').next())
        .unwrap_or("0 0 1400 1000");
    format!(
        "<svg class=\"chart\" viewBox=\"{}\" role=\"img\" aria-label=\"{}\"{}",
        escape(view_box),
        escape(label),
        rest
    )
}

/// Prose made safe for HTML, with `code` in backticks set as code; a
/// backtick without its pair stays a backtick.
fn prose(text: &str) -> String {
    let parts: Vec<&str> = text.split('`').collect();
    let paired = parts.len() % 2 == 1;
    let mut out = String::with_capacity(text.len() + 16);
    for (i, part) in parts.iter().enumerate() {
        if !paired && i + 1 == parts.len() {
            out.push('`');
            out.push_str(&escape(part));
        } else if i % 2 == 1 {
            out.push_str("<code>");
            out.push_str(&escape(part));
            out.push_str("</code>");
        } else {
            out.push_str(&escape(part));
        }
    }
    out
}

/// The class of an outcome, and its word.
fn outcome(o: Outcome) -> (&'static str, &'static str) {
    match o {
        Outcome::Pass => ("pass", "PASS"),
        Outcome::Fail => ("fail", "FAIL"),
        Outcome::NotApplicable => ("na", "n/a"),
    }
}

fn facts_table(out: &mut String, facts: &[Fact]) {
    out.push_str("<table class=\"facts\"><tbody>\n");
    for f in facts {
        let _ = writeln!(
            out,
            "<tr><th scope=\"row\">{}</th><td>{}</td></tr>",
            escape(&f.label),
            escape(&f.value)
        );
    }
    out.push_str("</tbody></table>\n");
}

fn notes(out: &mut String, notes: &[String]) {
    if notes.is_empty() {
        return;
    }
    out.push_str("<ul class=\"notes\">\n");
    for n in notes {
        let _ = writeln!(out, "<li>{}</li>", prose(n));
    }
    out.push_str("</ul>\n");
}

fn check_row(out: &mut String, c: &Check) {
    let (class, word) = outcome(c.outcome);
    let _ = write!(
        out,
        "<tr><td>{}</td><td><span class=\"outcome {class}\">{word}</span></td><td>{}",
        escape(&c.name),
        prose(&c.summary)
    );
    if !c.details.is_empty() {
        out.push_str("<ul class=\"details\">");
        for d in &c.details {
            let _ = write!(out, "<li>{}</li>", prose(d));
        }
        out.push_str("</ul>");
    }
    out.push_str("</td></tr>\n");
}

/// A coefficient with its sign (or its magnitude), three digits.
fn coefficient(c: Option<f64>, signed: bool) -> String {
    match c {
        Some(c) if c.is_finite() => {
            let s = sig(c, 3);
            if signed && c > 0.0 {
                format!("+{s}")
            } else {
                s
            }
        }
        _ => NA.to_owned(),
    }
}

/// The unit of `y` per unit of `x`.
fn per(y: &str, x: &str) -> String {
    match (y, x) {
        ("", "") => String::new(),
        ("", x) => format!("{x}⁻¹"),
        (y, "") => y.to_owned(),
        ("W/K", "K") => "W/K²".to_owned(),
        (y, x) => format!("{y}/{x}"),
    }
}

fn with_unit(value: String, unit: &str) -> String {
    if unit.is_empty() || value == NA {
        value
    } else {
        format!("{value} {unit}")
    }
}

fn budget_row(out: &mut String, t: &BudgetTable, r: &BudgetRow) {
    let estimate = if r.unit.is_empty() {
        sig(r.estimate, 3)
    } else {
        format!("{} {}", sig(r.estimate, 3), r.unit)
    };
    let u = if r.unit.is_empty() {
        format!("{} ({} %)", sig(r.u, 3), sig(100.0 * r.u, 3))
    } else {
        format!("{} {}", sig(r.u, 3), r.unit)
    };
    let share = r.share.filter(|s| s.is_finite());
    let bar = share.map_or_else(String::new, |s| {
        format!(
            "<span class=\"track\"><span class=\"bar\" style=\"width:{:.1}%\"></span></span>",
            (100.0 * s).clamp(0.0, 100.0)
        )
    });
    let note = r
        .note
        .map_or_else(String::new, |n| format!("; {}", escape(n)));
    let _ = writeln!(
        out,
        "<tr><td><b>{}</b><br><small>{}{note}</small></td><td class=\"num\">{}</td><td class=\"num\">{}</td>\
         <td class=\"num\">{}</td><td class=\"num\">{}</td>\
         <td class=\"num\"><span class=\"share\">{bar}{}</span></td></tr>",
        escape(r.quantity),
        escape(r.description),
        escape(&estimate),
        escape(&u),
        escape(&with_unit(
            coefficient(r.sensitivity, t.signed),
            &per(t.unit, r.unit)
        )),
        escape(&with_unit(sig(r.contribution, 3), t.unit)),
        share.map_or_else(
            || NA.to_owned(),
            |s| format!("{} %", fixed(Some(100.0 * s), 1))
        )
    );
}

fn budget_table(out: &mut String, t: &BudgetTable) {
    let unit = |x: Option<f64>| with_unit(x.map_or_else(|| NA.to_owned(), |x| sig(x, 4)), t.unit);
    let _ = writeln!(
        out,
        "<table class=\"budget\"><caption>{} <span>({}) = {}; u_c = {}; U = k·u_c = {} \
         (k = {})</span></caption>",
        escape(t.symbol),
        escape(t.name),
        escape(&unit(t.estimate)),
        escape(&unit(t.u_c)),
        escape(&unit(t.u_c.map(|u| u * t.k))),
        escape(&sig(t.k, 3))
    );
    let c_head = if t.signed {
        "Sensitivity coefficient c<sub>i</sub>"
    } else {
        "Sensitivity |c<sub>i</sub>|"
    };
    let _ = writeln!(
        out,
        "<thead><tr><th>Input quantity X<sub>i</sub></th><th class=\"num\">Estimate x<sub>i</sub></th>\
         <th class=\"num\">Standard uncertainty u(x<sub>i</sub>)</th><th class=\"num\">{c_head}</th>\
         <th class=\"num\">Contribution u<sub>i</sub>(y)</th><th class=\"num\">Share of u<sub>c</sub>²</th></tr></thead><tbody>"
    );
    for r in &t.rows {
        budget_row(out, t, r);
    }
    let total = t.share_sum();
    let _ = writeln!(
        out,
        "</tbody><tfoot><tr><td colspan=\"4\">Combined standard uncertainty u<sub>c</sub>(y) \
         = √Σ u<sub>i</sub>(y)²</td><td class=\"num\">{}</td><td class=\"num\">{}</td></tr>\
         <tr><td colspan=\"4\">Expanded uncertainty U = k·u<sub>c</sub>(y), k = {}</td>\
         <td class=\"num\">{}</td><td></td></tr></tfoot></table>",
        escape(&unit(t.u_c)),
        total.map_or_else(
            || NA.to_owned(),
            |s| format!("{} %", fixed(Some(100.0 * s), 1))
        ),
        escape(&sig(t.k, 3)),
        escape(&unit(t.u_c.map(|u| u * t.k)))
    );
}

fn alarm_row(out: &mut String, r: &AlarmRow) {
    let (class, kind) = match r.kind {
        RowKind::Raised => ("raised", "raised"),
        RowKind::Cleared => ("cleared", "cleared"),
        RowKind::Acknowledged => ("acknowledged", "acknowledged"),
        RowKind::Command => ("command", "command"),
    };
    let _ = writeln!(
        out,
        "<tr class=\"{class}\"><td class=\"num\">{}</td><td>{}</td><td>{}</td>\
         <td class=\"kind\">{kind}</td><td>{}</td><td>{}</td></tr>",
        escape(&r.device_time),
        escape(&r.wall_time),
        escape(&r.rule),
        escape(&r.severity),
        escape(&r.detail)
    );
}

/// The page of `report`.
pub fn render(report: &Report) -> String {
    let mut o = String::with_capacity(1_200_000);
    let title = format!("heatbound report: {}", report.title);
    let (vclass, vword) = match report.verdict.pass {
        Some(true) => ("pass", report.verdict.headline.as_str()),
        Some(false) => ("fail", report.verdict.headline.as_str()),
        None => ("na", report.verdict.headline.as_str()),
    };
    let source = match report.kind {
        Kind::Log => "a log of the controller's stream",
        Kind::Csv => "a recorded CSV file, replayed",
    };
    let _ = write!(
        o,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta http-equiv=\"Content-Security-Policy\" content=\"{CSP}\">\n\
         <meta name=\"generator\" content=\"{GENERATOR} {}\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>{}</title>\n<style>\n{}{STYLE}</style>\n</head>\n<body>\n<div class=\"page\">\n",
        env!("CARGO_PKG_VERSION"),
        escape(&title),
        font_face()
    );
    let _ = writeln!(
        o,
        "<header class=\"masthead\"><div><p class=\"kicker\">heatbound test report</p>\
         <h1>{}</h1><p class=\"sub\">From {}: {}</p></div>\
         <div class=\"badge {vclass}\">{}<small>verdict</small></div></header>",
        escape(&report.title),
        escape(source),
        escape(&report.input),
        escape(vword)
    );

    o.push_str("<section id=\"run\"><h2>1. The run</h2>\n");
    facts_table(&mut o, &report.facts);
    o.push_str("<h3>Losses and gaps</h3>\n");
    facts_table(&mut o, &report.losses);
    o.push_str("</section>\n");

    let v = &report.verdict;
    let _ = writeln!(
        o,
        "<section id=\"verdict\"><h2>2. Verdict: {}</h2><p class=\"note\">{}</p>\
         <table><thead><tr><th>Check</th><th>Outcome</th><th>What was checked, and found</th></tr>\
         </thead><tbody>",
        escape(&v.headline),
        prose(&v.basis)
    );
    for c in &v.checks {
        check_row(&mut o, c);
    }
    o.push_str("</tbody></table></section>\n");

    let t = &report.totals;
    let _ = writeln!(
        o,
        "<section id=\"totals\"><h2>3. Run totals</h2>\
         <table><thead><tr><th>Quantity</th><th>Symbol</th><th class=\"num\">Value</th>\
         <th class=\"num\">U (k = {k})</th><th class=\"num\">k</th><th class=\"num\">U relative</th>\
         <th>Note</th></tr></thead><tbody>",
        k = escape(&sig(t.k, 3))
    );
    for r in &t.rows {
        let k = if r.expanded == "—" {
            String::new()
        } else {
            sig(t.k, 3)
        };
        let _ = writeln!(
            o,
            "<tr><td>{}</td><td>{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>\
             <td class=\"num\">{}</td><td class=\"num\">{}</td><td>{}</td></tr>",
            escape(&r.quantity),
            escape(&r.symbol),
            escape(&r.value),
            escape(&r.expanded),
            escape(&k),
            escape(&r.relative),
            escape(&r.note)
        );
    }
    o.push_str("</tbody></table>\n");
    notes(&mut o, &t.notes);
    o.push_str("</section>\n");

    o.push_str("<section id=\"budget\"><h2>4. Uncertainty budget</h2>\n");
    notes(&mut o, &report.budget_notes);
    for b in &report.budgets {
        budget_table(&mut o, b);
    }
    o.push_str("</section>\n");

    let s = &report.steady;
    let _ = writeln!(
        o,
        "<section id=\"steady\"><h2>5. Steady periods</h2><p>Steady for {} of the run.</p>",
        s.fraction.map_or_else(
            || NA.to_owned(),
            |f| format!("{} %", fixed(Some(100.0 * f), 1))
        )
    );
    if !s.periods.is_empty() {
        // The figures' symbols, as the budgets name them for this mode.
        let symbol =
            |i: usize, default: &'static str| report.budgets.get(i).map_or(default, |b| b.symbol);
        let _ = writeln!(
            o,
            "<table class=\"steady\"><thead><tr><th>#</th><th>{}</th>\
             <th class=\"num\">Windows span</th><th class=\"num\">T_h / T_c</th>\
             <th class=\"num\">Heat in / work</th><th class=\"num\">{} ± U</th>\
             <th class=\"num\">{} ± U</th><th class=\"num\">{} ± U</th>\
             <th class=\"num\">{} ± U</th></tr></thead><tbody>",
            match report.kind {
                Kind::Log => "Device time",
                Kind::Csv => "File time",
            },
            escape(symbol(0, "merit")),
            escape(symbol(1, "bound")),
            escape(symbol(2, "margin")),
            escape(symbol(3, "σ̇"))
        );
        for (i, p) in s.periods.iter().enumerate() {
            let _ = writeln!(
                o,
                "<tr><td>{}</td><td>{}–{}<br><small>{}{}</small></td>\
                 <td class=\"num\">{}</td><td class=\"num\">{}&nbsp;K<br>{}&nbsp;K</td>\
                 <td class=\"num\">{}<br>{}</td><td class=\"num\">{}</td>\
                 <td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td></tr>",
                i + 1,
                escape(&p.from),
                escape(&p.to),
                escape(&format!(
                    "{} summar{}",
                    p.summaries,
                    if p.summaries == 1 { "y" } else { "ies" }
                )),
                if p.wall.is_empty() {
                    String::new()
                } else {
                    format!("; from {}", escape(&p.wall))
                },
                escape(&p.length),
                escape(&p.t_h),
                escape(&p.t_c),
                escape(&p.heat_in),
                escape(&p.work),
                escape(&p.performance),
                escape(&p.bound),
                escape(&p.margin),
                escape(&p.entropy_rate)
            );
        }
        o.push_str("</tbody></table>\n");
    }
    let mut steady_notes: Vec<String> = s.note.iter().cloned().collect();
    if s.more > 0 {
        steady_notes.push(format!("{} shorter periods are not listed.", s.more));
    }
    notes(&mut o, &steady_notes);
    o.push_str("</section>\n");

    let a = &report.alarms;
    o.push_str("<section id=\"alarms\"><h2>6. Alarms</h2>\n");
    if a.rows.is_empty() {
        o.push_str("<p>No alarm was raised, and no command was sent.</p>\n");
    } else {
        facts_table(&mut o, &a.per_rule);
        o.push_str(
            "<table><thead><tr><th class=\"num\">Device time</th><th>Host time</th><th>Rule</th>\
             <th>Event</th><th>Severity / origin</th><th>Diagnosis at the raise / outcome</th></tr>\
             </thead><tbody>\n",
        );
        for r in &a.rows {
            alarm_row(&mut o, r);
        }
        o.push_str("</tbody></table>\n");
    }
    let mut alarm_notes: Vec<String> = a.note.iter().cloned().collect();
    if a.more > 0 {
        alarm_notes.push(format!("{} later rows are not listed.", a.more));
    }
    notes(&mut o, &alarm_notes);
    o.push_str("</section>\n");

    let drawn = matches!(report.chart, Chart::Svg { .. });
    let _ = writeln!(
        o,
        "<section id=\"charts\"{}><h2>7. Charts</h2>",
        if drawn { " class=\"drawn\"" } else { "" }
    );
    match &report.chart {
        Chart::Svg { svg, caption } => {
            let _ = writeln!(
                o,
                "<figure>{}<figcaption>{}</figcaption></figure>",
                inline_svg(svg, caption),
                escape(caption)
            );
        }
        Chart::None(why) => {
            let _ = writeln!(o, "<p class=\"note\">{}</p>", prose(why));
        }
    }
    o.push_str("</section>\n");

    let _ = writeln!(
        o,
        "<footer{}><p class=\"caution\">{}</p><p class=\"made\">Made by heatbound {} from {}. \
         This page loads nothing from anywhere: it prints as it shows.</p></footer>\n\
         </div>\n</body>\n</html>",
        if drawn { " class=\"after-chart\"" } else { "" },
        escape(SAFETY_NOTE),
        env!("CARGO_PKG_VERSION"),
        escape(&report.input)
    );
    o
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn base64_matches_rfc_4648_test_vectors() {
        // RFC 4648 §10.
        for (plain, coded) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(plain.as_bytes()), coded);
        }
    }

    #[test]
    fn svg_is_inlined_without_namespace_or_prolog() {
        let svg = "<?xml version=\"1.0\"?>\n<svg width=\"1400\" height=\"1000\" viewBox=\"0 0 1400 1000\" \
                   xmlns=\"http://www.w3.org/2000/svg\">\n<text>x</text></svg>";
        let s = inline_svg(svg, "a \"chart\"");
        assert!(
            s.starts_with("<svg class=\"chart\" viewBox=\"0 0 1400 1000\""),
            "{s}"
        );
        assert!(!s.contains("http"), "{s}");
        assert!(s.contains("&quot;chart&quot;"));
        assert_eq!(inline_svg("no svg", ""), "");
    }

    #[test]
    fn code_in_backticks() {
        assert_eq!(
            prose("run `heatbound audit` <now>"),
            "run <code>heatbound audit</code> &lt;now&gt;"
        );
        assert_eq!(prose("a `b` c `d"), "a <code>b</code> c `d");
        assert_eq!(prose("no code"), "no code");
    }

    #[test]
    fn units_of_coefficients() {
        assert_eq!(per("", "K"), "K⁻¹");
        assert_eq!(per("W/K", "K"), "W/K²");
        assert_eq!(per("W/K", ""), "W/K");
        assert_eq!(per("", ""), "");
    }
}
