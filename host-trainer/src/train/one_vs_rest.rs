//! Rows of a model of several classes, by either rule: one class against the rest through
//! the two-sided trainers (each class's task a [`Binary`] view with ±1 signs built from
//! the class codes), or all classes at once ([`crate::train::crammer_singer`]). Rows are
//! over device-scaled inputs and are compared as they are: the class of the highest score
//! leads.

use crate::ingest::dataset::Dataset;
use crate::train::class_rows::ClassRule;
use crate::train::crammer_singer::{JointConfig, joint};
use crate::train::eval::{TrainConfig, TrainerKind, train};
use crate::train::linear::Linear;
use crate::train::task::Binary;

/// Each unit's class as an index into the dataset's class list (the rows' order); a unit
/// without a class (no label) gets 0, and is never among the units trained on.
pub fn class_index(ds: &Dataset) -> Vec<u8> {
    (0..ds.len()).map(|i| ds.class_of(i).unwrap_or(0)).collect()
}

/// The signs of class `k` against the rest: +1 for its units, −1 for every other.
pub fn signs_of(class: &[u8], k: u8) -> Vec<i8> {
    class.iter().map(|&c| if c == k { 1 } else { -1 }).collect()
}

/// How the rows are trained.
#[derive(Clone, Copy, Debug)]
pub struct ClassFit {
    /// One-vs-rest or joint.
    pub rule: ClassRule,
    /// The two-sided trainer one-vs-rest uses.
    pub trainer: TrainerKind,
    /// Its settings (C, seed, epochs); C is the joint trainer's too.
    pub cfg: TrainConfig,
    /// The joint trainer's tolerance (`None`: by size).
    pub eps: Option<f64>,
    /// The joint trainer's most passes.
    pub max_passes: usize,
    /// Progress lines on long work.
    pub progress: bool,
}

/// What training the rows gives.
#[derive(Clone, Debug)]
pub struct FittedRows {
    /// One row per class, device-scaled inputs.
    pub rows: Vec<Linear>,
    /// The joint run's objective, spread and passes (joint only).
    pub joint: Option<crate::train::crammer_singer::JointRun>,
}

impl ClassFit {
    /// Trains one row per class of `names` on the units `idx` (`class`: [`class_index`]).
    pub fn fit(&self, ds: &Dataset, class: &[u8], names: &[String], idx: &[usize]) -> FittedRows {
        match self.rule {
            ClassRule::Joint => {
                let run = joint(
                    ds,
                    class,
                    names.len(),
                    idx,
                    JointConfig {
                        c: self.cfg.c,
                        seed: self.cfg.seed,
                        eps: self.eps,
                        max_passes: self.max_passes,
                        progress: self.progress,
                    },
                );
                FittedRows {
                    rows: run.rows.clone(),
                    joint: Some(run),
                }
            }
            ClassRule::OneVsRest => {
                let rows = names
                    .iter()
                    .enumerate()
                    .map(|(k, name)| {
                        let signs = signs_of(class, u8::try_from(k).unwrap_or(u8::MAX));
                        if self.progress {
                            crate::progress::line(|| {
                                format!("one-vs-rest: training {name} against the rest")
                            });
                        }
                        train(&Binary::new(ds, &signs, name), idx, self.trainer, self.cfg).model
                    })
                    .collect();
                FittedRows { rows, joint: None }
            }
        }
    }
}

/// The largest weight magnitude over `rows` (1 when every weight is 0): the file divides
/// every row, and the gaps, by it.
pub fn largest_weight(rows: &[Linear]) -> f64 {
    let m = rows
        .iter()
        .flat_map(|r| r.w.iter())
        .fold(0.0f64, |m, w| m.max(w.abs()));
    if m > 0.0 && m.is_finite() { m } else { 1.0 }
}

/// `rows` divided by their [`largest_weight`].
pub fn normalised(rows: &[Linear]) -> Vec<Linear> {
    let s = largest_weight(rows);
    rows.iter()
        .map(|r| Linear {
            w: r.w.iter().map(|w| w / s).collect(),
            b: r.b / s,
        })
        .collect()
}
