//! Trainers of the perceptron family, and the float linear model they produce.
//!
//! The classic perceptron is run exactly as the convergence theorem states it:
//! append the constant-1 feature, divide every augmented vector by
//! R = max ‖(x, 1)‖ so all lie in the unit ball, start from w = 0, and on each
//! mistake (y·wᵀz ≤ 0) set w ← w + y·z. If a unit-norm w* separates the
//! augmented data with margin γ, there are at most 1/γ² updates (Novikoff).

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;

use crate::dataset::{Dataset, RawForm};

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
        crate::dataset::dot(&self.w, x) + self.b
    }

    /// Scores of the units `idx` of `ds`.
    pub fn scores(&self, ds: &Dataset, idx: &[usize]) -> Vec<f64> {
        let mut x = vec![0.0; ds.dim()];
        idx.iter()
            .map(|&i| {
                ds.scaled_row(i, &mut x);
                self.score(&x)
            })
            .collect()
    }

    /// Euclidean norm of `w` (bias excluded).
    pub fn norm(&self) -> f64 {
        self.w.iter().map(|w| w * w).sum::<f64>().sqrt()
    }

    /// The smallest geometric margin y·(w·x + b)/‖w‖ over `idx` (negative if some unit is misclassified).
    pub fn geometric_margin(&self, ds: &Dataset, idx: &[usize]) -> f64 {
        let n = self.norm();
        self.scores(ds, idx)
            .iter()
            .zip(idx)
            .map(|(s, &i)| ds.y(i) * s / n)
            .fold(f64::INFINITY, f64::min)
    }
}

/// Which member of the perceptron family.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum PerceptronKind {
    /// The classic rule; stops at the first epoch without mistakes.
    Classic,
    /// Returns the average of all intermediate weight vectors.
    Averaged,
    /// Keeps the epoch-end weights with the fewest training errors.
    Pocket,
}

/// Settings shared by the perceptron family.
#[derive(Clone, Copy, Debug)]
pub struct PerceptronConfig {
    /// Epoch cap.
    pub epochs: u32,
    /// Seed of the per-epoch shuffle.
    pub seed: u64,
}

/// What a perceptron run did.
#[derive(Clone, Debug)]
pub struct PerceptronRun {
    /// The classifier, on scaled inputs.
    pub model: Linear,
    /// Mistake-driven updates made.
    pub updates: u64,
    /// Epochs run.
    pub epochs: u32,
    /// True if an epoch passed without a mistake.
    pub converged: bool,
    /// R = max ‖(x, 1)‖ over the training units.
    pub radius: f64,
}

/// Augmented radius R = max ‖(x, 1)‖ over `idx`.
pub fn radius(ds: &Dataset, idx: &[usize]) -> f64 {
    let mut x = vec![0.0; ds.dim()];
    idx.iter()
        .map(|&i| {
            ds.scaled_row(i, &mut x);
            (x.iter().map(|v| v * v).sum::<f64>() + 1.0).sqrt()
        })
        .fold(1.0, f64::max)
}

/// Position in `units` of the first unit on the wrong side of (or on) the boundary.
fn first_mistake(f: &RawForm, ds: &Dataset, units: &[usize]) -> Option<usize> {
    let d = ds.dim();
    if let (Some(&a), Some(&z)) = (units.first(), units.last()) {
        // A run of consecutive units: stream the rows directly.
        if z >= a && z - a + 1 == units.len() {
            let rows = ds.raw[a * d..(z + 1) * d].chunks_exact(d);
            return rows
                .zip(&ds.labels[a..=z])
                .position(|(row, &l)| f64::from(l) * f.score(row) <= 0.0);
        }
    }
    units
        .iter()
        .position(|&i| ds.y(i) * f.score(ds.raw_row(i)) <= 0.0)
}

/// Units per block of the perceptron's visit order.
const BLOCK: usize = 4096;

/// Trains a member of the perceptron family on the units `idx`.
pub fn perceptron(
    ds: &Dataset,
    idx: &[usize],
    kind: PerceptronKind,
    cfg: PerceptronConfig,
) -> PerceptronRun {
    let d = ds.dim();
    let r = radius(ds, idx);
    let mut v = vec![0.0f64; d + 1];
    // Averaging by the standard trick: avg = v - u / c, with u accumulating c·y·z.
    let mut u = vec![0.0f64; d + 1];
    let mut c = 1.0f64;
    let mut pocket: Option<(usize, Vec<f64>)> = None;
    let mut z = vec![0.0f64; d + 1];
    // Visit order: a seeded shuffle of blocks of consecutive units, each block read in file
    // order. The theorem holds for any order; shuffling single units would cost a cache miss
    // per unit on large logs, streaming through a block costs none.
    let mut blocks: Vec<&[usize]> = idx.chunks(BLOCK).collect();
    let mut rng = ChaCha8Rng::seed_from_u64(cfg.seed);
    let sc = ds.scaler();
    let mut on_raw = RawForm::augmented(ds, &v, r);
    let (mut updates, mut epochs, mut converged) = (0u64, 0u32, false);
    while epochs < cfg.epochs {
        epochs += 1;
        blocks.shuffle(&mut rng);
        let mut mistakes = 0usize;
        for b in &blocks {
            let mut start = 0;
            // v·z/R is evaluated on the raw readings, (v·z)/R = Σ (vⱼ/(halfⱼ·R))·rawⱼ + const,
            // and the block is scanned in a tight loop up to its next mistake.
            while let Some(p) = first_mistake(&on_raw, ds, &b[start..]) {
                let i = b[start + p];
                c += p as f64;
                let y = ds.y(i);
                sc.row(ds, i, &mut z[..d]);
                z[d] = 1.0;
                for ((vj, uj), zj) in v.iter_mut().zip(u.iter_mut()).zip(&z) {
                    *vj += y * zj / r;
                    *uj += c * y * zj / r;
                }
                on_raw = RawForm::augmented(ds, &v, r);
                updates += 1;
                mistakes += 1;
                c += 1.0;
                start += p + 1;
            }
            c += (b.len() - start) as f64;
        }
        if kind == PerceptronKind::Pocket {
            let errors = errors_of(ds, idx, &v, r);
            if pocket.as_ref().is_none_or(|(e, _)| errors < *e) {
                pocket = Some((errors, v.clone()));
            }
        }
        if mistakes == 0 {
            converged = true;
            break;
        }
    }
    let final_v = match kind {
        PerceptronKind::Classic => v,
        PerceptronKind::Averaged => v.iter().zip(&u).map(|(a, b)| a - b / c).collect(),
        PerceptronKind::Pocket => pocket.map_or(v, |(_, p)| p),
    };
    let model = Linear {
        w: final_v[..d].iter().map(|a| a / r).collect(),
        b: final_v[d] / r,
    };
    PerceptronRun {
        model,
        updates,
        epochs,
        converged,
        radius: r,
    }
}

fn errors_of(ds: &Dataset, idx: &[usize], v: &[f64], r: f64) -> usize {
    let d = ds.dim();
    let m = Linear {
        w: v[..d].iter().map(|a| a / r).collect(),
        b: v[d] / r,
    };
    m.scores(ds, idx)
        .iter()
        .zip(idx)
        .filter(|&(s, &i)| ds.y(i) * *s <= 0.0)
        .count()
}

/// The result of moving the threshold for asymmetric risk.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ThresholdShift {
    /// GO when score > threshold.
    pub threshold: f64,
    /// NO-GO training units that still pass.
    pub false_go: usize,
    /// GO training units turned away by the move (compared with threshold 0).
    pub go_lost: usize,
}

/// Raises the threshold so at most `max_false_go` NO-GO units of `idx` score above it.
pub fn threshold_for_false_go(
    model: &Linear,
    ds: &Dataset,
    idx: &[usize],
    max_false_go: usize,
) -> ThresholdShift {
    let scores = model.scores(ds, idx);
    let mut nogo: Vec<f64> = scores
        .iter()
        .zip(idx)
        .filter(|&(_, &i)| ds.labels[i] < 0)
        .map(|(s, _)| *s)
        .collect();
    nogo.sort_by(|a, b| b.total_cmp(a));
    let threshold = nogo
        .get(max_false_go)
        .copied()
        .unwrap_or(f64::NEG_INFINITY)
        .max(0.0);
    let false_go = nogo.iter().filter(|&&s| s > threshold).count();
    let go_lost = scores
        .iter()
        .zip(idx)
        .filter(|&(s, &i)| ds.labels[i] > 0 && *s > 0.0 && *s <= threshold)
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
    fn converges_on_a_separable_pair() {
        let ds = Dataset::from_scaled(&[vec![0.5, 0.5], vec![-0.5, -0.5]], &[1, -1]);
        let run = perceptron(
            &ds,
            &ds.all(),
            PerceptronKind::Classic,
            PerceptronConfig {
                epochs: 10,
                seed: 1,
            },
        );
        assert!(run.converged);
        assert!(run.model.geometric_margin(&ds, &ds.all()) > 0.0);
    }

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
        let t = threshold_for_false_go(&m, &ds, &ds.all(), 1);
        assert!(
            (t.threshold - 0.1).abs() < 1e-6 && t.false_go == 1 && t.go_lost == 0,
            "{t:?}"
        );
        let t = threshold_for_false_go(&m, &ds, &ds.all(), 0);
        assert!(
            (t.threshold - 0.3).abs() < 1e-6 && t.false_go == 0 && t.go_lost == 0,
            "{t:?}"
        );
    }
}
