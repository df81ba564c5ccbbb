//! Features of a window of raw samples, in integers, identical on the desk and on the device.
//!
//! A signal is a window of `N` raw samples sᵢ (ADC counts) with a valid range and an
//! offset: the physical value of a sample is `lsb·(sᵢ − offset)`, so cᵢ = sᵢ − offset is
//! a sample in counts from physical zero. A [`Feature`] reduces the window to one integer,
//! an exact function of the samples, which then enters the model as a channel's raw
//! reading; its channel's conversion carries the factor in the last column.
//!
//! | feature | integer computed | physical value |
//! |---|---|---|
//! | [`Feature::Mean`] | Σcᵢ | lsb/N · it |
//! | [`Feature::Rms`] | ⌊√(Σcᵢ²)⌋ | lsb/√N · it, low by less than lsb/√N |
//! | [`Feature::Min`], [`Feature::Max`] | min cᵢ, max cᵢ | lsb · it |
//! | [`Feature::PeakToPeak`] | max sᵢ − min sᵢ | lsb · it |
//! | [`Feature::AbsPeak`] | max \|cᵢ\| | lsb · it |
//! | [`Feature::StdDev`] | ⌊√(N·Σcᵢ² − (Σcᵢ)²)⌋ | lsb/N · it (population σ), low by less than lsb/N |
//! | [`Feature::ZeroCrossings`] | #{i ≥ 1 : [dᵢ ≥ 0] ≠ [dᵢ₋₁ ≥ 0]}, dᵢ = N·cᵢ − Σc | a count |
//! | [`Feature::Band`] | Goertzel magnitude, below | lsb · it ≈ \|Xₖ\| |
//!
//! RMS is the integer square root of the sum of squares rather than of the mean square:
//! dividing by N first would round twice; folding 1/√N into the conversion rounds once,
//! by the floor of the square root, which loses less than one count. The standard
//! deviation is the same square root of N²·σ², N·Σc² − (Σc)² (≥ 0 by Cauchy–Schwarz).
//! Zero crossings are counted about the mean without dividing: N·cᵢ − Σc has the sign
//! of cᵢ − mean.
//!
//! # The band magnitude: Goertzel's recurrence in fixed point
//!
//! Goertzel's recurrence for frequency ω (Goertzel 1958; as in Oppenheim and Schafer,
//! *Discrete-Time Signal Processing*, the Goertzel algorithm section) is
//! vₙ = xₙ + 2cos ω·vₙ₋₁ − vₙ₋₂ with v₋₁ = v₋₂ = 0, and after the N samples
//! |X(ω)|² = v²ₙ₋₁ + v²ₙ₋₂ − 2cos ω·vₙ₋₁·vₙ₋₂, X(ω) = Σ xₙ e^{−jωn}. Here, with the
//! coefficient stored as C = round(2cos ω · 2²⁹) (|C| ≤ 2³⁰, so c′ = C/2²⁹ ∈ [−2, 2]):
//!
//! ```text
//! s1 = s2 = 0                                       (i64)
//! for each sample: t = (C·s1 + 2^28) >> 29          (i128 product, arithmetic shift)
//!                  s0 = cᵢ + t − s2;  s2 = s1;  s1 = s0
//! t = (C·s1 + 2^28) >> 29
//! P = s1² + s2² − t·s2                              (i128)
//! magnitude = ⌊√max(P, 0)⌋
//! ```
//!
//! **Why it cannot overflow.** The recurrence with coefficient c′ = 2cos ω′ is a filter
//! whose response to a unit input m steps back is Uₘ(cos ω′) (Chebyshev, second kind), and
//! |Uₘ(cos ω′)| ≤ m + 1. The rounding of t adds at most ½ per step, like a second input, so
//! |s| ≤ (A + ½)·N(N + 1)/2 = S for samples |cᵢ| ≤ A. Validation requires S < 2⁶²: the
//! states fit i64 and the three terms of P fit i128.
//!
//! **How far it is from the DFT magnitude.** Writing y = s1 − e^{−jω′}s2 (so |y|² is P
//! computed exactly), the result differs from |X(ωₖ)| at the bin's own frequency ωₖ by at
//! most the sum of:
//! - the coefficient's rounding: |ω′ − ωₖ|·Σ n·|cₙ| (the DTFT's slope is at most Σ n|xₙ|);
//! - the recurrence's rounding: ½·(Σ_{m<N} uₘ + Σ_{m<N−1} uₘ), uₘ = min(m + 1, 1/|sin ω′|),
//!   since the magnitude moves by at most the change of s1 plus that of s2;
//! - the final product's rounding: √(|s2|/2) (P is off by at most |s2|/2);
//! - the floor of the square root: 1.
//!
//! With uₘ ≤ m + 1 the result is at most N·A + N²/2 + √(S/2) + 1, which must fit i32.
//! The tests check every feature against numpy and Python's `math.isqrt`, exactly, and the
//! band magnitude against numpy's FFT within this bound.

use heapless::Vec;

use crate::error::{SignalError, WindowFault};
use crate::limits::{MAX_CHANNELS, MAX_SIGNALS, MAX_WINDOW};

/// What a window is reduced to. See the module documentation for each integer.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Feature {
    /// Σcᵢ: the mean times N.
    Mean,
    /// ⌊√(Σcᵢ²)⌋: the RMS times √N.
    Rms,
    /// The smallest cᵢ.
    Min,
    /// The largest cᵢ.
    Max,
    /// max sᵢ − min sᵢ.
    PeakToPeak,
    /// The largest |cᵢ|.
    AbsPeak,
    /// ⌊√(N·Σcᵢ² − (Σcᵢ)²)⌋: the population standard deviation times N.
    StdDev,
    /// Crossings of the mean between neighbouring samples.
    ZeroCrossings,
    /// Goertzel magnitude at the frequency whose coefficient is `coeff` = round(2cos ω·2²⁹).
    Band {
        /// round(2cos ω · 2²⁹); |coeff| ≤ 2³⁰.
        coeff: i32,
    },
}

/// A signal's window: valid raw sample range, the raw count of physical zero, and length.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SignalSpec {
    /// Smallest valid raw sample.
    pub raw_min: i32,
    /// Largest valid raw sample.
    pub raw_max: i32,
    /// The raw count the features measure samples from (cᵢ = sᵢ − offset; physical zero
    /// unless declared otherwise), inside the valid range.
    pub offset: i32,
    /// Samples per window, 1 ..= [`MAX_WINDOW`].
    pub window: u16,
}

/// Where a channel's reading comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Source {
    /// A reading the station passes in, as in a model without signals.
    Reading,
    /// A feature of one of the model's signals, computed from its window.
    Feature {
        /// Index into [`SignalSection::signals`].
        signal: u8,
        /// Which feature.
        feature: Feature,
    },
}

/// The signals of a model and the source of each channel: what a format-3 blob adds to the
/// model. Empty for a model whose channels are all readings (a format-1 blob).
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct SignalSection {
    /// The signals' windows, in the order the station passes them. Their names stay on
    /// the host (the feature channels' names carry them): the device needs only the
    /// windows, and every byte here is held on its stack while a blob is loaded.
    pub signals: Vec<SignalSpec, MAX_SIGNALS>,
    /// One per channel, in channel order; empty when every channel is a reading.
    pub sources: Vec<Source, MAX_CHANNELS>,
}

impl SignalSection {
    /// Whether the model has no signals (every channel a reading).
    pub fn is_empty(&self) -> bool {
        self.signals.is_empty() && self.sources.is_empty()
    }

    /// The source of channel `i` (a reading when no sources are listed).
    pub fn source(&self, i: usize) -> Source {
        self.sources.get(i).copied().unwrap_or(Source::Reading)
    }
}

/// Most a Goertzel state may reach: keeps the states in i64 and P's terms in i128.
const STATE_LIMIT: u128 = 1 << 62;

/// A feature of a signal whose integers are proved not to overflow; computing it can only
/// refuse a window (wrong length, a sample out of range), never overflow or panic.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct CheckedFeature {
    spec: SignalSpec,
    feature: Feature,
    bound: i32,
}

impl SignalSpec {
    /// The largest |sample − offset| over the valid range (below 2³¹ once validated).
    fn amplitude(&self) -> u64 {
        let below = i64::from(self.offset) - i64::from(self.raw_min);
        let above = i64::from(self.raw_max) - i64::from(self.offset);
        below.max(above).unsigned_abs()
    }
}

impl CheckedFeature {
    /// Validates `feature` of `spec`: the range, offset and window are sound, and every
    /// integer the feature computes, and its result, fit their widths for any window of
    /// valid samples.
    ///
    /// # Errors
    /// The [`SignalError`] naming what is refused.
    ///
    /// ```
    /// use shared_model::features::{CheckedFeature, Feature, SignalSpec};
    ///
    /// // A 12-bit ADC centred on 2048, 8 samples per window.
    /// let spec = SignalSpec { raw_min: 0, raw_max: 4095, offset: 2048, window: 8 };
    /// let p2p = CheckedFeature::new(spec, Feature::PeakToPeak).unwrap();
    /// assert_eq!(p2p.compute(&[2000, 2100, 1990, 2048, 2050, 2200, 2010, 2048]), Ok(210));
    /// // A window of the wrong length is refused, never read past its end.
    /// assert!(p2p.compute(&[2048; 7]).is_err());
    /// ```
    pub fn new(spec: SignalSpec, feature: Feature) -> Result<Self, SignalError> {
        if spec.raw_min > spec.raw_max {
            return Err(SignalError::InvertedRange);
        }
        let span = i64::from(spec.raw_max) - i64::from(spec.raw_min);
        if spec.offset < spec.raw_min || spec.offset > spec.raw_max || span >= 1 << 31 {
            return Err(SignalError::Offset);
        }
        let n = usize::from(spec.window);
        if n == 0 || n > MAX_WINDOW {
            return Err(SignalError::Window(spec.window));
        }
        let bound = Self::proved_bound(&spec, feature)?;
        let bound = i32::try_from(bound).map_err(|_| SignalError::Overflow)?;
        Ok(Self {
            spec,
            feature,
            bound,
        })
    }

    /// The proved largest |result|, or the overflow refusal. Intermediates are checked here
    /// as well as the result (the sum of squares must fit u64).
    fn proved_bound(spec: &SignalSpec, feature: Feature) -> Result<u128, SignalError> {
        let n = u128::from(spec.window);
        let a = u128::from(spec.amplitude());
        // Σcᵢ² ≤ N·A² is kept in u64 (Rms, StdDev).
        let squares_fit = n * a * a <= u128::from(u64::MAX);
        Ok(match feature {
            Feature::Mean => n * a,
            Feature::Rms if squares_fit => (n * a * a).isqrt(),
            Feature::StdDev if squares_fit => n * a,
            Feature::Rms | Feature::StdDev => return Err(SignalError::Overflow),
            Feature::Min | Feature::Max | Feature::AbsPeak => a,
            Feature::PeakToPeak => {
                u128::from((i64::from(spec.raw_max) - i64::from(spec.raw_min)).unsigned_abs())
            }
            Feature::ZeroCrossings => n - 1,
            Feature::Band { coeff } => {
                if coeff.unsigned_abs() > 1 << 30 {
                    return Err(SignalError::Coefficient(coeff));
                }
                // S = (A + ½)·N(N + 1)/2, rounded up.
                let states = ((2 * a + 1) * n * (n + 1)).div_ceil(4);
                if states >= STATE_LIMIT {
                    return Err(SignalError::Overflow);
                }
                n * a + (n * n).div_ceil(2) + (states / 2).isqrt() + 1
            }
        })
    }

    /// The signal.
    pub fn spec(&self) -> &SignalSpec {
        &self.spec
    }

    /// The feature.
    pub fn feature(&self) -> Feature {
        self.feature
    }

    /// The proved largest |result|: the valid raw range of the channel this feature feeds is
    /// within ±bound.
    pub fn bound(&self) -> i32 {
        self.bound
    }

    /// The proved range of the result, `(lowest, highest)`: where the feature's channel may
    /// set its valid raw range so that no valid window is refused.
    ///
    /// | feature | range |
    /// |---|---|
    /// | mean | N·(raw_min − offset) ..= N·(raw_max − offset) |
    /// | min, max | raw_min − offset ..= raw_max − offset |
    /// | peak-to-peak | 0 ..= raw_max − raw_min |
    /// | absolute peak | 0 ..= A (the largest \|raw − offset\|) |
    /// | zero crossings | 0 ..= N − 1 |
    /// | RMS, standard deviation, band | 0 ..= [`bound`](Self::bound) |
    ///
    /// ```
    /// use shared_model::features::{CheckedFeature, Feature, SignalSpec};
    ///
    /// let spec = SignalSpec { raw_min: 0, raw_max: 4095, offset: 2048, window: 8 };
    /// assert_eq!(CheckedFeature::new(spec, Feature::Mean).unwrap().range(), (-16_384, 16_376));
    /// assert_eq!(CheckedFeature::new(spec, Feature::ZeroCrossings).unwrap().range(), (0, 7));
    /// ```
    pub fn range(&self) -> (i32, i32) {
        let s = &self.spec;
        let n = i64::from(s.window);
        let (lo, hi) = (
            i64::from(s.raw_min) - i64::from(s.offset),
            i64::from(s.raw_max) - i64::from(s.offset),
        );
        let range = match self.feature {
            Feature::Mean => (n * lo, n * hi),
            Feature::Min | Feature::Max => (lo, hi),
            Feature::PeakToPeak => (0, hi - lo),
            Feature::AbsPeak => (0, hi.max(-lo)),
            Feature::ZeroCrossings => (0, n - 1),
            Feature::Rms | Feature::StdDev | Feature::Band { .. } => (0, i64::from(self.bound)),
        };
        // Each end is within ±bound, which `new` proved fits an i32.
        let fit = |v: i64| i32::try_from(v).unwrap_or(if v < 0 { -self.bound } else { self.bound });
        (fit(range.0), fit(range.1))
    }

    /// The most the result can change when every sample of a window moves by at most
    /// `delta` counts (declared sensor noise) and the window stays valid, in the result's
    /// own counts:
    ///
    /// | feature | bound | why |
    /// |---|---|---|
    /// | mean | N·δ | a sum of N samples |
    /// | RMS | ⌊√(N·δ²)⌋ + 2 | ‖c + e‖ − ‖c‖ ≤ ‖e‖ ≤ √N·δ; +1 rounding up the root, +1 the floor |
    /// | min, max, absolute peak | δ | each moves with its sample |
    /// | peak-to-peak | 2δ | both ends move |
    /// | standard deviation | N·δ + 1 | √N·‖(c+e) − mean‖ − √N·‖c − mean‖ ≤ √N·‖e‖; +1 the floor |
    /// | zero crossings | N − 1 | any sample near the mean can flip: no bound below the count's range |
    /// | band magnitude | N·δ + 2R | \|X\| moves by at most Σ\|eᵢ\|; each result is within R of \|X(ω′)\| |
    ///
    /// R is the fixed-point rounding bound of the module documentation, with
    /// uₘ = min(m + 1, U) and U = ⌈2³⁰ / ⌊√(2⁶⁰ − C²)⌋⌉ ≥ 1/|sin ω′| computed in integers:
    /// ½(Σ_{m<N} uₘ + Σ_{m<N−1} uₘ) + √(S′/2) + 1 with S′ = (A + ½)·Σ_{m<N} uₘ. The
    /// bound holds for any two valid windows whose samples differ by at most δ (tested by
    /// simulation).
    pub fn noise_bound(&self, delta: u32) -> u64 {
        let n = u128::from(self.spec.window);
        let d = u128::from(delta);
        let bound = match self.feature {
            Feature::Mean => n * d,
            Feature::Rms => (n * d * d).isqrt() + 2,
            Feature::Min | Feature::Max | Feature::AbsPeak => d,
            Feature::PeakToPeak => 2 * d,
            Feature::StdDev => n * d + 1,
            Feature::ZeroCrossings => n.saturating_sub(1),
            Feature::Band { coeff } => {
                n * d + 2 * goertzel_rounding(n, u128::from(self.spec.amplitude()), coeff)
            }
        };
        u64::try_from(bound).unwrap_or(u64::MAX)
    }

    /// The feature of one window of raw samples.
    ///
    /// # Errors
    /// [`WindowFault::Length`] if the window is not the declared length,
    /// [`WindowFault::OutOfRange`] for the first sample outside the valid range.
    pub fn compute(&self, samples: &[i32]) -> Result<i32, WindowFault> {
        let n = usize::from(self.spec.window);
        if samples.len() != n {
            return Err(WindowFault::Length {
                expected: self.spec.window,
                got: samples.len(),
            });
        }
        if let Some((index, &raw)) = samples
            .iter()
            .enumerate()
            .find(|&(_, &s)| s < self.spec.raw_min || s > self.spec.raw_max)
        {
            return Err(WindowFault::OutOfRange {
                // index < n ≤ MAX_WINDOW < 2^16.
                index: u16::try_from(index).unwrap_or(u16::MAX),
                raw,
            });
        }
        let off = i64::from(self.spec.offset);
        // Every sample is valid: |cᵢ| ≤ A < 2^31, and `new` proved each sum below and its
        // result within ±bound (< 2^31), so no operation here can overflow.
        let c = samples.iter().map(|&s| i64::from(s) - off);
        let value: i64 = match self.feature {
            Feature::Mean => c.sum(),
            Feature::Rms => isqrt_u64(sum_squares(samples, off)),
            Feature::Min => c.min().unwrap_or(0),
            Feature::Max => c.max().unwrap_or(0),
            Feature::PeakToPeak => {
                let (lo, hi) = samples.iter().fold((i64::MAX, i64::MIN), |(lo, hi), &s| {
                    (lo.min(i64::from(s)), hi.max(i64::from(s)))
                });
                hi - lo
            }
            Feature::AbsPeak => c.map(i64::abs).max().unwrap_or(0),
            Feature::StdDev => {
                let sum: i64 = c.sum();
                let squares = u128::from(sum_squares(samples, off));
                // N·Σc² ≥ (Σc)² (Cauchy–Schwarz), so the difference is not negative.
                let spread = (u128::from(self.spec.window) * squares).saturating_sub(
                    u128::from(sum.unsigned_abs()) * u128::from(sum.unsigned_abs()),
                );
                i64::try_from(spread.isqrt()).unwrap_or(i64::MAX)
            }
            Feature::ZeroCrossings => {
                let sum: i64 = c.clone().sum();
                let n = i64::from(self.spec.window);
                let mut above = c.map(|ci| n * ci - sum >= 0);
                let first = above.next().unwrap_or(true);
                above
                    .fold((first, 0i64), |(prev, count), now| {
                        (now, count + i64::from(now != prev))
                    })
                    .1
            }
            Feature::Band { coeff } => goertzel(coeff, c),
        };
        // Within ±bound by the proof in `new`; a value outside would be a broken proof,
        // reported as the largest value rather than wrapped.
        Ok(i32::try_from(value).unwrap_or(i32::MAX))
    }
}

/// Σ(sᵢ − off)², proved below 2^64 by [`CheckedFeature::new`].
fn sum_squares(samples: &[i32], off: i64) -> u64 {
    samples
        .iter()
        .map(|&s| (i64::from(s) - off).unsigned_abs())
        .fold(0u64, |acc, d| acc.wrapping_add(d.wrapping_mul(d)))
}

fn isqrt_u64(v: u64) -> i64 {
    // √(2^64) = 2^32: fits i64.
    i64::try_from(v.isqrt()).unwrap_or(i64::MAX)
}

/// R, the most the fixed-point band magnitude of an N-sample window with |cᵢ| ≤ A lies from
/// |X(ω′)| (see [`CheckedFeature::noise_bound`]), rounded up. Integers only: the device
/// may call it too.
fn goertzel_rounding(n: u128, a: u128, coeff: i32) -> u128 {
    // ⌊2³⁰·|sin ω′|⌋ = ⌊√(2⁶⁰ − C²)⌋; its reciprocal, rounded up, bounds 1/|sin ω′|.
    let c = u128::from(coeff.unsigned_abs());
    let sin = ((1u128 << 60).saturating_sub(c * c)).isqrt();
    let u = if sin == 0 {
        n
    } else {
        (1u128 << 30).div_ceil(sin).min(n)
    };
    // Σ_{m<k} min(m + 1, u).
    let sum = |k: u128| {
        if k <= u {
            k * (k + 1) / 2
        } else {
            u * (u + 1) / 2 + (k - u) * u
        }
    };
    let rounding = (sum(n) + sum(n.saturating_sub(1))).div_ceil(2);
    let states = ((2 * a + 1) * sum(n)).div_ceil(2);
    rounding + (states / 2).isqrt() + 2
}

/// The fixed-point Goertzel magnitude of the module documentation.
fn goertzel(coeff: i32, samples: impl Iterator<Item = i64>) -> i64 {
    let c = i128::from(coeff);
    // (C·s + 2^28) >> 29: round half up; |C·s| < 2^30·2^62 fits i128.
    let times_c = |s: i64| -> i64 {
        let t = (c * i128::from(s) + (1 << 28)) >> 29;
        // |t| ≤ 2|s| + 1 < 2^63 by the state bound.
        i64::try_from(t).unwrap_or(0)
    };
    let (mut s1, mut s2) = (0i64, 0i64);
    for x in samples {
        let s0 = x.wrapping_add(times_c(s1)).wrapping_sub(s2);
        s2 = s1;
        s1 = s0;
    }
    let t = i128::from(times_c(s1));
    let (s1, s2) = (i128::from(s1), i128::from(s2));
    let p = s1 * s1 + s2 * s2 - t * s2;
    let p = u128::try_from(p).unwrap_or(0);
    i64::try_from(p.isqrt()).unwrap_or(i64::MAX)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec(raw_min: i32, raw_max: i32, offset: i32, window: u16) -> SignalSpec {
        SignalSpec {
            raw_min,
            raw_max,
            offset,
            window,
        }
    }

    #[test]
    fn worked_example_by_hand() {
        // c = [-2, 1, 3, -2]: Σc = 0, Σc² = 18, N·Σc² − (Σc)² = 72.
        let s = spec(0, 10, 5, 4);
        let w = [3, 6, 8, 3];
        let f = |feature| CheckedFeature::new(s, feature).unwrap().compute(&w);
        assert_eq!(f(Feature::Mean), Ok(0));
        assert_eq!(f(Feature::Rms), Ok(4)); // ⌊√18⌋
        assert_eq!(f(Feature::Min), Ok(-2));
        assert_eq!(f(Feature::Max), Ok(3));
        assert_eq!(f(Feature::PeakToPeak), Ok(5));
        assert_eq!(f(Feature::AbsPeak), Ok(3));
        assert_eq!(f(Feature::StdDev), Ok(8)); // ⌊√72⌋
        // d = 4c − 0 = [-8, 4, 12, -8]: below, above, above, below: two crossings.
        assert_eq!(f(Feature::ZeroCrossings), Ok(2));
        // ω = π/2 (bin 1 of 4, C = 0): e^{−jωn} = 1, −j, −1, j, so X₁ = −2 − j − 3 − 2j
        // = −5 − 3j, |X₁| = √34, ⌊√34⌋ = 5. The recurrence with C = 0 makes no rounding.
        assert_eq!(f(Feature::Band { coeff: 0 }), Ok(5));
    }

    #[test]
    fn windows_and_samples_are_checked() {
        let f = CheckedFeature::new(spec(0, 10, 5, 4), Feature::Max).unwrap();
        assert_eq!(
            f.compute(&[1, 2, 3]),
            Err(WindowFault::Length {
                expected: 4,
                got: 3
            })
        );
        assert_eq!(
            f.compute(&[1, 2, 11, -1]),
            Err(WindowFault::OutOfRange { index: 2, raw: 11 })
        );
    }

    #[test]
    fn specs_that_could_overflow_are_refused() {
        assert_eq!(
            CheckedFeature::new(spec(10, 0, 5, 4), Feature::Mean),
            Err(SignalError::InvertedRange)
        );
        assert_eq!(
            CheckedFeature::new(spec(0, 10, 11, 4), Feature::Mean),
            Err(SignalError::Offset)
        );
        assert_eq!(
            CheckedFeature::new(spec(0, 10, 5, 0), Feature::Mean),
            Err(SignalError::Window(0))
        );
        // N·A = 4096·2^20 = 2^32: the mean's sum does not fit i32.
        let wide = spec(-(1 << 20), 1 << 20, 0, 4096);
        assert_eq!(
            CheckedFeature::new(wide, Feature::Mean),
            Err(SignalError::Overflow)
        );
        // A 16-bit ADC over 4,096 samples: every feature is proved.
        let adc = spec(0, 65_535, 32_768, 4096);
        for f in [
            Feature::Mean,
            Feature::Rms,
            Feature::StdDev,
            Feature::ZeroCrossings,
            Feature::Band { coeff: 1 << 30 },
        ] {
            assert!(CheckedFeature::new(adc, f).is_ok(), "{f:?}");
        }
        assert_eq!(
            CheckedFeature::new(
                adc,
                Feature::Band {
                    coeff: (1 << 30) + 1
                }
            ),
            Err(SignalError::Coefficient((1 << 30) + 1))
        );
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(2048))]
        /// Declared noise, simulated: a window and the same window with every sample moved
        /// by at most δ (both valid) give results no further apart than `noise_bound`.
        #[test]
        fn noise_moves_each_feature_within_its_bound(
            base in proptest::collection::vec(64i32..4032, 64),
            noise in proptest::collection::vec(-1000i32..=1000, 64),
            delta in 0i32..=64,
            window in 1u16..=64,
            coeff in -(1i32 << 30)..=(1 << 30),
            push_all in proptest::bool::ANY,
        ) {
            let s = spec(0, 4095, 2048, window);
            let n = usize::from(window);
            let w = &base[..n];
            // Random moves within ±δ, or every sample pushed by +δ (the worst case for sums).
            let moved: std::vec::Vec<i32> = w.iter().zip(&noise)
                .map(|(&x, &e)| x + if push_all { delta } else { e * delta / 1000 })
                .collect();
            for f in [Feature::Mean, Feature::Rms, Feature::Min, Feature::Max, Feature::PeakToPeak,
                      Feature::AbsPeak, Feature::StdDev, Feature::ZeroCrossings, Feature::Band { coeff }] {
                let c = CheckedFeature::new(s, f).unwrap();
                let change = (i64::from(c.compute(&moved).unwrap()) - i64::from(c.compute(w).unwrap())).unsigned_abs();
                let bound = c.noise_bound(delta as u32);
                proptest::prop_assert!(change <= bound, "{:?}: moved {} > bound {}", f, change, bound);
                if push_all && f == Feature::Mean {
                    // Pushing every sample the same way reaches the mean's bound exactly.
                    proptest::prop_assert_eq!(change, bound);
                }
            }
        }
    }

    proptest::proptest! {
        /// Extreme windows (every sample at an end of the range) never exceed the proved
        /// bound, for every feature, on the widest specs validation accepts.
        #[test]
        fn results_stay_within_the_proved_bound(
            lo in -(1i32 << 16)..0, hi in 0i32..(1 << 16), window in 1u16..=256,
            pattern in proptest::collection::vec(proptest::bool::ANY, 256),
            coeff in -(1i32 << 30)..=(1 << 30), at in 0u32..=1000,
        ) {
            // The offset anywhere in the range: the range's ends move with it.
            let offset = lo + ((i64::from(hi - lo) * i64::from(at)) / 1000) as i32;
            let s = spec(lo, hi, offset, window);
            let w: std::vec::Vec<i32> = pattern.iter().take(usize::from(window)).map(|&b| if b { hi } else { lo }).collect();
            for f in [Feature::Mean, Feature::Rms, Feature::Min, Feature::Max, Feature::PeakToPeak,
                      Feature::AbsPeak, Feature::StdDev, Feature::ZeroCrossings, Feature::Band { coeff }] {
                let c = CheckedFeature::new(s, f).unwrap();
                let v = c.compute(&w).unwrap();
                proptest::prop_assert!(v.unsigned_abs() <= c.bound().unsigned_abs(), "{:?}: {} > {}", f, v, c.bound());
                let (lo, hi) = c.range();
                proptest::prop_assert!(lo <= v && v <= hi, "{:?}: {} outside [{}, {}]", f, v, lo, hi);
                proptest::prop_assert!(lo.unsigned_abs() <= c.bound().unsigned_abs() && hi.unsigned_abs() <= c.bound().unsigned_abs());
            }
        }
    }
}
