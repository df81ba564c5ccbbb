//! The audit's field baseline: what the released model met on the audit's held-out log, kept
//! in `audit.json` so that `linegate drift` can compare a field log (or the device's field
//! record) with it, and the device plan (`shared_model::FieldPlan`) the device keeps its
//! field statistics under.
//!
//! Which log: the held-out log (`held-out`, the split `train` recorded, or `holdout`, given
//! with `--holdout`); without one, the first validation log; without any, the training log
//! (its margins are larger than unseen units' since the model was fitted to it, so a drift
//! test against it is less sensitive; the record says which rule chose the log).
//!
//! The plan's CUSUMs are the tabular CUSUM with the settings Montgomery recommends
//! (*Introduction to Statistical Quality Control*, §9.1): target μ₀ = the side's mean margin
//! over its decided units, allowance k = σ/2, decision interval h = 5σ, σ the margins'
//! sample standard deviation, each rounded to a whole score unit (LSB) and k and h at least
//! 1 LSB: a σ that rounds to 0 (a side whose margins barely vary) would otherwise give
//! k = h = 0, and any 1-LSB dip would alarm. A σ from fewer than [`ROUGH_SIGMA_UNITS`] units
//! is rough, and the plan text and the drift report say so. A side with fewer than two
//! units has no σ: its limit is `i64::MAX`, the side cannot alarm, and both say so. For normally distributed margins these settings give an
//! in-control average run length of about 465 units per one-sided sum (a figure from memory
//! of Montgomery's table, not checked here); margins are seldom normal (a side's margins are
//! bounded below by 0 and skewed), so the run length on a line is what it is, and the drift
//! report says which sum passed h at which unit rather than a false-alarm rate.

use serde::{Deserialize, Serialize};
use shared_model::field::{CusumPlan, FIELD_BINS};
use shared_model::{FieldPlan, Thresholds, Verdict};

use crate::ingest::dataset::Dataset;
use crate::release::quantise::Quantised;
use crate::train::float_model::FloatModel;

/// Largest audit.json read back: the baseline holds every score of its log (a training log
/// of millions of units makes a file of tens of MiB).
pub const MAX_AUDIT_FILE: u64 = 1 << 30;

/// Below this many units on a side, the margins' σ (and so k and h) is rough: said beside the
/// plan and in the drift report.
pub const ROUGH_SIGMA_UNITS: u64 = 30;

/// The baseline a field log is compared with (see the module docs).
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct Baseline {
    /// The audited log it is taken from (`held-out`, `holdout`, `validation-1`, `train`).
    pub log: String,
    /// Why that log, in words.
    pub rule: String,
    /// The log's SHA-256.
    pub sha256: String,
    /// NO-GO at or below this score.
    pub nogo_max: i64,
    /// GO at or above this score.
    pub go_min: i64,
    /// Units of the log.
    pub units: u64,
    /// Units the device decided GO.
    pub go: u64,
    /// Units the device decided NO-GO.
    pub nogo: u64,
    /// Units the device decided RECHECK.
    pub recheck: u64,
    /// Units the device refused (FAULT).
    pub faults: u64,
    /// The exact fixed-point scores of the decided units (GO and NO-GO), sorted.
    pub scores: Vec<i64>,
    /// The RECHECK units' scores, sorted (the device's score histogram counts every scored
    /// unit, so a record is compared with both lists together).
    pub recheck_scores: Vec<i64>,
    /// Per channel, the values the weights multiply over the scored units (GO, NO-GO and
    /// RECHECK: the units whose values the device's record sums).
    pub channels: Vec<BaselineChannel>,
    /// The device plan: score bins and the two CUSUMs' settings.
    pub plan: PlanRecord,
}

/// One channel's values over the baseline's decided units, in raw units (the integers the
/// weights multiply) over the scored units, with the audit's noise and drift budget in physical units.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct BaselineChannel {
    /// Channel name.
    pub name: String,
    /// Physical unit.
    pub unit: String,
    /// Physical units per raw count (a shift in raw units times `lsb` is physical).
    pub lsb: f64,
    /// Units the figures are over.
    pub count: u64,
    /// Mean, raw units.
    pub mean: f64,
    /// Sample standard deviation (n − 1), raw units.
    pub sd: f64,
    /// Least value.
    pub min: i32,
    /// Greatest value.
    pub max: i32,
    /// Declared noise, physical units (null: none declared).
    pub noise: Option<f64>,
    /// The drift this channel may take alone before the audit's tightest unit could flip,
    /// physical units (the margin budget; null: no noise declared, so no tolerance was
    /// computed, or a channel of weight 0, which no drift can flip).
    pub max_drift: Option<f64>,
}

/// `shared_model::FieldPlan` as audit.json keeps it, with the figures each CUSUM came from.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct PlanRecord {
    /// The blob id (CRC-32) of the blob the audit named.
    pub blob_id: u32,
    /// Lower edge of bin 0 (a score).
    pub origin: i64,
    /// Bins are `2^shift` score units wide.
    pub shift: u8,
    /// CUSUM over GO units' margins (`score − go_min`).
    pub go: CusumRecord,
    /// CUSUM over NO-GO units' margins (`nogo_max − score`).
    pub nogo: CusumRecord,
}

/// One side's CUSUM settings and the margins they came from.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct CusumRecord {
    /// Decided units of this side in the baseline.
    pub units: u64,
    /// Their mean margin.
    pub mean: f64,
    /// Their margins' sample standard deviation.
    pub sd: f64,
    /// μ₀ = round(mean).
    pub target: i64,
    /// k = max(1, round(σ/2)).
    pub slack: i64,
    /// h = max(1, round(5σ)); `i64::MAX` (no alarm) with fewer than two units.
    pub limit: i64,
}

impl PlanRecord {
    /// The plan the device and the host keep their statistics under.
    pub fn field_plan(&self) -> FieldPlan {
        FieldPlan {
            blob_id: self.blob_id,
            origin: self.origin,
            shift: self.shift,
            go: self.go.plan(),
            nogo: self.nogo.plan(),
        }
    }
}

impl CusumRecord {
    /// The device's settings.
    pub fn plan(&self) -> CusumPlan {
        CusumPlan {
            target: self.target,
            slack: self.slack,
            limit: self.limit,
        }
    }

    /// Settings from one side's margins: μ₀ = mean, k = σ/2, h = 5σ (Montgomery §9.1), k and
    /// h at least 1 LSB.
    fn of(margins: &[i64]) -> Self {
        let (mean, sd) = mean_sd(margins.iter().map(|&m| m as f64));
        let few = margins.len() < 2;
        Self {
            units: margins.len() as u64,
            mean,
            sd,
            target: mean.round() as i64,
            slack: ((sd / 2.0).round() as i64).max(1),
            limit: if few {
                i64::MAX
            } else {
                ((5.0 * sd).round() as i64).max(1)
            },
        }
    }
}

/// Count, sum and sum of squares of raw channel values, as exact integers: the figures do not
/// depend on the order the values arrive in or on how a log is cut into parts, so parts
/// counted apart merge bit for bit into the single pass's figures (|Σx²| < n·2⁶² fits i128
/// for any count a u64 holds).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Moments {
    /// Values seen.
    pub n: u64,
    /// Their sum.
    pub sum: i128,
    /// The sum of their squares.
    pub sum_sq: i128,
}

impl Moments {
    /// One more value.
    pub fn push(&mut self, x: i32) {
        let x = i128::from(x);
        self.n += 1;
        self.sum += x;
        self.sum_sq += x * x;
    }

    /// The values of `other` too.
    pub fn merge(&mut self, other: &Self) {
        self.n += other.n;
        self.sum += other.sum;
        self.sum_sq += other.sum_sq;
    }

    /// Their mean (0 for none).
    pub fn mean(&self) -> f64 {
        if self.n == 0 {
            return 0.0;
        }
        self.sum as f64 / self.n as f64
    }

    /// The sample standard deviation (n − 1; 0 below two values). The squared deviations
    /// are summed about the nearest integer c to the mean, exactly (Σ(x−c)² = Σx² − 2cΣx +
    /// nc²), then corrected by r²/n, r = Σx − nc, so no large difference cancels in floating
    /// point.
    pub fn sd(&self) -> f64 {
        if self.n < 2 {
            return 0.0;
        }
        let n = i128::from(self.n);
        let c = (2 * self.sum + n).div_euclid(2 * n);
        let r = self.sum - n * c;
        let about_c = c
            .checked_mul(self.sum)
            .and_then(|cs| cs.checked_mul(2))
            .and_then(|two_cs| self.sum_sq.checked_sub(two_cs))
            .and_then(|d| n.checked_mul(c * c).and_then(|ncc| d.checked_add(ncc)));
        let m2 = match about_c {
            Some(s) => s as f64 - (r as f64) * (r as f64) / self.n as f64,
            // Beyond i128 only for counts near u64::MAX: the plain formula, still a function
            // of the exact sums alone.
            None => self.sum_sq as f64 - (self.sum as f64) * (self.sum as f64) / self.n as f64,
        };
        (m2.max(0.0) / (self.n - 1) as f64).sqrt()
    }
}

/// Mean and sample standard deviation (n − 1; 0 below two values), by Welford's update.
pub fn mean_sd(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut n, mut mean, mut m2) = (0u64, 0.0f64, 0.0f64);
    for x in values {
        n += 1;
        let d = x - mean;
        mean += d / n as f64;
        m2 += d * (x - mean);
    }
    let sd = if n > 1 {
        (m2 / (n - 1) as f64).sqrt()
    } else {
        0.0
    };
    (mean, sd)
}

/// The bins covering `lo..=hi`: origin `lo`, the least shift whose 32 bins reach `hi`.
pub fn bins_covering(lo: i64, hi: i64) -> (i64, u8) {
    let span = i128::from(hi) - i128::from(lo);
    let mut shift = 0u8;
    while shift < 62 && (span >> shift) >= FIELD_BINS as i128 {
        shift += 1;
    }
    (lo, shift)
}

/// Which of the audited logs is the baseline: its index in `names` (0 is the training log)
/// and the rule that chose it.
pub fn choose(names: &[&str]) -> (usize, &'static str) {
    if let Some(i) = names
        .iter()
        .position(|n| *n == "held-out" || *n == "holdout")
    {
        return (i, "the audit's held-out log");
    }
    if names.len() > 1 {
        return (1, "no held-out log was audited: the first validation log");
    }
    (
        0,
        "no held-out or validation log was audited: the training log (the model was fitted to it, so its margins are larger than unseen units')",
    )
}

/// The baseline of log `name` (read as `ds`), chosen by `rule`, for the quantised model `q`
/// of `fm`, with each channel's declared noise and allowed drift from the audit's tolerance
/// (`budget`: empty when no noise was declared).
pub fn baseline(
    q: &Quantised,
    fm: &FloatModel,
    (name, rule): (&str, &str),
    ds: &Dataset,
    budget: &[(f64, f64)],
) -> Baseline {
    let model = q.model.model();
    let t = Thresholds::of(model);
    let n = model.channels.len();
    let (mut go, mut nogo, mut recheck, mut faults) = (0u64, 0u64, 0u64, 0u64);
    let (mut scores, mut go_m, mut nogo_m) = (Vec::new(), Vec::new(), Vec::new());
    let mut recheck_scores = Vec::new();
    let mut decided: Vec<usize> = Vec::new();
    for i in 0..ds.len() {
        let Ok(d) = q.model.classify(ds.raw_row(i)) else {
            faults += 1;
            continue;
        };
        decided.push(i);
        match d.verdict {
            Verdict::Go => {
                scores.push(d.score);
                go += 1;
                go_m.push(d.score.saturating_sub(t.go_min));
            }
            Verdict::NoGo => {
                scores.push(d.score);
                nogo += 1;
                nogo_m.push(t.nogo_max.saturating_sub(d.score));
            }
            Verdict::Recheck => {
                recheck_scores.push(d.score);
                recheck += 1;
            }
        }
    }
    scores.sort_unstable();
    recheck_scores.sort_unstable();
    let channels = (0..n)
        .map(|c| {
            let values = || decided.iter().map(|&i| ds.raw_row(i)[c]);
            let mut m = Moments::default();
            values().for_each(|x| m.push(x));
            let (mean, sd) = (m.mean(), m.sd());
            let s = &fm.channels[c];
            let tol = budget.get(c);
            BaselineChannel {
                name: s.name.clone(),
                unit: s.unit.clone(),
                lsb: s.lsb,
                count: decided.len() as u64,
                mean,
                sd,
                min: values().min().unwrap_or(0),
                max: values().max().unwrap_or(0),
                noise: tol.map(|t| t.0),
                max_drift: tol.map(|t| t.1).filter(|d| d.is_finite()),
            }
        })
        .collect();
    let ends = |f: fn(&[i64]) -> Option<&i64>| [f(&scores), f(&recheck_scores)];
    let lo = ends(<[i64]>::first).into_iter().flatten().min();
    let hi = ends(<[i64]>::last).into_iter().flatten().max();
    let (origin, shift) = bins_covering(lo.copied().unwrap_or(0), hi.copied().unwrap_or(0));
    Baseline {
        log: name.into(),
        rule: rule.into(),
        sha256: ds.sha256.clone(),
        nogo_max: t.nogo_max,
        go_min: t.go_min,
        units: ds.len() as u64,
        go,
        nogo,
        recheck,
        faults,
        scores,
        recheck_scores,
        channels,
        plan: PlanRecord {
            blob_id: 0,
            origin,
            shift,
            go: CusumRecord::of(&go_m),
            nogo: CusumRecord::of(&nogo_m),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// By hand: 1, 2, 3, 4 have mean 2.5 and sample variance 5/3; values 2·10⁹ apart from
    /// zero keep their spread of 1 exactly (a plain Σx² − (Σx)²/n in f64 loses it); two
    /// halves merged give the whole's figures bit for bit.
    #[test]
    fn exact_moments_worked_by_hand() {
        let of = |xs: &[i32]| {
            let mut m = Moments::default();
            xs.iter().for_each(|&x| m.push(x));
            m
        };
        let m = of(&[1, 2, 3, 4]);
        assert_eq!(m.mean(), 2.5);
        assert_eq!(m.sd(), (5.0f64 / 3.0).sqrt());
        let far = of(&[2_000_000_001, 2_000_000_002, 2_000_000_003]);
        assert_eq!((far.mean(), far.sd()), (2_000_000_002.0, 1.0));
        let mut halves = of(&[7, -3, 11]);
        halves.merge(&of(&[5, 0]));
        assert_eq!(halves, of(&[7, -3, 11, 5, 0]));
        assert_eq!((of(&[9]).sd(), Moments::default().mean()), (0.0, 0.0));
    }

    /// Worked by hand: scores 10..=41 span 31 < 32 bins of 1; 10..=42 spans 32: bins of 2.
    #[test]
    fn bins_cover_the_scores() {
        assert_eq!(bins_covering(10, 41), (10, 0));
        assert_eq!(bins_covering(10, 42), (10, 1));
        assert_eq!(bins_covering(0, 0), (0, 0));
        let (o, s) = bins_covering(i64::MIN, i64::MAX);
        assert_eq!((o, s), (i64::MIN, 59));
    }

    /// Margins 2, 4, 4, 4, 5, 5, 7, 9: mean 5, sample sd √(32/7) ≈ 2.138; k = round(1.069)
    /// = 1, h = round(10.69) = 11.
    #[test]
    fn cusum_settings_worked_by_hand() {
        let c = CusumRecord::of(&[2, 4, 4, 4, 5, 5, 7, 9]);
        assert_eq!((c.target, c.slack, c.limit), (5, 1, 11));
        assert!((c.sd - (32.0f64 / 7.0).sqrt()).abs() < 1e-12);
        assert_eq!(CusumRecord::of(&[3]).limit, i64::MAX);
        assert_eq!(CusumRecord::of(&[]).limit, i64::MAX);
    }

    /// Margins 7, 7, 7 (σ = 0) and 7, 7, 7, 8 (σ = 0.5: k = round(0.25) = 0, h = round(2.5)
    /// = 3): k is floored at 1 LSB, and h where it would round to 0.
    #[test]
    fn cusum_settings_are_at_least_one_lsb() {
        let c = CusumRecord::of(&[7, 7, 7]);
        assert_eq!((c.target, c.slack, c.limit), (7, 1, 1));
        let c = CusumRecord::of(&[7, 7, 7, 8]);
        assert!((c.sd - 0.5).abs() < 1e-12);
        assert_eq!((c.target, c.slack, c.limit), (7, 1, 3));
    }

    #[test]
    fn the_held_out_log_is_chosen_first() {
        assert_eq!(choose(&["train", "validation-1", "held-out"]).0, 2);
        assert_eq!(choose(&["train", "validation-1"]).0, 1);
        assert_eq!(choose(&["train"]).0, 0);
    }
}
