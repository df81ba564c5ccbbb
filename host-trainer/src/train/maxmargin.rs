//! Maximum-margin linear classifiers: which solver a problem goes to.
//!
//! - C = ∞: the hard-margin, free-bias SVM, solved exactly as the nearest points of the two
//!   classes' hulls ([`crate::train::hard_margin`]).
//! - Finite C: the soft-margin SVM, min ½‖w‖² + C·Σξ subject to yᵢ(w·xᵢ + b) ≥ 1 − ξᵢ, by SMO
//!   on a growing working set ([`crate::train::soft_margin`]) up to [`SMO_LIMIT`] units, and
//!   by Newton on the primal ([`crate::train::soft_dual`]) above it or when SMO stalls.
//!
//! The settings and the result are [`crate::train::svm`]'s (re-exported here, where callers
//! meet them). Novikoff's figures (the margin through the origin the perceptron theorem
//! speaks of) are the same geometry in another convention: [`crate::train::novikoff`].

use crate::train::hard_margin::hard_margin;
use crate::train::soft_margin::SMO_LIMIT;
use crate::train::soft_margin::{large_soft_margin, smo_margin};
use crate::train::svm::{SvmConfig, SvmRun};
use crate::train::task::AsBinary;

/// Trains the free-bias maximum-margin classifier on the units `idx`.
pub fn max_margin(task: &impl AsBinary, idx: &[usize], cfg: SvmConfig) -> SvmRun {
    let task = task.binary();
    if cfg.c.is_infinite() {
        return hard_margin(task, idx, cfg.max_iter);
    }
    if idx.len() > SMO_LIMIT {
        return large_soft_margin(task, idx, cfg);
    }
    // SMO crawls when C is large and the classes overlap (hundreds of thousands of pair
    // steps on a few hundred units); past a budget in proportion to the units, the Newton
    // solve takes over.
    let budget = cfg
        .max_iter
        .min(SMO_STEPS_PER_UNIT * idx.len() as u64 + 2_000);
    let run = smo_margin(
        task,
        idx,
        SvmConfig {
            max_iter: budget,
            ..cfg
        },
    );
    if run.converged {
        return run;
    }
    large_soft_margin(task, idx, cfg)
}

/// SMO pair steps allowed per unit before the Newton solve takes over.
const SMO_STEPS_PER_UNIT: u64 = 50;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ingest::dataset::Dataset;

    #[test]
    fn cross_validation_folds_take_like_numbers_of_cycles() {
        // The goal stated for the solver: no fold more than 5× the median major-cycle count of
        // its siblings (a stalled fold ran 1,000,209 cycles against 295–336). Iteration counts,
        // not times, so the test means the same on any machine.
        let dir = tempfile::tempdir().unwrap();
        let log = dir.path().join("g.csv");
        let mut text = Vec::new();
        crate::synth::write_log(&mut text, 30_000, 16, 0.02, 1).unwrap();
        std::fs::write(&log, text).unwrap();
        let sheet = dir.path().join("g.toml");
        std::fs::write(&sheet, crate::synth::sheet(16)).unwrap();
        let opts = crate::ingest::LogOptions::default();
        let (ds, _) =
            crate::workflow::load(std::slice::from_ref(&log), &opts, Some(&sheet)).unwrap();
        let folds = ds.folds(5, 1);
        let mut cycles: Vec<u64> = (0..folds.len())
            .map(|f| {
                let idx = Dataset::training_of_fold(&folds, f);
                let run = max_margin(&ds, &idx, SvmConfig::hard());
                assert!(run.converged, "fold {f} not certified");
                run.iterations
            })
            .collect();
        cycles.sort_unstable();
        let median = cycles[cycles.len() / 2];
        assert!(
            cycles.iter().all(|&c| c <= 5 * median),
            "major cycles per fold {cycles:?}"
        );
    }

    #[test]
    fn two_points_margin_is_half_their_distance() {
        // Worked example: the maximum-margin separator of two points is their perpendicular
        // bisector, with margin half their distance (any SVM textbook; common practice).
        let ds = Dataset::from_scaled(&[vec![0.6, 0.2], vec![-0.2, -0.4]], &[1, -1]);
        let run = max_margin(&ds, &ds.all(), SvmConfig::hard());
        let dist = (0.8f64 * 0.8 + 0.6 * 0.6).sqrt();
        assert!(run.converged);
        assert!(
            (run.margin - dist / 2.0).abs() < 1e-7,
            "{} vs {}",
            run.margin,
            dist / 2.0
        );
    }
}
