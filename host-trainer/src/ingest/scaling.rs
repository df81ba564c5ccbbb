//! Channel scaling: physical reading → raw integer → scaled value in [-1, 1].
//!
//! The device reads raw integers (ADC counts or sensor units). Per channel,
//! `raw = round((physical - zero) / lsb)`. The float trainer sees
//! `x = (raw - offset) / half`, so every channel's valid range lands in
//! [-1, 1] whatever its unit. The fixed-point conversion stored in the blob
//! is `x_q = round((raw - offset) · multiplier / 2^shift)`, with
//! `multiplier / 2^shift ≈ (2^(bits-1) - 1) / half`; the quantiser accounts
//! for the small ratio between the two exactly.
//!
//! Where the ranges come from: a channel sheet ([`ChannelSheet`](super::sheet::ChannelSheet),
//! read in `sheet.rs`) declares them; without one, the observed range with 50 % of its
//! span added on each side is used ([`ChannelScale::observed`]).

use serde::{Deserialize, Serialize};

use crate::ingest::names::short_name;
use crate::ingest::signal_scale::{FeatureSource, SignalScale};

/// Share of the observed span added on each side of a channel without a sheet entry. Wide on
/// purpose: the device shows FAULT for a reading outside the valid range, and real units
/// outside a few hundred training units' range are common (heavy-tailed channels); a sheet
/// with the sensor's real range is better still.
pub const OBSERVED_HEADROOM: f64 = 0.5;

/// One channel's scaling, as stored in the float model.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChannelScale {
    /// The channel's name in the model, the blob and every report; also its column in the
    /// bench log unless [`column`](Self::column) names another.
    pub name: String,
    /// The bench log's column, when it is not `name` (a channel sheet's `column`: a name
    /// the device keeps is at most [`NAME_CAPACITY`](shared_model::NAME_CAPACITY) bytes, a
    /// column's need not be). Absent from model files that do not need it, so theirs keep
    /// their bytes.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub column: Option<String>,
    /// Physical unit, for reports.
    pub unit: String,
    /// Smallest valid physical reading.
    pub min: f64,
    /// Largest valid physical reading.
    pub max: f64,
    /// Physical units per raw count.
    pub lsb: f64,
    /// Physical value at raw 0.
    pub zero: f64,
    /// Declared noise (physical units), if any.
    pub noise: Option<f64>,
    /// Raw value of `min`.
    pub raw_min: i32,
    /// Raw value of `max`.
    pub raw_max: i32,
    /// Raw value that scales to 0.
    pub offset: i32,
    /// Raw counts that scale to 1.0.
    pub half: i64,
    /// For a feature channel, the signal and feature it is computed from; `None` for a
    /// reading.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source: Option<FeatureSource>,
}

impl ChannelScale {
    /// Builds the scaling from a physical range and raw conversion.
    ///
    /// # Errors
    /// A message if the range is empty, not finite, or does not fit 32-bit raw values.
    pub fn new(
        name: &str,
        unit: &str,
        min: f64,
        max: f64,
        lsb: f64,
        zero: f64,
    ) -> Result<Self, String> {
        if !(min.is_finite() && max.is_finite() && lsb.is_finite() && zero.is_finite()) {
            return Err(format!(
                "channel '{name}': min, max, lsb and zero must be finite numbers"
            ));
        }
        if min >= max {
            return Err(format!(
                "channel '{name}': min ({min}) must be below max ({max})"
            ));
        }
        if lsb <= 0.0 {
            return Err(format!("channel '{name}': lsb must be positive, got {lsb}"));
        }
        if !lsb.is_normal() {
            return Err(format!(
                "channel '{name}': lsb {lsb:e} is not a usable count size (below {:e}, a subnormal number); declare the physical size of one raw count",
                f64::MIN_POSITIVE
            ));
        }
        if name.len() > shared_model::NAME_CAPACITY {
            return Err(format!(
                "channel '{}': the name is {} bytes; the device keeps at most {}: name the channel in a channel sheet and read the log column by `column`, e.g. [[channel]] name = \"{}\", column = \"{}\" (`linegate sheet LOG -o channels.toml` writes such a sheet)",
                name.escape_debug(),
                name.len(),
                shared_model::NAME_CAPACITY,
                short_name(name, shared_model::NAME_CAPACITY).escape_debug(),
                name.escape_debug()
            ));
        }
        if name.chars().any(char::is_control) {
            return Err(format!(
                "channel '{}': control characters are not allowed in a channel name",
                name.escape_debug()
            ));
        }
        let to_raw = |v: f64| round_half_away((v - zero) / lsb);
        let (lo, hi) = (to_raw(min), to_raw(max));
        let limit = f64::from(i32::MAX / 2);
        if lo.abs() > limit || hi.abs() > limit {
            return Err(format!(
                "channel '{name}': range [{min}, {max}] at lsb {lsb} needs raw values beyond ±2^30; declare the channel in a channel sheet with a coarser lsb, or a zero near the readings"
            ));
        }
        if lo == hi {
            return Err(format!(
                "channel '{name}': range [{min}, {max}] is narrower than one lsb ({lsb})"
            ));
        }
        let (raw_min, raw_max) = (lo as i32, hi as i32);
        let offset = raw_min + (raw_max - raw_min) / 2;
        let half = i64::from(raw_max - offset)
            .max(i64::from(offset - raw_min))
            .max(1);
        Ok(Self {
            name: name.to_string(),
            column: None,
            unit: unit.to_string(),
            min,
            max,
            lsb,
            zero,
            noise: None,
            raw_min,
            raw_max,
            offset,
            half,
            source: None,
        })
    }

    /// The channel of a feature of `signal`: its valid raw range is the feature's proved
    /// range ([`CheckedFeature::range`](shared_model::features::CheckedFeature::range)), so
    /// no window of valid samples is refused, and its conversion is
    /// [`FeatureSource::physical`]. Declared sample noise becomes the feature's noise
    /// bound ([`CheckedFeature::noise_bound`](shared_model::features::CheckedFeature::noise_bound)) in physical units.
    ///
    /// # Errors
    /// A message if the feature could overflow, is constant for this window (its range
    /// is one value), or its range does not fit the model's raw words.
    pub fn of_feature(
        name: &str,
        signal: &SignalScale,
        source: FeatureSource,
    ) -> Result<Self, String> {
        let checked = source.checked(signal)?;
        let (lo, hi) = checked.range();
        let (lsb, zero, unit) = source.physical(signal);
        let what = format!(
            "feature channel '{}' ({} of signal '{}')",
            name.escape_debug(),
            source.kind(),
            signal.name.escape_debug()
        );
        if lo == hi {
            return Err(format!(
                "{what}: the feature has one possible value for a {}-sample window; it cannot tell units apart",
                signal.window
            ));
        }
        let limit = i32::MAX / 2;
        if lo < -limit || hi > limit {
            return Err(format!(
                "{what}: the feature's range [{lo}, {hi}] is beyond ±2^30 counts; shorten the window or narrow the signal's raw range"
            ));
        }
        let (min, max) = (zero + lsb * f64::from(lo), zero + lsb * f64::from(hi));
        let mut c = Self::new(name, &unit, min, max, lsb, zero)?;
        // The physical ends must round back to the integer range exactly.
        if (c.raw_min, c.raw_max) != (lo, hi) {
            return Err(format!(
                "{what}: its range [{lo}, {hi}] does not survive the conversion to physical units and back; report this with the sheet"
            ));
        }
        c.noise = signal
            .noise_counts()
            .map(|d| checked.noise_bound(d) as f64 * lsb);
        c.source = Some(source);
        Ok(c)
    }

    /// The observed range with [`OBSERVED_HEADROOM`] of its span added on each side, and a
    /// decimal lsb giving at least 20 000 counts.
    ///
    /// # Errors
    /// A message if the range is degenerate.
    pub fn observed(name: &str, lo: f64, hi: f64) -> Result<Self, String> {
        let span = hi - lo;
        let (min, max) = (lo - OBSERVED_HEADROOM * span, hi + OBSERVED_HEADROOM * span);
        // Saturating conversion: a degenerate span gives 0 or ∞, refused below.
        let lsb = power_of_ten(((max - min) / 20_000.0).log10().floor() as i32);
        Self::new(name, "", min, max, lsb, 0.0)
    }

    /// The bench log's column the channel is read from: [`column`](Self::column), else the
    /// name.
    pub fn log_column(&self) -> &str {
        self.column.as_deref().unwrap_or(&self.name)
    }

    /// The raw reading for a physical value, or `None` if it is outside the valid range.
    pub fn to_raw(&self, physical: f64) -> Option<i32> {
        let r = round_half_away((physical - self.zero) / self.lsb);
        if r >= f64::from(self.raw_min) && r <= f64::from(self.raw_max) {
            Some(r as i32)
        } else {
            None
        }
    }

    /// [`to_raw`](Self::to_raw) of every value into `raw` (cleared first), with the
    /// indices of the values it refuses (out of range, or not a number) in `refused`.
    /// One branch-free pass that the compiler vectorises does the usual case
    /// (`usual_raw`, below), then the few values near a half-way point or out of the word take
    /// `to_raw` itself.
    pub fn to_raw_slice(&self, values: &[f64], raw: &mut Vec<i32>, refused: &mut Vec<u32>) {
        let inv = self.inv_lsb();
        raw.clear();
        raw.extend(values.iter().map(|&v| self.usual_raw(v, inv)));
        for (i, (r, &v)) in raw.iter_mut().zip(values).enumerate() {
            if *r == i32::MIN {
                match self.to_raw(v) {
                    Some(x) => *r = x,
                    None => refused.push(i as u32),
                }
            }
        }
    }

    /// 1/lsb, as [`to_raw_inv`](Self::to_raw_inv) wants it.
    pub fn inv_lsb(&self) -> f64 {
        1.0 / self.lsb
    }

    /// [`to_raw`](Self::to_raw) with the same result, by one multiply with `inv` (which must
    /// be [`inv_lsb`](Self::inv_lsb)) instead of a division where that cannot change the
    /// rounding (`usual_raw`, below); the rest take the division.
    #[inline]
    pub fn to_raw_inv(&self, physical: f64, inv: f64) -> Option<i32> {
        match self.usual_raw(physical, inv) {
            i32::MIN => self.to_raw(physical),
            n => Some(n),
        }
    }

    /// The raw count of `physical` computed as (physical − zero)·inv, or `i32::MIN` (never a
    /// valid count: `new` keeps counts within ±2^30) where that could differ from
    /// [`to_raw`](Self::to_raw)'s division or the count is out of range.
    ///
    /// Why it equals the division elsewhere: below 2^31 in magnitude the product is within
    /// 3·2^-53 of the quotient relatively, under 2^-20 absolutely, so only a value within
    /// 2^-12 of a half-way point could round otherwise. Rounding is by the magic number
    /// 1.5·2^52: below 2^31, q + M is exact to the unit, so (q + M) − M is q rounded to
    /// nearest (ties to even, but ties are among the values left out) and the integer sits in
    /// the low bits of q + M. No branch and no float-to-int conversion, so a loop over it
    /// vectorises.
    #[inline(always)]
    fn usual_raw(&self, physical: f64, inv: f64) -> i32 {
        usual_raw(
            physical,
            self.zero,
            inv,
            f64::from(self.raw_min),
            f64::from(self.raw_max),
        )
    }

    /// [`to_raw`](Self::to_raw) of rows of readings, row-major with one column per scale in
    /// `scales`, into `out` (the same length); `None` if any reading is refused. The usual
    /// case runs as one branch-free pass per row over arrays of the columns' constants, which
    /// the compiler vectorises across the columns (`usual_raw`'s arithmetic, one column per
    /// lane); the few readings near a half-way point take `to_raw` itself.
    pub fn to_raw_rows(scales: &[Self], values: &[f64], out: &mut [i32]) -> Option<()> {
        let d = scales.len();
        if d == 0 || values.len() != out.len() {
            return (values.is_empty() && out.is_empty()).then_some(());
        }
        let zero: Vec<f64> = scales.iter().map(|s| s.zero).collect();
        let inv: Vec<f64> = scales.iter().map(Self::inv_lsb).collect();
        let lo: Vec<f64> = scales.iter().map(|s| f64::from(s.raw_min)).collect();
        let hi: Vec<f64> = scales.iter().map(|s| f64::from(s.raw_max)).collect();
        for (o, v) in out.chunks_exact_mut(d).zip(values.chunks_exact(d)) {
            for (((((o, &v), &z), &inv), &lo), &hi) in
                o.iter_mut().zip(v).zip(&zero).zip(&inv).zip(&lo).zip(&hi)
            {
                *o = usual_raw(v, z, inv, lo, hi);
            }
            for ((o, &v), s) in o.iter_mut().zip(v).zip(scales) {
                if *o == i32::MIN {
                    *o = s.to_raw(v)?;
                }
            }
        }
        Some(())
    }

    /// The raw count a device reads for a physical value, in range or not: rounded as
    /// [`to_raw`](Self::to_raw) rounds, saturated to the 32-bit raw word.
    ///
    /// ```
    /// let s = host_trainer::ingest::scaling::ChannelScale::new("i", "mA", 0.0, 10.0, 0.5, 0.0).unwrap();
    /// assert_eq!(s.to_raw(12.0), None);
    /// assert_eq!(s.raw_reading(12.0), 24);
    /// ```
    pub fn raw_reading(&self, physical: f64) -> i32 {
        // `as` saturates, and NaN cannot reach here (the reader refuses it as not finite).
        round_half_away((physical - self.zero) / self.lsb) as i32
    }

    /// The physical value of a raw reading.
    pub fn physical(&self, raw: i32) -> f64 {
        self.zero + f64::from(raw) * self.lsb
    }

    /// The float trainer's input for a raw reading, in [-1, 1] for valid readings.
    #[inline]
    pub fn scaled(&self, raw: i32) -> f64 {
        (i64::from(raw) - i64::from(self.offset)) as f64 / self.half as f64
    }

    /// The fixed-point conversion for an input word of `input_bits`: (multiplier, shift).
    ///
    /// Where it can, a narrow one: the product (raw − offset)·multiplier stays below 2^31
    /// (shift at most 31) with a multiplier of at least 2^15, so the device converts in
    /// 32-bit arithmetic (`CheckedModel::is_narrow`) at no cost to the rounding bound: the
    /// ideal weights divide by the conversion's exact ratio κ, whatever its precision, and
    /// the scaled input keeps its full word. Otherwise (ranges wider than about 2^16
    /// counts) the largest shift whose multiplier fits an i32, the ratio as exact as the
    /// blob allows.
    pub fn conversion(&self, input_bits: u8) -> (i32, u8) {
        let limit = (1i128 << (input_bits - 1)) - 1;
        let half = i128::from(self.half);
        for shift in (0..=31u8).rev() {
            let mul = (limit << shift) / half;
            if mul >= 1 << 15 && mul * half < 1i128 << 31 {
                return (mul as i32, shift);
            }
        }
        for shift in (0..=46u8).rev() {
            let mul = (limit << shift) / half;
            if mul >= 1 && mul <= i128::from(i32::MAX) && mul * half < (1i128 << 62) {
                return (mul as i32, shift);
            }
        }
        (1, 0)
    }
}

/// [`ChannelScale::usual_raw`]'s arithmetic with the channel's constants passed in (zero,
/// 1/lsb, the valid raw range as doubles), so that a loop over columns whose constants sit
/// in arrays vectorises as well as a loop over one channel's values.
#[inline(always)]
fn usual_raw(physical: f64, zero: f64, inv: f64, lo: f64, hi: f64) -> i32 {
    const M: f64 = 6_755_399_441_055_744.0;
    let q = (physical - zero) * inv;
    let s = q + M;
    let r = s - M;
    let far_from_half = 0.5 - (q - r).abs() > 1.0 / 4096.0;
    let usual = q.abs() < 2_147_483_648.0 && far_from_half && r >= lo && r <= hi;
    let n = (s.to_bits() as i64).wrapping_sub(M.to_bits() as i64) as i32;
    if usual { n } else { i32::MIN }
}

/// 10^e as the nearest double, as a sheet's `1e-3` reads (which the log reader's integer
/// fast path recognises); `powf` need not round correctly.
pub(crate) fn power_of_ten(e: i32) -> f64 {
    format!("1e{e}").parse().unwrap_or(f64::NAN)
}

/// `x.round()` (halves away from zero) up to the sign of a zero result, without the call to
/// the C library's `round` that `f64::round` makes on x86-64's baseline (no SSE4.1): every
/// reading of a log passes through here. Below 2^52 a double's fraction `x - trunc(x)` is
/// exact, so comparing it with ±0.5 rounds exactly as `round` does; larger magnitudes, NaN
/// and infinities take `round` itself.
#[inline]
fn round_half_away(x: f64) -> f64 {
    if x.is_nan() || x.abs() >= 4_503_599_627_370_496.0 {
        return x.round();
    }
    // `as` truncates towards zero; the magnitude is below 2^52, so the integer is exact.
    let t = x as i64 as f64;
    let frac = x - t;
    if frac >= 0.5 {
        t + 1.0
    } else if frac <= -0.5 {
        t - 1.0
    } else {
        t
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The reference is the standard library's `f64::round` (IEEE 754 roundToIntegralTiesAway).
    #[test]
    fn round_half_away_is_round() {
        let edges = [
            0.5,
            1.5,
            2.5,
            -0.5,
            -2.5,
            0.49999999999999994,
            -0.49999999999999994,
            4_503_599_627_370_495.5,
            4_503_599_627_370_496.0,
            -4_503_599_627_370_495.5,
            9.3e18,
            -9.3e18,
            1e300,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::MIN_POSITIVE,
            0.0,
            -0.0,
        ];
        for x in edges {
            assert_eq!(round_half_away(x), x.round(), "{x}");
        }
        assert!(round_half_away(f64::NAN).is_nan());
        let mut rng = <rand_chacha::ChaCha8Rng as rand::SeedableRng>::seed_from_u64(7);
        for _ in 0..1_000_000 {
            let x = f64::from_bits(rand::Rng::r#gen::<u64>(&mut rng));
            let y = rand::Rng::gen_range(&mut rng, -1e7..1e7) / 8.0;
            for v in [x, y] {
                let (a, b) = (round_half_away(v), v.round());
                assert!(a == b || (a.is_nan() && b.is_nan()), "{v}: {a} against {b}");
            }
        }
    }

    #[test]
    fn scaled_range_is_unit_interval() {
        let c = ChannelScale::new("i", "mA", 150.0, 900.0, 0.1, 0.0).unwrap();
        assert_eq!(
            (c.raw_min, c.raw_max, c.offset, c.half),
            (1500, 9000, 5250, 3750)
        );
        assert_eq!(c.scaled(c.raw_min), -1.0);
        assert_eq!(c.scaled(c.raw_max), 1.0);
        assert_eq!(c.to_raw(900.04), Some(9000));
        assert_eq!(c.to_raw(900.06), None);
    }

    proptest::proptest! {
        /// The batch conversion equals the one-value one on any value, near half-way
        /// points and out of range included.
        #[test]
        fn batch_raw_equals_single(
            lsb_exp in -6i32..2,
            zero in -10.0f64..10.0,
            raws in proptest::collection::vec(-3_000_000i64..3_000_000, 1..64),
            jitter in proptest::collection::vec(-1.0f64..1.0, 64),
        ) {
            let lsb = power_of_ten(lsb_exp);
            let c = ChannelScale::new("c", "", zero - 1e6 * lsb, zero + 1e6 * lsb, lsb, zero).unwrap();
            // Values on, beside and half-way between raw counts, and a few far off.
            let values: Vec<f64> = raws
                .iter()
                .zip(&jitter)
                .map(|(&r, &j)| zero + (r as f64 + [0.0, 0.5, -0.5, j][(r & 3) as usize]) * lsb)
                .chain([f64::NAN, f64::INFINITY, 1e300, -1e300])
                .collect();
            let inv = c.inv_lsb();
            let batch: Vec<Option<i32>> = values.iter().map(|&v| c.to_raw_inv(v, inv)).collect();
            let single: Vec<Option<i32>> = values.iter().map(|&v| c.to_raw(v)).collect();
            proptest::prop_assert_eq!(&batch, &single);
            let (mut raw, mut refused) = (Vec::new(), Vec::new());
            c.to_raw_slice(&values, &mut raw, &mut refused);
            let sliced: Vec<Option<i32>> = raw
                .iter()
                .enumerate()
                .map(|(i, &r)| (!refused.contains(&(i as u32))).then_some(r))
                .collect();
            proptest::prop_assert_eq!(&sliced, &single);
            // Row by row beside a second column with another scale: every row whose
            // readings are all accepted converts as `to_raw` does, and a row with a refused
            // reading refuses the batch.
            let other = ChannelScale::new("o", "", -5.0, 5.0, 0.01, 0.0).unwrap();
            let scales = [c.clone(), other.clone()];
            for (k, &v) in values.iter().enumerate() {
                let w = -4.995 + 0.37 * k as f64;
                let want = c.to_raw(v).zip(other.to_raw(w));
                let mut out = [0i32; 2];
                let got = ChannelScale::to_raw_rows(&scales, &[v, w], &mut out).map(|()| (out[0], out[1]));
                proptest::prop_assert_eq!(got, want);
            }
        }
    }

    #[test]
    fn conversion_keeps_the_range_inside_the_input_word() {
        for (lo, hi, lsb) in [
            (0.0, 1.0, 1e-6),
            (-5.0, 5.0, 0.001),
            (0.0, 4095.0, 1.0),
            (0.0, 3.0, 1.0),
        ] {
            let c = ChannelScale::new("c", "", lo, hi, lsb, 0.0).unwrap();
            for bits in [8u8, 16] {
                let (mul, shift) = c.conversion(bits);
                let x = |r: i32| {
                    let p = (i128::from(r) - i128::from(c.offset)) * i128::from(mul);
                    if shift == 0 {
                        p
                    } else {
                        (p + (1 << (shift - 1))) >> shift
                    }
                };
                let limit = (1i128 << (bits - 1)) - 1;
                assert!(
                    x(c.raw_max) <= limit && x(c.raw_min) >= -limit,
                    "{lo}..{hi} at {bits} bits"
                );
                assert!(x(c.raw_max) >= limit - 1, "range uses the word");
                // ADC-sized ranges convert in 32 bits on the device.
                let span = (i128::from(c.raw_max) - i128::from(c.offset))
                    .max(i128::from(c.offset) - i128::from(c.raw_min));
                assert_eq!(
                    span * i128::from(mul) < 1 << 31 && shift <= 31,
                    span < 1 << 16,
                    "{lo}..{hi}: narrow exactly when the range allows"
                );
            }
        }
    }
}
