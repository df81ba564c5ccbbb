//! The word-length sweep: every format of weights 8/12/16/24/32 × inputs 8/16 bits
//! quantised and audited, with its blob size and device cost, and the narrowest format
//! that passes recommended.

use serde::Serialize;

use crate::ingest::dataset::Dataset;
use crate::release::audit::audit;
use crate::release::gates::AuditConfig;
use crate::release::quantise::{QuantConfig, QuantError, quantise};
use crate::train::float_model::FloatModel;

/// One row of the word-length sweep.
#[derive(Clone, Debug, Serialize)]
pub struct SweepRow {
    /// Weight word bits.
    pub weight_bits: u8,
    /// Input word bits.
    pub input_bits: u8,
    /// Accumulator bits.
    pub acc_bits: u8,
    /// Smallest fixed margin (LSB of that format) over correct units.
    pub min_margin_lsb: Option<f64>,
    /// The same relative to the bound (margin / bound): above 1 means guaranteed.
    pub margin_over_bound: Option<f64>,
    /// Decision flips.
    pub flips: usize,
    /// Guarantee holds.
    pub guaranteed: bool,
    /// Gate passed.
    pub passed: bool,
    /// Blob bytes.
    pub blob_bytes: usize,
    /// The arithmetic the device kernel runs the format in: 32 or 64 bits
    /// (`CheckedModel::is_narrow`). Not the accumulator's proved width: a 32-bit
    /// accumulator still runs in 64 bits when a channel's range is not ADC-sized.
    pub kernel_bits: u8,
    /// About how many instructions one classification takes on a Cortex-M0 and a
    /// Cortex-M3 (the footprint model's measurement scaled to this model's channels),
    /// window features not included (they cost the same in every format).
    pub kernel_instructions: (usize, usize),
}

/// A format's cost on the device: the instructions classify took on the footprint model.
fn kernel_instructions(channels: usize, narrow: bool) -> (usize, usize) {
    // Measured by firmware/qemu-app/footprint.sh (16 channels, QEMU instruction trace,
    // 2026-12-02): classify takes 714 (Cortex-M0) / 426 (Cortex-M3) instructions in 32-bit
    // arithmetic, 2,378 / 520 in 64-bit. Scaled per channel here.
    let (m0, m3) = if narrow { (714, 426) } else { (2378, 520) };
    (m0 * channels / 16, m3 * channels / 16)
}

/// Weight word lengths the sweep tries, for each input word length in [`SWEEP_INPUTS`].
pub const SWEEP_WEIGHTS: [u8; 5] = [8, 12, 16, 24, 32];
/// Input word lengths the sweep tries.
pub const SWEEP_INPUTS: [u8; 2] = [8, 16];

/// The word-length sweep: weights 8/12/16/24/32 × inputs 8/16. Returns rows and the recommended
/// row: the passing format with the narrowest weights, then the narrowest inputs.
///
/// Each format costs one quantisation (with its margin search on the training log) and one
/// audit of every log: the same work as an audit, ten times. With `progress`, a bar on
/// stderr names the format being tried and estimates the time left.
///
/// # Errors
/// A [`QuantError`] other than a refused format (refused formats appear as failing rows).
pub fn sweep(
    fm: &FloatModel,
    train: &Dataset,
    others: &[(&str, &Dataset)],
    base: QuantConfig,
    cfg: AuditConfig,
    progress: bool,
) -> Result<(Vec<SweepRow>, Option<usize>), QuantError> {
    let mut rows = Vec::new();
    let formats = SWEEP_INPUTS.len() * SWEEP_WEIGHTS.len();
    let bar = progress.then(|| {
        crate::progress::ticking_bar(
            formats as u64,
            "word-length sweep: {msg} [{bar:20}] {pos}/{len} formats, {elapsed} elapsed, about {eta} left",
        )
    });
    for input_bits in SWEEP_INPUTS {
        for weight_bits in SWEEP_WEIGHTS {
            if let Some(b) = &bar {
                b.set_message(format!(
                    "{weight_bits}-bit weights × {input_bits}-bit inputs"
                ));
            }
            let qc = QuantConfig {
                input_bits,
                weight_bits,
                acc_bits: None,
                ..base
            };
            let q = quantise(fm, Some(train), qc)?;
            let r = audit(&q, fm, train, others, &[], cfg);
            let n = q.model.channel_count();
            let min = r
                .sets
                .iter()
                .filter_map(|s| s.min_margin_lsb)
                .fold(None, |a: Option<f64>, v| Some(a.map_or(v, |a| a.min(v))));
            rows.push(SweepRow {
                weight_bits,
                input_bits,
                acc_bits: r.acc_bits,
                min_margin_lsb: min,
                margin_over_bound: min.map(|m| m / r.bound.total),
                flips: r.sets.iter().map(|s| s.flips).sum(),
                guaranteed: r.guaranteed,
                passed: r.passed,
                blob_bytes: r.blob_bytes,
                kernel_bits: if q.model.is_narrow() { 32 } else { 64 },
                kernel_instructions: kernel_instructions(n, q.model.is_narrow()),
            });
            if let Some(b) = &bar {
                b.inc(1);
            }
        }
    }
    let best = recommended(&rows);
    Ok((rows, best))
}

/// The recommended row: the passing format with the narrowest weights, then the narrowest
/// inputs; `None` when no format passes.
fn recommended(rows: &[SweepRow]) -> Option<usize> {
    rows.iter()
        .enumerate()
        .filter(|(_, r)| r.passed)
        .min_by_key(|(_, r)| (r.weight_bits, r.input_bits))
        .map(|(i, _)| i)
}
#[cfg(test)]
mod tests {
    use super::*;

    /// The footprint measurement itself at 16 channels, and scaled by hand: 8 channels take
    /// half (357 / 213, 1,189 / 260), 3 channels 714·3/16 = 133.875 → 133 and 426·3/16 =
    /// 79.875 → 79 (whole instructions, rounded down).
    #[test]
    fn kernel_cost_scales_with_the_channels() {
        assert_eq!(kernel_instructions(16, true), (714, 426));
        assert_eq!(kernel_instructions(16, false), (2378, 520));
        assert_eq!(kernel_instructions(8, true), (357, 213));
        assert_eq!(kernel_instructions(8, false), (1189, 260));
        assert_eq!(kernel_instructions(3, true), (133, 79));
    }

    fn row(weight_bits: u8, input_bits: u8, passed: bool) -> SweepRow {
        SweepRow {
            weight_bits,
            input_bits,
            acc_bits: 32,
            min_margin_lsb: None,
            margin_over_bound: None,
            flips: 0,
            guaranteed: passed,
            passed,
            blob_bytes: 0,
            kernel_bits: 32,
            kernel_instructions: (0, 0),
        }
    }

    /// In the sweep's order (inputs 8 then 16, weights rising): 8-bit weights fail at both
    /// input widths, 12-bit weights pass at 16-bit inputs only, 16-bit weights pass at both;
    /// the narrowest weights that pass win over narrower inputs (row 6, 12 × 16).
    #[test]
    fn the_narrowest_passing_weights_are_recommended() {
        let rows = [
            row(8, 8, false),
            row(12, 8, false),
            row(16, 8, true),
            row(24, 8, true),
            row(32, 8, true),
            row(8, 16, false),
            row(12, 16, true),
            row(16, 16, true),
        ];
        assert_eq!(recommended(&rows), Some(6));
        assert_eq!(recommended(&rows[..6]), Some(2));
        assert_eq!(recommended(&[row(8, 8, false)]), None);
    }
}
