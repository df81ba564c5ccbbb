//! The audit of a model's signal features: each feature's proved range, the proof that its
//! integers cannot overflow, and the bound on how far declared sample noise moves it.
//!
//! The figures restate what [`CheckedFeature::new`] proves (shared-model, the code the device
//! runs), with the numbers filled in for the model's signals, so a reviewer can check each
//! inequality by hand. From the feature on, a feature is a channel's raw reading: the
//! audit's rounding bound and noise analysis cover it as they cover readings.

use serde::Serialize;
use shared_model::features::{CheckedFeature, Feature};

use crate::train::float_model::FloatModel;

/// One feature channel's audit.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FeatureProof {
    /// The channel.
    pub channel: String,
    /// The signal it is computed from.
    pub signal: String,
    /// The feature (the sheet's name), with the band's frequency in cycles per window.
    pub feature: String,
    /// Samples per window.
    pub window: u16,
    /// Valid raw samples.
    pub samples: (i32, i32),
    /// The raw count samples are measured from.
    pub offset: i32,
    /// A, the largest |sample − offset|.
    pub amplitude: u64,
    /// The proved range of the feature's integer: the channel's valid raw range.
    pub range: (i32, i32),
    /// The inequalities that keep every intermediate and the result in their words.
    pub proof: Vec<String>,
    /// Declared noise per sample, in counts (rounded up), if any.
    pub noise_counts: Option<u32>,
    /// The most that noise moves the feature's integer ([`CheckedFeature::noise_bound`]).
    pub noise_bound: Option<u64>,
    /// The same in the channel's physical unit, as the noise analysis uses it.
    pub noise_physical: Option<f64>,
    /// The channel's physical unit.
    pub unit: String,
    /// About how many instructions computing the feature over one window takes on a
    /// Cortex-M0 and a Cortex-M3: the window times the per-sample cost measured on the
    /// footprint model ([`per_sample_instructions`]).
    pub instructions: (u64, u64),
}

/// Instructions per sample, on Cortex-M0 and Cortex-M3, of each feature over a 1,024-sample
/// window of 12-bit samples, window validation included: measured by
/// `firmware/qemu-app/footprint.sh` (QEMU instruction trace, 2026-12-03; README table).
pub fn per_sample_instructions(f: Feature) -> (f64, f64) {
    match f {
        Feature::Mean => (32.6, 15.2),
        Feature::Rms => (73.4, 19.4),
        Feature::Min | Feature::Max => (33.6, 19.2),
        Feature::PeakToPeak => (47.6, 22.2),
        Feature::AbsPeak => (36.2, 24.2),
        Feature::StdDev => (82.9, 26.4),
        Feature::ZeroCrossings => (99.1, 36.2),
        Feature::Band { .. } => (371.3, 69.6),
    }
}

/// `n` with thousands separators, for proofs a person reads.
fn num(n: u128) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// The proof lines of one feature, with its numbers.
fn proof(f: &CheckedFeature, amplitude: u64) -> Vec<String> {
    let s = f.spec();
    let (n, a) = (u128::from(s.window), u128::from(amplitude));
    let bound = u128::from(f.bound().unsigned_abs());
    let word = "< 2^31 (i32 result)";
    match f.feature() {
        Feature::Mean => vec![format!(
            "|Σcᵢ| ≤ N·A = {}·{} = {} {word}; summed in i64",
            num(n),
            num(a),
            num(n * a)
        )],
        Feature::Rms => vec![
            format!(
                "Σcᵢ² ≤ N·A² = {} < 2^64 (u64 sum of squares)",
                num(n * a * a)
            ),
            format!("⌊√(Σcᵢ²)⌋ ≤ {} {word}", num(bound)),
        ],
        Feature::StdDev => vec![
            format!(
                "Σcᵢ² ≤ N·A² = {} < 2^64 (u64); N·Σcᵢ² ≤ {} < 2^128 (u128)",
                num(n * a * a),
                num(n * n * a * a)
            ),
            format!("⌊√(N·Σcᵢ² − (Σcᵢ)²)⌋ ≤ N·A = {} {word}", num(bound)),
        ],
        Feature::Min | Feature::Max | Feature::AbsPeak => {
            vec![format!("|cᵢ| ≤ A = {} {word}", num(a))]
        }
        Feature::PeakToPeak => vec![format!(
            "max sᵢ − min sᵢ ≤ raw_max − raw_min = {} {word}",
            num(bound)
        )],
        Feature::ZeroCrossings => vec![format!("count ≤ N − 1 = {}", num(n - 1))],
        Feature::Band { coeff } => {
            let states = ((2 * a + 1) * n * (n + 1)).div_ceil(4);
            vec![
                format!("coefficient C = {coeff}, |C| ≤ 2^30"),
                format!(
                    "|state| ≤ S = (A + ½)·N(N + 1)/2 = {} < 2^62 (i64 states, i128 products)",
                    num(states)
                ),
                format!(
                    "magnitude ≤ N·A + N²/2 + √(S/2) + 1 ≤ {} {word}",
                    num(bound)
                ),
            ]
        }
    }
}

/// Every feature channel's audit, in channel order; empty for a model of readings.
pub fn feature_proofs(fm: &FloatModel) -> Vec<FeatureProof> {
    fm.channels
        .iter()
        .filter_map(|c| {
            let src = c.source.as_ref()?;
            let signal = fm.signals.iter().find(|s| s.name == src.signal)?;
            // `FloatModel::read` and training checked every feature; one that fails here
            // is left out of the table rather than reported with made-up figures.
            let f = src.checked(signal).ok()?;
            let amplitude = (i64::from(signal.offset) - i64::from(signal.raw_min))
                .max(i64::from(signal.raw_max) - i64::from(signal.offset))
                .unsigned_abs();
            let noise_counts = signal.noise_counts();
            let noise_bound = noise_counts.map(|d| f.noise_bound(d));
            let (m0, m3) = per_sample_instructions(f.feature());
            let n = f64::from(signal.window);
            Some(FeatureProof {
                channel: c.name.clone(),
                signal: signal.name.clone(),
                feature: match src.cycles {
                    Some(k) => format!("{} at {k} cycles per window", src.kind()),
                    None => src.kind().to_string(),
                },
                window: signal.window,
                samples: (signal.raw_min, signal.raw_max),
                offset: signal.offset,
                amplitude,
                range: f.range(),
                proof: proof(&f, amplitude),
                noise_counts,
                noise_bound,
                noise_physical: c.noise,
                unit: c.unit.clone(),
                instructions: ((m0 * n).round() as u64, (m3 * n).round() as u64),
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thousands_separators() {
        assert_eq!(num(0), "0");
        assert_eq!(num(999), "999");
        assert_eq!(num(1000), "1,000");
        assert_eq!(num(1_073_741_824), "1,073,741,824");
    }
}
