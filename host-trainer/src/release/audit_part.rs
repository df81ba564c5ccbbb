//! One log's audit over part of its units, and the exact merge of parts: the audit as
//! map-reduce. A part is counted from the units of one file (or one partition of a
//! dataset) by the same pass the single-process audit runs (`tally.rs`); parts merge in any
//! order and any grouping into the single pass's figures, bit for bit, because everything a
//! part keeps merges exactly:
//!
//! - counts and histogram bins add (integers);
//! - the smallest margins and the largest rounding error take the minimum or maximum;
//! - the listed units are ordered by their place in the log ([`UnitKey`]: the part, then
//!   the unit's index inside it, which sorts as the log's unit order), so "the first 200
//!   behind a gate" or "the 20 closest to the boundary" (by margin, then place) are the
//!   same units whichever part saw them first;
//! - each part names its file (path, SHA-256, units), so the merged log has the single
//!   pass's file list and digest.
//!
//! Parts serialise ([`AuditPart::to_bytes`]) so an engine can move them between
//! processes; a part records the release and rounding bound it was counted with, and a
//! merge refuses parts of another release.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::ingest::dataset::{Dataset, LogPart, combined_digest, counted_twice, log_name};
use crate::release::audit_report::{SetSummary, UnitRow};
use crate::release::blob_release::released_blob;
use crate::release::gates::SetRates;
use crate::release::quantise::{Quantised, fixed_margin};
use crate::release::tally::{AT_RISK, Tally, WRONG, sort_tightest, tally};
use crate::train::float_model::FloatModel;

/// Where a unit sits in its log: the part it was counted in (a file's or a partition's
/// place in the log), then its index inside that part. Keys sort as the log's unit order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
pub struct UnitKey {
    /// The part's place in the log (0 first).
    pub part: u32,
    /// The unit's index inside its part (0 first).
    pub index: u64,
}

/// A listed unit: its place in the log and its row of the report.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct Listed {
    /// Its place in the log.
    pub key: UnitKey,
    /// Its row, as the report lists it.
    pub row: UnitRow,
}

/// What a part is counted with: the quantised release, its float model, the rounding bound
/// and the declared noise's radius (LSB), if noise is declared.
#[derive(Clone, Copy)]
pub struct Counter<'a> {
    /// The quantised release (its kernel decides).
    pub q: &'a Quantised,
    /// Its float model (flips and float margins).
    pub fm: &'a FloatModel,
    /// The rounding bound, LSB.
    pub bound: f64,
    /// The radius declared noise can move a score, LSB.
    pub risk: Option<f64>,
}

/// Why two parts cannot merge.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum MergeError {
    /// The parts were counted with different releases or bounds.
    #[error(
        "the parts were counted with different releases ({a} and {b}): count every part with the same model, blob and noise"
    )]
    Release {
        /// The first part's release.
        a: String,
        /// The second part's release.
        b: String,
    },
    /// The parts belong to different logs.
    #[error("the parts belong to different logs ({a} and {b})")]
    Log {
        /// The first part's log name.
        a: String,
        /// The second part's log name.
        b: String,
    },
    /// A part's bytes are not a part.
    #[error("not an audit part: {0}")]
    Bytes(String),
    /// The same part, or the same file under two places, merged twice.
    #[error("{0}")]
    Twice(String),
    /// The merged parts do not cover the log's files `0..n` (a file's part left out), or
    /// their units do not add up.
    #[error(
        "the parts cover files {places} of a log of {files}: merge every file's part, each once"
    )]
    Incomplete {
        /// The places covered.
        places: String,
        /// The log's files.
        files: usize,
    },
}

/// One log's audit over some of its units (see the module docs).
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct AuditPart {
    /// The release and bound counted with, in words; parts of one audit share it.
    pub release: String,
    /// The figures over these units (`name` is the log's; path, digest, files and rates are
    /// filled in by [`finish`](Self::finish)). Carried as JSON text inside the part's
    /// bytes: the report's form leaves empty fields out, which a positional format cannot.
    #[serde(with = "as_json")]
    pub s: SetSummary,
    /// Each file (or partition) counted, by its place in the log (empty for a whole log).
    pub sources: BTreeMap<u32, LogPart>,
    /// Smallest float margin over correctly classified units, LSB.
    pub float_min: f64,
    /// Smallest fixed margin over float-correct decided units, LSB.
    pub min_fixed_abs: f64,
    /// Units at risk from declared noise (all of them; `at_risk` lists the first).
    pub at_risk_count: usize,
    /// Every unit whose decision flipped.
    pub flips: Vec<Listed>,
    /// The first units behind a decision gate (at most 200).
    pub wrong: Vec<Listed>,
    /// The units closest to the boundary, by margin then place (at most 20).
    pub tight: Vec<(f64, Listed)>,
    /// The first units declared noise could move (at most 1000).
    pub at_risk: Vec<Listed>,
}

/// One log's audit, merged from all its parts.
#[derive(Clone, Debug, Serialize)]
pub struct LogAudit {
    /// The log's figures, with rates and exact bounds.
    pub set: SetSummary,
    /// Every unit whose decision flipped, in log order.
    pub flips: Vec<UnitRow>,
    /// The first units behind a decision gate, in log order.
    pub wrong: Vec<UnitRow>,
    /// The units closest to the boundary, closest first.
    pub tightest: Vec<UnitRow>,
    /// The first units declared noise could move, in log order.
    pub units_at_risk: Vec<UnitRow>,
    /// Units declared noise could move, in all.
    pub at_risk_count: usize,
    /// Smallest fixed margin over float-correct decided units, LSB (`null`: none).
    pub min_fixed_margin_lsb: Option<f64>,
    /// Smallest float margin over correctly classified units, LSB (`null`: none).
    pub float_min_margin_lsb: Option<f64>,
}

/// A release (float model and blob) to count parts with: the blob's kernel, in the frame
/// its quantisation used (score scale, input conversions) recomputed from the float model,
/// as `compare` recomputes it; the rounding bound of the blob's own weights.
pub struct Released {
    /// The blob's model in the quantiser's frame.
    pub q: Quantised,
    /// The float model.
    pub fm: FloatModel,
    /// The rounding bound, LSB.
    pub bound: f64,
    /// The radius declared noise can move a score, LSB (`None`: no noise declared).
    pub risk: Option<f64>,
}

/// Why a release cannot count parts.
#[derive(Debug, thiserror::Error)]
pub enum ReleasedError {
    /// The blob is damaged or is not one the float model produces.
    #[error(transparent)]
    Blob(#[from] crate::release::matching::BlobMismatch),
    /// The model is not a two-sided model of readings.
    #[error(
        "{0}: the audit by parts takes a two-sided model of readings (audit a model of several classes or of signal features with `linegate audit`)"
    )]
    Kind(String),
    /// The float model does not quantise at the blob's word lengths.
    #[error(transparent)]
    Quant(#[from] crate::release::quantise::QuantError),
    /// The blob's model does not validate as a model of readings.
    #[error("the blob's model does not validate as a two-sided model of readings: {0}")]
    Model(String),
    /// A noise list of the wrong length.
    #[error("{given} noise values for a model of {channels} channels: give one per channel")]
    Noise {
        /// Values given.
        given: usize,
        /// The model's channels.
        channels: usize,
    },
}

impl Released {
    /// The release of `fm` whose blob is `blob`, with each channel's declared noise
    /// (physical units; empty or all `None`: none).
    ///
    /// # Errors
    /// [`ReleasedError`]: the blob does not come from `fm`, the model is not two-sided over
    /// readings, or the noise list does not match the channels.
    pub fn new(fm: FloatModel, blob: &[u8], noise: &[Option<f64>]) -> Result<Self, ReleasedError> {
        let device = crate::release::matching::decode_from(&fm, blob)?;
        if fm.classes.is_some() || !fm.signals.is_empty() {
            return Err(ReleasedError::Kind(fm.model_id.clone()));
        }
        if !noise.is_empty() && noise.len() != fm.channels.len() {
            return Err(ReleasedError::Noise {
                given: noise.len(),
                channels: fm.channels.len(),
            });
        }
        let m = device.model();
        let mut q = crate::release::quantise::quantise(
            &fm,
            None,
            crate::release::quantise::QuantConfig {
                input_bits: m.input_bits,
                weight_bits: m.weight_bits,
                optimise: false,
                acc_bits: Some(m.acc_bits),
                recheck_band: fm.operating_point.as_ref().map_or(0.0, |op| op.band),
            },
        )?;
        q.model = shared_model::CheckedModel::new(m.clone())
            .map_err(|e| ReleasedError::Model(e.to_string()))?;
        let bound = crate::release::bound::error_bound(&q).total;
        let risk = crate::release::tolerance::noise_radius(&q, &fm, noise);
        Ok(Self { q, fm, bound, risk })
    }

    /// What parts are counted with.
    pub fn counter(&self) -> Counter<'_> {
        Counter {
            q: &self.q,
            fm: &self.fm,
            bound: self.bound,
            risk: self.risk,
        }
    }
}

impl Counter<'_> {
    /// The release and bound in words, as parts record them.
    fn release(&self) -> String {
        format!(
            "model {} blob {:08x} bound {} noise {}",
            self.fm.model_id,
            // The kernel's bytes under one fixed mark: the same for a part counted from the
            // released blob and for the audit's own quantisation.
            shared_model::blob::blob_id(&released_blob(self.q, false, None)).unwrap_or(0),
            self.bound,
            self.risk.map_or("none".to_string(), |r| r.to_string())
        )
    }
}

impl AuditPart {
    /// Counts every unit of `ds`: the log `name`'s part number `part` (one file of it, or one
    /// partition), or with `part` = `None` the whole log.
    pub fn count(c: Counter<'_>, name: &str, ds: &Dataset, part: Option<u32>) -> Self {
        let a = tally(name, c.q, c.fm, ds, c.bound, c.risk);
        // A whole log keeps its own name, digest and files (a held-out split included);
        // a part names its file, and `finish` names the log from its parts' files.
        let key = |i: usize| UnitKey {
            part: part.unwrap_or(0),
            index: i as u64,
        };
        let listed = |i: usize| {
            let mut row = unit_row(name, c.q, c.fm, ds, i);
            // Every row names its file until `finish` knows whether the log has several
            // (the bytes of a part then always carry the field).
            row.file = Some(ds.file_of(i).display().to_string());
            Listed { key: key(i), row }
        };
        let sources = part.map_or_else(BTreeMap::new, |p| BTreeMap::from([(p, file_of(ds))]));
        let mut s = a.s.clone();
        s.go_units = ds.labels.iter().filter(|&&l| l > 0).count();
        Self {
            release: c.release(),
            s,
            sources,
            float_min: a.float_min,
            min_fixed_abs: a.min_fixed_abs,
            at_risk_count: a.at_risk_count,
            flips: a.flips.iter().map(|&(i, _)| listed(i)).collect(),
            wrong: a.wrong.iter().map(|&i| listed(i)).collect(),
            tight: a.tight.iter().map(|&(m, i)| (m, listed(i))).collect(),
            at_risk: a.at_risk.iter().map(|&i| listed(i)).collect(),
        }
    }

    /// This part and `other` as one (in either order, with the same result).
    ///
    /// # Errors
    /// [`MergeError`] when the parts are of different releases or logs.
    pub fn merge(mut self, other: Self) -> Result<Self, MergeError> {
        if self.release != other.release {
            return Err(MergeError::Release {
                a: self.release,
                b: other.release,
            });
        }
        if self.s.name != other.s.name {
            return Err(MergeError::Log {
                a: self.s.name,
                b: other.s.name,
            });
        }
        for (k, f) in &other.sources {
            let earlier: Vec<LogPart> = self.sources.values().cloned().collect();
            let twice = match self.sources.get(k) {
                Some(g) => Some(format!(
                    "the part of file {k} ({}) is merged twice: its units would count twice",
                    g.path.display()
                )),
                None => counted_twice(&earlier, f),
            };
            if let Some(what) = twice {
                return Err(MergeError::Twice(what));
            }
        }
        self.s.go_units += other.s.go_units;
        self.s.skipped_rows += other.s.skipped_rows;
        Tally::merge_summary(&mut self.s, &other.s);
        self.sources.extend(other.sources);
        self.float_min = self.float_min.min(other.float_min);
        self.min_fixed_abs = self.min_fixed_abs.min(other.min_fixed_abs);
        self.at_risk_count += other.at_risk_count;
        let first = |mut v: Vec<Listed>, w: Vec<Listed>, keep: usize| {
            v.extend(w);
            v.sort_by_key(|l| l.key);
            v.truncate(keep);
            v
        };
        self.flips = first(self.flips, other.flips, usize::MAX);
        self.wrong = first(self.wrong, other.wrong, WRONG);
        self.at_risk = first(self.at_risk, other.at_risk, AT_RISK);
        self.tight.extend(other.tight);
        sort_tightest(&mut self.tight, |t| t.1.key);
        Ok(self)
    }

    /// The part's bytes, to move it between processes (postcard; floats exact).
    pub fn to_bytes(&self) -> Vec<u8> {
        postcard::to_allocvec(self).unwrap_or_default()
    }

    /// A part from [`to_bytes`](Self::to_bytes).
    ///
    /// # Errors
    /// [`MergeError::Bytes`] when the bytes are not a part.
    pub fn from_bytes(bytes: &[u8]) -> Result<Self, MergeError> {
        postcard::from_bytes(bytes).map_err(|e| MergeError::Bytes(e.to_string()))
    }

    /// The log's audit from all its parts: the file list and digest of the parts' files in
    /// order, the rates with their exact bounds, the listed units without their keys.
    ///
    /// # Errors
    /// [`MergeError::Incomplete`] when the parts are not those of files `0..files`, each
    /// once.
    pub fn finish(self, files: usize) -> Result<LogAudit, MergeError> {
        let places: Vec<u32> = self.sources.keys().copied().collect();
        let counted: usize = self.sources.values().map(|f| f.units).sum();
        let whole = places.len() == files
            && places.iter().copied().eq(0..places.len() as u32)
            && counted == self.s.units;
        if !whole {
            return Err(MergeError::Incomplete {
                places: format!("{places:?}"),
                files,
            });
        }
        Ok(self.into_audit())
    }

    /// The audit of what the part counted: a whole log counted as one part (`count` with
    /// no part number), or all of a log's parts once [`finish`](Self::finish) checked them.
    pub fn into_audit(self) -> LogAudit {
        let mut s = self.s;
        let files: Vec<LogPart> = self.sources.into_values().collect();
        let several = if files.is_empty() {
            !s.files.is_empty()
        } else {
            files.len() > 1
        };
        if let Some(first) = files.first() {
            s.path = log_name(&first.path, files.len()).display().to_string();
            s.sha256 = if files.len() > 1 {
                combined_digest(&files)
            } else {
                first.sha256.clone()
            };
            s.files = if files.len() > 1 { files } else { Vec::new() };
        }
        s.nogo_units = s.units - s.go_units;
        s.rates = SetRates::of(&s.counts());
        let rows = |v: Vec<Listed>| -> Vec<UnitRow> {
            v.into_iter()
                .map(|mut l| {
                    if !several {
                        l.row.file = None;
                    }
                    l.row
                })
                .collect()
        };
        let finite = |x: f64| x.is_finite().then_some(x);
        LogAudit {
            set: s,
            flips: rows(self.flips),
            wrong: rows(self.wrong),
            tightest: rows(self.tight.into_iter().map(|t| t.1).collect()),
            units_at_risk: rows(self.at_risk),
            at_risk_count: self.at_risk_count,
            min_fixed_margin_lsb: finite(self.min_fixed_abs),
            float_min_margin_lsb: finite(self.float_min),
        }
    }
}

/// A value carried as its JSON text (self-describing) inside postcard's positional bytes.
mod as_json {
    use serde::{Deserialize, Deserializer, Serialize, Serializer};

    pub fn serialize<T: Serialize, S: Serializer>(v: &T, s: S) -> Result<S::Ok, S::Error> {
        let text = serde_json::to_string(v).map_err(serde::ser::Error::custom)?;
        s.serialize_str(&text)
    }

    pub fn deserialize<'de, T: serde::de::DeserializeOwned, D: Deserializer<'de>>(
        d: D,
    ) -> Result<T, D::Error> {
        let text = String::deserialize(d)?;
        serde_json::from_str(&text).map_err(serde::de::Error::custom)
    }
}

/// The file `ds` was read from, as a part of a log names it.
fn file_of(ds: &Dataset) -> LogPart {
    LogPart {
        path: ds.path.clone(),
        sha256: ds.sha256.clone(),
        units: ds.len(),
    }
}

/// One unit's row of the listings and of the units CSV.
pub(crate) fn unit_row(
    set: &str,
    q: &Quantised,
    fm: &FloatModel,
    ds: &Dataset,
    i: usize,
) -> UnitRow {
    let m = q.model.model();
    let lin = fm.linear();
    let fs = lin.scores(ds, &[i])[0];
    let d = q.model.classify(ds.raw_row(i)).ok();
    let margin = d.map_or(f64::NAN, |d| fixed_margin(m, d.score, ds.labels[i]));
    UnitRow {
        set: set.into(),
        line: ds.lines[i],
        file: (!ds.parts.is_empty()).then(|| ds.file_of(i).display().to_string()),
        unit: ds.unit_name(i),
        label: if ds.labels[i] > 0 { "GO" } else { "NO-GO" }.into(),
        float_score: fs,
        float_verdict: if fs > fm.threshold { "GO" } else { "NO-GO" }.into(),
        fixed_score: d.map(|d| d.score),
        fixed_verdict: d.map_or("FAULT", |d| d.verdict.as_str()).into(),
        margin_lsb: margin,
        margin_physical: physical_margins(q, fm, margin),
    }
}

/// A margin of `lsb` accumulator units, expressed along each channel alone in its physical unit.
pub(crate) fn physical_margins(q: &Quantised, fm: &FloatModel, lsb: f64) -> Vec<f64> {
    q.model
        .model()
        .channels
        .iter()
        .zip(&q.kappa)
        .zip(&fm.channels)
        .map(|((c, k), s)| {
            if c.weight == 0 {
                f64::INFINITY
            } else {
                lsb / f64::from(c.weight).abs() / k * s.lsb
            }
        })
        .collect()
}
