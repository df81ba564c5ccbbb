//! Validation and examples of models of several classes: the class section checked against
//! its model (`check_rows`, the accumulator proof of every row difference), the outcome
//! kind's implementation for [`ClassSection`], and small valid models for examples and
//! tests. Apart from `classes.rs`, which holds the section and its decision rule and imports
//! nothing of the model, so that `model` (which names the section in `Outcomes`) and the
//! section do not import each other.

use heapless::{String, Vec};

use crate::classes::{ClassRow, ClassSection, NO_GO_CLASS};
use crate::error::ModelError;
use crate::limits::{MAX_CLASSES, NAME_CAPACITY};
use crate::model::{FixedModel, Outcomes, input_bound};

impl Outcomes for ClassSection {
    const CLASSES: bool = true;

    #[inline(always)]
    fn classes(&self) -> Option<&ClassSection> {
        (!self.is_empty()).then_some(self)
    }

    #[inline(always)]
    fn classes_mut(&mut self) -> Option<&mut ClassSection> {
        Some(self)
    }

    /// An empty section is a two-sided model; otherwise the rows, names, GO index, gaps,
    /// unused two-sided fields and the accumulator bound of every row difference.
    #[inline(always)]
    fn check(&self, model: &FixedModel) -> Result<(), ModelError> {
        if self.is_empty() {
            return Ok(());
        }
        self.check_rows(model)
    }
}

impl ClassSection {
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
            // One word of printable ASCII without `#`: the device prints the name last on
            // its line, and `#` starts a line's comment.
            let printable = row.name.bytes().all(|b| b.is_ascii_graphic() && b != b'#');
            if row.name.is_empty() || named_before || !printable {
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
}
