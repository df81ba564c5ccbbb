//! The fixed-point model: plain data ([`FixedModel`]) and its validated form ([`CheckedModel`]),
//! for readings alone ([`Readings`]) or readings and sample windows ([`SignalSection`]).
//!
//! Per channel the device turns a raw reading `r` (ADC counts or sensor
//! integer units) into a scaled integer input
//!
//! ```text
//! x = floor(((r - offset) * multiplier + 2^(shift-1)) / 2^shift)      (shift > 0)
//! x = (r - offset) * multiplier                                         (shift = 0)
//! ```
//!
//! i.e. the exact rational value rounded to nearest with ties towards +∞,
//! in Q(input_bits-1). The score is `bias + Σ weight_i · x_i` in units of
//! 2^-(weight_frac_bits + input_bits - 1). Verdict: `score >= go_min` → GO,
//! `score <= nogo_max` → NO-GO, anything between → RECHECK.

use heapless::{String, Vec};
use serde::{Deserialize, Serialize};

use crate::classes::ClassSection;
use crate::decision::Thresholds;
use crate::error::ModelError;
use crate::features::{CheckedFeature, SignalSection, Source};
use crate::limits::{MAX_CHANNELS, NAME_CAPACITY};

/// How the model reached the blob: recorded so an auditor can see an override.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub enum AuditMark {
    /// Packed without a release audit.
    #[default]
    NotAudited,
    /// The release audit passed.
    Passed,
    /// The audit failed and the user packed it anyway with an explicit override.
    Overridden,
}

/// One input channel: valid raw range, raw → scaled conversion, weight.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ChannelSpec {
    /// Short name for reports; may be empty.
    pub name: String<NAME_CAPACITY>,
    /// Smallest valid raw reading; the device refuses anything below.
    pub raw_min: i32,
    /// Largest valid raw reading; the device refuses anything above.
    pub raw_max: i32,
    /// Raw reading that maps to scaled 0.
    pub offset: i32,
    /// Integer multiplier of the conversion (>= 1).
    pub multiplier: i32,
    /// Right shift of the conversion (0..=62), rounding to nearest, ties up.
    pub shift: u8,
    /// Weight, an integer in the declared weight word.
    pub weight: i32,
}

/// A fixed-point linear classifier as plain data. Build one, then call [`CheckedModel::new`].
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct FixedModel {
    /// 128-bit identity of the training inputs, filled in by the host.
    pub model_id: [u8; 16],
    /// Whether the release audit passed.
    pub audit: AuditMark,
    /// Scaled input word: 8 or 16 bits, i.e. Q7 or Q15.
    pub input_bits: u8,
    /// Weight word length in bits (2..=32).
    pub weight_bits: u8,
    /// Fractional bits of the weights' Q-format (0..=62).
    pub weight_frac_bits: u8,
    /// Accumulator width the overflow proof is made for: 32 or 64.
    pub acc_bits: u8,
    /// Bias in accumulator units.
    pub bias: i64,
    /// Scores at or below this are NO-GO.
    pub nogo_max: i64,
    /// Scores at or above this are GO; between the two is RECHECK.
    pub go_min: i64,
    /// The channels, in the order the device reads them.
    pub channels: Vec<ChannelSpec, MAX_CHANNELS>,
}

impl FixedModel {
    /// A small valid two-channel model (raw 0..=1000, Q15 inputs, Q7 8-bit weights) for examples and tests.
    pub fn example_two_channel() -> Self {
        let ch = |name: &str, weight: i32| ChannelSpec {
            name: String::try_from(name).unwrap_or_default(),
            raw_min: 0,
            raw_max: 1000,
            offset: 500,
            // floor(32767 · 2^16 / 500): full range maps onto ±32767.
            multiplier: 4_294_836,
            shift: 16,
            weight,
        };
        let mut channels = Vec::new();
        let _ = channels.push(ch("a", 100));
        let _ = channels.push(ch("b", -100));
        Self {
            model_id: [0; 16],
            audit: AuditMark::NotAudited,
            input_bits: 16,
            weight_bits: 8,
            weight_frac_bits: 7,
            acc_bits: 32,
            bias: 0,
            nogo_max: 0,
            go_min: 1,
            channels,
        }
    }

    /// Largest magnitude a scaled input may take: 2^(input_bits-1) - 1.
    pub fn input_limit(&self) -> i64 {
        (1i64 << (self.input_bits.clamp(2, 16) - 1)) - 1
    }

    /// The worst-case |score| over every in-range reading, computed exactly (i128).
    ///
    /// Only meaningful on a model whose channels passed validation.
    pub fn score_bound(&self) -> i128 {
        self.channels
            .iter()
            .fold(i128::from(self.bias).abs(), |acc, c| {
                let lo = scale_wide(c, c.raw_min).abs();
                let hi = scale_wide(c, c.raw_max).abs();
                acc.saturating_add(i128::from(c.weight).abs().saturating_mul(lo.max(hi)))
            })
    }

    fn validate(&self) -> Result<(), ModelError> {
        if self.channels.is_empty() {
            return Err(ModelError::ZeroChannels);
        }
        if self.input_bits != 8 && self.input_bits != 16 {
            return Err(ModelError::InputFormat(self.input_bits));
        }
        if !(2..=32).contains(&self.weight_bits) || self.weight_frac_bits > 62 {
            return Err(ModelError::WeightFormat {
                bits: self.weight_bits,
                frac: self.weight_frac_bits,
            });
        }
        if self.acc_bits != 32 && self.acc_bits != 64 {
            return Err(ModelError::AccumulatorFormat(self.acc_bits));
        }
        let limit = i128::from(self.input_limit());
        let weight_limit = (1i64 << (self.weight_bits - 1)) - 1;
        for (i, c) in self.channels.iter().enumerate() {
            // MAX_CHANNELS < 256, so the index fits a u8.
            let channel = u8::try_from(i).unwrap_or(u8::MAX);
            if c.raw_min > c.raw_max {
                return Err(ModelError::InvertedRange { channel });
            }
            // The offset sits inside the range and the range is narrower than 2^31, so the
            // kernel can form `raw - offset` in an i32.
            let narrow = i64::from(c.raw_max) - i64::from(c.raw_min) <= i64::from(i32::MAX);
            if c.multiplier < 1
                || c.shift > 62
                || c.offset < c.raw_min
                || c.offset > c.raw_max
                || !narrow
            {
                return Err(ModelError::Conversion { channel });
            }
            // The kernel forms (r - offset) · multiplier in i64 and adds the rounding half;
            // keeping both ends below 2^62 leaves room for that addition.
            if conversion_product(c) >= 1i128 << 62 {
                return Err(ModelError::ConversionOutOfRange { channel });
            }
            // The conversion is monotonic in r, so the ends of the range bound every reading.
            if scale_wide(c, c.raw_min).abs() > limit || scale_wide(c, c.raw_max).abs() > limit {
                return Err(ModelError::ConversionOutOfRange { channel });
            }
            if i64::from(c.weight).abs() > weight_limit {
                return Err(ModelError::WeightOutOfRange { channel });
            }
        }
        if self.nogo_max >= self.go_min {
            return Err(ModelError::ThresholdsOutOfOrder);
        }

        let bound = self.score_bound();
        let needed_bits = u8::try_from(129 - bound.leading_zeros()).unwrap_or(u8::MAX);
        if needed_bits > self.acc_bits {
            return Err(ModelError::AccumulatorOverflow {
                needed_bits,
                declared_bits: self.acc_bits,
            });
        }
        Ok(())
    }
}

impl Thresholds {
    /// The thresholds `model` declares. (Here, beside the model, so that the decision step
    /// imports nothing of the model: the class rule it serves is named by the model.)
    #[inline]
    pub fn of(model: &FixedModel) -> Self {
        Self {
            nogo_max: model.nogo_max,
            go_min: model.go_min,
        }
    }
}

/// The largest |scaled input| channel `c` can give over its valid readings (at an end of
/// its range: the conversion is monotonic).
pub(crate) fn input_bound(c: &ChannelSpec) -> i128 {
    scale_wide(c, c.raw_min)
        .abs()
        .max(scale_wide(c, c.raw_max).abs())
}

/// The largest |(r − offset)·multiplier| over the channel's valid readings (at an end of
/// the range: the product is monotonic in r), which validation bounds for the kernel.
fn conversion_product(c: &ChannelSpec) -> i128 {
    let at = |r: i32| (i128::from(r) - i128::from(c.offset)).abs() * i128::from(c.multiplier);
    at(c.raw_min).max(at(c.raw_max))
}

/// The conversion of one reading in i128, used by validation and as the exact reference.
pub(crate) fn scale_wide(c: &ChannelSpec, raw: i32) -> i128 {
    let p = (i128::from(raw) - i128::from(c.offset)) * i128::from(c.multiplier);
    if c.shift == 0 {
        p
    } else {
        (p + (1i128 << (c.shift - 1))) >> c.shift
    }
}

/// What feeds a model's channels: the input kind a [`CheckedModel`] is validated for and
/// a station passes. Two kinds exist and no others can be added outside this crate:
///
/// - [`Readings`]: every channel is a reading (blob format versions 1 and 2). A zero-sized
///   marker, so a model of readings carries, moves and validates nothing for signals.
/// - [`SignalSection`]: readings and sample windows; some channels may be features of a
///   signal's window (versions 3 and 4, and 1 and 2 read with an empty section).
pub trait Inputs: Clone + core::fmt::Debug + PartialEq + Eq + Default + sealed::Sealed {
    /// Whether a model of this kind may hold feature channels (and load versions 3 and 4).
    const WINDOWS: bool;

    /// The signal section, if this kind has one and it is not empty.
    fn section(&self) -> Option<&SignalSection>;

    /// The section to read a blob's into, in place; `None` where this kind has none.
    fn section_mut(&mut self) -> Option<&mut SignalSection>;

    /// Checks the inputs against the model's channels (part of [`CheckedModel::with_inputs`]).
    ///
    /// # Errors
    /// [`ModelError::Sources`], [`ModelError::SignalIndex`] or [`ModelError::Signal`].
    fn check(&self, model: &FixedModel) -> Result<(), ModelError>;
}

mod sealed {
    /// Only this crate's input and outcome kinds: the blob and the kernel know no others.
    pub trait Sealed {}
    impl Sealed for super::Readings {}
    impl Sealed for super::SignalSection {}
    impl Sealed for super::TwoSided {}
    impl Sealed for super::ClassSection {}
}

/// What a model decides: the outcome kind a [`CheckedModel`] is validated for. Two kinds
/// exist and no others can be added outside this crate:
///
/// - [`TwoSided`]: GO / NO-GO / RECHECK by the model's thresholds (blob versions 1 to 4).
///   A zero-sized marker, so a two-sided model carries and moves nothing for classes.
/// - [`ClassSection`]: GO or which failure class, or RECHECK, by the class rows (versions
///   5 and 6; versions 1 to 4 read with an empty section are two-sided).
pub trait Outcomes: Clone + core::fmt::Debug + PartialEq + Eq + Default + sealed::Sealed {
    /// Whether a model of this kind may hold class rows (and load versions 5 and 6).
    const CLASSES: bool;

    /// The class section, if this kind has one and it is not empty.
    fn classes(&self) -> Option<&ClassSection>;

    /// The section to read a blob's into, in place; `None` where this kind has none.
    fn classes_mut(&mut self) -> Option<&mut ClassSection>;

    /// Checks the outcomes against the model (part of [`CheckedModel::with_outcomes`]).
    ///
    /// # Errors
    /// A class error of [`ModelError`] or [`ModelError::AccumulatorOverflow`].
    fn check(&self, model: &FixedModel) -> Result<(), ModelError>;
}

/// The outcome kind of a two-sided model (see [`Outcomes`]).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct TwoSided;

impl Outcomes for TwoSided {
    const CLASSES: bool = false;

    #[inline(always)]
    fn classes(&self) -> Option<&ClassSection> {
        None
    }

    #[inline(always)]
    fn classes_mut(&mut self) -> Option<&mut ClassSection> {
        None
    }

    #[inline(always)]
    fn check(&self, _model: &FixedModel) -> Result<(), ModelError> {
        Ok(())
    }
}

/// The input kind of a model whose channels are all readings (see [`Inputs`]).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Readings;

impl Inputs for Readings {
    const WINDOWS: bool = false;

    #[inline(always)]
    fn section(&self) -> Option<&SignalSection> {
        None
    }

    #[inline(always)]
    fn section_mut(&mut self) -> Option<&mut SignalSection> {
        None
    }

    #[inline(always)]
    fn check(&self, _model: &FixedModel) -> Result<(), ModelError> {
        Ok(())
    }
}

impl Inputs for SignalSection {
    const WINDOWS: bool = true;

    #[inline(always)]
    fn section(&self) -> Option<&SignalSection> {
        (!self.is_empty()).then_some(self)
    }

    #[inline(always)]
    fn section_mut(&mut self) -> Option<&mut SignalSection> {
        Some(self)
    }

    /// One source per channel, every feature's signal present, and every feature proved
    /// not to overflow for any window of valid samples ([`CheckedFeature::new`]).
    #[inline(always)]
    fn check(&self, model: &FixedModel) -> Result<(), ModelError> {
        if !self.is_empty() && self.sources.len() != model.channels.len() {
            return Err(ModelError::Sources);
        }
        for (i, source) in self.sources.iter().enumerate() {
            let channel = u8::try_from(i).unwrap_or(u8::MAX);
            if let Source::Feature { signal, feature } = *source {
                let spec = self
                    .signals
                    .get(usize::from(signal))
                    .ok_or(ModelError::SignalIndex { channel })?;
                CheckedFeature::new(*spec, feature)
                    .map_err(|error| ModelError::Signal { channel, error })?;
            }
        }
        Ok(())
    }
}

/// A model that passed validation, with what feeds its channels; the kernel runs only on
/// this type.
///
/// Holding one is the proof that every reading inside the channels' valid ranges yields
/// an exact score that fits the declared accumulator, and, for a model with signals, that
/// every feature channel's source is a proved feature of one of its signals.
///
/// `I` is the input kind ([`Inputs`]): [`Readings`] (the default; nothing for signals is
/// held) or [`SignalSection`] (readings and windows). The kind is part of the type, so a
/// station that passes readings alone cannot load a model that needs windows.
///
/// `K` is the outcome kind ([`Outcomes`]): [`TwoSided`] (the default) or [`ClassSection`]
/// (GO or which failure class). A station that only shows GO / NO-GO holds a two-sided
/// model and cannot load a model of several classes.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct CheckedModel<I: Inputs = Readings, K: Outcomes = TwoSided> {
    model: FixedModel,
    /// Every product and sum fits 32 bits: a 32-bit accumulator is declared and proved,
    /// and each channel's conversion product `(r − offset)·multiplier` stays below 2^31
    /// with a shift of at most 31. The kernel then runs in 32-bit arithmetic only (one
    /// instruction per multiply on every 32-bit core, no 64-bit multiply routine).
    narrow: bool,
    inputs: I,
    outcomes: K,
}

impl CheckedModel {
    /// Validates a model of readings and wraps it: [`with_inputs`](Self::with_inputs) with
    /// [`Readings`].
    ///
    /// # Errors
    /// As [`with_inputs`](Self::with_inputs).
    #[inline(always)]
    pub fn new(model: FixedModel) -> Result<Self, ModelError> {
        Self::with_inputs(model, Readings)
    }
}

impl<I: Inputs> CheckedModel<I> {
    /// Validates `model` and its `inputs`, once, and wraps them as a two-sided model:
    /// [`with_outcomes`](CheckedModel::with_outcomes) with [`TwoSided`].
    ///
    /// # Errors
    /// As [`with_outcomes`](CheckedModel::with_outcomes).
    #[inline(always)]
    pub fn with_inputs(model: FixedModel, inputs: I) -> Result<Self, ModelError> {
        Self::with_outcomes(model, inputs, TwoSided)
    }
}

impl<I: Inputs, K: Outcomes> CheckedModel<I, K> {
    /// Validates `model`, its `inputs` and its `outcomes`, once, and wraps them.
    ///
    /// # Errors
    /// The first [`ModelError`] found: formats, ranges, conversions, weights, threshold
    /// order, the accumulator bound, then the inputs ([`Inputs::check`]), then the
    /// outcomes ([`Outcomes::check`]).
    ///
    /// Always inlined: it moves the model, and on a device every move of it outlined is
    /// kilobytes of start-up stack.
    #[inline(always)]
    pub fn with_outcomes(model: FixedModel, inputs: I, outcomes: K) -> Result<Self, ModelError> {
        let mut checked = Self {
            model,
            narrow: false,
            inputs,
            outcomes,
        };
        checked.check_in_place()?;
        Ok(checked)
    }

    /// A model not yet validated, every part at its default, for the blob reader to fill in
    /// place ([`parts_mut`](Self::parts_mut)) and then validate
    /// ([`check_in_place`](Self::check_in_place)): built where it stays, a model of several
    /// classes is not copied through the reader's frames (each copy of it is about 2 KiB of
    /// start-up stack on a device).
    #[inline(always)]
    pub(crate) fn unchecked() -> Self {
        Self {
            model: FixedModel::default(),
            narrow: false,
            inputs: I::default(),
            outcomes: K::default(),
        }
    }

    /// The parts of a model from [`unchecked`](Self::unchecked), to fill in place.
    #[inline(always)]
    pub(crate) fn parts_mut(&mut self) -> (&mut FixedModel, &mut I, &mut K) {
        (&mut self.model, &mut self.inputs, &mut self.outcomes)
    }

    /// The validation of [`with_outcomes`](Self::with_outcomes), in place: the model, then
    /// the inputs, then the outcomes; then whether it runs narrow.
    #[inline(always)]
    pub(crate) fn check_in_place(&mut self) -> Result<(), ModelError> {
        self.model.validate()?;
        self.inputs.check(&self.model)?;
        self.outcomes.check(&self.model)?;
        self.narrow = self.model.acc_bits == 32
            && self
                .model
                .channels
                .iter()
                .all(|c| c.shift <= 31 && conversion_product(c) < 1i128 << 31);
        Ok(())
    }

    /// The class section of a model of several classes; `None` for a two-sided model.
    #[inline(always)]
    pub fn classes(&self) -> Option<&ClassSection> {
        self.outcomes.classes()
    }

    /// What the model decides (the class section, empty or not, or [`TwoSided`]).
    pub fn outcomes(&self) -> &K {
        &self.outcomes
    }

    /// Whether the kernel runs in 32-bit arithmetic only (see the type's docs): the
    /// result is the same either way, only the instructions differ.
    pub fn is_narrow(&self) -> bool {
        self.narrow
    }

    /// The validated model, read-only.
    pub fn model(&self) -> &FixedModel {
        &self.model
    }

    /// What feeds the channels.
    pub fn inputs(&self) -> &I {
        &self.inputs
    }

    /// Gives the plain model back, e.g. to edit and validate again.
    pub fn into_inner(self) -> FixedModel {
        self.model
    }

    /// Number of channels (1..=[`MAX_CHANNELS`]).
    pub fn channel_count(&self) -> usize {
        self.model.channels.len()
    }

    /// The source of channel `i`: always a reading in a model without signals.
    pub fn source(&self, i: usize) -> Source {
        self.inputs
            .section()
            .map_or(Source::Reading, |s| s.source(i))
    }
}

impl<K: Outcomes> CheckedModel<SignalSection, K> {
    /// The signals and each channel's source (empty when every channel is a reading).
    pub fn signals(&self) -> &SignalSection {
        &self.inputs
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn example_is_valid() {
        assert!(CheckedModel::new(FixedModel::example_two_channel()).is_ok());
    }

    #[test]
    fn rejects_each_invalid_field() {
        let base = FixedModel::example_two_channel();
        type Edit = fn(&mut FixedModel);
        let cases: [(Edit, ModelError); 9] = [
            (|m| m.channels.clear(), ModelError::ZeroChannels),
            (|m| m.input_bits = 12, ModelError::InputFormat(12)),
            (
                |m| m.weight_bits = 33,
                ModelError::WeightFormat { bits: 33, frac: 7 },
            ),
            (|m| m.acc_bits = 48, ModelError::AccumulatorFormat(48)),
            (
                |m| m.channels[1].raw_min = 2000,
                ModelError::InvertedRange { channel: 1 },
            ),
            (
                |m| m.channels[0].multiplier = 0,
                ModelError::Conversion { channel: 0 },
            ),
            (
                |m| m.channels[0].multiplier *= 2,
                ModelError::ConversionOutOfRange { channel: 0 },
            ),
            (
                |m| m.channels[1].weight = 128,
                ModelError::WeightOutOfRange { channel: 1 },
            ),
            (|m| m.go_min = m.nogo_max, ModelError::ThresholdsOutOfOrder),
        ];
        for (edit, want) in cases {
            let mut m = base.clone();
            edit(&mut m);
            assert_eq!(CheckedModel::new(m), Err(want));
        }
    }

    #[test]
    fn accumulator_bound_is_enforced_at_the_edge() {
        // 2 · 127 · 32767 = 8_322_818 → 24 bits + sign; a bias pushing the bound to 2^31 needs 33.
        let mut m = FixedModel::example_two_channel();
        m.channels[0].weight = 127;
        m.channels[1].weight = 127;
        m.bias = (1i64 << 31) - 1 - 2 * 127 * 32767;
        assert!(
            CheckedModel::new(m.clone()).is_ok(),
            "bound exactly 2^31-1 fits 32 bits"
        );
        m.bias += 1;
        assert_eq!(
            CheckedModel::new(m.clone()),
            Err(ModelError::AccumulatorOverflow {
                needed_bits: 33,
                declared_bits: 32
            })
        );
        m.acc_bits = 64;
        assert!(CheckedModel::new(m).is_ok());
    }
}
