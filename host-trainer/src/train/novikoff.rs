//! Novikoff's figures: the margin γ in the perceptron theorem's own convention, augmented
//! z = (x, 1)/R, no free bias, a unit-norm separator: the distance from the origin to the
//! hull of the yᵢ·zᵢ, by the same algorithm as the hard margin ([`crate::train::wolfe`]).
//! The separability check ([`crate::train::separability`]) shows γ and the bound 1/γ² on the
//! classic perceptron's updates.

use rayon::prelude::*;

use crate::ingest::dataset::dot;
use crate::train::task::{AsBinary, Binary};
use crate::train::wolfe::wolfe;
use crate::train::working_set::{
    SCAN_CHUNK, WORKING_SET, merge_bounded, push_bounded, working_set,
};

/// The perceptron theorem's margin: the best margin of a unit-norm separator through
/// the origin for z = (x, 1)/R, with R = max ‖(x, 1)‖. `None` if not separable in that sense.
///
/// Returns (γ, separator over (x, 1) with ‖w‖ = 1).
pub fn homogeneous_margin(
    task: &impl AsBinary,
    idx: &[usize],
    radius: f64,
) -> Option<(f64, Vec<f64>)> {
    let b = homogeneous_bounds(task, idx, radius)?;
    (b.upper - b.lower <= 1e-9 * b.upper).then_some((b.upper, b.separator))
}

/// What the solver proved of the perceptron theorem's margin γ: `lower ≤ γ ≤ upper`.
pub struct MarginBounds {
    /// The worst unit's value under `separator`: a margin γ surely reaches.
    pub lower: f64,
    /// ‖x‖ of the nearest hull point found: γ is at most this.
    pub upper: f64,
    /// The unit-norm separator over (x, 1) that achieves `lower`.
    pub separator: Vec<f64>,
}

/// [`homogeneous_margin`]'s bounds even when they have not met: `None` if no separator
/// through the origin was found (lower bound not positive).
pub fn homogeneous_bounds(
    task: &impl AsBinary,
    idx: &[usize],
    radius: f64,
) -> Option<MarginBounds> {
    let task = task.binary();
    let ds = task.ds;
    let first = *idx.first()?;
    let sc = ds.scaler();
    let d = ds.dim();
    // ⟨p, yᵢ·(xᵢ, 1)/R⟩: the oracle's value of unit i.
    let value = |p: &[f64], i: usize, buf: &mut [f64]| {
        sc.row(ds, i, buf);
        task.y(i) * (dot(p, buf) + p[d]) / radius
    };
    // Solve on a working set; a scan of every unit adds those below the set's minimum.
    let (mut set, mut in_set) = working_set(task, idx);
    let mut buf = vec![0.0; d];
    let out = loop {
        let oracle = |p: &[f64]| {
            let mut x = vec![0.0; d];
            let best = set.iter().copied().min_by(|&a, &b| {
                value(p, a, &mut x)
                    .total_cmp(&value(p, b, &mut x))
                    .then(a.cmp(&b))
            });
            let best = best.unwrap_or(first);
            (best, vertex_of(task, best, radius))
        };
        let out = wolfe((set[0], vertex_of(task, set[0], radius)), oracle, 100_000);
        if set.len() == idx.len() {
            break out;
        }
        let floor = set
            .iter()
            .map(|&i| value(&out.point, i, &mut buf))
            .fold(f64::INFINITY, f64::min);
        let keep = WORKING_SET / 4;
        let below = idx
            .par_chunks(SCAN_CHUNK)
            .map(|chunk| {
                let mut buf = vec![0.0; d];
                let mut below = Vec::new();
                for &i in chunk.iter().filter(|&&i| !in_set[i]) {
                    let v = value(&out.point, i, &mut buf);
                    if v < floor {
                        push_bounded(&mut below, (v, i), keep);
                    }
                }
                below
            })
            .reduce(Vec::new, |a, b| merge_bounded(a, b, keep));
        // Exactly the `keep` lowest, so the working set does not depend on the chunking.
        let mut below = below;
        below.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        below.truncate(keep);
        if below.is_empty() {
            break out;
        }
        for (_, i) in below {
            in_set[i] = true;
            set.push(i);
        }
    };
    // ‖x‖ bounds γ from above (x is in the hull); the worst unit under x/‖x‖ bounds it from below.
    let upper = dot(&out.point, &out.point).sqrt();
    if upper <= 1e-12 {
        return None;
    }
    let u: Vec<f64> = out.point.iter().map(|v| v / upper).collect();
    let lower = idx
        .par_chunks(SCAN_CHUNK)
        .map(|chunk| {
            let mut buf = vec![0.0; d];
            chunk
                .iter()
                .map(|&i| value(&u, i, &mut buf))
                .fold(f64::INFINITY, f64::min)
        })
        .reduce(|| f64::INFINITY, f64::min);
    (lower > 0.0).then_some(MarginBounds {
        lower,
        upper,
        separator: u,
    })
}

fn vertex_of(task: Binary<'_>, i: usize, radius: f64) -> Vec<f64> {
    let ds = task.ds;
    let mut x = vec![0.0; ds.dim()];
    ds.scaled_row(i, &mut x);
    let y = task.y(i);
    let mut z: Vec<f64> = x.iter().map(|v| y * v / radius).collect();
    z.push(y / radius);
    z
}
