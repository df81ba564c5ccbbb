//! The operating point and the choice of C of a model of several classes, on held-out
//! leads: each held-out unit's leading class and its lead (its score minus the runner-up's,
//! rows normalised as the file keeps them, so fold models and the final model share a
//! scale).
//!
//! What a decision costs: a failure unit decided GO (false GO) `false_go_weight`; a GO unit
//! decided a failure class (GO lost) 1; a failure unit decided another failure class
//! (misrouted) 1. RECHECK costs nothing but is capped. The GO gap only moves GO-led units
//! and the class gap only failure-led ones, so the two are chosen over two sorted lists.

use serde::{Deserialize, Serialize};

use crate::confidence::{Rate, units_needed};
use crate::ingest::dataset::Dataset;
use crate::train::linear::Linear;
use crate::train::one_vs_rest::{ClassFit, normalised};

/// The smallest gap: any lead above it decides (the quantiser turns it into 1 LSB).
pub const MIN_GAP: f64 = 1e-9;

/// Candidate gaps tried at most per side.
const CANDIDATES: usize = 400;

/// One held-out unit: its class, the class that leads, and by how much.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Lead {
    /// The unit's class (index into the class list).
    pub class: u8,
    /// The leading class.
    pub leader: u8,
    /// Leader's score minus the runner-up's (normalised rows), ≥ 0.
    pub lead: f64,
}

/// The leads of `rows` (normalised here) on the units `idx`.
pub fn leads(rows: &[Linear], ds: &Dataset, class: &[u8], idx: &[usize]) -> Vec<Lead> {
    let rows = normalised(rows);
    let mut x = vec![0.0; ds.dim()];
    let mut s = vec![0.0; rows.len()];
    idx.iter()
        .map(|&i| {
            ds.scaled_row(i, &mut x);
            for (v, r) in s.iter_mut().zip(&rows) {
                *v = r.score(&x);
            }
            let (leader, lead) = leader_of(&s);
            Lead {
                class: class[i],
                leader: u8::try_from(leader).unwrap_or(u8::MAX),
                lead,
            }
        })
        .collect()
}

/// The highest score's index (lowest index on ties) and its lead over the runner-up.
pub fn leader_of(s: &[f64]) -> (usize, f64) {
    let leader = (0..s.len()).fold(0, |b, k| if s[k] > s[b] { k } else { b });
    let second = (0..s.len())
        .filter(|&k| k != leader)
        .map(|k| s[k])
        .fold(f64::NEG_INFINITY, f64::max);
    (leader, (s[leader] - second).max(0.0))
}

/// The decisions of gaps on leads: a confusion table (true class × decided class, the last
/// column RECHECK) and the cost's parts.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClassCounts {
    /// Units.
    pub units: usize,
    /// `table[true][decided]`; decided = the class list, then RECHECK.
    pub table: Vec<Vec<usize>>,
    /// Failure units decided GO.
    pub false_go: usize,
    /// GO units decided a failure class.
    pub go_lost: usize,
    /// Failure units decided another failure class.
    pub misrouted: usize,
    /// Units sent to RECHECK.
    pub recheck: usize,
    /// Units decided their own class.
    pub correct: usize,
}

impl ClassCounts {
    /// Counts `leads` under gaps (`go`: the GO class).
    pub fn of(leads: &[Lead], classes: usize, go: Option<u8>, go_gap: f64, class_gap: f64) -> Self {
        let mut c = Self {
            table: vec![vec![0; classes + 1]; classes],
            ..Self::default()
        };
        for l in leads {
            c.units += 1;
            let gap = if Some(l.leader) == go {
                go_gap
            } else {
                class_gap
            };
            let decided = l.lead >= gap;
            let col = if decided {
                usize::from(l.leader)
            } else {
                classes
            };
            if let Some(v) = c
                .table
                .get_mut(usize::from(l.class))
                .and_then(|r| r.get_mut(col))
            {
                *v += 1;
            }
            if !decided {
                c.recheck += 1;
            } else if l.leader == l.class {
                c.correct += 1;
            } else if Some(l.leader) == go {
                c.false_go += 1;
            } else if Some(l.class) == go {
                c.go_lost += 1;
            } else {
                c.misrouted += 1;
            }
        }
        c
    }

    /// Share decided right among all units (RECHECK counts as not right).
    pub fn accuracy(&self) -> f64 {
        self.correct as f64 / self.units.max(1) as f64
    }

    /// `weight` × false GO + GO lost + misrouted.
    pub fn cost(&self, weight: f64) -> f64 {
        weight * self.false_go as f64 + (self.go_lost + self.misrouted) as f64
    }
}

/// What the gaps must meet.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case", tag = "rule")]
pub enum ClassTarget {
    /// Least cost with RECHECK at most `share` of the held-out units (both gaps).
    RecheckBudget {
        /// RECHECK share allowed.
        share: f64,
        /// What a false GO costs.
        false_go_weight: f64,
    },
    /// The GO gap so that failure units decided GO meet the exact upper bound `rate` at
    /// `confidence`, fewest GO units lost; the class gap by the budget.
    FalseGo {
        /// Largest false-GO rate.
        rate: f64,
        /// Confidence of the one-sided Clopper–Pearson bound.
        confidence: f64,
        /// RECHECK share allowed for the class gap.
        share: f64,
        /// What a false GO costs.
        false_go_weight: f64,
    },
    /// The smallest gaps ([`MIN_GAP`]).
    Smallest,
}

/// The gaps chosen, and why, as the model file keeps them.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClassGaps {
    /// The rule met.
    pub target: ClassTarget,
    /// Where the held-out leads came from.
    pub source: String,
    /// Least lead of a GO decision (normalised score units).
    pub go_gap: f64,
    /// Least lead of a failure-class decision.
    pub class_gap: f64,
    /// The decisions on the held-out units.
    pub counts: ClassCounts,
    /// Failure units held out (the false-GO rate's denominator).
    pub failure_units: usize,
    /// The exact upper bound of the false-GO rate at the target's confidence (or 95 %).
    pub false_go_upper: f64,
    /// One sentence: why these gaps.
    pub reason: String,
}

/// Candidate gaps for leads `v` (any order): the smallest gap, then midpoints between
/// distinct sorted leads, evenly thinned to [`CANDIDATES`], then above the largest.
fn candidates(v: &mut [f64]) -> Vec<f64> {
    v.sort_by(f64::total_cmp);
    let mut out = vec![MIN_GAP];
    let step = v.len().div_ceil(CANDIDATES).max(1);
    for k in (1..v.len()).step_by(step) {
        let g = 0.5 * (v[k - 1] + v[k]);
        if g > MIN_GAP && v[k] > v[k - 1] {
            out.push(g);
        }
    }
    if let Some(&top) = v.last() {
        out.push((top * 1.001).max(MIN_GAP) + MIN_GAP);
    }
    out.dedup();
    out
}

/// Chooses the gaps on `leads` (`classes` classes, `go` the GO class).
///
/// # Errors
/// A false-GO target the held-out failure units are too few to show (naming how many it
/// needs), or no held-out units.
pub fn choose_gaps(
    leads: &[Lead],
    classes: usize,
    go: Option<u8>,
    target: ClassTarget,
    source: &str,
) -> Result<ClassGaps, String> {
    let failure_units = leads.iter().filter(|l| Some(l.class) != go).count();
    let conf = match target {
        ClassTarget::FalseGo { confidence, .. } => confidence,
        _ => crate::confidence::DEFAULT_CONFIDENCE,
    };
    let finish = |go_gap: f64, class_gap: f64, reason: String| {
        let counts = ClassCounts::of(leads, classes, go, go_gap, class_gap);
        let upper = Rate::new(counts.false_go as u64, failure_units as u64, conf).upper;
        ClassGaps {
            target,
            source: source.to_string(),
            go_gap,
            class_gap,
            counts,
            failure_units,
            false_go_upper: upper,
            reason,
        }
    };
    if let ClassTarget::Smallest = target {
        return Ok(finish(
            MIN_GAP,
            MIN_GAP,
            "--no-operating-point: the smallest gaps, every leader decided".into(),
        ));
    }
    if leads.is_empty() {
        return Err("no held-out units to choose the gaps on".into());
    }
    let go_led: Vec<&Lead> = leads.iter().filter(|l| Some(l.leader) == go).collect();
    let fail_led: Vec<&Lead> = leads.iter().filter(|l| Some(l.leader) != go).collect();
    let mut gv: Vec<f64> = go_led.iter().map(|l| l.lead).collect();
    let mut fv: Vec<f64> = fail_led.iter().map(|l| l.lead).collect();
    let (gc, fc) = (candidates(&mut gv), candidates(&mut fv));
    // Each side's cost and RECHECK at each candidate.
    let side = |led: &[&Lead], cands: &[f64], weight: f64| -> Vec<(f64, usize)> {
        cands
            .iter()
            .map(|&t| {
                let (mut cost, mut re) = (0.0, 0);
                for l in led {
                    if l.lead < t {
                        re += 1;
                    } else if l.leader != l.class {
                        cost += if Some(l.leader) == go { weight } else { 1.0 };
                    }
                }
                (cost, re)
            })
            .collect()
    };
    let (share, weight) = match target {
        ClassTarget::RecheckBudget {
            share,
            false_go_weight,
        }
        | ClassTarget::FalseGo {
            share,
            false_go_weight,
            ..
        } => (share, false_go_weight),
        ClassTarget::Smallest => (0.0, 1.0),
    };
    let cap = (share * leads.len() as f64).floor() as usize;
    let fs = side(&fail_led, &fc, weight);
    if let ClassTarget::FalseGo {
        rate, confidence, ..
    } = target
    {
        // The smallest GO gap whose false GO meets the bound: fewest GO units lost.
        let meets = |t: f64| {
            let fg = go_led
                .iter()
                .filter(|l| l.lead >= t && Some(l.class) != go)
                .count();
            Rate::new(fg as u64, failure_units as u64, confidence).upper <= rate
        };
        let Some(&go_gap) = gc.iter().find(|&&t| meets(t)) else {
            let need = units_needed(rate, confidence).map_or("more".to_string(), |n| n.to_string());
            return Err(format!(
                "--false-go-target {}%@{}%: the held-out failure units are {failure_units}; showing a false-GO rate at most that needs at least {need} with none decided GO",
                crate::confidence::percent(rate),
                crate::confidence::percent(confidence)
            ));
        };
        let go_re = go_led.iter().filter(|l| l.lead < go_gap).count();
        let within = (0..fc.len())
            .filter(|&j| go_re + fs[j].1 <= cap)
            .min_by(|&a, &b| fs[a].0.total_cmp(&fs[b].0).then(fs[a].1.cmp(&fs[b].1)));
        // The GO gap the target needs may already hold more units in RECHECK than the
        // budget allows: then the smallest class gap, and the reason says so.
        let (best, class_reason) = match within {
            Some(j) => (
                j,
                format!(
                    "the class gap of least cost with RECHECK at most {} % of the held-out units",
                    crate::confidence::percent(share)
                ),
            ),
            None => (
                0,
                format!(
                    "RECHECK at most {} % of the held-out units cannot be met with this GO gap ({go_re} of {} units are RECHECK by it alone): the smallest class gap",
                    crate::confidence::percent(share),
                    leads.len()
                ),
            ),
        };
        let reason = format!(
            "the smallest GO gap whose false GO on the {failure_units} held-out failure units has an exact upper bound at most {} % at {} % confidence; {class_reason}",
            crate::confidence::percent(rate),
            crate::confidence::percent(confidence),
        );
        return Ok(finish(go_gap, fc[best], reason));
    }
    let gs = side(&go_led, &gc, weight);
    let mut best = (0, 0);
    let mut best_key = (f64::INFINITY, usize::MAX);
    for (a, g) in gs.iter().enumerate() {
        for (b, f) in fs.iter().enumerate() {
            if g.1 + f.1 > cap {
                continue;
            }
            let key = (g.0 + f.0, g.1 + f.1);
            if key.0 < best_key.0 || (key.0 == best_key.0 && key.1 < best_key.1) {
                best_key = key;
                best = (a, b);
            }
        }
    }
    // No pair of gaps keeps RECHECK within the budget: the smallest gaps, said so.
    let reason = if best_key.0.is_finite() {
        format!(
            "the gaps of least cost ({weight} × false GO + GO lost + misrouted = {}) on {} held-out units with RECHECK at most {} % of them",
            best_key.0,
            leads.len(),
            crate::confidence::percent(share)
        )
    } else {
        format!(
            "no gaps keep RECHECK at most {} % of the {} held-out units: the smallest gaps",
            crate::confidence::percent(share),
            leads.len()
        )
    };
    Ok(finish(gc[best.0], fc[best.1], reason))
}

/// Out-of-fold leads over `folds` stratified folds (seeded): each unit's lead from the
/// rows trained without its fold. Units in file order.
pub fn out_of_fold(
    fit: &ClassFit,
    ds: &Dataset,
    class: &[u8],
    names: &[String],
    folds: usize,
    seed: u64,
) -> Vec<(usize, Lead)> {
    let parts = ds.folds(folds, seed);
    let fit = &ClassFit {
        progress: false,
        ..*fit
    };
    let mut out: Vec<(usize, Lead)> = Vec::with_capacity(ds.len());
    for f in 0..parts.len() {
        let train = Dataset::training_of_fold(&parts, f);
        let rows = fit.fit(ds, class, names, &train).rows;
        out.extend(
            parts[f]
                .iter()
                .copied()
                .zip(leads(&rows, ds, class, &parts[f])),
        );
    }
    out.sort_by_key(|p| p.0);
    out
}

/// One C of the grid and its out-of-fold decisions (every leader decided).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClassCRow {
    /// The penalty.
    pub c: f64,
    /// Failure units decided GO.
    pub false_go: usize,
    /// GO units decided a failure class.
    pub go_lost: usize,
    /// Failure units decided another failure class.
    pub misrouted: usize,
    /// weight × false GO + GO lost + misrouted.
    pub cost: f64,
}

/// How C was chosen for a model of classes.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClassCChoice {
    /// Folds.
    pub folds: usize,
    /// Seed of the folds.
    pub seed: u64,
    /// Units the folds were drawn from (a stratified sample on a large log).
    pub searched_units: usize,
    /// Every C tried.
    pub rows: Vec<ClassCRow>,
    /// The chosen C.
    pub chosen: f64,
    /// Why.
    pub reason: String,
}

/// Chooses C over `grid` (ascending) by `folds`-fold cross-validation on the units
/// `sample` of `ds` (the cheapest; of equal costs the smallest C).
#[allow(clippy::too_many_arguments)]
pub fn choose_c(
    fit: &ClassFit,
    ds: &Dataset,
    class: &[u8],
    names: &[String],
    go: Option<u8>,
    sample: &[usize],
    folds: usize,
    grid: &[f64],
    weight: f64,
) -> ClassCChoice {
    let sub = ds.subset(sample);
    let sub_class: Vec<u8> = sample.iter().map(|&i| class[i]).collect();
    let rows: Vec<ClassCRow> = grid
        .iter()
        .map(|&c| {
            let f = ClassFit {
                cfg: crate::train::eval::TrainConfig { c, ..fit.cfg },
                progress: false,
                ..*fit
            };
            let l: Vec<Lead> = out_of_fold(&f, &sub, &sub_class, names, folds, fit.cfg.seed)
                .into_iter()
                .map(|p| p.1)
                .collect();
            let k = ClassCounts::of(&l, names.len(), go, MIN_GAP, MIN_GAP);
            ClassCRow {
                c,
                false_go: k.false_go,
                go_lost: k.go_lost,
                misrouted: k.misrouted,
                cost: k.cost(weight),
            }
        })
        .collect();
    // Of equal costs the smallest C: on a log the rows separate every large C ties, and a
    // larger one only slows the solvers (the dual's variables grow with C) without
    // changing a held-out decision.
    let best = (0..rows.len()).fold(0, |b, k| if rows[k].cost < rows[b].cost { k } else { b });
    let chosen = rows.get(best).map_or(1.0, |r| r.c);
    let reason = rows.get(best).map_or_else(String::new, |r| {
        format!(
            "C = {} had the lowest cross-validated cost of the {} tried ({} = {weight} × {} false GO + {} GO lost + {} misrouted over {} units in {folds} folds)",
            r.c,
            rows.len(),
            r.cost,
            r.false_go,
            r.go_lost,
            r.misrouted,
            sample.len()
        )
    });
    ClassCChoice {
        folds,
        seed: fit.cfg.seed,
        searched_units: sample.len(),
        rows,
        chosen,
        reason,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lead(class: u8, leader: u8, lead: f64) -> Lead {
        Lead {
            class,
            leader,
            lead,
        }
    }

    #[test]
    fn counts_split_false_go_lost_and_misrouted() {
        let l = [
            lead(0, 0, 0.5),
            lead(1, 0, 0.2),
            lead(0, 1, 0.3),
            lead(1, 2, 0.4),
            lead(2, 2, 0.01),
        ];
        let c = ClassCounts::of(&l, 3, Some(0), 0.1, 0.1);
        assert_eq!(
            (c.correct, c.false_go, c.go_lost, c.misrouted, c.recheck),
            (1, 1, 1, 1, 1)
        );
        assert_eq!(c.table[2][3], 1);
        assert_eq!(c.cost(2.0), 4.0);
    }

    #[test]
    fn a_false_go_target_raises_the_go_gap_above_every_failure_lead() {
        // 300 failure units, 12 led by GO with small leads; GO units led by GO with larger.
        let mut l = Vec::new();
        for n in 0..300 {
            l.push(if n < 12 {
                lead(1, 0, 0.01 * f64::from(n + 1))
            } else {
                lead(1, 1, 1.0)
            });
            l.push(lead(0, 0, 0.5 + 0.001 * f64::from(n)));
        }
        let g = choose_gaps(
            &l,
            2,
            Some(0),
            ClassTarget::FalseGo {
                rate: 0.01,
                confidence: 0.95,
                share: 0.05,
                false_go_weight: 2.0,
            },
            "test",
        )
        .unwrap();
        assert_eq!(g.counts.false_go, 0);
        assert!(g.go_gap > 0.12 && g.go_gap < 0.5, "{}", g.go_gap);
        assert!(g.false_go_upper <= 0.01);
        // Too few failure units for 0.1 %.
        let e = choose_gaps(
            &l,
            2,
            Some(0),
            ClassTarget::FalseGo {
                rate: 0.001,
                confidence: 0.95,
                share: 0.05,
                false_go_weight: 2.0,
            },
            "test",
        )
        .unwrap_err();
        assert!(e.contains("at least"), "{e}");
    }
}
