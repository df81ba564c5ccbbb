//! The soft margin by sequential minimal optimisation: min ½‖w‖² + Σ Cᵢξᵢ subject to
//! yᵢ(w·xᵢ + b) ≥ 1 − ξᵢ, solved in the dual with second-order working-pair selection, on a
//! working set that grows with the worst violators until every unit is optimal. Above
//! [`SMO_LIMIT`] units (or when SMO stalls) the Newton solve of
//! [`crate::train::soft_dual`] takes the problem; both report the primal objective an
//! outside solver must reach.

use crate::ingest::dataset::{Dataset, dot};
use crate::train::linear::Linear;
use crate::train::spread::Spread;
use crate::train::svm::{ClassWeight, SvmConfig, SvmRun};
use crate::train::task::Binary;
use crate::train::working_set::initial;

/// Dense copy of the working set.
struct Work {
    d: usize,
    x: Vec<f64>,
    y: Vec<f64>,
    /// Each unit's upper bound on α: C times its class's weight.
    cap: Vec<f64>,
    alpha: Vec<f64>,
    idx: Vec<usize>,
    spread: Option<Spread>,
    c: f64,
    weight: ClassWeight,
}

impl Work {
    /// Unit `i`'s row as the solver sees it (standard scores when training by spread).
    fn row_of(&self, ds: &Dataset, i: usize, out: &mut [f64]) {
        ds.scaled_row(i, out);
        if let Some(sp) = &self.spread {
            sp.apply(out);
        }
    }

    fn push(&mut self, task: Binary<'_>, i: usize) {
        let ds = task.ds;
        let mut row = vec![0.0; self.d];
        self.row_of(ds, i, &mut row);
        self.x.extend_from_slice(&row);
        let y = task.y(i);
        self.y.push(y);
        self.cap.push(self.cap_for(y));
        self.alpha.push(0.0);
        self.idx.push(i);
    }
    /// The cap of a unit labelled `y`.
    fn cap_for(&self, y: f64) -> f64 {
        self.c * self.weight.of(y)
    }

    fn row(&self, t: usize) -> &[f64] {
        &self.x[t * self.d..(t + 1) * self.d]
    }
}

/// The soft margin by SMO on a growing working set.
pub(crate) fn smo_margin(task: Binary<'_>, idx: &[usize], cfg: SvmConfig) -> SvmRun {
    let ds = task.ds;
    let d = ds.dim();
    let mut work = Work {
        d,
        x: Vec::new(),
        y: Vec::new(),
        cap: Vec::new(),
        alpha: Vec::new(),
        idx: Vec::new(),
        spread: cfg.standardise.then(|| Spread::of(ds, idx)),
        c: cfg.c,
        weight: cfg.class_weight,
    };
    let mut in_set = vec![false; ds.len()];
    for i in initial(task, idx, 2000) {
        in_set[i] = true;
        work.push(task, i);
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
                work.row_of(ds, i, &mut x);
                let m = task.y(i) * (dot(&w, &x) + b);
                (m < 1.0 - 1e-9).then_some((m, i))
            })
            .collect();
        if violators.is_empty() {
            break;
        }
        violators.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        for &(_, i) in violators.iter().take(2000) {
            in_set[i] = true;
            work.push(task, i);
        }
    }
    let support: Vec<(usize, f64)> = work
        .alpha
        .iter()
        .zip(&work.idx)
        .filter(|(a, _)| **a > 0.0)
        .map(|(a, &i)| (i, *a))
        .collect();
    let trained = Linear { w, b };
    let objective = Some(primal_objective(
        task,
        idx,
        &trained,
        &cfg,
        work.spread.as_ref(),
    ));
    let model = match &work.spread {
        Some(sp) => sp.to_device(&trained),
        None => trained,
    };
    let margin = 1.0 / model.norm();
    SvmRun {
        model,
        support,
        iterations,
        converged,
        margin,
        objective,
        spread: work.spread,
    }
}

/// Largest log the soft margin solves by SMO on a working set; above it, by dual coordinate
/// descent ([`crate::train::soft_dual`]), whose cost grows with the units, not with the
/// units inside the margin squared.
pub const SMO_LIMIT: usize = 2_000;

pub(crate) fn large_soft_margin(task: Binary<'_>, idx: &[usize], cfg: SvmConfig) -> SvmRun {
    let ds = task.ds;
    let spread = cfg.standardise.then(|| Spread::of(ds, idx));
    let (trained, iterations, converged) = crate::train::soft_dual::solve(
        &task,
        idx,
        (cfg.c * cfg.class_weight.go, cfg.c * cfg.class_weight.nogo),
        spread.as_ref(),
    );
    let objective = Some(primal_objective(task, idx, &trained, &cfg, spread.as_ref()));
    let model = match &spread {
        Some(sp) => sp.to_device(&trained),
        None => trained,
    };
    SvmRun {
        margin: 1.0 / model.norm(),
        model,
        support: Vec::new(),
        iterations,
        converged,
        objective,
        spread,
    }
}

/// ½‖w‖² + Σ Cᵢ·max(0, 1 − yᵢ(w·xᵢ + b)) over every unit of `idx`, in the space the solver
/// worked in: the figure an outside solver of the same problem must reach.
fn primal_objective(
    task: Binary<'_>,
    idx: &[usize],
    m: &Linear,
    cfg: &SvmConfig,
    spread: Option<&Spread>,
) -> f64 {
    let ds = task.ds;
    let mut x = vec![0.0; ds.dim()];
    let mut hinge = 0.0;
    for &i in idx {
        ds.scaled_row(i, &mut x);
        if let Some(sp) = spread {
            sp.apply(&mut x);
        }
        let y = task.y(i);
        let slack = (1.0 - y * m.score(&x)).max(0.0);
        hinge += cfg.c * cfg.class_weight.of(y) * slack;
    }
    0.5 * dot(&m.w, &m.w) + hinge
}

/// SMO on the working set, warm-started from its α. Returns (iterations, converged).
// Index loops walk the parallel arrays α, y, G and the rows together.
#[allow(clippy::needless_range_loop)]
fn smo(work: &mut Work, w: &mut [f64], b: &mut f64, cfg: SvmConfig, budget: u64) -> (u64, bool) {
    let n = work.y.len();
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
    let cap = &work.cap;
    let up = |t: usize, a: f64, y: f64| if y > 0.0 { a < cap[t] } else { a > 0.0 };
    let low = |t: usize, a: f64, y: f64| if y > 0.0 { a > 0.0 } else { a < cap[t] };
    let mut iter = 0u64;
    let converged = loop {
        // i: maximal −y·G over I_up.
        let (mut gmax, mut i) = (f64::NEG_INFINITY, usize::MAX);
        for t in 0..n {
            if up(t, work.alpha[t], work.y[t]) && -work.y[t] * g[t] >= gmax {
                gmax = -work.y[t] * g[t];
                i = t;
            }
        }
        // j: second-order choice over I_low.
        let (mut gmax2, mut j, mut best) = (f64::NEG_INFINITY, usize::MAX, f64::INFINITY);
        if i != usize::MAX {
            let xi = work.row(i).to_vec();
            for t in 0..n {
                if !low(t, work.alpha[t], work.y[t]) {
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
        let (ci, cj) = (cap[i], cap[j]);
        let (mut ni, mut nj);
        // The two-variable step with each unit's own cap (the class weights give GO and
        // NO-GO units different caps).
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
            if diff > ci - cj {
                if ni > ci {
                    ni = ci;
                    nj = ci - diff;
                }
            } else if nj > cj {
                nj = cj;
                ni = cj + diff;
            }
        } else {
            let delta = (g[i] - g[j]) / quad;
            let sum = ai + aj;
            ni = ai - delta;
            nj = aj + delta;
            if sum > ci {
                if ni > ci {
                    ni = ci;
                    nj = sum - ci;
                }
            } else if nj < 0.0 {
                nj = 0.0;
                ni = sum;
            }
            if sum > cj {
                if nj > cj {
                    nj = cj;
                    ni = sum - cj;
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
        if a > 0.0 && a < cap[t] {
            sum += yg;
            free += 1;
        } else if (work.y[t] > 0.0) == (a >= cap[t]) {
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
