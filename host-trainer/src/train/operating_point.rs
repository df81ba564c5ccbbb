//! The operating point: where GO ends and NO-GO begins, and how wide the RECHECK band
//! between them is, chosen from scores of units the model did not train on.
//!
//! The held-out units (out-of-fold units of cross-validation, or a holdout) are sorted by
//! their signed distance from their model's hyperplane. A point is two cuts between sorted
//! units: below the lower cut NO-GO, above the upper cut GO, between them RECHECK. Every
//! pair of cuts is priced in integers, and the rule picks one:
//!
//! - [`Target::RecheckBudget`]: the least `w × false GO + false NO-GO` with RECHECK at most a
//!   share of the held-out units; of equal costs the fewest RECHECK.
//! - [`Target::FalseGo`]: a false-GO rate whose exact one-sided Clopper–Pearson upper bound
//!   at the stated confidence is at most the target, with the fewest GO units lost (false
//!   NO-GO or RECHECK) and then the fewest RECHECK.
//!
//! A unit the device shows FAULT for is NO-GO whatever its score: it is counted (a GO unit
//! as a false NO-GO) but cannot move the cuts.

use serde::{Deserialize, Serialize};

use crate::confidence::{Rate, units_needed};
use crate::train::eval::HeldOut;

/// The RECHECK share allowed by default: a band that may send up to 5 % of the held-out
/// units to retest (the audit's default RECHECK gate is 5 % of each log, or the upper bound
/// of the held-out share when that is higher).
pub const DEFAULT_RECHECK_BUDGET: f64 = 0.05;

/// Below this many held-out units in either class the threshold stays at the trained
/// separator's own (0) and only a band around it is chosen: a threshold fitted to a few dozen
/// units' scores follows their noise (common practice: a cut-off needs tens of cases of each
/// class before it is moved on data).
pub const MIN_UNITS_TO_MOVE: usize = 30;

/// Candidate cuts considered at most (evenly spaced through the sorted units on a larger set).
const MAX_CUTS: usize = 1200;

/// What the operating point must meet.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case", tag = "rule", deny_unknown_fields)]
pub enum Target {
    /// Least cost with RECHECK at most `share` of the held-out units.
    RecheckBudget {
        /// The largest RECHECK share (0.03 is 3 %).
        share: f64,
        /// Weight of a false GO against a false NO-GO.
        false_go_weight: f64,
    },
    /// The false-GO rate's upper bound at `confidence` at most `rate`.
    FalseGo {
        /// The largest acceptable false-GO rate (0.01 is 1 %).
        rate: f64,
        /// Confidence of the bound (0.95 is 95 %).
        confidence: f64,
    },
}

impl Target {
    /// The weight of a false GO the trade-off points are priced at: the rule's own, or the
    /// default for a false-GO target (which prices nothing itself).
    pub fn trade_off_weight(&self) -> f64 {
        match *self {
            Self::RecheckBudget {
                false_go_weight, ..
            } => false_go_weight,
            Self::FalseGo { .. } => crate::train::c_choice::DEFAULT_FALSE_GO_WEIGHT,
        }
    }
}

/// One decision boundary between two outcomes: the positive one (GO) when the score exceeds
/// `threshold + band`, the other (NO-GO) below `threshold − band`, RECHECK between. An
/// operating point of today has one; a model of several classes would have one per class
/// against the rest, which is why the point hands its boundaries out through this type
/// ([`OperatingPoint::boundaries`]) rather than as loose numbers.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Boundary {
    /// Where the two outcomes meet, in model score units.
    pub threshold: f64,
    /// RECHECK half-band around `threshold`, in model score units.
    pub band: f64,
}

impl Boundary {
    /// The boundary scaled by `factor` (distance units to score units).
    fn scaled(self, factor: f64) -> Self {
        Self {
            threshold: self.threshold * factor,
            band: self.band * factor,
        }
    }
}

/// Decision counts of one operating point on the held-out units.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PointCounts {
    /// NO-GO units decided GO.
    pub false_go: usize,
    /// GO units decided NO-GO or FAULT.
    pub false_nogo: usize,
    /// GO units sent to RECHECK.
    pub recheck_go: usize,
    /// NO-GO units sent to RECHECK.
    pub recheck_nogo: usize,
}

impl PointCounts {
    /// Units sent to RECHECK.
    pub fn recheck(&self) -> usize {
        self.recheck_go + self.recheck_nogo
    }
}

/// One point of the trade-off: the best point with RECHECK at most `recheck_cap`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TradePoint {
    /// The RECHECK share allowed.
    pub recheck_cap: f64,
    /// Threshold, in model score units.
    pub threshold: f64,
    /// RECHECK half-band, in model score units.
    pub band: f64,
    /// What it decides on the held-out units.
    pub counts: PointCounts,
}

/// The chosen point, as the model file keeps it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OperatingPoint {
    /// The rule it meets.
    pub target: Target,
    /// Where the held-out scores came from.
    pub source: String,
    /// GO when the score exceeds `threshold + band`, NO-GO below `threshold − band`, else
    /// RECHECK; in the model's score units (the file's weights).
    pub threshold: f64,
    /// RECHECK half-band, in the model's score units.
    pub band: f64,
    /// Held-out units, GO units among them, NO-GO units, FAULTs.
    pub units: usize,
    /// GO units held out.
    pub go_units: usize,
    /// NO-GO units held out.
    pub nogo_units: usize,
    /// Held-out units the device shows FAULT for.
    pub faults: usize,
    /// The chosen point's decisions on them.
    pub counts: PointCounts,
    /// The best point at each RECHECK share, for the trade-off chart.
    pub trade_off: Vec<TradePoint>,
}

impl OperatingPoint {
    /// The decision boundaries of the point, one per pair of outcomes it separates: one
    /// today (the file keeps its numbers as `threshold` and `band`).
    pub fn boundaries(&self) -> [Boundary; 1] {
        [Boundary {
            threshold: self.threshold,
            band: self.band,
        }]
    }
}

/// Why no point meets a target.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum PointError {
    /// No held-out NO-GO units, or too few for the bound.
    #[error(
        "{nogo} held-out NO-GO units cannot show a false-GO rate below {target}: even with none passed, the exact upper bound is {bound}; that needs at least {needed} held-out NO-GO units (a holdout or more folds' units), or a looser target"
    )]
    TooFewNogo {
        /// NO-GO units held out.
        nogo: usize,
        /// The target, as written.
        target: String,
        /// The bound with no false GO.
        bound: String,
        /// Units needed.
        needed: u64,
    },
    /// No held-out units at all.
    #[error("no held-out units to choose an operating point from")]
    Empty,
}

/// The RECHECK shares of the trade-off table.
pub const TRADE_CAPS: [f64; 9] = [0.0, 0.005, 0.01, 0.02, 0.03, 0.05, 0.1, 0.2, 0.3];

struct Sorted {
    /// Scores of the units that are not FAULT, ascending.
    s: Vec<f64>,
    /// go_below[p]: GO units among the first p.
    go_below: Vec<usize>,
    /// Candidate cut positions (0..=n), ascending.
    cuts: Vec<usize>,
    fault_go: usize,
    nogo: usize,
}

impl Sorted {
    fn new(held: &[HeldOut]) -> Self {
        let mut v: Vec<(f64, bool)> = held
            .iter()
            .filter(|h| !h.fault && h.distance.is_finite())
            .map(|h| (h.distance, h.go))
            .collect();
        v.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        let mut go_below = Vec::with_capacity(v.len() + 1);
        go_below.push(0);
        for (_, g) in &v {
            go_below.push(go_below.last().copied().unwrap_or(0) + usize::from(*g));
        }
        // A cut can fall only between two different scores (or outside them all).
        let valid: Vec<usize> = (0..=v.len())
            .filter(|&p| p == 0 || p == v.len() || v[p - 1].0 < v[p].0)
            .collect();
        let cuts = if valid.len() <= MAX_CUTS {
            valid
        } else {
            let mut c: Vec<usize> = (0..MAX_CUTS)
                .map(|k| valid[k * (valid.len() - 1) / (MAX_CUTS - 1)])
                .collect();
            c.dedup();
            c
        };
        Self {
            s: v.iter().map(|x| x.0).collect(),
            go_below,
            cuts,
            fault_go: held.iter().filter(|h| h.fault && h.go).count(),
            nogo: held.iter().filter(|h| !h.go).count(),
        }
    }

    fn counts(&self, lo: usize, hi: usize) -> PointCounts {
        let n = self.s.len();
        let go_total = self.go_below[n];
        let nogo_scored = n - go_total;
        let nogo_below_hi = hi - self.go_below[hi];
        let nogo_below_lo = lo - self.go_below[lo];
        PointCounts {
            false_go: nogo_scored - nogo_below_hi,
            false_nogo: self.go_below[lo] + self.fault_go,
            recheck_go: self.go_below[hi] - self.go_below[lo],
            recheck_nogo: nogo_below_hi - nogo_below_lo,
        }
    }

    /// The best band ±β around threshold 0 by `key` among those `allowed` (of equal keys the
    /// narrowest): the boundary in distance units, and its counts.
    fn best_around_zero(
        &self,
        allowed: &dyn Fn(&PointCounts) -> bool,
        key: &dyn Fn(&PointCounts) -> (f64, usize),
    ) -> Option<(Boundary, PointCounts)> {
        let n = self.s.len();
        let mut by_size: Vec<(f64, bool)> = self
            .s
            .iter()
            .enumerate()
            .map(|(p, &v)| (v, self.go_below[p + 1] > self.go_below[p]))
            .collect();
        by_size.sort_by(|a, b| a.0.abs().total_cmp(&b.0.abs()));
        // β = 0: GO above 0, NO-GO at or below it.
        let mut c = self.at_zero();
        let mut best: Option<(f64, PointCounts, (f64, usize))> =
            allowed(&c).then(|| (0.0, c, key(&c)));
        let mut k = 0;
        while k < by_size.len() {
            // Every unit of this |score| enters the band together.
            let size = by_size[k].0.abs();
            while k < by_size.len() && by_size[k].0.abs() == size {
                let (v, g) = by_size[k];
                match (g, v > 0.0) {
                    (true, true) => c.recheck_go += 1,
                    (true, false) => {
                        c.false_nogo -= 1;
                        c.recheck_go += 1;
                    }
                    (false, true) => {
                        c.false_go -= 1;
                        c.recheck_nogo += 1;
                    }
                    (false, false) => c.recheck_nogo += 1,
                }
                k += 1;
            }
            let beta = match by_size.get(k) {
                Some(next) => 0.5 * (size + next.0.abs()),
                None => size + ((size / n as f64).max(1e-9)),
            };
            if allowed(&c) {
                let kk = key(&c);
                if best
                    .as_ref()
                    .is_none_or(|b| kk.0.total_cmp(&b.2.0).then(kk.1.cmp(&b.2.1)).is_lt())
                {
                    best = Some((beta, c, kk));
                }
            }
        }
        best.map(|(beta, c, _)| {
            let at_zero = Boundary {
                threshold: 0.0,
                band: beta,
            };
            (at_zero, c)
        })
    }

    /// The counts at threshold 0 without a band.
    fn at_zero(&self) -> PointCounts {
        let mut c = PointCounts::default();
        for (p, &v) in self.s.iter().enumerate() {
            let go = self.go_below[p + 1] > self.go_below[p];
            match (go, v > 0.0) {
                (true, false) => c.false_nogo += 1,
                (false, true) => c.false_go += 1,
                _ => {}
            }
        }
        c.false_nogo += self.fault_go;
        c
    }

    /// The score of a cut: midway between its neighbours, or a step beyond the ends.
    fn value(&self, p: usize) -> f64 {
        let n = self.s.len();
        if n == 0 {
            return 0.0;
        }
        let step = ((self.s[n - 1] - self.s[0]) / n as f64).max(1e-9);
        match p {
            0 => self.s[0] - step,
            p if p >= n => self.s[n - 1] + step,
            p => 0.5 * (self.s[p - 1] + self.s[p]),
        }
    }

    /// The best pair of cuts by `key` among those `allowed`; of equal keys the one whose
    /// threshold lies nearest 0, the trained separator's own (held-out units are few, and
    /// a move that buys nothing on them is noise), then the lowest cuts.
    fn best(
        &self,
        allowed: &dyn Fn(&PointCounts) -> bool,
        key: &dyn Fn(&PointCounts) -> (f64, usize),
    ) -> Option<(usize, usize, PointCounts)> {
        type Key = (f64, usize, f64);
        let mut best: Option<(usize, usize, PointCounts, Key)> = None;
        for (a, &lo) in self.cuts.iter().enumerate() {
            for &hi in &self.cuts[a..] {
                let c = self.counts(lo, hi);
                if !allowed(&c) {
                    continue;
                }
                let (cost, recheck) = key(&c);
                let k = (cost, recheck, (self.value(lo) + self.value(hi)).abs());
                let better = best.as_ref().is_none_or(|b| {
                    k.0.total_cmp(&b.3.0)
                        .then(k.1.cmp(&b.3.1))
                        .then(k.2.total_cmp(&b.3.2))
                        .is_lt()
                });
                if better {
                    best = Some((lo, hi, c, k));
                }
            }
        }
        best.map(|(lo, hi, c, _)| (lo, hi, c))
    }
}

/// Chooses the operating point for `target` from `held` (signed distances), and converts it
/// to model score units by `to_score` (distance × the model file's ‖w‖).
///
/// # Errors
/// [`PointError`] when there are no held-out units, or too few NO-GO units for a false-GO
/// target to be shown at all.
pub fn choose(
    held: &[HeldOut],
    target: Target,
    to_score: f64,
    source: String,
) -> Result<OperatingPoint, PointError> {
    if held.is_empty() {
        return Err(PointError::Empty);
    }
    let sorted = Sorted::new(held);
    let n = held.len();
    let move_threshold = sorted.nogo.min(n - sorted.nogo) >= MIN_UNITS_TO_MOVE;
    // The boundary in distance units and its counts, by the rule's key.
    let search = |allowed: &dyn Fn(&PointCounts) -> bool,
                  key: &dyn Fn(&PointCounts) -> (f64, usize)| {
        if move_threshold {
            let moved = sorted.best(allowed, key).map(|(lo, hi, c)| {
                let (a, b) = (sorted.value(lo), sorted.value(hi));
                let cut = Boundary {
                    threshold: 0.5 * (a + b),
                    band: 0.5 * (b - a),
                };
                (cut, c)
            });
            // The separator's own threshold, no band, wins a tie: a move must buy something.
            let own = sorted.at_zero();
            let unmoved = Boundary {
                threshold: 0.0,
                band: 0.0,
            };
            match moved {
                Some(m) if allowed(&own) && key(&own) <= key(&m.1) => Some((unmoved, own)),
                other => other,
            }
        } else {
            sorted.best_around_zero(allowed, key)
        }
    };
    let budget_best = |share: f64, w: f64| {
        let cap = (share * n as f64 + 1e-9).floor() as usize;
        search(&|c| c.recheck() <= cap, &|c| {
            (w * c.false_go as f64 + c.false_nogo as f64, c.recheck())
        })
    };
    let (cut, counts) = match target {
        Target::RecheckBudget {
            share,
            false_go_weight,
        } => budget_best(share, false_go_weight),
        Target::FalseGo { rate, confidence } => {
            let shown =
                |k: usize| Rate::new(k as u64, sorted.nogo as u64, confidence).upper <= rate;
            if !shown(0) {
                return Err(PointError::TooFewNogo {
                    nogo: sorted.nogo,
                    target: format!("{}% at {}% confidence", rate * 100.0, confidence * 100.0),
                    bound: format!(
                        "{:.3}%",
                        Rate::new(0, sorted.nogo as u64, confidence).upper * 100.0
                    ),
                    needed: units_needed(rate, confidence).unwrap_or(u64::MAX),
                });
            }
            let most = (0..=sorted.nogo)
                .take_while(|&k| shown(k))
                .last()
                .unwrap_or(0);
            search(&|c| c.false_go <= most, &|c| {
                ((c.false_nogo + c.recheck_go) as f64, c.recheck())
            })
        }
    }
    .ok_or(PointError::Empty)?;
    let Boundary { threshold, band } = cut.scaled(to_score);
    let weight = target.trade_off_weight();
    let trade_off = TRADE_CAPS
        .iter()
        .filter_map(|&cap| {
            let (cut, counts) = budget_best(cap, weight)?;
            let Boundary { threshold, band } = cut.scaled(to_score);
            Some(TradePoint {
                recheck_cap: cap,
                threshold,
                band,
                counts,
            })
        })
        .collect();
    let source = if move_threshold {
        source
    } else {
        format!(
            "{source}; threshold kept at the separator's own: fewer than {MIN_UNITS_TO_MOVE} held-out units in a class"
        )
    };
    Ok(OperatingPoint {
        target,
        source,
        threshold,
        band,
        units: n,
        go_units: n - sorted.nogo,
        nogo_units: sorted.nogo,
        faults: held.iter().filter(|h| h.fault).count(),
        counts,
        trade_off,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn held(scores: &[(f64, bool)]) -> Vec<HeldOut> {
        scores
            .iter()
            .enumerate()
            .map(|(unit, &(distance, go))| HeldOut {
                unit,
                distance,
                go,
                fault: false,
            })
            .collect()
    }

    #[test]
    fn a_budget_buys_the_costliest_errors_first() {
        // Two NO-GO units score above two GO units; one band of 2 units catches the pair in
        // the middle, which a threshold alone cannot sort.
        let mut v: Vec<(f64, bool)> = (0..48)
            .map(|k| (-1.0 - f64::from(k) * 0.01, false))
            .collect();
        v.extend((0..48).map(|k| (1.0 + f64::from(k) * 0.01, true)));
        v.extend([(0.1, false), (-0.1, true), (0.2, false), (-0.2, true)]);
        let h = held(&v);
        let none = RecheckBudgetCase::run(&h, 0.0);
        assert_eq!(none.counts.recheck(), 0);
        // Without RECHECK, weight 5 puts the threshold above both NO-GO units: 2 GO lost.
        assert_eq!((none.counts.false_go, none.counts.false_nogo), (0, 2));
        let four = RecheckBudgetCase::run(&h, 0.04);
        assert_eq!((four.counts.false_go, four.counts.false_nogo), (0, 0));
        assert_eq!(four.counts.recheck(), 4);
        assert!(four.band > 0.0 && (four.threshold).abs() < 0.2);
    }

    struct RecheckBudgetCase;
    impl RecheckBudgetCase {
        fn run(h: &[HeldOut], share: f64) -> OperatingPoint {
            choose(
                h,
                Target::RecheckBudget {
                    share,
                    false_go_weight: 5.0,
                },
                1.0,
                "test".into(),
            )
            .unwrap()
        }
    }

    #[test]
    fn a_false_go_target_is_met_or_refused_with_the_units_it_needs() {
        let v: Vec<(f64, bool)> = (0..400)
            .map(|k| ((f64::from(k) - 200.0) / 100.0, k % 3 != 0 && k > 150))
            .collect();
        let h = held(&v);
        let op = choose(
            &h,
            Target::FalseGo {
                rate: 0.05,
                confidence: 0.95,
            },
            1.0,
            "test".into(),
        )
        .unwrap();
        let nogo = op.nogo_units as u64;
        assert!(Rate::new(op.counts.false_go as u64, nogo, 0.95).upper <= 0.05);
        let few = held(&[(0.5, true), (-0.5, false)]);
        let e = choose(
            &few,
            Target::FalseGo {
                rate: 0.01,
                confidence: 0.95,
            },
            1.0,
            "test".into(),
        )
        .unwrap_err();
        assert!(e.to_string().contains("299"), "{e}");
    }
}
