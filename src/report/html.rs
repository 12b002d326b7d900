//! The HTML renderer: one self-contained page (inline CSS and SVG, no scripts, no external
//! fonts) with the charts a researcher looks at first, then every section of the report.
//! Markup is built with maud; the charts are SVG elements laid out here from report figures.

use std::io::Write;

use maud::{html, Markup, PreEscaped, DOCTYPE};

use super::layout::{figure_column, headline, level, num, sections, slug, Block, Section};
use super::Page;
use super::{Coverage, EntryExitFigures, MissingFigures, Render, Report, VariationFigures};

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
color:#55606b}svg text{font-size:11px;fill:#2b3440}.note{font-size:.9rem;color:#3c4650}\
td.n{white-space:nowrap}h3{font-size:1rem;margin:1.2rem 0 .3rem}\
.verdict{border-left:6px solid #55606b;background:#f7f9fa;padding:.5rem 1rem;margin:1rem 0}\
.verdict.fail{border-color:#b5485d}.verdict.warn{border-color:#d48a2c}\
.verdict.pass{border-color:#3c8a4a}.verdict ul{margin:.3rem 0;padding-left:1.2rem}\
.s{display:inline-block;min-width:2.6rem;text-align:center;border-radius:3px;padding:0 .3rem;\
color:#fff;background:#55606b;font-weight:600}.s.fail{background:#b5485d}\
.s.warn{background:#b86f12}.s.pass{background:#3c8a4a}";

impl Render for Html {
    fn render(&self, r: &Report, wtr: &mut dyn Write) -> std::io::Result<()> {
        let page = html! {
            (DOCTYPE)
            html lang="en" {
                (head(&format!("Readiness report: {}", r.input.path)))
                body {
                    h1 { "Readiness report: " code { (r.input.path) } }
                    p.note {
                        "panelready " (r.tool_version) " · " (r.input.rows) " rows read · entity "
                        code { (r.input.entity) } " · period " code { (r.input.period) }
                    }
                    @if let Some(h) = headline(r) {
                        div class=(format!("verdict {}", h.overall)) id="verdict-first" {
                            strong { "Overall verdict: " (status(h.overall)) }
                            " (" (h.tally) "; " a href="#verdict" { "the table" } ")"
                            @if !h.lines.is_empty() {
                                ul {
                                    @for (st, check, anchor, reason) in &h.lines {
                                        li { (status(st)) " " a href=(format!("#{anchor}")) { (check) } ": " (reason) }
                                    }
                                }
                            }
                        }
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
                    (sections_html(&sections(r)))
                    p.note { em { "These figures inform a judgement about the data; they do not show that a model is right." } }
                }
            }
        };
        wtr.write_all(page.into_string().as_bytes())
    }
}

fn sections_html(sections: &[Section]) -> Markup {
    html! {
        @for section in sections {
            h2 id=(slug(section.title)) { (section.title) }
            @for block in &section.blocks { (block_html(block)) }
        }
    }
}

/// The page head: character set, viewport, title and the inline style sheet.
fn head(title: &str) -> Markup {
    html! {
        head {
            meta charset="utf-8";
            meta name="viewport" content="width=device-width, initial-scale=1";
            title { (title) }
            style { (PreEscaped(CSS)) }
        }
    }
}

/// A page other than the readiness report, as a self-contained HTML page.
pub(crate) fn page(page: &Page, wtr: &mut dyn Write) -> std::io::Result<()> {
    let markup = html! {
        (DOCTYPE)
        html lang="en" {
            (head(&page.title))
            body {
                h1 { (page.title) }
                p.note { (inline(&page.subtitle)) }
                (sections_html(&page.sections))
            }
        }
    };
    wtr.write_all(markup.into_string().as_bytes())
}

/// A status word as a coloured chip.
fn status(word: &str) -> Markup {
    html! { span class=(format!("s {word}")) { (word) } }
}

/// Text with `code` spans: the layout marks names with backticks, shown here as code.
fn inline(text: &str) -> Markup {
    html! {
        @for (i, part) in text.split('`').enumerate() {
            @if i % 2 == 1 { code { (part) } } @else { (part) }
        }
    }
}

fn block_html(block: &Block) -> Markup {
    match block {
        Block::Pairs(rows) => html! {
            table { @for (a, b) in rows { tr { td { (inline(a)) } td.n { (b) } } } }
        },
        Block::Table(header, rows) => {
            let figures: Vec<bool> = (0..header.len()).map(|i| figure_column(rows, i)).collect();
            let verdict_column = header.iter().position(|h| h == "verdict");
            html! {
                table {
                    tr { @for (i, h) in header.iter().enumerate() {
                        @if figures[i] { th style="text-align:right" { (h) } } @else { th { (h) } }
                    } }
                    @for row in rows {
                        tr { @for (i, c) in row.iter().enumerate() {
                            @if figures.get(i) == Some(&true) { td.n { (c) } }
                            @else if Some(i) == verdict_column { td { (status(c)) } }
                            @else { td { (inline(c)) } }
                        } }
                    }
                }
            }
        }
        Block::Note(text) => html! { p.note { (inline(text)) } },
        Block::Heading(text) => html! { h3 { (inline(text)) } },
    }
}

// Every chart shares one drawing width, so that its text renders at the same size in the
// page's equal-width grid cells; text is 11 units high throughout.
const W: f64 = 560.0;
const GREEN: &str = "#3c8a4a";
const PLUM: &str = "#7a5aa0";

fn figure(id: &str, caption: &str, height: f64, body: Markup) -> Markup {
    html! {
        figure id=(id) {
            svg xmlns="http://www.w3.org/2000/svg" viewBox=(format!("0 0 {W} {height:.0}"))
                width="100%" role="img" aria-label=(caption) { (body) }
            figcaption { (caption) }
        }
    }
}

fn empty(id: &str, caption: &str, why: &str) -> Markup {
    html! { figure id=(id) { p.note { (why) } figcaption { (caption) } } }
}

/// About `n` round tick values covering lo..hi (steps of 1, 2, 2.5 or 5 times a power of ten).
fn ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    if hi <= lo || !lo.is_finite() || !hi.is_finite() {
        return vec![lo];
    }
    let raw = (hi - lo) / n.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let first = (lo / step).ceil() as i64;
    let last = (hi / step).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// A tick label: the shortest decimal of a round tick value (0.9, not 0.9000).
fn tick_label(x: f64) -> String {
    if x.abs() >= 1e9 || (x != 0.0 && x.abs() < 1e-6) {
        return level(x);
    }
    let rounded = (x * 1e9).round() / 1e9;
    format!("{}", rounded + 0.0)
}

/// A vertical axis at `x` from `top` to `top + h` for values lo..hi, with light grid lines
/// across `width` and an axis title written upwards.
fn y_axis(x: f64, top: f64, h: f64, width: f64, lo: f64, hi: f64, title: &str) -> Markup {
    let at = |v: f64| top + h - h * (v - lo) / (hi - lo);
    html! {
        @for t in ticks(lo, hi, 4) {
            line x1=(x) y1=(at(t)) x2=(x + width) y2=(at(t)) stroke=(MIST) {}
            text x=(x - 4.0) y=(at(t) + 4.0) text-anchor="end" { (tick_label(t)) }
        }
        line x1=(x) y1=(top) x2=(x) y2=(top + h) stroke=(INK) {}
        text x="11" y=(top + h / 2.0) text-anchor="middle"
            transform=(format!("rotate(-90 11 {:.1})", top + h / 2.0)) { (title) }
    }
}

/// Period labels under a band of `n` equal slots starting at `x0`, about eight of them.
fn period_labels(periods: &[i64], x0: f64, slot: f64, y: f64) -> Markup {
    let every = periods.len().div_ceil(8).max(1);
    html! {
        @for (j, p) in periods.iter().enumerate() {
            @if j % every == 0 {
                text x=(x0 + slot * (j as f64 + 0.5)) y=(y) text-anchor="middle" { (p) }
            }
        }
    }
}

/// A row of colour swatches with their labels, from `x` along `y`.
fn legend(x: f64, y: f64, items: &[(&str, String)]) -> Markup {
    let mut at = x;
    let placed: Vec<(f64, &str, &String)> = items
        .iter()
        .map(|(c, label)| {
            let here = at;
            at += 22.0 + 6.2 * label.chars().count() as f64;
            (here, *c, label)
        })
        .collect();
    html! {
        @for (x, c, label) in placed {
            rect x=(x) y=(y - 9.0) width="10" height="10" fill=(c) {}
            text x=(x + 14.0) y=(y) { (label) }
        }
    }
}

fn coverage_chart(r: &Report) -> Markup {
    let none = Coverage::default();
    let g = &r.findings.get::<Coverage>().unwrap_or(&none).grid;
    let caption = format!(
        "Coverage: {} of {} entities, evenly spaced in entity order, one row each",
        g.rows.len(),
        g.of_entities
    );
    if g.rows.is_empty() || g.periods.is_empty() {
        return empty("chart-coverage", &caption, "No rows.");
    }
    let (left, top) = (30.0, 24.0);
    let cw = ((W - left - 10.0) / g.periods.len() as f64).min(32.0);
    // Large grids are scaled down to at most 320 units of height.
    let ch = (320.0 / g.rows.len() as f64).min(6.0);
    let height = top + ch * g.rows.len() as f64 + 22.0;
    let gap = if ch >= 3.0 { 1.0 } else { 0.0 };
    figure(
        "chart-coverage",
        &caption,
        height,
        html! {
            (legend(left, 12.0, &[(TEAL, "observed".into()), (ROSE, "missing inside the entity's span".into())]))
            @for (i, row) in g.rows.iter().enumerate() {
                @let first = row.present.iter().position(|p| *p);
                @let last = row.present.iter().rposition(|p| *p);
                @for (j, p) in row.present.iter().enumerate() {
                    @let inside = first.is_some_and(|a| j >= a) && last.is_some_and(|b| j <= b);
                    @if *p || inside {
                        rect x=(left + cw * j as f64) y=(top + ch * i as f64) width=(cw - 1.0) height=(ch - gap)
                            fill=(if *p { TEAL } else { ROSE }) {}
                    }
                }
            }
            (period_labels(&g.periods, left, cw, height - 6.0))
            text x="11" y=(top + ch * g.rows.len() as f64 / 2.0) text-anchor="middle"
                transform=(format!("rotate(-90 11 {:.1})", top + ch * g.rows.len() as f64 / 2.0)) { "entities" }
        },
    )
}

fn entry_exit_chart(r: &Report) -> Markup {
    let none = EntryExitFigures::default();
    let r = r.findings.get::<EntryExitFigures>().unwrap_or(&none);
    let caption = "Entrants and leavers per period (none counted at the window's edges)";
    if r.entry_exit.is_empty() {
        return empty("chart-entry-exit", caption, "No periods.");
    }
    let (left, top, h) = (52.0, 24.0, 170.0);
    let bw = ((W - left - 10.0) / r.entry_exit.len() as f64).min(48.0);
    let max = r
        .entry_exit
        .iter()
        .flat_map(|l| [l.entrants.unwrap_or(0), l.leavers.unwrap_or(0)])
        .max()
        .unwrap_or(0)
        .max(1) as f64;
    let hi = ticks(0.0, max, 4)
        .last()
        .copied()
        .filter(|t| *t >= max)
        .unwrap_or(max);
    let y = |v: u64| h * v as f64 / hi;
    let periods: Vec<i64> = r.entry_exit.iter().map(|l| l.period).collect();
    figure(
        "chart-entry-exit",
        caption,
        top + h + 22.0,
        html! {
            (legend(left, 12.0, &[(TEAL, "entrants".into()), (AMBER, "leavers".into())]))
            (y_axis(left, top, h, bw * periods.len() as f64, 0.0, hi, "entities"))
            @for (i, l) in r.entry_exit.iter().enumerate() {
                @let x = left + bw * i as f64;
                @if let Some(e) = l.entrants {
                    rect x=(x + 2.0) y=(top + h - y(e)) width=(bw / 2.0 - 2.0) height=(y(e)) fill=(TEAL) {}
                }
                @if let Some(v) = l.leavers {
                    rect x=(x + bw / 2.0) y=(top + h - y(v)) width=(bw / 2.0 - 2.0) height=(y(v)) fill=(AMBER) {}
                }
            }
            line x1=(left) y1=(top + h) x2=(left + bw * periods.len() as f64) y2=(top + h) stroke=(INK) {}
            (period_labels(&periods, left, bw, top + h + 15.0))
        },
    )
}

fn survival_chart(r: &Report) -> Markup {
    let none = EntryExitFigures::default();
    let r = r.findings.get::<EntryExitFigures>().unwrap_or(&none);
    let caption =
        "Survival of the largest entry cohorts: share still observed k periods after entry";
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
    let (left, top, w, h) = (52.0, 10.0, 330.0, 170.0);
    let kmax = cohorts.iter().map(|s| s.shares.len()).max().unwrap_or(2) - 1;
    // Scaled to the data: from the lowest share rounded down to a tenth, up to 1.
    let low = cohorts
        .iter()
        .flat_map(|s| s.shares.iter().copied())
        .fold(1.0_f64, f64::min);
    let lo = ((low * 10.0).floor() / 10.0).clamp(0.0, 0.9);
    let palette = [TEAL, AMBER, ROSE, INK, GREEN, PLUM];
    let x = |k: usize| left + w * k as f64 / kmax.max(1) as f64;
    let y = |v: f64| top + h - h * (v - lo) / (1.0 - lo);
    let kticks: Vec<usize> = ticks(0.0, kmax as f64, 6)
        .into_iter()
        .filter(|t| t.fract() == 0.0)
        .map(|t| t as usize)
        .collect();
    figure(
        "chart-survival",
        caption,
        top + h + 36.0,
        html! {
            (y_axis(left, top, h, w, lo, 1.0, "share observed"))
            line x1=(left) y1=(top + h) x2=(left + w) y2=(top + h) stroke=(INK) {}
            @for k in &kticks {
                text x=(x(*k)) y=(top + h + 14.0) text-anchor="middle" { (k) }
            }
            text x=(left + w / 2.0) y=(top + h + 30.0) text-anchor="middle" { "periods after entry (k)" }
            @for (c, s) in cohorts.iter().enumerate() {
                @let pts: Vec<String> = s.shares.iter().enumerate().map(|(k, v)| format!("{:.1},{:.1}", x(k), y(*v))).collect();
                polyline points=(pts.join(" ")) fill="none" stroke=(palette[c % palette.len()]) stroke-width="2" {}
                rect x=(left + w + 14.0) y=(top + 4.0 + 16.0 * c as f64) width="10" height="10" fill=(palette[c % palette.len()]) {}
                text x=(left + w + 28.0) y=(top + 13.0 + 16.0 * c as f64) { "entered " (s.cohort) " (" (s.entities) ")" }
            }
        },
    )
}

fn within_chart(r: &Report) -> Markup {
    let caption = "Within share of each numeric variable's variation (as read)";
    let vars: Vec<_> = r
        .findings
        .get::<VariationFigures>()
        .map_or(&[][..], |f| &f.lines)
        .iter()
        .filter(|v| v.within_share.is_some())
        .collect();
    if vars.is_empty() {
        return empty(
            "chart-within",
            caption,
            "No numeric variable with a within share.",
        );
    }
    let (left, top, w) = (170.0, 24.0, 300.0);
    let bh = (360.0 / vars.len() as f64).clamp(8.0, 14.0);
    let height = top + bh * vars.len() as f64 + 20.0;
    figure(
        "chart-within",
        caption,
        height,
        html! {
            (legend(left, 12.0, &[(TEAL, "varies within entities".into()), (ROSE, "absorbed or nearly".into())]))
            @for t in [0.0, 0.25, 0.5, 0.75, 1.0] {
                line x1=(left + w * t) y1=(top) x2=(left + w * t) y2=(height - 18.0) stroke=(MIST) {}
                text x=(left + w * t) y=(height - 6.0) text-anchor="middle" { (t) }
            }
            @for (i, v) in vars.iter().enumerate() {
                @let share = v.within_share.unwrap_or(0.0).clamp(0.0, 1.0);
                @let bad = v.nearly_absorbed
                    || v.absorbed_by.is_some_and(|a| a != crate::report::Absorbed::Period);
                text x=(left - 6.0) y=(top + bh * i as f64 + bh * 0.75) text-anchor="end" { (v.variable) }
                rect x=(left) y=(top + bh * i as f64) width=(w * share) height=(bh - 2.0) fill=(if bad { ROSE } else { TEAL }) {}
                text x=(left + w + 6.0) y=(top + bh * i as f64 + bh * 0.75) { (num(share, 3)) }
            }
        },
    )
}

fn missing_chart(r: &Report) -> Markup {
    let none = MissingFigures::default();
    let by_period = &r
        .findings
        .get::<MissingFigures>()
        .unwrap_or(&none)
        .by_period;
    let caption = "Missing share by variable and period; variables with no missing value left out";
    let mut vars: Vec<&str> = by_period.iter().map(|m| m.variable.as_str()).collect();
    vars.dedup();
    let mut periods: Vec<i64> = by_period.iter().map(|m| m.period).collect();
    periods.sort();
    periods.dedup();
    if vars.is_empty() {
        return empty("chart-missing", caption, "No missing values.");
    }
    let (left, top) = (170.0, 24.0);
    let cw = ((W - left - 10.0) / periods.len() as f64).min(32.0);
    let ch = (300.0 / vars.len() as f64).clamp(8.0, 16.0);
    let shade = |share: f64| format!("{:.3}", 0.08 + 0.92 * share);
    figure(
        "chart-missing",
        caption,
        top + ch * vars.len() as f64 + 22.0,
        html! {
            @for (k, share) in [0.0, 0.25, 0.5, 1.0].iter().enumerate() {
                rect x=(left + 95.0 * k as f64) y="3" width="10" height="10" fill=(ROSE) fill-opacity=(shade(*share)) {}
                text x=(left + 95.0 * k as f64 + 14.0) y="12" { (format!("{:.0}%", share * 100.0)) " missing" }
            }
            @for (i, v) in vars.iter().enumerate() {
                text x=(left - 6.0) y=(top + ch * i as f64 + ch * 0.75) text-anchor="end" { (v) }
            }
            @for m in by_period {
                @let i = vars.iter().position(|v| *v == m.variable).unwrap_or(0);
                @let j = periods.iter().position(|p| *p == m.period).unwrap_or(0);
                rect x=(left + cw * j as f64) y=(top + ch * i as f64) width=(cw - 1.0) height=(ch - 1.0)
                    fill=(ROSE) fill-opacity=(shade(m.share)) {}
            }
            (period_labels(&periods, left, cw, top + ch * vars.len() as f64 + 15.0))
        },
    )
}

fn treated_chart(t: &crate::report::TreatLine) -> Markup {
    let id = format!("chart-treated-{}", t.variable);
    let method = if t.method == "trim" {
        "trimming"
    } else {
        "winsorizing"
    };
    let caption = format!(
        "{} before {method}: values between the 0.5th and 99.5th percentiles (the rest in the \
         end bins){}",
        t.variable,
        if !t.groups.is_empty() {
            "; cutoffs by group, not drawn"
        } else if t.cutoffs.len() > 1 {
            "; cutoffs by period, not drawn"
        } else {
            ""
        }
    );
    let hgm = &t.histogram;
    if hgm.counts.is_empty() {
        return empty(&id, &caption, "No values.");
    }
    let (left, top, w, h) = (52.0, 24.0, 490.0, 150.0);
    let bw = w / hgm.counts.len() as f64;
    let max = hgm.counts.iter().copied().max().unwrap_or(0).max(1) as f64;
    let hi = ticks(0.0, max, 4)
        .last()
        .copied()
        .filter(|t| *t >= max)
        .unwrap_or(max);
    let span = hgm.width * hgm.counts.len() as f64;
    let at = |x: f64| left + w * ((x - hgm.start) / span).clamp(0.0, 1.0);
    let cutoff_label = format!(
        "cutoffs: {} / {} percentile",
        t.lower_percentile, t.upper_percentile
    );
    figure(
        &id,
        &caption,
        top + h + 36.0,
        html! {
            (legend(left, 12.0, &[(TEAL, "rows".into()), (AMBER, cutoff_label)]))
            (y_axis(left, top, h, w, 0.0, hi, "rows"))
            @for (i, c) in hgm.counts.iter().enumerate() {
                rect x=(left + bw * i as f64) y=(top + h - h * *c as f64 / hi) width=(bw - 1.0) height=(h * *c as f64 / hi) fill=(TEAL) {}
            }
            line x1=(left) y1=(top + h) x2=(left + w) y2=(top + h) stroke=(INK) {}
            @for x in ticks(hgm.start, hgm.start + span, 5) {
                line x1=(at(x)) y1=(top + h) x2=(at(x)) y2=(top + h + 4.0) stroke=(INK) {}
                text x=(at(x)) y=(top + h + 16.0) text-anchor="middle" { (tick_label(x)) }
            }
            text x=(left + w / 2.0) y=(top + h + 32.0) text-anchor="middle" { (t.variable) }
            @if let [c] = t.cutoffs.as_slice() {
                @for (x, anchor) in [(c.lower, "start"), (c.upper, "end")].into_iter().filter_map(|(x, a)| x.map(|x| (x, a))) {
                    line x1=(at(x)) y1=(top) x2=(at(x)) y2=(top + h) stroke=(AMBER) stroke-width="2" stroke-dasharray="4 3" {}
                    text x=(if anchor == "start" { at(x) + 4.0 } else { at(x) - 4.0 }) y=(top + 10.0) text-anchor=(anchor) style=(format!("fill:{AMBER}")) { (level(x)) }
                }
            }
        },
    )
}
