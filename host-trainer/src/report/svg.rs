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
