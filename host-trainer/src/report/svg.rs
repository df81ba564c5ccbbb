//! The audit's charts as SVG (plotters): margins and rounding errors of every unit, one bar
//! per channel, the word-length sweep, and the operating point's trade-off.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::numbers::score;
use crate::release::audit_report::{AuditReport, SetSummary};
use crate::release::bound::{MARGIN_BINS, ROUNDING_BINS, margin_bin_edges, rounding_bin_edges};
use crate::release::point_record::OperatingPointRecord;
use crate::release::sweep::SweepRow;

/// Colours of the logs in the margin histogram, in the report's order (train first).
const SET_COLOURS: [RGBColor; 4] = [
    RGBColor(11, 110, 79),
    RGBColor(52, 88, 140),
    RGBColor(140, 110, 40),
    RGBColor(110, 110, 110),
];

/// The names of the margin histogram's bins, in multiples of the rounding bound B.
pub(super) fn bin_names() -> Vec<String> {
    let mut v = vec!["≤ 0".to_string(), "0–B".to_string(), "B–2B".to_string()];
    for k in 1..MARGIN_BINS - 3 {
        v.push(format!("{}–{}B", 1u32 << k, 1u32 << (k + 1)));
    }
    v.push(format!("> {}B", 1u32 << (MARGIN_BINS - 3)));
    v
}

/// A histogram of every log side by side: bin i spans [i, i + 1) on the x axis.
pub(super) struct Binned<'a> {
    pub(super) caption: String,
    pub(super) x_desc: &'a str,
    /// Text under the axis, each at its x.
    pub(super) labels: Vec<(f64, String)>,
    /// Each log's legend (its name and what the chart counts of it) and bin counts.
    pub(super) series: Vec<(String, Vec<u64>)>,
    /// A band shaded grey behind the bars, from x to x, named at its top.
    pub(super) shaded: Option<(f64, f64, &'static str)>,
    /// Bins drawn (from the first).
    pub(super) shown: usize,
    /// Red vertical lines, at these x, each named at its top.
    pub(super) marks: Vec<(f64, &'static str)>,
    /// Bins whose counts are written over the bar, in red, whenever they hold a unit.
    pub(super) counted: Vec<usize>,
}

/// A log's legend on the unit charts: they count every unit but the FAULTs, which have no
/// score; saying so keeps the count here and the log's unit count elsewhere agreeing.
fn legend(s: &SetSummary) -> String {
    match s.faults {
        0 => format!("{} ({} units)", s.name, s.units),
        f => format!(
            "{} ({} of {} units; {f} FAULT)",
            s.name,
            s.units - f,
            s.units
        ),
    }
}

pub(super) fn binned_svg(b: &Binned<'_>) -> String {
    let top = b
        .series
        .iter()
        .flat_map(|s| s.1.iter().copied())
        .max()
        .unwrap_or(1)
        .max(1) as f64;
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (800, 420)).into_drawing_area();
        let _ = root.fill(&WHITE);
        // Below zero: the bins' names, on two staggered rows when there are many bins, so
        // neighbouring names never overlap.
        let stagger = b.labels.len() > 10;
        let floor = if stagger { -0.2 } else { -0.12 } * top;
        // Headroom above the tallest bar for the legend (a row per log), so it never
        // covers a bar.
        let ceiling = top * (1.2 + 0.1 * b.series.len() as f64);
        if let Ok(mut chart) = ChartBuilder::on(&root)
            .caption(&b.caption, ("sans-serif", 17))
            .margin(12)
            .margin_right(40)
            .x_label_area_size(30)
            .y_label_area_size(80)
            .build_cartesian_2d(0.0..b.shown as f64, floor..ceiling)
        {
            let _ = chart
                .configure_mesh()
                .disable_x_mesh()
                .x_labels(0)
                .y_label_style(("sans-serif", 15))
                .y_label_formatter(&|v| {
                    if *v < 0.0 {
                        String::new()
                    } else {
                        format!("{v:.0}")
                    }
                })
                .x_desc(b.x_desc)
                .y_desc("units")
                .draw();
            let _ = chart.draw_series(b.labels.iter().enumerate().map(|(i, (x, n))| {
                let row = if stagger && i % 2 == 1 { 0.75 } else { 0.3 };
                Text::new(n.clone(), (*x, floor * row), ("sans-serif", 12).into_font())
            }));
            if let Some((x0, x1, name)) = b.shaded {
                let _ = chart.draw_series(std::iter::once(Rectangle::new(
                    [(x0, 0.0), (x1, top * 1.1)],
                    RGBColor(228, 231, 235).filled(),
                )));
                let _ = chart.draw_series(std::iter::once(Text::new(
                    name,
                    (x0 + 0.05, top * 1.12),
                    ("sans-serif", 13).into_font(),
                )));
            }
            // The logs' bars share the middle 80 % of each bin.
            let w = 0.8 / b.series.len().max(1) as f64;
            for (j, (legend, counts)) in b.series.iter().enumerate() {
                let colour = SET_COLOURS[j.min(SET_COLOURS.len() - 1)];
                let _ = chart
                    .draw_series(counts.iter().take(b.shown).enumerate().map(|(i, &c)| {
                        let x0 = i as f64 + 0.1 + j as f64 * w;
                        Rectangle::new([(x0, 0.0), (x0 + w, c as f64)], colour.filled())
                    }))
                    .map(|a| {
                        a.label(legend).legend(move |(x, y)| {
                            Rectangle::new([(x, y - 5), (x + 12, y + 5)], colour.filled())
                        })
                    });
                // The counts a reviewer asks about, however small their bars.
                let _ = chart.draw_series(
                    b.counted
                        .iter()
                        .filter_map(|&i| counts.get(i).filter(|c| **c > 0).map(|&c| (i, c)))
                        .map(|(i, c)| {
                            Text::new(
                                c.to_string(),
                                (i as f64 + 0.1 + j as f64 * w, c as f64 + 0.03 * top),
                                ("sans-serif", 12).into_font().color(&FAIL),
                            )
                        }),
                );
            }
            let _ = chart.draw_series(b.marks.iter().map(|&(x, _)| {
                PathElement::new(vec![(x, 0.0), (x, top * 1.1)], FAIL.stroke_width(2))
            }));
            let _ = chart.draw_series(b.marks.iter().map(|&(x, name)| {
                Text::new(
                    name,
                    (x + 0.1, top * 1.12),
                    ("sans-serif", 13).into_font().color(&FAIL),
                )
            }));
            let _ = chart
                .configure_series_labels()
                .position(SeriesLabelPosition::UpperRight)
                .border_style(BLACK)
                .background_style(WHITE.mix(0.9))
                .label_font(("sans-serif", 14))
                .draw();
        }
        let _ = root.present();
    }
    out
}

/// The fixed margin of every decided unit of every log, in LSB, binned in multiples of
/// the rounding bound B (`SetSummary::margin_histogram`), with the bound marked: units left
/// of the mark are those rounding could have moved. RECHECK units have no margin: they
/// stand first, in the shaded RECHECK band.
pub fn margin_bins_svg(r: &AuditReport) -> String {
    let series: Vec<_> = r
        .sets
        .iter()
        .filter(|s| s.margin_histogram.len() == MARGIN_BINS)
        .map(|s| {
            // The RECHECK units first, in the band of their own.
            let counts: Vec<u64> = std::iter::once(s.recheck as u64)
                .chain(s.margin_histogram.iter().copied())
                .collect();
            (legend(s), counts)
        })
        .collect();
    let recheck: usize = r.sets.iter().map(|s| s.recheck).sum();
    // Up to the last bin holding a unit (and at least past the bound's bins).
    let shown = series
        .iter()
        .filter_map(|s| s.1.iter().rposition(|&c| c > 0))
        .max()
        .map_or(5, |k| (k + 2).clamp(5, MARGIN_BINS + 1));
    binned_svg(&Binned {
        caption: format!(
            "Fixed margin of every decided unit from the threshold; B = rounding bound = {:.1} LSB; RECHECK: {recheck}",
            margin_bin_edges(r.bound.total)[1]
        ),
        x_desc: "fixed margin plus RECHECK band, in multiples of the rounding bound B (left of the red line: within B)",
        labels: std::iter::once("RECHECK".to_string())
            .chain(bin_names())
            .take(shown)
            .enumerate()
            .map(|(i, n)| (i as f64 + 0.08, n))
            .collect(),
        series,
        shaded: (recheck > 0 || r.recheck_band > 0.0).then_some((0.0, 1.0, "RECHECK band")),
        shown,
        marks: vec![(3.0, "B")],
        counted: vec![0, 1, 2],
    })
}

/// Every scored unit of every log by its rounding error, fixed score − A·float score in
/// LSB, in tenths of the rounding bound B (`SetSummary::rounding_histogram`), with ±B
/// marked: the bound says no unit lies outside the red lines, and the chart shows how much
/// of it the units use. Counts outside, if any, are written in red.
pub fn rounding_svg(r: &AuditReport) -> String {
    let series: Vec<_> = r
        .sets
        .iter()
        .filter(|s| s.rounding_histogram.len() == ROUNDING_BINS)
        .map(|s| (legend(s), s.rounding_histogram.clone()))
        .collect();
    let worst = r
        .sets
        .iter()
        .map(|s| s.rounding_max_lsb)
        .fold(0.0, f64::max);
    let b = rounding_bin_edges(r.bound.total)[ROUNDING_BINS - 2];
    let mut labels = vec![(0.05, "< −B".to_string())];
    for (x, n) in [(6.0, "−½B"), (11.0, "0"), (16.0, "½B")] {
        labels.push((x - 0.2, n.to_string()));
    }
    labels.push((21.15, "> B".to_string()));
    binned_svg(&Binned {
        caption: format!(
            "Rounding error of every scored unit: B = {b:.1} LSB, largest seen {worst:.1} LSB ({:.0} % of B)",
            100.0 * worst / b
        ),
        x_desc: "fixed score − A·float score, LSB of the accumulator, in tenths of the bound B (the red lines at ±B)",
        labels,
        series,
        shaded: None,
        shown: ROUNDING_BINS,
        marks: vec![(1.0, "−B"), (21.0, "+B")],
        counted: vec![0, ROUNDING_BINS - 1],
    })
}

/// The word-length sweep: each format's smallest margin over the rounding bound against
/// its blob's size, the line at 1 (above it rounding cannot change a decision), the
/// recommended format ringed. Passing formats are filled teal dots, failing ones red
/// crosses, each named (weights/inputs bits), so it reads in black and white.
pub fn sweep_svg(rows: &[SweepRow], best: Option<usize>) -> String {
    // Margins at or below 0.01 of the bound (flips included) sit on the floor of the log axis.
    const FLOOR: f64 = 0.01;
    let y = |r: &SweepRow| r.margin_over_bound.map(|v| v.max(FLOOR));
    let top = rows.iter().filter_map(y).fold(10.0f64, f64::max) * 3.0;
    let (x0, x1) = rows.iter().fold((usize::MAX, 0), |(a, b), r| {
        (a.min(r.blob_bytes), b.max(r.blob_bytes))
    });
    let pad = ((x1.saturating_sub(x0)) as f64 * 0.12).max(8.0);
    let (x0, x1) = (x0 as f64 - pad, x1 as f64 + pad);
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (800, 420)).into_drawing_area();
        let _ = root.fill(&WHITE);
        if let Ok(mut chart) = ChartBuilder::on(&root)
            .caption(
                "Word-length sweep: margin over the rounding bound against blob size",
                ("sans-serif", 17),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(70)
            .build_cartesian_2d(x0..x1, (FLOOR * 0.7..top).log_scale())
        {
            let _ = chart
                .configure_mesh()
                .x_label_style(("sans-serif", 15))
                .y_label_style(("sans-serif", 15))
                .x_desc("blob bytes")
                .y_desc("smallest margin ÷ rounding bound (log)")
                .x_label_formatter(&|v| format!("{v:.0}"))
                .y_label_formatter(&|v| format!("{v}"))
                .draw();
            let _ = chart.draw_series(std::iter::once(PathElement::new(
                vec![(x0, 1.0), (x1, 1.0)],
                BLACK.stroke_width(2),
            )));
            for (i, r) in rows.iter().enumerate() {
                let Some(v) = y(r) else { continue };
                let p = (r.blob_bytes as f64, v);
                let name = format!("{}/{}", r.weight_bits, r.input_bits);
                if r.passed {
                    let _ = chart.draw_series(std::iter::once(Circle::new(p, 5, PASS.filled())));
                } else {
                    let _ =
                        chart.draw_series(std::iter::once(Cross::new(p, 5, FAIL.stroke_width(2))));
                }
                // Beside the point, in pixels.
                let _ = chart.draw_series(std::iter::once(
                    EmptyElement::at(p) + Text::new(name, (7, -16), ("sans-serif", 13).into_font()),
                ));
                if Some(i) == best {
                    let _ = chart.draw_series(std::iter::once(Circle::new(
                        p,
                        11,
                        BLACK.stroke_width(2),
                    )));
                    let _ = chart.draw_series(std::iter::once(
                        EmptyElement::at(p)
                            + Text::new("recommended", (12, 4), ("sans-serif", 14).into_font()),
                    ));
                }
            }
        }
        let _ = root.present();
    }
    out
}

/// The `id` of the trade-off chart's `<svg>` element in the HTML report.
pub const TRADE_OFF_ID: &str = "trade-off-chart";

/// The operating point's trade-off on the held-out units: for each trade-off point (the
/// best point at each RECHECK cap) its RECHECK share on x against its false-GO rate (of
/// the held-out NO-GO units; red line, round dots) and false-NO-GO rate (of the GO units;
/// blue line, triangles) on y, with a legend; the chosen point is ringed on both lines and
/// labelled with its threshold and half-band. The `<svg>` element has the id
/// `trade-off-chart` and the class `trade-off`.
pub fn trade_off_svg(op: &OperatingPointRecord) -> String {
    const NOGO: RGBColor = SET_COLOURS[1];
    let pct = |r: &crate::confidence::Rate| r.rate * 100.0;
    // (RECHECK %, false GO %, false NO-GO %), left to right; equal points drawn once.
    let mut pts: Vec<(f64, f64, f64)> = op
        .trade_off
        .iter()
        .map(|t| {
            (
                pct(&t.rates.recheck),
                pct(&t.rates.false_go),
                pct(&t.rates.false_nogo),
            )
        })
        .collect();
    pts.sort_by(|a, b| {
        a.0.total_cmp(&b.0)
            .then(b.1.total_cmp(&a.1))
            .then(b.2.total_cmp(&a.2))
    });
    pts.dedup();
    let chosen = (
        pct(&op.rates.recheck),
        pct(&op.rates.false_go),
        pct(&op.rates.false_nogo),
    );
    let all = || pts.iter().chain(std::iter::once(&chosen));
    let x1 = all().map(|p| p.0).fold(1.0f64, f64::max) * 1.1;
    // Headroom above the highest point for the legend and the chosen point's label, so
    // neither covers a point or the other.
    let y1 = all().flat_map(|p| [p.1, p.2]).fold(1.0f64, f64::max) * 1.6;
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (800, 420)).into_drawing_area();
        let _ = root.fill(&WHITE);
        if let Ok(mut chart) = ChartBuilder::on(&root)
            .caption(
                "Trade-off on the held-out units: false GO and false NO-GO against RECHECK",
                ("sans-serif", 17),
            )
            .margin(12)
            .margin_right(30)
            .x_label_area_size(40)
            .y_label_area_size(70)
            .build_cartesian_2d(0.0..x1, 0.0..y1)
        {
            let x_desc = format!("RECHECK, % of the {} held-out units", op.units);
            let _ = chart
                .configure_mesh()
                .x_label_style(("sans-serif", 15))
                .y_label_style(("sans-serif", 15))
                .x_desc(x_desc)
                .y_desc("rate, %")
                .x_label_formatter(&|v| format!("{v}"))
                .y_label_formatter(&|v| format!("{v}"))
                .draw();
            let series = [
                (
                    format!("false GO (% of {} NO-GO units)", op.nogo_units),
                    FAIL,
                    pts.iter().map(|p| (p.0, p.1)).collect::<Vec<_>>(),
                ),
                (
                    format!("false NO-GO (% of {} GO units)", op.go_units),
                    NOGO,
                    pts.iter().map(|p| (p.0, p.2)).collect(),
                ),
            ];
            for (k, (name, colour, line)) in series.into_iter().enumerate() {
                let _ = chart
                    .draw_series(LineSeries::new(line.clone(), colour.stroke_width(2)))
                    .map(|a| {
                        a.label(name).legend(move |(x, y)| {
                            PathElement::new(vec![(x, y), (x + 16, y)], colour.stroke_width(2))
                        })
                    });
                // Told apart in black and white by their marks too.
                if k == 0 {
                    let _ =
                        chart.draw_series(line.iter().map(|&p| Circle::new(p, 4, colour.filled())));
                } else {
                    let _ = chart.draw_series(
                        line.iter()
                            .map(|&p| TriangleMarker::new(p, 5, colour.filled())),
                    );
                }
            }
            let _ = chart.draw_series(
                [(chosen.0, chosen.1), (chosen.0, chosen.2)]
                    .into_iter()
                    .map(|p| Circle::new(p, 10, BLACK.stroke_width(2))),
            );
            // Above the higher ring, towards the middle of the chart.
            let left = chosen.0 > x1 / 2.0;
            let (dx, h) = if left {
                (-12, HPos::Right)
            } else {
                (12, HPos::Left)
            };
            let style =
                TextStyle::from(("sans-serif", 15).into_font()).pos(Pos::new(h, VPos::Bottom));
            let label = format!(
                "chosen: threshold {}, band ±{}",
                score(op.threshold),
                score(op.band)
            );
            let _ = chart.draw_series(std::iter::once(
                EmptyElement::at((chosen.0, chosen.1.max(chosen.2)))
                    + Text::new(label, (dx, -14), style),
            ));
            let _ = chart
                .configure_series_labels()
                .position(SeriesLabelPosition::UpperRight)
                .border_style(BLACK)
                .background_style(WHITE.mix(0.9))
                .label_font(("sans-serif", 14))
                .draw();
        }
        let _ = root.present();
    }
    out.replacen(
        "<svg ",
        &format!("<svg id=\"{TRADE_OFF_ID}\" class=\"trade-off\" "),
        1,
    )
}

/// The report's colours: a teal for what passes, a brick red for what fails (told apart in
/// black and white by the labels beside the bars).
const PASS: RGBColor = RGBColor(11, 110, 79);
const FAIL: RGBColor = RGBColor(178, 34, 34);

/// Horizontal bars, one per channel, every channel labelled, as SVG. With `reference`, a
/// line is drawn there and bars at or beyond it pass (teal), short of it fail (red, marked
/// "below").
pub fn bars_svg(title: &str, labels: &[String], values: &[f64], reference: Option<f64>) -> String {
    let mut out = String::new();
    {
        let h = 60 + 28 * labels.len() as u32;
        let root = SVGBackend::with_string(&mut out, (640, h)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let max = values
            .iter()
            .filter(|v| v.is_finite())
            .chain(reference.as_ref())
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
                .y_labels(labels.len().max(1))
                // plotters sets text at 0.8 of the size asked: 16 gives about 13 px.
                .y_label_style(("sans-serif", 16))
                .x_label_style(("sans-serif", 15))
                .y_label_formatter(&|v| match v {
                    SegmentValue::CenterOf(i) => {
                        names.get(*i as usize).cloned().unwrap_or_default()
                    }
                    _ => String::new(),
                })
                .draw();
            let passes = |v: f64| reference.is_none_or(|r| v >= r);
            let _ = chart.draw_series(values.iter().enumerate().map(|(i, v)| {
                let v = if v.is_finite() { *v } else { max };
                let colour = if passes(v) { PASS } else { FAIL };
                Rectangle::new(
                    [
                        (0.0, SegmentValue::Exact(i as i32)),
                        (v, SegmentValue::Exact(i as i32 + 1)),
                    ],
                    colour.mix(0.8).filled(),
                )
            }));
            if let Some(r) = reference {
                let _ = chart.draw_series(std::iter::once(PathElement::new(
                    vec![(r, SegmentValue::Exact(0)), (r, SegmentValue::Exact(n))],
                    BLACK.stroke_width(2),
                )));
                let _ =
                    chart.draw_series(values.iter().enumerate().filter(|(_, v)| !passes(**v)).map(
                        |(i, _)| {
                            Text::new(
                                "below",
                                (r, SegmentValue::CenterOf(i as i32)),
                                ("sans-serif", 12).into_font().color(&FAIL),
                            )
                        },
                    ));
            }
        }
        let _ = root.present();
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_log_with_faults_says_what_its_charts_count() {
        let s = SetSummary {
            name: "holdout".into(),
            units: 171,
            faults: 2,
            ..Default::default()
        };
        // The charts count 169 units; the log has 171 everywhere else.
        assert_eq!(legend(&s), "holdout (169 of 171 units; 2 FAULT)");
        let s = SetSummary { faults: 0, ..s };
        assert_eq!(legend(&s), "holdout (171 units)");
    }

    #[test]
    fn every_channel_is_labelled_up_to_32() {
        let names: Vec<String> = (0..32).map(|i| format!("chan_{i:02}")).collect();
        let values: Vec<f64> = (0..32).map(|i| f64::from(i) - 10.0).collect();
        let svg = bars_svg("weights", &names, &values, None);
        for n in &names {
            assert!(svg.contains(n.as_str()), "{n} is labelled");
        }
        // Labels are set in a readable size, not scaled down with the chart.
        for size in svg.split("font-size=\"").skip(1) {
            let px: f64 = size.split('"').next().unwrap().parse().unwrap();
            assert!(px >= 12.0, "font size {px}");
        }
    }

    fn row(weight_bits: u8, ratio: Option<f64>, passed: bool) -> SweepRow {
        SweepRow {
            weight_bits,
            input_bits: 16,
            acc_bits: 32,
            min_margin_lsb: ratio.map(|r| r * 10.0),
            margin_over_bound: ratio,
            flips: 0,
            guaranteed: passed,
            passed,
            blob_bytes: 180 + usize::from(weight_bits),
            kernel_bits: 32,
            kernel_instructions: (0, 0),
        }
    }

    #[test]
    fn the_sweep_chart_marks_the_recommendation_once() {
        let rows = [
            row(8, Some(-0.5), false),
            row(12, Some(1.5), true),
            row(16, None, false),
            row(24, Some(300.0), true),
        ];
        let svg = sweep_svg(&rows, Some(1));
        assert_eq!(svg.matches("recommended").count(), 1);
        for n in ["8/16", "12/16", "24/16"] {
            assert!(svg.contains(n), "{n} drawn");
        }
        assert!(
            !svg.contains("16/16"),
            "a format without a margin has no point"
        );
        assert!(!sweep_svg(&rows, None).contains("recommended"));
    }

    #[test]
    fn the_trade_off_chart_has_two_series_and_one_chosen_point() {
        use crate::train::eval::HeldOut;
        use crate::train::operating_point::{Target, choose};
        let held: Vec<HeldOut> = (0..200)
            .map(|unit| {
                let go = unit % 2 == 0;
                let spread = (unit / 2) as f64 / 100.0;
                HeldOut {
                    unit,
                    distance: if go { spread - 0.1 } else { 0.1 - spread },
                    go,
                    fault: false,
                }
            })
            .collect();
        let target = Target::RecheckBudget {
            share: 0.05,
            false_go_weight: 2.0,
        };
        let op = choose(&held, target, 1.0, "test".into()).unwrap();
        let svg = trade_off_svg(&OperatingPointRecord::new(&op, 1.0));
        assert!(svg.starts_with("<svg id=\"trade-off-chart\" class=\"trade-off\" "));
        assert!(svg.contains("false GO (% of 100 NO-GO units)"));
        assert!(svg.contains("false NO-GO (% of 100 GO units)"));
        assert!(svg.contains("RECHECK, % of the 200 held-out units"));
        assert_eq!(svg.matches("chosen: threshold").count(), 1);
        for size in svg.split("font-size=\"").skip(1) {
            let px: f64 = size.split('"').next().unwrap().parse().unwrap();
            assert!(px >= 11.0, "font size {px}");
        }
    }

    #[test]
    fn bars_short_of_the_reference_are_marked() {
        let names = vec!["a".to_string(), "b".to_string()];
        let svg = bars_svg("tolerance", &names, &[0.5, 2.0], Some(1.0));
        assert_eq!(svg.matches("below").count(), 1, "one bar below the line");
        let svg = bars_svg("tolerance", &names, &[1.5, 2.0], Some(1.0));
        assert!(!svg.contains("below"));
    }
}
