//! Exact binomial confidence bounds (Clopper–Pearson) for the audit's rates.
//!
//! A log of `n` units in which `k` went wrong supports a true rate anywhere in an interval,
//! not exactly `k / n`: with 171 NO-GO units and no false GO, a false-GO rate of 1.7 % is
//! still consistent at 95 % confidence. Clopper and Pearson's interval (Biometrika 26,
//! 1934) inverts the binomial tail exactly: its ends are beta quantiles,
//!
//! ```text
//! low  = B⁻¹(α/2;   k,     n − k + 1)      (0 when k = 0)
//! high = B⁻¹(1 − α/2; k + 1, n − k)        (1 when k = n)
//! upper, one-sided at confidence c:  B⁻¹(c; k + 1, n − k)
//! ```
//!
//! with α = 1 − c and B⁻¹ the inverse of the regularised incomplete beta function
//! I_x(a, b). The one-sided upper bound is what a gate on "a rate at a confidence level"
//! compares: with k = 0 it is 1 − (1 − c)^(1/n), about 3/n at 95 % (the rule of three).
//! I_x comes from `statrs` and is inverted here by bisection on x, to the last bit.

use serde::Serialize;

/// The confidence the audit states its intervals at unless a gate asks for another.
pub const DEFAULT_CONFIDENCE: f64 = 0.95;

/// A count out of a number of units, with its exact bounds.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, serde::Deserialize)]
pub struct Rate {
    /// Units that went this way.
    pub count: u64,
    /// Units it is counted among (the rate's denominator).
    pub of: u64,
    /// `count / of`; 0 when `of` is 0.
    pub rate: f64,
    /// The confidence of the bounds below (0.95 is 95 %).
    pub confidence: f64,
    /// Two-sided Clopper–Pearson interval, lower end.
    pub low: f64,
    /// Two-sided Clopper–Pearson interval, upper end.
    pub high: f64,
    /// One-sided Clopper–Pearson upper bound at `confidence`.
    pub upper: f64,
}

impl Rate {
    /// `count` of `of` units with its bounds at `confidence` (in (0, 1)). With no units
    /// nothing is known: the interval is [0, 1].
    ///
    /// ```
    /// use host_trainer::confidence::Rate;
    /// let r = Rate::new(0, 171, 0.95);
    /// // The rule of three: no failure in 171 supports a rate below about 3/171.
    /// assert!((r.upper - (1.0 - 0.05f64.powf(1.0 / 171.0))).abs() < 1e-12);
    /// assert_eq!((r.low, r.rate), (0.0, 0.0));
    /// ```
    pub fn new(count: u64, of: u64, confidence: f64) -> Self {
        let count = count.min(of);
        let alpha = 1.0 - confidence;
        let (k, n) = (count as f64, of as f64);
        let low = if count == 0 {
            0.0
        } else {
            beta_quantile(alpha / 2.0, k, n - k + 1.0)
        };
        let (high, upper) = if count == of {
            (1.0, 1.0)
        } else {
            (
                beta_quantile(1.0 - alpha / 2.0, k + 1.0, n - k),
                beta_quantile(confidence, k + 1.0, n - k),
            )
        };
        Self {
            count,
            of,
            rate: if of == 0 { 0.0 } else { k / n },
            confidence,
            low,
            high,
            upper,
        }
    }
}

impl Default for Rate {
    /// Nothing counted among no units: the interval is all of [0, 1].
    fn default() -> Self {
        Self::new(0, 0, DEFAULT_CONFIDENCE)
    }
}

/// A percentage for the report: two decimals, or two significant digits below 1 %, so a
/// bound of 0.0017 % does not print as 0.00 %.
pub fn percent(v: f64) -> String {
    let p = v * 100.0;
    if p == 0.0 || p >= 1.0 {
        format!("{p:.2}")
    } else {
        let digits = (1 - p.log10().floor() as i32).clamp(2, 12) as usize;
        format!("{p:.digits$}")
    }
}

/// A rate as the report shows it: "7 of 171 NO-GO units (4.09 %; 95 % interval
/// 1.66–8.25 %, upper bound 7.51 %)".
pub fn rate_text(r: &Rate, among: &str) -> String {
    format!(
        "{} of {} {among} ({} %; {} % interval {}–{} %, upper bound {} %)",
        r.count,
        r.of,
        percent(r.rate),
        r.confidence * 100.0,
        percent(r.low),
        percent(r.high),
        percent(r.upper)
    )
}

/// The fewest units a log must have for a gate "upper bound at `confidence` ≤ `rate`" to
/// be passable at all, that is with no unit going wrong: the least n with
/// 1 − (1 − c)^(1/n) ≤ rate, i.e. n ≥ ln(1 − c) / ln(1 − rate). `None` for a rate of 0,
/// which no finite log can show.
///
/// ```
/// use host_trainer::confidence::units_needed;
/// // 1 % at 95 %: 299 units (the rule of three says about 300).
/// assert_eq!(units_needed(0.01, 0.95), Some(299));
/// assert_eq!(units_needed(0.0, 0.95), None);
/// ```
pub fn units_needed(rate: f64, confidence: f64) -> Option<u64> {
    if rate <= 0.0 {
        return None;
    }
    if rate >= 1.0 {
        return Some(0);
    }
    let n = ((1.0 - confidence).ln() / (-rate).ln_1p()).ceil().max(0.0) as u64;
    // The logarithms can round across an integer: settle on the exact least n.
    let passes = |n: u64| n > 0 && Rate::new(0, n, confidence).upper <= rate;
    let mut n = n.max(1);
    while n > 1 && passes(n - 1) {
        n -= 1;
    }
    while !passes(n) {
        n += 1;
    }
    Some(n)
}

/// x with I_x(a, b) = p, by bisection: I_x is increasing in x, so halving [0, 1] until
/// the two ends are neighbouring doubles gives the quantile to the last bit (at most
/// ~1,100 halvings, since the midpoint of two doubles is always representable until then).
fn beta_quantile(p: f64, a: f64, b: f64) -> f64 {
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    loop {
        let mid = lo + (hi - lo) / 2.0;
        if mid <= lo || mid >= hi {
            return hi;
        }
        // A failure to converge (extreme parameters) is treated as "below p", which can only
        // widen the interval: the bound stays a bound.
        let v = statrs::function::beta::checked_beta_reg(a, b, mid).unwrap_or(0.0);
        if v < p {
            lo = mid;
        } else {
            hi = mid;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zero_failures_give_the_closed_form() {
        // k = 0: the one-sided upper bound is 1 − α^(1/n), the two-sided 1 − (α/2)^(1/n).
        // statrs's I_x is good to a few 1e-12 relative at b = 10⁶: far below any rate's meaning.
        for n in [1u64, 2, 10, 171, 1000, 1_000_000] {
            let r = Rate::new(0, n, 0.95);
            // −expm1(ln α / n): 1 − α^(1/n) without the cancellation for large n.
            let up = -(0.05f64.ln() / n as f64).exp_m1();
            let hi = -(0.025f64.ln() / n as f64).exp_m1();
            assert!((r.upper - up).abs() <= 1e-9 * up, "{n}: {} {up}", r.upper);
            assert!((r.high - hi).abs() <= 1e-9 * hi, "{n}: {} {hi}", r.high);
        }
    }

    #[test]
    fn every_count_is_symmetric_and_ordered() {
        // low(k, n) = 1 − high(n − k, n): the interval of the complementary count mirrors.
        for n in [1u64, 5, 37, 400] {
            for k in 0..=n {
                let r = Rate::new(k, n, 0.9);
                let m = Rate::new(n - k, n, 0.9);
                assert!((r.low - (1.0 - m.high)).abs() < 1e-12, "{k}/{n}");
                assert!(r.low <= r.rate && r.rate <= r.high, "{k}/{n}");
                assert!(r.upper <= r.high, "{k}/{n}");
            }
        }
    }

    #[test]
    fn percentages_keep_two_significant_digits_below_one_percent() {
        assert_eq!(percent(0.0), "0.00");
        assert_eq!(percent(0.0409), "4.09");
        assert_eq!(percent(0.017_4), "1.74");
        assert_eq!(percent(0.000_017_4), "0.0017");
        assert_eq!(percent(0.004_2), "0.42");
    }

    #[test]
    fn units_needed_is_the_least_passing_log() {
        for (rate, c) in [(0.01, 0.95), (0.001, 0.99), (0.2, 0.5), (0.05, 0.9)] {
            let n = units_needed(rate, c).unwrap();
            assert!(Rate::new(0, n, c).upper <= rate);
            assert!(n == 1 || Rate::new(0, n - 1, c).upper > rate);
        }
    }
}
