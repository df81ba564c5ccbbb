//! The steps a user runs, each as one call: load, check, train; the release step (the logs
//! a model is audited on, quantise, audit, the blob) is [`release`].
//! The CLI and the demo both go through here, so they cannot drift apart.

pub mod release;

use std::path::{Path, PathBuf};

use serde::Serialize;

use crate::digest::sha256_hex;
use crate::error::InputError;
use crate::ingest::dataset::Dataset;
use crate::ingest::sheet::ChannelSheet;
use crate::ingest::{LogOptions, ScaleFrom, read};
use crate::train::c_choice::{CChoice, CPolicy, DEFAULT_C, choose_c, search_sample};
use crate::train::eval::{
    Counts, EvalRow, HeldOut, TrainConfig, Trained, TrainerKind, cross_validate, evaluate,
    held_out, train,
};
use crate::train::float_model::{FloatModel, InputFile, Provenance, SoftMargin, TrainingSummary};
use crate::train::linear::threshold_for_false_go;
use crate::train::operating_point::{self, Target};
use crate::train::perceptron::{PerceptronConfig, PerceptronKind, perceptron};
use crate::train::separability::{Figures, SeparabilityReport, check_with};
use crate::train::svm::ClassWeight;

/// Reads a training log (one or several files) with an optional channel sheet. The sheet
/// may be a project file's inline `[sheet]`.
///
/// # Errors
/// Any [`InputError`] of the log or the sheet; files of one log whose columns differ.
pub fn load(
    log: &[PathBuf],
    opts: &LogOptions,
    sheet: Option<&Path>,
) -> Result<(Dataset, Option<(ChannelSheet, InputFile)>), InputError> {
    let sheet = match sheet {
        Some(p) => {
            // Read once: the same text is parsed and hashed for provenance.
            let text = crate::input::read_text(p, "channel sheet", crate::input::MAX_TEXT_FILE)?;
            let text = crate::project::inline_sheet(&text).unwrap_or(text);
            let s = ChannelSheet::from_text(p, &text)?;
            Some((
                s,
                InputFile {
                    path: p.to_path_buf(),
                    sha256: sha256_hex(text.as_bytes()),
                },
            ))
        }
        None => None,
    };
    let scale = sheet
        .as_ref()
        .map_or(ScaleFrom::Observed, |(s, _)| ScaleFrom::Sheet(s));
    Ok((read(log, opts, scale)?, sheet))
}

/// Reads a log (one or several files) with the channels and scaling of a trained model
/// (holdout, audit, replay).
///
/// # Errors
/// Any [`InputError`]; a reading outside the model's valid range is an error unless skipped.
pub fn load_for_model(
    log: &[PathBuf],
    opts: &LogOptions,
    fm: &FloatModel,
) -> Result<Dataset, InputError> {
    read(
        log,
        opts,
        ScaleFrom::Model {
            channels: &fm.channels,
            signals: &fm.signals,
        },
    )
}

/// What to train.
#[derive(Clone, Debug)]
pub struct TrainRequest<'a> {
    /// Trainer.
    pub trainer: TrainerKind,
    /// Epochs, seed, soft-margin C.
    pub epochs: u32,
    /// Seed.
    pub seed: u64,
    /// The maximum-margin trainer's penalty C: searched by cross-validation or given.
    pub c: CPolicy,
    /// Multipliers of C per class.
    pub class_weight: ClassWeight,
    /// What a false GO costs against a false NO-GO, in the search for C.
    pub false_go_weight: f64,
    /// The rule the operating point (threshold and RECHECK band) meets on held-out scores;
    /// `None`: threshold 0 and no band.
    pub target: Option<Target>,
    /// Asymmetric risk: at most this many NO-GO training units may pass (moves the threshold
    /// on the training units instead of choosing an operating point).
    pub max_false_go: Option<usize>,
    /// k for cross-validation (0 or 1: none).
    pub folds: usize,
    /// Which trainers cross-validation compares.
    pub cv_trainers: CvTrainers,
    /// The units held out of the training log (`--holdout-fraction`, `--holdout-after`):
    /// the operating point is chosen on their scores when there is no cross-validation.
    pub point_holdout: Option<&'a Dataset>,
    /// The holdout taken out of the training log before `ds` was formed, if any (recorded in
    /// the model's provenance).
    pub holdout_split: Option<crate::train::float_model::HoldoutSplit>,
    /// How the log was read, recorded in the model so later readings match.
    pub read_with: Option<crate::ingest::options::RecordedOptions>,
    /// The run's settings and their sources, recorded in the model.
    pub settings: Vec<crate::project::Setting>,
    /// Show a progress bar on long work.
    pub progress: bool,
    /// The separability figures to compute beside the verdict (`train` shows none of them;
    /// the demo shows all).
    pub figures: Figures,
}

impl TrainRequest<'_> {
    /// `trainer` with the CLI's defaults: C searched over the default grid on 5 folds, the
    /// default false-GO weight and RECHECK budget, seed 1, no holdout, no progress bar.
    pub fn new(trainer: TrainerKind) -> Self {
        use crate::train::c_choice::{DEFAULT_FALSE_GO_WEIGHT, DEFAULT_GRID};
        Self {
            trainer,
            epochs: 1000,
            seed: 1,
            c: CPolicy::Search(DEFAULT_GRID.to_vec()),
            class_weight: ClassWeight::EVEN,
            false_go_weight: DEFAULT_FALSE_GO_WEIGHT,
            target: Some(Target::RecheckBudget {
                share: operating_point::DEFAULT_RECHECK_BUDGET,
                false_go_weight: DEFAULT_FALSE_GO_WEIGHT,
            }),
            max_false_go: None,
            folds: 5,
            cv_trainers: CvTrainers::Auto,
            point_holdout: None,
            holdout_split: None,
            read_with: None,
            settings: Vec::new(),
            progress: false,
            figures: Figures::VERDICT,
        }
    }
}

/// Which trainers cross-validation compares.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum CvTrainers {
    /// Every trainer up to [`CV_ALL_LIMIT`] units, only the chosen one above.
    Auto,
    /// Every trainer.
    All,
    /// Only the chosen trainer.
    Chosen,
}

/// Largest log on which `CvTrainers::Auto` cross-validates every trainer. Above it, four
/// trainers × k folds would cost 4·k trainings of a log whose one training is already long.
pub const CV_ALL_LIMIT: usize = 100_000;

impl CvTrainers {
    /// The trainers compared on a log of `units` units when `chosen` is trained.
    pub fn kinds(self, units: usize, chosen: TrainerKind) -> Vec<TrainerKind> {
        let mut kinds = match self {
            Self::All => TrainerKind::ALL.to_vec(),
            Self::Auto if units <= CV_ALL_LIMIT => TrainerKind::ALL.to_vec(),
            Self::Auto | Self::Chosen => vec![chosen],
        };
        if !kinds.contains(&chosen) {
            kinds.push(chosen);
        }
        kinds
    }
}

/// Everything `train` found.
#[derive(Clone, Debug, Serialize)]
pub struct TrainOutcome {
    /// The model.
    pub model: FloatModel,
    /// The separability analysis of the training log.
    pub check: SeparabilityReport,
    /// Decisions on the training log.
    pub training: Counts,
    /// Decisions on the holdout log.
    pub holdout: Option<Counts>,
    /// Cross-validation, per trainer.
    pub cross_validation: Vec<EvalRow>,
    /// What the user should know about choices made without being asked (printed on stderr).
    pub notes: Vec<String>,
}

impl TrainOutcome {
    /// Evaluates the model on a holdout log (read with the model's scaling, so only after training).
    pub fn evaluate_holdout(&mut self, holdout: &Dataset) {
        self.holdout = Some(evaluate(
            &self.model.linear(),
            self.model.threshold,
            holdout,
            &holdout.all(),
        ));
    }
}

/// Trains a float model on `ds`: one separability check (the verdict decides hard or soft
/// margin and is recorded; its hard-margin solve is the maximum-margin model of a separable
/// log), the chosen trainer (the classic perceptron's run doubles as the check's), the
/// threshold, cross-validation. Novikoff's figures only when `req.figures` asks.
///
/// # Errors
/// [`InputError::NoDirection`] when the trainer ends with every weight zero or a value
/// that is not finite: such a model decides nothing, and is never written.
pub fn train_model(
    ds: &Dataset,
    sheet: Option<&InputFile>,
    req: &TrainRequest<'_>,
) -> Result<TrainOutcome, InputError> {
    let idx = ds.all();
    // The classic perceptron's training run is the run the check would show: made once.
    let classic = (req.trainer == TrainerKind::Perceptron).then(|| {
        perceptron(
            ds,
            &idx,
            PerceptronKind::Classic,
            PerceptronConfig {
                epochs: req.epochs,
                seed: req.seed,
            },
        )
    });
    // The maximum-margin trainer's model is the check's hard-margin separator.
    let figures = Figures {
        margin: req.figures.margin || req.trainer == TrainerKind::MaxMargin,
        ..req.figures
    };
    let report = check_with(ds, &idx, req.epochs, req.seed, figures, classic.as_ref());
    if req.trainer == TrainerKind::HardMargin && !report.separable {
        return Err(InputError::NotSeparable {
            path: ds.path.clone(),
            detail: report.decided_by.clone(),
        });
    }
    let mut notes = Vec::new();
    let mut cfg = TrainConfig {
        epochs: req.epochs,
        seed: req.seed,
        c: DEFAULT_C,
        class_weight: req.class_weight,
    };
    // C: searched on the log (or its sample) by the same folds as the table below.
    let mut searched: Option<(CChoice, EvalRow)> = None;
    if req.trainer == TrainerKind::MaxMargin {
        match &req.c {
            CPolicy::Fixed(c) => cfg.c = *c,
            CPolicy::Search(_) if req.folds < 2 => notes.push(format!(
                "C = {DEFAULT_C}: no cross-validation to choose it on (--folds {}); give --c or keep the default folds",
                req.folds
            )),
            CPolicy::Search(grid) => {
                let sample = search_sample(ds, req.seed);
                let sub = (sample.len() < ds.len()).then(|| ds.subset(&sample));
                let on = sub.as_ref().unwrap_or(ds);
                let bar = training_bar(req, on.len(), (grid.len() * req.folds) as u64, "choosing C");
                let (choice, row) =
                    choose_c(on, req.folds, grid, req.false_go_weight, cfg, bar.as_ref());
                if let Some(b) = bar {
                    b.finish_and_clear();
                }
                cfg.c = choice.chosen;
                if sub.is_some() {
                    notes.push(format!(
                        "C chosen on a stratified sample of {} of the {} units (seed {}); the whole log is trained with it",
                        on.len(),
                        ds.len(),
                        req.seed
                    ));
                }
                searched = Some((choice, row));
            }
        }
    }
    // The check has solved the hard margin already: a separable log's hard-margin model
    // is its separator, not a second solve.
    let t = match (&report.separator, classic) {
        (Some(sep), _) if report.separable && req.trainer == TrainerKind::HardMargin => Trained {
            model: sep.clone(),
            updates: None,
            c: None,
            soft: None,
        },
        (_, Some(run)) => Trained {
            model: run.model,
            updates: Some(run.updates),
            c: None,
            soft: None,
        },
        _ => train(ds, &idx, req.trainer, cfg),
    };
    let finite = t.model.w.iter().all(|w| w.is_finite()) && t.model.b.is_finite();
    if !finite || t.model.w.iter().all(|&w| w == 0.0) {
        return Err(InputError::NoDirection {
            path: ds.path.clone(),
            detail: if finite {
                format!("{} ended with every weight zero", req.trainer.name())
            } else {
                format!(
                    "{} ended with weights that are not finite numbers",
                    req.trainer.name()
                )
            },
        });
    }
    let cross_validation = if req.folds >= 2 {
        let mut kinds = req.cv_trainers.kinds(ds.len(), req.trainer);
        // The search's row at the chosen C is this trainer's cross-validation already.
        if let Some((_, row)) = &searched {
            kinds.retain(|k| *k != TrainerKind::MaxMargin);
            let mut rows = cross_validate_with_bar(ds, req, cfg, &kinds);
            rows.push(row.clone());
            rows.sort_by_key(|r| TrainerKind::ALL.iter().position(|k| *k == r.trainer));
            rows
        } else {
            cross_validate_with_bar(ds, req, cfg, &kinds)
        }
    } else {
        Vec::new()
    };
    let shift = req
        .max_false_go
        .map(|n| threshold_for_false_go(&t.model, ds, &idx, n));
    // The operating point, from the chosen trainer's held-out scores.
    let scale = t.model.w.iter().fold(0.0f64, |m, w| m.max(w.abs()));
    let to_file = if scale > 0.0 {
        t.model.norm() / scale
    } else {
        1.0
    };
    let op = match (req.target, &shift) {
        (Some(target), None) => {
            let held: Option<(Vec<HeldOut>, String)> = cross_validation
                .iter()
                .find(|r| r.trainer == req.trainer)
                .map(|r| {
                    (
                        r.held_out.clone(),
                        format!(
                            "out-of-fold scores of {}-fold cross-validation ({} units{})",
                            req.folds,
                            r.held_out.len(),
                            if r.held_out.len() < ds.len() {
                                ", a stratified sample of the log"
                            } else {
                                ""
                            }
                        ),
                    )
                })
                .or_else(|| {
                    req.point_holdout.map(|h| {
                        (
                            held_out(&t.model, h, &h.all()),
                            format!("the holdout's scores ({} units)", h.len()),
                        )
                    })
                });
            match held {
                Some((held, source)) => Some(
                    operating_point::choose(&held, target, to_file, source).map_err(|e| {
                        InputError::NoOperatingPoint {
                            path: ds.path.clone(),
                            detail: e.to_string(),
                        }
                    })?,
                ),
                None => {
                    notes.push(
                        "no operating point: no held-out scores to choose it on (no cross-validation and no holdout); threshold 0 and no RECHECK band".into(),
                    );
                    None
                }
            }
        }
        _ => None,
    };
    let threshold = match (&shift, &op) {
        (Some(s), _) => s.threshold,
        (None, Some(op)) => op.threshold * scale,
        (None, None) => 0.0,
    };
    let training = evaluate(&t.model, threshold, ds, &idx);
    let go = ds.labels.iter().filter(|&&l| l > 0).count();
    let summary = TrainingSummary {
        units: ds.len(),
        go,
        nogo: ds.len() - go,
        separable: report.separable,
        geometric_margin: t.model.geometric_margin(ds, &idx),
        training_errors: training.units - training.correct,
        updates: t.updates,
        threshold_shift: shift,
        skipped: ds.skipped.clone(),
        soft_margin: t
            .soft
            .clone()
            .map(|(objective, spread)| SoftMargin { objective, spread }),
        classes: None,
    };
    let provenance = Provenance {
        training_log: InputFile {
            path: ds.path.clone(),
            sha256: ds.sha256.clone(),
        },
        channel_sheet: sheet.cloned(),
        trainer: req.trainer.name().into(),
        seed: req.seed,
        epochs: req.epochs,
        c: t.c,
        c_choice: searched.map(|(c, _)| c),
        class_weight: (req.trainer == TrainerKind::MaxMargin
            && req.class_weight != ClassWeight::EVEN)
            .then_some(req.class_weight),
        max_false_go: req.max_false_go,
        holdout_split: req.holdout_split.clone(),
        training_files: ds.parts.clone(),
        read_with: req.read_with.clone(),
        settings: req.settings.clone(),
    };
    let mut model = FloatModel::new(
        provenance,
        ds.scales.clone(),
        ds.signals.clone(),
        &t.model,
        threshold,
        summary,
    );
    if let Some(op) = op {
        model = model.with_operating_point(op);
    }
    Ok(TrainOutcome {
        model,
        check: report,
        training,
        holdout: None,
        cross_validation,
        notes,
    })
}

/// A progress bar for `jobs` trainings on a log of `units` units, on large logs only.
fn training_bar(
    req: &TrainRequest<'_>,
    units: usize,
    jobs: u64,
    what: &str,
) -> Option<indicatif::ProgressBar> {
    (req.progress && units >= 100_000).then(|| {
        // Redrawn on a timer: a training can take seconds, and the clock must not stand still.
        let b = crate::progress::ticking_bar(
            jobs,
            "{prefix} {msg} [{bar:30}] {pos}/{len} trainings, {elapsed} elapsed, about {eta} left",
        );
        b.set_prefix(what.to_string());
        b
    })
}

fn cross_validate_with_bar(
    ds: &Dataset,
    req: &TrainRequest<'_>,
    cfg: TrainConfig,
    kinds: &[TrainerKind],
) -> Vec<EvalRow> {
    if kinds.is_empty() {
        return Vec::new();
    }
    let jobs = (req.folds * kinds.len()) as u64;
    let what = format!("{}-fold cross-validation", req.folds);
    let bar = training_bar(req, ds.len(), jobs, &what);
    let rows = cross_validate(ds, req.folds, kinds, cfg, bar.as_ref());
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    rows
}
