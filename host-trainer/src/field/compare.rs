//! Change control: two releases run over the same field logs, unit by unit.
//!
//! A release is a float model with its blob, or a float model quantised plainly (as
//! `linegate values` does without a blob). Each release reads the log as its own model
//! says (its channel scaling, its recorded columns and label tokens); the two reads must
//! give the same units on the same lines, else the comparison is refused.
//!
//! For every unit both outcomes (GO, NO-GO, RECHECK, FAULT) and scores are kept; a unit
//! whose outcome differs is a change, counted per transition (`NO-GO→GO`, `GO→RECHECK`,
//! …) with its exact Clopper–Pearson bounds ([`crate::confidence::Rate`]) among all units
//! compared. Margins are compared in the float models' score units: a release's margin is
//! `score / scale − threshold`, where `scale` is the accumulator units per float-score
//! unit its quantisation used (`release::quantise`, recomputed from the float model and
//! the blob's word lengths) and `threshold` the float model's GO/NO-GO threshold. Both
//! float models have max |weight| = 1 over inputs scaled to [−1, 1], so a margin is the
//! signed distance of the unit from that model's boundary on a common scale when both
//! models scale their channels alike (same offsets and ranges); models whose channel
//! scalings differ measure margins against different input ranges, and the shift is then
//! only a guide. The shift is B's margin minus A's, over units both releases decided (no
//! FAULT on either side).
//!
//! The gate: a NO-GO→GO change (a unit the first release stopped, NO-GO or FAULT, which
//! the device shows as NO-GO, and the second passes) fails the comparison unless allowed
//! (a count, or any). RECHECK→GO changes (units the first release sent to a retest and the
//! second passes outright) are counted beside the gate and named in its verdict.

use crate::release::pack::DeviceModel;
use std::path::PathBuf;

use serde::Serialize;

use super::score::{Outcome, Refused, ReleaseIds, Scored, label_word, path_digest, score_logs};
use crate::confidence::Rate;
use crate::error::InputError;
use crate::ingest::{LogOptions, SkipReport};
use crate::release::quantise::{QuantConfig, QuantError, quantise};
use crate::train::float_model::FloatModel;

/// Why a comparison could not be made.
#[derive(Debug, thiserror::Error)]
pub enum CompareError {
    /// A log could not be read.
    #[error(transparent)]
    Input(#[from] InputError),
    /// The two releases read different units from the log.
    #[error(
        "{path}: the two releases read the log differently: unit {index} is on line {line_a} for the first and line {line_b} for the second (different columns or skipped rows); read both with the same --unit-id/--label/--ignore flags"
    )]
    Differ {
        /// The file.
        path: PathBuf,
        /// The unit's 0-based index over the log.
        index: usize,
        /// Its line for release A (0: A had no such unit).
        line_a: u64,
        /// Its line for release B (0: B had no such unit).
        line_b: u64,
    },
    /// The logs held no unit (a header only, or every row skipped): nothing was compared.
    #[error(
        "the field logs hold no unit (a header only, or every row skipped): nothing to compare"
    )]
    NoUnits,
    /// A release's quantisation scale could not be recomputed.
    #[error("{model}: its score scale cannot be recomputed: {error}")]
    Scale {
        /// The float model's id.
        model: String,
        /// The quantiser's refusal.
        error: QuantError,
    },
}

/// One side of the comparison.
pub struct Release<'a> {
    /// The float model.
    pub fm: &'a FloatModel,
    /// The device's model: the blob's, or the float model quantised plainly.
    pub model: DeviceModel,
    /// Model id, blob id, key id, model line.
    pub ids: ReleaseIds,
    /// How the log is read for this release.
    pub opts: LogOptions,
    /// Where it came from, as the report names it (the files given).
    pub source: String,
}

/// The accumulator units per float-score unit of `model` quantised from `fm`: the scale
/// `release::quantise` chose, recomputed at `model`'s word lengths (the ±1 LSB search
/// moves weights, never the scale).
///
/// # Errors
/// The quantiser's refusal (the model does not fit those word lengths).
pub fn score_scale(fm: &FloatModel, model: &DeviceModel) -> Result<f64, QuantError> {
    let m = model.model();
    let q = quantise(
        fm,
        None,
        QuantConfig {
            input_bits: m.input_bits,
            weight_bits: m.weight_bits,
            optimise: false,
            acc_bits: None,
            recheck_band: fm.operating_point.as_ref().map_or(0.0, |op| op.band),
        },
    )?;
    Ok(q.scale)
}

/// A release as the comparison reports it.
#[derive(Clone, Debug, Serialize)]
pub struct Side {
    /// Model id, blob id, key id.
    pub model_id: String,
    /// The blob's id (CRC-32, hex); `null` for a model quantised plainly.
    pub blob_id: Option<String>,
    /// The signing key's id, for a signed blob.
    pub key_id: Option<String>,
    /// The files it came from.
    pub source: String,
    /// Input and weight word lengths.
    pub input_bits: u8,
    /// Weight word length.
    pub weight_bits: u8,
    /// Accumulator units per float-score unit.
    pub scale: f64,
    /// The float model's threshold (float-score units).
    pub threshold: f64,
    /// Scores at or below this are NO-GO (accumulator units).
    pub nogo_max: i64,
    /// Scores at or above this are GO.
    pub go_min: i64,
}

/// One unit's outcome under one release.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct UnitSide {
    /// GO, NO-GO, RECHECK or FAULT.
    pub outcome: Outcome,
    /// The score (accumulator units); `None` for a FAULT.
    pub score: Option<i64>,
    /// The fault, for a FAULT.
    pub fault: Option<Refused>,
    /// `score / scale − threshold`, float-score units; `None` for a FAULT.
    pub margin: Option<f64>,
}

/// A unit whose outcome differs between the releases.
#[derive(Clone, Debug, Serialize)]
pub struct Change {
    /// The file, as given.
    pub file: String,
    /// Line of the unit's first row.
    pub line: u64,
    /// 0-based index over the log.
    pub index: usize,
    /// The unit id, if the log has that column.
    pub unit_id: Option<String>,
    /// The timestamp, if the log has that column.
    pub timestamp: Option<String>,
    /// `GO`/`NO-GO`, or `None` for an unlabelled log.
    pub label: Option<&'static str>,
    /// Under release A.
    pub a: UnitSide,
    /// Under release B.
    pub b: UnitSide,
}

/// How many units went from one outcome to another.
#[derive(Clone, Debug, Serialize)]
pub struct Transition {
    /// Under A.
    pub from: Outcome,
    /// Under B.
    pub to: Outcome,
    /// The count among all units compared, with its Clopper–Pearson bounds.
    pub rate: Rate,
}

/// The margin shift (B − A, float-score units) over units both releases decided.
#[derive(Clone, Debug, Serialize)]
pub struct Shift {
    /// Units both decided.
    pub units: u64,
    /// Smallest shift.
    pub min: f64,
    /// Median (the mean of the two middle values for an even count).
    pub median: f64,
    /// Largest shift.
    pub max: f64,
}

/// The gate on NO-GO→GO changes.
#[derive(Clone, Debug, Serialize)]
pub struct Gate {
    /// NO-GO→GO changes found: NO-GO→GO and FAULT→GO (the device shows a FAULT as NO-GO).
    pub nogo_to_go: u64,
    /// RECHECK→GO changes: not gated, named in the verdict for the reviewer.
    pub recheck_to_go: u64,
    /// How many are allowed (`None`: any).
    pub allowed: Option<u64>,
    /// Whether the comparison passes.
    pub passed: bool,
}

/// A log file compared, with its SHA-256.
#[derive(Clone, Debug, Serialize)]
pub struct LogFile {
    /// The path as given.
    pub path: String,
    /// Its SHA-256 (hex); a folder's: the digest of its files' list.
    pub sha256: String,
}

/// The whole comparison.
#[derive(Clone, Debug, Serialize)]
pub struct Comparison {
    /// Release A (the one in use).
    pub a: Side,
    /// Release B (the candidate).
    pub b: Side,
    /// The logs.
    pub logs: Vec<LogFile>,
    /// Units compared.
    pub units: u64,
    /// Units whose outcome changed, with bounds.
    pub changed: Rate,
    /// Each transition that occurred, in a fixed order (from, then to: GO, NO-GO, RECHECK,
    /// FAULT).
    pub transitions: Vec<Transition>,
    /// The margin shift; `None` when no unit was decided by both.
    pub shift: Option<Shift>,
    /// The gate.
    pub gate: Gate,
    /// Every changed unit, in log order.
    pub changes: Vec<Change>,
}

/// What the comparison is asked for.
#[derive(Clone, Copy, Debug)]
pub struct CompareConfig {
    /// Confidence of the bounds (0.95).
    pub confidence: f64,
    /// NO-GO→GO changes allowed (`None`: any).
    pub allowed: Option<u64>,
}

/// A unit's outcome under `r` with its margin.
fn side_of(u: &Scored<'_>, scale: f64, threshold: f64) -> UnitSide {
    let score = u.score();
    UnitSide {
        outcome: Outcome::of(&u.result),
        score,
        fault: Refused::of(&u.result),
        margin: score.map(|s| s as f64 / scale - threshold),
    }
}

/// Runs both releases over the log of `files` and compares them unit by unit.
///
/// # Errors
/// A log that cannot be read, two reads that differ ([`CompareError::Differ`]), a scale
/// that cannot be recomputed.
pub fn compare(
    files: &[PathBuf],
    a: &Release<'_>,
    b: &Release<'_>,
    cfg: CompareConfig,
    skipped: (&mut SkipReport, &mut SkipReport),
) -> Result<Comparison, CompareError> {
    let scale = |r: &Release<'_>| {
        score_scale(r.fm, &r.model).map_err(|error| CompareError::Scale {
            model: r.ids.model_id.clone(),
            error,
        })
    };
    let (scale_a, scale_b) = (scale(a)?, scale(b)?);
    let (thr_a, thr_b) = (a.fm.threshold, b.fm.threshold);
    // A's pass: each unit's file, line and outcome.
    let mut first: Vec<(usize, u64, UnitSide)> = Vec::new();
    score_logs(files, &a.opts, a.fm, &a.model, skipped.0, |u| {
        first.push((u.file, u.line, side_of(u, scale_a, thr_a)));
    })?;
    // B's pass, in step with A's.
    let mut changes = Vec::new();
    let mut shifts = Vec::new();
    let mut counts = std::collections::BTreeMap::<(Outcome, Outcome), u64>::new();
    let mut differ: Option<CompareError> = None;
    let mut seen = 0usize;
    score_logs(files, &b.opts, b.fm, &b.model, skipped.1, |u| {
        seen += 1;
        if differ.is_some() {
            return;
        }
        let Some(&(file, line, sa)) = first.get(u.index) else {
            differ = Some(CompareError::Differ {
                path: files[u.file].clone(),
                index: u.index,
                line_a: 0,
                line_b: u.line,
            });
            return;
        };
        if (file, line) != (u.file, u.line) {
            differ = Some(CompareError::Differ {
                path: files[u.file].clone(),
                index: u.index,
                line_a: line,
                line_b: u.line,
            });
            return;
        }
        let sb = side_of(u, scale_b, thr_b);
        if let (Some(ma), Some(mb)) = (sa.margin, sb.margin) {
            shifts.push(mb - ma);
        }
        if sa.outcome != sb.outcome {
            *counts.entry((sa.outcome, sb.outcome)).or_default() += 1;
            let text = |b: Option<&[u8]>| b.map(|b| super::score::bytes_text(b).into_owned());
            changes.push(Change {
                file: files[u.file].display().to_string(),
                line: u.line,
                index: u.index,
                unit_id: text(u.id),
                timestamp: text(u.time),
                label: label_word(u.label),
                a: sa,
                b: sb,
            });
        }
    })?;
    if let Some(e) = differ {
        return Err(e);
    }
    if seen < first.len() {
        let (file, line, _) = first[seen];
        return Err(CompareError::Differ {
            path: files[file].clone(),
            index: seen,
            line_a: line,
            line_b: 0,
        });
    }
    let units = first.len() as u64;
    if units == 0 {
        return Err(CompareError::NoUnits);
    }
    let transitions = counts
        .iter()
        .map(|(&(from, to), &n)| Transition {
            from,
            to,
            rate: Rate::new(n, units, cfg.confidence),
        })
        .collect();
    let count = |from| counts.get(&(from, Outcome::Go)).copied().unwrap_or(0);
    let nogo_to_go = count(Outcome::NoGo) + count(Outcome::Fault);
    let recheck_to_go = count(Outcome::Recheck);
    let logs = files
        .iter()
        .map(|f| {
            Ok(LogFile {
                path: f.display().to_string(),
                sha256: path_digest(f)?,
            })
        })
        .collect::<Result<Vec<_>, InputError>>()?;
    Ok(Comparison {
        a: side(a, scale_a),
        b: side(b, scale_b),
        logs,
        units,
        changed: Rate::new(changes.len() as u64, units, cfg.confidence),
        transitions,
        shift: shift_of(shifts),
        gate: Gate {
            nogo_to_go,
            recheck_to_go,
            allowed: cfg.allowed,
            passed: cfg.allowed.is_none_or(|n| nogo_to_go <= n),
        },
        changes,
    })
}

fn side(r: &Release<'_>, scale: f64) -> Side {
    let m = r.model.model();
    Side {
        model_id: r.ids.model_id.clone(),
        blob_id: r.ids.blob_id.clone(),
        key_id: r.ids.key_id.clone(),
        source: r.source.clone(),
        input_bits: m.input_bits,
        weight_bits: m.weight_bits,
        scale,
        threshold: r.fm.threshold,
        nogo_max: m.nogo_max,
        go_min: m.go_min,
    }
}

/// Min, median and max of the shifts.
fn shift_of(mut shifts: Vec<f64>) -> Option<Shift> {
    if shifts.is_empty() {
        return None;
    }
    shifts.sort_by(f64::total_cmp);
    let n = shifts.len();
    let median = if n % 2 == 1 {
        shifts[n / 2]
    } else {
        (shifts[n / 2 - 1] + shifts[n / 2]) / 2.0
    };
    Some(Shift {
        units: n as u64,
        min: shifts[0],
        median,
        max: shifts[n - 1],
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_median_of_an_even_count_is_the_mean_of_the_middle_two() {
        let s = shift_of(vec![4.0, -1.0, 2.0, 3.0]).unwrap();
        assert_eq!((s.min, s.median, s.max, s.units), (-1.0, 2.5, 4.0, 4));
        let s = shift_of(vec![5.0, -2.0, 1.0]).unwrap();
        assert_eq!(s.median, 1.0);
        assert!(shift_of(Vec::new()).is_none());
    }
}
