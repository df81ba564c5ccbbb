//! The audit of a model of several classes as a document: the verdict, the model and its
//! rows, each log's confusion matrix with exact bounds, every gate, the rounding proof per
//! pair of rows with the class margins chart, the tightest units; as audit.md, audit.html
//! and audit.json.

use std::fmt::Write;

use super::document::{Document, Part};
use super::html::{STYLE, escape, render_markdown};
use super::numbers::{cell, lsb};
use super::svg::{Binned, bin_names, binned_svg};
use crate::confidence::percent;
use crate::release::bound::MARGIN_BINS;
use crate::release::class_audit::{ClassAudit, ClassUnit};

/// The class audit as its sections.
pub fn class_document(r: &ClassAudit) -> Document {
    let mut d = Document::default();
    let mut s = String::new();
    let verdict = if r.passed { "PASSED" } else { "FAILED" };
    let k = r.classes.len();
    d.open(Part::Title, &mut s);
    let _ = writeln!(s, "# Linegate release audit (classes): {verdict}\n");
    d.open(Part::Verdict, &mut s);
    let _ = writeln!(s, "## Verdict\n");
    let units: usize = r.logs.iter().map(|l| l.units).sum();
    if r.passed {
        let _ = writeln!(
            s,
            "**PASSED**: all {} gates held on {} log(s), {units} units.",
            r.gates.len(),
            r.logs.len()
        );
    } else {
        let failed = r.gates.iter().filter(|g| !g.passed).count();
        let _ = writeln!(
            s,
            "**FAILED**: {failed} of {} gates failed on {} log(s), {units} units. Why:\n",
            r.gates.len(),
            r.logs.len()
        );
        for x in &r.reasons {
            let _ = writeln!(s, "- {}", cell(x));
        }
    }
    d.open(Part::Provenance, &mut s);
    let _ = writeln!(s, "\n## Model\n");
    let class_list: Vec<String> = r
        .classes
        .iter()
        .enumerate()
        .map(|(i, c)| {
            if Some(i) == r.go {
                format!("{c} (GO)")
            } else {
                c.clone()
            }
        })
        .collect();
    let _ = writeln!(s, "| | |\n|---|---|");
    let _ = writeln!(s, "| model id | `{}` |", r.model_id);
    if !r.blob_sha256.is_empty() {
        let _ = writeln!(
            s,
            "| blob SHA-256 | `{}` ({} bytes) |",
            r.blob_sha256, r.blob_bytes
        );
    }
    let _ = writeln!(s, "| classes | {} |", cell(&class_list.join(", ")));
    let _ = writeln!(
        s,
        "| format | {}-bit inputs, {}-bit weights (Q{}), {}-bit accumulator |",
        r.input_bits, r.weight_bits, r.weight_frac_bits, r.acc_bits
    );
    let _ = writeln!(
        s,
        "| overflow | the largest difference of two rows' scores needs {} bits of {} ({} to spare): proved for every in-range reading |",
        r.needed_bits, r.acc_bits, r.headroom_bits
    );
    let _ = writeln!(
        s,
        "| scale A | {} accumulator LSB per score unit |",
        lsb(r.scale)
    );
    if r.go.is_some() {
        let _ = writeln!(
            s,
            "| GO gap | {} LSB (A × float gap = {}) |",
            r.go_gap.0,
            lsb(r.go_gap.1)
        );
    }
    let _ = writeln!(
        s,
        "| class gap | {} LSB (A × float gap = {}) |",
        r.class_gap.0,
        lsb(r.class_gap.1)
    );
    let _ = writeln!(s, "| field baseline | none: {} |", r.baseline_note);
    for n in &r.notes {
        let _ = writeln!(s, "| not covered | {} |", cell(n));
    }
    d.open(Part::Decisions, &mut s);
    let _ = writeln!(s, "\n## Decisions\n");
    let _ = writeln!(
        s,
        "Each log's units by true class (rows) and the device's decision (columns): count, share of the row, and its exact two-sided Clopper–Pearson interval at {} % confidence.\n",
        r.confidence * 100.0
    );
    for l in &r.logs {
        let _ = writeln!(
            s,
            "### {} ({} units{})\n",
            cell(&l.name),
            l.units,
            if l.unlabelled > 0 {
                format!(", {} without a class of the model", l.unlabelled)
            } else {
                String::new()
            }
        );
        let _ = write!(s, "| true \\ decided |");
        for c in &r.classes {
            let _ = write!(s, " {} |", cell(c));
        }
        let _ = writeln!(s, " RECHECK | FAULT |");
        let _ = writeln!(s, "|---|{}", "---|".repeat(k + 2));
        for (t, row) in l.row_rates.iter().enumerate() {
            let _ = write!(s, "| {} ({}) |", cell(&r.classes[t]), l.class_units[t]);
            for (c, rate) in row.iter().enumerate() {
                let mark = if c == t { "**" } else { "" };
                let _ = write!(
                    s,
                    " {mark}{}{mark} ({} %; {}–{} %) |",
                    rate.count,
                    percent(rate.rate),
                    percent(rate.low),
                    percent(rate.high)
                );
            }
            let _ = writeln!(s);
        }
        let _ = writeln!(s);
    }
    let _ = writeln!(
        s,
        "### Gates\n\n| gate | log | value | limit | result |\n|---|---|---|---|---|"
    );
    for g in &r.gates {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} |",
            g.gate,
            cell(&g.log),
            cell(&g.value),
            g.limit,
            if g.passed { "pass" } else { "**FAIL**" }
        );
    }
    d.open(Part::Margins, &mut s);
    let _ = writeln!(s, "\n## Rounding proof\n");
    let scored: usize = r.logs.iter().map(|l| l.proved + l.unproved).sum();
    let proved: usize = r.logs.iter().map(|l| l.proved).sum();
    let flips: usize = r.logs.iter().map(|l| l.flips).sum();
    let _ = writeln!(
        s,
        "Flips (device decision ≠ float decision, class or verdict): **{flips}**. Proved: **{proved} of {scored}** scored units (rounding cannot change their decision).\n"
    );
    let _ = writeln!(
        s,
        "| log | units | proved | not proved | flips | FAULT | smallest margin (× pair bound) |\n|---|---|---|---|---|---|---|"
    );
    for l in &r.logs {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {} |",
            cell(&l.name),
            l.units,
            l.proved,
            l.unproved,
            l.flips,
            l.faults,
            l.min_multiple.map_or("-".into(), |m| format!("{m:.2}"))
        );
    }
    let _ = writeln!(
        s,
        "\nRounding bound of each pair's score difference (row − column), in accumulator LSB:\n"
    );
    let _ = write!(s, "| |");
    for c in &r.classes {
        let _ = write!(s, " {} |", cell(c));
    }
    let _ = writeln!(s, "\n|---|{}", "---|".repeat(k));
    for (a, row) in r.pair_bounds.bounds.iter().enumerate() {
        let _ = write!(s, "| {} |", cell(&r.classes[a]));
        for (b, v) in row.iter().enumerate() {
            let _ = write!(s, " {} |", if a == b { "-".into() } else { lsb(*v) });
        }
        let _ = writeln!(s);
    }
    d.open(Part::Channels, &mut s);
    let _ = writeln!(s, "\n## Class rows\n");
    let _ = write!(s, "| class | bias |");
    for c in &r.channels {
        let _ = write!(s, " {} |", cell(c));
    }
    let _ = writeln!(s, "\n|---|---|{}", "---|".repeat(r.channels.len()));
    for row in &r.rows {
        let _ = write!(s, "| {} | {} |", cell(&row.name), row.bias);
        for w in &row.weights {
            let _ = write!(s, " {w} |");
        }
        let _ = writeln!(s);
    }
    d.open(Part::Tightest, &mut s);
    let _ = writeln!(s, "\n## Units closest to a decision edge\n");
    unit_table(&mut s, &r.tightest);
    if !r.flips.is_empty() {
        let _ = writeln!(s, "\nFlipped units:\n");
        unit_table(&mut s, &r.flips);
    }
    d.open(Part::Method, &mut s);
    let _ = writeln!(s, "\n## Method\n");
    let _ = writeln!(
        s,
        "Every unit of every log goes through the device kernel: each class row's exact integer score, then the rule (leader = highest score; decided when its lead over the runner-up reaches its gap, else RECHECK). The float rule decides the same unit from the float rows. For the float leader L and every other class k, the device's score difference differs from A times the float difference by at most the pair's rounding bound (the two-sided bound of the difference row: half an LSB of input rounding per weight, the weights' and bias's rounding). A unit is proved when every such difference stays on its side of 0 and of L's gap by more than that bound; a flip is a unit whose decided class or verdict differs. FAULT units (a reading out of range) are decisions of their own and are not scored."
    );
    d.close(&mut s);
    d
}

fn unit_table(s: &mut String, units: &[ClassUnit]) {
    let _ = writeln!(
        s,
        "| log | line | unit | class | float | device | device class | device lead | margin (× bound) | proved |\n|---|---|---|---|---|---|---|---|---|---|"
    );
    for u in units {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |",
            cell(&u.set),
            u.line,
            cell(&u.unit),
            cell(&u.class),
            cell(&u.float),
            u.device,
            cell(&u.device_class),
            u.device_lead.map_or("-".into(), |v| v.to_string()),
            u.margin_multiple.map_or("-".into(), |m| format!("{m:.2}")),
            if u.proved { "yes" } else { "no" }
        );
    }
}

/// The class margins chart: every scored unit of every log by its smallest distance to a
/// decision edge in multiples of its pair's rounding bound, one series per true class;
/// left of the red line rounding could have changed the decision.
pub fn class_margins_svg(r: &ClassAudit) -> String {
    let series: Vec<(String, Vec<u64>)> = r
        .classes
        .iter()
        .enumerate()
        .map(|(t, name)| {
            let mut counts = vec![0u64; MARGIN_BINS];
            for l in &r.logs {
                if let Some(h) = l.margin_histogram.get(t) {
                    counts.iter_mut().zip(h).for_each(|(a, b)| *a += b);
                }
            }
            let n: u64 = counts.iter().sum();
            (format!("{name} ({n} units)"), counts)
        })
        .collect();
    let shown = series
        .iter()
        .filter_map(|s| s.1.iter().rposition(|&c| c > 0))
        .max()
        .map_or(4, |k| (k + 1).clamp(4, MARGIN_BINS));
    binned_svg(&Binned {
        caption: "Smallest margin of every scored unit to a decision edge, per true class".into(),
        x_desc: "margin in multiples of its pair's rounding bound B (left of the red line: within B)",
        labels: bin_names()
            .into_iter()
            .take(shown)
            .enumerate()
            .map(|(i, n)| (i as f64 + 0.08, n))
            .collect(),
        series,
        shaded: None,
        shown,
        marks: vec![(2.0, "B")],
        counted: vec![0, 1],
    })
}

/// audit.html of a class audit: the verdict, then each section, the chart with the proof.
pub fn class_html(r: &ClassAudit, doc: &Document) -> String {
    let verdict = if r.passed { "PASSED" } else { "FAILED" };
    let mut page = format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>Linegate audit: {verdict}</title>\n<style>{STYLE}</style></head><body class=\"{}\">\n",
        verdict.to_ascii_lowercase()
    );
    let _ = writeln!(page, "<h1>Linegate release audit (classes): {verdict}</h1>");
    if r.passed {
        let _ = writeln!(
            page,
            "<div class=\"verdict passed\" role=\"status\"><span class=\"mark\">&#10003; PASSED</span>all {} gates held.</div>",
            r.gates.len()
        );
    } else {
        let mut reasons = String::new();
        for x in &r.reasons {
            let _ = write!(reasons, "<li>{}</li>", escape(x));
        }
        let _ = writeln!(
            page,
            "<div class=\"verdict failed\" role=\"alert\"><span class=\"mark\">&#10007; FAILED: do not release</span><ul>{reasons}</ul></div>"
        );
    }
    for section in doc.sections.iter().filter(|s| s.part != Part::Title) {
        page.push_str(&render_markdown(&section.text));
        if section.part == Part::Margins {
            page.push_str(&class_margins_svg(r));
        }
    }
    page.push_str("\n</body></html>\n");
    page
}

/// audit.json of a class audit: every field, pretty, with a final line feed.
pub fn class_json(r: &ClassAudit) -> String {
    serde_json::to_string_pretty(r).unwrap_or_default() + "\n"
}
