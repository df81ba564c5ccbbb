//! The two-sided task a trainer solves: which units lie on the positive side of the
//! boundary and which on the other.
//!
//! Every trainer separates two outcomes. It does not read the log's labels itself: it takes
//! an [`AsBinary`] and asks it for a [`Binary`] view, the readings of the units with one
//! sign per unit (+1 positive, −1 the rest) and the name of the positive side. A
//! [`Dataset`] is the GO-vs-rest task (its ±1 labels, GO positive), so a log of two
//! outcomes trains as before; a task of one class against the rest (for a model of several
//! classes) is another [`AsBinary`] that owns its signs, and reaches every trainer without a
//! change to their arithmetic or to ingest.

use crate::ingest::dataset::Dataset;

/// One two-sided task over the units of a dataset: a view, cheap to copy.
#[derive(Clone, Copy, Debug)]
pub struct Binary<'a> {
    /// The units' readings.
    pub ds: &'a Dataset,
    /// +1 for a unit on the positive side, −1 for the rest; one per unit of `ds`.
    pub signs: &'a [i8],
    /// The name of the positive side ("GO" for a log of GO and NO-GO).
    pub positive: &'a str,
}

impl<'a> Binary<'a> {
    /// The task with `signs` over the units of `ds`, `positive` naming the side of +1.
    ///
    /// # Panics
    /// If `signs` does not hold one sign per unit, or a sign other than ±1 (a task built
    /// wrongly, not an input error).
    pub fn new(ds: &'a Dataset, signs: &'a [i8], positive: &'a str) -> Self {
        assert_eq!(signs.len(), ds.len(), "one sign per unit");
        assert!(signs.iter().all(|s| s.abs() == 1), "signs are ±1");
        Self {
            ds,
            signs,
            positive,
        }
    }

    /// Unit `i`'s sign as a float (±1): the y of the trainers' formulas.
    #[inline(always)]
    pub fn y(&self, i: usize) -> f64 {
        f64::from(self.signs[i])
    }

    /// Whether unit `i` is on the positive side.
    #[inline(always)]
    pub fn is_positive(&self, i: usize) -> bool {
        self.signs[i] > 0
    }
}

/// What a trainer takes: anything that gives a [`Binary`] view.
pub trait AsBinary: Sync {
    /// The two-sided task.
    fn binary(&self) -> Binary<'_>;
}

/// A log of GO and NO-GO units is the task GO against NO-GO (its labels are the signs).
/// A log of more classes (codes −2… beside ±1) takes a one-vs-rest view of its own, built
/// from the codes with [`Binary::new`], which refuses anything but ±1.
impl AsBinary for Dataset {
    fn binary(&self) -> Binary<'_> {
        Binary {
            ds: self,
            signs: &self.labels,
            positive: "GO",
        }
    }
}

impl<T: AsBinary + ?Sized> AsBinary for &T {
    fn binary(&self) -> Binary<'_> {
        (**self).binary()
    }
}

impl AsBinary for Binary<'_> {
    fn binary(&self) -> Binary<'_> {
        *self
    }
}

/// How many outcomes a trainer separates in one model.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outcomes {
    /// Two: one boundary between a positive side and the rest (the trainers of today; a
    /// model of several classes uses them one class against the rest).
    Two,
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::train::eval::{TrainConfig, TrainerKind, train};
    use crate::train::svm::ClassWeight;

    /// 300 units in 4 channels on both sides of a plane, none nearer than 0.05 to it.
    fn separable() -> Dataset {
        let side = |p: &[f64]| p[0] - 0.4 * p[1] + 0.3 * p[3] - 0.1;
        crate::train::mistake_scan::tests::separated(300, 4, 31, 0.05, side)
    }

    const CFG: TrainConfig = TrainConfig {
        epochs: 200,
        seed: 3,
        c: 1.0,
        class_weight: ClassWeight::EVEN,
    };

    #[test]
    fn a_task_over_the_labels_trains_what_the_log_trains() {
        let ds = separable();
        let task = Binary::new(&ds, &ds.labels, "GO");
        for kind in TrainerKind::ALL
            .into_iter()
            .chain([TrainerKind::HardMargin])
        {
            assert_eq!(kind.outcomes(), Outcomes::Two);
            let from_log = train(&ds, &ds.all(), kind, CFG).model;
            let from_task = train(&task, &ds.all(), kind, CFG).model;
            assert_eq!(from_log, from_task, "{}", kind.name());
        }
    }

    #[test]
    fn the_other_side_as_positive_turns_the_separator_round() {
        // Every mistake test y·score ≤ 0 and every update y·z change sign together, so the
        // classic perceptron makes the same mistakes and ends at exactly −w, −b; the hard
        // margin's hulls swap places, and its separator turns round with them.
        let ds = separable();
        let flipped: Vec<i8> = ds.labels.iter().map(|s| -s).collect();
        let other = Binary::new(&ds, &flipped, "NO-GO");
        let idx = ds.all();
        for kind in [TrainerKind::Perceptron, TrainerKind::HardMargin] {
            let a = train(&ds, &idx, kind, CFG).model;
            let b = train(&other, &idx, kind, CFG).model;
            let tol = if kind == TrainerKind::Perceptron {
                0.0
            } else {
                1e-9
            };
            for (x, y) in a.w.iter().chain([&a.b]).zip(b.w.iter().chain([&b.b])) {
                assert!(
                    (x + y).abs() <= tol * x.abs().max(1.0),
                    "{}: {x} vs {y}",
                    kind.name()
                );
            }
            assert!(b.geometric_margin(&other, &idx) > 0.0, "{}", kind.name());
        }
    }

    #[test]
    #[should_panic(expected = "signs are ±1")]
    fn a_sign_other_than_one_is_refused() {
        let ds = separable();
        let mut signs = ds.labels.clone();
        signs[7] = 0;
        let _ = Binary::new(&ds, &signs, "GO");
    }
}
