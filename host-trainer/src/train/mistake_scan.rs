//! Where the perceptron's next mistake is, fast: the mistake test y·score ≤ 0 screened in
//! single precision with a proven error bound (decisions exactly those of double
//! precision), row kernels unrolled per channel count, and a look-ahead thread that scans
//! the next block under the same weights.

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Mutex};

use wide::{f32x4, i32x4};

use crate::ingest::dataset::RawForm;
use crate::train::lanes::{by_dim, consecutive, lane, pad4};
use crate::train::task::Binary;

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
pub(crate) struct Screen {
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
    pub(crate) fn new(f: &RawForm, max_abs: &[f64]) -> Self {
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

/// Position in `units` of the first unit on the wrong side of (or on) the boundary.
pub(crate) fn first_mistake(
    f: &RawForm,
    screen: &Screen,
    task: Binary<'_>,
    units: &[usize],
) -> Option<usize> {
    let ds = task.ds;
    let d = ds.dim();
    // A run of consecutive units: stream the rows directly.
    if let Some(a) = consecutive(units) {
        let z = a + units.len();
        return screen.first_in_rows(f, &ds.raw[a * d..z * d], &task.signs[a..z]);
    }
    units.iter().position(|&i| {
        let x = ds.raw_row(i);
        screen.decide(f, task.signs[i], score_f32(&screen.w, x), x)
    })
}

/// Weights as the mistake scan uses them.
pub(crate) struct Weights {
    pub(crate) f: RawForm,
    pub(crate) screen: Screen,
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
pub(crate) struct Lookahead<'a> {
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
    pub(crate) fn post(&self, ticket: u64, units: &'a [usize], w: Arc<Weights>) {
        // Wanted before it is posted: the thread may take it at once and check.
        self.live.store(ticket, Ordering::Release);
        self.mail().job = Some(Job { ticket, units, w });
    }

    /// Withdraws the question (the weights changed).
    pub(crate) fn cancel(&self) {
        self.live.store(0, Ordering::Release);
        self.mail().job = None;
    }

    /// The answer to `ticket`: `Some(first mistake)`, or `None` if the thread had not begun
    /// or has ended (the question is withdrawn and the caller scans the block itself).
    pub(crate) fn result(&self, ticket: u64, serving: impl Fn() -> bool) -> Option<Option<usize>> {
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

    pub(crate) fn stop(&self) {
        self.stop.store(true, Ordering::Release);
    }

    /// The look-ahead thread: answers questions until stopped.
    pub(crate) fn serve(&self, task: Binary<'_>) {
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
                if let Some(p) = first_mistake(&job.w.f, &job.w.screen, task, piece) {
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

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::ingest::dataset::Dataset;
    use crate::train::extent::extent;
    use crate::train::task::AsBinary;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;

    /// Random points in [-1, 1]^d (seeded).
    pub(crate) fn random_set(n: usize, d: usize, seed: u64) -> Dataset {
        use rand::Rng;
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let points: Vec<Vec<f64>> = (0..n)
            .map(|_| (0..d).map(|_| rng.gen_range(-1.0..1.0)).collect())
            .collect();
        let labels: Vec<i8> = (0..n).map(|i| if i % 3 == 0 { -1 } else { 1 }).collect();
        Dataset::from_scaled(&points, &labels)
    }

    /// `n` random points of [-1, 1]^d (seeded) farther than `gap` from the plane
    /// `side(p) = 0`, labelled by their side: a separable set.
    pub(crate) fn separated(
        n: usize,
        d: usize,
        seed: u64,
        gap: f64,
        side: impl Fn(&[f64]) -> f64,
    ) -> Dataset {
        use rand::Rng;
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let points: Vec<Vec<f64>> = std::iter::repeat_with(|| {
            (0..d)
                .map(|_| rng.gen_range(-1.0..1.0))
                .collect::<Vec<f64>>()
        })
        .filter(|p| side(p).abs() > gap)
        .take(n)
        .collect();
        let labels: Vec<i8> = points
            .iter()
            .map(|p| if side(p) > 0.0 { 1 } else { -1 })
            .collect();
        Dataset::from_scaled(&points, &labels)
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
                    let got = first_mistake(&f, &screen, ds.binary(), &all[start..]);
                    let expect = want[start..].iter().position(|&m| m);
                    assert_eq!(got, expect, "d {d}, from {start}");
                }
                // Units out of order take the per-unit path.
                let odd: Vec<usize> = (0..ds.len()).rev().step_by(2).collect();
                let expect = odd.iter().position(|&i| want[i]);
                assert_eq!(
                    first_mistake(&f, &screen, ds.binary(), &odd),
                    expect,
                    "d {d}"
                );
            }
        }
    }
}
