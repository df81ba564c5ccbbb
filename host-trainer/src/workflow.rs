//! The steps a user runs, each as one call: load, check, train, release (quantise + audit).
//! The CLI and the demo both go through here, so they cannot drift apart.

use std::path::Path;

use serde::Serialize;

use crate::digest::sha256_hex;
use crate::error::InputError;
use crate::ingest::dataset::Dataset;
use crate::ingest::scaling::ChannelSheet;
use crate::ingest::signals::{SignalChannels, read_signal_log};
use crate::ingest::{LogOptions, ScaleFrom, read_log};
use crate::train::eval::{
    Counts, EvalRow, TrainConfig, Trained, TrainerKind, cross_validate, evaluate, train,
};
use crate::train::float_model::{FloatModel, InputFile, Provenance, TrainingSummary};
use crate::train::linear::threshold_for_false_go;
use crate::train::perceptron::{PerceptronConfig, PerceptronKind, perceptron};
use crate::train::separability::{Figures, SeparabilityReport, check_with};

/// Reads a training log with an optional channel sheet.
///
/// # Errors
/// Any [`InputError`] of the log or the sheet.
pub fn load(
    log: &Path,
    opts: &LogOptions,
    sheet: Option<&Path>,
) -> Result<(Dataset, Option<(ChannelSheet, InputFile)>), InputError> {
    let sheet = match sheet {
        Some(p) => {
            // Read once: the same text is parsed and hashed for provenance.
            let text = crate::input::read_text(p, "channel sheet", crate::input::MAX_TEXT_FILE)?;
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
    if let Some((s, _)) = sheet.as_ref().filter(|(s, _)| !s.signals.is_empty()) {
        return Ok((read_signal_log(log, opts, SignalChannels::Sheet(s))?, sheet));
    }
    let scale = sheet
        .as_ref()
        .map_or(ScaleFrom::Observed, |(s, _)| ScaleFrom::Sheet(s));
    Ok((read_log(log, opts, scale)?, sheet))
}

/// Reads a log with the channels and scaling of a trained model (holdout, audit, replay).
///
/// # Errors
/// Any [`InputError`]; a reading outside the model's valid range is an error unless skipped.
pub fn load_for_model(
    log: &Path,
    opts: &LogOptions,
    fm: &FloatModel,
) -> Result<Dataset, InputError> {
    if !fm.signals.is_empty() {
        return read_signal_log(
            log,
            opts,
            SignalChannels::Model {
                channels: &fm.channels,
                signals: &fm.signals,
            },
        );
    }
    read_log(log, opts, ScaleFrom::Model(&fm.channels))
}

/// What to train.
#[derive(Clone, Debug)]
pub struct TrainRequest {
    /// Trainer.
    pub trainer: TrainerKind,
    /// Epochs, seed, soft-margin C.
    pub epochs: u32,
    /// Seed.
    pub seed: u64,
    /// Soft-margin penalty when not separable.
    pub c: f64,
    /// Asymmetric risk: at most this many NO-GO training units may pass.
    pub max_false_go: Option<usize>,
    /// k for cross-validation (0 or 1: none).
    pub folds: usize,
    /// Which trainers cross-validation compares.
    pub cv_trainers: CvTrainers,
    /// The holdout taken out of the training log before `ds` was formed, if any (recorded in
    /// the model's provenance).
    pub holdout_split: Option<crate::train::float_model::HoldoutSplit>,
    /// Show a progress bar on long work.
    pub progress: bool,
    /// The separability figures to compute beside the verdict (`train` shows none of them;
    /// the demo shows all).
    pub figures: Figures,
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
        match self {
            Self::All => TrainerKind::ALL.to_vec(),
            Self::Auto if units <= CV_ALL_LIMIT => TrainerKind::ALL.to_vec(),
            Self::Auto | Self::Chosen => vec![chosen],
        }
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
    req: &TrainRequest,
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
    let cfg = TrainConfig {
        epochs: req.epochs,
        seed: req.seed,
        c: req.c,
        separable: report.separable,
    };
    // The check has solved the hard margin already: a separable log's maximum-margin model
    // is its separator, not a second solve.
    let t = match (&report.separator, classic) {
        (Some(sep), _) if report.separable && req.trainer == TrainerKind::MaxMargin => Trained {
            model: sep.clone(),
            updates: None,
            c: None,
        },
        (_, Some(run)) => Trained {
            model: run.model,
            updates: Some(run.updates),
            c: None,
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
    let shift = req
        .max_false_go
        .map(|n| threshold_for_false_go(&t.model, ds, &idx, n));
    let threshold = shift.as_ref().map_or(0.0, |s| s.threshold);
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
        max_false_go: req.max_false_go,
        holdout_split: req.holdout_split.clone(),
    };
    let model = FloatModel::new(
        provenance,
        ds.scales.clone(),
        ds.signals.clone(),
        &t.model,
        threshold,
        summary,
    );
    let cross_validation = if req.folds >= 2 {
        cross_validate_with_bar(ds, req, cfg)
    } else {
        Vec::new()
    };
    Ok(TrainOutcome {
        model,
        check: report,
        training,
        holdout: None,
        cross_validation,
    })
}

fn cross_validate_with_bar(ds: &Dataset, req: &TrainRequest, cfg: TrainConfig) -> Vec<EvalRow> {
    let kinds = req.cv_trainers.kinds(ds.len(), req.trainer);
    let jobs = (req.folds * kinds.len()) as u64;
    let bar = (req.progress && ds.len() >= 100_000).then(|| {
        // Redrawn on a timer: a training can take seconds, and the clock must not stand still.
        let b = crate::progress::ticking_bar(
            jobs,
            "{prefix} {msg} [{bar:30}] {pos}/{len} trainings, {elapsed} elapsed, about {eta} left",
        );
        b.set_prefix(format!("{}-fold cross-validation", req.folds));
        b
    });
    let rows = cross_validate(ds, req.folds, &kinds, cfg, bar.as_ref());
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    rows
}
