//! The release step as one call each for the CLI (`audit`, `pack`) and the demo: the logs a
//! model is audited on, read as it names them ([`load_logs`]: its training files, the units
//! its holdout split held out taken out again, holdout and validation logs), then quantise,
//! audit applying the tool's choices, and the blob ([`release`]).

use std::path::{Path, PathBuf};

use crate::error::InputError;
use crate::ingest::LogOptions;
use crate::ingest::dataset::Dataset;
use crate::release::applying::{Apply, release_applying};
use crate::release::audit_report::AuditReport;
use crate::release::blob_release::released_blob;
use crate::release::gates::AuditConfig;
use crate::release::quantise::{QuantConfig, QuantError, Quantised};
use crate::release::sweep::SweepRow;
use crate::train::float_model::FloatModel;
use crate::workflow::load_for_model;

/// Why the logs of a release cannot be read as the model names them.
#[derive(Debug, thiserror::Error)]
pub enum ReleaseLogError {
    /// A log cannot be read.
    #[error(transparent)]
    Input(#[from] InputError),
    /// The training files the model names cannot be read.
    #[error(
        "reading the training files {} names (as train named them, from the folder it ran in); give them with --train",
        model.display()
    )]
    RecordedFiles {
        /// The model file.
        model: PathBuf,
        /// What went wrong.
        #[source]
        source: InputError,
    },
    /// The training log is not the one the model was trained on.
    #[error(
        "{files}: this is not the log {} was trained on (its SHA-256 is {sha256}, the model records {recorded} for {}){difference}; audit with the training log the model names",
        model.display(),
        recorded_path.display()
    )]
    NotTheTrainingLog {
        /// The files read, comma-separated.
        files: String,
        /// The model file.
        model: PathBuf,
        /// The log's SHA-256.
        sha256: String,
        /// The SHA-256 the model records.
        recorded: String,
        /// The log the model records.
        recorded_path: PathBuf,
        /// Which file differs, in words (empty when the files cannot be matched).
        difference: String,
    },
    /// The model's holdout split cannot be made again on the log.
    #[error("{}: the holdout split {} records: {message}", log.display(), model.display())]
    Split {
        /// The training log.
        log: PathBuf,
        /// The model file.
        model: PathBuf,
        /// Why.
        message: String,
    },
    /// The split made again holds other units than the model's.
    #[error(
        "{}: the holdout split gives {trained} units to train and {held} held out, the model records {recorded_trained} and {recorded_held}{}; read the log as train did (same options)",
        log.display(),
        if *same_units { "" } else { " (and other units than those it held out)" }
    )]
    SplitDiffers {
        /// The training log.
        log: PathBuf,
        /// Units to train on now.
        trained: usize,
        /// Units held out now.
        held: usize,
        /// Units the model trained on.
        recorded_trained: usize,
        /// Units the model held out.
        recorded_held: usize,
        /// Whether the held-out units' digest agrees.
        same_units: bool,
    },
}

/// The logs a release audits.
pub struct ReleaseLogs {
    /// The training log (without the units a recorded holdout split held out).
    pub train: Dataset,
    /// The held-out units of a recorded split ("held-out"), the holdout log ("holdout") and
    /// each validation log ("validation-N"), with their report names.
    pub others: Vec<(String, Dataset)>,
}

/// The files a model was trained on, as it names them: a folder (a signal log of one file
/// per unit) as the folder it was.
pub fn recorded_training_files(fm: &FloatModel) -> Vec<PathBuf> {
    let recorded = &fm.provenance.training_log;
    if fm.provenance.training_files.is_empty() || recorded.path.is_dir() {
        vec![recorded.path.clone()]
    } else {
        fm.provenance
            .training_files
            .iter()
            .map(|p| p.path.clone())
            .collect()
    }
}

/// Reads the logs `fm` (read from `model`) is audited on, with its channels and scaling:
/// `train` (file patterns; `None`: the files the model names), checked against the model's
/// SHA-256, the units a recorded holdout split held out taken out again as "held-out";
/// `holdout` (patterns of one log) and each of `validate` (a pattern of one log each).
///
/// # Errors
/// [`ReleaseLogError`]: a log that cannot be read, another training log than the model's,
/// a split that cannot be made again alike.
pub fn load_logs(
    fm: &FloatModel,
    model: &Path,
    train: Option<&[PathBuf]>,
    holdout: &[PathBuf],
    validate: &[PathBuf],
    opts: &LogOptions,
) -> Result<ReleaseLogs, ReleaseLogError> {
    let recorded = &fm.provenance.training_log;
    let train_files = match train {
        None => recorded_training_files(fm),
        Some(patterns) => crate::input::expand_files(patterns)?,
    };
    let full = load_for_model(&train_files, opts, fm).map_err(|source| match train {
        None => ReleaseLogError::RecordedFiles {
            model: model.into(),
            source,
        },
        Some(_) => ReleaseLogError::Input(source),
    })?;
    if full.sha256 != recorded.sha256 {
        return Err(ReleaseLogError::NotTheTrainingLog {
            files: train_files
                .iter()
                .map(|f| f.display().to_string())
                .collect::<Vec<_>>()
                .join(", "),
            model: model.into(),
            sha256: full.sha256.clone(),
            recorded: recorded.sha256.clone(),
            recorded_path: recorded.path.clone(),
            difference: file_difference(&full, fm),
        });
    }
    let mut others = Vec::new();
    // The units train held out of the training log are audited as held out, not as training
    // units: their errors are the model's errors on units it has not seen.
    let train = match &fm.provenance.holdout_split {
        Some(sp) => {
            let (t, h) = sp.units(&full).map_err(|message| ReleaseLogError::Split {
                log: full.path.clone(),
                model: model.into(),
                message,
            })?;
            let again = sp.clone().made(&full, &t, &h);
            // A model from before the digest was kept is checked by its counts.
            let same_units =
                sp.held_out_sha256.is_none() || sp.held_out_sha256 == again.held_out_sha256;
            if t.len() != sp.trained_on || h.len() != sp.held_out || !same_units {
                return Err(ReleaseLogError::SplitDiffers {
                    log: full.path.clone(),
                    trained: t.len(),
                    held: h.len(),
                    recorded_trained: sp.trained_on,
                    recorded_held: sp.held_out,
                    same_units,
                });
            }
            // The skipped rows are the training log's, counted once (with "train").
            let mut held = full.subset(&h);
            held.skipped = Default::default();
            others.push(("held-out".to_string(), held));
            full.subset(&t)
        }
        None => full,
    };
    if !holdout.is_empty() {
        let files = crate::input::expand_files(holdout)?;
        others.push(("holdout".to_string(), load_for_model(&files, opts, fm)?));
    }
    for (k, v) in validate.iter().enumerate() {
        let files = crate::input::expand_files(std::slice::from_ref(v))?;
        others.push((
            format!("validation-{}", k + 1),
            load_for_model(&files, opts, fm)?,
        ));
    }
    Ok(ReleaseLogs { train, others })
}

/// Which file of a log of several differs from the model's record, in words (empty when
/// the files cannot be matched one to one).
fn file_difference(ds: &Dataset, fm: &FloatModel) -> String {
    let rec = &fm.provenance.training_files;
    if ds.parts.len() != rec.len() {
        return format!(
            "; the log has {} files, the model's had {}",
            ds.parts.len().max(1),
            rec.len().max(1)
        );
    }
    ds.parts
        .iter()
        .zip(rec)
        .find(|(a, b)| a.sha256 != b.sha256)
        .map_or(String::new(), |(a, b)| {
            format!(
                "; first different file: {} (SHA-256 {}, the model's {} had {})",
                a.path.display(),
                a.sha256,
                b.path.display(),
                b.sha256
            )
        })
}

/// What to release: a trained model, the logs to audit it on, and how (the step `audit`,
/// `pack` and the demo share).
#[derive(Clone, Debug)]
pub struct ReleaseRequest<'a> {
    /// The float model.
    pub fm: &'a FloatModel,
    /// The training log (without the units a recorded holdout split held out).
    pub train: &'a Dataset,
    /// Holdout and validation logs, each with its name in the reports.
    pub others: &'a [(&'a str, &'a Dataset)],
    /// Word lengths, search, RECHECK band.
    pub qc: QuantConfig,
    /// Declared noise per channel, physical units.
    pub noise: &'a [Option<f64>],
    /// The gates.
    pub ac: AuditConfig,
    /// What the tool may choose (sweep's format, suggested band).
    pub apply: Apply,
    /// The release key, when the blob is to be signed.
    pub signer: Option<&'a ed25519_dalek::SigningKey>,
    /// Settings taken from the model's operating point, in words (recorded in the report).
    pub from_model: Vec<String>,
    /// Every setting with its source (recorded in the report; `pack` compares them).
    pub settings: Vec<crate::project::Setting>,
    /// The command line that asked for it, recorded in the report.
    pub command_line: Option<String>,
}

impl<'a> ReleaseRequest<'a> {
    /// `fm` audited on `train` and `others` with the default format and gates, nothing
    /// applied, unsigned, nothing recorded.
    pub fn new(
        fm: &'a FloatModel,
        train: &'a Dataset,
        others: &'a [(&'a str, &'a Dataset)],
        noise: &'a [Option<f64>],
    ) -> Self {
        Self {
            fm,
            train,
            others,
            qc: QuantConfig::default(),
            noise,
            ac: AuditConfig::default(),
            apply: Apply::default(),
            signer: None,
            from_model: Vec::new(),
            settings: Vec::new(),
            command_line: None,
        }
    }
}

/// What [`release`] made.
pub struct ReleaseOutcome {
    /// The quantised model.
    pub q: Quantised,
    /// Its audit, recording what was applied, taken from the model and set, and naming
    /// `blob`.
    pub report: AuditReport,
    /// The configuration actually used.
    pub qc: QuantConfig,
    /// The sweep, when it was run to pick the format.
    pub sweep: Option<(Vec<SweepRow>, Option<usize>)>,
    /// The blob `pack` writes: marked passed or overridden, signed with the request's key.
    pub blob: Vec<u8>,
}

/// Quantises and audits, applying what `req.apply` asks, and makes the blob: the report
/// records the request's settings and the model's holdout split, and names the blob's bytes.
///
/// # Errors
/// [`QuantError`] from the quantiser; [`QuantError::Classes`] for a model of several
/// classes.
pub fn release(req: &ReleaseRequest<'_>) -> Result<ReleaseOutcome, QuantError> {
    // The two-sided quantiser would read a class model's unused weights: refused by name.
    if req.fm.classes.is_some() {
        return Err(QuantError::Classes(
            "the two-sided release step (pack, demo)",
        ));
    }
    let done = release_applying(
        req.fm, req.train, req.others, req.qc, req.noise, req.ac, req.apply,
    )?;
    let mut report = done.report;
    report.from_model = req.from_model.clone();
    let blob = released_blob(&done.q, report.passed, req.signer);
    if req.signer.is_some() {
        // The report names the blob pack writes: signed, with its key.
        report.name_blob(&blob);
    }
    report.command_line = req.command_line.clone();
    report.settings = req.settings.clone();
    report.split = req.fm.provenance.holdout_split.clone();
    Ok(ReleaseOutcome {
        q: done.q,
        report,
        qc: done.qc,
        sweep: done.sweep,
        blob,
    })
}
