//! The integer inference kernel: raw readings → scaled inputs → score, then the decision.
//!
//! Two steps, two types, so that another decision can be added without touching the
//! arithmetic:
//!
//! 1. **Arithmetic** ([`CheckedModel::score`], [`CheckedModel::scale`],
//!    [`CheckedModel::score_scaled`]): readings → one exact integer score, or a [`Fault`]
//!    naming the refused reading. For a model with signals,
//!    [`CheckedModel::classify_windows`] first turns each feature channel's window into its
//!    reading ([`CheckedFeature::compute`]), then runs the same step.
//! 2. **Decision** ([`crate::decision`]): the score → a [`Decision`] by the model's
//!    [`Thresholds`] (GO / NO-GO / RECHECK). A fault of step 1 never reaches it; the
//!    station shows NO-GO for it. [`CheckedModel::classify`] is the two in a row.
//!
//! A model of several classes ([`crate::classes`]) scales the readings once, scores every
//! class row on them in step 1 ([`CheckedModel::class_scores`]: the same widths, one
//! accumulator per row) and decides by its rule ([`ClassSection::decide`](crate::classes::ClassSection::decide))
//! in step 2. Validation proved twice the widest row's bound fits the accumulator, so
//! every row's score and every difference of two rows' scores fits it too.
//!
//! Widths: readings `i32`; `r - offset` in `i32` (validation keeps the offset
//! inside a range narrower than 2^31); the conversion product in `i64`
//! (32×32→64, one long multiply); scaled inputs `i32` holding at most 16
//! significant bits; weights `i32`; products and the accumulator `i64`
//! (32×32→64 multiply-accumulate). Validation ([`CheckedModel::new`]) proved
//! `|bias| + Σ|w_i|·max|x_i|` fits the declared accumulator (at most 64 bits)
//! and that `(r - offset)·multiplier` stays below 2^62 for in-range `r`; so the
//! `wrapping_*` operations below never wrap. They are used instead of `+`/`*`
//! only to keep panic paths out of the device image.
//!
//! A narrow model ([`CheckedModel::is_narrow`]: a proved 32-bit accumulator and
//! conversion products below 2^31) runs the same steps in `i32` only, which cores
//! without a 64-bit multiply (Cortex-M0/M0+) do in single instructions.
#![warn(clippy::arithmetic_side_effects)]

use crate::classes::ClassRow;
use crate::decision::{Decision, Thresholds, Verdict};
use crate::error::{Fault, SignalFault, WindowFault};
use crate::features::{CheckedFeature, SignalSpec, Source};
use crate::limits::{MAX_CHANNELS, MAX_CLASSES};
use crate::model::{ChannelSpec, CheckedModel, Inputs, Outcomes};

impl ChannelSpec {
    /// Scales one raw reading, or `None` if it lies outside the valid range.
    ///
    /// Only call on a channel of a [`CheckedModel`]; the no-overflow argument rests on its validation.
    #[inline]
    fn scale_checked(&self, raw: i32) -> Option<i32> {
        if raw < self.raw_min || raw > self.raw_max {
            return None;
        }
        // offset ∈ [raw_min, raw_max] and raw_max - raw_min < 2^31 (validated): d fits i32.
        let d = raw.wrapping_sub(self.offset);
        // |d| · multiplier < 2^62 (validated).
        let p = i64::from(d).wrapping_mul(i64::from(self.multiplier));
        // |x| <= 2^(input_bits-1) - 1 <= 32767 (validated at both ends of the monotonic range),
        // so the narrowing casts below keep every bit.
        #[allow(clippy::cast_possible_truncation)]
        let x = if self.shift == 0 {
            p as i32
        } else {
            // floor((p + 2^(s-1)) / 2^s) = floor((floor(p / 2^(s-1)) + 1) / 2): with
            // p = q·2^(s-1) + r, 0 <= r < 2^(s-1), the r / 2^s < 1/2 never carries into the floor.
            // q is within ±(2·32767 + 1), so after the one 64-bit shift the rest is 32-bit.
            let q = (p >> (self.shift & 63).wrapping_sub(1)) as i32;
            q.wrapping_add(1) >> 1
        };
        Some(x)
    }

    /// [`scale_checked`](Self::scale_checked) in 32-bit arithmetic, for a channel of a
    /// narrow model: the product (r − offset)·multiplier is below 2^31 and the shift at
    /// most 31 (both validated), so every step below is exact and equals the 64-bit one.
    #[inline]
    fn scale_narrow(&self, raw: i32) -> Option<i32> {
        if raw < self.raw_min || raw > self.raw_max {
            return None;
        }
        let p = raw.wrapping_sub(self.offset).wrapping_mul(self.multiplier);
        Some(if self.shift == 0 {
            p
        } else {
            (p >> (self.shift & 31).wrapping_sub(1)).wrapping_add(1) >> 1
        })
    }
}

impl<I: Inputs, K: Outcomes> CheckedModel<I, K> {
    /// Scales every reading into `out` (scaled integer inputs, Q(input_bits-1)).
    ///
    /// # Errors
    /// [`Fault::ReadingCount`] if `raw` or `out` does not hold one value per
    /// channel; [`Fault::OutOfRange`] for the first reading outside its range.
    pub fn scale(&self, raw: &[i32], out: &mut [i32]) -> Result<(), Fault> {
        let n = self.channel_count();
        if raw.len() != n || out.len() != n {
            return Err(Fault::ReadingCount {
                expected: count_u8(n),
                got: raw.len(),
            });
        }
        for (i, ((c, &r), x)) in self
            .model()
            .channels
            .iter()
            .zip(raw)
            .zip(out.iter_mut())
            .enumerate()
        {
            *x = c.scale_checked(r).ok_or(Fault::OutOfRange {
                channel: count_u8(i),
                raw: r,
            })?;
        }
        Ok(())
    }

    /// The score for scaled inputs already in range (the output of [`scale`](Self::scale)).
    ///
    /// Inputs beyond the validated range make the result meaningless but never panic.
    #[inline]
    pub fn score_scaled(&self, x: &[i32]) -> i64 {
        if self.is_narrow() {
            // The 32-bit accumulator is proved for inputs in range (see `classify_narrow`).
            #[allow(clippy::cast_possible_truncation)]
            let bias = self.model().bias as i32;
            let acc = self
                .model()
                .channels
                .iter()
                .zip(x)
                .fold(bias, |acc, (c, &xi)| {
                    acc.wrapping_add(c.weight.wrapping_mul(xi))
                });
            return i64::from(acc);
        }
        self.model()
            .channels
            .iter()
            .zip(x)
            .fold(self.model().bias, |acc, (c, &xi)| {
                acc.wrapping_add(i64::from(c.weight).wrapping_mul(i64::from(xi)))
            })
    }

    /// The decision step's rule: the model's thresholds.
    #[inline]
    pub fn thresholds(&self) -> Thresholds {
        Thresholds::of(self.model())
    }

    /// The verdict for a score, by the model's thresholds.
    #[inline]
    pub fn verdict(&self, score: i64) -> Verdict {
        self.thresholds().verdict(score)
    }

    /// Classifies one set of raw readings, one per channel in model order (for a model
    /// with signals, its feature channels' values in their places): the score
    /// ([`score`](Self::score)), then the decision by the thresholds.
    ///
    /// This is the one function the host audit, `replay` and the firmware call.
    ///
    /// # Errors
    /// A [`Fault`] if the reading count is wrong or a reading is out of range;
    /// the device must then show NO-GO.
    #[inline]
    pub fn classify(&self, raw: &[i32]) -> Result<Decision, Fault> {
        if let Some(classes) = self.classes() {
            let mut scores = [0i64; MAX_CLASSES];
            let n = self.class_scores(raw, &mut scores)?;
            return Ok(classes.decide(scores.get(..n).unwrap_or(&[])));
        }
        let score = self.score(raw)?;
        Ok(self.thresholds().decide(score))
    }

    /// The arithmetic step of a model of several classes: every class row's exact score
    /// (`bias_k + Σ weight_kj · x_j`, accumulator units) on the readings scaled once,
    /// written into `scores` in row order; returns the row count. A two-sided model gives
    /// its one score ([`score`](Self::score)).
    ///
    /// # Errors
    /// As [`classify`](Self::classify).
    pub fn class_scores(
        &self,
        raw: &[i32],
        scores: &mut [i64; MAX_CLASSES],
    ) -> Result<usize, Fault> {
        let Some(classes) = self.classes() else {
            let score = self.score(raw)?;
            if let Some(first) = scores.first_mut() {
                *first = score;
            }
            return Ok(1);
        };
        let n = self.channel_count();
        let mut x = [0i32; MAX_CHANNELS];
        self.scale(raw, x.get_mut(..n).unwrap_or(&mut []))?;
        let x = x.get(..n).unwrap_or(&[]);
        for (row, out) in classes.rows.iter().zip(scores.iter_mut()) {
            *out = self.row_score(row, x);
        }
        Ok(classes.rows.len())
    }

    /// One class row's score on scaled inputs in range. The validated bound (twice the
    /// widest row's fits the accumulator) keeps every sum from wrapping; a narrow model
    /// sums in 32 bits, as [`score_scaled`](Self::score_scaled) does.
    #[inline]
    fn row_score(&self, row: &ClassRow, x: &[i32]) -> i64 {
        if self.is_narrow() {
            #[allow(clippy::cast_possible_truncation)]
            let bias = row.bias as i32;
            let acc = row
                .weights
                .iter()
                .zip(x)
                .fold(bias, |acc, (&w, &xi)| acc.wrapping_add(w.wrapping_mul(xi)));
            return i64::from(acc);
        }
        row.weights.iter().zip(x).fold(row.bias, |acc, (&w, &xi)| {
            acc.wrapping_add(i64::from(w).wrapping_mul(i64::from(xi)))
        })
    }

    /// The arithmetic step: the exact integer score of one set of raw readings, one per
    /// channel in model order.
    ///
    /// # Errors
    /// As [`classify`](Self::classify).
    #[inline]
    pub fn score(&self, raw: &[i32]) -> Result<i64, Fault> {
        let n = self.channel_count();
        if raw.len() != n {
            return Err(Fault::ReadingCount {
                expected: count_u8(n),
                got: raw.len(),
            });
        }
        if self.is_narrow() {
            return self.score_narrow(raw);
        }
        let mut acc = self.model().bias;
        for (i, (c, &r)) in self.model().channels.iter().zip(raw).enumerate() {
            let x = c.scale_checked(r).ok_or(Fault::OutOfRange {
                channel: count_u8(i),
                raw: r,
            })?;
            // |Σ| <= validated score bound < 2^63.
            acc = acc.wrapping_add(i64::from(c.weight).wrapping_mul(i64::from(x)));
        }
        Ok(acc)
    }

    /// [`score`](Self::score) for a narrow model ([`is_narrow`](Self::is_narrow)):
    /// the 32-bit accumulator is proved (|bias| + Σ|wᵢ|·max|xᵢ| < 2^31), so the sums and
    /// products below never wrap; the score is the same as the 64-bit path's.
    #[inline]
    fn score_narrow(&self, raw: &[i32]) -> Result<i64, Fault> {
        // bias fits: |bias| is part of the proved bound.
        #[allow(clippy::cast_possible_truncation)]
        let mut acc = self.model().bias as i32;
        for (i, (c, &r)) in self.model().channels.iter().zip(raw).enumerate() {
            let x = c.scale_narrow(r).ok_or(Fault::OutOfRange {
                channel: count_u8(i),
                raw: r,
            })?;
            acc = acc.wrapping_add(c.weight.wrapping_mul(x));
        }
        Ok(i64::from(acc))
    }
}

fn count_u8(n: usize) -> u8 {
    u8::try_from(n).unwrap_or(u8::MAX)
}

impl<I: Inputs, K: Outcomes> CheckedModel<I, K> {
    /// Channels fed by a reading (all of them in a model without signals): what a
    /// station's sensor source fills.
    pub fn reading_count(&self) -> usize {
        (0..self.channel_count())
            .filter(|&i| self.source(i) == Source::Reading)
            .count()
    }

    /// Signals whose windows a station fills (none in a model without signals).
    pub fn signal_count(&self) -> usize {
        self.inputs().section().map_or(0, |s| s.signals.len())
    }

    /// Classifies a unit given the readings of its reading channels (in channel order) and
    /// one window of raw samples per signal (in signal order; slices the caller owns, such
    /// as DMA buffers). Each feature channel's reading is its feature of its signal's window
    /// ([`CheckedFeature::compute`]); then [`CheckedModel::classify`] as for readings.
    ///
    /// # Errors
    /// [`SignalFault::Windows`] for a wrong window count, [`SignalFault::Window`] for a
    /// window of the wrong length or with a sample out of range, [`SignalFault::Reading`]
    /// for a wrong reading count or a reading (or feature) outside its channel's range.
    pub fn classify_windows(
        &self,
        readings: &[i32],
        windows: &[&[i32]],
    ) -> Result<Decision, SignalFault> {
        // A model of readings: the readings are the channels' values as they are (the
        // count is checked by `classify`, with the same fault), no copy.
        if self.signal_count() == 0 && windows.is_empty() {
            return self.classify(readings).map_err(SignalFault::Reading);
        }
        let mut values = [0i32; MAX_CHANNELS];
        let n = self.channel_values(readings, windows, &mut values)?;
        self.classify(values.get(..n).unwrap_or(&[]))
            .map_err(SignalFault::Reading)
    }

    /// The values the weights multiply, one per channel in model order, written into
    /// `values`: a reading channel's reading, a feature channel's feature of its signal's
    /// window. Returns the channel count. [`classify_windows`](Self::classify_windows) is
    /// this, then [`classify`](Self::classify); the field statistics keep these values.
    ///
    /// # Errors
    /// As [`classify_windows`](Self::classify_windows), except a value outside its
    /// channel's range (that is `classify`'s refusal).
    pub fn channel_values(
        &self,
        readings: &[i32],
        windows: &[&[i32]],
        values: &mut [i32; MAX_CHANNELS],
    ) -> Result<usize, SignalFault> {
        let signals: &[SignalSpec] = self.inputs().section().map_or(&[], |s| &s.signals);
        if windows.len() != signals.len() {
            return Err(SignalFault::Windows {
                expected: count_u8(signals.len()),
                got: windows.len(),
            });
        }
        let expected = self.reading_count();
        if readings.len() != expected {
            return Err(SignalFault::Reading(Fault::ReadingCount {
                expected: count_u8(expected),
                got: readings.len(),
            }));
        }
        let n = self.channel_count();
        let mut next = readings.iter();
        for (i, v) in values.iter_mut().enumerate().take(n) {
            *v = match self.source(i) {
                Source::Reading => next.next().copied().unwrap_or(0),
                Source::Feature { signal, feature } => {
                    let index = usize::from(signal);
                    let window = windows.get(index).copied().unwrap_or(&[]);
                    let spec = signals.get(index).copied();
                    // Validation proved every feature; a refusal here would be a broken
                    // model, reported as a refused window rather than a panic.
                    let refused = SignalFault::Window {
                        signal,
                        fault: WindowFault::Length {
                            expected: spec.map_or(0, |s| s.window),
                            got: window.len(),
                        },
                    };
                    let f = spec
                        .and_then(|spec| CheckedFeature::new(spec, feature).ok())
                        .ok_or(refused)?;
                    f.compute(window)
                        .map_err(|fault| SignalFault::Window { signal, fault })?
                }
            };
        }
        Ok(n)
    }
}

#[cfg(test)]
#[allow(clippy::arithmetic_side_effects)]
mod tests {
    use super::*;

    /// A two-channel model whose channel 0 is `feature` of a 12-bit signal of `window`
    /// samples and channel 1 a reading, with channel 0's range wide enough for any value.
    fn signal_model(
        feature: crate::features::Feature,
        window: u16,
    ) -> CheckedModel<crate::features::SignalSection> {
        use crate::features::{SignalSection, SignalSpec, Source};
        let mut m = crate::model::FixedModel::example_two_channel();
        m.acc_bits = 64;
        m.channels[0].raw_min = -(1 << 24);
        m.channels[0].raw_max = 1 << 24;
        m.channels[0].offset = 0;
        m.channels[0].multiplier = 1;
        m.channels[0].shift = 10;
        let mut signals = SignalSection::default();
        signals
            .signals
            .push(SignalSpec {
                raw_min: 0,
                raw_max: 4095,
                offset: 2048,
                window,
            })
            .unwrap();
        signals
            .sources
            .push(Source::Feature { signal: 0, feature })
            .unwrap();
        signals.sources.push(Source::Reading).unwrap();
        CheckedModel::with_inputs(m, signals).unwrap()
    }

    #[test]
    fn window_faults_are_named() {
        use crate::error::{SignalFault, WindowFault};
        let m = signal_model(crate::features::Feature::Max, 4);
        assert_eq!(m.reading_count(), 1);
        assert_eq!(m.signal_count(), 1);
        assert_eq!(
            m.classify_windows(&[500], &[]),
            Err(SignalFault::Windows {
                expected: 1,
                got: 0
            })
        );
        assert_eq!(
            m.classify_windows(&[500], &[&[1, 2, 3]]),
            Err(SignalFault::Window {
                signal: 0,
                fault: WindowFault::Length {
                    expected: 4,
                    got: 3
                }
            })
        );
        assert_eq!(
            m.classify_windows(&[500], &[&[1, 2, 4096, 3]]),
            Err(SignalFault::Window {
                signal: 0,
                fault: WindowFault::OutOfRange {
                    index: 2,
                    raw: 4096
                }
            })
        );
        assert_eq!(
            m.classify_windows(&[], &[&[1, 2, 3, 4]]),
            Err(SignalFault::Reading(Fault::ReadingCount {
                expected: 1,
                got: 0
            }))
        );
        assert_eq!(
            m.classify_windows(&[1001], &[&[1, 2, 3, 4]]),
            Err(SignalFault::Reading(Fault::OutOfRange {
                channel: 1,
                raw: 1001
            }))
        );
    }

    #[test]
    fn a_model_of_readings_takes_no_window() {
        // One path for both kinds: without signals a unit is its readings alone.
        let m = example();
        for raw in [[900, 100], [1001, 0], [0, 1000]] {
            assert_eq!(
                m.classify_windows(&raw, &[]),
                m.classify(&raw).map_err(SignalFault::Reading)
            );
        }
        assert_eq!(
            m.classify_windows(&[900, 100], &[&[1]]),
            Err(SignalFault::Windows {
                expected: 0,
                got: 1
            })
        );
        assert_eq!((m.reading_count(), m.signal_count()), (2, 0));
    }

    proptest! {
        /// Windows in, decision out: the same as computing each feature and classifying the
        /// readings it makes, for every feature.
        #[test]
        fn windows_classify_as_their_features_do(
            samples in prop::collection::vec(0i32..4096, 16),
            reading in 0i32..=1000,
            which in 0usize..9,
            coeff in -(1i32 << 30)..=(1 << 30),
        ) {
            use crate::features::{CheckedFeature, Feature};
            let feature = [Feature::Mean, Feature::Rms, Feature::Min, Feature::Max,
                Feature::PeakToPeak, Feature::AbsPeak, Feature::StdDev, Feature::ZeroCrossings,
                Feature::Band { coeff }][which];
            let m = signal_model(feature, 16);
            let spec = m.signals().signals[0];
            let value = CheckedFeature::new(spec, feature).unwrap().compute(&samples).unwrap();
            prop_assert_eq!(
                m.classify_windows(&[reading], &[&samples]).unwrap(),
                m.classify(&[value, reading]).unwrap()
            );
        }
    }
    use crate::model::{FixedModel, scale_wide};
    use proptest::prelude::*;

    fn example() -> CheckedModel {
        CheckedModel::new(FixedModel::example_two_channel()).unwrap()
    }

    #[test]
    fn conversion_rounds_half_up() {
        // multiplier 1, shift 1: x = floor((r - 0 + 1) / 2), so 1 → 1, -1 → 0, 3 → 2, -3 → -1.
        let c = ChannelSpec {
            raw_min: -10,
            raw_max: 10,
            multiplier: 1,
            shift: 1,
            ..Default::default()
        };
        let got: [i32; 4] = [1, -1, 3, -3].map(|r| c.scale_checked(r).unwrap());
        assert_eq!(got, [1, 0, 2, -1]);
    }

    #[test]
    fn out_of_range_and_count_faults() {
        let m = example();
        assert_eq!(
            m.classify(&[1001, 0]),
            Err(Fault::OutOfRange {
                channel: 0,
                raw: 1001
            })
        );
        assert_eq!(
            m.classify(&[0, -1]),
            Err(Fault::OutOfRange {
                channel: 1,
                raw: -1
            })
        );
        assert_eq!(
            m.classify(&[0]),
            Err(Fault::ReadingCount {
                expected: 2,
                got: 1
            })
        );
        assert!(m.classify(&[1000, 0]).is_ok());
        assert!(m.classify(&[0, 1000]).is_ok());
    }

    fn arb_channel() -> impl Strategy<Value = ChannelSpec> {
        (
            -100_000i32..100_000,
            1i32..200_000,
            16u8..40,
            -8_000_000i32..8_000_000,
        )
            .prop_map(|(lo, span, shift, w)| {
                let hi = lo + span;
                let offset = lo + span / 2;
                let half = i64::from(span - span / 2).max(1);
                // Largest multiplier that keeps the scaled range within ±32767.
                let mul = ((32767i64 << shift) / half).clamp(1, i64::from(i32::MAX)) as i32;
                ChannelSpec {
                    raw_min: lo,
                    raw_max: hi,
                    offset,
                    multiplier: mul,
                    shift,
                    weight: w,
                    ..Default::default()
                }
            })
    }

    proptest! {
        /// Differential check against an exact reference in i128 (the style of
        /// csv-core's `parses_to!`: every case through two implementations).
        #[test]
        fn kernel_equals_exact_i128_reference(
            chans in prop::collection::vec(arb_channel(), 1..=crate::limits::MAX_CHANNELS),
            bias in -(1i64 << 40)..(1i64 << 40),
            picks in prop::collection::vec(any::<u32>(), crate::limits::MAX_CHANNELS),
        ) {
            let mut fm = FixedModel::example_two_channel();
            fm.channels.clear();
            for c in &chans { fm.channels.push(c.clone()).unwrap(); }
            fm.weight_bits = 24;
            fm.acc_bits = 64;
            fm.bias = bias;
            fm.nogo_max = -1;
            fm.go_min = 1;
            let m = CheckedModel::new(fm).unwrap();
            let raw: std::vec::Vec<i32> = chans.iter().zip(&picks).map(|(c, &p)| {
                let span = (i64::from(c.raw_max) - i64::from(c.raw_min) + 1) as u64;
                (i64::from(c.raw_min) + (u64::from(p) % span) as i64) as i32
            }).collect();
            let exact: i128 = chans.iter().zip(&raw)
                .map(|(c, &r)| i128::from(c.weight) * scale_wide(c, r))
                .sum::<i128>() + i128::from(bias);
            let d = m.classify(&raw).unwrap();
            prop_assert_eq!(i128::from(d.score), exact);
            let want = if exact >= 1 { Verdict::Go } else if exact <= -1 { Verdict::NoGo } else { Verdict::Recheck };
            prop_assert_eq!(d.verdict, want);
            // The two-step path (scale, then score) agrees with classify.
            let mut x = [0i32; crate::limits::MAX_CHANNELS];
            m.scale(&raw, &mut x[..raw.len()]).unwrap();
            prop_assert_eq!(m.score_scaled(&x[..raw.len()]), d.score);
        }

        /// The 32-bit path (ADC-sized ranges, 8-bit weights, a proved 32-bit accumulator)
        /// against the same exact i128 reference, and against the 64-bit path of the same
        /// model declared with a 64-bit accumulator.
        #[test]
        fn narrow_kernel_equals_exact_i128_reference(
            chans in prop::collection::vec(
                (0i32..4096, 1i32..4096, 0u8..=15, -127i32..=127),
                1..=crate::limits::MAX_CHANNELS,
            ),
            bias in -(1i64 << 20)..(1i64 << 20),
            picks in prop::collection::vec(any::<u32>(), crate::limits::MAX_CHANNELS),
        ) {
            let mut fm = FixedModel::example_two_channel();
            fm.channels.clear();
            for &(lo, span, shift, w) in &chans {
                let half = i64::from(span - span / 2).max(1);
                let mul = ((32767i64 << shift) / half).clamp(1, i64::from(i32::MAX)) as i32;
                fm.channels.push(ChannelSpec {
                    raw_min: lo,
                    raw_max: lo + span,
                    offset: lo + span / 2,
                    multiplier: mul,
                    shift,
                    weight: w,
                    ..Default::default()
                }).unwrap();
            }
            fm.weight_bits = 8;
            fm.acc_bits = 32;
            fm.bias = bias;
            fm.nogo_max = -1;
            fm.go_min = 1;
            let m = CheckedModel::new(fm.clone()).unwrap();
            prop_assert!(m.is_narrow());
            fm.acc_bits = 64;
            let wide = CheckedModel::new(fm).unwrap();
            prop_assert!(!wide.is_narrow());
            let raw: std::vec::Vec<i32> = m.model().channels.iter().zip(&picks).map(|(c, &p)| {
                let span = (i64::from(c.raw_max) - i64::from(c.raw_min) + 1) as u64;
                (i64::from(c.raw_min) + (u64::from(p) % span) as i64) as i32
            }).collect();
            let exact: i128 = m.model().channels.iter().zip(&raw)
                .map(|(c, &r)| i128::from(c.weight) * scale_wide(c, r))
                .sum::<i128>() + i128::from(bias);
            let d = m.classify(&raw).unwrap();
            prop_assert_eq!(i128::from(d.score), exact);
            prop_assert_eq!(wide.classify(&raw).unwrap(), d);
            let mut x = [0i32; crate::limits::MAX_CHANNELS];
            m.scale(&raw, &mut x[..raw.len()]).unwrap();
            prop_assert_eq!(m.score_scaled(&x[..raw.len()]), d.score);
            // Faults are the same on both paths.
            let mut bad = raw.clone();
            bad[0] = m.model().channels[0].raw_max.wrapping_add(1);
            prop_assert_eq!(m.classify(&bad), wide.classify(&bad));
        }
    }
}
