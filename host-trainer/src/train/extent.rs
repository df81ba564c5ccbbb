//! The perceptron theorem's radius R = max ‖(x, 1)‖ over the training units, exactly, in
//! one fast parallel pass that also finds each channel's largest raw magnitude (which the
//! mistake scan's single-precision error bound needs).

use wide::{f64x4, i32x4};

use crate::ingest::dataset::Dataset;
use crate::train::lanes::{by_dim, consecutive, pad4};

/// Augmented radius R = max ‖(x, 1)‖ over `idx`.
pub fn radius(ds: &Dataset, idx: &[usize]) -> f64 {
    extent(ds, idx).0
}

/// One pass's findings for [`extent`].
struct Extent {
    /// The largest approximate ‖x‖².
    top: f64,
    /// Units whose approximate ‖x‖² came within 10⁻¹² of the largest so far.
    candidates: Vec<(usize, f64)>,
    /// Largest |raw| per channel, in lanes of four.
    big: Vec<f64x4>,
}

impl Extent {
    fn near(q: f64, top: f64) -> bool {
        q > 0.0 && q >= top * (1.0 - 1e-12)
    }

    fn empty(big: Vec<f64x4>) -> Self {
        Self {
            top: 0.0,
            candidates: Vec::new(),
            big,
        }
    }

    /// Takes in one unit's approximate ‖x‖².
    #[inline(always)]
    fn add(&mut self, i: usize, q: f64) {
        if Self::near(q, self.top) {
            self.top = self.top.max(q);
            self.candidates.push((i, q));
        }
    }

    fn merge(mut self, other: Self) -> Self {
        self.candidates.extend(other.candidates);
        for (a, b) in self.big.iter_mut().zip(other.big) {
            *a = a.fast_max(b);
        }
        self.top = self.top.max(other.top);
        self
    }
}

/// Approximate squared norms of scaled rows, ((raw − offset)·(1/half))² summed in lanes of
/// four, and the largest |raw| per channel seen so far.
struct Norms {
    off: Vec<f64x4>,
    inv: Vec<f64x4>,
}

impl Norms {
    fn new(ds: &Dataset) -> Self {
        let lanes = |v: Vec<f64>| v.chunks(4).map(|c| f64x4::new(pad4(c))).collect();
        Self {
            off: lanes(ds.scales.iter().map(|s| f64::from(s.offset)).collect()),
            inv: lanes(ds.scales.iter().map(|s| 1.0 / s.half as f64).collect()),
        }
    }

    /// The approximate ‖x‖² of one row (a padded lane adds (0 − 0)·0 = 0); raises `big`.
    #[inline(always)]
    fn norm(&self, row: &[i32], big: &mut [f64x4]) -> f64 {
        let mut q = f64x4::ZERO;
        // The tail as a padded copy chained by reference: mapping the whole lanes to vectors
        // and chaining the tail's vector ran a quarter slower.
        let (whole, tail) = row.as_chunks::<4>();
        let pad = pad4(tail);
        let chunks = whole.iter().chain((!tail.is_empty()).then_some(&pad));
        for (((r, o), v), b) in chunks.zip(&self.off).zip(&self.inv).zip(big.iter_mut()) {
            let r = f64x4::from_i32x4(i32x4::new(*r));
            let x = (r - *o) * *v;
            q += x * x;
            // Readings are finite: the fast maximum needs no NaN handling.
            *b = b.fast_max(r.abs());
        }
        q.reduce_add()
    }

    fn no_big(&self) -> Vec<f64x4> {
        vec![f64x4::ZERO; self.off.len()]
    }
}

/// R, and each channel's largest raw magnitude over `idx`, in one parallel pass.
///
/// R is the largest ‖(x, 1)‖ with x computed exactly as [`Dataset::scaled_row`] does, but
/// only rows whose norm, computed faster with reciprocals (relative error below 10⁻¹⁴), is
/// within 10⁻¹² of the largest are computed that way.
pub(crate) fn extent(ds: &Dataset, idx: &[usize]) -> (f64, Vec<f64>) {
    use rayon::prelude::*;
    let d = ds.dim();
    let norms = Norms::new(ds);
    let by_unit = || {
        idx.par_chunks(1 << 16)
            .map(|chunk| {
                let mut e = Extent::empty(norms.no_big());
                for &i in chunk {
                    let q = norms.norm(ds.raw_row(i), &mut e.big);
                    e.add(i, q);
                }
                e
            })
            .reduce(|| Extent::empty(norms.no_big()), Extent::merge)
    };
    let found = match consecutive(idx) {
        Some(a) => {
            let raw = &ds.raw[a * d..(a + idx.len()) * d];
            by_dim!(d, D => extent_rows::<D>(raw, a, &norms), _ => by_unit())
        }
        None => by_unit(),
    };
    let top = found.top;
    let mut x = vec![0.0; d];
    let r = found
        .candidates
        .iter()
        .filter(|&&(_, q)| Extent::near(q, top))
        .fold(1.0f64, |r, &(i, _)| {
            ds.scaled_row(i, &mut x);
            r.max((x.iter().map(|v| v * v).sum::<f64>() + 1.0).sqrt())
        });
    let big = found
        .big
        .iter()
        .flat_map(|b| b.to_array())
        .take(d)
        .collect();
    (r, big)
}

/// [`extent`]'s pass over consecutive rows of `D` channels, the first being unit `first`.
fn extent_rows<const D: usize>(raw: &[i32], first: usize, norms: &Norms) -> Extent {
    use rayon::prelude::*;
    const CHUNK: usize = 1 << 16;
    raw.as_chunks::<D>()
        .0
        .par_chunks(CHUNK)
        .enumerate()
        .map(|(c, rows)| {
            let mut e = Extent::empty(Vec::new());
            let mut big = norms.no_big();
            // Four rows at a time keep several rows' loads in flight.
            let (quads, rest) = rows.as_chunks::<4>();
            for (k, quad) in quads.iter().enumerate() {
                let q = [
                    norms.norm(&quad[0], &mut big),
                    norms.norm(&quad[1], &mut big),
                    norms.norm(&quad[2], &mut big),
                    norms.norm(&quad[3], &mut big),
                ];
                for (m, q) in q.into_iter().enumerate() {
                    e.add(first + c * CHUNK + 4 * k + m, q);
                }
            }
            for (k, row) in rest.iter().enumerate() {
                let q = norms.norm(row, &mut big);
                e.add(first + c * CHUNK + 4 * quads.len() + k, q);
            }
            e.big = big;
            e
        })
        .reduce(|| Extent::empty(norms.no_big()), Extent::merge)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;

    #[test]
    fn radius_is_the_largest_augmented_norm_exactly() {
        // Many units of nearly equal norm: the fast pre-selection must not lose the largest.
        // Channel counts with and without an unrolled pass, units in and out of order.
        use rand::Rng;
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        for d in [1, 6, 16, 33] {
            let points: Vec<Vec<f64>> = (0..5001)
                .map(|_| {
                    let p: Vec<f64> = (0..d).map(|_| rng.gen_range(-1.0..1.0)).collect();
                    let n = p.iter().map(|v| v * v).sum::<f64>().sqrt();
                    p.iter().map(|v| 0.9 * v / n).collect()
                })
                .collect();
            let labels = vec![1i8; points.len()];
            let ds = Dataset::from_scaled(&points, &labels);
            let mut x = vec![0.0; ds.dim()];
            let norm = |i: usize, x: &mut [f64]| {
                ds.scaled_row(i, x);
                (x.iter().map(|v| v * v).sum::<f64>() + 1.0).sqrt()
            };
            let all = ds.all();
            let odd: Vec<usize> = all.iter().rev().copied().step_by(2).collect();
            for idx in [&all, &odd] {
                let want = idx.iter().map(|&i| norm(i, &mut x)).fold(1.0, f64::max);
                let (r, big) = extent(&ds, idx);
                assert_eq!(r, want, "{d} channels");
                for (j, m) in big.iter().enumerate() {
                    let exact = idx
                        .iter()
                        .map(|&i| f64::from(ds.raw_row(i)[j]).abs())
                        .fold(0.0, f64::max);
                    assert_eq!(*m, exact, "{d} channels, channel {j}");
                }
            }
        }
    }
}
