//! Fisher's exact test (Fisher, *The Design of Experiments*, 1935), one-sided: is the
//! field's rate of some verdict (RECHECK, FAULT) greater than the baseline's?
//!
//! With `k₁` of `n₁` field units and `k₂` of `n₂` baseline units, conditioned on the total
//! `K = k₁ + k₂` of `N = n₁ + n₂`, the field's count X is hypergeometric:
//! P(X = x) = C(K, x)·C(N − K, n₁ − x) / C(N, n₁). The p-value is the upper tail P(X ≥ k₁).
//!
//! The tail is summed term by term from the end nearest the mode, each term from the one
//! before by the exact ratio of consecutive probabilities, so that every term shrinks; only
//! the first term is computed outright, as Loader's saddle-point form of the hypergeometric
//! probability (C. Loader, "Fast and accurate computation of binomial probabilities", 2000):
//! P(X = x) = b(x; K, p)·b(n₁ − x; N − K, p) / b(n₁; N, p) at p = n₁/N, each binomial term
//! from Stirling's error `stirlerr` and the deviance `bd0`, which avoids the cancellation of
//! log-factorials of large counts. Its relative error is a few 1e-15 at any size (checked
//! to 1e-9 against scipy up to 10⁶ units a side, tests/verify/drift.py). When the observed
//! count lies at or below the mode the tail is 1 − P(X < k₁): then p is large and its
//! absolute error about 1e-16.

use std::f64::consts::PI;

/// ln n! by summation, for the small counts where Stirling's series is not used.
fn ln_factorial_small(n: u64) -> f64 {
    (2..=n).map(|k| (k as f64).ln()).sum()
}

/// Stirling's error δ(n) = ln n! − ((n + ½) ln n − n + ½ ln 2π): by summation up to 15, above
/// by its series 1/(12n) − 1/(360n³) + 1/(1260n⁵) − 1/(1680n⁷) + 1/(1188n⁹) (next term
/// below 1e-16 at n ≥ 16).
pub fn stirlerr(n: u64) -> f64 {
    let x = n as f64;
    if n <= 15 {
        if n == 0 {
            // δ(0) is not used: b(x; n, p) handles x = 0 and x = n apart.
            return 0.0;
        }
        return ln_factorial_small(n) - ((x + 0.5) * x.ln() - x + 0.5 * (2.0 * PI).ln());
    }
    let x2 = x * x;
    (1.0 / 12.0
        - (1.0 / 360.0 - (1.0 / 1260.0 - (1.0 / 1680.0 - 1.0 / (1188.0 * x2)) / x2) / x2) / x2)
        / x
}

/// The deviance term x ln(x/m) + m − x, by its series in v = (x − m)/(x + m) when x is near
/// m (where the direct form cancels).
fn bd0(x: f64, m: f64) -> f64 {
    if (x - m).abs() < 0.1 * (x + m) {
        let v = (x - m) / (x + m);
        let mut s = (x - m) * v;
        let mut ej = 2.0 * x * v;
        let v2 = v * v;
        for j in 1..1000 {
            ej *= v2;
            let s1 = s + ej / f64::from(2 * j + 1);
            if s1 == s {
                return s1;
            }
            s = s1;
        }
        return s;
    }
    x * (x / m).ln() + m - x
}

/// ln b(x; n, p), the binomial probability, by Loader's form (q = 1 − p given apart).
fn ln_binomial(x: u64, n: u64, p: f64, q: f64) -> f64 {
    let (xf, nf) = (x as f64, n as f64);
    if p == 0.0 {
        return if x == 0 { 0.0 } else { f64::NEG_INFINITY };
    }
    if q == 0.0 {
        return if x == n { 0.0 } else { f64::NEG_INFINITY };
    }
    if x == 0 {
        return if n == 0 {
            0.0
        } else if p < 0.1 {
            -bd0(nf, nf * q) - nf * p
        } else {
            nf * q.ln()
        };
    }
    if x == n {
        return if q < 0.1 {
            -bd0(nf, nf * p) - nf * q
        } else {
            nf * p.ln()
        };
    }
    let lc = stirlerr(n) - stirlerr(x) - stirlerr(n - x) - bd0(xf, nf * p) - bd0(nf - xf, nf * q);
    let lf = (2.0 * PI).ln() + xf.ln() + (-xf / nf).ln_1p();
    lc - 0.5 * lf
}

/// ln P(X = x) for X hypergeometric: `x` of `k` marked among `n`, `draws` drawn.
fn ln_hypergeometric(x: u64, k: u64, n: u64, draws: u64) -> f64 {
    let p = draws as f64 / n as f64;
    let q = (n - draws) as f64 / n as f64;
    ln_binomial(x, k, p, q) + ln_binomial(draws - x, n - k, p, q) - ln_binomial(draws, n, p, q)
}

/// The one-sided p-value P(X ≥ `k1`) that `k1` of `n1` field units is greater than `k2` of
/// `n2` baseline units (see the module docs); 1 when nothing can be told (no field units,
/// no unit of that verdict anywhere).
///
/// ```
/// use host_trainer::field::fisher::greater;
/// // 3 of 10 against 0 of 10: P(X = 3) = C(10,3)·C(10,0)/C(20,3) = 120/1140.
/// assert!((greater(3, 10, 0, 10) - 120.0 / 1140.0).abs() < 1e-15);
/// ```
pub fn greater(k1: u64, n1: u64, k2: u64, n2: u64) -> f64 {
    let (k1, k2) = (k1.min(n1), k2.min(n2));
    let (n, k) = (n1 + n2, k1 + k2);
    // Support of X: lo..=hi.
    let lo = n1.saturating_sub(n - k);
    let hi = k.min(n1);
    if k1 <= lo {
        return 1.0;
    }
    let ln_pmf = |x: u64| ln_hypergeometric(x, k, n, n1);
    let (nf, kf, n1f) = (n as f64, k as f64, n1 as f64);
    let mode = (((n1f + 1.0) * (kf + 1.0)) / (nf + 2.0)).floor() as u64;
    // Sum terms from `start` outwards (each smaller than the last), scaled by the first.
    let tail = |start: u64, up: bool| {
        let (mut x, mut r, mut s) = (start, 1.0f64, 1.0f64);
        loop {
            let xf = x as f64;
            let ratio = if up {
                if x >= hi {
                    break;
                }
                (kf - xf) * (n1f - xf) / ((xf + 1.0) * (nf - kf - n1f + xf + 1.0))
            } else {
                if x <= lo {
                    break;
                }
                xf * (nf - kf - n1f + xf) / ((kf - xf + 1.0) * (n1f - xf + 1.0))
            };
            r *= ratio;
            s += r;
            x = if up { x + 1 } else { x - 1 };
            if r < 1e-18 * s {
                break;
            }
        }
        (ln_pmf(start).exp() * s).min(1.0)
    };
    if k1 > mode {
        tail(k1, true)
    } else {
        (1.0 - tail(k1 - 1, false)).clamp(0.0, 1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Tables worked by hand: 1 of 2 against 0 of 2: K = 1 of N = 4, P(X ≥ 1) = C(3,1)/C(4,2)
    /// = 1/2; 2 of 3 against 1 of 3: P(X ≥ 2) = (C(3,2)·C(3,1) + C(3,3))/C(6,3) = 10/20;
    /// 3 of 10 against 0 of 10: 120/1140; 4 of 4 against 0 of 4: 1/C(8,4) = 1/70.
    #[test]
    fn small_tables_worked_by_hand() {
        let close = |a: f64, b: f64| (a - b).abs() < 1e-15;
        assert!(close(greater(1, 2, 0, 2), 0.5));
        assert!(close(greater(2, 3, 1, 3), 0.5));
        assert!(close(greater(3, 10, 0, 10), 120.0 / 1140.0));
        assert!(close(greater(4, 4, 0, 4), 1.0 / 70.0));
        // Nothing to tell: no field units, no such unit, the field lower than the baseline.
        assert_eq!(greater(0, 0, 5, 400), 1.0);
        assert_eq!(greater(0, 1000, 0, 50000), 1.0);
        assert_eq!(greater(0, 5, 3, 5), 1.0);
        assert_eq!(greater(3, 3, 0, 0), 1.0);
    }

    /// Stirling's error across the switch from summation to its series (δ(16) by summation
    /// against the series), and at 1: ln 1! − (1.5·0 − 1 + ½ ln 2π) = 1 − ½ ln 2π.
    #[test]
    fn stirling_error_is_continuous_and_right() {
        let x = 16.0f64;
        let direct = ln_factorial_small(16) - ((x + 0.5) * x.ln() - x + 0.5 * (2.0 * PI).ln());
        assert!(
            (stirlerr(16) - direct).abs() < 1e-14,
            "{} {direct}",
            stirlerr(16)
        );
        assert!((stirlerr(1) - (1.0 - 0.5 * (2.0 * PI).ln())).abs() < 1e-15);
    }

    /// Against scipy.stats.fisher_exact(table, alternative="greater") for the small tables
    /// and, for the 10⁶-unit ones (where scipy's own value is off by about 3e-10), the sum
    /// of the hypergeometric terms with mpmath at 40 digits (values printed once and kept
    /// here; tests/verify/drift.py checks such tables live).
    #[test]
    fn tables_against_references() {
        for (k1, n1, k2, n2, want) in [
            (19, 400, 5, 400, 0.002926315735239587),
            (30, 400, 5, 400, 7.515186812747956e-06),
            (7, 20, 2, 30, 0.015034626539908046),
            (10, 100, 10, 100, 0.5928511035198102),
            (1, 1000, 0, 50_000, 0.019_607_843_137_254_9),
            (400, 400, 0, 400, 5.317948384759285e-240),
            (5, 1_000_000, 2, 1_000_000, 0.226_562_089_842_929_7),
            (1200, 1_000_000, 1000, 1_000_000, 1.079_551_396_434_843_1e-5),
            (60, 1_000_000, 20, 3_000_000, 9.450_256_354_804_15e-21),
        ] {
            let got = greater(k1, n1, k2, n2);
            assert!(
                (got - want).abs() <= 1e-12 * want,
                "{k1}/{n1} vs {k2}/{n2}: {got} != {want}"
            );
        }
    }
}
