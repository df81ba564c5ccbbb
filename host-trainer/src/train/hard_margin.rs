//! The hard margin: the free-bias maximum-margin separator of a separable log, exactly.
//!
//! Its margin is half the distance between the convex hulls of the two classes, so it is
//! solved as the minimum-norm point of their difference by Wolfe's active-set algorithm
//! ([`crate::train::wolfe`]; each step scans the working set once). On a large log it solves
//! on a working set ([`crate::train::working_set`]) and a scan of every unit adds the units
//! the current nearest points fail to account for; a solve that has run for over a second
//! reports each round's bounds on γ* as a progress line ([`crate::progress::line`]).

use rayon::prelude::*;

use crate::ingest::dataset::{Dataset, dot};
use crate::train::linear::Linear;
use crate::train::svm::SvmRun;
use crate::train::task::Binary;
use crate::train::wolfe::{Corral, MinNorm, wolfe_from};
use crate::train::working_set::{
    SCAN_CHUNK, WORKING_SET, merge_bounded, push_bounded, working_set,
};

/// What the hard-margin solver has proved after one working-set round on a large log.
#[derive(Clone, Copy, Debug)]
struct Round {
    /// Round number, from 1.
    round: u32,
    /// Units in the working set.
    working_set: usize,
    /// Wolfe major cycles so far, all rounds together.
    iterations: u64,
    /// γ* is at least this (the worst GO and NO-GO units of the whole log along the current
    /// direction).
    lower: f64,
    /// γ* is at most this (half the distance of the current nearest hull points).
    upper: f64,
    /// Time since the solve started.
    elapsed: std::time::Duration,
}

impl Round {
    /// Shows the round as a progress line once the solve has run for a second: shorter
    /// solves stay silent.
    fn report(&self) {
        if self.elapsed.as_secs_f64() >= 1.0 {
            crate::progress::line(|| {
                format!(
                    "maximum margin: round {}, {} units in the working set, {} cycles, γ* in [{:.6}, {:.6}] ({:.1} s)",
                    self.round,
                    self.working_set,
                    self.iterations,
                    self.lower,
                    self.upper,
                    self.elapsed.as_secs_f64()
                )
            });
        }
    }
}

/// Hard margin as the nearest points of the two class hulls.
pub(crate) fn hard_margin(task: Binary<'_>, idx: &[usize], max_iter: u64) -> SvmRun {
    let ds = task.ds;
    let d = ds.dim();
    let row = |i: usize| {
        let mut x = vec![0.0; d];
        ds.scaled_row(i, &mut x);
        x
    };
    let go = idx.iter().copied().find(|&i| task.signs[i] > 0);
    let nogo = idx.iter().copied().find(|&i| task.signs[i] < 0);
    let (Some(g0), Some(n0)) = (go, nogo) else {
        let model = Linear {
            w: vec![0.0; d],
            b: if go.is_some() { 1.0 } else { -1.0 },
        };
        return SvmRun {
            model,
            support: Vec::new(),
            iterations: 0,
            converged: false,
            margin: 0.0,
            objective: None,
            spread: None,
        };
    };
    let sc = ds.scaler();
    // Large logs: solve on a working set, then let one scan of every unit add the units that
    // the current nearest points fail to account for, until none is left.
    let (mut set, mut in_set) = working_set(task, idx);
    let mut iterations = 0;
    let (mut round, started) = (1u32, std::time::Instant::now());
    // The least ⟨x, xᵢ⟩ over every GO unit and the greatest over every NO-GO unit, for the
    // final point x, when the last scan saw every unit: the certificate below then needs no
    // pass of its own.
    let mut extremes: Option<(f64, f64)> = None;
    let mut previous: Option<Vec<((usize, usize), f64)>> = None;
    let out = loop {
        // The first round starts from one pair; later ones from the last round's corral.
        let start = match &previous {
            None => Corral {
                ids: vec![(g0, n0)],
                pts: vec![pair_difference(ds, g0, n0)],
                lambda: vec![1.0],
            },
            Some(corral) => corral_of(ds, corral),
        };
        let out = wolfe_from(
            start,
            hull_oracle(task, &sc, &set, (g0, n0)),
            max_iter.min(1_000_000) as usize,
        );
        previous = Some(out.corral.clone());
        iterations += out.iterations;
        if set.len() == idx.len() {
            break out;
        }
        let x = &out.point;
        let xx = dot(x, x);
        let proj = sc.projection(x);
        // A GO unit i and NO-GO unit j improve on x when ⟨x, xᵢ − xⱼ⟩ < ‖x‖²; only units beyond
        // the set's own extremes can. Keep the most violating few (bounded memory).
        let (set_go, set_nogo) =
            set.iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(g, n), &i| {
                    let v = proj.of(ds, i);
                    if task.signs[i] > 0 {
                        (g.min(v), n)
                    } else {
                        (g, n.max(v))
                    }
                });
        let keep = WORKING_SET / 4;
        // The scan of every unit, in parallel chunks: each keeps its few most violating units
        // and the merge keeps the fewest overall, the same ones whatever the chunking.
        let (mut go, mut nogo) = idx
            .par_chunks(SCAN_CHUNK)
            .map(|chunk| {
                let (mut go, mut nogo) = (Vec::new(), Vec::new());
                for &i in chunk.iter().filter(|&&i| !in_set[i]) {
                    let v = proj.of(ds, i);
                    if task.signs[i] > 0 && v < set_go {
                        push_bounded(&mut go, (v, i), keep);
                    } else if task.signs[i] < 0 && v > set_nogo {
                        push_bounded(&mut nogo, (-v, i), keep);
                    }
                }
                (go, nogo)
            })
            .reduce(
                || (Vec::new(), Vec::new()),
                |(a, b), (c, e)| (merge_bounded(a, c, keep), merge_bounded(b, e, keep)),
            );
        let gap_limit = set_go - set_nogo - 1e-12 * xx.max(1e-300);
        go.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        nogo.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        go.truncate(keep);
        nogo.truncate(keep);
        let best_nogo = nogo
            .first()
            .map_or(f64::NEG_INFINITY, |v| -v.0)
            .max(set_nogo);
        let best_go = go.first().map_or(f64::INFINITY, |v| v.0).min(set_go);
        // ‖x‖/2 bounds γ* from above; the worst pair over every unit, projected on x, from below.
        let norm = xx.sqrt();
        Round {
            round,
            working_set: set.len(),
            iterations,
            lower: ((best_go - best_nogo) / (2.0 * norm)).max(0.0),
            upper: norm / 2.0,
            elapsed: started.elapsed(),
        }
        .report();
        round += 1;
        if best_go - best_nogo >= gap_limit {
            extremes = Some((best_go, best_nogo));
            break out;
        }
        let before = set.len();
        for &(_, i) in go.iter().chain(nogo.iter()) {
            in_set[i] = true;
            set.push(i);
        }
        if set.len() == before {
            extremes = Some((best_go, best_nogo));
            break out;
        }
    };
    let out = MinNorm { iterations, ..out };
    let z = &out.point;
    let zz = dot(z, z);
    let mut p = vec![0.0; d];
    let mut q = vec![0.0; d];
    let mut weights: Vec<(usize, f64)> = Vec::new();
    for &((i, j), l) in &out.corral {
        for (pk, v) in p.iter_mut().zip(row(i)) {
            *pk += l * v;
        }
        for (qk, v) in q.iter_mut().zip(row(j)) {
            *qk += l * v;
        }
        weights.push((i, l));
        weights.push((j, l));
    }
    if zz <= 1e-24 {
        let model = Linear {
            w: vec![0.0; d],
            b: 0.0,
        };
        return SvmRun {
            model,
            support: Vec::new(),
            iterations: out.iterations,
            converged: false,
            margin: 0.0,
            objective: None,
            spread: None,
        };
    }
    // w = 2(p − q)/‖p − q‖² puts p and q at scores ±1; the boundary bisects them.
    let w: Vec<f64> = z.iter().map(|v| 2.0 * v / zz).collect();
    let b = -(dot(&w, &p) + dot(&w, &q)) / 2.0;
    weights.sort_by_key(|w| w.0);
    let mut support: Vec<(usize, f64)> = Vec::new();
    for (i, l) in weights {
        match support.last_mut() {
            Some(last) if last.0 == i => last.1 += 2.0 * l / zz,
            _ => support.push((i, 2.0 * l / zz)),
        }
    }
    // Certificate instead of trust: ‖p − q‖/2 bounds γ* from above (p − q lies in the difference
    // of the hulls), the separator's worst unit bounds it from below. Converged when they agree.
    let model = Linear { w, b };
    let upper = zz.sqrt() / 2.0;
    // With w = 2z/‖z‖², a unit's score is 2⟨z, xᵢ⟩/‖z‖² + b and ‖w‖ = 2/‖z‖: the worst unit
    // of each class is the last scan's extreme, every unit having been compared there.
    let lower = match extremes {
        Some((go_min, nogo_max)) => {
            let to_margin = |v: f64| (2.0 * v / zz + b) * zz.sqrt() / 2.0;
            to_margin(go_min).min(-to_margin(nogo_max))
        }
        None => model.geometric_margin(ds, idx),
    };
    let converged = lower > 0.0 && (upper - lower) <= 1e-9 * upper;
    SvmRun {
        model,
        support,
        iterations: out.iterations,
        converged,
        margin: upper,
        objective: None,
        spread: None,
    }
}

/// Oracle over the Minkowski difference of the hulls, restricted to `set`: the vertex
/// xᵢ − xⱼ minimising ⟨p, ·⟩ (i GO with least ⟨p, xᵢ⟩, j NO-GO with greatest ⟨p, xⱼ⟩).
///
/// The set's scaled rows are copied once per round into one dense block per class: the
/// oracle runs hundreds of times a round, and reading rows scattered through the log (and
/// scaling them again each time) cost more than the products.
fn hull_oracle<'a>(
    task: Binary<'a>,
    sc: &crate::ingest::dataset::Scaler,
    set: &[usize],
    first: (usize, usize),
) -> impl FnMut(&[f64]) -> ((usize, usize), Vec<f64>) + 'a {
    let ds = task.ds;
    let d = ds.dim();
    let (mut go, mut nogo) = ((Vec::new(), Vec::new()), (Vec::new(), Vec::new()));
    for &i in set {
        let (rows, ids): &mut (Vec<f64>, Vec<usize>) = if task.signs[i] > 0 {
            &mut go
        } else {
            &mut nogo
        };
        let at = rows.len();
        rows.resize(at + d, 0.0);
        sc.row(ds, i, &mut rows[at..]);
        ids.push(i);
    }
    // The first unit of the least (or greatest) product wins ties, in set order as before.
    let best = move |(rows, ids): &(Vec<f64>, Vec<usize>), p: &[f64], sign: f64, none: usize| {
        let (mut bi, mut bv) = (none, f64::INFINITY);
        for (x, &i) in rows.chunks_exact(d.max(1)).zip(ids) {
            let v = sign * dot(p, x);
            if v < bv {
                bv = v;
                bi = i;
            }
        }
        bi
    };
    move |p: &[f64]| {
        let (bi, bj) = (best(&go, p, 1.0, first.0), best(&nogo, p, -1.0, first.1));
        ((bi, bj), pair_difference(ds, bi, bj))
    }
}

/// The corral of pairs `pairs` (convex weights) with their vertices, to start a round from.
fn corral_of(ds: &Dataset, pairs: &[((usize, usize), f64)]) -> Corral<(usize, usize)> {
    Corral {
        ids: pairs.iter().map(|p| p.0).collect(),
        pts: pairs
            .iter()
            .map(|&((i, j), _)| pair_difference(ds, i, j))
            .collect(),
        lambda: pairs.iter().map(|p| p.1).collect(),
    }
}

/// xᵢ − xⱼ in scaled units.
fn pair_difference(ds: &Dataset, i: usize, j: usize) -> Vec<f64> {
    let d = ds.dim();
    let (mut a, mut b) = (vec![0.0; d], vec![0.0; d]);
    ds.scaled_row(i, &mut a);
    ds.scaled_row(j, &mut b);
    a.iter().zip(&b).map(|(x, y)| x - y).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_round_shows_as_a_progress_line_once_the_solve_has_run_a_second() {
        crate::progress::tests::listen();
        let round = |round, secs| Round {
            round,
            working_set: 16_000,
            iterations: 1234,
            lower: 0.0123456789,
            upper: 0.0124,
            elapsed: std::time::Duration::from_secs_f64(secs),
        };
        round(1, 0.5).report();
        round(2, 2.25).report();
        // The line the command line printed for each round before it went through the
        // progress module, to the character.
        assert_eq!(
            crate::progress::tests::heard("maximum margin:"),
            [
                "maximum margin: round 2, 16000 units in the working set, 1234 cycles, γ* in [0.012346, 0.012400] (2.2 s)"
            ]
        );
    }
}
