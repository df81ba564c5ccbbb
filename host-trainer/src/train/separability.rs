//! Exact linear-separability test.
//!
//! Two classes are linearly separable exactly when their convex hulls do not
//! meet. The test solves the linear programme
//!
//! ```text
//! find λ ≥ 0 with  Σ_{GO} λᵢ = 1,  Σ_{NO-GO} λᵢ = 1,  Σ λᵢ·yᵢ·xᵢ = 0
//! ```
//!
//! (a point common to both hulls). Feasible: not separable, and a basic
//! solution names at most d + 2 units that no hyperplane can split.
//!
//! The hard-margin solver computes the same geometry from the other side: the
//! nearest points of the two hulls (Wolfe's exact active-set algorithm). Every
//! verdict is verified before it is reported: "separable" only with a
//! separator that puts every unit strictly on its side; "not separable" only
//! with λ that satisfy the LP's equations to 1e-9. The full LP runs on logs of
//! up to [`LP_FULL_LIMIT`] units; on larger logs it runs on the units the
//! nearest-points solution names (those that keep the hulls from parting), and
//! on all units only if that does not certify.

use microlp::{ComparisonOp, OptimizationDirection, Problem};
use serde::Serialize;

use crate::train::extent::radius;
use crate::train::linear::Linear;
use crate::train::maxmargin::max_margin;
use crate::train::novikoff::homogeneous_bounds;
use crate::train::perceptron::{PerceptronConfig, PerceptronKind, PerceptronRun, perceptron};
use crate::train::svm::SvmConfig;
use crate::train::task::AsBinary;

/// A unit named in a report.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct UnitRef {
    /// Index in the dataset.
    pub index: usize,
    /// 1-based line in the log.
    pub line: u64,
    /// Unit id or "line N".
    pub unit: String,
    /// "GO" or "NO-GO".
    pub label: &'static str,
    /// Dual weight (support units) or hull weight λ (conflicting units).
    pub weight: f64,
}

/// The margin expressed along one channel, in its physical unit.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ChannelMargin {
    /// Channel name.
    pub channel: String,
    /// How far a support unit must move along this channel alone to reach the boundary.
    pub margin: f64,
    /// Physical unit.
    pub unit: String,
}

/// Everything `linegate check` reports.
#[derive(Clone, Debug, Serialize)]
pub struct SeparabilityReport {
    /// Units examined.
    pub units: usize,
    /// Channels.
    pub channels: usize,
    /// The LP's verdict.
    pub separable: bool,
    /// γ*: the free-bias maximum margin in scaled units (each channel's range is [-1, 1]).
    pub margin: Option<f64>,
    /// γ* along each channel, in physical units.
    pub margin_physical: Vec<ChannelMargin>,
    /// Support units of the maximum-margin separator.
    pub support: Vec<UnitRef>,
    /// Units whose hulls meet: no hyperplane splits them (when not separable).
    pub conflict: Vec<UnitRef>,
    /// R = max ‖(x, 1)‖ over the units, in scaled units.
    pub radius: f64,
    /// The perceptron theorem's γ: unit-norm separator through the origin of z = (x, 1)/R.
    pub novikoff_margin: Option<f64>,
    /// Novikoff's bound 1/γ² on perceptron updates.
    pub novikoff_bound: Option<f64>,
    /// Why the Novikoff figures are missing, or how far they are settled when only bounds
    /// were proved (then `novikoff_margin` is the certified lower bound on γ).
    pub novikoff_note: Option<String>,
    /// Updates the classic perceptron actually made (`None` when no run was asked for).
    pub perceptron_updates: Option<u64>,
    /// Epochs it ran.
    pub perceptron_epochs: Option<u32>,
    /// Whether it converged within the epoch cap.
    pub perceptron_converged: Option<bool>,
    /// How the verdict was reached and certified.
    pub decided_by: String,
    /// The maximum-margin separator (when separable).
    #[serde(skip)]
    pub separator: Option<Linear>,
}

/// Logs up to this many units always get the full LP.
pub const LP_FULL_LIMIT: usize = 20_000;

/// Margins below this (scaled units) cannot be told from touching hulls in f64.
pub const MIN_MARGIN: f64 = 1e-9;

/// Solves the hull-intersection LP on `idx`; returns the conflicting units with their λ,
/// verified against the LP's equations, or `None` if the LP is infeasible or its answer
/// does not verify.
pub fn hull_intersection(task: &impl AsBinary, idx: &[usize]) -> Option<Vec<(usize, f64)>> {
    let task = task.binary();
    let ds = task.ds;
    let d = ds.dim();
    let mut lp = Problem::new(OptimizationDirection::Minimize);
    let vars: Vec<_> = idx.iter().map(|_| lp.add_var(0.0, (0.0, 1.0))).collect();
    for class in [1i8, -1] {
        let terms: Vec<_> = vars
            .iter()
            .zip(idx)
            .filter(|&(_, &i)| task.signs[i] == class)
            .map(|(&v, _)| (v, 1.0))
            .collect();
        lp.add_constraint(terms.as_slice(), ComparisonOp::Eq, 1.0);
    }
    let mut x = vec![0.0; d];
    let mut rows: Vec<Vec<(microlp::Variable, f64)>> = vec![Vec::with_capacity(idx.len()); d];
    for (&v, &i) in vars.iter().zip(idx) {
        ds.scaled_row(i, &mut x);
        for (row, xj) in rows.iter_mut().zip(&x) {
            if *xj != 0.0 {
                row.push((v, task.y(i) * xj));
            }
        }
    }
    for row in rows {
        lp.add_constraint(row.as_slice(), ComparisonOp::Eq, 0.0);
    }
    let sol = lp.solve().ok()?;
    let mut conflict: Vec<(usize, f64)> = vars
        .iter()
        .zip(idx)
        .map(|(&v, &i)| (i, *sol.var_value(v)))
        .filter(|(_, l)| *l > 1e-12)
        .collect();
    conflict.sort_by_key(|c| c.0);
    Some(conflict)
}

/// Which of the check's figures beyond the verdict, γ* and the separator to compute.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Figures {
    /// γ*, the support units, the physical margins and the maximum-margin separator: the
    /// hard-margin solve. Without it, a converged perceptron settles the verdict alone.
    pub margin: bool,
    /// Novikoff's γ and bound: a second hard-margin solve, on (x, 1)/R through the origin.
    pub novikoff: bool,
    /// A run of the classic perceptron (epochs, updates, converged) to show beside the bound.
    pub perceptron: bool,
}

impl Figures {
    /// Everything: what `linegate check` shows.
    pub const ALL: Self = Self {
        margin: true,
        novikoff: true,
        perceptron: true,
    };
    /// The verdict only: what training a perceptron needs.
    pub const VERDICT: Self = Self {
        margin: false,
        novikoff: false,
        perceptron: false,
    };
}

/// Runs the full separability analysis on the units `idx`.
pub fn check(task: &impl AsBinary, idx: &[usize], epochs: u32, seed: u64) -> SeparabilityReport {
    check_with(task, idx, epochs, seed, Figures::ALL, None)
}

/// The separability analysis with only the `figures` asked for. `run` is a classic
/// perceptron run on `idx` with `epochs` and `seed` the caller has made (its training run),
/// used instead of a second. A classic perceptron that converges proves the log separable:
/// the hard-margin and Novikoff solves then run side by side, or, when neither figure is
/// asked for, not at all (its separator is checked on every unit instead).
pub fn check_with(
    task: &impl AsBinary,
    idx: &[usize],
    epochs: u32,
    seed: u64,
    figures: Figures,
    run: Option<&PerceptronRun>,
) -> SeparabilityReport {
    let task = task.binary();
    let ds = task.ds;
    let unit_ref = |i: usize, weight: f64| UnitRef {
        index: i,
        line: ds.lines[i],
        unit: ds.unit_name(i),
        label: if task.signs[i] > 0 { "GO" } else { "NO-GO" },
        weight,
    };
    let r = radius(ds, idx);
    let own = (figures.perceptron && run.is_none()).then(|| {
        perceptron(
            &task,
            idx,
            PerceptronKind::Classic,
            PerceptronConfig { epochs, seed },
        )
    });
    let run = run.or(own.as_ref());
    let mut report = SeparabilityReport {
        units: idx.len(),
        channels: ds.dim(),
        separable: false,
        margin: None,
        margin_physical: Vec::new(),
        support: Vec::new(),
        conflict: Vec::new(),
        radius: r,
        novikoff_margin: None,
        novikoff_bound: None,
        novikoff_note: (!figures.novikoff).then(|| {
            "not computed (linegate check --novikoff computes Novikoff's γ and bound)".to_string()
        }),
        perceptron_updates: run.map(|p| p.updates),
        perceptron_epochs: run.map(|p| p.epochs),
        perceptron_converged: run.map(|p| p.converged),
        decided_by: String::new(),
        separator: None,
    };
    // A converged perceptron has proved separability: Novikoff's solve cannot be wasted, so
    // it runs beside the hard margin instead of after it.
    let proved = run.filter(|p| p.converged && p.model.geometric_margin(&task, idx) > 0.0);
    if let (false, false, Some(p)) = (figures.margin, figures.novikoff, proved) {
        report.separable = true;
        report.decided_by =
            "the classic perceptron converged: its separator classifies every unit correctly (γ* not computed)".into();
        report.separator = Some(p.model.clone());
        return report;
    }
    let proved = proved.is_some();
    let (svm, early_bounds) = if figures.novikoff && proved {
        rayon::join(
            || max_margin(&task, idx, SvmConfig::hard()),
            || Some(homogeneous_bounds(&task, idx, r)),
        )
    } else {
        (max_margin(&task, idx, SvmConfig::hard()), None)
    };
    // The full LP decides whenever the log is small enough for it.
    let full_lp = (idx.len() <= LP_FULL_LIMIT).then(|| hull_intersection(&task, idx));
    // A converged hard-margin run has checked its separator on every unit of `idx` already.
    let separator_ok =
        svm.margin > MIN_MARGIN && (svm.converged || svm.model.geometric_margin(&task, idx) > 0.0);
    let not_separable_note = Some(
        "not separable: the Novikoff bound does not apply (the classic perceptron never stops on such a log)".to_string(),
    );
    if let Some(Some(conflict)) = full_lp {
        report.novikoff_note = not_separable_note.filter(|_| figures.novikoff);
        // A verified common point of both hulls: no separator can exist.
        report.decided_by =
            "LP: the convex hulls of GO and NO-GO meet (certificate verified)".into();
        report.conflict = conflict.into_iter().map(|(i, l)| unit_ref(i, l)).collect();
        return report;
    }
    if !separator_ok {
        report.novikoff_note = not_separable_note.filter(|_| figures.novikoff);
        // Above the LP limit: certify on the units that keep the hulls from parting first.
        let scores = svm.model.scores(ds, idx);
        let mut cand: Vec<usize> = svm.support.iter().map(|s| s.0).collect();
        cand.extend(
            idx.iter()
                .zip(&scores)
                .filter(|&(&i, s)| task.y(i) * s <= 1.0)
                .map(|(&i, _)| i)
                .take(LP_FULL_LIMIT),
        );
        cand.sort_unstable();
        cand.dedup();
        let mut conflict = hull_intersection(&task, &cand);
        if conflict.is_none() && full_lp.is_none() {
            conflict = hull_intersection(&task, idx);
        }
        report.decided_by = match conflict {
            Some(_) => "LP on the units nearest the other class: the hulls meet (certificate verified)".into(),
            None => "no separator with margin above 1e-9 exists (nearest hull points); LP gave no certificate".into(),
        };
        report.conflict = conflict
            .unwrap_or_default()
            .into_iter()
            .map(|(i, l)| unit_ref(i, l))
            .collect();
        return report;
    }
    report.decided_by = match full_lp {
        Some(None) => "LP: the hulls are disjoint; separator verified on every unit".into(),
        _ => format!("separator verified on every unit (LP skipped above {LP_FULL_LIMIT} units)"),
    };
    report.separable = true;
    report.margin = Some(svm.margin);
    report.margin_physical = ds
        .scales
        .iter()
        .zip(&svm.model.w)
        .map(|(s, w)| ChannelMargin {
            channel: s.name.clone(),
            margin: if *w == 0.0 {
                f64::INFINITY
            } else {
                s.half as f64 * s.lsb / w.abs()
            },
            unit: s.unit.clone(),
        })
        .collect();
    report.support = svm.support.iter().map(|&(i, a)| unit_ref(i, a)).collect();
    if !figures.novikoff {
        report.separator = Some(svm.model);
        return report;
    }
    let bounds = early_bounds.unwrap_or_else(|| homogeneous_bounds(&task, idx, r));
    match bounds {
        Some(b) if b.upper - b.lower <= 1e-9 * b.upper => {
            report.novikoff_margin = Some(b.upper);
            report.novikoff_bound = Some(1.0 / (b.upper * b.upper));
        }
        // A separator through the origin was found but the solver's limit came before the
        // bounds met: γ ≥ lower still gives a valid (looser) bound on the updates.
        Some(b) => {
            report.novikoff_margin = Some(b.lower);
            report.novikoff_bound = Some(1.0 / (b.lower * b.lower));
            report.novikoff_note = Some(format!(
                "γ is between {:.6e} and {:.6e}; the bound uses the certified lower value",
                b.lower, b.upper
            ));
        }
        None => {
            report.novikoff_note = Some(
                "no separator through the origin with the constant-1 feature was certified within the solver's limit, so γ and the bound are not given".into(),
            );
        }
    }
    report.separator = Some(svm.model);
    report
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ingest::dataset::Dataset;

    #[test]
    fn xor_is_not_separable_and_all_four_points_conflict() {
        // XOR: the classic non-separable set (any text on the perceptron).
        let pts = [
            vec![-0.5, -0.5],
            vec![0.5, 0.5],
            vec![-0.5, 0.5],
            vec![0.5, -0.5],
        ];
        let ds = Dataset::from_scaled(&pts, &[1, 1, -1, -1]);
        let r = check(&ds, &ds.all(), 20, 1);
        assert!(!r.separable);
        assert_eq!(r.conflict.len(), 4);
        assert_eq!(r.perceptron_converged, Some(false));
    }
}
