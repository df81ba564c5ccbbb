//! Human reports of an audit: Markdown, and a self-contained HTML page with SVG plots.

use std::fmt::Write;

use plotters::prelude::*;

use crate::audit::{AuditReport, SweepRow};
use crate::float_model::FloatModel;

fn opt(v: Option<f64>) -> String {
    v.map_or("–".into(), |v| format!("{v:.1}"))
}

/// The audit as Markdown.
pub fn markdown(
    fm: &FloatModel,
    r: &AuditReport,
    sweep: Option<&(Vec<SweepRow>, Option<usize>)>,
) -> String {
    let mut s = String::new();
    let verdict = if r.passed { "PASSED" } else { "FAILED" };
    let _ = writeln!(s, "# Linegate release audit: {verdict}\n");
    let _ = writeln!(s, "- model id: `{}`", r.model_id);
    let _ = writeln!(
        s,
        "- trainer: {} (seed {}), training log `{}`",
        fm.provenance.trainer,
        fm.provenance.seed,
        fm.provenance.training_log.path.display()
    );
    let _ = writeln!(
        s,
        "- format: inputs Q{} ({}-bit), weights {}-bit with {} fractional bits, accumulator {} bits (worst case needs {}, headroom {} bits)",
        r.input_bits - 1,
        r.input_bits,
        r.weight_bits,
        r.weight_frac_bits,
        r.acc_bits,
        r.needed_bits,
        r.headroom_bits
    );
    let _ = writeln!(
        s,
        "- thresholds: NO-GO at score ≤ {}, GO at score ≥ {}; blob {} bytes",
        r.nogo_max, r.go_min, r.blob_bytes
    );
    if !r.reasons.is_empty() {
        let _ = writeln!(s, "\n## Why it failed\n");
        for x in &r.reasons {
            let _ = writeln!(s, "- {x}");
        }
    }
    let _ = writeln!(
        s,
        "\n## Decisions\n\n| log | units | float correct | fixed correct | flips | faults | RECHECK | min fixed margin (LSB) | within bound |\n|---|---|---|---|---|---|---|---|---|"
    );
    for t in &r.sets {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {} | {} | {} |",
            t.name,
            t.units,
            t.float_correct,
            t.fixed_correct,
            t.flips,
            t.faults,
            t.recheck,
            opt(t.min_margin_lsb),
            t.within_bound
        );
    }
    let _ = writeln!(
        s,
        "\n## Margin and the rounding bound (LSB of the accumulator)\n"
    );
    let _ = writeln!(
        s,
        "| float margin | plain rounding | after search ({} moves) | bound | guaranteed |\n|---|---|---|---|---|",
        r.search_moves
    );
    let _ = writeln!(
        s,
        "| {} | {} | {} | {:.1} | {} |",
        opt(r.float_min_margin_lsb),
        opt(r.plain_min_margin_lsb),
        opt(r.optimised_min_margin_lsb),
        r.bound.total,
        if r.guaranteed { "yes" } else { "no" }
    );
    let _ = writeln!(
        s,
        "\nBound = ½·Σ|Wᵢ| (inputs: {:.1}) + Σ|Wᵢ−Wᵢ*|·Xmaxᵢ (weights: {:.1}) + |B−b·A| (bias: {:.2}); textbook form Σ|Wᵢ*|εx + ΣXmaxᵢ·εw + n·εx·εw + εb = {:.1}.",
        r.bound.inputs, r.bound.weights, r.bound.bias, r.bound.textbook
    );
    let _ = writeln!(
        s,
        "\n## Channels\n\n| channel | unit | weight | smallest margin along this channel |\n|---|---|---|---|"
    );
    for ((name, m, unit), w) in r.channel_margin.iter().zip(&r.weights) {
        let _ = writeln!(s, "| {name} | {unit} | {w} | {m:.4} {unit} |");
    }
    if let Some(t) = &r.tolerance {
        let _ = writeln!(
            s,
            "\n## Sensor tolerance\n\nDeclared noise moves the score by at most {:.1} LSB. Units that could change verdict: {}. Suggested RECHECK half-band: {:.6} (float score units).\n",
            t.noise_radius_lsb,
            t.units_at_risk.len(),
            t.suggested_band
        );
        let _ = writeln!(
            s,
            "| channel | noise | largest drift before any unit flips |\n|---|---|---|"
        );
        for c in &t.channels {
            let _ = writeln!(
                s,
                "| {} | {} {} | {:.4} {} |",
                c.channel, c.noise, c.unit, c.max_drift, c.unit
            );
        }
        for u in t.units_at_risk.iter().take(20) {
            let _ = writeln!(s, "- at risk: {u}");
        }
    }
    if !r.flips.is_empty() {
        let _ = writeln!(
            s,
            "\n## Flipped decisions\n\n| log | unit | line | label | float | fixed | margin (LSB) |\n|---|---|---|---|---|---|---|"
        );
        for u in &r.flips {
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {} | {} | {:.1} |",
                u.set, u.unit, u.line, u.label, u.float_verdict, u.fixed_verdict, u.margin_lsb
            );
        }
    }
    let _ = writeln!(
        s,
        "\n## Units closest to the boundary\n\n| log | unit | line | label | fixed verdict | score | margin (LSB) |\n|---|---|---|---|---|---|---|"
    );
    for u in &r.tightest {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {:.1} |",
            u.set,
            u.unit,
            u.line,
            u.label,
            u.fixed_verdict,
            u.fixed_score.map_or("–".into(), |v| v.to_string()),
            u.margin_lsb
        );
    }
    if let Some((rows, best)) = sweep {
        let _ = writeln!(
            s,
            "\n## Word-length sweep\n\n| weights | inputs | acc | min margin (LSB) | margin / bound | flips | guaranteed | passed | blob bytes | MAC cost |\n|---|---|---|---|---|---|---|---|---|---|"
        );
        for (i, w) in rows.iter().enumerate() {
            let mark = if Some(i) == *best {
                " **(recommended)**"
            } else {
                ""
            };
            let _ = writeln!(
                s,
                "| {}-bit{mark} | {}-bit | {} | {} | {} | {} | {} | {} | {} | {} |",
                w.weight_bits,
                w.input_bits,
                w.acc_bits,
                opt(w.min_margin_lsb),
                w.margin_over_bound
                    .map_or("–".into(), |v| format!("{v:.2}")),
                w.flips,
                if w.guaranteed { "yes" } else { "no" },
                if w.passed { "yes" } else { "no" },
                w.blob_bytes,
                w.mac_cost
            );
        }
    }
    let _ = writeln!(
        s,
        "\n*A go/no-go classifier is not by itself a safety function. This audit shows that rounding does not change the validated decisions; it does not validate the decisions.*"
    );
    s
}

/// Histogram of float and fixed margins (as fractions of the largest), as SVG.
pub fn margin_svg(r: &AuditReport) -> String {
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (640, 320)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let scale = r
            .float_margins
            .iter()
            .chain(&r.fixed_margins)
            .fold(1.0f64, |m, v| m.max(v.abs()));
        let bins = 40usize;
        // Show [-1, 1] only when some unit is on the wrong side; otherwise [0, 1].
        let lo = if r
            .float_margins
            .iter()
            .chain(&r.fixed_margins)
            .any(|v| *v < 0.0)
        {
            -1.0
        } else {
            0.0
        };
        let w = (1.0 - lo) / bins as f64;
        let bin = |v: f64| (((v / scale - lo) / w).max(0.0) as usize).min(bins - 1);
        let mut hf = vec![0u32; bins];
        let mut hq = vec![0u32; bins];
        r.float_margins.iter().for_each(|v| hf[bin(*v)] += 1);
        r.fixed_margins.iter().for_each(|v| hq[bin(*v)] += 1);
        let top = hf.iter().chain(&hq).copied().max().unwrap_or(1).max(1);
        if let Ok(mut chart) = ChartBuilder::on(&root)
            .caption(
                "Margins of audited units (float vs fixed, scaled to the largest)",
                ("sans-serif", 16),
            )
            .margin(10)
            .x_label_area_size(30)
            .y_label_area_size(40)
            .build_cartesian_2d(lo..1.0f64, 0u32..top + 1)
        {
            let _ = chart
                .configure_mesh()
                .x_desc("margin / largest margin")
                .y_desc("units")
                .draw();
            let _ = chart.draw_series(hf.iter().enumerate().map(|(i, &c)| {
                let x0 = lo + i as f64 * w;
                Rectangle::new([(x0, 0), (x0 + w * 0.5, c)], BLUE.mix(0.6).filled())
            }));
            let _ = chart.draw_series(hq.iter().enumerate().map(|(i, &c)| {
                let x0 = lo + i as f64 * w + w * 0.5;
                Rectangle::new([(x0, 0), (x0 + w * 0.5, c)], RED.mix(0.6).filled())
            }));
        }
        let _ = root.present();
    }
    out
}

/// Horizontal bars, one per channel, as SVG.
pub fn bars_svg(title: &str, labels: &[String], values: &[f64]) -> String {
    let mut out = String::new();
    {
        let h = 60 + 28 * labels.len() as u32;
        let root = SVGBackend::with_string(&mut out, (640, h)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let max = values
            .iter()
            .filter(|v| v.is_finite())
            .fold(1e-12f64, |m, v| m.max(v.abs()));
        let min = values
            .iter()
            .filter(|v| v.is_finite())
            .fold(0.0f64, |m, v| m.min(*v));
        let n = labels.len() as i32;
        if let Ok(mut chart) = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 16))
            .margin(10)
            .x_label_area_size(30)
            .y_label_area_size(150)
            .build_cartesian_2d(min * 1.1..max * 1.1, (0..n).into_segmented())
        {
            let names = labels.to_vec();
            let _ = chart
                .configure_mesh()
                .y_label_formatter(&|v| match v {
                    SegmentValue::CenterOf(i) => {
                        names.get(*i as usize).cloned().unwrap_or_default()
                    }
                    _ => String::new(),
                })
                .draw();
            let _ = chart.draw_series(values.iter().enumerate().map(|(i, v)| {
                let v = if v.is_finite() { *v } else { max };
                Rectangle::new(
                    [
                        (0.0, SegmentValue::Exact(i as i32)),
                        (v, SegmentValue::Exact(i as i32 + 1)),
                    ],
                    GREEN.mix(0.7).filled(),
                )
            }));
        }
        let _ = root.present();
    }
    out
}

/// A self-contained HTML page: the Markdown text in a `<pre>`, then the plots.
pub fn html(fm: &FloatModel, r: &AuditReport, md: &str) -> String {
    let esc = |s: &str| {
        s.replace('&', "&amp;")
            .replace('<', "&lt;")
            .replace('>', "&gt;")
    };
    let names: Vec<String> = fm.channels.iter().map(|c| c.name.clone()).collect();
    let weights: Vec<f64> = r.weights.iter().map(|w| f64::from(*w)).collect();
    let mut page = String::from(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>Linegate audit</title>\n<style>body{font-family:sans-serif;max-width:60em;margin:2em auto}pre{white-space:pre-wrap;background:#f6f6f6;padding:1em}</style></head><body>\n",
    );
    let _ = writeln!(
        page,
        "<h1>Linegate release audit: {}</h1>",
        if r.passed { "PASSED" } else { "FAILED" }
    );
    let _ = writeln!(
        page,
        "<h2>Margins</h2><p>Blue: float model; red: fixed-point model, by the device kernel.</p>{}",
        margin_svg(r)
    );
    let _ = writeln!(
        page,
        "<h2>Weights</h2>{}",
        bars_svg("Integer weight per channel", &names, &weights)
    );
    if let Some(t) = &r.tolerance {
        let v: Vec<f64> = t
            .channels
            .iter()
            .map(|c| {
                if c.noise > 0.0 {
                    c.max_drift / c.noise
                } else {
                    0.0
                }
            })
            .collect();
        let _ = writeln!(
            page,
            "<h2>Tolerance</h2>{}",
            bars_svg("Largest safe drift ÷ declared noise", &names, &v)
        );
    }
    let _ = writeln!(
        page,
        "<h2>Report</h2><pre>{}</pre>\n</body></html>",
        esc(md)
    );
    page
}
