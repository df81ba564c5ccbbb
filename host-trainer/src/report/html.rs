//! The audit as one self-contained HTML page: the charts, then the Markdown text.

use std::fmt::Write;

use super::svg::{bars_svg, margin_svg};
use crate::release::audit::AuditReport;
use crate::train::float_model::FloatModel;

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
