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

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::digest::lower_hex;
use crate::error::InputError;
use crate::ingest::SkipReport;
use crate::ingest::scaling::ChannelScale;
use crate::train::linear::{Linear, ThresholdShift};

/// Format tag in every float model file.
pub const FORMAT: &str = "linegate-float-model";
/// Layout version of the float model file.
pub const FORMAT_VERSION: u32 = 1;

/// A file that went into a model.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct InputFile {
    /// Path as given.
    pub path: PathBuf,
    /// SHA-256, hex.
    pub sha256: String,
}

/// How the model was made.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
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
    /// `--max-false-go`, if given.
    pub max_false_go: Option<usize>,
}

/// Training figures kept with the model.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
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
}

/// A trained float model with the scaling the device will apply.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
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
    /// Weights on scaled inputs.
    pub weights: Vec<f64>,
    /// Bias.
    pub bias: f64,
    /// GO when the score exceeds this.
    pub threshold: f64,
    /// Training figures.
    pub summary: TrainingSummary,
}

impl FloatModel {
    /// Builds the model, normalising so max |weight| = 1, and derives the model id.
    pub fn new(
        provenance: Provenance,
        channels: Vec<ChannelScale>,
        linear: &Linear,
        threshold: f64,
        summary: TrainingSummary,
    ) -> Self {
        let scale = linear.w.iter().fold(0.0f64, |m, w| m.max(w.abs()));
        let scale = if scale > 0.0 { scale } else { 1.0 };
        let mut m = Self {
            format: FORMAT.into(),
            format_version: FORMAT_VERSION,
            tool_version: env!("CARGO_PKG_VERSION").into(),
            model_id: String::new(),
            provenance,
            channels,
            weights: linear.w.iter().map(|w| w / scale).collect(),
            bias: linear.b / scale,
            threshold: threshold / scale,
            summary,
        };
        m.model_id = m.derive_id();
        m
    }

    /// Hash of the training inputs and settings: the same inputs give the same id.
    fn derive_id(&self) -> String {
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
        }
        lower_hex(&h.finalize()[..16])
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

    /// Serialises to pretty JSON with a trailing newline (deterministic).
    pub fn to_json(&self) -> String {
        let mut s = serde_json::to_string_pretty(self).unwrap_or_default();
        s.push('\n');
        s
    }

    /// Reads a float model file.
    ///
    /// # Errors
    /// I/O, JSON, or a format tag/version this build does not read.
    pub fn read(path: &Path) -> Result<Self, InputError> {
        let text = std::fs::read_to_string(path).map_err(|e| InputError::io(path, e))?;
        let fmt = |message: String| InputError::Format {
            path: path.into(),
            message,
        };
        let m: Self = serde_json::from_str(&text)
            .map_err(|e| fmt(format!("not a Linegate float model: {e}")))?;
        if m.format != FORMAT || m.format_version != FORMAT_VERSION {
            return Err(fmt(format!(
                "format '{}' version {} is not readable by this build (reads '{FORMAT}' version {FORMAT_VERSION})",
                m.format, m.format_version
            )));
        }
        if m.weights.len() != m.channels.len() || m.channels.is_empty() {
            return Err(fmt("weights and channels disagree in number".into()));
        }
        Ok(m)
    }
}
