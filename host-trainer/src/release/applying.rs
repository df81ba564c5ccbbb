//! The release step: quantise and audit, applying what the user asked the tool to choose
//! (the sweep's recommended word lengths, the RECHECK band the declared noise calls for).

use crate::ingest::dataset::Dataset;
use crate::release::audit::audit;
use crate::release::audit_report::AuditReport;
use crate::release::gates::AuditConfig;
use crate::release::quantise::{QuantConfig, QuantError, Quantised, quantise};
use crate::release::sweep::{SweepRow, sweep};
use crate::train::float_model::FloatModel;

/// Shortcut used by the CLI and tests: quantise then audit.
///
/// # Errors
/// [`QuantError`] from the quantiser.
pub fn release(
    fm: &FloatModel,
    train: &Dataset,
    others: &[(&str, &Dataset)],
    qc: QuantConfig,
    noise: &[Option<f64>],
    cfg: AuditConfig,
) -> Result<(Quantised, AuditReport), QuantError> {
    let q = quantise(fm, Some(train), qc)?;
    let r = audit(&q, fm, train, others, noise, cfg);
    Ok((q, r))
}

/// Choices `release_applying` may make for the user.
#[derive(Clone, Copy, Debug, Default)]
pub struct Apply {
    /// Use the sweep's recommended word lengths (the narrowest that pass).
    pub recommended_format: bool,
    /// Show the sweep's progress on stderr.
    pub progress: bool,
    /// Widen the RECHECK band to the suggested one until the noise gate passes.
    pub suggested_band: bool,
}

/// What `release_applying` settled on.
pub struct Released {
    /// The quantised model.
    pub q: Quantised,
    /// Its audit, with `applied` saying what was chosen.
    pub report: AuditReport,
    /// The configuration actually used.
    pub qc: QuantConfig,
    /// The sweep, when it was run to pick the format.
    pub sweep: Option<(Vec<SweepRow>, Option<usize>)>,
}

/// [`release`], first applying what `apply` asks: the sweep's recommended word lengths, then
/// the suggested RECHECK band, widened until no unit's GO/NO-GO verdict can be swapped by
/// the declared noise (a few rounds at most: the band only grows).
///
/// # Errors
/// [`QuantError`] from the quantiser.
pub fn release_applying(
    fm: &FloatModel,
    train: &Dataset,
    others: &[(&str, &Dataset)],
    mut qc: QuantConfig,
    noise: &[Option<f64>],
    cfg: AuditConfig,
    apply: Apply,
) -> Result<Released, QuantError> {
    let mut applied = Vec::new();
    let mut sw = None;
    if apply.recommended_format {
        let s = sweep(fm, train, others, qc, cfg, apply.progress)?;
        match s.1.and_then(|i| s.0.get(i)) {
            Some(row) => {
                qc.weight_bits = row.weight_bits;
                qc.input_bits = row.input_bits;
                applied.push(format!(
                    "word lengths from the sweep: {}-bit weights, {}-bit inputs",
                    row.weight_bits, row.input_bits
                ));
            }
            None => applied
                .push("no format of the sweep passes; the given word lengths were kept".into()),
        }
        sw = Some(s);
    }
    let (mut q, mut r) = release(fm, train, others, qc, noise, cfg)?;
    if apply.suggested_band {
        for _ in 0..8 {
            let unsafe_units: usize = r.sets.iter().map(|s| s.noise_unsafe).sum();
            let Some(t) = &r.tolerance else { break };
            if unsafe_units == 0 {
                break;
            }
            let Some(next) = wider_band(qc.recheck_band, t.suggested_band) else {
                break;
            };
            qc.recheck_band = next;
            (q, r) = release(fm, train, others, qc, noise, cfg)?;
        }
        if qc.recheck_band > 0.0 {
            applied.push(format!(
                "RECHECK half-band {:.6} (float score units) from the noise analysis",
                qc.recheck_band
            ));
        }
    }
    r.applied = applied;
    Ok(Released {
        q,
        report: r,
        qc,
        sweep: sw,
    })
}

/// The next RECHECK half-band when units are still noise-unsafe under `band`: the
/// suggested one, or at least an eighth wider (the band must reach past the noise radius of
/// the model it will be applied to, which moves with the band, so every round must widen it
/// for the loop to end); `None` when it cannot widen (a band of 0 with nothing suggested).
fn wider_band(band: f64, suggested: f64) -> Option<f64> {
    let next = suggested.max(band * 1.125);
    (next > band).then_some(next)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// By hand: from 0 the suggestion is taken; from 0.5 a suggestion of 0.3 still widens to
    /// 0.5·1.125 = 0.5625; a larger suggestion wins; 0 with nothing suggested stops.
    #[test]
    fn the_band_widens_every_round_or_stops() {
        assert_eq!(wider_band(0.0, 0.25), Some(0.25));
        assert_eq!(wider_band(0.5, 0.3), Some(0.5625));
        assert_eq!(wider_band(0.5, 0.75), Some(0.75));
        assert_eq!(wider_band(0.0, 0.0), None);
    }
}
