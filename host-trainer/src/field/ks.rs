//! The two-sample Kolmogorov–Smirnov test of the score distribution (Smirnov, 1939):
//! D = sup |F_baseline(x) − F_field(x)| over the two empirical distribution functions, and
//! its p-value from the asymptotic Kolmogorov distribution at the effective sample size
//! n_e = n·m/(n + m): p = Q(D·√n_e), Q(λ) = 2 Σ_{k≥1} (−1)^{k−1} e^{−2k²λ²}
//! (Kolmogorov, 1933; the two-sample form with n_e is Smirnov's, 1939).
//!
//! On a device record the field's scores are only known by bin: D is then taken over the
//! bin edges against the baseline binned the same way, which can only miss the largest gap
//! inside a bin, so it is a lower bound of D (and the p-value an upper bound of p).

use serde::Serialize;
use shared_model::FieldStats;

/// The test's figures.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct KsTest {
    /// D, the largest distance between the two empirical distribution functions.
    pub d: f64,
    /// Baseline scores.
    pub n: u64,
    /// Field scores.
    pub m: u64,
    /// The effective sample size n·m/(n + m).
    pub effective_n: f64,
    /// The asymptotic p-value Q(D·√n_e).
    pub p: f64,
    /// D is over bin edges (a device record): a lower bound of D.
    pub binned: bool,
}

/// D of two sorted samples (exact: every distinct value is a step of one or both functions).
pub fn statistic(a: &[i64], b: &[i64]) -> f64 {
    let (n, m) = (a.len() as f64, b.len() as f64);
    if a.is_empty() || b.is_empty() {
        return 0.0;
    }
    let (mut i, mut j, mut d) = (0usize, 0usize, 0.0f64);
    while i < a.len() && j < b.len() {
        let x = a[i].min(b[j]);
        while i < a.len() && a[i] == x {
            i += 1;
        }
        while j < b.len() && b[j] == x {
            j += 1;
        }
        d = d.max((i as f64 / n - j as f64 / m).abs());
    }
    d
}

/// Kolmogorov's survival function Q(λ) = P(K > λ): the alternating series for λ ≥ 1.18,
/// and its Jacobi-theta form 1 − (√(2π)/λ) Σ e^{−(2k−1)²π²/(8λ²)} below, where the series
/// converges slowly (both exact forms of the same function).
pub fn kolmogorov_sf(lambda: f64) -> f64 {
    if lambda <= 0.0 {
        return 1.0;
    }
    if lambda < 1.18 {
        let pi2 = std::f64::consts::PI * std::f64::consts::PI;
        let w = -pi2 / (8.0 * lambda * lambda);
        let s: f64 = (1..=8)
            .map(|k| {
                let j = f64::from(2 * k - 1);
                (w * j * j).exp()
            })
            .sum();
        (1.0 - (2.0 * std::f64::consts::PI).sqrt() / lambda * s).clamp(0.0, 1.0)
    } else {
        let s: f64 = (1..=100)
            .map(|k| {
                let k = f64::from(k);
                let sign = if k as u32 % 2 == 1 { 1.0 } else { -1.0 };
                sign * (-2.0 * k * k * lambda * lambda).exp()
            })
            .sum();
        (2.0 * s).clamp(0.0, 1.0)
    }
}

/// The test over two sorted samples of exact scores.
pub fn test(baseline: &[i64], field: &[i64]) -> KsTest {
    finish(
        statistic(baseline, field),
        baseline.len() as u64,
        field.len() as u64,
        false,
    )
}

/// D and p from D and the sizes.
fn finish(d: f64, n: u64, m: u64, binned: bool) -> KsTest {
    let (nf, mf) = (n as f64, m as f64);
    let effective_n = if n == 0 || m == 0 {
        0.0
    } else {
        nf * mf / (nf + mf)
    };
    KsTest {
        d,
        n,
        m,
        effective_n,
        p: kolmogorov_sf(d * effective_n.sqrt()),
        binned,
    }
}

/// Counts per cell (below, the bins, above) of sorted `scores` under a record's plan.
pub fn binned_counts(scores: &[i64], stats: &FieldStats) -> Vec<u64> {
    let p = &stats.plan;
    let cells = shared_model::field::FIELD_BINS + 2;
    let mut out = vec![0u64; cells];
    for &s in scores {
        let cell = match s.checked_sub(p.origin) {
            Some(d) if d < 0 => 0,
            None if s < p.origin => 0,
            Some(d) => {
                let i = d >> u32::from(p.shift.min(62));
                usize::try_from(i).map_or(cells - 1, |i| (i + 1).min(cells - 1))
            }
            None => cells - 1,
        };
        out[cell] += 1;
    }
    out
}

/// The record's cells (below, the bins, above).
pub fn record_counts(stats: &FieldStats) -> Vec<u64> {
    std::iter::once(stats.below)
        .chain(stats.bins.iter().copied())
        .chain(std::iter::once(stats.above))
        .map(u64::from)
        .collect()
}

/// D over cell edges of two binned samples (a lower bound of the exact D).
pub fn binned_test(baseline: &[u64], field: &[u64]) -> KsTest {
    let (n, m): (u64, u64) = (baseline.iter().sum(), field.iter().sum());
    let (mut a, mut b, mut d) = (0u64, 0u64, 0.0f64);
    if n > 0 && m > 0 {
        for (x, y) in baseline.iter().zip(field) {
            a += x;
            b += y;
            d = d.max((a as f64 / n as f64 - b as f64 / m as f64).abs());
        }
    }
    finish(d, n, m, true)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// By hand: a = 1 2 3 4, b = 3 4 5 6: after 2, F_a = 1/2, F_b = 0 → D = 1/2.
    #[test]
    fn statistic_worked_by_hand() {
        assert_eq!(statistic(&[1, 2, 3, 4], &[3, 4, 5, 6]), 0.5);
        assert_eq!(statistic(&[1, 2], &[1, 2]), 0.0);
        assert_eq!(statistic(&[1, 1, 1], &[2]), 1.0);
    }

    /// Q at its textbook points (values from memory of the Kolmogorov table: Q(1.36) ≈ 0.05,
    /// Q(1.63) ≈ 0.01); the two forms meet at 1.18.
    #[test]
    fn kolmogorov_tail_at_known_points() {
        assert!((kolmogorov_sf(1.358) - 0.05).abs() < 1e-3);
        assert!((kolmogorov_sf(1.628) - 0.01).abs() < 1e-3);
        assert_eq!(kolmogorov_sf(0.0), 1.0);
        let (lo, hi) = (kolmogorov_sf(1.18 - 1e-12), kolmogorov_sf(1.18));
        assert!((lo - hi).abs() < 1e-12, "{lo} {hi}");
    }

    /// Binning never raises D: the binned D is at most the exact one.
    #[test]
    fn binned_d_is_a_lower_bound() {
        let a: Vec<i64> = (0..100).map(|i| i * 3).collect();
        let b: Vec<i64> = (0..80).map(|i| i * 3 + 40).collect();
        let exact = statistic(&a, &b);
        let mut s = FieldStats::new(Default::default(), 0, 0);
        s.plan.shift = 4;
        let t = binned_test(&binned_counts(&a, &s), &binned_counts(&b, &s));
        assert!(t.d <= exact && t.d > 0.0, "{} {exact}", t.d);
    }
}
