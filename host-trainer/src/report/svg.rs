//! The audit's charts as SVG (plotters): margins, and one bar per channel.

use plotters::prelude::*;

use crate::release::audit::{AuditReport, MARGIN_BINS, margin_bin_edges};

/// Colours of the logs in the margin histogram, in the report's order (train first).
const SET_COLOURS: [RGBColor; 4] = [
    RGBColor(11, 110, 79),
    RGBColor(52, 88, 140),
    RGBColor(140, 110, 40),
    RGBColor(110, 110, 110),
];

/// The names of the margin histogram's bins, in multiples of the rounding bound B.
fn bin_names() -> Vec<String> {
    let mut v = vec!["≤ 0".to_string(), "0–B".to_string(), "B–2B".to_string()];
    for k in 1..MARGIN_BINS - 3 {
        v.push(format!("{}–{}B", 1u32 << k, 1u32 << (k + 1)));
    }
    v.push(format!("> {}B", 1u32 << (MARGIN_BINS - 3)));
    v
}

/// The fixed margin of every decided unit of every log, in LSB, binned in multiples of
/// the rounding bound B (`SetSummary::margin_histogram`), with the bound marked: units left
/// of the mark are those rounding could have moved. RECHECK units have no margin; their
/// count is in the caption.
pub fn margin_bins_svg(r: &AuditReport) -> String {
    let names = bin_names();
    let sets: Vec<_> = r
        .sets
        .iter()
        .filter(|s| s.margin_histogram.len() == MARGIN_BINS)
        .collect();
    let top = sets
        .iter()
        .flat_map(|s| s.margin_histogram.iter().copied())
        .max()
        .unwrap_or(1)
        .max(1) as f64;
    let edges = margin_bin_edges(r.bound.total);
    let recheck: usize = r.sets.iter().map(|s| s.recheck).sum();
    // Up to the last bin holding a unit (and at least past the bound's bins).
    let shown = sets
        .iter()
        .filter_map(|s| s.margin_histogram.iter().rposition(|&c| c > 0))
        .max()
        .map_or(4, |k| (k + 2).clamp(4, MARGIN_BINS));
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (800, 420)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let bins = shown as f64;
        // Bin i spans [i, i + 1); the logs' bars share its middle 80 %. Below zero: the
        // bins' names.
        let floor = -0.12 * top;
        if let Ok(mut chart) = ChartBuilder::on(&root)
            .caption(
                format!(
                    "Fixed margin of every decided unit from the threshold; B = rounding bound = {:.1} LSB; RECHECK: {recheck}",
                    edges[1]
                ),
                ("sans-serif", 17),
            )
            .margin(12)
            .x_label_area_size(30)
            .y_label_area_size(80)
            .build_cartesian_2d(0.0..bins, floor..top * 1.15)
        {
            let _ = chart
                .configure_mesh()
                .disable_x_mesh()
                .x_labels(0)
                .y_label_style(("sans-serif", 15))
                .y_label_formatter(&|v| if *v < 0.0 { String::new() } else { format!("{v:.0}") })
                .x_desc("fixed margin plus RECHECK band, in multiples of the rounding bound B (left of the red line: within B)")
                .y_desc("units")
                .draw();
            let _ = chart.draw_series(names.iter().take(shown).enumerate().map(|(i, n)| {
                Text::new(
                    n.clone(),
                    (i as f64 + 0.08, floor * 0.45),
                    ("sans-serif", 12).into_font(),
                )
            }));
            let k = sets.len().max(1) as f64;
            for (j, s) in sets.iter().enumerate() {
                let colour = SET_COLOURS[j.min(SET_COLOURS.len() - 1)];
                let w = 0.8 / k;
                let _ = chart
                    .draw_series(s.margin_histogram.iter().take(shown).enumerate().map(|(i, &c)| {
                        let x0 = i as f64 + 0.1 + j as f64 * w;
                        Rectangle::new([(x0, 0.0), (x0 + w, c as f64)], colour.filled())
                    }))
                    .map(|a| {
                        a.label(format!("{} ({} units)", s.name, s.units))
                            .legend(move |(x, y)| {
                                Rectangle::new([(x, y - 5), (x + 12, y + 5)], colour.filled())
                            })
                    });
                // Counts written over the bins within the bound: the units a reviewer asks
                // about, however small their bars.
                let _ = chart.draw_series(
                    s.margin_histogram
                        .iter()
                        .enumerate()
                        .take(2)
                        .filter(|(_, c)| **c > 0)
                        .map(|(i, &c)| {
                            Text::new(
                                c.to_string(),
                                (i as f64 + 0.1 + j as f64 * w, c as f64 + 0.03 * top),
                                ("sans-serif", 12).into_font().color(&FAIL),
                            )
                        }),
                );
            }
            let _ = chart.draw_series(std::iter::once(PathElement::new(
                vec![(2.0, 0.0), (2.0, top * 1.1)],
                FAIL.stroke_width(2),
            )));
            let _ = chart
                .configure_series_labels()
                .border_style(BLACK)
                .background_style(WHITE.mix(0.9))
                .label_font(("sans-serif", 14))
                .draw();
        }
        let _ = root.present();
    }
    out
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

    #[test]
    fn bars_short_of_the_reference_are_marked() {
        let names = vec!["a".to_string(), "b".to_string()];
        let svg = bars_svg("tolerance", &names, &[0.5, 2.0], Some(1.0));
        assert_eq!(svg.matches("below").count(), 1, "one bar below the line");
        let svg = bars_svg("tolerance", &names, &[1.5, 2.0], Some(1.0));
        assert!(!svg.contains("below"));
    }
}
