//! Trainers of the perceptron family: classic (Novikoff form), averaged and pocket.
//!
//! The classic perceptron is run exactly as the convergence theorem states it:
//! append the constant-1 feature, divide every augmented vector by
//! R = max ‖(x, 1)‖ so all lie in the unit ball, start from w = 0, and on each
//! mistake (y·wᵀz ≤ 0) set w ← w + y·z. If a unit-norm w* separates the
//! augmented data with margin γ, there are at most 1/γ² updates (Novikoff).

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Mutex};

use wide::{f32x4, f64x4, i32x4};

use crate::ingest::dataset::{Dataset, RawForm};
use crate::train::linear::Linear;

/// Which member of the perceptron family.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum PerceptronKind {
    /// The classic rule; stops at the first epoch without mistakes.
    Classic,
    /// Returns the average of all intermediate weight vectors.
    Averaged,
    /// Keeps the epoch-end weights with the fewest training errors.
    Pocket,
}

/// Settings shared by the perceptron family.
#[derive(Clone, Copy, Debug)]
pub struct PerceptronConfig {
    /// Epoch cap.
    pub epochs: u32,
    /// Seed of the per-epoch shuffle.
    pub seed: u64,
}

/// What a perceptron run did.
#[derive(Clone, Debug)]
pub struct PerceptronRun {
    /// The classifier, on scaled inputs.
    pub model: Linear,
    /// Mistake-driven updates made.
    pub updates: u64,
    /// Epochs run.
    pub epochs: u32,
    /// True if an epoch passed without a mistake.
    pub converged: bool,
    /// R = max ‖(x, 1)‖ over the training units.
    pub radius: f64,
}

/// Augmented radius R = max ‖(x, 1)‖ over `idx`.
pub fn radius(ds: &Dataset, idx: &[usize]) -> f64 {
    extent(ds, idx).0
}

/// Runs `$body` with the const `$D` equal to the channel count `$d` (1 to 32), or
/// `$fallback` beyond: a channel count known at compile time lets the compiler unroll and
/// vectorise per-row loops, which run twice as fast as loops over a run-time length.
macro_rules! by_dim {
    ($d:expr, $D:ident => $body:expr, _ => $fallback:expr) => {
        by_dim!(@arms $d, $D, $body, $fallback;
            1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16 17 18 19 20 21 22 23 24 25 26 27 28 29 30 31 32)
    };
    (@arms $d:expr, $D:ident, $body:expr, $fallback:expr; $($n:literal)*) => {
        match $d {
            $($n => {
                const $D: usize = $n;
                $body
            })*
            _ => $fallback,
        }
    };
}

/// The first unit of `units` if they are consecutive.
fn consecutive(units: &[usize]) -> Option<usize> {
    let (&a, &z) = (units.first()?, units.last()?);
    (z >= a && z - a + 1 == units.len()).then_some(a)
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
fn extent(ds: &Dataset, idx: &[usize]) -> (f64, Vec<f64>) {
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

/// The mistake test y·score ≤ 0 screened in single precision.
///
/// Most units are far from the boundary, and for them a single-precision score decides the
/// test at twice the speed; only units whose single-precision score lies within its proven
/// error bound of zero are decided in double precision. So the decisions are those of the
/// double-precision test on every unit.
///
/// The bound, with u = 2⁻²⁴: rounding wⱼ and xⱼ to f32 and multiplying them errs by at most
/// 3.01u·|wⱼxⱼ| per term, and summing n terms in any order by at most (n − 1)u·Σ|terms|
/// (the standard floating-point summation bound; Higham, *Accuracy and Stability of
/// Numerical Algorithms*, ch. 3, from memory). With S = Σ|wⱼ|·max|xⱼ| + |c| over the n =
/// channels + 1 terms, the error is below (n + 4)·u·S; the screen is twice that, which also
/// covers the double-precision score's own error. Weights below 10⁻³⁰ (near f32's subnormal
/// range) or S above 10³⁰ (near its overflow) turn the screen off.
struct Screen {
    /// Weights in lanes of four, the last padded with zeros.
    w: Vec<f32x4>,
    /// Channel count.
    d: usize,
    /// Constant term.
    c: f32,
    /// Single-precision scores within this of zero are decided in double precision.
    bound: f32,
}

impl Screen {
    fn new(f: &RawForm, max_abs: &[f64]) -> Self {
        let (w, c) = (f.weights(), f.constant());
        let s: f64 = w.iter().zip(max_abs).map(|(w, m)| w.abs() * m).sum::<f64>() + c.abs();
        let terms = (w.len() + 1) as f64;
        let bound = 2.0 * (terms + 4.0) * f64::from(f32::EPSILON) * 0.5 * s * 1.01;
        // Weights below f32's normal range lose their relative accuracy: no screening then.
        let tiny = w.iter().any(|&v| v != 0.0 && v.abs() < 1e-30);
        let usable = bound.is_finite() && bound < 1e30 && !tiny;
        let lanes = w.chunks(4).map(|c| f32x4::new(pad4(c).map(|v| v as f32)));
        Self {
            w: lanes.collect(),
            d: w.len(),
            c: c as f32,
            bound: if usable { bound as f32 } else { f32::INFINITY },
        }
    }

    /// True if a unit with `label`, readings `raw` and single-precision score `s` is on the
    /// wrong side of (or on) the boundary of `f`.
    #[inline(always)]
    fn decide(&self, f: &RawForm, label: i8, s: f32, raw: &[i32]) -> bool {
        let ys = f32::from(label) * (s + self.c);
        if ys > self.bound {
            false
        } else if ys < -self.bound {
            true
        } else {
            f64::from(label) * f.score(raw) <= 0.0
        }
    }

    /// Position of the first mistake among consecutive rows (`labels.len()` rows of `raw`).
    fn first_in_rows(&self, f: &RawForm, raw: &[i32], labels: &[i8]) -> Option<usize> {
        by_dim!(self.d, D => self.first_in_rows_of::<D>(f, raw, labels), _ => labels
            .iter()
            .zip(raw.chunks_exact(self.d))
            .position(|(&l, x)| self.decide(f, l, score_f32(&self.w, x), x)))
    }

    fn first_in_rows_of<const D: usize>(
        &self,
        f: &RawForm,
        raw: &[i32],
        labels: &[i8],
    ) -> Option<usize> {
        let w = self.w.as_slice();
        // Eight rows at a time: independent sums keep the loads of several rows in flight.
        let (groups, rest) = raw.as_chunks::<D>();
        debug_assert!(rest.is_empty());
        let (octs, _) = groups.as_chunks::<8>();
        let mut base = 0;
        for (q, l) in octs.iter().zip(labels.chunks_exact(8)) {
            let s = q.each_ref().map(|x| score_of(w, x));
            for k in 0..8 {
                if self.decide(f, l[k], s[k], &q[k]) {
                    return Some(base + k);
                }
            }
            base += 8;
        }
        groups
            .get(base..)?
            .iter()
            .zip(labels.get(base..)?)
            .position(|(x, &l)| self.decide(f, l, score_of(w, x), x))
            .map(|p| base + p)
    }
}

/// A dot product of a known length in single precision, for the screen; `w` is padded with
/// zeros to whole lanes of four.
#[inline(always)]
fn score_of<const D: usize>(w: &[f32x4], x: &[i32; D]) -> f32 {
    let (xc, xt) = x.as_chunks::<4>();
    let mut acc = f32x4::ZERO;
    for (a, b) in w.iter().zip(xc) {
        acc += *a * i32x4::new(*b).round_float();
    }
    if let (Some(a), false) = (w.get(xc.len()), xt.is_empty()) {
        acc += *a * lane(xt).round_float();
    }
    acc.reduce_add()
}

/// A dot product in single precision, for the screen.
#[inline]
fn score_f32(w: &[f32x4], x: &[i32]) -> f32 {
    let products = w
        .iter()
        .zip(x.chunks(4))
        .map(|(a, b)| *a * lane(b).round_float());
    products.fold(f32x4::ZERO, |acc, p| acc + p).reduce_add()
}

/// Up to four values as one lane of four, padded with zeros.
#[inline(always)]
fn pad4<T: Copy + Default>(x: &[T]) -> [T; 4] {
    let mut v = [T::default(); 4];
    let n = x.len().min(4);
    v[..n].copy_from_slice(&x[..n]);
    v
}

/// Up to four readings as a lane, padded with zeros.
#[inline(always)]
fn lane(x: &[i32]) -> i32x4 {
    i32x4::new(pad4(x))
}

/// Position in `units` of the first unit on the wrong side of (or on) the boundary.
fn first_mistake(f: &RawForm, screen: &Screen, ds: &Dataset, units: &[usize]) -> Option<usize> {
    let d = ds.dim();
    // A run of consecutive units: stream the rows directly.
    if let Some(a) = consecutive(units) {
        let z = a + units.len();
        return screen.first_in_rows(f, &ds.raw[a * d..z * d], &ds.labels[a..z]);
    }
    units.iter().position(|&i| {
        let x = ds.raw_row(i);
        screen.decide(f, ds.labels[i], score_f32(&screen.w, x), x)
    })
}

/// Weights as the mistake scan uses them.
struct Weights {
    f: RawForm,
    screen: Screen,
}

/// A scan for the look-ahead thread: the first mistake in `units` under `w`.
struct Job<'a> {
    ticket: u64,
    units: &'a [usize],
    w: Arc<Weights>,
}

/// The perceptron's look-ahead thread and its mailbox.
///
/// The weights change only at a mistake, so while one thread scans a block, another can scan
/// the next block under the same weights; if the first finds no mistake, the second's answer
/// is the answer for the next block. Results are the sequential scan's exactly: an answer is
/// used only for the block and weights it was asked for.
#[derive(Default)]
struct Lookahead<'a> {
    mail: Mutex<Mail<'a>>,
    /// Ticket of the one job whose answer is still wanted (0: none).
    live: AtomicU64,
    stop: AtomicBool,
}

#[derive(Default)]
struct Mail<'a> {
    job: Option<Job<'a>>,
    done: Option<(u64, Option<usize>)>,
}

/// Units the look-ahead scans between checks that its answer is still wanted.
const LOOKAHEAD_STEP: usize = 512;

impl<'a> Lookahead<'a> {
    fn mail(&self) -> std::sync::MutexGuard<'_, Mail<'a>> {
        self.mail
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner)
    }

    /// Asks for the first mistake in `units` under `w`.
    fn post(&self, ticket: u64, units: &'a [usize], w: Arc<Weights>) {
        // Wanted before it is posted: the thread may take it at once and check.
        self.live.store(ticket, Ordering::Release);
        self.mail().job = Some(Job { ticket, units, w });
    }

    /// Withdraws the question (the weights changed).
    fn cancel(&self) {
        self.live.store(0, Ordering::Release);
        self.mail().job = None;
    }

    /// The answer to `ticket`: `Some(first mistake)`, or `None` if the thread had not begun
    /// or has ended (the question is withdrawn and the caller scans the block itself).
    fn result(&self, ticket: u64, serving: impl Fn() -> bool) -> Option<Option<usize>> {
        loop {
            if !serving() {
                self.cancel();
                return None;
            }
            {
                let mut m = self.mail();
                if let Some((t, found)) = m.done
                    && t == ticket
                {
                    m.done = None;
                    return Some(found);
                }
                if m.job.as_ref().is_some_and(|j| j.ticket == ticket) {
                    m.job = None;
                    self.live.store(0, Ordering::Release);
                    return None;
                }
            }
            std::hint::spin_loop();
        }
    }

    fn stop(&self) {
        self.stop.store(true, Ordering::Release);
    }

    /// The look-ahead thread: answers questions until stopped.
    fn serve(&self, ds: &Dataset) {
        let mut idle = 0u32;
        while !self.stop.load(Ordering::Acquire) {
            let Some(job) = self.mail().job.take() else {
                // Spin while questions come fast; yield the core when they do not.
                idle = idle.saturating_add(1);
                if idle > 1000 {
                    std::thread::yield_now();
                } else {
                    std::hint::spin_loop();
                }
                continue;
            };
            idle = 0;
            let mut found = None;
            let mut wanted = true;
            for (k, piece) in job.units.chunks(LOOKAHEAD_STEP).enumerate() {
                if self.live.load(Ordering::Acquire) != job.ticket {
                    wanted = false;
                    break;
                }
                if let Some(p) = first_mistake(&job.w.f, &job.w.screen, ds, piece) {
                    found = Some(k * LOOKAHEAD_STEP + p);
                    break;
                }
            }
            if wanted {
                self.mail().done = Some((job.ticket, found));
            }
        }
    }
}

/// Units per block of the perceptron's visit order.
const BLOCK: usize = 4096;

/// Trains a member of the perceptron family on the units `idx`.
pub fn perceptron(
    ds: &Dataset,
    idx: &[usize],
    kind: PerceptronKind,
    cfg: PerceptronConfig,
) -> PerceptronRun {
    let d = ds.dim();
    let mut v = vec![0.0f64; d + 1];
    // Averaging by the standard trick: avg = v - u / c, with u accumulating c·y·z.
    let mut u = vec![0.0f64; d + 1];
    let mut c = 1.0f64;
    let mut pocket: Option<(usize, Vec<f64>)> = None;
    let mut z = vec![0.0f64; d + 1];
    // Visit order: a seeded shuffle of blocks of consecutive units, each block read in file
    // order. The theorem holds for any order; shuffling single units would cost a cache miss
    // per unit on large logs, streaming through a block costs none. A log of fewer than 64
    // blocks is cut into 64 (of at least 16 units), so that the seed orders small logs too.
    let block = BLOCK.min(idx.len().div_ceil(64).max(16));
    let mut blocks: Vec<&[usize]> = idx.chunks(block).collect();
    let mut rng = ChaCha8Rng::seed_from_u64(cfg.seed);
    let sc = ds.scaler();
    let (r, max_abs) = extent(ds, idx);
    let weights = |v: &[f64]| {
        let f = RawForm::augmented(ds, v, r);
        let screen = Screen::new(&f, &max_abs);
        Arc::new(Weights { f, screen })
    };
    let mut w = weights(&v);
    let (mut updates, mut epochs, mut converged) = (0u64, 0u32, false);
    let ahead = Lookahead::default();
    // A second thread scans the block after the current one with the same weights, when
    // there is a core for it: not inside a parallel job (cross-validation folds), and not
    // for logs of a few blocks, where starting a thread costs more than it saves.
    let spare_core = idx.len() >= 4 * BLOCK
        && rayon::current_thread_index().is_none()
        && std::thread::available_parallelism().is_ok_and(|n| n.get() >= 2);
    std::thread::scope(|scope| {
        let helper = spare_core.then(|| scope.spawn(|| ahead.serve(ds)));
        // Should the thread end early (it can only by a panic, which the scope then raises),
        // its questions are withdrawn rather than waited for.
        let serving = || helper.as_ref().is_some_and(|h| !h.is_finished());
        let mut ticket = 0u64;
        while epochs < cfg.epochs {
            epochs += 1;
            blocks.shuffle(&mut rng);
            let mut mistakes = 0usize;
            // The next unit to visit is blocks[bi][start]; `posted` is the ticket of the
            // look-ahead scan of blocks[bi + 1] under the current weights.
            let (mut bi, mut start) = (0usize, 0usize);
            let mut posted: Option<u64> = None;
            while bi < blocks.len() {
                if spare_core && posted.is_none() && bi + 1 < blocks.len() {
                    ticket += 1;
                    ahead.post(ticket, blocks[bi + 1], Arc::clone(&w));
                    posted = Some(ticket);
                }
                // v·z/R is evaluated on the raw readings, (v·z)/R = Σ (vⱼ/(halfⱼ·R))·rawⱼ +
                // const, and the block is scanned in a tight loop up to its next mistake.
                let p = match first_mistake(&w.f, &w.screen, ds, &blocks[bi][start..]) {
                    Some(p) => start + p,
                    None => {
                        c += (blocks[bi].len() - start) as f64;
                        (bi, start) = (bi + 1, 0);
                        match posted.take().and_then(|t| ahead.result(t, serving)) {
                            // The look-ahead found the next block clean: skip it.
                            Some(None) => {
                                c += blocks[bi].len() as f64;
                                bi += 1;
                                continue;
                            }
                            Some(Some(p)) => p,
                            None => continue,
                        }
                    }
                };
                let i = blocks[bi][p];
                c += (p - start) as f64;
                let y = ds.y(i);
                sc.row(ds, i, &mut z[..d]);
                z[d] = 1.0;
                for ((vj, uj), zj) in v.iter_mut().zip(u.iter_mut()).zip(&z) {
                    *vj += y * zj / r;
                    *uj += c * y * zj / r;
                }
                // New weights: a look-ahead under the old ones is void.
                ahead.cancel();
                posted = None;
                w = weights(&v);
                updates += 1;
                mistakes += 1;
                c += 1.0;
                start = p + 1;
            }
            if kind == PerceptronKind::Pocket {
                let errors = errors_of(ds, idx, &v, r);
                if pocket.as_ref().is_none_or(|(e, _)| errors < *e) {
                    pocket = Some((errors, v.clone()));
                }
            }
            if mistakes == 0 {
                converged = true;
                break;
            }
        }
        ahead.stop();
    });
    let final_v = match kind {
        PerceptronKind::Classic => v,
        PerceptronKind::Averaged => v.iter().zip(&u).map(|(a, b)| a - b / c).collect(),
        PerceptronKind::Pocket => pocket.map_or(v, |(_, p)| p),
    };
    let model = Linear {
        w: final_v[..d].iter().map(|a| a / r).collect(),
        b: final_v[d] / r,
    };
    PerceptronRun {
        model,
        updates,
        epochs,
        converged,
        radius: r,
    }
}

fn errors_of(ds: &Dataset, idx: &[usize], v: &[f64], r: f64) -> usize {
    let d = ds.dim();
    let m = Linear {
        w: v[..d].iter().map(|a| a / r).collect(),
        b: v[d] / r,
    };
    m.scores(ds, idx)
        .iter()
        .zip(idx)
        .filter(|&(s, &i)| ds.y(i) * *s <= 0.0)
        .count()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn converges_on_a_separable_pair() {
        let ds = Dataset::from_scaled(&[vec![0.5, 0.5], vec![-0.5, -0.5]], &[1, -1]);
        let run = perceptron(
            &ds,
            &ds.all(),
            PerceptronKind::Classic,
            PerceptronConfig {
                epochs: 10,
                seed: 1,
            },
        );
        assert!(run.converged);
        assert!(run.model.geometric_margin(&ds, &ds.all()) > 0.0);
    }

    /// Random points in [-1, 1]^d (seeded).
    fn random_set(n: usize, d: usize, seed: u64) -> Dataset {
        use rand::Rng;
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let points: Vec<Vec<f64>> = (0..n)
            .map(|_| (0..d).map(|_| rng.gen_range(-1.0..1.0)).collect())
            .collect();
        let labels: Vec<i8> = (0..n).map(|i| if i % 3 == 0 { -1 } else { 1 }).collect();
        Dataset::from_scaled(&points, &labels)
    }

    #[test]
    fn the_seed_orders_small_logs_too() {
        // 600 units is less than one block of the large-log visit order: the seed must still
        // change the order, and so the run (the theorem allows any order).
        let side = |p: &[f64]| p[0] + 0.3 * p[1] - 0.2;
        let ds0 = random_set(600, 3, 4);
        let pts: Vec<Vec<f64>> = (0..ds0.len())
            .map(|i| {
                let mut x = vec![0.0; 3];
                ds0.scaled_row(i, &mut x);
                x
            })
            .filter(|p| side(p).abs() > 0.02)
            .collect();
        let labels: Vec<i8> = pts
            .iter()
            .map(|p| if side(p) > 0.0 { 1 } else { -1 })
            .collect();
        let ds = Dataset::from_scaled(&pts, &labels);
        let run = |seed| {
            perceptron(
                &ds,
                &ds.all(),
                PerceptronKind::Classic,
                PerceptronConfig { epochs: 1000, seed },
            )
        };
        let runs: Vec<PerceptronRun> = (1..=4).map(run).collect();
        assert!(runs.iter().all(|r| r.converged));
        assert!(
            runs.windows(2).any(|w| w[0].model != w[1].model),
            "four seeds gave one run"
        );
        // The same seed gives the same run.
        assert_eq!(run(2).model, runs[1].model);
    }

    #[test]
    fn screened_mistake_test_decides_as_double_precision() {
        use rand::Rng;
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        // 33 channels has no unrolled kernel: the run-time-length one is checked too.
        for d in [1, 2, 3, 4, 5, 7, 8, 13, 16, 17, 32, 33] {
            let ds = random_set(203, d, d as u64);
            let all = ds.all();
            let (_, max_abs) = extent(&ds, &all);
            for trial in 0..40 {
                let w: Vec<f64> = (0..d).map(|_| rng.gen_range(-2.0..2.0)).collect();
                // Put unit k exactly on the boundary (as far as doubles go), or a hair off it.
                let k = rng.gen_range(0..ds.len());
                let probe = RawForm::new(&ds, &w, 0.0);
                let hair = [
                    0.0, 1e-300, -1e-15, 1e-9, -1e-8, 1e-7, -3e-7, 1e-6, -3e-6, 1e-5,
                ][trial % 10];
                let f = RawForm::new(&ds, &w, -probe.score(ds.raw_row(k)) + hair);
                let screen = Screen::new(&f, &max_abs);
                let want: Vec<bool> = (0..ds.len())
                    .map(|i| ds.y(i) * f.score(ds.raw_row(i)) <= 0.0)
                    .collect();
                for (i, &wanted) in want.iter().enumerate() {
                    let x = ds.raw_row(i);
                    let s = score_f32(&screen.w, x);
                    // The single-precision error stays within half the screen (the proof's
                    // bound; the other half covers the double-precision score).
                    let err = (f64::from(s + screen.c) - f.score(x)).abs();
                    assert!(err <= f64::from(screen.bound) / 2.0, "d {d}: error {err}");
                    assert_eq!(
                        screen.decide(&f, ds.labels[i], s, x),
                        wanted,
                        "d {d}, unit {i}"
                    );
                }
                // The first mistake of every suffix, through the unrolled kernels.
                for start in [0, 1, 5, k, ds.len() - 3] {
                    let got = first_mistake(&f, &screen, &ds, &all[start..]);
                    let expect = want[start..].iter().position(|&m| m);
                    assert_eq!(got, expect, "d {d}, from {start}");
                }
                // Units out of order take the per-unit path.
                let odd: Vec<usize> = (0..ds.len()).rev().step_by(2).collect();
                let expect = odd.iter().position(|&i| want[i]);
                assert_eq!(first_mistake(&f, &screen, &ds, &odd), expect, "d {d}");
            }
        }
    }

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

    #[test]
    fn look_ahead_gives_the_sequential_run_exactly() {
        // 40 000 units (ten blocks) on both sides of a hyperplane, none closer than 0.01 to
        // it: the first epochs have many mistakes, the last ones whole blocks without.
        use rand::Rng;
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let side = |p: &[f64]| p[0] - 0.5 * p[1] + 0.25 * p[3] - 0.1;
        let points: Vec<Vec<f64>> = std::iter::repeat_with(|| {
            (0..5)
                .map(|_| rng.gen_range(-1.0..1.0))
                .collect::<Vec<f64>>()
        })
        .filter(|p| side(p).abs() > 0.01)
        .take(40_000)
        .collect();
        let labels: Vec<i8> = points
            .iter()
            .map(|p| if side(p) > 0.0 { 1 } else { -1 })
            .collect();
        let ds = Dataset::from_scaled(&points, &labels);
        let idx = ds.all();
        // Inside a rayon pool there is no look-ahead thread: the sequential scan.
        let sequential = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        for kind in [
            PerceptronKind::Classic,
            PerceptronKind::Averaged,
            PerceptronKind::Pocket,
        ] {
            let cfg = PerceptronConfig {
                epochs: 12,
                seed: 9,
            };
            let with = perceptron(&ds, &idx, kind, cfg);
            let without = sequential.install(|| perceptron(&ds, &idx, kind, cfg));
            assert!(with.updates > 1000, "{kind:?}: a run with many updates");
            assert_eq!(with.model, without.model, "{kind:?}");
            assert_eq!(
                (with.updates, with.epochs),
                (without.updates, without.epochs)
            );
        }
    }
}
