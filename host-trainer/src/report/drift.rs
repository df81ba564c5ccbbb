//! The drift test as a document: `drift.md` (its verdict, the baseline, each part's table and
//! rule), the CUSUM chart as SVG (plotters, in the audit charts' style), and `drift.html`
//! (the Markdown rendered, the chart inline).

use std::fmt::Write as _;

use plotters::prelude::*;

use super::html::{STYLE, escape, render_markdown};
use crate::confidence::percent;
use crate::field::drift::{CusumSide, DriftReport, RateShift, Source};

/// Colours of the GO and NO-GO sides (the audit charts' green and blue).
const GO: RGBColor = RGBColor(11, 110, 79);
const NOGO: RGBColor = RGBColor(52, 88, 140);
const LIMIT: RGBColor = RGBColor(176, 0, 32);

/// Markdown text from a file (channel names) shown as text, never as markup.
fn md(t: &str) -> String {
    t.replace('|', "\\|").replace('<', "&lt;")
}

fn opt(v: Option<f64>, digits: usize) -> String {
    v.map_or("–".into(), |v| format!("{v:.digits$}"))
}

fn rate_row(name: &str, r: &RateShift) -> String {
    format!(
        "| {name} | {} of {} = {} [{}, {}] | {} of {} = {} [{}, {}] | {:.3e} | {} |\n",
        r.field.count,
        r.field.of,
        percent(r.field.rate),
        percent(r.field.low),
        percent(r.field.high),
        r.baseline.count,
        r.baseline.of,
        percent(r.baseline.rate),
        percent(r.baseline.low),
        percent(r.baseline.high),
        r.p,
        if r.alarm { "**ALARM**" } else { "–" }
    )
}

fn cusum_row(name: &str, c: &CusumSide) -> String {
    let unit = |u: u32| {
        if u == 0 {
            "–".to_string()
        } else {
            u.to_string()
        }
    };
    let limit = if c.limit == i64::MAX {
        "none".to_string()
    } else {
        c.limit.to_string()
    };
    format!(
        "| {name} | {} | {} | {limit} | {} | {} | {} | {} | {} |\n",
        c.target,
        c.slack,
        c.down,
        unit(c.alarm_down),
        c.up,
        unit(c.alarm_up),
        if c.alarm { "**ALARM**" } else { "–" }
    )
}

/// `drift.md`; `chart`: the chart's file name beside it, if one is written.
pub fn drift_markdown(r: &DriftReport, chart: Option<&str>) -> String {
    let mut s = String::new();
    let verdict = if r.in_control() {
        "IN CONTROL"
    } else {
        "ALARM"
    };
    let _ = writeln!(s, "# Linegate drift test: {verdict}\n");
    let source = match r.source {
        Source::Log => "a field log replayed through the blob's kernel",
        Source::Lines => "the device's score lines",
        Source::Record => "the device's field record",
    };
    let _ = writeln!(
        s,
        "Field: {} ({source}), {} units: {} GO, {} NO-GO, {} RECHECK, {} FAULT.\n\nBaseline: the audit's log `{}` ({}). Family-wise level α = {}: each of the four p-value tests (channels, scores, RECHECK rate, FAULT rate) runs at α/4 = {} (Bonferroni), so an in-control field alarms through them with probability at most α; the CUSUMs have their own limits.\n",
        r.files.iter().map(|f| md(f)).collect::<Vec<_>>().join(", "),
        r.units,
        r.go,
        r.nogo,
        r.recheck,
        r.faults,
        md(&r.baseline_log),
        md(&r.baseline_rule),
        r.alpha,
        r.test_alpha
    );
    if r.alarms.is_empty() {
        let _ = writeln!(s, "No alarm.\n");
    } else {
        let _ = writeln!(s, "Alarms:\n");
        for a in &r.alarms {
            let _ = writeln!(s, "- {}", md(a));
        }
        s.push('\n');
    }
    for n in &r.notes {
        let _ = writeln!(s, "Note: {}\n", md(n));
    }
    let _ = writeln!(s, "## Channels\n");
    let _ = writeln!(
        s,
        "Each channel's mean over the scored units (the values the weights multiply, in physical units) and its shift Δ from the baseline, in units of the declared noise. The shown shift is |Δ| less z = {:.3} standard errors (Welch; the normal quantile 1 − α/2c, Bonferroni over the c channels with a budget), floored at 0: the least shift the field shows. Rule: alarm when the shown shift exceeds the drift the audit allows the channel alone (the margin budget); \"shown ÷ budget\" above 1 alarms.\n",
        r.channel_z
    );
    if r.channels.is_empty() {
        let _ = writeln!(s, "No channel values in this field.\n");
    } else {
        let _ = writeln!(
            s,
            "| channel | baseline mean | field mean | shift | standard error | shift ÷ noise | shown shift | budget | shown ÷ budget | |\n|---|---|---|---|---|---|---|---|---|---|"
        );
        for c in &r.channels {
            let _ = writeln!(
                s,
                "| {} ({}) | {:.4} | {:.4} | {:+.4} | {:.4} | {} | {:.4} | {} | {} | {} |",
                md(&c.channel),
                md(&c.unit),
                c.baseline_mean,
                c.field_mean,
                c.shift,
                c.standard_error,
                opt(c.in_noise, 2),
                c.shown_shift,
                if c.zero_budget {
                    "zero".into()
                } else {
                    opt(c.budget, 4)
                },
                if c.zero_budget {
                    "– (zero budget)".into()
                } else {
                    opt(c.of_budget, 2)
                },
                if c.alarm { "**ALARM**" } else { "–" }
            );
        }
        s.push('\n');
    }
    let _ = writeln!(s, "## Score distribution\n");
    let _ = writeln!(
        s,
        "Two-sample Kolmogorov–Smirnov test (Smirnov, 1939) of every scored unit's score (GO, NO-GO and RECHECK) against the baseline's: D = {:.4}{}, n = {} baseline and m = {} field scores, effective n = nm/(n + m) = {:.1}, asymptotic p = Q(D·√n_e) = {:.3e} (Kolmogorov's limiting distribution). Rule: alarm at p < α/4. {}\n",
        r.ks.d,
        if r.ks.binned {
            " (over bin edges: a lower bound of the D of the log the record counted)"
        } else {
            ""
        },
        r.ks.n,
        r.ks.m,
        r.ks.effective_n,
        r.ks.p,
        if r.ks_alarm { "**ALARM**" } else { "No alarm." }
    );
    let _ = writeln!(s, "## RECHECK and FAULT rates\n");
    let _ = writeln!(
        s,
        "Among all units, with exact Clopper–Pearson intervals at {:.0} %. Rule: alarm when Fisher's exact test (Fisher, 1935; one-sided, the field's rate greater than the baseline's: the upper tail of the hypergeometric distribution of the field's count given both totals) gives p < α/4.\n\n| rate | field [interval] | baseline [interval] | Fisher p | |\n|---|---|---|---|---|",
        100.0 * (1.0 - r.alpha)
    );
    s.push_str(&rate_row("RECHECK", &r.recheck_rate));
    s.push_str(&rate_row("FAULT", &r.fault_rate));
    s.push('\n');
    let _ = writeln!(s, "## CUSUM of the margins\n");
    let _ = writeln!(
        s,
        "Tabular CUSUM (Page, 1954; settings after Montgomery, *Introduction to Statistical Quality Control*, §9.1) of each side's margins over the field units in order, GO units' `score − go_min` and NO-GO units' `nogo_max − score`, in score units: target μ₀ the baseline's mean margin, allowance k = σ/2, decision interval h = 5σ (each a whole score unit, k and h at least 1; h \"none\": the baseline had fewer than two units on that side, which cannot alarm). The lower sum C⁻ = max(0, C⁻ + μ₀ − k − m) grows when margins shrink (units walking towards the boundary), the upper sum C⁺ when they grow. Rule: alarm when C⁻ passes h{}. Alarm units count all field units from 1.\n\n| side | μ₀ | k | h | C⁻ at end | C⁻ alarm at unit | C⁺ at end | C⁺ passed h at unit | |\n|---|---|---|---|---|---|---|---|---|",
        if r.two_sided {
            " or C⁺ passes h (--two-sided)"
        } else {
            " (C⁺ is shown; --two-sided makes it an alarm too)"
        }
    );
    s.push_str(&cusum_row("GO", &r.cusum_go));
    s.push_str(&cusum_row("NO-GO", &r.cusum_nogo));
    s.push('\n');
    if let Some(c) = chart {
        let _ = writeln!(s, "![CUSUM chart]({c})\n");
    } else if r.merged {
        let _ = writeln!(
            s,
            "The field was counted in parts and merged: each sum's final state and first alarm are exact, its path is not kept: no chart.\n"
        );
    } else if r.chart.is_empty() {
        let _ = writeln!(
            s,
            "A device record keeps each sum's final state and first alarm, not its path: no chart.\n"
        );
    }
    s
}

/// The CUSUM chart: each side's lower sum (and upper, dashed) after each of its units,
/// against the unit number, over h (red); empty text when there is nothing to draw.
pub fn cusum_svg(r: &DriftReport) -> String {
    if r.chart.is_empty() {
        return String::new();
    }
    let h = |c: &CusumSide| {
        if c.limit == i64::MAX {
            None
        } else {
            Some(c.limit as f64)
        }
    };
    // Each side on its own scale: the sums over that side's h.
    let scale = |go: bool| {
        h(if go { &r.cusum_go } else { &r.cusum_nogo })
            .filter(|v| *v > 0.0)
            .unwrap_or(1.0)
    };
    let ratio = |go: bool, v: i64| v as f64 / scale(go);
    let top = r
        .chart
        .iter()
        .map(|p| ratio(p.go, p.down).max(ratio(p.go, p.up)))
        .fold(1.5f64, f64::max)
        * 1.1;
    let last = f64::from(r.chart.last().map_or(1, |p| p.unit).max(1));
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (800, 420)).into_drawing_area();
        let _ = root.fill(&WHITE);
        if let Ok(mut chart) = ChartBuilder::on(&root)
            .caption(
                "CUSUM of the margins: each sum over its decision interval h",
                ("sans-serif", 17),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(70)
            .build_cartesian_2d(0.0..last, 0.0..top)
        {
            let _ = chart
                .configure_mesh()
                .x_label_style(("sans-serif", 15))
                .y_label_style(("sans-serif", 15))
                .x_desc("field unit")
                .y_desc("sum ÷ h")
                .x_label_formatter(&|v| format!("{v:.0}"))
                .y_label_formatter(&|v| format!("{v:.1}"))
                .draw();
            let _ = chart.draw_series(std::iter::once(PathElement::new(
                vec![(0.0, 1.0), (last, 1.0)],
                LIMIT.stroke_width(2),
            )));
            for (go, colour, name) in [(true, GO, "GO"), (false, NOGO, "NO-GO")] {
                let pts = || r.chart.iter().filter(move |p| p.go == go);
                let down: Vec<(f64, f64)> = pts()
                    .map(|p| (f64::from(p.unit), ratio(go, p.down)))
                    .collect();
                let up: Vec<(f64, f64)> = pts()
                    .map(|p| (f64::from(p.unit), ratio(go, p.up)))
                    .collect();
                if let Ok(a) = chart.draw_series(LineSeries::new(down, colour.stroke_width(2))) {
                    a.label(format!("{name} margins shrinking (C⁻)"))
                        .legend(move |(x, y)| {
                            PathElement::new(vec![(x, y), (x + 18, y)], colour.stroke_width(2))
                        });
                }
                let light = colour.mix(0.45);
                if let Ok(a) = chart.draw_series(LineSeries::new(up, light.stroke_width(1))) {
                    a.label(format!("{name} margins growing (C⁺)"))
                        .legend(move |(x, y)| {
                            PathElement::new(vec![(x, y), (x + 18, y)], light.stroke_width(1))
                        });
                }
            }
            let _ = chart
                .configure_series_labels()
                .background_style(WHITE.mix(0.85))
                .border_style(BLACK)
                .label_font(("sans-serif", 13))
                .position(SeriesLabelPosition::UpperLeft)
                .draw();
        }
        let _ = root.present();
    }
    out
}

/// `drift.html`: the Markdown rendered, the chart inline after the CUSUM section.
pub fn drift_html(r: &DriftReport) -> String {
    let verdict = if r.in_control() {
        "IN CONTROL"
    } else {
        "ALARM"
    };
    let class = if r.in_control() { "passed" } else { "failed" };
    let text = drift_markdown(r, None);
    let mut page = format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>Linegate drift test: {verdict}</title>\n<style>{STYLE}</style></head><body class=\"{class}\">\n"
    );
    let mut reasons = String::new();
    for a in &r.alarms {
        let _ = write!(reasons, "<li>{}</li>", escape(a));
    }
    let _ = writeln!(
        page,
        "<div class=\"verdict {class}\" role=\"status\"><span class=\"mark\">{verdict}</span><ul>{reasons}</ul></div>"
    );
    page.push_str(&render_markdown(&text));
    page.push_str(&cusum_svg(r));
    page.push_str("\n</body></html>\n");
    page
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::field::drift::{DriftConfig, Field, Source, drift};
    use crate::field::run::FieldRun;
    use crate::field::run_part::RunPart;
    use crate::release::audit_baseline::{Baseline, CusumRecord, PlanRecord};
    use shared_model::Thresholds;

    /// A run merged from parts draws no chart and says why; a record's wording stays.
    #[test]
    fn a_merged_run_says_why_there_is_no_chart() {
        let side = CusumRecord {
            units: 10,
            mean: 50.0,
            sd: 10.0,
            target: 50,
            slack: 5,
            limit: 50,
        };
        let b = Baseline {
            log: "holdout".into(),
            rule: "test".into(),
            sha256: String::new(),
            nogo_max: -10,
            go_min: 10,
            units: 2,
            go: 1,
            nogo: 1,
            recheck: 0,
            faults: 0,
            scores: vec![-60, 60],
            recheck_scores: Vec::new(),
            channels: Vec::new(),
            plan: PlanRecord {
                blob_id: 1,
                origin: -100,
                shift: 3,
                go: side.clone(),
                nogo: side,
            },
        };
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        let mut parts = [0, 1].map(|_| RunPart::new(b.plan.field_plan(), t, 0, 0, true));
        parts[0].decided(&t.decide(60), None);
        parts[1].decided(&t.decide(-60), None);
        let merged = RunPart::merge(&parts[0], &parts[1]).unwrap();
        let run = FieldRun::from_part(merged).unwrap();
        let cfg = DriftConfig {
            alpha: 0.01,
            two_sided: false,
        };
        let r = drift(&b, Field::Run(&run), Source::Log, cfg);
        assert!(cusum_svg(&r).is_empty());
        let md = drift_markdown(&r, None);
        assert!(md.contains("counted in parts and merged"), "{md}");
        assert!(!md.contains("A device record keeps"), "{md}");
        let r = drift(&b, Field::Record(&run.stats()), Source::Record, cfg);
        assert!(drift_markdown(&r, None).contains("A device record keeps"));
    }
}
