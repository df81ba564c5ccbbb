//! The trainer registry ([`TrainerKind`], [`train`]: each trainer gets its two-sided task
//! through [`AsBinary`] and says how many outcomes it separates) and evaluation: holdout logs
//! and k-fold cross-validation, per trainer.

use crate::confidence::{DEFAULT_CONFIDENCE, Rate};
use serde::Serialize;

use crate::ingest::dataset::Dataset;
use crate::train::linear::Linear;
use crate::train::maxmargin::max_margin;
use crate::train::perceptron::{PerceptronConfig, PerceptronKind, perceptron};
use crate::train::spread::Spread;
use crate::train::svm::{ClassWeight, SvmConfig};
use crate::train::task::{AsBinary, Outcomes};

/// The trainers `linegate train` offers.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum TrainerKind {
    /// Classic perceptron (Novikoff form).
    Perceptron,
    /// Averaged perceptron.
    Averaged,
    /// Pocket perceptron.
    Pocket,
    /// Soft maximum margin (hinge loss, penalty C) on every log, separable or not, trained
    /// on each channel's spread over the training units.
    MaxMargin,
    /// Hard maximum margin, on device-scaled units: only for a separable log, where it is
    /// the exactly largest gap (it fits every unit, noise included).
    HardMargin,
}

impl TrainerKind {
    /// Every trainer cross-validation compares, in report order (the hard margin only by
    /// name: on a log that is not separable it has no solution).
    pub const ALL: [Self; 4] = [
        Self::Perceptron,
        Self::Averaged,
        Self::Pocket,
        Self::MaxMargin,
    ];

    /// How many outcomes the trainer separates in one model: two for every trainer of
    /// today (a model of several classes would train them one class against the rest).
    pub fn outcomes(self) -> Outcomes {
        match self {
            Self::Perceptron
            | Self::Averaged
            | Self::Pocket
            | Self::MaxMargin
            | Self::HardMargin => Outcomes::Two,
        }
    }

    /// Name as printed and stored.
    pub fn name(self) -> &'static str {
        match self {
            Self::Perceptron => "perceptron",
            Self::Averaged => "averaged",
            Self::Pocket => "pocket",
            Self::MaxMargin => "max-margin",
            Self::HardMargin => "hard-margin",
        }
    }
}

/// Training settings shared by all trainers.
#[derive(Clone, Copy, Debug)]
pub struct TrainConfig {
    /// Epoch cap for the perceptron family.
    pub epochs: u32,
    /// Seed.
    pub seed: u64,
    /// Soft-margin penalty C of the maximum-margin trainer.
    pub c: f64,
    /// Multipliers of C per class.
    pub class_weight: ClassWeight,
}

/// A trained model and what the trainer reports.
#[derive(Clone, Debug)]
pub struct Trained {
    /// The classifier.
    pub model: Linear,
    /// Perceptron updates, if applicable.
    pub updates: Option<u64>,
    /// Soft-margin C, if the soft margin was used.
    pub c: Option<f64>,
    /// The soft margin's objective and the spread it was solved over.
    pub soft: Option<(f64, Spread)>,
}

/// Trains one trainer on the units `idx` of a two-sided task (a [`Dataset`] is GO against
/// NO-GO).
pub fn train(task: &impl AsBinary, idx: &[usize], kind: TrainerKind, cfg: TrainConfig) -> Trained {
    let task = task.binary();
    let pc = PerceptronConfig {
        epochs: cfg.epochs,
        seed: cfg.seed,
    };
    let p = |k| {
        let r = perceptron(&task, idx, k, pc);
        Trained {
            model: r.model,
            updates: Some(r.updates),
            c: None,
            soft: None,
        }
    };
    match kind {
        TrainerKind::Perceptron => p(PerceptronKind::Classic),
        TrainerKind::Averaged => p(PerceptronKind::Averaged),
        TrainerKind::Pocket => p(PerceptronKind::Pocket),
        TrainerKind::MaxMargin => {
            let run = max_margin(
                &task,
                idx,
                SvmConfig {
                    class_weight: cfg.class_weight,
                    standardise: true,
                    ..SvmConfig::soft(cfg.c)
                },
            );
            Trained {
                model: run.model,
                updates: None,
                c: Some(cfg.c),
                soft: run.objective.zip(run.spread),
            }
        }
        TrainerKind::HardMargin => Trained {
            model: max_margin(&task, idx, SvmConfig::hard()).model,
            updates: None,
            c: None,
            soft: None,
        },
    }
}

/// Decision counts on a set of units.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize)]
pub struct Counts {
    /// Units evaluated.
    pub units: usize,
    /// Units labelled GO among them.
    pub go_units: usize,
    /// Correct decisions.
    pub correct: usize,
    /// NO-GO units the model passes.
    pub false_go: usize,
    /// GO units the model fails, FAULTs on GO units included.
    pub false_nogo: usize,
    /// Units with a reading outside its channel's range: the device shows FAULT and NO-GO
    /// (a false NO-GO for a GO unit, a correct NO-GO for a NO-GO unit).
    pub faults: usize,
}

impl Counts {
    /// Fraction correct.
    pub fn accuracy(&self) -> f64 {
        if self.units == 0 {
            0.0
        } else {
            self.correct as f64 / self.units as f64
        }
    }

    /// False GO among the NO-GO units and false NO-GO among the GO units, with exact
    /// (Clopper–Pearson) bounds at 95 %.
    pub fn rates(&self) -> (Rate, Rate) {
        let nogo = self.units - self.go_units;
        (
            Rate::new(self.false_go as u64, nogo as u64, DEFAULT_CONFIDENCE),
            Rate::new(
                self.false_nogo as u64,
                self.go_units as u64,
                DEFAULT_CONFIDENCE,
            ),
        )
    }

    /// Adds another set's counts.
    pub fn add(&mut self, o: Counts) {
        self.units += o.units;
        self.go_units += o.go_units;
        self.correct += o.correct;
        self.false_go += o.false_go;
        self.false_nogo += o.false_nogo;
        self.faults += o.faults;
    }
}

/// Counts decisions of `model` (GO when score > `threshold`) on the units `idx`.
pub fn evaluate(model: &Linear, threshold: f64, task: &impl AsBinary, idx: &[usize]) -> Counts {
    let task = task.binary();
    let ds = task.ds;
    let mut c = Counts::default();
    for (s, &i) in model.scores(ds, idx).iter().zip(idx) {
        c.units += 1;
        c.go_units += usize::from(task.is_positive(i));
        let fault = ds.fault(i).is_some();
        c.faults += usize::from(fault);
        let go = !fault && *s > threshold;
        match (go, task.is_positive(i)) {
            (true, true) | (false, false) => c.correct += 1,
            (true, false) => c.false_go += 1,
            (false, true) => c.false_nogo += 1,
        }
    }
    c
}

/// One row of the per-trainer table.
#[derive(Clone, Debug, Serialize)]
pub struct EvalRow {
    /// Trainer.
    pub trainer: TrainerKind,
    /// Pooled counts over the held-out folds (or the holdout log).
    pub counts: Counts,
    /// Accuracy.
    pub accuracy: f64,
    /// Each held-out unit's score, in the order of the folds: what the operating point is
    /// chosen from.
    #[serde(skip)]
    pub held_out: Vec<HeldOut>,
}

/// One unit scored by a model that did not train on it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct HeldOut {
    /// The unit's index in its dataset.
    pub unit: usize,
    /// Signed distance from the fold model's hyperplane in device-scaled units: score / ‖w‖,
    /// a unit that models of different scale share.
    pub distance: f64,
    /// Whether the unit is GO.
    pub go: bool,
    /// Whether the device shows FAULT for it (its score does not decide).
    pub fault: bool,
}

/// Every unit of `idx` as scored by `model`, for the operating point.
pub fn held_out(model: &Linear, task: &impl AsBinary, idx: &[usize]) -> Vec<HeldOut> {
    let task = task.binary();
    let ds = task.ds;
    let norm = model.norm();
    let norm = if norm > 0.0 { norm } else { 1.0 };
    model
        .scores(ds, idx)
        .iter()
        .zip(idx)
        .map(|(s, &i)| HeldOut {
            unit: i,
            distance: s / norm,
            go: task.is_positive(i),
            fault: ds.fault(i).is_some(),
        })
        .collect()
}

/// k-fold cross-validation of each trainer; counts are pooled over the folds. Folds and
/// trainers run in parallel; the pooled integer counts do not depend on the order.
pub fn cross_validate(
    task: &impl AsBinary,
    k: usize,
    kinds: &[TrainerKind],
    cfg: TrainConfig,
    progress: Option<&indicatif::ProgressBar>,
) -> Vec<EvalRow> {
    use rayon::prelude::*;
    let task = task.binary();
    let folds = task.ds.folds(k, cfg.seed);
    let jobs: Vec<(usize, usize)> = (0..kinds.len())
        .flat_map(|t| (0..folds.len()).map(move |f| (t, f)))
        .collect();
    let results: Vec<(usize, Counts, Vec<HeldOut>)> = jobs
        .par_iter()
        .map(|&(t, f)| {
            let train_idx = Dataset::training_of_fold(&folds, f);
            if let Some(p) = progress {
                p.set_message(format!(
                    "{} fold {}/{}",
                    kinds[t].name(),
                    f + 1,
                    folds.len()
                ));
            }
            let model = train(&task, &train_idx, kinds[t], cfg).model;
            if let Some(p) = progress {
                p.inc(1);
            }
            (
                t,
                evaluate(&model, 0.0, &task, &folds[f]),
                held_out(&model, &task, &folds[f]),
            )
        })
        .collect();
    kinds
        .iter()
        .enumerate()
        .map(|(t, &kind)| {
            let mut total = Counts::default();
            let mut scores = Vec::new();
            for (_, c, h) in results.iter().filter(|(u, _, _)| *u == t) {
                total.add(*c);
                scores.extend_from_slice(h);
            }
            EvalRow {
                trainer: kind,
                counts: total,
                accuracy: total.accuracy(),
                held_out: scores,
            }
        })
        .collect()
}
