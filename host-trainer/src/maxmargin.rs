//! Maximum-margin linear classifiers.
//!
//! - [`max_margin`]: the free-bias SVM, min ½‖w‖² + C·Σξ subject to
//!   yᵢ(w·xᵢ + b) ≥ 1 − ξᵢ (hard margin when C = ∞). Solved in the dual by
//!   sequential minimal optimisation with second-order working-set selection,
//!   on a working set of units that grows with the worst violators until every
//!   unit satisfies the optimality conditions.
//! - [`homogeneous_margin`]: the margin in the perceptron theorem's own
//!   convention: augmented z = (x, 1)/R, no free bias, unit-norm separator.
//!   Solved by dual coordinate descent.

use crate::dataset::Dataset;
use crate::trainer::Linear;

/// Settings of the maximum-margin solver.
#[derive(Clone, Copy, Debug)]
pub struct SvmConfig {
    /// Soft-margin penalty; `f64::INFINITY` for the hard margin.
    pub c: f64,
    /// Stopping tolerance on the optimality gap.
    pub tol: f64,
    /// Cap on solver iterations (all rounds together).
    pub max_iter: u64,
}

impl SvmConfig {
    /// The hard-margin solver.
    pub fn hard() -> Self {
        Self {
            c: f64::INFINITY,
            tol: 1e-10,
            max_iter: 20_000_000,
        }
    }

    /// A soft-margin solver with penalty `c`.
    pub fn soft(c: f64) -> Self {
        Self {
            c,
            tol: 1e-8,
            max_iter: 20_000_000,
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
    /// True if the optimality gap fell below the tolerance.
    pub converged: bool,
    /// Geometric margin 1/‖w‖ (for the hard margin: the maximum margin γ*).
    pub margin: f64,
}

/// Dense copy of the working set.
struct Work {
    d: usize,
    x: Vec<f64>,
    y: Vec<f64>,
    alpha: Vec<f64>,
    idx: Vec<usize>,
}

impl Work {
    fn push(&mut self, ds: &Dataset, i: usize) {
        let start = self.x.len();
        self.x.resize(start + self.d, 0.0);
        ds.scaled_row(i, &mut self.x[start..]);
        self.y.push(ds.y(i));
        self.alpha.push(0.0);
        self.idx.push(i);
    }
    fn row(&self, t: usize) -> &[f64] {
        &self.x[t * self.d..(t + 1) * self.d]
    }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Initial working set: up to `per_class` units of each class, evenly spread through the log.
fn initial(ds: &Dataset, idx: &[usize], per_class: usize) -> Vec<usize> {
    let mut out = Vec::new();
    for class in [1i8, -1] {
        let members: Vec<usize> = idx
            .iter()
            .copied()
            .filter(|&i| ds.labels[i] == class)
            .collect();
        let step = (members.len() / per_class).max(1);
        out.extend(members.iter().step_by(step).take(per_class));
    }
    out
}

/// Trains the free-bias maximum-margin classifier on the units `idx`.
pub fn max_margin(ds: &Dataset, idx: &[usize], cfg: SvmConfig) -> SvmRun {
    let d = ds.dim();
    let mut work = Work {
        d,
        x: Vec::new(),
        y: Vec::new(),
        alpha: Vec::new(),
        idx: Vec::new(),
    };
    let mut in_set = vec![false; ds.len()];
    for i in initial(ds, idx, 2000) {
        in_set[i] = true;
        work.push(ds, i);
    }
    let mut w = vec![0.0; d];
    let mut b = 0.0;
    let mut iterations = 0u64;
    let mut converged;
    let mut x = vec![0.0; d];
    loop {
        let (it, ok) = smo(
            &mut work,
            &mut w,
            &mut b,
            cfg,
            cfg.max_iter.saturating_sub(iterations),
        );
        iterations += it;
        converged = ok;
        if !ok {
            break;
        }
        // Units outside the set have α = 0, which is optimal only if y·f(x) ≥ 1.
        let mut violators: Vec<(f64, usize)> = idx
            .iter()
            .filter(|&&i| !in_set[i])
            .filter_map(|&i| {
                ds.scaled_row(i, &mut x);
                let m = ds.y(i) * (dot(&w, &x) + b);
                (m < 1.0 - 1e-9).then_some((m, i))
            })
            .collect();
        if violators.is_empty() {
            break;
        }
        violators.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        for &(_, i) in violators.iter().take(2000) {
            in_set[i] = true;
            work.push(ds, i);
        }
    }
    let support: Vec<(usize, f64)> = work
        .alpha
        .iter()
        .zip(&work.idx)
        .filter(|(a, _)| **a > 0.0)
        .map(|(a, &i)| (i, *a))
        .collect();
    let model = Linear { w, b };
    let margin = 1.0 / model.norm();
    SvmRun {
        model,
        support,
        iterations,
        converged,
        margin,
    }
}

/// SMO on the working set, warm-started from its α. Returns (iterations, converged).
fn smo(work: &mut Work, w: &mut [f64], b: &mut f64, cfg: SvmConfig, budget: u64) -> (u64, bool) {
    let n = work.y.len();
    let c = cfg.c;
    // w from α (warm start keeps α of earlier rounds).
    w.iter_mut().for_each(|v| *v = 0.0);
    for t in 0..n {
        let a = work.alpha[t] * work.y[t];
        if a != 0.0 {
            for (wj, xj) in w.iter_mut().zip(work.row(t)) {
                *wj += a * xj;
            }
        }
    }
    // G_t = y_t·(w·x_t) − 1: gradient of ½αᵀQα − Σα.
    let mut g: Vec<f64> = (0..n)
        .map(|t| work.y[t] * dot(w, work.row(t)) - 1.0)
        .collect();
    let kdiag: Vec<f64> = (0..n).map(|t| dot(work.row(t), work.row(t))).collect();
    let up = |a: f64, y: f64| if y > 0.0 { a < c } else { a > 0.0 };
    let low = |a: f64, y: f64| if y > 0.0 { a > 0.0 } else { a < c };
    let mut iter = 0u64;
    let converged = loop {
        // i: maximal −y·G over I_up.
        let (mut gmax, mut i) = (f64::NEG_INFINITY, usize::MAX);
        for t in 0..n {
            if up(work.alpha[t], work.y[t]) && -work.y[t] * g[t] >= gmax {
                gmax = -work.y[t] * g[t];
                i = t;
            }
        }
        // j: second-order choice over I_low.
        let (mut gmax2, mut j, mut best) = (f64::NEG_INFINITY, usize::MAX, f64::INFINITY);
        if i != usize::MAX {
            let xi = work.row(i).to_vec();
            for t in 0..n {
                if !low(work.alpha[t], work.y[t]) {
                    continue;
                }
                let v = work.y[t] * g[t];
                gmax2 = gmax2.max(v);
                let diff = gmax + v;
                if diff > 0.0 {
                    let quad = (kdiag[i] + kdiag[t] - 2.0 * dot(&xi, work.row(t))).max(1e-12);
                    let obj = -diff * diff / quad;
                    if obj <= best {
                        best = obj;
                        j = t;
                    }
                }
            }
        }
        if i == usize::MAX || j == usize::MAX || gmax + gmax2 < cfg.tol {
            break true;
        }
        if iter >= budget {
            break false;
        }
        iter += 1;
        let (yi, yj) = (work.y[i], work.y[j]);
        let (ai, aj) = (work.alpha[i], work.alpha[j]);
        let kij = dot(work.row(i), work.row(j));
        let quad = (kdiag[i] + kdiag[j] - 2.0 * kij).max(1e-12);
        let (mut ni, mut nj);
        if yi != yj {
            let delta = (-g[i] - g[j]) / quad;
            let diff = ai - aj;
            ni = ai + delta;
            nj = aj + delta;
            if diff > 0.0 {
                if nj < 0.0 {
                    nj = 0.0;
                    ni = diff;
                }
            } else if ni < 0.0 {
                ni = 0.0;
                nj = -diff;
            }
            if diff > 0.0 {
                if ni > c {
                    ni = c;
                    nj = c - diff;
                }
            } else if nj > c {
                nj = c;
                ni = c + diff;
            }
        } else {
            let delta = (g[i] - g[j]) / quad;
            let sum = ai + aj;
            ni = ai - delta;
            nj = aj + delta;
            if sum > c {
                if ni > c {
                    ni = c;
                    nj = sum - c;
                }
            } else if nj < 0.0 {
                nj = 0.0;
                ni = sum;
            }
            if sum > c {
                if nj > c {
                    nj = c;
                    ni = sum - c;
                }
            } else if ni < 0.0 {
                ni = 0.0;
                nj = sum;
            }
        }
        let (di, dj) = ((ni - ai) * yi, (nj - aj) * yj);
        work.alpha[i] = ni;
        work.alpha[j] = nj;
        let dw: Vec<f64> = work
            .row(i)
            .iter()
            .zip(work.row(j))
            .map(|(a, b)| di * a + dj * b)
            .collect();
        for (wk, dk) in w.iter_mut().zip(&dw) {
            *wk += dk;
        }
        for t in 0..n {
            g[t] += work.y[t] * dot(&dw, work.row(t));
        }
    };
    // Bias: mean of y·G over free α, else the middle of the feasible interval.
    let (mut sum, mut free) = (0.0, 0usize);
    let (mut ub, mut lb) = (f64::INFINITY, f64::NEG_INFINITY);
    for t in 0..n {
        let yg = work.y[t] * g[t];
        let a = work.alpha[t];
        if a > 0.0 && a < c {
            sum += yg;
            free += 1;
        } else if (work.y[t] > 0.0) == (a >= c) {
            lb = lb.max(yg);
        } else {
            ub = ub.min(yg);
        }
    }
    let rho = if free > 0 {
        sum / free as f64
    } else {
        (ub + lb) / 2.0
    };
    *b = -rho;
    (iter, converged)
}

/// The perceptron theorem's margin: the best margin of a unit-norm separator through
/// the origin for z = (x, 1)/R, with R = max ‖(x, 1)‖. `None` if not separable in that sense.
///
/// Returns (γ, separator over (x, 1) with ‖w‖ = 1).
pub fn homogeneous_margin(ds: &Dataset, idx: &[usize], radius: f64) -> Option<(f64, Vec<f64>)> {
    let d = ds.dim();
    let mut zs: Vec<f64> = Vec::with_capacity(idx.len() * (d + 1));
    let mut x = vec![0.0; d];
    for &i in idx {
        ds.scaled_row(i, &mut x);
        zs.extend(x.iter().map(|v| v / radius));
        zs.push(1.0 / radius);
    }
    let z = |t: usize| &zs[t * (d + 1)..(t + 1) * (d + 1)];
    let qd: Vec<f64> = (0..idx.len()).map(|t| dot(z(t), z(t))).collect();
    let mut alpha = vec![0.0; idx.len()];
    let mut w = vec![0.0; d + 1];
    for _sweep in 0..1_000_000 {
        let mut worst: f64 = 0.0;
        for t in 0..idx.len() {
            let y = ds.y(idx[t]);
            let g = y * dot(&w, z(t)) - 1.0;
            let pg = if alpha[t] == 0.0 { g.min(0.0) } else { g };
            worst = worst.max(pg.abs());
            if pg != 0.0 {
                let new = (alpha[t] - g / qd[t]).max(0.0);
                let delta = (new - alpha[t]) * y;
                alpha[t] = new;
                for (wk, zk) in w.iter_mut().zip(z(t)) {
                    *wk += delta * zk;
                }
            }
        }
        let norm = dot(&w, &w).sqrt();
        if !norm.is_finite() || norm > 1e12 {
            return None;
        }
        if worst < 1e-10 {
            let gamma = 1.0 / norm;
            return Some((gamma, w.iter().map(|v| v / norm).collect()));
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

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
