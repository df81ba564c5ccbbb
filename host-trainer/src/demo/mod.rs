//! The built-in demo: an invented end-of-line test station for a small brushless
//! cooling-fan module. ALL DATA HERE IS SYNTHETIC, generated from a seed.
//!
//! Two scenarios of the same station go through one flow ([`flow`]: data, train, audit,
//! pack, replay): [`readings`], one number per sensor, and [`signals`], windows of samples
//! whose features the device computes.

pub mod flow;
pub mod readings;
pub mod signals;
#[cfg(test)]
mod units_reference;

use std::path::{Path, PathBuf};

pub use flow::{DemoError, MODEL_REGION, Outcome};

use crate::output::OutputSet;

/// What the demo did, for the terminal summary.
pub struct DemoSummary {
    /// The readings scenario (its checked log: the second shift's).
    pub readings: Outcome,
    /// The signal scenario (features computed from sample windows).
    pub signals: Outcome,
    /// Files written.
    pub files: Vec<PathBuf>,
}

/// Runs the whole job on synthetic data into `out`: both scenarios, one after the other.
///
/// # Errors
/// [`DemoError`]; nothing is written unless every step succeeded.
pub fn run(out: &Path, force: bool) -> Result<DemoSummary, DemoError> {
    // The scratch folder lives in `out`, under the set's lock: removed when the set ends,
    // and by the next writer into `out` if this run is killed.
    let mut set = OutputSet::default();
    let tmp = set.scratch_dir(out)?;
    let readings = flow::run_scenario(&readings::scenario(), &tmp, out, &mut set)?;
    let signals = flow::run_scenario(&signals::scenario(), &tmp, out, &mut set)?;
    let files = set.commit(force)?;
    Ok(DemoSummary {
        readings,
        signals,
        files,
    })
}
