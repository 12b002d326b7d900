//! The HTML renderer: one self-contained page (inline CSS and SVG, no scripts, no external
//! fonts) with the charts a researcher looks at first, then every section of the report.
//! Markup is built with maud; the charts are SVG elements laid out here from report figures.

use std::io::Write;

use maud::{html, Markup, PreEscaped, DOCTYPE};

use super::layout::{num, sections, Block};
use super::{Render, Report};

/// Renders the report as a self-contained HTML page.
pub struct Html;

const INK: &str = "#2b3440";
const TEAL: &str = "#1b6e7a";
const AMBER: &str = "#d48a2c";
const ROSE: &str = "#b5485d";
const MIST: &str = "#e7ebee";

const CSS: &str = "body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;color:#2b3440;\
max-width:1100px;margin:2rem auto;padding:0 1rem;line-height:1.45}h1{font-size:1.5rem}\
h2{font-size:1.15rem;border-bottom:2px solid #1b6e7a;padding-bottom:.2rem;margin-top:2rem}\
table{border-collapse:collapse;margin:.6rem 0;font-size:.88rem}td,th{padding:.2rem .6rem;\
border-bottom:1px solid #e7ebee;text-align:left;vertical-align:top}th{background:#f4f6f7}\
td.n{text-align:right;font-variant-numeric:tabular-nums}.charts{display:grid;\
grid-template-columns:repeat(auto-fit,minmax(480px,1fr));gap:1.2rem}figure{margin:0;\
border:1px solid #e7ebee;border-radius:6px;padding:.6rem}figcaption{font-size:.85rem;\
color:#55606b}svg text{font-size:10px;fill:#2b3440}.note{font-size:.9rem;color:#3c4650}";

impl Render for Html {
    fn render(&self, r: &Report, wtr: &mut dyn Write) -> std::io::Result<()> {
        let page = html! {
            (DOCTYPE)
            html lang="en" {
                head {
                    meta charset="utf-8";
                    meta name="viewport" content="width=device-width, initial-scale=1";
                    title { "Readiness report: " (r.input.path) }
                    style { (PreEscaped(CSS)) }
                }
                body {
                    h1 { "Readiness report: " code { (r.input.path) } }
                    p.note {
                        "panelready " (r.tool_version) " · " (r.input.rows) " rows read · entity "
                        code { (r.input.entity) } " · period " code { (r.input.period) }
                        @if let Some(v) = &r.verdict { " · overall verdict: " strong { (v.overall.label()) } }
                    }
                    h2 { "At a glance, in pictures" }
                    div.charts {
                        (coverage_chart(r))
                        (entry_exit_chart(r))
                        (survival_chart(r))
                        (within_chart(r))
                        (missing_chart(r))
                        @for t in &r.treatment { (treated_chart(t)) }
                    }
                    @for section in sections(r) {
                        h2 { (section.title) }
                        @for block in &section.blocks { (block_html(block)) }
                    }
                    p.note { em { "These figures inform a judgement about the data; they do not show that a model is right." } }
                }
            }
        };
        wtr.write_all(page.into_string().as_bytes())
    }
}

fn is_number(s: &str) -> bool {
    s.chars()
        .next()
        .is_some_and(|c| c.is_ascii_digit() || "-–<+".contains(c))
}

fn block_html(block: &Block) -> Markup {
    match block {
        Block::Pairs(rows) => html! {
            table { @for (a, b) in rows { tr { td { (a) } td.n { (b) } } } }
        },
        Block::Table(header, rows) => html! {
            table {
                tr { @for h in header { th { (h) } } }
                @for row in rows {
                    tr { @for (i, c) in row.iter().enumerate() {
                        @if i > 0 && is_number(c) { td.n { (c) } } @else { td { (c) } }
                    } }
                }
            }
        },
        Block::Note(text) => html! { p.note { (text) } },
    }
}

fn figure(id: &str, caption: &str, width: f64, height: f64, body: Markup) -> Markup {
    html! {
        figure id=(id) {
            svg xmlns="http://www.w3.org/2000/svg" viewBox=(format!("0 0 {width} {height}"))
                width="100%" role="img" aria-label=(caption) { (body) }
            figcaption { (caption) }
        }
    }
}

fn empty(id: &str, caption: &str, why: &str) -> Markup {
    html! { figure id=(id) { p.note { (why) } figcaption { (caption) } } }
}

fn coverage_chart(r: &Report) -> Markup {
    let g = &r.coverage.grid;
    let caption = format!(
        "Coverage: {} of {} entities (evenly spaced in entity order) by period; filled = observed, \
         red = missing inside the entity's span",
        g.rows.len(),
        g.of_entities
    );
    if g.rows.is_empty() || g.periods.is_empty() {
        return empty("chart-coverage", &caption, "No rows.");
    }
    let (left, top) = (70.0, 8.0);
    let cw = (420.0 / g.periods.len() as f64).min(24.0);
    let ch = 5.0;
    let width = left + cw * g.periods.len() as f64 + 10.0;
    let height = top + ch * g.rows.len() as f64 + 24.0;
    let every = g.periods.len().div_ceil(8).max(1);
    figure(
        "chart-coverage",
        &caption,
        width,
        height,
        html! {
            @for (i, row) in g.rows.iter().enumerate() {
                @let first = row.present.iter().position(|p| *p);
                @let last = row.present.iter().rposition(|p| *p);
                @for (j, p) in row.present.iter().enumerate() {
                    @let inside = first.is_some_and(|a| j >= a) && last.is_some_and(|b| j <= b);
                    @if *p || inside {
                        rect x=(left + cw * j as f64) y=(top + ch * i as f64) width=(cw - 1.0) height=(ch - 1.0)
                            fill=(if *p { TEAL } else { ROSE }) {}
                    }
                }
            }
            @for (j, p) in g.periods.iter().enumerate() {
                @if j % every == 0 {
                    text x=(left + cw * j as f64) y=(height - 8.0) { (p) }
                }
            }
            text x="4" y=(top + 8.0) { "entities" }
        },
    )
}

fn bar_scale(max: f64) -> f64 {
    if max <= 0.0 {
        1.0
    } else {
        max
    }
}

fn entry_exit_chart(r: &Report) -> Markup {
    let caption =
        "Entrants (teal) and leavers (amber) per period; none counted at the window's edges";
    if r.entry_exit.is_empty() {
        return empty("chart-entry-exit", caption, "No periods.");
    }
    let (left, top, h) = (40.0, 10.0, 150.0);
    let bw = (440.0 / r.entry_exit.len() as f64).min(40.0);
    let max = bar_scale(
        r.entry_exit
            .iter()
            .flat_map(|l| [l.entrants.unwrap_or(0), l.leavers.unwrap_or(0)])
            .max()
            .unwrap_or(0) as f64,
    );
    let every = r.entry_exit.len().div_ceil(10).max(1);
    figure(
        "chart-entry-exit",
        caption,
        left + bw * r.entry_exit.len() as f64 + 10.0,
        top + h + 26.0,
        html! {
            line x1=(left) y1=(top + h) x2=(left + bw * r.entry_exit.len() as f64) y2=(top + h) stroke=(INK) {}
            text x="2" y=(top + 8.0) { (max) }
            @for (i, l) in r.entry_exit.iter().enumerate() {
                @let x = left + bw * i as f64;
                @if let Some(e) = l.entrants {
                    rect x=(x + 1.0) y=(top + h - h * e as f64 / max) width=(bw / 2.0 - 1.0) height=(h * e as f64 / max) fill=(TEAL) {}
                }
                @if let Some(v) = l.leavers {
                    rect x=(x + bw / 2.0) y=(top + h - h * v as f64 / max) width=(bw / 2.0 - 1.0) height=(h * v as f64 / max) fill=(AMBER) {}
                }
                @if i % every == 0 { text x=(x) y=(top + h + 14.0) { (l.period) } }
            }
        },
    )
}

fn survival_chart(r: &Report) -> Markup {
    let caption =
        "Survival by entry cohort: share observed k periods after entry (largest cohorts)";
    let mut cohorts: Vec<_> = r.survival.iter().filter(|s| s.shares.len() > 1).collect();
    cohorts.sort_by(|a, b| b.entities.cmp(&a.entities).then(a.cohort.cmp(&b.cohort)));
    cohorts.truncate(6);
    if cohorts.is_empty() {
        return empty(
            "chart-survival",
            caption,
            "No cohort is observed for more than one period.",
        );
    }
    let (left, top, w, h) = (36.0, 10.0, 420.0, 150.0);
    let kmax = cohorts.iter().map(|s| s.shares.len()).max().unwrap_or(2) - 1;
    let palette = [TEAL, AMBER, ROSE, INK, "#6b8f3a", "#7a5aa0"];
    figure(
        "chart-survival",
        caption,
        left + w + 90.0,
        top + h + 26.0,
        html! {
            line x1=(left) y1=(top + h) x2=(left + w) y2=(top + h) stroke=(INK) {}
            line x1=(left) y1=(top) x2=(left) y2=(top + h) stroke=(INK) {}
            text x="4" y=(top + 8.0) { "1.0" }
            text x="4" y=(top + h) { "0" }
            text x=(left + w - 60.0) y=(top + h + 16.0) { "k = " (kmax) }
            @for (c, s) in cohorts.iter().enumerate() {
                @let pts: Vec<String> = s.shares.iter().enumerate().map(|(k, v)| format!("{:.1},{:.1}", left + w * k as f64 / kmax.max(1) as f64, top + h - h * v)).collect();
                polyline points=(pts.join(" ")) fill="none" stroke=(palette[c % palette.len()]) stroke-width="2" {}
                text x=(left + w + 6.0) y=(top + 12.0 + 14.0 * c as f64) fill=(palette[c % palette.len()]) { (s.cohort) " (" (s.entities) ")" }
            }
        },
    )
}

fn within_chart(r: &Report) -> Markup {
    let caption = "Within share of each numeric variable's variation; red = absorbed by entity (or entity + period) effects, or nearly absorbed";
    let vars: Vec<_> = r
        .variation
        .iter()
        .filter(|v| v.within_share.is_some())
        .collect();
    if vars.is_empty() {
        return empty("chart-within", caption, "No numeric variables.");
    }
    let (left, top, w, bh) = (150.0, 6.0, 320.0, 12.0);
    figure(
        "chart-within",
        caption,
        left + w + 60.0,
        top + bh * vars.len() as f64 + 20.0,
        html! {
            @for (i, v) in vars.iter().enumerate() {
                @let share = v.within_share.unwrap_or(0.0).clamp(0.0, 1.0);
                @let bad = v.nearly_absorbed
                    || v.absorbed_by.is_some_and(|a| a != crate::report::Absorbed::Period);
                text x="4" y=(top + bh * i as f64 + 9.0) { (v.variable) }
                rect x=(left) y=(top + bh * i as f64) width=(w) height=(bh - 2.0) fill=(MIST) {}
                rect x=(left) y=(top + bh * i as f64) width=(w * share) height=(bh - 2.0) fill=(if bad { ROSE } else { TEAL }) {}
                text x=(left + w + 4.0) y=(top + bh * i as f64 + 9.0) { (num(share, 3)) }
            }
        },
    )
}

fn missing_chart(r: &Report) -> Markup {
    let caption = "Missing share by variable and period (darker = more missing); variables with no missing values left out";
    let mut vars: Vec<&str> = r
        .missing_by_period
        .iter()
        .map(|m| m.variable.as_str())
        .collect();
    vars.dedup();
    let mut periods: Vec<i64> = r.missing_by_period.iter().map(|m| m.period).collect();
    periods.sort();
    periods.dedup();
    if vars.is_empty() {
        return empty("chart-missing", caption, "No missing values.");
    }
    let (left, top) = (150.0, 6.0);
    let cw = (320.0 / periods.len() as f64).min(24.0);
    let ch = 12.0;
    let every = periods.len().div_ceil(8).max(1);
    figure(
        "chart-missing",
        caption,
        left + cw * periods.len() as f64 + 10.0,
        top + ch * vars.len() as f64 + 24.0,
        html! {
            @for (i, v) in vars.iter().enumerate() {
                text x="4" y=(top + ch * i as f64 + 9.0) { (v) }
            }
            @for m in &r.missing_by_period {
                @let i = vars.iter().position(|v| *v == m.variable).unwrap_or(0);
                @let j = periods.iter().position(|p| *p == m.period).unwrap_or(0);
                rect x=(left + cw * j as f64) y=(top + ch * i as f64) width=(cw - 1.0) height=(ch - 1.0)
                    fill=(ROSE) fill-opacity=(format!("{:.3}", 0.08 + 0.92 * m.share)) {}
            }
            @for (j, p) in periods.iter().enumerate() {
                @if j % every == 0 { text x=(left + cw * j as f64) y=(top + ch * vars.len() as f64 + 14.0) { (p) } }
            }
        },
    )
}

fn treated_chart(t: &crate::report::TreatLine) -> Markup {
    let id = format!("chart-treated-{}", t.variable);
    let caption = format!(
        "{} before {}: distribution (0.5th to 99.5th percentile, the rest in the end bins) with the {} / {} percentile cutoffs{}",
        t.variable,
        t.method,
        t.lower_percentile,
        t.upper_percentile,
        if t.cutoffs.len() > 1 { " (per period: not drawn)" } else { "" }
    );
    let hgm = &t.histogram;
    if hgm.counts.is_empty() {
        return empty(&id, &caption, "No values.");
    }
    let (left, top, w, h) = (10.0, 10.0, 440.0, 120.0);
    let bw = w / hgm.counts.len() as f64;
    let max = bar_scale(hgm.counts.iter().copied().max().unwrap_or(0) as f64);
    let span = hgm.width * hgm.counts.len() as f64;
    let at = |x: f64| left + w * ((x - hgm.start) / span).clamp(0.0, 1.0);
    figure(
        &id,
        &caption,
        left + w + 10.0,
        top + h + 24.0,
        html! {
            @for (i, c) in hgm.counts.iter().enumerate() {
                rect x=(left + bw * i as f64) y=(top + h - h * *c as f64 / max) width=(bw - 1.0) height=(h * *c as f64 / max) fill=(TEAL) {}
            }
            line x1=(left) y1=(top + h) x2=(left + w) y2=(top + h) stroke=(INK) {}
            text x=(left) y=(top + h + 14.0) { (num(hgm.start, 3)) }
            text x=(left + w - 50.0) y=(top + h + 14.0) { (num(hgm.start + span, 3)) }
            @if let [c] = t.cutoffs.as_slice() {
                @for x in [c.lower, c.upper].into_iter().flatten() {
                    line x1=(at(x)) y1=(top) x2=(at(x)) y2=(top + h) stroke=(AMBER) stroke-width="2" stroke-dasharray="4 3" {}
                }
            }
        },
    )
}
