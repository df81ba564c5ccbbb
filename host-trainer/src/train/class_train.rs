//! Training a model of several classes, as one call: C (given, or chosen by stratified
//! k-fold cross-validation), the rows by the chosen rule on every training unit, held-out
//! leads (out-of-fold, else the holdout split), the gaps, and the float model file.

use crate::error::InputError;
use crate::ingest::dataset::Dataset;
use crate::train::c_choice::{CPolicy, DEFAULT_C, search_sample};
use crate::train::class_file::{ClassFigures, ClassSummary, JointFigures};
use crate::train::class_point::{
    ClassCounts, ClassTarget, Lead, MIN_GAP, choose_c, choose_gaps, leads, out_of_fold,
};
use crate::train::class_rows::ClassRule;
use crate::train::eval::{TrainConfig, TrainerKind};
use crate::train::float_model::{FloatModel, HoldoutSplit, InputFile, Provenance, TrainingSummary};
use crate::train::one_vs_rest::{ClassFit, class_index, largest_weight};
use crate::train::svm::ClassWeight;

/// What to train.
#[derive(Clone, Debug)]
pub struct ClassRequest<'a> {
    /// One-vs-rest or joint.
    pub rule: ClassRule,
    /// The two-sided trainer of one-vs-rest.
    pub trainer: TrainerKind,
    /// Epoch cap (perceptron family).
    pub epochs: u32,
    /// Seed of folds, visiting orders and shuffles.
    pub seed: u64,
    /// C: searched over a grid or given.
    pub c: CPolicy,
    /// What a false GO costs against a GO unit lost or a misrouted failure.
    pub false_go_weight: f64,
    /// What the gaps meet.
    pub target: ClassTarget,
    /// k of the cross-validation (0 or 1: none).
    pub folds: usize,
    /// Units held out of the training log, whose leads place the gaps without folds.
    pub point_holdout: Option<&'a Dataset>,
    /// The holdout split recorded in the provenance.
    pub holdout_split: Option<HoldoutSplit>,
    /// How the log was read.
    pub read_with: Option<crate::ingest::options::RecordedOptions>,
    /// The run's settings and their sources.
    pub settings: Vec<crate::project::Setting>,
    /// Progress lines on long work.
    pub progress: bool,
}

/// What training found.
#[derive(Clone, Debug, serde::Serialize)]
pub struct ClassOutcome {
    /// The model.
    pub model: FloatModel,
    /// Training units' decisions, every leader decided.
    pub training: ClassCounts,
    /// Decisions on a holdout log (`evaluate_holdout`), with the model's gaps.
    pub holdout: Option<ClassCounts>,
    /// Choices made without being asked.
    pub notes: Vec<String>,
}

impl ClassOutcome {
    /// The model's decisions on a holdout log read with its classes and scaling.
    pub fn evaluate_holdout(&mut self, hd: &Dataset) {
        let Some(c) = &self.model.classes else {
            return;
        };
        let rows: Vec<_> = c.rows.iter().map(|r| r.linear()).collect();
        let class = class_index(hd);
        let idx: Vec<usize> = (0..hd.len())
            .filter(|&i| hd.class_of(i).is_some())
            .collect();
        let go = c.go.and_then(|g| u8::try_from(g).ok());
        let l = leads(&rows, hd, &class, &idx);
        self.holdout = Some(ClassCounts::of(&l, c.rows.len(), go, c.go_gap, c.class_gap));
    }
}

/// Trains a model of the classes `ds` was read with.
///
/// # Errors
/// A class without training units; a false-GO target the held-out units cannot show;
/// rows without a direction.
pub fn train_classes(
    ds: &Dataset,
    sheet: Option<&InputFile>,
    req: &ClassRequest<'_>,
) -> Result<ClassOutcome, InputError> {
    let names: Vec<String> = ds.classes.names().map(str::to_string).collect();
    let counts = ds.class_counts();
    let missing: Vec<&str> = counts.iter().filter(|c| c.1 == 0).map(|c| c.0).collect();
    if !missing.is_empty() {
        return Err(InputError::ClassWithoutUnits {
            path: ds.path.clone(),
            missing: missing.join(", "),
            counts: counts
                .iter()
                .map(|(c, n)| format!("{c} {n}"))
                .collect::<Vec<_>>()
                .join(", "),
        });
    }
    let class = class_index(ds);
    let go = ds.classes.go;
    let idx = ds.all();
    let mut notes = Vec::new();
    let mut fit = ClassFit {
        rule: req.rule,
        trainer: req.trainer,
        cfg: TrainConfig {
            epochs: req.epochs,
            seed: req.seed,
            c: DEFAULT_C,
            class_weight: ClassWeight::EVEN,
        },
        eps: None,
        // A pass over a small log costs little, and the tight tolerance may need many.
        max_passes: (50_000_000 / ds.len().max(1)).clamp(1000, 200_000),
        // Lines only on long work.
        progress: req.progress && ds.len() >= 100_000,
    };
    // C matters to the soft margin and the joint rule; the perceptron family has none.
    let uses_c = req.rule == ClassRule::Joint || req.trainer == TrainerKind::MaxMargin;
    let c_choice = match (&req.c, uses_c) {
        (CPolicy::Fixed(c), _) => {
            fit.cfg.c = *c;
            None
        }
        (CPolicy::Search(grid), true) if req.folds >= 2 => {
            let sample = search_sample(ds, req.seed);
            if fit.progress {
                crate::progress::line(|| {
                    format!(
                        "choosing C over {} values by {}-fold cross-validation on {} units",
                        grid.len(),
                        req.folds,
                        sample.len()
                    )
                });
            }
            let search = ClassFit {
                // The search compares held-out decisions, not objectives.
                eps: Some(if sample.len() > 5000 {
                    crate::train::crammer_singer::LOOSE_EPS
                } else {
                    1e-3
                }),
                max_passes: 200,
                ..fit
            };
            let choice = choose_c(
                &search,
                ds,
                &class,
                &names,
                go,
                &sample,
                req.folds,
                grid,
                req.false_go_weight,
            );
            fit.cfg.c = choice.chosen;
            Some(choice)
        }
        (CPolicy::Search(_), true) => {
            notes.push(format!(
                "C = {DEFAULT_C}: no folds to choose it on (--folds 0 or 1)"
            ));
            None
        }
        (CPolicy::Search(_), false) => None,
    };
    let fitted = fit.fit(ds, &class, &names, &idx);
    let rows = fitted.rows;
    let scale = largest_weight(&rows);
    if rows
        .iter()
        .any(|r| !(r.w.iter().all(|w| w.is_finite()) && r.b.is_finite()))
        || rows.iter().all(|r| r.w.iter().all(|&w| w == 0.0))
    {
        return Err(InputError::NoDirection {
            path: ds.path.clone(),
            detail: "every class row has zero weights or a value that is not finite".into(),
        });
    }
    // Held-out leads for the gaps: out-of-fold, else the holdout split.
    let go8 = go;
    let held: Option<(Vec<Lead>, String)> = if req.folds >= 2 {
        let oof = out_of_fold(&fit, ds, &class, &names, req.folds, req.seed);
        Some((
            oof.into_iter().map(|p| p.1).collect(),
            format!(
                "out-of-fold units of {}-fold cross-validation ({} units)",
                req.folds,
                ds.len()
            ),
        ))
    } else {
        req.point_holdout.map(|hd| {
            let hc = class_index(hd);
            let hidx: Vec<usize> = (0..hd.len())
                .filter(|&i| hd.class_of(i).is_some())
                .collect();
            (
                leads(&rows, hd, &hc, &hidx),
                format!("the holdout split ({} units)", hidx.len()),
            )
        })
    };
    let k = names.len();
    let (gaps, held_out) = match &held {
        Some((l, source)) => (
            choose_gaps(l, k, go8, req.target, source).map_err(|e| InputError::Format {
                path: ds.path.clone(),
                message: e,
            })?,
            Some(ClassCounts::of(l, k, go8, MIN_GAP, MIN_GAP)),
        ),
        None => {
            if req.target != ClassTarget::Smallest {
                notes.push(
                    "no operating point: no held-out leads to choose the gaps on (no cross-validation and no holdout); the smallest gaps".into(),
                );
            }
            (
                choose_gaps(&[], k, go8, ClassTarget::Smallest, "none").map_err(|e| {
                    InputError::Format {
                        path: ds.path.clone(),
                        message: e,
                    }
                })?,
                None,
            )
        }
    };
    let train_leads = leads(&rows, ds, &class, &idx);
    let training = ClassCounts::of(&train_leads, k, go8, MIN_GAP, MIN_GAP);
    let figures: Vec<ClassFigures> = names
        .iter()
        .enumerate()
        .map(|(c, n)| {
            let row = &training.table[c];
            ClassFigures {
                name: n.clone(),
                units: row.iter().sum(),
                training_errors: row.iter().sum::<usize>() - row[c],
            }
        })
        .collect();
    // The smallest signed lead of a unit's own class over the others (normalised rows).
    let norm = crate::train::one_vs_rest::normalised(&rows);
    let mut x = vec![0.0; ds.dim()];
    let margin = idx
        .iter()
        .map(|&i| {
            ds.scaled_row(i, &mut x);
            let own = norm[usize::from(class[i])].score(&x);
            let other = (0..k)
                .filter(|&m| m != usize::from(class[i]))
                .map(|m| norm[m].score(&x))
                .fold(f64::NEG_INFINITY, f64::max);
            own - other
        })
        .fold(f64::INFINITY, f64::min);
    let go_units = go.map_or(0, |g| figures[usize::from(g)].units);
    let errors = ds.len() - training.correct;
    let summary = TrainingSummary {
        units: ds.len(),
        go: go_units,
        nogo: ds.len() - go_units,
        separable: errors == 0,
        geometric_margin: margin,
        training_errors: errors,
        updates: None,
        threshold_shift: None,
        skipped: ds.skipped.clone(),
        soft_margin: None,
        classes: Some(ClassSummary {
            classes: figures,
            gaps: gaps.clone(),
            held_out,
            c_choice: c_choice.clone(),
            joint: fitted.joint.map(|j| JointFigures {
                objective: j.objective,
                spread: j.spread,
                scale,
                passes: j.passes,
                violation: j.violation,
            }),
        }),
    };
    let provenance = Provenance {
        training_log: InputFile {
            path: ds.path.clone(),
            sha256: ds.sha256.clone(),
        },
        channel_sheet: sheet.cloned(),
        trainer: match req.rule {
            ClassRule::Joint => "joint".into(),
            ClassRule::OneVsRest => req.trainer.name().into(),
        },
        seed: req.seed,
        epochs: req.epochs,
        c: uses_c.then_some(fit.cfg.c),
        c_choice: None,
        class_weight: None,
        max_false_go: None,
        holdout_split: req.holdout_split.clone(),
        training_files: ds.parts.clone(),
        read_with: req.read_with.clone(),
        settings: req.settings.clone(),
    };
    let model = FloatModel::with_classes(
        provenance,
        ds.scales.clone(),
        ds.signals.clone(),
        req.rule,
        go.map(usize::from),
        &names,
        &rows,
        gaps.go_gap,
        gaps.class_gap,
        summary,
    );
    Ok(ClassOutcome {
        model,
        training,
        holdout: None,
        notes,
    })
}
