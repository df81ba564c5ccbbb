//! The float model file: our own JSON layout, with provenance.
//!
//! ```json
//! {
//!   "format": "linegate-float-model", "format_version": 1, "tool_version": "0.1.0",
//!   "model_id": "<32 hex digits>",
//!   "provenance": { "training_log": {"path": "...", "sha256": "..."}, "channel_sheet": null,
//!                   "trainer": "max-margin", "seed": 1, "epochs": 50, "c": 10.0, "max_false_go": null },
//!   "channels": [ { "name": "...", "unit": "mA", "min": 150.0, "max": 900.0, "lsb": 0.1, "zero": 0.0,
//!                   "noise": 2.0, "raw_min": 1500, "raw_max": 9000, "offset": 5250, "half": 3750 } ],
//!   "weights": [ ... ], "bias": 0.1, "threshold": 0.0,
//!   "summary": { ... }
//! }
//! ```
//!
//! The score is `Σ weights[i] · (raw_i − offset_i) / half_i + bias`; GO when it exceeds `threshold`.
//! Weights are normalised so the largest magnitude is 1.

use crate::ingest::dataset::{Dataset, LogPart};
use crate::ingest::options::RecordedOptions;
use crate::project::Setting;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::digest::lower_hex;
use crate::error::InputError;
use crate::ingest::SkipReport;
use crate::ingest::scaling::ChannelScale;
use crate::ingest::signal_scale::SignalScale;
use crate::train::c_choice::CChoice;
use crate::train::class_rows::FloatClasses;
use crate::train::linear::{Linear, ThresholdShift};
use crate::train::operating_point::OperatingPoint;
use crate::train::spread::Spread;
use crate::train::svm::ClassWeight;

/// Format tag in every float model file.
pub const FORMAT: &str = "linegate-float-model";
/// Layout version of the float model file (2: the file carries a digest of its content).
pub const FORMAT_VERSION: u32 = 2;
/// Layout version of a float model with signal features: version 2 plus `signals` and each
/// feature channel's `source`. A model without signals is still written as version 2.
pub const SIGNAL_FORMAT_VERSION: u32 = 3;

/// A file that went into a model.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InputFile {
    /// Path as given.
    pub path: PathBuf,
    /// SHA-256, hex.
    pub sha256: String,
}

/// How the model was made.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Provenance {
    /// The training log.
    pub training_log: InputFile,
    /// The channel sheet, if one was used.
    pub channel_sheet: Option<InputFile>,
    /// Trainer name.
    pub trainer: String,
    /// Seed.
    pub seed: u64,
    /// Epoch cap (perceptron family).
    pub epochs: u32,
    /// Soft-margin penalty, if the soft margin was used.
    pub c: Option<f64>,
    /// How C was chosen, when cross-validation chose it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub c_choice: Option<CChoice>,
    /// Multipliers of C per class, when not both 1.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub class_weight: Option<ClassWeight>,
    /// `--max-false-go`, if given.
    pub max_false_go: Option<usize>,
    /// The holdout split taken out of the training log, if any: the model was trained on
    /// the other units.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub holdout_split: Option<HoldoutSplit>,
    /// The files of a training log read from several, each with its digest and units
    /// (`training_log` then holds the first file's path and the digest of the files'
    /// digests, in order).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub training_files: Vec<LogPart>,
    /// How the training log was read: `audit`, `pack` and `replay` read logs the same way
    /// unless told otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub read_with: Option<RecordedOptions>,
    /// Every setting of the `train` run, with where it came from (flag, project file,
    /// default).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub settings: Vec<Setting>,
}

/// A holdout taken out of the training log by `train`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HoldoutSplit {
    /// `fraction` (seeded, stratified by class) or `after` (by timestamp).
    pub method: String,
    /// The fraction of each class held out, for `fraction`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fraction: Option<f64>,
    /// The seed of the shuffle, for `fraction`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seed: Option<u64>,
    /// Units with a timestamp after this were held out, for `after`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub after: Option<String>,
    /// Units held out.
    pub held_out: usize,
    /// Units trained on.
    pub trained_on: usize,
    /// SHA-256 of the held-out units' places (`Dataset::split_digest`), so a later reading
    /// of the log can show it holds out the same units, not only as many.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub held_out_sha256: Option<String>,
}

impl HoldoutSplit {
    /// The split asked for by `--holdout-fraction` (seeded by `seed`) or `--holdout-after`,
    /// before it is made (no counts yet); `None` when neither is given.
    pub fn asked(fraction: Option<f64>, seed: u64, after: Option<&str>) -> Option<Self> {
        let (method, after) = match (fraction, after) {
            (Some(_), _) => ("fraction", None),
            (None, Some(t)) => ("after", Some(t.to_string())),
            (None, None) => return None,
        };
        Some(Self {
            method: method.into(),
            fraction,
            seed: fraction.map(|_| seed),
            after,
            held_out: 0,
            trained_on: 0,
            held_out_sha256: None,
        })
    }

    /// The units this split trains on and holds out of `ds`, both in file order: the one
    /// rule `train` splits by and the audit splits again by.
    ///
    /// # Errors
    /// A split by time over a unit without a timestamp; a record naming neither rule.
    pub fn units(&self, ds: &Dataset) -> Result<(Vec<usize>, Vec<usize>), String> {
        match (self.fraction, self.seed, &self.after) {
            (Some(f), Some(seed), _) => Ok(ds.split_fraction(f, seed)),
            (_, _, Some(after)) => ds.split_after(after),
            _ => Err("the holdout split names neither a fraction and seed nor a time".into()),
        }
    }

    /// This split as made on `ds`: its counts and the digest of the held-out units.
    pub fn made(self, ds: &Dataset, trained: &[usize], held: &[usize]) -> Self {
        Self {
            held_out: held.len(),
            trained_on: trained.len(),
            held_out_sha256: Some(ds.split_digest(held)),
            ..self
        }
    }
}

/// Training figures kept with the model.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TrainingSummary {
    /// Units trained on.
    pub units: usize,
    /// GO units.
    pub go: usize,
    /// NO-GO units.
    pub nogo: usize,
    /// Whether the training log is linearly separable (LP).
    pub separable: bool,
    /// Smallest geometric margin over the training units (scaled units; negative if some are misclassified).
    pub geometric_margin: f64,
    /// Training units on the wrong side of the threshold.
    pub training_errors: usize,
    /// Perceptron updates, for the perceptron family.
    pub updates: Option<u64>,
    /// The threshold move for `--max-false-go`.
    pub threshold_shift: Option<ThresholdShift>,
    /// Rows skipped as bad.
    pub skipped: SkipReport,
    /// The soft margin's objective and the training units' spread it was solved over.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub soft_margin: Option<SoftMargin>,
    /// A model of several classes: each class's figures, the gaps, C, the joint objective.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub classes: Option<crate::train::class_file::ClassSummary>,
}

/// What the soft margin solved, for an outside solver to check.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SoftMargin {
    /// ½‖w‖² + Σ Cᵢ·max(0, 1 − yᵢ(w·zᵢ + b)) at the solution, over standard scores zᵢ.
    pub objective: f64,
    /// Each channel's mean and standard deviation over the training units (device-scaled
    /// units): zᵢ = (xᵢ − mean) / std.
    pub spread: Spread,
}

/// A trained float model with the scaling the device will apply.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FloatModel {
    /// Always [`FORMAT`].
    pub format: String,
    /// Always [`FORMAT_VERSION`].
    pub format_version: u32,
    /// Version of the tool that wrote it.
    pub tool_version: String,
    /// 128-bit id of the training inputs, hex; copied into the blob.
    pub model_id: String,
    /// How it was made.
    pub provenance: Provenance,
    /// Channel scaling, in device order.
    pub channels: Vec<ChannelScale>,
    /// The signals whose features are channels (format version 3; empty otherwise).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub signals: Vec<SignalScale>,
    /// Weights on scaled inputs.
    pub weights: Vec<f64>,
    /// Bias.
    pub bias: f64,
    /// GO when the score exceeds this.
    pub threshold: f64,
    /// The threshold and RECHECK band chosen from held-out scores, if one was chosen.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub operating_point: Option<OperatingPoint>,
    /// A model of several classes: its rows and decision rule. Then `weights`, `bias` and
    /// `threshold` are unused (zeros), and every command that reads the model either
    /// takes the classes or refuses the model naming what it cannot do with classes.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub classes: Option<FloatClasses>,
    /// Training figures.
    pub summary: TrainingSummary,
    /// SHA-256 (hex) of this file's JSON with this field empty: a file edited after
    /// training is refused on load.
    #[serde(default)]
    pub content_sha256: String,
}

impl FloatModel {
    /// Builds the model, normalising so max |weight| = 1, and derives the model id.
    pub fn new(
        provenance: Provenance,
        channels: Vec<ChannelScale>,
        signals: Vec<SignalScale>,
        linear: &Linear,
        threshold: f64,
        summary: TrainingSummary,
    ) -> Self {
        let scale = linear.w.iter().fold(0.0f64, |m, w| m.max(w.abs()));
        let scale = if scale > 0.0 { scale } else { 1.0 };
        let mut m = Self {
            format: FORMAT.into(),
            format_version: if signals.is_empty() {
                FORMAT_VERSION
            } else {
                SIGNAL_FORMAT_VERSION
            },
            tool_version: env!("CARGO_PKG_VERSION").into(),
            model_id: String::new(),
            provenance,
            channels,
            signals,
            weights: linear.w.iter().map(|w| w / scale).collect(),
            bias: linear.b / scale,
            threshold: threshold / scale,
            operating_point: None,
            classes: None,
            summary,
            content_sha256: String::new(),
        };
        // The file holds one threshold unit: the shift's threshold is on the same
        // normalised scale as `threshold`.
        if let Some(t) = m.summary.threshold_shift.as_mut() {
            t.threshold /= scale;
        }
        m.model_id = m.derive_id();
        m
    }

    /// Sets the operating point (threshold and RECHECK band, already in this file's score
    /// units) and derives the id again: the band decides verdicts too.
    pub fn with_operating_point(mut self, op: OperatingPoint) -> Self {
        let [boundary] = op.boundaries();
        self.threshold = boundary.threshold;
        self.operating_point = Some(op);
        self.model_id = self.derive_id();
        self
    }

    /// Hash of the training inputs and settings and of everything that decides a verdict
    /// (scaling, weights, bias, threshold): the same inputs give the same id, and a model
    /// that decides differently has another.
    pub(crate) fn derive_id(&self) -> String {
        let mut h = Sha256::new();
        h.update(FORMAT.as_bytes());
        let p = &self.provenance;
        h.update(p.training_log.sha256.as_bytes());
        if let Some(s) = &p.channel_sheet {
            h.update(s.sha256.as_bytes());
        }
        h.update(p.trainer.as_bytes());
        h.update(p.seed.to_le_bytes());
        h.update(p.epochs.to_le_bytes());
        h.update(p.c.unwrap_or(-1.0).to_le_bytes());
        h.update((p.max_false_go.map_or(u64::MAX, |v| v as u64)).to_le_bytes());
        for c in &self.channels {
            h.update(c.name.as_bytes());
            h.update([0]);
            for v in [c.min, c.max, c.lsb, c.zero] {
                h.update(v.to_le_bytes());
            }
            for v in [c.raw_min, c.raw_max, c.offset] {
                h.update(v.to_le_bytes());
            }
            h.update(c.half.to_le_bytes());
            // Only a channel read from a column of another name: other models keep their ids.
            if let Some(column) = &c.column {
                h.update(b"column");
                h.update(column.as_bytes());
                h.update([0]);
            }
            // Feature channels and signals only: a model of readings keeps the id it had.
            if let Some(src) = &c.source {
                h.update(src.signal.as_bytes());
                h.update([0]);
                h.update(src.kind().as_bytes());
                if let shared_model::features::Feature::Band { coeff } = src.feature {
                    h.update(coeff.to_le_bytes());
                }
            }
        }
        for s in &self.signals {
            h.update(s.name.as_bytes());
            h.update([0]);
            for v in [s.lsb, s.zero] {
                h.update(v.to_le_bytes());
            }
            for v in [s.raw_min, s.raw_max, s.offset] {
                h.update(v.to_le_bytes());
            }
            h.update(s.window.to_le_bytes());
            // Only signals that have one: older models keep the ids they had.
            if let Some(t) = s.take {
                h.update(b"take");
                h.update(t.as_str().as_bytes());
            }
        }
        for v in self.weights.iter().chain([&self.bias, &self.threshold]) {
            h.update(v.to_le_bytes());
        }
        // Only models that have them: older models keep the ids they had.
        if let Some(w) = &p.class_weight {
            h.update(b"class-weight");
            h.update(w.go.to_le_bytes());
            h.update(w.nogo.to_le_bytes());
        }
        if let Some(op) = &self.operating_point {
            h.update(b"band");
            let [boundary] = op.boundaries();
            h.update(boundary.band.to_le_bytes());
        }
        if let Some(c) = &self.classes {
            crate::train::class_file::hash_classes(&mut h, c);
        }
        lower_hex(&h.finalize()[..16])
    }

    /// The signals and each channel's source as the blob carries them (empty for a model of
    /// readings).
    pub fn signal_section(&self) -> shared_model::features::SignalSection {
        use shared_model::features::{SignalSection, Source};
        let mut section = SignalSection::default();
        if self.signals.is_empty() {
            return section;
        }
        // `read` and training keep at most MAX_SIGNALS signals and MAX_CHANNELS channels,
        // and every source names a signal of the model; the pushes cannot fail.
        for s in &self.signals {
            let _ = section.signals.push(s.spec());
        }
        for c in &self.channels {
            let source = match &c.source {
                None => Source::Reading,
                Some(src) => Source::Feature {
                    signal: self
                        .signals
                        .iter()
                        .position(|s| s.name == src.signal)
                        .map_or(u8::MAX, |j| j as u8),
                    feature: src.feature,
                },
            };
            let _ = section.sources.push(source);
        }
        section
    }

    /// The model id as 16 bytes.
    pub fn id_bytes(&self) -> [u8; 16] {
        let mut out = [0u8; 16];
        for (o, i) in out.iter_mut().zip(0..) {
            *o = self
                .model_id
                .get(2 * i..2 * i + 2)
                .and_then(|h| u8::from_str_radix(h, 16).ok())
                .unwrap_or(0);
        }
        out
    }

    /// The model as a [`Linear`] on scaled inputs.
    pub fn linear(&self) -> Linear {
        Linear {
            w: self.weights.clone(),
            b: self.bias,
        }
    }

    /// The digest [`content_sha256`](Self::content_sha256) holds: SHA-256 of the pretty JSON
    /// with that field empty.
    pub fn content_digest(&self) -> String {
        let mut blank = self.clone();
        blank.content_sha256.clear();
        crate::digest::sha256_hex(
            serde_json::to_string_pretty(&blank)
                .unwrap_or_default()
                .as_bytes(),
        )
    }

    /// Serialises to pretty JSON with a trailing newline (deterministic), with its content
    /// digest filled in.
    pub fn to_json(&self) -> String {
        let mut m = self.clone();
        m.content_sha256 = self.content_digest();
        let mut s = serde_json::to_string_pretty(&m).unwrap_or_default();
        s.push('\n');
        s
    }

    /// Reads a float model file and checks it: format, content digest, and every field a
    /// later step divides by or relies on.
    ///
    /// # Errors
    /// I/O, JSON, a format tag/version this build does not read, a file edited after it
    /// was written, or a field out of its domain.
    pub fn read(path: &Path) -> Result<Self, InputError> {
        let text = crate::input::read_text(path, "float model file", crate::input::MAX_TEXT_FILE)?;
        Self::from_text(path, &text)
    }

    /// Parses and checks the text of the model file `path` (named in errors), as
    /// [`read`](Self::read) does.
    ///
    /// # Errors
    /// As [`read`](Self::read), but for I/O.
    pub fn from_text(path: &Path, text: &str) -> Result<Self, InputError> {
        let fmt = |message: String| InputError::Format {
            path: path.into(),
            message,
        };
        // The digest covers the model as parsed: a key named twice, or one no model has,
        // would not show in it, so the text itself must hold each field once and nothing
        // else.
        crate::input::json_keys_unique(text)
            .map_err(|e| fmt(format!("not a Linegate float model: {e}")))?;
        let probe: serde_json::Value = serde_json::from_str(text)
            .map_err(|e| fmt(format!("not a Linegate float model: {e}")))?;
        let (tag, version) = (probe.get("format"), probe.get("format_version"));
        let known = [
            FORMAT_VERSION,
            SIGNAL_FORMAT_VERSION,
            crate::train::class_file::CLASS_FORMAT_VERSION,
        ]
        .map(u64::from);
        if tag.and_then(|t| t.as_str()) != Some(FORMAT)
            || !version
                .and_then(|v| v.as_u64())
                .is_some_and(|v| known.contains(&v))
        {
            return Err(fmt(format!(
                "not a Linegate float model this build reads: format {} version {} (reads '{FORMAT}' versions {FORMAT_VERSION}, {SIGNAL_FORMAT_VERSION} and {}; retrain to write it)",
                tag.map_or("none".into(), |t| t.to_string()),
                version.map_or("none".into(), |v| v.to_string()),
                crate::train::class_file::CLASS_FORMAT_VERSION
            )));
        }
        // From the text, not the probe, so an unknown field is named with its line.
        let m: Self = serde_json::from_str(text)
            .map_err(|e| fmt(format!("not a Linegate float model: {e}")))?;
        if m.content_sha256 != m.content_digest() {
            return Err(fmt(
                "the file was changed after it was written (its content digest does not match); retrain to make a new model rather than editing it".into(),
            ));
        }
        if m.model_id != m.derive_id() {
            return Err(fmt(
                "the model id does not match the model's content; retrain to make a new model"
                    .into(),
            ));
        }
        if m.weights.len() != m.channels.len() || m.channels.is_empty() {
            return Err(fmt("weights and channels disagree in number".into()));
        }
        if !(m.weights.iter().all(|w| w.is_finite())
            && m.bias.is_finite()
            && m.threshold.is_finite())
        {
            return Err(fmt(
                "weights, bias and threshold must be finite numbers".into()
            ));
        }
        if m.classes.is_some() {
            if let Some(c) = &m.classes {
                crate::train::class_file::check_classes(c, m.channels.len(), m.format_version)
                    .map_err(fmt)?;
            }
        } else if m.weights.iter().all(|&w| w == 0.0) {
            return Err(fmt(
                "every weight is zero: the model has no direction to decide by".into(),
            ));
        }
        let want = if m.classes.is_some() {
            crate::train::class_file::CLASS_FORMAT_VERSION
        } else if m.signals.is_empty() {
            FORMAT_VERSION
        } else {
            SIGNAL_FORMAT_VERSION
        };
        if m.format_version != want {
            return Err(fmt(format!(
                "format version {} with {} signals: a model with signals is version {SIGNAL_FORMAT_VERSION}, one without is {FORMAT_VERSION}",
                m.format_version,
                m.signals.len()
            )));
        }
        for g in &m.signals {
            let fresh = SignalScale::new(
                &g.name,
                &g.unit,
                g.lsb,
                g.zero,
                (g.raw_min, g.raw_max),
                g.window,
                Some(g.offset),
                g.noise,
            )
            .and_then(|s| s.with_sample_rate(g.sample_rate))
            .and_then(|s| s.with_layout(g.take, g.columns.clone()))
            .map_err(fmt)?;
            if &fresh != g {
                return Err(fmt(format!("signal '{}' is not a valid signal", g.name)));
            }
        }
        if m.signals.len() > shared_model::limits::MAX_SIGNALS {
            return Err(fmt(format!(
                "{} signals; a model holds at most {}",
                m.signals.len(),
                shared_model::limits::MAX_SIGNALS
            )));
        }
        for c in &m.channels {
            if let Some(src) = &c.source {
                // A feature channel must be exactly what its signal and feature make.
                let signal = m
                    .signals
                    .iter()
                    .find(|s| s.name == src.signal)
                    .ok_or_else(|| {
                        fmt(format!(
                            "channel '{}': no signal '{}' in the model",
                            c.name, src.signal
                        ))
                    })?;
                let fresh = ChannelScale::of_feature(&c.name, signal, src.clone()).map_err(fmt)?;
                if &fresh != c {
                    return Err(fmt(format!(
                        "channel '{}': its range, conversion or noise do not follow from signal '{}' and its feature",
                        c.name, src.signal
                    )));
                }
                continue;
            }
            let fresh = ChannelScale::new(&c.name, &c.unit, c.min, c.max, c.lsb, c.zero)
                .map_err(|e| fmt(format!("channel '{}': {e}", c.name)))?;
            if c.column.as_deref().is_some_and(|col| col.trim().is_empty()) {
                return Err(fmt(format!("channel '{}': its column is empty", c.name)));
            }
            if (fresh.raw_min, fresh.raw_max, fresh.offset, fresh.half)
                != (c.raw_min, c.raw_max, c.offset, c.half)
            {
                return Err(fmt(format!(
                    "channel '{}': raw range, offset or half do not follow from min, max, lsb and zero",
                    c.name
                )));
            }
            if c.noise.is_some_and(|n| !(n.is_finite() && n >= 0.0)) {
                return Err(fmt(format!(
                    "channel '{}': noise must be a non-negative number",
                    c.name
                )));
            }
        }
        Ok(m)
    }
}
