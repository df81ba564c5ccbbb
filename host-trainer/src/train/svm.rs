//! What the maximum-margin solvers take and give: [`SvmConfig`] (C, tolerance, class
//! weights, standard scores) and [`SvmRun`] (the separator, its support units, the margin,
//! the objective). A room of its own so that the solvers ([`crate::train::hard_margin`],
//! [`crate::train::soft_margin`]) and the entry point that picks one
//! ([`crate::train::maxmargin`]) all import it and none imports another back.

use crate::train::linear::Linear;
use crate::train::spread::Spread;

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
