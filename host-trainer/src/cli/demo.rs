//! `linegate demo`: the whole job on built-in synthetic data.

use std::path::{Path, PathBuf};

use anyhow::Result;
use clap::Args;

use crate::demo;

/// Flags of `linegate demo`.
#[derive(Args)]
pub struct DemoArgs {
    /// Output folder.
    #[arg(long = "out-dir", alias = "out", default_value = "linegate-demo")]
    pub out: PathBuf,
    /// Overwrite files from an earlier demo.
    #[arg(long)]
    pub force: bool,
}

impl DemoArgs {
    /// Runs `linegate demo`.
    pub fn run(&self, quiet: bool) -> Result<()> {
        let Self { out, force } = self;
        let t0 = std::time::Instant::now();
        let s = demo::run(out, *force)?;
        if !quiet {
            print_demo(&s, out, t0.elapsed());
        }
        Ok(())
    }
}

fn print_demo(s: &demo::DemoSummary, out: &Path, took: std::time::Duration) {
    let r = &s.readings;
    let c = &r.train.check;
    say!("Linegate demo: SYNTHETIC end-of-line test of a brushless fan module (invented scenario)");
    say!(
        "training log: {} units, separable: {}, γ* = {:.5}",
        c.units,
        c.separable,
        c.margin.unwrap_or(0.0)
    );
    if let Some(b) = c.novikoff_bound {
        say!(
            "  Novikoff bound {:.0} updates; classic perceptron made {}",
            b,
            // The demo asks for every figure, so the run is there.
            c.perceptron_updates.unwrap_or(0)
        );
    }
    if let Some(d) = &r.checked {
        say!(
            "second-shift log: {} units, separable: {}; {} conflicting units named",
            d.units,
            d.separable,
            d.conflict.len()
        );
    }
    if let Some(h) = &r.train.holdout {
        say!(
            "max-margin model: holdout accuracy {:.4} (false GO {}, false NO-GO {})",
            h.accuracy(),
            h.false_go,
            h.false_nogo
        );
    }
    if let Some((rows, Some(i))) = &r.sweep {
        let w = &rows[*i];
        say!(
            "sweep recommends {}-bit weights, {}-bit inputs ({} bytes)",
            w.weight_bits,
            w.input_bits,
            w.blob_bytes
        );
    }
    let a = &r.audit;
    let count = |f: fn(&crate::release::audit_report::SetSummary) -> usize| -> usize {
        a.sets.iter().map(f).sum()
    };
    say!(
        "audit {}: false GO {}, false NO-GO {}, RECHECK {} (half-band {:.4}), flips {}, rounding guaranteed {} (bound {:.1} LSB)",
        if a.passed { "PASSED" } else { "FAILED" },
        count(|t| t.false_go),
        count(|t| t.false_nogo),
        count(|t| t.recheck),
        a.recheck_band,
        a.flips.len(),
        a.guaranteed,
        a.bound.total
    );
    if let Some((on_drift, on_train)) = &r.drift {
        let verdict = |d: &crate::field::drift::DriftReport| {
            if d.in_control() {
                "in control".to_string()
            } else {
                format!("ALARM ({})", d.alarms.len())
            }
        };
        say!(
            "drift against the audit's baseline: second-shift log {} (KS p {:.3}, CUSUM of GO margins alarm at unit {}), training log {} (KS p {:.3}); see drift-report.md",
            verdict(on_drift),
            on_drift.ks.p,
            on_drift.cusum_go.alarm_down,
            verdict(on_train),
            on_train.ks.p
        );
    }
    let g = &s.signals;
    let features = g
        .train
        .model
        .channels
        .iter()
        .filter(|c| c.source.is_some())
        .count();
    say!(
        "signal scenario (SYNTHETIC): {} units, {} features computed from 2 sample windows by the device's integer code; holdout accuracy {:.4}; audit {}; field replay: {} of {} units refused (clipped vibration: FAULT)",
        g.train.model.summary.units,
        features,
        g.train.holdout.as_ref().map_or(0.0, |h| h.accuracy()),
        if g.audit.passed { "PASSED" } else { "FAILED" },
        g.refused,
        g.replayed
    );
    say!("wrote into {}:", out.display());
    for f in &s.files {
        say!("  {}", f.display());
    }
    say!("done in {:.1} s", took.as_secs_f64());
}
