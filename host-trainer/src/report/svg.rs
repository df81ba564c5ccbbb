//! The audit's charts as SVG (plotters): margins, and one bar per channel.

use plotters::prelude::*;

use crate::release::audit::AuditReport;

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
