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
use crate::error::ModelError;
use crate::limits::{MAX_CHANNELS, MAX_CLASSES, NAME_CAPACITY};
use crate::model::{FixedModel, input_bound};

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

    /// A small valid model of three classes for examples and tests: the two channels of
    /// [`FixedModel::example_two_channel`] with its two-sided fields unused, and the
    /// classes `good` (GO), `short` and `crack`.
    pub fn example_three_class() -> (FixedModel, Self) {
        let mut model = FixedModel::example_two_channel();
        for c in model.channels.iter_mut() {
            c.weight = 0;
        }
        (model.bias, model.nogo_max, model.go_min) = (0, -1, 0);
        let row = |name: &str, bias: i64, w: [i32; 2]| ClassRow {
            name: String::try_from(name).unwrap_or_default(),
            bias,
            weights: Vec::from_slice(&w).unwrap_or_default(),
        };
        let mut rows = Vec::new();
        let _ = rows.push(row("good", 1000, [100, -100]));
        let _ = rows.push(row("short", 0, [-100, 50]));
        let _ = rows.push(row("crack", -500, [20, 100]));
        let section = Self {
            go: 0,
            go_gap: 4096,
            class_gap: 2048,
            rows,
        };
        (model, section)
    }

    /// A model of `classes` classes (2..=[`MAX_CLASSES`]) over the channels and conversions
    /// of `model`, for examples, device tests and the footprint: class `go` (or none, with
    /// [`NO_GO_CLASS`]) named `go`, the others `fail1`, `fail2`…; each weight drawn from
    /// `seed` (splitmix64) inside half the weight word, biases within a sixteenth of a row's
    /// bound; both gaps a sixty-fourth of the widest row's bound (at least 1); the
    /// accumulator the model's if the row difference fits it, else 64 bits. `None` if
    /// `classes` or `go` is out of range or the result fails validation.
    pub fn example_over(
        model: &FixedModel,
        classes: u8,
        go: u8,
        seed: u64,
    ) -> Option<(FixedModel, Self)> {
        let mut m = model.clone();
        for c in m.channels.iter_mut() {
            c.weight = 0;
        }
        (m.bias, m.nogo_max, m.go_min) = (0, -1, 0);
        let mut state = seed;
        let mut next = move || {
            // splitmix64 (Steele, Lea and Flood, 2014).
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^ (z >> 31)
        };
        let half = (1i64 << (m.weight_bits.clamp(2, 32) - 2)).max(1);
        let mut section = Self {
            go,
            go_gap: 1,
            class_gap: 1,
            rows: Vec::new(),
        };
        let mut widest: i128 = 1;
        for k in 0..classes {
            let mut name: String<NAME_CAPACITY> = String::new();
            if k == go {
                name.push_str("go").ok()?;
            } else {
                let n = if go < k { k } else { k + 1 };
                core::fmt::write(&mut name, format_args!("fail{n}")).ok()?;
            }
            let mut weights = Vec::new();
            let mut bound: i128 = 0;
            for c in &m.channels {
                let r = i64::try_from(next() % u64::try_from(2 * half + 1).ok()?).ok()?;
                let w = i32::try_from(r - half).ok()?;
                weights.push(w).ok()?;
                bound += i128::from(w).abs() * input_bound(c);
            }
            let span = i64::try_from(bound / 16).ok()?.max(1);
            let r = i64::try_from(next() % u64::try_from(2 * span + 1).ok()?).ok()?;
            let bias = r - span;
            widest = widest.max(bound + i128::from(bias).abs());
            section
                .rows
                .push(ClassRow {
                    name,
                    bias,
                    weights,
                })
                .ok()?;
        }
        let gap = i64::try_from(widest / 64).ok()?.max(1);
        (section.go_gap, section.class_gap) = (gap, gap);
        if section.check_rows(&m).is_err() {
            m.acc_bits = 64;
        }
        section.check_rows(&m).ok()?;
        Some((m, section))
    }

    /// Validation of a non-empty section against its model (part of
    /// `CheckedModel::with_outcomes`): 2..=8 rows, each with one weight per channel inside
    /// the weight word and a unique non-empty name; the GO index a row or
    /// [`NO_GO_CLASS`]; gaps ≥ 1; the model's two-sided fields unused; and the accumulator
    /// proof: with `R_k = |bias_k| + Σ_j |w_kj|·max|x_j|`, `2·max_k R_k` fits the declared
    /// accumulator, so every row's score and every difference of two rows' scores does.
    pub(crate) fn check_rows(&self, model: &FixedModel) -> Result<(), ModelError> {
        let count = self.rows.len();
        if !(2..=MAX_CLASSES).contains(&count) {
            return Err(ModelError::ClassCount(
                u8::try_from(count).unwrap_or(u8::MAX),
            ));
        }
        let unused = model.bias == 0
            && model.nogo_max == -1
            && model.go_min == 0
            && model.channels.iter().all(|c| c.weight == 0);
        if !unused {
            return Err(ModelError::ClassUnusedFields);
        }
        if self.go != NO_GO_CLASS && usize::from(self.go) >= count {
            return Err(ModelError::GoClass(self.go));
        }
        if self.go_gap < 1 || self.class_gap < 1 {
            return Err(ModelError::ClassGap);
        }
        let weight_limit = (1i64 << (model.weight_bits.clamp(2, 32) - 1)) - 1;
        let mut widest: i128 = 0;
        for (k, row) in self.rows.iter().enumerate() {
            let class = u8::try_from(k).unwrap_or(u8::MAX);
            let named_before = self
                .rows
                .iter()
                .take(k)
                .any(|r| r.name.as_bytes() == row.name.as_bytes());
            if row.name.is_empty() || named_before {
                return Err(ModelError::ClassName { class });
            }
            if row.weights.len() != model.channels.len() {
                return Err(ModelError::ClassWeights { class });
            }
            let mut bound = i128::from(row.bias).abs();
            for (j, (&w, c)) in row.weights.iter().zip(&model.channels).enumerate() {
                if i64::from(w).abs() > weight_limit {
                    let channel = u8::try_from(j).unwrap_or(u8::MAX);
                    return Err(ModelError::ClassWeightOutOfRange { class, channel });
                }
                bound = bound.saturating_add(i128::from(w).abs().saturating_mul(input_bound(c)));
            }
            widest = widest.max(bound);
        }
        let difference = widest.saturating_mul(2);
        let needed_bits = u8::try_from(129 - difference.leading_zeros()).unwrap_or(u8::MAX);
        if needed_bits > model.acc_bits {
            return Err(ModelError::AccumulatorOverflow {
                needed_bits,
                declared_bits: model.acc_bits,
            });
        }
        Ok(())
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
