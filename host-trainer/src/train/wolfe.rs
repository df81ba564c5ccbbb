//! Wolfe's minimum-norm-point algorithm: the nearest point to the origin of the hull of
//! vertices an oracle returns. Finite, with a corral of at most d + 1 vertices; tiny margins
//! cost no extra iterations. The hard margin ([`crate::train::hard_margin`]) and Novikoff's
//! margin ([`crate::train::novikoff`]) are both this problem over different vertices.

use crate::ingest::dataset::dot;

/// The result of [`wolfe`].
pub(crate) struct MinNorm<Id> {
    pub(crate) point: Vec<f64>,
    pub(crate) corral: Vec<(Id, f64)>,
    pub(crate) iterations: u64,
}

/// The corral of [`wolfe`]: vertices, their ids and convex weights.
#[derive(Clone)]
pub(crate) struct Corral<Id> {
    pub(crate) ids: Vec<Id>,
    pub(crate) pts: Vec<Vec<f64>>,
    pub(crate) lambda: Vec<f64>,
}

impl<Id: Copy + PartialEq> Corral<Id> {
    fn point(&self) -> Vec<f64> {
        let mut out = vec![0.0; self.pts[0].len()];
        for (p, w) in self.pts.iter().zip(&self.lambda) {
            for (o, v) in out.iter_mut().zip(p) {
                *o += w * v;
            }
        }
        out
    }

    /// Drops the vertices whose weight fell to rounding and renormalises the rest.
    fn prune(&mut self) {
        let mut k = 0;
        while k < self.lambda.len() {
            if self.lambda[k] <= 1e-14 && self.lambda.len() > 1 {
                self.lambda.remove(k);
                self.pts.remove(k);
                self.ids.remove(k);
            } else {
                k += 1;
            }
        }
        let s: f64 = self.lambda.iter().sum();
        self.lambda.iter_mut().for_each(|l| *l /= s);
    }

    /// Wolfe's minor cycles after `v` joins: move to the affine hull's minimum-norm point,
    /// or as far towards it as the weights stay non-negative, dropping the vertex that hits
    /// zero; repeat until the affine minimiser is inside the hull. `None` if the corral is
    /// affinely dependent to working precision.
    fn wolfe_step(&mut self, id: Id, v: Vec<f64>) -> Option<()> {
        self.ids.push(id);
        self.pts.push(v);
        self.lambda.push(0.0);
        loop {
            let alpha = affine_min_norm(&self.pts)?;
            if alpha.iter().all(|a| *a > 1e-14) {
                self.lambda = alpha;
                return Some(());
            }
            let theta = self
                .lambda
                .iter()
                .zip(&alpha)
                .filter(|(_, a)| **a <= 1e-14)
                .map(|(l, a)| l / (l - a))
                .fold(1.0f64, f64::min)
                .clamp(0.0, 1.0);
            for (l, a) in self.lambda.iter_mut().zip(&alpha) {
                *l = theta * a + (1.0 - theta) * *l;
            }
            self.prune();
            if self.pts.len() == 1 {
                return Some(());
            }
        }
    }

    /// The line step from `x` towards the vertex `v`: the nearest point to the origin on
    /// the segment, which is strictly nearer than `x` whenever ⟨x, x − v⟩ > 0.
    fn line_step(&mut self, x: &[f64], id: Id, v: Vec<f64>) {
        let dxv: Vec<f64> = x.iter().zip(&v).map(|(a, b)| a - b).collect();
        let t = (dot(x, &dxv) / dot(&dxv, &dxv)).clamp(0.0, 1.0);
        self.lambda.iter_mut().for_each(|l| *l *= 1.0 - t);
        match self.ids.iter().position(|&i| i == id) {
            Some(k) => self.lambda[k] += t,
            None => {
                self.ids.push(id);
                self.pts.push(v);
                self.lambda.push(t);
            }
        }
        self.prune();
    }
}

/// Wolfe's minimum-norm-point algorithm over the hull of the vertices the oracle returns:
/// `oracle(x)` gives a vertex minimising ⟨x, v⟩. Stops when no vertex improves on x
/// (⟨x, x⟩ − min⟨x, v⟩ ≤ 1e-13·⟨x, x⟩), or at `max_major` major cycles.
///
/// Progress is guaranteed, not hoped for: every major cycle must make ‖x‖² strictly
/// smaller. Wolfe's affine step does in exact arithmetic; in floating point it can drop
/// the vertex it has just added without moving (an ill-conditioned corral), and then the
/// same vertex comes back for ever. Such a cycle (or an affinely dependent corral) is
/// replaced by the line step towards the oracle's vertex, which lowers ‖x‖² by at least
/// gap² / ‖x − v‖², gap = ⟨x, x⟩ − ⟨x, v⟩ > 0 (the Frank–Wolfe decrease). So ‖x‖² falls
/// in every cycle until the stopping test holds: no cycle repeats.
pub(crate) fn wolfe<Id: Copy + PartialEq>(
    start: (Id, Vec<f64>),
    oracle: impl FnMut(&[f64]) -> (Id, Vec<f64>),
    max_major: usize,
) -> MinNorm<Id> {
    let corral = Corral {
        ids: vec![start.0],
        pts: vec![start.1],
        lambda: vec![1.0],
    };
    wolfe_from(corral, oracle, max_major)
}

/// [`wolfe`] from a corral of several vertices (convex weights, summing to 1): the
/// previous round's solution when the working set grows, so a round starts where the last
/// one ended instead of from one vertex. Any point of the hull is a valid start; the
/// stopping test and the decrease in every cycle are the same.
pub(crate) fn wolfe_from<Id: Copy + PartialEq>(
    mut corral: Corral<Id>,
    mut oracle: impl FnMut(&[f64]) -> (Id, Vec<f64>),
    max_major: usize,
) -> MinNorm<Id> {
    let mut x = corral.point();
    let mut iterations = 0u64;
    for _ in 0..max_major {
        iterations += 1;
        let (id, v) = oracle(&x);
        let xx = dot(&x, &x);
        // Below 1e-24 (a distance of 1e-12 between points of size ~1) the hulls touch to f64 precision.
        if xx <= 1e-24 || xx - dot(&x, &v) <= 1e-13 * xx {
            break;
        }
        let mut next = corral.clone();
        let moved = !corral.ids.contains(&id) && next.wolfe_step(id, v.clone()).is_some() && {
            let nx = next.point();
            dot(&nx, &nx) < xx
        };
        if !moved {
            next = corral.clone();
            next.line_step(&x, id, v);
            let nx = next.point();
            if dot(&nx, &nx) >= xx {
                // Not even the line step moves x: it is optimal to working precision.
                break;
            }
        }
        corral = next;
        x = corral.point();
    }
    MinNorm {
        point: x,
        corral: corral.ids.into_iter().zip(corral.lambda).collect(),
        iterations,
    }
}

/// Weights α (Σα = 1) of the minimum-norm point of the affine hull of `pts`;
/// `None` if the points are affinely dependent to working precision.
///
/// Solved as the least-squares problem min ‖p₀ + D·c‖, D = [pₖ − p₀], by Householder QR,
/// whose error grows with cond(D), not with cond(D)² as the Gram (normal) equations do:
/// on corrals of near-parallel differences the Gram form returned weights of the wrong
/// sign and Wolfe's step cycled.
#[allow(clippy::needless_range_loop)]
fn affine_min_norm(pts: &[Vec<f64>]) -> Option<Vec<f64>> {
    let k = pts.len();
    let p0 = pts.first()?;
    let d = p0.len();
    let m = k - 1;
    if m > d {
        return None;
    }
    // Columns of D, and the right-hand side −p₀.
    let mut a: Vec<Vec<f64>> = pts[1..]
        .iter()
        .map(|p| p.iter().zip(p0).map(|(x, y)| x - y).collect())
        .collect();
    let mut rhs: Vec<f64> = p0.iter().map(|v| -v).collect();
    let scale = a.iter().map(|c| dot(c, c).sqrt()).fold(0.0f64, f64::max);
    for j in 0..m {
        let norm = a[j][j..].iter().map(|v| v * v).sum::<f64>().sqrt();
        if norm <= 1e-12 * scale {
            return None;
        }
        let alpha = if a[j][j] > 0.0 { -norm } else { norm };
        let mut h: Vec<f64> = a[j][j..].to_vec();
        h[0] -= alpha;
        let hh = dot(&h, &h);
        if hh > 0.0 {
            let reflect = |col: &mut [f64]| {
                let f = 2.0 * dot(&h, col) / hh;
                for (c, hv) in col.iter_mut().zip(&h) {
                    *c -= f * hv;
                }
            };
            for col in a[j..].iter_mut() {
                reflect(&mut col[j..]);
            }
            reflect(&mut rhs[j..]);
        }
    }
    // Back substitution R·c = (Qᵀ·(−p₀))[..m].
    let mut c = vec![0.0; m];
    for r in (0..m).rev() {
        let mut s = rhs[r];
        for col in r + 1..m {
            s -= a[col][r] * c[col];
        }
        c[r] = s / a[r][r];
    }
    let mut alpha = Vec::with_capacity(k);
    alpha.push(1.0 - c.iter().sum::<f64>());
    alpha.extend(c);
    Some(alpha)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The corral, its weights and the vertex of `wolfe_cycle.txt`.
    fn cycle_case() -> (Vec<Vec<f64>>, Vec<f64>, Vec<f64>) {
        let vec_of = |l: &str| -> Vec<f64> {
            l[3..l.len() - 1]
                .split(", ")
                .map(|v| v.parse().unwrap())
                .collect()
        };
        let text = include_str!("wolfe_cycle.txt");
        let (mut c, mut l, mut v) = (Vec::new(), Vec::new(), Vec::new());
        for line in text.lines() {
            match line.as_bytes().first() {
                Some(b'C') => c.push(vec_of(line)),
                Some(b'L') => l = vec_of(line),
                Some(b'V') => v = vec_of(line),
                _ => {}
            }
        }
        (c, l, v)
    }

    /// The Gram (normal-equation) form of the affine minimum-norm solve the solver used
    /// before: kept here only to show that the fixture reproduces the cycle's cause.
    #[allow(clippy::needless_range_loop)]
    fn gram_affine_min_norm(pts: &[Vec<f64>]) -> Option<Vec<f64>> {
        let k = pts.len();
        let n = k + 1;
        let mut a = vec![vec![0.0; n + 1]; n];
        for r in 0..k {
            for c in 0..k {
                a[r][c] = dot(&pts[r], &pts[c]);
            }
            a[r][k] = 1.0;
            a[k][r] = 1.0;
        }
        a[k][n] = 1.0;
        let scale = a.iter().flatten().fold(0.0f64, |m, v| m.max(v.abs()));
        for col in 0..n {
            let piv = (col..n).max_by(|&x, &y| a[x][col].abs().total_cmp(&a[y][col].abs()))?;
            if a[piv][col].abs() <= 1e-14 * scale {
                return None;
            }
            a.swap(col, piv);
            for r in 0..n {
                if r != col {
                    let f = a[r][col] / a[col][col];
                    for c in col..=n {
                        a[r][c] -= f * a[col][c];
                    }
                }
            }
        }
        Some((0..k).map(|r| a[r][n] / a[r][r]).collect())
    }

    #[test]
    fn wolfe_step_makes_progress_on_the_corral_that_cycled() {
        let (pts, lambda, v) = cycle_case();
        assert_eq!((pts.len(), lambda.len(), v.len()), (16, 16, 16));
        let corral = Corral {
            ids: (0..16).collect::<Vec<usize>>(),
            pts: pts.clone(),
            lambda,
        };
        let x = corral.point();
        let xx = dot(&x, &x);
        // The vertex improves on x by far more than the stopping test's 1e-13·‖x‖².
        assert!(xx - dot(&x, &v) > 1e-8 * xx);
        // The cause: the Gram equations give the new vertex a weight ≤ 0, so the old step
        // dropped it at once (θ = 0) and x never moved.
        let mut with_v = pts.clone();
        with_v.push(v.clone());
        let gram = gram_affine_min_norm(&with_v).unwrap();
        assert!(
            gram[16] <= 1e-14,
            "Gram weight of the new vertex {}",
            gram[16]
        );
        // The QR solve gives it a positive weight and the step lowers ‖x‖².
        let qr = affine_min_norm(&with_v).unwrap();
        assert!(qr[16] > 1e-14, "QR weight of the new vertex {}", qr[16]);
        let mut next = corral.clone();
        next.wolfe_step(16, v).unwrap();
        let nx = next.point();
        assert!(dot(&nx, &nx) < xx);
    }

    #[test]
    fn wolfe_terminates_at_the_minimum_on_the_vertices_that_cycled() {
        // Over the 17 vertices alone the minimum-norm point must be reached in a few major
        // cycles (Wolfe's method is finite: at most a few passes over 17 vertices), and be
        // optimal: no vertex improves on it.
        let (mut pts, _, v) = cycle_case();
        pts.push(v);
        let oracle = |x: &[f64]| {
            let best = (0..pts.len())
                .min_by(|&a, &b| dot(x, &pts[a]).total_cmp(&dot(x, &pts[b])))
                .unwrap();
            (best, pts[best].clone())
        };
        let out = wolfe((0, pts[0].clone()), oracle, 10_000);
        assert!(out.iterations < 200, "{} major cycles", out.iterations);
        let xx = dot(&out.point, &out.point);
        let worst = pts
            .iter()
            .map(|p| xx - dot(&out.point, p))
            .fold(f64::MIN, f64::max);
        assert!(worst <= 1e-12 * xx, "gap {worst} at ‖x‖² {xx}");
    }
}
