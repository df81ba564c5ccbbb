//! Maximum-margin linear classifiers: their settings, their result, and which solver a
//! problem goes to.
//!
//! - C = ∞: the hard-margin, free-bias SVM, solved exactly as the nearest points of the two
//!   classes' hulls ([`crate::train::hard_margin`]).
//! - Finite C: the soft-margin SVM, min ½‖w‖² + C·Σξ subject to yᵢ(w·xᵢ + b) ≥ 1 − ξᵢ, by SMO
//!   on a growing working set ([`crate::train::soft_margin`]) up to [`SMO_LIMIT`] units, and
//!   by Newton on the primal ([`crate::train::soft_dual`]) above it or when SMO stalls.
//!
//! Novikoff's figures (the margin through the origin the perceptron theorem speaks of) are
//! the same geometry in another convention: [`crate::train::novikoff`].

use crate::train::hard_margin::hard_margin;
use crate::train::linear::Linear;
pub use crate::train::soft_margin::SMO_LIMIT;
use crate::train::soft_margin::{large_soft_margin, smo_margin};
use crate::train::spread::Spread;
use crate::train::task::AsBinary;

/// Settings of the maximum-margin solver.
#[derive(Clone, Copy, Debug)]
pub struct SvmConfig {
    /// Soft-margin penalty; `f64::INFINITY` for the hard margin.
    pub c: f64,
    /// Stopping tolerance on the optimality gap.
    pub tol: f64,
    /// Cap on solver iterations (all rounds together).
    pub max_iter: u64,
    /// Multipliers of C for GO and NO-GO units: (1, 1) weighs both classes alike.
    pub class_weight: ClassWeight,
    /// Train the soft margin on each channel's standard score over the training units
    /// ([`Spread`]) instead of on device-scaled units; the model comes back over device units.
    pub standardise: bool,
}

/// Multipliers of the soft-margin penalty C per class: a unit of a class with weight 3 costs
/// three times as much inside the margin.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClassWeight {
    /// Weight of GO units.
    pub go: f64,
    /// Weight of NO-GO units.
    pub nogo: f64,
}

impl ClassWeight {
    /// Both classes alike.
    pub const EVEN: Self = Self { go: 1.0, nogo: 1.0 };

    /// The weight of a unit labelled `y` (±1).
    pub(crate) fn of(self, y: f64) -> f64 {
        if y > 0.0 { self.go } else { self.nogo }
    }
}

impl SvmConfig {
    /// The hard-margin solver.
    pub fn hard() -> Self {
        Self {
            c: f64::INFINITY,
            tol: 1e-10,
            max_iter: 20_000_000,
            class_weight: ClassWeight::EVEN,
            standardise: false,
        }
    }

    /// A soft-margin solver with penalty `c` on device-scaled units, both classes alike.
    pub fn soft(c: f64) -> Self {
        Self {
            c,
            tol: 1e-8,
            max_iter: 20_000_000,
            class_weight: ClassWeight::EVEN,
            standardise: false,
        }
    }
}

/// The solution of a maximum-margin problem.
#[derive(Clone, Debug)]
pub struct SvmRun {
    /// The classifier, on scaled inputs, normalised so support units score ±1.
    pub model: Linear,
    /// Support units (α > 0) with their dual weights.
    pub support: Vec<(usize, f64)>,
    /// Solver iterations.
    pub iterations: u64,
    /// True if the optimality gap fell below the tolerance. For the hard margin this includes
    /// the certificate: the separator was checked on every unit and puts each on its side.
    pub converged: bool,
    /// Geometric margin 1/‖w‖ (for the hard margin: the maximum margin γ*).
    pub margin: f64,
    /// The soft margin's primal objective ½‖w‖² + Σ Cᵢξᵢ in the space it was solved in
    /// (standard scores when `spread` is set); `None` for the hard margin.
    pub objective: Option<f64>,
    /// The training units' spread the soft margin was solved over, if standardised.
    pub spread: Option<Spread>,
}

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
