//! The float form of a model of several classes: one linear row per class, and the rule
//! that decides between them (the float twin of `shared_model::classes`).
//!
//! Each row scores a unit on the same scaled inputs as a two-sided model
//! (`s_k = Σ weights_k[i] · (raw_i − offset_i) / half_i + bias_k`). The leading class is the
//! one with the highest score; its lead is its score minus the runner-up's. The leader is
//! decided when its lead reaches `go_gap` (the GO class) or `class_gap` (a failure class),
//! else the unit is RECHECK. The quantiser turns both gaps into accumulator units, at
//! least 1, so equal scores never decide on the device.

use serde::{Deserialize, Serialize};

use crate::train::linear::Linear;

/// How the rows were trained.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, clap::ValueEnum)]
#[serde(rename_all = "kebab-case")]
pub enum ClassRule {
    /// One row per class, each trained by the chosen two-sided trainer as that class
    /// against the rest.
    OneVsRest,
    /// All rows at once by the multi-class maximum margin (Crammer–Singer).
    Joint,
}

/// One class's row.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClassRowF {
    /// The class's name (the device keeps at most 24 bytes).
    pub name: String,
    /// Weights on scaled inputs, in channel order.
    pub weights: Vec<f64>,
    /// Bias.
    pub bias: f64,
}

impl ClassRowF {
    /// The row as a linear map.
    pub fn linear(&self) -> Linear {
        Linear {
            w: self.weights.clone(),
            b: self.bias,
        }
    }
}

/// The classes of a float model and their decision rule.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FloatClasses {
    /// How the rows were trained.
    pub rule: ClassRule,
    /// Index of the GO class in `rows`; `None` when no class is GO (diagnosis only).
    pub go: Option<usize>,
    /// Least lead (score units) with which the GO class is decided; > 0.
    pub go_gap: f64,
    /// Least lead (score units) with which a failure class is decided; > 0.
    pub class_gap: f64,
    /// The classes, at least two, in the order the log's class list gives.
    pub rows: Vec<ClassRowF>,
}

/// A float decision: the leading class, its lead, and whether it is decided.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FloatDecision {
    /// The class with the highest score (the lowest index among equal scores).
    pub leader: usize,
    /// Its score minus the runner-up's (≥ 0).
    pub lead: f64,
    /// Whether the lead reaches the leader's gap (else RECHECK).
    pub decided: bool,
}

impl FloatClasses {
    /// Each row's score for scaled inputs `x`.
    pub fn scores(&self, x: &[f64]) -> Vec<f64> {
        self.rows
            .iter()
            .map(|r| r.weights.iter().zip(x).map(|(w, v)| w * v).sum::<f64>() + r.bias)
            .collect()
    }

    /// The rule of the module docs over `scores` (one per row).
    pub fn decide(&self, scores: &[f64]) -> FloatDecision {
        let mut leader = 0;
        for (k, &s) in scores.iter().enumerate() {
            if s > scores[leader] {
                leader = k;
            }
        }
        let runner_up = scores
            .iter()
            .enumerate()
            .filter(|&(k, _)| k != leader)
            .map(|(_, &s)| s)
            .fold(f64::NEG_INFINITY, f64::max);
        let lead = scores.get(leader).map_or(0.0, |s| s - runner_up);
        let gap = if Some(leader) == self.go {
            self.go_gap
        } else {
            self.class_gap
        };
        FloatDecision {
            leader,
            lead,
            decided: scores.len() >= 2 && lead >= gap,
        }
    }

    /// The row of the class a unit's label code stands for (+1 the GO class, −1 − k the
    /// k-th other class in row order; see `ingest::classes`), or `None` for 0 (no label)
    /// or a code of no row.
    pub fn row_of_code(&self, code: i8) -> Option<usize> {
        if code > 0 {
            return self.go;
        }
        let rank = usize::try_from(-1 - i16::from(code)).ok()?;
        (0..self.rows.len())
            .filter(|&k| Some(k) != self.go)
            .nth(rank)
    }

    /// The largest weight magnitude over every row (the file normalises it to 1).
    pub fn largest_weight(&self) -> f64 {
        self.rows
            .iter()
            .flat_map(|r| r.weights.iter())
            .fold(0.0f64, |m, w| m.max(w.abs()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn classes() -> FloatClasses {
        let row = |name: &str, w: f64, b: f64| ClassRowF {
            name: name.into(),
            weights: vec![w],
            bias: b,
        };
        FloatClasses {
            rule: ClassRule::Joint,
            go: Some(0),
            go_gap: 0.5,
            class_gap: 0.25,
            rows: vec![
                row("good", 1.0, 0.0),
                row("short", -1.0, 0.0),
                row("crack", 0.0, 0.1),
            ],
        }
    }

    #[test]
    fn decides_by_lead_and_gap() {
        let c = classes();
        let d = c.decide(&c.scores(&[1.0]));
        assert_eq!((d.leader, d.decided), (0, true));
        assert!((d.lead - 0.9).abs() < 1e-12);
        let d = c.decide(&c.scores(&[0.3]));
        assert_eq!((d.leader, d.decided), (0, false), "lead 0.2 < GO gap 0.5");
        let d = c.decide(&c.scores(&[-0.5]));
        assert_eq!((d.leader, d.decided), (1, true), "lead 0.4 >= class gap");
    }
}
