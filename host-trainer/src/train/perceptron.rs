//! Trainers of the perceptron family: classic (Novikoff form), averaged and pocket.
//!
//! The classic perceptron is run exactly as the convergence theorem states it:
//! append the constant-1 feature, divide every augmented vector by
//! R = max ‖(x, 1)‖ so all lie in the unit ball, start from w = 0, and on each
//! mistake (y·wᵀz ≤ 0) set w ← w + y·z. If a unit-norm w* separates the
//! augmented data with margin γ, there are at most 1/γ² updates (Novikoff).
//!
//! This room holds the update rules and the epoch loop; finding the next mistake fast is
//! [`crate::train::mistake_scan`]'s, and R is [`crate::train::extent`]'s.

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;
use std::sync::Arc;

use crate::ingest::dataset::RawForm;
use crate::train::extent::extent;
use crate::train::linear::Linear;
use crate::train::mistake_scan::{Lookahead, Screen, Weights, first_mistake};
use crate::train::task::{AsBinary, Binary};

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

/// Units per block of the perceptron's visit order.
const BLOCK: usize = 4096;

/// Trains a member of the perceptron family on the units `idx`.
pub fn perceptron(
    task: &impl AsBinary,
    idx: &[usize],
    kind: PerceptronKind,
    cfg: PerceptronConfig,
) -> PerceptronRun {
    let task = task.binary();
    let ds = task.ds;
    let d = ds.dim();
    let mut v = vec![0.0f64; d + 1];
    // Averaging by the standard trick: avg = v - u / c, with u accumulating c·y·z.
    let mut u = vec![0.0f64; d + 1];
    let mut c = 1.0f64;
    let mut pocket: Option<(usize, Vec<f64>)> = None;
    let mut z = vec![0.0f64; d + 1];
    // Visit order: a seeded shuffle of blocks of consecutive units, each block read in file
    // order. The theorem holds for any order; shuffling single units would cost a cache miss
    // per unit on large logs, streaming through a block costs none. A log of fewer than 64
    // blocks is cut into 64 (of at least 16 units), so that the seed orders small logs too.
    let block = BLOCK.min(idx.len().div_ceil(64).max(16));
    let mut blocks: Vec<&[usize]> = idx.chunks(block).collect();
    let mut rng = ChaCha8Rng::seed_from_u64(cfg.seed);
    let sc = ds.scaler();
    let (r, max_abs) = extent(ds, idx);
    let weights = |v: &[f64]| {
        let f = RawForm::augmented(ds, v, r);
        let screen = Screen::new(&f, &max_abs);
        Arc::new(Weights { f, screen })
    };
    let mut w = weights(&v);
    let (mut updates, mut epochs, mut converged) = (0u64, 0u32, false);
    let ahead = Lookahead::default();
    // A second thread scans the block after the current one with the same weights, when
    // there is a core for it: not inside a parallel job (cross-validation folds), and not
    // for logs of a few blocks, where starting a thread costs more than it saves.
    let spare_core = idx.len() >= 4 * BLOCK
        && rayon::current_thread_index().is_none()
        && std::thread::available_parallelism().is_ok_and(|n| n.get() >= 2);
    std::thread::scope(|scope| {
        let helper = spare_core.then(|| scope.spawn(|| ahead.serve(task)));
        // Should the thread end early (it can only by a panic, which the scope then raises),
        // its questions are withdrawn rather than waited for.
        let serving = || helper.as_ref().is_some_and(|h| !h.is_finished());
        let mut ticket = 0u64;
        while epochs < cfg.epochs {
            epochs += 1;
            blocks.shuffle(&mut rng);
            let mut mistakes = 0usize;
            // The next unit to visit is blocks[bi][start]; `posted` is the ticket of the
            // look-ahead scan of blocks[bi + 1] under the current weights.
            let (mut bi, mut start) = (0usize, 0usize);
            let mut posted: Option<u64> = None;
            while bi < blocks.len() {
                if spare_core && posted.is_none() && bi + 1 < blocks.len() {
                    ticket += 1;
                    ahead.post(ticket, blocks[bi + 1], Arc::clone(&w));
                    posted = Some(ticket);
                }
                // v·z/R is evaluated on the raw readings, (v·z)/R = Σ (vⱼ/(halfⱼ·R))·rawⱼ +
                // const, and the block is scanned in a tight loop up to its next mistake.
                let p = match first_mistake(&w.f, &w.screen, task, &blocks[bi][start..]) {
                    Some(p) => start + p,
                    None => {
                        c += (blocks[bi].len() - start) as f64;
                        (bi, start) = (bi + 1, 0);
                        match posted.take().and_then(|t| ahead.result(t, serving)) {
                            // The look-ahead found the next block clean: skip it.
                            Some(None) => {
                                c += blocks[bi].len() as f64;
                                bi += 1;
                                continue;
                            }
                            Some(Some(p)) => p,
                            None => continue,
                        }
                    }
                };
                let i = blocks[bi][p];
                c += (p - start) as f64;
                let y = task.y(i);
                sc.row(ds, i, &mut z[..d]);
                z[d] = 1.0;
                for ((vj, uj), zj) in v.iter_mut().zip(u.iter_mut()).zip(&z) {
                    *vj += y * zj / r;
                    *uj += c * y * zj / r;
                }
                // New weights: a look-ahead under the old ones is void.
                ahead.cancel();
                posted = None;
                w = weights(&v);
                updates += 1;
                mistakes += 1;
                c += 1.0;
                start = p + 1;
            }
            if kind == PerceptronKind::Pocket {
                let errors = errors_of(task, idx, &v, r);
                if pocket.as_ref().is_none_or(|(e, _)| errors < *e) {
                    pocket = Some((errors, v.clone()));
                }
            }
            if mistakes == 0 {
                converged = true;
                break;
            }
        }
        ahead.stop();
    });
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

fn errors_of(task: Binary<'_>, idx: &[usize], v: &[f64], r: f64) -> usize {
    let ds = task.ds;
    let d = ds.dim();
    let m = Linear {
        w: v[..d].iter().map(|a| a / r).collect(),
        b: v[d] / r,
    };
    m.scores(ds, idx)
        .iter()
        .zip(idx)
        .filter(|&(s, &i)| task.y(i) * *s <= 0.0)
        .count()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ingest::dataset::Dataset;
    use crate::train::mistake_scan::tests::{random_set, separated};

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
    fn the_seed_orders_small_logs_too() {
        // 600 units is less than one block of the large-log visit order: the seed must still
        // change the order, and so the run (the theorem allows any order).
        let side = |p: &[f64]| p[0] + 0.3 * p[1] - 0.2;
        let ds0 = random_set(600, 3, 4);
        let pts: Vec<Vec<f64>> = (0..ds0.len())
            .map(|i| {
                let mut x = vec![0.0; 3];
                ds0.scaled_row(i, &mut x);
                x
            })
            .filter(|p| side(p).abs() > 0.02)
            .collect();
        let labels: Vec<i8> = pts
            .iter()
            .map(|p| if side(p) > 0.0 { 1 } else { -1 })
            .collect();
        let ds = Dataset::from_scaled(&pts, &labels);
        let run = |seed| {
            perceptron(
                &ds,
                &ds.all(),
                PerceptronKind::Classic,
                PerceptronConfig { epochs: 1000, seed },
            )
        };
        let runs: Vec<PerceptronRun> = (1..=4).map(run).collect();
        assert!(runs.iter().all(|r| r.converged));
        assert!(
            runs.windows(2).any(|w| w[0].model != w[1].model),
            "four seeds gave one run"
        );
        // The same seed gives the same run.
        assert_eq!(run(2).model, runs[1].model);
    }

    #[test]
    fn look_ahead_gives_the_sequential_run_exactly() {
        // 40 000 units (ten blocks) on both sides of a hyperplane, none closer than 0.01 to
        // it: the first epochs have many mistakes, the last ones whole blocks without.
        let side = |p: &[f64]| p[0] - 0.5 * p[1] + 0.25 * p[3] - 0.1;
        let ds = separated(40_000, 5, 5, 0.01, side);
        let idx = ds.all();
        // Inside a rayon pool there is no look-ahead thread: the sequential scan.
        let sequential = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        for kind in [
            PerceptronKind::Classic,
            PerceptronKind::Averaged,
            PerceptronKind::Pocket,
        ] {
            let cfg = PerceptronConfig {
                epochs: 12,
                seed: 9,
            };
            let with = perceptron(&ds, &idx, kind, cfg);
            let without = sequential.install(|| perceptron(&ds, &idx, kind, cfg));
            assert!(with.updates > 1000, "{kind:?}: a run with many updates");
            assert_eq!(with.model, without.model, "{kind:?}");
            assert_eq!(
                (with.updates, with.epochs),
                (without.updates, without.epochs)
            );
        }
    }
}
