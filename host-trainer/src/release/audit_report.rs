//! What an audit found, as the reports and `audit.json` carry it: one unit's row of the
//! listings ([`UnitRow`]), one log's figures ([`SetSummary`]), the noise tolerance
//! ([`Tolerance`]) and the whole audit ([`AuditReport`]), which names the blob `pack` writes
//! for it.
//!
//! Plain data: the audit pass (`audit.rs`) fills it, `report/` writes it, `audit_record.rs`
//! reads the parts `pack` and `inspect` compare back.

use std::borrow::Cow;

use serde::{Deserialize, Serialize};
use shared_model::blob;

use crate::release::bound::ErrorBound;
use crate::release::gates::{Gate, LogCounts, SetRates};

/// One unit in the audit listing.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct UnitRow {
    /// "train" or "holdout".
    pub set: String,
    /// 1-based line in its log.
    pub line: u64,
    /// The file the unit came from, for a log of several files.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub file: Option<String>,
    /// Unit id or "line N".
    pub unit: String,
    /// "GO" or "NO-GO".
    pub label: Cow<'static, str>,
    /// Float score.
    pub float_score: f64,
    /// Float verdict.
    pub float_verdict: Cow<'static, str>,
    /// Fixed score (accumulator units), or `None` on a fault.
    pub fixed_score: Option<i64>,
    /// Fixed verdict, or "FAULT".
    pub fixed_verdict: Cow<'static, str>,
    /// Fixed margin in LSB.
    pub margin_lsb: f64,
    /// The same margin along each channel alone, in its physical unit.
    pub margin_physical: Vec<f64>,
}

/// Per-log figures.
#[derive(Clone, Debug, Default, Serialize, Deserialize)]
pub struct SetSummary {
    /// "train" or "holdout".
    pub name: String,
    /// Log path.
    pub path: String,
    /// SHA-256 of the log, hex (of a log of several files: the digest of their digests).
    pub sha256: String,
    /// The files of a log of several, each with its SHA-256 and units.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub files: Vec<crate::ingest::dataset::LogPart>,
    /// Rows skipped as unreadable (`skip_bad_rows`): not units, so in no other count.
    pub skipped_rows: usize,
    /// Units.
    pub units: usize,
    /// Units labelled GO.
    pub go_units: usize,
    /// Units labelled NO-GO.
    pub nogo_units: usize,
    /// False GO, false NO-GO, RECHECK and FAULT as rates among the units each can happen
    /// to, with exact (Clopper–Pearson) bounds.
    pub rates: SetRates,
    /// Units the float model gets right.
    pub float_correct: usize,
    /// Units the fixed model gets right.
    pub fixed_correct: usize,
    /// Fixed verdict differs from float verdict.
    pub flips: usize,
    /// Readings the kernel refused.
    pub faults: usize,
    /// Fixed verdicts of RECHECK.
    pub recheck: usize,
    /// GO units among the RECHECK verdicts (the rest are NO-GO units): what the band costs
    /// in retests of good units, and what it catches of bad ones.
    pub recheck_go: usize,
    /// NO-GO units the device passes (fixed verdict GO).
    pub false_go: usize,
    /// GO units the device turns away: fixed verdict NO-GO, or a FAULT (a faulted GO unit
    /// is a false NO-GO; a faulted NO-GO unit is a safe NO-GO).
    pub false_nogo: usize,
    /// Units whose GO/NO-GO verdict the declared noise could swap (outside the RECHECK band).
    pub noise_unsafe: usize,
    /// Smallest fixed margin over float-correct units the device decides (LSB).
    pub min_margin_lsb: Option<f64>,
    /// Float-correct units whose fixed margin does not exceed the bound.
    pub within_bound: usize,
    /// Every decided unit counted by its fixed margin plus its decision edge's distance
    /// beyond the float threshold (the RECHECK band; 0 without one), the quantity
    /// `within_bound` compares with the bound, in the bins of [`margin_bin_edges`](crate::release::bound::margin_bin_edges): at most 0,
    /// then between successive edges (closed on the right), then beyond the last.
    pub margin_histogram: Vec<u64>,
    /// Every scored unit (faults have no score) counted by its rounding error, the fixed
    /// score minus A times the float score, in LSB, in the bins of
    /// [`rounding_bin_edges`](crate::release::bound::rounding_bin_edges): below −bound, twenty equal bins from −bound to +bound
    /// (each closed on the side away from zero, so ±bound itself is inside), then above
    /// +bound. The bound proves the two outer bins empty.
    pub rounding_histogram: Vec<u64>,
    /// The largest rounding error of any scored unit, |fixed score − A·float score|, in LSB.
    pub rounding_max_lsb: f64,
}

impl SetSummary {
    /// The figures the gates read.
    pub fn counts(&self) -> LogCounts<'_> {
        LogCounts {
            name: &self.name,
            units: self.units,
            go_units: self.go_units,
            nogo_units: self.nogo_units,
            false_go: self.false_go,
            false_nogo: self.false_nogo,
            recheck: self.recheck,
            faults: self.faults,
            noise_unsafe: self.noise_unsafe,
            flips: self.flips,
            within_bound: self.within_bound,
        }
    }
}

/// Sensitivity to declared sensor noise.
#[derive(Clone, Debug, Serialize)]
pub struct Tolerance {
    /// Per channel: name, declared noise (physical), drift before the first unit flips (physical), unit.
    pub channels: Vec<ChannelTolerance>,
    /// Worst score change the declared noise can cause (LSB).
    pub noise_radius_lsb: f64,
    /// Units whose verdict can change within the declared noise: their fixed margin is
    /// within the noise radius (the first 1,000 of each log, in log order).
    pub units_at_risk: Vec<UnitRow>,
    /// How many units, in all logs, are at risk (`units_at_risk` lists at most 1,000 per log).
    pub units_at_risk_count: usize,
    /// Suggested RECHECK half-band in float score units (catches every unit at risk).
    pub suggested_band: f64,
}

/// Tolerance figures of one channel.
#[derive(Clone, Debug, Serialize)]
pub struct ChannelTolerance {
    /// Channel.
    pub channel: String,
    /// Declared noise, physical units.
    pub noise: f64,
    /// Largest drift of this channel alone before any audited unit could flip, physical units.
    pub max_drift: f64,
    /// Physical unit.
    pub unit: String,
}

/// The audit result.
#[derive(Clone, Debug, Serialize)]
pub struct AuditReport {
    /// Model id (hex).
    pub model_id: String,
    /// The model file's content digest (SHA-256, hex; `content_sha256` in model.json).
    pub model_sha256: String,
    /// SHA-256 of the blob `pack` writes for this audit (marked passed, or overridden if
    /// the audit failed): `inspect --report` compares a blob's bytes with it.
    pub blob_sha256: String,
    /// That blob's id (its CRC-32, eight hex digits), as the device prints it.
    pub blob_id: String,
    /// The release key's id when the blob is signed (`--sign`), hex.
    pub key_id: Option<String>,
    /// Input word bits.
    pub input_bits: u8,
    /// Weight word bits.
    pub weight_bits: u8,
    /// Fractional bits of the weights.
    pub weight_frac_bits: u8,
    /// Accumulator bits declared.
    pub acc_bits: u8,
    /// Bits the worst-case score needs.
    pub needed_bits: u8,
    /// acc_bits − needed_bits.
    pub headroom_bits: i32,
    /// Integer weights.
    pub weights: Vec<i32>,
    /// Integer bias.
    pub bias: i64,
    /// NO-GO at or below.
    pub nogo_max: i64,
    /// GO at or above.
    pub go_min: i64,
    /// A: accumulator units per float score unit. Each ideal weight is
    /// Wᵢ* = A·wᵢ/(halfᵢ·κᵢ) with κᵢ = multiplierᵢ/2^shiftᵢ, the ideal bias B* = A·b.
    pub scale: f64,
    /// A·t, the float threshold t in accumulator units.
    pub threshold_acc: f64,
    /// Wᵢ*, the ideal (real) integer-scale weights.
    pub ideal_weights: Vec<f64>,
    /// B*, the ideal bias.
    pub ideal_bias: f64,
    /// The weights after plain rounding (ties to even), before the ±1 LSB search.
    pub plain_weights: Vec<i32>,
    /// The bias after plain rounding.
    pub plain_bias: i64,
    /// What the search moved: each channel (or "bias") whose final value differs from the
    /// plain rounding, with both values.
    pub search_changes: Vec<String>,
    /// Blob size in bytes.
    pub blob_bytes: usize,
    /// Per-log figures.
    pub sets: Vec<SetSummary>,
    /// Smallest float margin over correctly classified training units, in LSB.
    pub float_min_margin_lsb: Option<f64>,
    /// Smallest fixed margin after plain rounding (training units).
    pub plain_min_margin_lsb: Option<f64>,
    /// Smallest fixed margin after the search (training units).
    pub optimised_min_margin_lsb: Option<f64>,
    /// Search moves kept.
    pub search_moves: usize,
    /// The rounding-error bound.
    pub bound: ErrorBound,
    /// Every correctly classified unit's margin exceeds the bound.
    pub guaranteed: bool,
    /// Smallest margin along each channel, physical units.
    pub channel_margin: Vec<(String, f64, String)>,
    /// Units whose decision flipped.
    pub flips: Vec<UnitRow>,
    /// Units behind the decision gates: every false GO, false NO-GO (FAULT included) and
    /// noise-unsafe unit, in log order (at most 200 per log).
    pub wrong: Vec<UnitRow>,
    /// The units closest to the boundary.
    pub tightest: Vec<UnitRow>,
    /// Sensor-noise analysis, when noise is declared.
    pub tolerance: Option<Tolerance>,
    /// RECHECK half-band used, in float score units (0: none).
    pub recheck_band: f64,
    /// Choices the tool made on the user's request (`--apply-…`), in words.
    pub applied: Vec<String>,
    /// Settings taken from the model's operating point because no flag gave them, in words.
    #[serde(default)]
    pub from_model: Vec<String>,
    /// Every gate on every log, passed or not.
    pub gates: Vec<Gate>,
    /// The audit's verdict: every gate passed.
    pub passed: bool,
    /// Why it failed: one line per failed gate.
    pub reasons: Vec<String>,
    /// The command line that ran the audit, as the CLI records it for the release record
    /// (absent when a library call made the report).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub command_line: Option<String>,
    /// Each signal feature's range, overflow proof and noise bound (empty for a model of
    /// readings).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub features: Vec<crate::release::features::FeatureProof>,
    /// The model's operating point (threshold and RECHECK band chosen on held-out scores),
    /// every figure a number with its exact bounds; absent for a model without one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub operating_point: Option<crate::release::point_record::OperatingPointRecord>,
    /// How cross-validation chose C (every C tried and why); absent when C was given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub c_choice: Option<crate::train::c_choice::CChoice>,
    /// The holdout split `train` recorded: its held-out units are audited as the log
    /// "held-out", the others as "train".
    #[serde(skip_serializing_if = "Option::is_none")]
    pub split: Option<crate::train::float_model::HoldoutSplit>,
    /// Every setting of the run with its source (flag, project file, model, default), as
    /// the CLI records it; `pack` compares its own with these.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub settings: Vec<crate::project::Setting>,
    /// The field baseline `linegate drift` compares with: the held-out log's scores,
    /// counts and channel figures, and the device plan.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub baseline: Option<crate::release::audit_baseline::Baseline>,
}

impl AuditReport {
    /// Names `blob`, the bytes `pack` writes for this audit, in the report: its SHA-256,
    /// blob id, size and, for a signed blob, the key id.
    pub fn name_blob(&mut self, blob: &[u8]) {
        self.blob_sha256 = crate::digest::sha256_hex(blob);
        self.blob_id = blob::blob_id(blob).map_or(String::new(), |id| format!("{id:08x}"));
        if let Some(b) = self.baseline.as_mut() {
            b.plan.blob_id = blob::blob_id(blob).unwrap_or(0);
        }
        self.blob_bytes = blob.len();
        self.key_id = blob::signature(blob).map(|s| crate::digest::lower_hex(&s.key_id));
    }
}
