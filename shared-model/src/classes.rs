//! Models of several classes: GO or which failure, decided on the device.
//!
//! A model of several classes keeps one row of integer weights and a bias per class
//! ([`ClassRow`]), over the same channels and conversions as the model's
//! ([`crate::model::ChannelSpec`]). The kernel scores every row on the same scaled inputs
//! (`s_k = bias_k + Σ weight_kj · x_j`, exact, in accumulator units); the decision
//! ([`ClassSection::decide`]) takes the leading class and its lead over the runner-up:
//!
//! - `leader` = the class with the highest score (the lowest index among equal scores);
//!   `lead` = `s_leader − max over the other classes of s_k` (≥ 0);
//! - the leader is the GO class and `lead ≥ go_gap` → GO;
//! - the leader is a failure class and `lead ≥ class_gap` → NO-GO, that class;
//! - otherwise RECHECK (the leader named, not decided).
//!
//! Both gaps are at least 1, so two classes with equal scores never decide: which of them
//! is called the leader does not change any decision. The GO gap is the operating point of
//! the false-GO target (a failure unit must lead GO's score by less than it to be decided
//! GO); the class gap keeps two failure classes (or a failure and GO) that score close from
//! being routed on a rounding.
//!
//! An empty section ([`ClassSection::is_empty`]) is a two-sided model: its verdict comes from
//! the model's thresholds, as in blob versions 1 to 4.

use heapless::{String, Vec};
use serde::{Deserialize, Serialize};

use crate::decision::{Decision, Verdict};
use crate::limits::{MAX_CHANNELS, MAX_CLASSES, NAME_CAPACITY};

/// The `go` index of a section without a GO class (pure diagnosis: every class a failure).
pub const NO_GO_CLASS: u8 = u8::MAX;

/// One class of a model of several classes: its name and its row of the linear map.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ClassRow {
    /// The class's name as reports and the device's lines say it (1..=24 bytes, unique).
    pub name: String<NAME_CAPACITY>,
    /// The row's bias, in accumulator units.
    pub bias: i64,
    /// One weight per channel, in channel order, in the model's weight word.
    pub weights: Vec<i32, MAX_CHANNELS>,
}

/// The classes of a model and the rule that decides between them (see the module docs).
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ClassSection {
    /// Index of the GO class in `rows`, or [`NO_GO_CLASS`] when no class is GO.
    pub go: u8,
    /// Least lead (accumulator units, ≥ 1) with which the GO class is decided.
    pub go_gap: i64,
    /// Least lead (accumulator units, ≥ 1) with which a failure class is decided.
    pub class_gap: i64,
    /// The classes, 2..=[`MAX_CLASSES`] of them; none for a two-sided model.
    pub rows: Vec<ClassRow, MAX_CLASSES>,
}

impl ClassSection {
    /// Whether the model is two-sided (no class rows).
    #[inline]
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// The GO class's index, if the section has one.
    #[inline]
    pub fn go_class(&self) -> Option<u8> {
        (usize::from(self.go) < self.rows.len()).then_some(self.go)
    }

    /// The name of class `k` (empty for an index past the rows).
    pub fn name(&self, k: u8) -> &str {
        self.rows
            .get(usize::from(k))
            .map_or("", |r| r.name.as_str())
    }

    /// The decision for the classes' scores, one per row in row order (the rule of the
    /// module docs). Extra scores past the rows are ignored; with fewer than two scores
    /// the result is RECHECK with a lead of 0 (validation keeps at least two rows).
    pub fn decide(&self, scores: &[i64]) -> Decision {
        let n = self.rows.len().min(scores.len());
        let scores = scores.get(..n).unwrap_or(&[]);
        let mut leader = 0usize;
        let mut best = i64::MIN;
        for (k, &s) in scores.iter().enumerate() {
            if s > best {
                best = s;
                leader = k;
            }
        }
        let runner_up = scores
            .iter()
            .enumerate()
            .filter(|&(k, _)| k != leader)
            .map(|(_, &s)| s)
            .max();
        // Validation proves every difference of two rows' scores fits the accumulator, so
        // the subtraction never saturates for a validated model's scores.
        let lead = runner_up.map_or(0, |r| best.saturating_sub(r));
        let class = u8::try_from(leader).unwrap_or(u8::MAX);
        let verdict = match runner_up {
            None => Verdict::Recheck,
            Some(_) if Some(class) == self.go_class() => {
                if lead >= self.go_gap {
                    Verdict::Go
                } else {
                    Verdict::Recheck
                }
            }
            Some(_) if lead >= self.class_gap => Verdict::NoGo,
            Some(_) => Verdict::Recheck,
        };
        Decision {
            score: lead,
            verdict,
            class: Some(class),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::ModelError;
    use crate::model::FixedModel;

    fn section(go: u8, go_gap: i64, class_gap: i64) -> ClassSection {
        let mut rows = Vec::new();
        for name in ["good", "short", "crack"] {
            let _ = rows.push(ClassRow {
                name: String::try_from(name).unwrap(),
                bias: 0,
                weights: Vec::new(),
            });
        }
        ClassSection {
            go,
            go_gap,
            class_gap,
            rows,
        }
    }

    #[test]
    fn the_rule_at_its_exact_edges() {
        let s = section(0, 10, 5);
        let d = |scores: &[i64]| {
            let d = s.decide(scores);
            (d.verdict, d.class, d.score)
        };
        // GO leads by exactly the GO gap, one less, a tie.
        assert_eq!(d(&[20, 10, -3]), (Verdict::Go, Some(0), 10));
        assert_eq!(d(&[19, 10, -3]), (Verdict::Recheck, Some(0), 9));
        assert_eq!(d(&[10, 10, 0]), (Verdict::Recheck, Some(0), 0));
        // A failure leads by exactly the class gap, one less.
        assert_eq!(d(&[0, 5, 10]), (Verdict::NoGo, Some(2), 5));
        assert_eq!(d(&[0, 6, 10]), (Verdict::Recheck, Some(2), 4));
        // Two failures tied: never decided, whichever is named.
        assert_eq!(d(&[-50, 7, 7]).0, Verdict::Recheck);
    }

    #[test]
    fn without_a_go_class_every_decision_is_a_failure_class_or_recheck() {
        let s = section(NO_GO_CLASS, 10, 5);
        assert_eq!(s.go_class(), None);
        assert_eq!(s.decide(&[100, 0, 0]).verdict, Verdict::NoGo);
        assert_eq!(s.decide(&[100, 0, 0]).class, Some(0));
        assert_eq!(s.decide(&[3, 0, 0]).verdict, Verdict::Recheck);
    }

    #[test]
    fn validation_refuses_each_broken_field() {
        use crate::features::SignalSection;
        use crate::model::CheckedModel;
        let (model, base) = ClassSection::example_three_class();
        let check = |m: &FixedModel, c: ClassSection| {
            CheckedModel::with_outcomes(m.clone(), SignalSection::default(), c).map(|_| ())
        };
        assert_eq!(check(&model, base.clone()), Ok(()));
        type Edit = fn(&mut FixedModel, &mut ClassSection);
        let cases: [(Edit, ModelError); 9] = [
            (|_, c| c.rows.truncate(1), ModelError::ClassCount(1)),
            (
                |m, _| m.channels[0].weight = 1,
                ModelError::ClassUnusedFields,
            ),
            (|m, _| m.go_min = 5, ModelError::ClassUnusedFields),
            (|_, c| c.go = 3, ModelError::GoClass(3)),
            (|_, c| c.class_gap = 0, ModelError::ClassGap),
            (
                |_, c| c.rows[2].name = String::try_from("short").unwrap(),
                ModelError::ClassName { class: 2 },
            ),
            (
                |_, c| c.rows[1].name.clear(),
                ModelError::ClassName { class: 1 },
            ),
            (
                |_, c| {
                    c.rows[1].weights.pop();
                },
                ModelError::ClassWeights { class: 1 },
            ),
            (
                |_, c| c.rows[2].weights[1] = 128,
                ModelError::ClassWeightOutOfRange {
                    class: 2,
                    channel: 1,
                },
            ),
        ];
        for (edit, want) in cases {
            let (mut m, mut c) = (model.clone(), base.clone());
            edit(&mut m, &mut c);
            assert_eq!(check(&m, c), Err(want));
        }
        // No GO class is allowed (diagnosis only).
        let mut c = base.clone();
        c.go = NO_GO_CLASS;
        assert_eq!(check(&model, c), Ok(()));
    }

    #[test]
    fn the_accumulator_proof_covers_the_difference_of_two_rows() {
        use crate::features::SignalSection;
        use crate::model::CheckedModel;
        // Row bound R = |bias| + 2·127·32767; twice the widest row must fit 32 bits.
        let (model, mut c) = ClassSection::example_three_class();
        c.rows[0].weights = Vec::from_slice(&[127, 127]).unwrap();
        let base = 2 * 127 * 32767_i64;
        c.rows[0].bias = (1i64 << 30) - 1 - base;
        let check = |c: ClassSection| {
            CheckedModel::with_outcomes(model.clone(), SignalSection::default(), c).map(|_| ())
        };
        assert_eq!(check(c.clone()), Ok(()), "2·R = 2^31 − 2 fits 32 bits");
        c.rows[0].bias += 1;
        assert_eq!(
            check(c),
            Err(ModelError::AccumulatorOverflow {
                needed_bits: 33,
                declared_bits: 32
            })
        );
    }

    #[test]
    fn extreme_scores_do_not_panic() {
        let s = section(0, 1, 1);
        let d = s.decide(&[i64::MAX, i64::MIN, 0]);
        assert_eq!((d.verdict, d.class), (Verdict::Go, Some(0)));
        assert_eq!(s.decide(&[]).verdict, Verdict::Recheck);
        assert_eq!(s.decide(&[5]).verdict, Verdict::Recheck);
    }
}
