//! The fast path for ordinary records.
//!
//! Most records of a bench log are plain: no quotes, no padding, short decimals. Such a
//! record is split and read in one pass over its bytes: to raw counts with integer
//! arithmetic when every channel's lsb is a power of ten (the usual sheet), or to physical
//! values (the first pass of observed scaling) by one exact division. Anything else makes
//! [`FastPlan::record_at`] return `None` and the record takes the general path, which also
//! words every error. The fast path never decides differently from the general one;
//! [`DecimalChannel`] and [`Decimal::value`] say why.

use super::header::Columns;
use super::options::LogOptions;
use crate::ingest::classes::Classes;
use crate::ingest::scaling::{ChannelScale, power_of_ten};

/// What the fast path does with one column.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Role {
    Skip,
    /// Under a trailing unnamed header column: must be empty.
    Empty,
    Channel(usize),
    Label,
    Unit,
    /// The timestamp column, kept (under `keep_times`) as the unit id is.
    Time,
}

/// A channel whose raw count is the decimal reading shifted by `k` places: lsb = 10⁻ᵏ
/// (the double nearest it, as the sheet parser gives) and zero = 0.
///
/// Why the counts agree with the general path's `round((v − 0) / lsb)` in doubles: for a
/// decimal V with at most k fraction digits, N = V·10ᵏ is an integer. The parsed double is
/// V(1 + δ₁), the lsb 10⁻ᵏ(1 + δ₂), the quotient is rounded once more (1 + δ₃), each
/// |δ| ≤ 2⁻⁵³, so the general path's quotient is N(1 + ε) with |ε| < 4·10⁻¹⁶. The fast path
/// only answers for |N| < 2³¹, where |N·ε| < 10⁻⁶ < ½, so rounding gives N exactly.
///
/// A decimal with more fraction digits than k (a log read with observed scaling, whose lsb
/// is coarser than the log's own digits) is converted as the general path converts it: its
/// double (the same as the standard parser's, see [`Decimal::value`]) through
/// [`ChannelScale::to_raw`]'s result (by [`ChannelScale::to_raw_inv`], which equals it).
#[derive(Clone, Debug)]
struct DecimalChannel {
    k: u32,
    raw_min: i64,
    raw_max: i64,
    scale: ChannelScale,
    /// `scale.inv_lsb()`, for [`ChannelScale::to_raw_inv`].
    inv: f64,
}

/// Most significant digits the fast path reads: 10¹⁵ is below 2⁵³ and below
/// [`MAX_READING`](super::MAX_READING), so no such number is refused as not finite.
const MAX_DIGITS: u32 = 15;

impl DecimalChannel {
    fn for_scale(s: &ChannelScale) -> Option<Self> {
        if s.zero != 0.0 {
            return None;
        }
        let k = (0..=9u32).find(|&k| power_of_ten(-(k as i32)) == s.lsb)?;
        Some(Self {
            k,
            raw_min: i64::from(s.raw_min),
            raw_max: i64::from(s.raw_max),
            scale: s.clone(),
            inv: s.inv_lsb(),
        })
    }

    /// The raw count of a decimal with more fraction digits than k: N·10^-j with j extra
    /// digits, rounded half away from zero, as the general path's double arithmetic rounds
    /// it. That path is off the exact quotient by under 10⁻⁶ (see [`DecimalChannel`]), so
    /// the two round alike unless the dropped digits are within 10⁻⁶ of a half; those
    /// (ties among them) take the double path itself.
    #[inline]
    fn finer(&self, d: &Decimal) -> Option<i32> {
        let p = *POW10.get((d.frac - self.k) as usize)?;
        let (q, r) = (d.mant / p, d.mant % p);
        let off = (2 * u128::from(r)).abs_diff(u128::from(p));
        if off * 1_000_000 <= 2 * u128::from(p) {
            return self.scale.to_raw_inv(d.value()?, self.inv);
        }
        let n = i64::try_from(q + u64::from(2 * r > p)).ok()?;
        let n = if d.neg { -n } else { n };
        if n < self.raw_min || n > self.raw_max {
            return None;
        }
        i32::try_from(n).ok()
    }

    /// The raw count of the number at `pos`, and the position of the first byte after it.
    #[inline]
    fn raw(&self, rec: &[u8], pos: usize, comma: bool) -> Option<(i32, usize)> {
        let d = decimal(rec, pos, comma)?;
        if d.frac > self.k {
            return Some((self.finer(&d)?, d.end));
        }
        let n = i64::try_from(
            d.mant
                .checked_mul(*POW10.get((self.k - d.frac) as usize)?)?,
        )
        .ok()?;
        let n = if d.neg { -n } else { n };
        if n < self.raw_min || n > self.raw_max {
            return None;
        }
        Some((i32::try_from(n).ok()?, d.end))
    }
}

/// A plain decimal as read: sign, all its digits as one integer, how many of them follow
/// the point, and the position of the first byte after it.
struct Decimal {
    neg: bool,
    mant: u64,
    frac: u32,
    end: usize,
}

impl Decimal {
    /// The double nearest the decimal. Exact by the classic fast path (Clinger 1990): the
    /// mantissa (at most 15 digits) and 10^frac (at most 10¹⁵) are exact doubles, so one
    /// correctly rounded division gives the nearest double, as any correct parser does.
    fn value(&self) -> Option<f64> {
        let x = self.mant as f64 / *POW10.get(self.frac as usize)? as f64;
        Some(if self.neg { -x } else { x })
    }
}

/// Reads the number at `pos`: an optional `-`, digits, optionally `.` (or `,` if `comma`)
/// and more digits; at most [`MAX_DIGITS`] digits. `None` for anything else ("5.", ".5",
/// exponents, signs…), which the general path reads.
#[inline]
fn decimal(rec: &[u8], mut pos: usize, comma: bool) -> Option<Decimal> {
    let neg = rec.get(pos) == Some(&b'-');
    if neg {
        pos += 1;
    }
    // Whole digits, then fraction digits: two tight loops instead of one with a branch for
    // the point on every byte.
    let digits = |pos: &mut usize, mant: &mut u64| {
        let from = *pos;
        while let Some(d) = rec
            .get(*pos)
            .map(|b| b.wrapping_sub(b'0'))
            .filter(|&d| d < 10)
        {
            *mant = mant.wrapping_mul(10).wrapping_add(u64::from(d));
            *pos += 1;
        }
        (*pos - from) as u32
    };
    let mut mant = 0u64;
    let whole = digits(&mut pos, &mut mant);
    let mut frac = 0;
    if rec.get(pos) == Some(&b'.') || (comma && rec.get(pos) == Some(&b',')) {
        pos += 1;
        frac = digits(&mut pos, &mut mant);
        if frac == 0 {
            return None;
        }
    }
    if whole + frac > MAX_DIGITS || whole == 0 {
        return None;
    }
    Some(Decimal {
        neg,
        mant,
        frac,
        end: pos,
    })
}

/// 10⁰ … 10¹⁹.
const POW10: [u64; 20] = {
    let mut p = [1u64; 20];
    let mut i = 1;
    while i < 20 {
        p[i] = p[i - 1] * 10;
        i += 1;
    }
    p
};

/// The fast path's plan for one log: each column's role and, when reading raw counts, each
/// channel's conversion.
#[derive(Debug)]
pub(super) struct FastPlan {
    roles: Vec<Role>,
    /// Raw counts per channel; `None` reads physical values.
    channels: Option<Vec<DecimalChannel>>,
    delimiter: u8,
    /// A comma in a number is its decimal mark (never when commas delimit fields).
    comma: bool,
    /// The classes the label cells name.
    classes: Classes,
    max_line_len: usize,
    /// The log has no label column (replay of new units): every label is 0.
    unlabelled: bool,
}

/// Where the fast path puts a record's readings.
pub(super) enum Out<'o> {
    /// Raw counts (the plan was made with scales).
    Raw(&'o mut [i32]),
    /// Physical values (the plan was made without).
    Values(&'o mut [f64]),
}

/// A record the fast path read.
pub(super) struct FastRecord {
    /// +1 GO, −1 NO-GO.
    pub label: i8,
    /// The unit-id field, as a range of the run.
    pub unit: Option<(usize, usize)>,
    /// The timestamp field (under `keep_times`), as a range of the run.
    pub time: Option<(usize, usize)>,
}

impl FastPlan {
    /// The plan for raw counts under `scales`, or for physical values without; `None` if
    /// some channel is not a plain decimal shift (then every record takes the general path).
    /// `decimal_comma` as the general path reads it.
    pub(super) fn new(
        cols: &Columns,
        scales: Option<&[ChannelScale]>,
        delimiter: u8,
        decimal_comma: bool,
        opts: &LogOptions,
    ) -> Option<Self> {
        // A delimiter that can be part of a number would make fields ambiguous.
        if delimiter.is_ascii_digit() || matches!(delimiter, b'.' | b'-' | b'"') {
            return None;
        }
        let channels = match scales {
            Some(scales) => {
                let c = scales
                    .iter()
                    .map(DecimalChannel::for_scale)
                    .collect::<Option<Vec<_>>>()?;
                if c.len() != cols.channels.len() {
                    return None;
                }
                Some(c)
            }
            None => None,
        };
        let mut roles = vec![Role::Skip; cols.names.len()];
        roles.resize(cols.width, Role::Empty);
        if let Some(l) = cols.label {
            *roles.get_mut(l)? = Role::Label;
        }
        if let Some(u) = cols.unit {
            *roles.get_mut(u)? = Role::Unit;
        }
        if let (Some(t), true) = (cols.time, opts.keep_times) {
            *roles.get_mut(t)? = Role::Time;
        }
        for (j, &c) in cols.channels.iter().enumerate() {
            *roles.get_mut(c)? = Role::Channel(j);
        }
        Some(Self {
            roles,
            channels,
            delimiter,
            comma: decimal_comma && delimiter != b',',
            classes: opts.classes(),
            max_line_len: opts.max_line_len,
            unlabelled: cols.label.is_none(),
        })
    }

    /// Reads the record starting at `pos` of `bytes` (which hold no quote) into `out`, and
    /// returns it with the position after its line end, or `None` if the general path must
    /// read it.
    pub(super) fn record_at(
        &self,
        bytes: &[u8],
        pos: usize,
        mut out: Out<'_>,
    ) -> Option<(FastRecord, usize)> {
        let last = self.roles.len().checked_sub(1)?;
        let start_of_record = pos;
        let mut pos = pos;
        // A log without a label column gives every unit label 0 (unknown).
        let mut label = self.unlabelled.then_some(0);
        let mut unit = None;
        let mut time = None;
        for (c, &role) in self.roles.iter().enumerate() {
            let start = pos;
            let mut end;
            if let Role::Channel(j) = role {
                end = match (&mut out, &self.channels) {
                    (Out::Raw(raw), Some(channels)) => {
                        let (value, e) = channels.get(j)?.raw(bytes, pos, self.comma)?;
                        *raw.get_mut(j)? = value;
                        e
                    }
                    (Out::Values(values), None) => {
                        let d = decimal(bytes, pos, self.comma)?;
                        *values.get_mut(j)? = d.value()?;
                        d.end
                    }
                    _ => return None,
                };
                pos = end;
            } else {
                // Fields are short: a plain loop beats a vectorised search here.
                while bytes
                    .get(pos)
                    .is_some_and(|&b| b != self.delimiter && b != b'\n')
                {
                    pos += 1;
                }
                end = pos;
            }
            if c < last {
                if bytes.get(pos) != Some(&self.delimiter) {
                    return None;
                }
                pos += 1;
            } else {
                // The record ends here: at a line feed, a CR LF, or the end of the run.
                match bytes.get(pos) {
                    None => {}
                    Some(b'\n') => pos += 1,
                    Some(b'\r') if matches!(bytes.get(pos + 1), Some(b'\n') | None) => {
                        pos = (pos + 2).min(bytes.len());
                    }
                    Some(_) => return None,
                }
                if !matches!(role, Role::Channel(_)) && end > start && bytes[end - 1] == b'\r' {
                    end -= 1;
                }
            }
            let field = bytes.get(start..end)?;
            match role {
                Role::Label => label = Some(self.classes.label(field)?),
                Role::Unit | Role::Time => {
                    // The general path trims ids and timestamps; only untrimmed ones are
                    // read here.
                    let padded = |b: Option<&u8>| b.is_some_and(u8::is_ascii_whitespace);
                    if padded(field.first()) || padded(field.last()) {
                        return None;
                    }
                    if role == Role::Unit {
                        unit = Some((start, end));
                    } else {
                        time = Some((start, end));
                    }
                }
                Role::Empty => {
                    if !field.trim_ascii().is_empty() {
                        return None;
                    }
                }
                Role::Skip | Role::Channel(_) => {}
            }
        }
        if pos - start_of_record > self.max_line_len {
            return None;
        }
        Some((
            FastRecord {
                label: label?,
                unit,
                time,
            },
            pos,
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn channel(lsb: f64, min: f64, max: f64) -> ChannelScale {
        ChannelScale::new("c", "", min, max, lsb, 0.0).unwrap()
    }

    /// The fast reader's answer for a whole field.
    fn field(c: &DecimalChannel, text: &str) -> Option<i32> {
        c.raw(text.as_bytes(), 0, false)
            .filter(|&(_, end)| end == text.len())
            .map(|(v, _)| v)
    }

    /// The general path's answer: the standard library's correctly rounded decimal parser
    /// (IEEE 754 round-to-nearest) and the sheet's conversion.
    fn general(text: &str, s: &ChannelScale) -> Option<i32> {
        s.to_raw(text.parse::<f64>().ok()?)
    }

    #[test]
    fn plain_decimals_take_the_fast_path() {
        let s = channel(0.001, 0.0, 1000.0);
        let c = DecimalChannel::for_scale(&s).unwrap();
        for (text, want) in [
            ("888.790", 888_790),
            ("0", 0),
            ("1000", 1_000_000),
            ("5.1", 5_100),
        ] {
            assert_eq!(field(&c, text), Some(want), "{text}");
            assert_eq!(general(text, &s), Some(want), "{text}");
        }
        // More fraction digits than the lsb has: the general path's own conversion of the
        // same double (0.0005 / 0.001 rounds half away from zero to 1; 999.9994 to 999 999).
        for text in ["0.0005", "0.00049", "999.9994", "12.3455", "0.0004999999"] {
            assert_eq!(field(&c, text), general(text, &s), "{text}");
        }
        assert_eq!(field(&c, "0.0005"), Some(1));
        // Exponents, padding, out of range: general path.
        for text in [
            "1e3",
            " 5",
            "5 ",
            "+5",
            "5.",
            ".5",
            "1000.001",
            "-0.001",
            "--1",
            "1000.0005",
        ] {
            assert_eq!(field(&c, text), None, "{text}");
        }
        // A channel with a zero point or an lsb that is not a power of ten has no fast path.
        assert!(
            DecimalChannel::for_scale(&ChannelScale::new("c", "", 0.0, 1.0, 0.002, 0.0).unwrap())
                .is_none()
        );
        assert!(
            DecimalChannel::for_scale(&ChannelScale::new("c", "", 0.0, 1.0, 0.001, 0.5).unwrap())
                .is_none()
        );
    }

    #[test]
    fn observed_ranges_take_the_fast_path() {
        for (lo, hi) in [
            (0.0, 1000.0),
            (-5.0, 5.0),
            (0.001, 0.002),
            (20.0, 80.0),
            (1.0, 2.0),
        ] {
            let s = ChannelScale::observed("c", lo, hi).unwrap();
            assert!(
                DecimalChannel::for_scale(&s).is_some(),
                "[{lo}, {hi}]: lsb {}",
                s.lsb
            );
        }
    }

    proptest! {
        /// Decimals read as values are the nearest doubles, as the standard library's
        /// correctly rounded parser (IEEE 754 round-to-nearest) gives them, bit for bit.
        #[test]
        fn values_are_the_nearest_doubles(
            neg in any::<bool>(),
            whole in "[0-9]{1,15}",
            frac in "[0-9]{0,14}",
        ) {
            let text = if frac.is_empty() {
                format!("{}{whole}", if neg { "-" } else { "" })
            } else {
                format!("{}{whole}.{frac}", if neg { "-" } else { "" })
            };
            let d = decimal(text.as_bytes(), 0, false);
            if whole.len() + frac.len() <= MAX_DIGITS as usize {
                let d = d.expect("a plain decimal of at most 15 digits is read");
                prop_assert_eq!(d.end, text.len());
                let want: f64 = text.parse().unwrap();
                prop_assert_eq!(d.value().map(f64::to_bits), Some(want.to_bits()), "{}", text);
            } else {
                prop_assert!(d.is_none(), "{} has too many digits", text);
            }
        }

        /// Decimals with more digits than the lsb whose dropped digits are a half, or all
        /// but a half (…4999…, …5000…1): where exact rounding and the general path's double
        /// arithmetic could part, the fast path still answers as the general path does.
        #[test]
        fn finer_decimals_round_as_the_general_path_at_halves(
            neg in any::<bool>(),
            whole in "[1-9][0-9]{0,5}",
            kept in "[0-9]{0,2}",
            tail in prop::sample::select(vec!["5", "50", "500000", "49", "4999999", "5000001", "51", "4", "6"]),
        ) {
            let k = kept.len() as u32;
            let lsb = power_of_ten(-(k as i32));
            let s = channel(lsb, -1e6 - 1.0, 1e6 + 1.0);
            let c = DecimalChannel::for_scale(&s).unwrap();
            let text = format!("{}{whole}.{kept}{tail}", if neg { "-" } else { "" });
            if whole.len() + kept.len() + tail.len() <= MAX_DIGITS as usize {
                prop_assert_eq!(field(&c, &text), general(&text, &s), "{}", text);
            }
        }

        /// Whenever the fast path answers, it answers as the general path does.
        #[test]
        fn fast_path_agrees_with_the_general_path(
            neg in any::<bool>(),
            whole in "[0-9]{0,12}",
            point in any::<bool>(),
            frac in "[0-9]{0,9}",
            k in 0u32..=9,
            span in 1u32..1_000_000_000,
        ) {
            let lsb = power_of_ten(-(k as i32));
            let half = f64::from(span) * lsb;
            let s = channel(lsb, -half, half);
            let c = DecimalChannel::for_scale(&s).unwrap();
            let text = format!("{}{whole}{}{}", if neg { "-" } else { "" }, if point { "." } else { "" }, if point { &frac } else { "" });
            let fast = field(&c, &text);
            if fast.is_some() {
                prop_assert_eq!(fast, general(&text, &s), "{}", text);
            }
            // Short plain decimals inside the range are always taken.
            let plain = !whole.is_empty() && (!point || (!frac.is_empty() && frac.len() as u32 <= k))
                && whole.len() + frac.len() <= 15;
            if plain && general(&text, &s).is_some() {
                prop_assert!(fast.is_some(), "{} not taken", text);
            }
        }
    }
}
