//! The float linear model every trainer produces, and the threshold move for asymmetric risk.

use crate::ingest::dataset::Dataset;
use crate::train::task::AsBinary;

/// A float linear classifier on scaled inputs: GO when `w·x + b > threshold`.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Linear {
    /// Weights, one per channel.
    pub w: Vec<f64>,
    /// Bias.
    pub b: f64,
}

impl Linear {
    /// The score of a scaled input.
    #[inline]
    pub fn score(&self, x: &[f64]) -> f64 {
        crate::ingest::dataset::dot(&self.w, x) + self.b
    }

    /// Scores of the units `idx` of `ds`.
    pub fn scores(&self, ds: &Dataset, idx: &[usize]) -> Vec<f64> {
        use rayon::prelude::*;
        // In parallel, in the order of `idx`; each score is computed alone, so the values do
        // not depend on the threads.
        idx.par_iter()
            .map_init(
                || vec![0.0; ds.dim()],
                |x, &i| {
                    ds.scaled_row(i, x);
                    self.score(x)
                },
            )
            .collect()
    }

    /// Euclidean norm of `w` (bias excluded).
    pub fn norm(&self) -> f64 {
        self.w.iter().map(|w| w * w).sum::<f64>().sqrt()
    }

    /// The smallest geometric margin y·(w·x + b)/‖w‖ over `idx` (negative if some unit is misclassified).
    pub fn geometric_margin(&self, task: &impl AsBinary, idx: &[usize]) -> f64 {
        use rayon::prelude::*;
        let task = task.binary();
        let ds = task.ds;
        let n = self.norm();
        // The same score per unit as [`Linear::scores`], folded to its minimum where it is
        // made: no vector of a million scores to fill and read again. The minimum does not
        // depend on the order it is taken in, so neither does the result on the threads.
        idx.par_chunks(1 << 14)
            .map(|chunk| {
                let mut x = vec![0.0; ds.dim()];
                chunk.iter().fold(f64::INFINITY, |m, &i| {
                    ds.scaled_row(i, &mut x);
                    m.min(task.y(i) * self.score(&x) / n)
                })
            })
            .reduce(|| f64::INFINITY, f64::min)
    }
}

/// The result of moving the threshold for asymmetric risk.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ThresholdShift {
    /// GO when score > threshold.
    pub threshold: f64,
    /// NO-GO training units that still pass.
    pub false_go: usize,
    /// GO training units turned away by the move (compared with threshold 0).
    pub go_lost: usize,
}

/// Raises the threshold so at most `max_false_go` NO-GO units of `idx` score above it.
///
/// The threshold is put halfway between the highest NO-GO score that must stay NO-GO and
/// the next higher score of any unit, not on that score itself: a unit exactly on the
/// threshold is one rounding away from passing, in float (scores computed another way
/// differ in the last bit) and in fixed point.
pub fn threshold_for_false_go(
    model: &Linear,
    task: &impl AsBinary,
    idx: &[usize],
    max_false_go: usize,
) -> ThresholdShift {
    let task = task.binary();
    let ds = task.ds;
    let scores = model.scores(ds, idx);
    let mut nogo: Vec<f64> = scores
        .iter()
        .zip(idx)
        .filter(|&(_, &i)| !task.is_positive(i))
        .map(|(s, _)| *s)
        .collect();
    nogo.sort_by(|a, b| b.total_cmp(a));
    let threshold = match nogo.get(max_false_go).copied() {
        // Fewer NO-GO units than allowed to pass, or the one to stop is already well
        // below 0: the threshold stays at 0.
        None => 0.0,
        Some(s) if s < 0.0 => 0.0,
        Some(s) => {
            let next = scores
                .iter()
                .copied()
                .filter(|&x| x > s)
                .fold(f64::INFINITY, f64::min);
            if next.is_finite() {
                s + (next - s) / 2.0
            } else {
                s + s.abs().max(1.0) * 1e-9
            }
        }
    };
    let false_go = nogo.iter().filter(|&&s| s > threshold).count();
    let go_lost = scores
        .iter()
        .zip(idx)
        .filter(|&(s, &i)| task.is_positive(i) && *s > 0.0 && *s <= threshold)
        .count();
    ThresholdShift {
        threshold,
        false_go,
        go_lost,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn false_go_threshold_counts() {
        // Scores 0.9, 0.5 (GO), 0.3, 0.1 (NO-GO, both false GO at threshold 0).
        let ds = Dataset::from_scaled(
            &[vec![0.9], vec![0.5], vec![0.3], vec![0.1]],
            &[1, 1, -1, -1],
        );
        let m = Linear {
            w: vec![1.0],
            b: 0.0,
        };
        // One may pass: halfway between 0.1 (stays NO-GO) and 0.3, the next score up.
        let t = threshold_for_false_go(&m, &ds, &ds.all(), 1);
        assert!(
            (t.threshold - 0.2).abs() < 1e-6 && t.false_go == 1 && t.go_lost == 0,
            "{t:?}"
        );
        // None may pass: halfway between 0.3 and 0.5.
        let t = threshold_for_false_go(&m, &ds, &ds.all(), 0);
        assert!(
            (t.threshold - 0.4).abs() < 1e-6 && t.false_go == 0 && t.go_lost == 0,
            "{t:?}"
        );
    }
}
