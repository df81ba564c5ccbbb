//! Signals: a window of samples per unit, and what a feature channel takes from it.
//!
//! A signal is declared in the channel sheet (`[[signal]]`): its column in the signal log,
//! unit, ADC conversion (`lsb`, `zero`: physical = zero + lsb·raw), valid raw sample range,
//! window length and optional per-sample noise. A feature channel (`[[feature]]`) names a
//! signal and one [`Feature`] of it. The device computes the feature as an integer with the
//! shared code ([`shared_model::features`]); the feature channel's conversion
//! ([`FeatureSource::physical`]) carries the factor that makes that integer a physical value,
//! so a model's weights, reports and noise analysis speak physical units as for readings.

use serde::{Deserialize, Serialize};
use shared_model::features::{CheckedFeature, Feature, SignalSpec};

/// One signal's window and conversion, as the sheet declares it and the float model keeps it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SignalScale {
    /// Column in the signal log.
    pub name: String,
    /// Physical unit of a sample.
    pub unit: String,
    /// Physical units per raw count.
    pub lsb: f64,
    /// Physical value at raw 0.
    pub zero: f64,
    /// Smallest valid raw sample.
    pub raw_min: i32,
    /// Largest valid raw sample.
    pub raw_max: i32,
    /// The raw count the features measure samples from (cᵢ = sᵢ − offset).
    pub offset: i32,
    /// Samples per window.
    pub window: u16,
    /// Samples per second, if declared (a band may then be given in Hz).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sample_rate: Option<f64>,
    /// Declared sensor noise per sample (physical units), if any.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise: Option<f64>,
    /// Which `window` samples a unit with more samples uses (the sheet's `take`); `None`:
    /// a longer window is refused (a FAULT in a log read for a model), as the device
    /// refuses it. Recorded in the model so that audit and replay cut the same samples.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub take: Option<Take>,
    /// The columns of a log with one row per unit that hold the samples, a pattern with
    /// one `*` for the sample number (the sheet's `columns`, e.g. `vib_*`); `None`: only
    /// the column named as the signal (one row per sample, or a list per unit).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub columns: Option<String>,
}

/// Which samples of a window longer than the signal's a unit uses: the station records
/// more than the model needs (a pre-trigger, a long run), and the device is handed exactly
/// `window` of them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Take {
    /// The first `window` samples.
    First,
    /// The last `window` samples.
    Last,
}

impl Take {
    /// The sheet's word for it.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::First => "first",
            Self::Last => "last",
        }
    }

    /// The `n` samples of `samples` this rule takes (all of them when there are at most `n`).
    pub fn cut(self, samples: &[i32], n: usize) -> &[i32] {
        match self {
            Self::First => &samples[..n.min(samples.len())],
            Self::Last => &samples[samples.len().saturating_sub(n)..],
        }
    }
}

impl SignalScale {
    /// Checks a declared signal. `offset` defaults to the raw count of physical zero, which
    /// must then lie inside the valid range.
    ///
    /// # Errors
    /// A message naming the signal and the field at fault.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        name: &str,
        unit: &str,
        lsb: f64,
        zero: f64,
        raw: (i32, i32),
        window: u16,
        offset: Option<i32>,
        noise: Option<f64>,
    ) -> Result<Self, String> {
        let name_e = name.escape_debug();
        if !(lsb.is_finite() && lsb > 0.0 && zero.is_finite()) {
            return Err(format!(
                "signal '{name_e}': lsb must be a positive number and zero a finite one"
            ));
        }
        // A subnormal lsb turns every sample into a count beyond any range, which would
        // then be blamed on the log.
        if !lsb.is_normal() {
            return Err(format!(
                "signal '{name_e}': lsb {lsb:e} is not a usable count size (below {:e}, a subnormal number); declare the physical size of one raw count",
                f64::MIN_POSITIVE
            ));
        }
        if raw.0 > raw.1 {
            return Err(format!(
                "signal '{name_e}': raw_min ({}) is above raw_max ({}); the valid samples are raw_min..=raw_max",
                raw.0, raw.1
            ));
        }
        if name.is_empty() || name.chars().any(char::is_control) {
            return Err(format!(
                "signal '{name_e}': the name must be a log column's name (not empty, no control characters)"
            ));
        }
        if noise.is_some_and(|n| !(n.is_finite() && n >= 0.0)) {
            return Err(format!(
                "signal '{name_e}': noise must be a non-negative number"
            ));
        }
        let offset = match offset {
            Some(o) => o,
            None => {
                let o = (-zero / lsb).round();
                if !(o >= f64::from(raw.0) && o <= f64::from(raw.1)) {
                    return Err(format!(
                        "signal '{name_e}': physical zero is raw count {o}, outside the valid samples [{}, {}]; declare `offset`, the raw count the features measure samples from (e.g. the middle of the range)",
                        raw.0, raw.1
                    ));
                }
                o as i32
            }
        };
        let s = Self {
            name: name.to_string(),
            unit: unit.to_string(),
            lsb,
            zero,
            raw_min: raw.0,
            raw_max: raw.1,
            offset,
            window,
            sample_rate: None,
            noise,
            take: None,
            columns: None,
        };
        // The shared validation (range, offset, window) by the cheapest feature.
        CheckedFeature::new(s.spec(), Feature::Min)
            .map_err(|e| format!("signal '{name_e}': {e}"))?;
        Ok(s)
    }

    /// The signal with its sample rate (samples per second), if declared.
    ///
    /// # Errors
    /// A message if the rate is not a positive number.
    pub fn with_sample_rate(mut self, rate: Option<f64>) -> Result<Self, String> {
        if rate.is_some_and(|r| !(r.is_finite() && r > 0.0)) {
            return Err(format!(
                "signal '{}': sample_rate must be a positive number of samples per second",
                self.name.escape_debug()
            ));
        }
        self.sample_rate = rate;
        Ok(self)
    }

    /// The signal with the log-reading rules of its sheet entry: `take` for a longer
    /// window, `columns` for a log with one row per unit.
    ///
    /// # Errors
    /// A message if the pattern has no `*`, more than one, or nothing around it.
    pub fn with_layout(
        mut self,
        take: Option<Take>,
        columns: Option<String>,
    ) -> Result<Self, String> {
        if let Some(p) = &columns {
            let stars = p.matches('*').count();
            if stars != 1 || p.len() == 1 || p.chars().any(char::is_control) {
                return Err(format!(
                    "signal '{}': columns = \"{}\" needs exactly one `*` standing for the sample number, and a name around it (e.g. \"{}_*\" for columns {0}_0, {0}_1, …, or \"{0}[*]\")",
                    self.name.escape_debug(),
                    p.escape_debug(),
                    self.name.escape_debug(),
                ));
            }
        }
        self.take = take;
        self.columns = columns;
        Ok(self)
    }

    /// The sample number column `name` holds under the signal's `columns` pattern (the
    /// text around the `*` compared without case, as column names are; the `*` matching
    /// decimal digits), or `None`.
    pub fn sample_of_column(&self, name: &str) -> Option<u64> {
        let (head, tail) = self.columns.as_deref()?.split_once('*')?;
        let n = name.len().checked_sub(head.len() + tail.len())?;
        let (h, rest) = (name.get(..head.len())?, name.get(head.len()..)?);
        let (digits, t) = (rest.get(..n)?, rest.get(n..)?);
        (h.eq_ignore_ascii_case(head)
            && t.eq_ignore_ascii_case(tail)
            && !digits.is_empty()
            && digits.len() <= 9
            && digits.bytes().all(|b| b.is_ascii_digit()))
        .then(|| digits.parse().ok())
        .flatten()
    }

    /// The window as the blob and the shared feature code describe it.
    pub fn spec(&self) -> SignalSpec {
        SignalSpec {
            raw_min: self.raw_min,
            raw_max: self.raw_max,
            offset: self.offset,
            window: self.window,
        }
    }

    /// The raw sample the device reads for a physical value: rounded half away from zero,
    /// saturated to the 32-bit word (out of range or not, as the ADC would report it).
    pub fn raw_sample(&self, physical: f64) -> i32 {
        // `as` saturates; NaN cannot reach here (the reader refuses non-numbers).
        ((physical - self.zero) / self.lsb).round() as i32
    }

    /// The declared noise in whole counts per sample, rounded up.
    pub fn noise_counts(&self) -> Option<u32> {
        self.noise
            .map(|n| (n / self.lsb).ceil().min(f64::from(u32::MAX)) as u32)
    }
}

/// Where a feature channel's reading comes from: one feature of one signal.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FeatureSource {
    /// The signal's name.
    pub signal: String,
    /// The feature, with its Goertzel coefficient for a band.
    pub feature: Feature,
    /// For a band: the frequency in cycles per window, as declared.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cycles: Option<f64>,
}

/// The feature names a sheet uses, in the order of the documentation.
pub const FEATURE_NAMES: &[&str] = &[
    "mean",
    "rms",
    "min",
    "max",
    "peak_to_peak",
    "abs_peak",
    "std_dev",
    "zero_crossings",
    "band",
];

impl FeatureSource {
    /// The source a sheet's `kind` (one of [`FEATURE_NAMES`]) declares; a band needs its
    /// frequency in cycles per window, above 0 and at most half the window (the Nyquist
    /// frequency).
    ///
    /// # Errors
    /// A message naming the kind or the frequency at fault.
    pub fn parse(signal: &SignalScale, kind: &str, cycles: Option<f64>) -> Result<Self, String> {
        let feature = match kind {
            "mean" => Feature::Mean,
            "rms" => Feature::Rms,
            "min" => Feature::Min,
            "max" => Feature::Max,
            "peak_to_peak" => Feature::PeakToPeak,
            "abs_peak" => Feature::AbsPeak,
            "std_dev" => Feature::StdDev,
            "zero_crossings" => Feature::ZeroCrossings,
            "band" => {
                let n = f64::from(signal.window);
                let k = cycles.ok_or_else(|| {
                    "a band needs its frequency: `cycles` (per window) or `frequency` (Hz, with the signal's `sample_rate`)".to_string()
                })?;
                if !(k.is_finite() && k > 0.0 && k <= n / 2.0) {
                    return Err(format!(
                        "band frequency {k} cycles per window is outside (0, {}] (half the {n}-sample window)",
                        n / 2.0
                    ));
                }
                let w = 2.0 * std::f64::consts::PI * k / n;
                // |2cos ω·2²⁹| ≤ 2³⁰: fits an i32.
                Feature::Band {
                    coeff: (2.0 * w.cos() * f64::from(1u32 << 29)).round() as i32,
                }
            }
            other => {
                return Err(format!(
                    "unknown feature kind '{}' (kinds: {})",
                    other.escape_debug(),
                    FEATURE_NAMES.join(", ")
                ));
            }
        };
        if cycles.is_some() && !matches!(feature, Feature::Band { .. }) {
            return Err(format!(
                "`cycles` and `frequency` apply to a band only, not to '{kind}'"
            ));
        }
        Ok(Self {
            signal: signal.name.clone(),
            feature,
            cycles,
        })
    }

    /// The sheet's name of the feature.
    pub fn kind(&self) -> &'static str {
        match self.feature {
            Feature::Mean => "mean",
            Feature::Rms => "rms",
            Feature::Min => "min",
            Feature::Max => "max",
            Feature::PeakToPeak => "peak_to_peak",
            Feature::AbsPeak => "abs_peak",
            Feature::StdDev => "std_dev",
            Feature::ZeroCrossings => "zero_crossings",
            Feature::Band { .. } => "band",
        }
    }

    /// `(lsb, zero, unit)` of the channel: its physical value is zero + lsb·(the integer).
    ///
    /// | feature | lsb | zero | physical value |
    /// |---|---|---|---|
    /// | mean | L/N | Z + L·O | the mean sample |
    /// | min, max | L | Z + L·O | the smallest, largest sample |
    /// | RMS | L/√N | 0 | the RMS of the samples about raw count O |
    /// | standard deviation | L/N | 0 | the population standard deviation |
    /// | peak-to-peak, absolute peak | L | 0 | the spread; the largest distance from O |
    /// | zero crossings | 1 | 0 | crossings of the mean |
    /// | band | 2L/N | 0 | the amplitude of a sinusoid at the band's frequency |
    ///
    /// with the signal's lsb L, zero Z, offset O and window N. The band's factor is 2/N
    /// because a sinusoid of amplitude a puts a·N/2 into its DFT bin.
    pub fn physical(&self, s: &SignalScale) -> (f64, f64, String) {
        let (l, n) = (s.lsb, f64::from(s.window));
        let at_offset = s.zero + s.lsb * f64::from(s.offset);
        let unit = s.unit.clone();
        match self.feature {
            Feature::Mean => (l / n, at_offset, unit),
            Feature::Min | Feature::Max => (l, at_offset, unit),
            Feature::Rms => (l / n.sqrt(), 0.0, unit),
            Feature::StdDev => (l / n, 0.0, unit),
            Feature::PeakToPeak | Feature::AbsPeak => (l, 0.0, unit),
            Feature::ZeroCrossings => (1.0, 0.0, "crossings".into()),
            Feature::Band { .. } => (2.0 * l / n, 0.0, unit),
        }
    }

    /// The feature checked against its signal's window (overflow proved).
    ///
    /// # Errors
    /// The shared validation's refusal, as a message naming the signal.
    pub fn checked(&self, s: &SignalScale) -> Result<CheckedFeature, String> {
        CheckedFeature::new(s.spec(), self.feature).map_err(|e| {
            format!(
                "{} of signal '{}': {e}",
                self.kind(),
                self.signal.escape_debug()
            )
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn adc12() -> SignalScale {
        SignalScale::new("vib", "g", 0.001, -2.048, (0, 4095), 64, None, None).unwrap()
    }

    #[test]
    fn offset_defaults_to_physical_zero() {
        assert_eq!(adc12().offset, 2048);
        let e = SignalScale::new("p", "bar", 0.01, 1.0, (0, 4095), 64, None, None).unwrap_err();
        assert!(e.contains("declare `offset`"), "{e}");
        let s = SignalScale::new("p", "bar", 0.01, 1.0, (0, 4095), 64, Some(2048), None).unwrap();
        assert_eq!(s.offset, 2048);
    }

    /// The band coefficient is round(2cos(2πk/N)·2²⁹): for k = N/4 the cosine is 0 and
    /// for k = N/2 it is −1 (exact values of the cosine).
    #[test]
    fn band_coefficients_at_exact_cosines() {
        let s = adc12();
        let at = |k: f64| FeatureSource::parse(&s, "band", Some(k)).unwrap().feature;
        assert_eq!(at(16.0), Feature::Band { coeff: 0 });
        assert_eq!(at(32.0), Feature::Band { coeff: -(1 << 30) });
        assert!(FeatureSource::parse(&s, "band", Some(33.0)).is_err());
        assert!(FeatureSource::parse(&s, "band", None).is_err());
        assert!(FeatureSource::parse(&s, "rms", Some(3.0)).is_err());
        assert!(FeatureSource::parse(&s, "kurtosis", None).is_err());
        for k in FEATURE_NAMES {
            let c = (*k == "band").then_some(4.0);
            assert_eq!(FeatureSource::parse(&s, k, c).unwrap().kind(), *k);
        }
    }

    /// A sinusoid of amplitude a at bin k has DFT magnitude a·N/2 (the DFT of a sampled
    /// cosine, any signal-processing text); the band channel's conversion 2L/N turns the
    /// integer magnitude back into a in physical units, within the rounding of the samples.
    #[test]
    fn band_channel_reads_a_sinusoids_amplitude() {
        let s = adc12();
        let src = FeatureSource::parse(&s, "band", Some(4.0)).unwrap();
        let f = src.checked(&s).unwrap();
        let a = 0.5; // g
        let w: Vec<i32> = (0..64)
            .map(|i| {
                let t = 2.0 * std::f64::consts::PI * 4.0 * f64::from(i) / 64.0;
                s.raw_sample(a * t.cos())
            })
            .collect();
        let (lsb, zero, unit) = src.physical(&s);
        let amp = zero + lsb * f64::from(f.compute(&w).unwrap());
        assert_eq!(unit, "g");
        assert!((amp - a).abs() < 0.002, "{amp}");
    }
}
