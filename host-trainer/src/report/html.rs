//! The audit as one self-contained HTML page: the verdict, the charts, then the report
//! rendered from its Markdown (tables as tables, by pulldown-cmark), printable.

use std::fmt::Write;

use super::document::{Document, Part};
use super::svg::{bars_svg, margin_bins_svg, rounding_svg, sweep_svg, trade_off_svg};
use crate::release::audit_report::AuditReport;
use crate::release::sweep::SweepRow;
use crate::train::float_model::FloatModel;

/// Page style: our own (slate text, one accent), tables ruled for print and never split
/// across a page, readable in black and white.
pub(super) const STYLE: &str = "body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;color:#1f2933;max-width:62em;margin:2em auto;padding:0 1em;line-height:1.45}\
h1{border-bottom:3px solid #0b6e4f;padding-bottom:.2em}h2{color:#0b6e4f;margin-top:1.6em}\
table{border-collapse:collapse;margin:.6em 0;font-size:.92em;font-variant-numeric:tabular-nums}\
th,td{border:1px solid #9aa5b1;padding:.25em .55em;text-align:left}th{background:#e4e7eb}\
tr,table,svg{page-break-inside:avoid;break-inside:avoid}code{font-size:.95em}\
.verdict{border:5px solid;padding:.7em 1em;margin:1em 0 1.5em;font-size:1.1em}\
.verdict .mark{display:block;font-weight:700;font-size:1.6em;letter-spacing:.02em}\
.verdict.failed{border-color:#b00020;color:#6b0013;border-style:double;border-width:9px;\
background:repeating-linear-gradient(135deg,#fde3e6 0 14px,#fff 14px 28px)}\
.verdict.passed{border-color:#0b6e4f;background:#e3f2ec}body.failed h1{border-bottom-color:#b00020}\
@media print{body{max-width:none;margin:0}h2{page-break-after:avoid}\
.verdict{-webkit-print-color-adjust:exact;print-color-adjust:exact}}";

/// The verdict as a reviewer must see it before anything else: a failed audit in a red,
/// hatched, double-ruled box naming the failed gates (it reads as failed in black and white
/// too), a passed one in a plain green box.
fn verdict_banner(r: &AuditReport) -> String {
    let units: usize = r.sets.iter().map(|t| t.units).sum();
    if r.passed {
        format!(
            "<div class=\"verdict passed\" role=\"status\"><span class=\"mark\">&#10003; PASSED</span>all {} gates held on {} log(s), {units} units.</div>",
            r.gates.len(),
            r.sets.len()
        )
    } else {
        let failed = r.gates.iter().filter(|g| !g.passed).count();
        let mut reasons = String::new();
        for x in &r.reasons {
            let _ = write!(reasons, "<li>{}</li>", escape(x));
        }
        format!(
            "<div class=\"verdict failed\" role=\"alert\"><span class=\"mark\">&#10007; FAILED: do not release</span>{failed} of {} gates failed on {} log(s), {units} units:<ul>{reasons}</ul></div>",
            r.gates.len(),
            r.sets.len()
        )
    }
}

/// Text for HTML: the five characters that could start markup or end an attribute.
pub(super) fn escape(t: &str) -> String {
    t.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
        .replace('\'', "&#39;")
}

/// The Markdown report as HTML: tables become tables. Any HTML inside the text (a unit id
/// from a log may hold some) is shown as text, never interpreted.
pub(super) fn render_markdown(md: &str) -> String {
    use pulldown_cmark::{Event, Options, Parser};
    let events = Parser::new_ext(md, Options::ENABLE_TABLES).map(|e| match e {
        Event::Html(t) | Event::InlineHtml(t) => Event::Text(t),
        e => e,
    });
    let mut out = String::new();
    pulldown_cmark::html::push_html(&mut out, events);
    out
}

/// A self-contained HTML page: the verdict, then the report's sections (`doc`, from
/// [`document`](super::document())) in its order, each chart at the end of the section it
/// illustrates (margins with the margin and bound, weights with the channels, tolerance with
/// the sensor tolerance, the trade-off with the operating point, the sweep with the sweep).
pub fn html(
    fm: &FloatModel,
    r: &AuditReport,
    sweep: Option<&(Vec<SweepRow>, Option<usize>)>,
    doc: &Document,
) -> String {
    let names: Vec<String> = fm.channels.iter().map(|c| c.name.clone()).collect();
    let weights: Vec<f64> = r.weights.iter().map(|w| f64::from(*w)).collect();
    let verdict = if r.passed { "PASSED" } else { "FAILED" };
    let mut page = format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>Linegate audit: {verdict}</title>\n<style>{STYLE}</style></head><body class=\"{}\">\n",
        verdict.to_ascii_lowercase()
    );
    let _ = writeln!(page, "<h1>Linegate release audit: {verdict}</h1>");
    page.push_str(&verdict_banner(r));
    page.push('\n');
    let margins = format!(
        "<p>Every decided unit of every log, by its fixed margin from the device kernel (plus the RECHECK band, if any: the distance the rounding bound is compared with). Only a unit left of the red line, within the bound, could have had its decision changed by rounding.</p>{}\n<p>Float against fixed, unit by unit: every scored unit of every log by how far rounding moved its score (fixed score minus A times the float score). The bound says no unit lies outside the red lines at ±B.</p>{}",
        margin_bins_svg(r),
        rounding_svg(r)
    );
    let sweep_chart = sweep.map(|(rows, best)| {
        format!(
            "<p>Each format tried (named weight bits/input bits), by its smallest margin over its rounding bound and its blob's size: above the black line at 1 rounding cannot change a decision. Filled dots passed the gates, crosses failed; the recommended format is ringed.</p>{}",
            sweep_svg(rows, *best)
        )
    });
    let trade_chart = r.operating_point.as_ref().map(|op| {
        format!(
            "<p>The trade-off above as a chart: each point is the best threshold and band at one RECHECK cap, by the share of held-out units it sends to RECHECK (x) and its false-GO and false-NO-GO rates (y). The model's operating point is ringed.</p>{}",
            trade_off_svg(op)
        )
    });
    let weights_chart = bars_svg("Integer weight per channel", &names, &weights, None);
    let tolerance = r.tolerance.as_ref().and_then(|t| {
        // Only channels with declared noise have a ratio to show.
        let (names, ratios): (Vec<String>, Vec<f64>) = t
            .channels
            .iter()
            .zip(&names)
            .filter(|(c, _)| c.noise > 0.0)
            .map(|(c, n)| (n.clone(), c.max_drift / c.noise))
            .unzip();
        (!names.is_empty()).then(|| format!(
            "<p>Largest drift each channel may take alone before a decision can change, over its declared noise: at 1 or more the declared noise cannot change a decision.</p>{}",
            bars_svg("Drift allowed ÷ declared noise", &names, &ratios, Some(1.0))
        ))
    });
    // The report's own title repeats the page's.
    for section in doc.sections.iter().filter(|s| s.part != Part::Title) {
        page.push_str(&render_markdown(&section.text));
        let chart = match section.part {
            Part::Margins => Some(&margins),
            Part::Channels => Some(&weights_chart),
            Part::Tolerance => tolerance.as_ref(),
            Part::OperatingPoint => trade_chart.as_ref(),
            Part::Sweep => sweep_chart.as_ref(),
            _ => None,
        };
        page.push_str(chart.map_or("", String::as_str));
    }
    // A report without those sections still shows every chart.
    let placed_margins = doc.section(Part::Margins).is_some();
    let placed_weights = doc.section(Part::Channels).is_some();
    if !placed_margins {
        let _ = writeln!(page, "<h2>Margins</h2>{margins}");
    }
    if !placed_weights {
        let _ = writeln!(page, "<h2>Weights</h2>{weights_chart}");
    }
    page.push_str("\n</body></html>\n");
    page
}
