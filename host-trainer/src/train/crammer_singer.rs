//! The joint multi-class maximum margin (Crammer–Singer): every class's row at once.
//!
//! The problem solved, over standard scores zᵢ (each channel's (x − mean) / sd over the
//! training units, [`Spread`], as the two-class soft margin trains) with a constant 1
//! appended, so each row's bias is its last weight and is penalised with it:
//!
//! ```text
//! min over (w_k, b_k)  ½ Σ_k (‖w_k‖² + b_k²)
//!                      + C Σ_i max(0, max_{k≠yᵢ} (1 + w_k·zᵢ + b_k − w_{yᵢ}·zᵢ − b_{yᵢ}))
//! ```
//!
//! (the objective of a linear Crammer–Singer machine with the intercept as a feature of
//! value 1, penalised). It is solved in its dual by sequential coordinate descent, one
//! unit's K variables at a time: αᵢ ∈ ℝᴷ with αᵢₖ ≤ 0 (k ≠ yᵢ), αᵢ,yᵢ ≤ C and Σₖ αᵢₖ = 0,
//! w_k = Σᵢ αᵢₖ (zᵢ, 1); each unit's sub-problem has a closed form after one sort. Units
//! whose variables are all 0 and whose margin holds strictly are set aside (shrinking)
//! and checked again on a full pass before the solver stops: it stops when a full pass
//! finds no unit violating the optimality conditions by more than `eps` (the gap between
//! the largest gradient and the smallest of the free ones). Units are visited in a seeded
//! order, so a seed gives the same rows bit for bit. The rows are handed back over
//! device-scaled inputs (`Spread::to_device`).

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

use crate::ingest::dataset::Dataset;
use crate::train::linear::Linear;
use crate::train::spread::Spread;

/// What the joint trainer takes.
#[derive(Clone, Copy, Debug)]
pub struct JointConfig {
    /// The penalty C.
    pub c: f64,
    /// Seed of the visiting order.
    pub seed: u64,
    /// Stop when no unit violates optimality by more than this (gradient units); `None`
    /// chooses by size: 1e-9 up to [`TIGHT_LIMIT`] units, [`LOOSE_EPS`] above.
    pub eps: Option<f64>,
    /// Most passes over the active units.
    pub max_passes: usize,
    /// Print progress lines.
    pub progress: bool,
}

/// Up to this many units the solver runs to a tight tolerance (the objective to about
/// 1e-9 relative); above it to [`LOOSE_EPS`].
pub const TIGHT_LIMIT: usize = 20_000;

/// The tolerance on large logs: 0.1, the stopping tolerance common dual solvers of this
/// problem use by default. On a million units the last passes before a tight tolerance
/// move the objective in its fourth digit and no decision.
pub const LOOSE_EPS: f64 = 0.1;

impl JointConfig {
    /// C with the defaults: seed 1, the size's tolerance, 1000 passes, no progress.
    pub fn new(c: f64) -> Self {
        Self {
            c,
            seed: 1,
            eps: None,
            max_passes: 1000,
            progress: false,
        }
    }
}

/// The joint rows and what the solver reports.
#[derive(Clone, Debug)]
pub struct JointRun {
    /// One row per class, over device-scaled inputs.
    pub rows: Vec<Linear>,
    /// The objective of the module docs at the solution (standard scores).
    pub objective: f64,
    /// The spread the standard scores were taken over.
    pub spread: Spread,
    /// Passes made.
    pub passes: usize,
    /// The largest violation on the last full pass.
    pub violation: f64,
}

/// Trains `classes` rows jointly on the units `idx` of `ds`; `class[i]` is unit i's class
/// (an index below `classes`, one per unit of `ds`).
pub fn joint(
    ds: &Dataset,
    class: &[u8],
    classes: usize,
    idx: &[usize],
    cfg: JointConfig,
) -> JointRun {
    let k = classes.max(1);
    let spread = Spread::of(ds, idx);
    let d = ds.dim() + 1;
    let n = idx.len();
    // Standard scores with the constant 1, row by row.
    let mut z = vec![0.0f64; n * d];
    z.par_chunks_mut(d)
        .zip(idx.par_iter())
        .for_each(|(row, &i)| {
            ds.scaled_row(i, &mut row[..d - 1]);
            spread.apply(&mut row[..d - 1]);
            row[d - 1] = 1.0;
        });
    let y: Vec<usize> = idx.iter().map(|&i| usize::from(class[i])).collect();
    let qd: Vec<f64> = z.chunks(d).map(|r| r.iter().map(|v| v * v).sum()).collect();
    let eps = cfg
        .eps
        .unwrap_or(if n <= TIGHT_LIMIT { 1e-9 } else { LOOSE_EPS });
    // w[m * d + j]: row m's weight j (bias last).
    let mut w = vec![0.0f64; k * d];
    let mut alpha = vec![0.0f64; n * k];
    let mut active: Vec<usize> = (0..n).collect();
    let mut rng = ChaCha8Rng::seed_from_u64(cfg.seed);
    let mut eps_shrink = eps.max(1.0);
    let mut from_all = true;
    let mut passes = 0;
    let mut violation = f64::INFINITY;
    let (mut g, mut b, mut new) = (vec![0.0; k], vec![0.0; k], vec![0.0; k]);
    let mut sorted = vec![0.0; k];
    while passes < cfg.max_passes {
        passes += 1;
        active.shuffle(&mut rng);
        let mut worst = 0.0f64;
        let mut keep = 0;
        for s in 0..active.len() {
            let i = active[s];
            let x = &z[i * d..(i + 1) * d];
            let yi = y[i];
            let a = &mut alpha[i * k..(i + 1) * k];
            for (m, gm) in g.iter_mut().enumerate() {
                let wm = &w[m * d..(m + 1) * d];
                *gm = dot(wm, x) + if m == yi { 0.0 } else { 1.0 };
            }
            let mut min_g = f64::INFINITY;
            let mut max_g = f64::NEG_INFINITY;
            for m in 0..k {
                let free = if m == yi { a[m] < cfg.c } else { a[m] < 0.0 };
                if free {
                    min_g = min_g.min(g[m]);
                }
                max_g = max_g.max(g[m]);
            }
            // A unit whose variables are all 0 and whose margin holds strictly is set aside.
            let shrink = a.iter().all(|&v| v == 0.0) && (0..k).all(|m| m == yi || g[m] < g[yi]);
            if !shrink {
                active[keep] = i;
                keep += 1;
            }
            let v = max_g - min_g;
            if v <= 1e-12 || qd[i] <= 0.0 {
                continue;
            }
            worst = worst.max(v);
            let ai = qd[i];
            for m in 0..k {
                b[m] = g[m] - ai * a[m];
            }
            sub_problem(ai, yi, cfg.c, &b, &mut sorted, &mut new);
            for m in 0..k {
                let delta = new[m] - a[m];
                a[m] = new[m];
                if delta != 0.0 {
                    w[m * d..(m + 1) * d]
                        .iter_mut()
                        .zip(x)
                        .for_each(|(wj, xj)| *wj += delta * xj);
                }
            }
        }
        active.truncate(keep);
        if from_all {
            violation = worst;
        }
        if cfg.progress && passes % 10 == 0 {
            crate::progress::line(|| {
                format!(
                    "joint margin: pass {passes}, {} active units, largest violation {worst:.2e}",
                    active.len()
                )
            });
        }
        if worst < eps_shrink {
            if worst < eps && from_all {
                break;
            }
            // Check every unit again, with a tighter tolerance for the next shrink.
            active = (0..n).collect();
            eps_shrink = (eps_shrink / 2.0).max(eps);
            from_all = true;
        } else {
            from_all = false;
        }
    }
    let objective = objective(&w, &z, &y, k, d, cfg.c);
    let rows = (0..k)
        .map(|m| {
            let r = &w[m * d..(m + 1) * d];
            spread.to_device(&Linear {
                w: r[..d - 1].to_vec(),
                b: r[d - 1],
            })
        })
        .collect();
    JointRun {
        rows,
        objective,
        spread,
        passes,
        violation,
    }
}

/// One unit's sub-problem: min ½A‖α‖² + b·α over α_m ≤ C_m (C for the unit's class, 0
/// for the others), Σ α = 0. Its solution is α_m = min(C_m, (β − b_m)/A) with β found
/// from the sorted values D_m = b_m + A·C_m.
fn sub_problem(a: f64, yi: usize, c: f64, b: &[f64], d: &mut [f64], out: &mut [f64]) {
    let k = b.len();
    d.copy_from_slice(b);
    d[yi] += a * c;
    d.sort_unstable_by(|p, q| q.total_cmp(p));
    let mut beta = d[0] - a * c;
    let mut r = 1;
    while r < k && beta < r as f64 * d[r] {
        beta += d[r];
        r += 1;
    }
    beta /= r as f64;
    for m in 0..k {
        let v = (beta - b[m]) / a;
        out[m] = if m == yi { v.min(c) } else { v.min(0.0) };
    }
}

/// The primal objective of the module docs for rows `w` (bias last) on standard scores `z`.
fn objective(w: &[f64], z: &[f64], y: &[usize], k: usize, d: usize, c: f64) -> f64 {
    let reg = 0.5 * w.iter().map(|v| v * v).sum::<f64>();
    // Fixed chunks summed in order: a parallel sum's order would depend on the threads, and
    // the objective is part of the model file's bytes.
    const CHUNK: usize = 4096;
    let partial: Vec<f64> = z
        .par_chunks(d * CHUNK)
        .zip(y.par_chunks(CHUNK))
        .map(|(zs, ys)| {
            zs.chunks(d)
                .zip(ys)
                .map(|(x, &yi)| {
                    let own = dot(&w[yi * d..(yi + 1) * d], x);
                    (0..k)
                        .filter(|&m| m != yi)
                        .map(|m| 1.0 + dot(&w[m * d..(m + 1) * d], x) - own)
                        .fold(0.0f64, f64::max)
                })
                .sum::<f64>()
        })
        .collect();
    let loss: f64 = partial.iter().sum();
    reg + c * loss
}

/// The joint objective of device-scaled rows on the units `idx` (standard scores over
/// `spread`): the figure the file records, recomputed for a check.
pub fn objective_of(
    rows: &[Linear],
    spread: &Spread,
    ds: &Dataset,
    class: &[u8],
    idx: &[usize],
    c: f64,
) -> f64 {
    // Back to standard scores: w_z = w·sd, b_z = b + w·mean.
    let d = ds.dim() + 1;
    let mut w = Vec::with_capacity(rows.len() * d);
    for r in rows {
        w.extend(r.w.iter().zip(&spread.std).map(|(v, s)| v * s));
        w.push(
            r.b + r
                .w
                .iter()
                .zip(&spread.mean)
                .map(|(v, m)| v * m)
                .sum::<f64>(),
        );
    }
    let mut z = vec![0.0; idx.len() * d];
    for (row, &i) in z.chunks_mut(d).zip(idx) {
        ds.scaled_row(i, &mut row[..d - 1]);
        spread.apply(&mut row[..d - 1]);
        row[d - 1] = 1.0;
    }
    let y: Vec<usize> = idx.iter().map(|&i| usize::from(class[i])).collect();
    objective(&w, &z, &y, rows.len(), d, c)
}

#[inline(always)]
fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Three clusters in two channels, apart.
    fn three() -> (Dataset, Vec<u8>) {
        let mut pts = Vec::new();
        let mut cls = Vec::new();
        let centres = [(-0.5, -0.5), (0.5, -0.4), (0.0, 0.5)];
        for n in 0..90 {
            let (cx, cy) = centres[n % 3];
            let t = n as f64 * 0.37;
            pts.push(vec![cx + 0.1 * t.sin(), cy + 0.1 * t.cos()]);
            cls.push((n % 3) as u8);
        }
        let labels: Vec<i8> = cls.iter().map(|&c| if c == 0 { 1 } else { -1 }).collect();
        (Dataset::from_scaled(&pts, &labels), cls)
    }

    #[test]
    fn separates_three_clusters_and_its_objective_is_a_minimum() {
        let (ds, cls) = three();
        let idx = ds.all();
        let cfg = JointConfig {
            max_passes: 200_000,
            ..JointConfig::new(1.0)
        };
        let run = joint(&ds, &cls, 3, &idx, cfg);
        assert!(
            run.violation < 1e-9,
            "{} after {} passes",
            run.violation,
            run.passes
        );
        let mut x = vec![0.0; 2];
        for &i in &idx {
            ds.scaled_row(i, &mut x);
            let s: Vec<f64> = run.rows.iter().map(|r| r.score(&x)).collect();
            let best = (0..3).fold(0, |b, m| if s[m] > s[b] { m } else { b });
            assert_eq!(best, usize::from(cls[i]), "unit {i}");
        }
        let again = objective_of(&run.rows, &run.spread, &ds, &cls, &idx, 1.0);
        assert!((again - run.objective).abs() <= 1e-9 * run.objective.max(1.0));
        // Moving any weight a little does not lower the objective (a minimum).
        for m in 0..3 {
            for j in 0..2 {
                for h in [1e-4, -1e-4] {
                    let mut rows = run.rows.clone();
                    rows[m].w[j] += h;
                    let o = objective_of(&rows, &run.spread, &ds, &cls, &idx, 1.0);
                    assert!(
                        o >= run.objective - 1e-9 * run.objective,
                        "row {m} weight {j} by {h}: {o} < {}",
                        run.objective
                    );
                }
            }
        }
        // The same seed gives the same rows bit for bit.
        let twin = joint(&ds, &cls, 3, &idx, cfg);
        assert_eq!(twin.rows, run.rows);
    }

    #[test]
    fn the_sub_problem_meets_its_constraints() {
        let b = [0.3, -0.2, 1.1, 0.0];
        let mut d = [0.0; 4];
        let mut out = [0.0; 4];
        sub_problem(2.0, 1, 0.5, &b, &mut d, &mut out);
        assert!(out.iter().sum::<f64>().abs() < 1e-12);
        assert!(out[1] <= 0.5 + 1e-15);
        assert!((0..4).filter(|&m| m != 1).all(|m| out[m] <= 0.0));
    }
}
