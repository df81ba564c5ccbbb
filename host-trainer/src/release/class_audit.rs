//! The release audit of a model of several classes: every log's units through the kernel
//! (`class_tally.rs`: confusion matrix, flips, the per-pair rounding proof), the gates per
//! class (`class_gates.rs`), and what the report shows ([`ClassAudit`]).
//!
//! The field baseline `drift` compares against is not kept for a model of several classes
//! yet: `baseline` is null and `baseline_note` says so, and `drift` refuses such a model.

use std::io::Write;

use serde::Serialize;
use shared_model::{CheckedModel, Readings};

use crate::confidence::DEFAULT_CONFIDENCE;
use crate::ingest::dataset::{Dataset, RawForm};
use crate::release::blob_release::release_mark;
use crate::release::class_gates::class_gates;
use crate::release::class_tally::{
    ClassLog, TIGHTEST_CLASSES, UnitCheck, check_unit, tally_classes,
};
use crate::release::gates::{AuditConfig, Gate, Limit, reason};
use crate::release::quantise_classes::{PairBounds, QuantisedClasses};
use crate::train::class_rows::FloatClasses;
use crate::train::float_model::FloatModel;

/// Why `drift` has no baseline for a model of several classes.
pub const NO_BASELINE: &str =
    "no field baseline is kept for a model of several classes yet; `drift` refuses this model";

/// One audited log, as the record names it.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ClassSet {
    /// Its name in the report.
    pub name: String,
    /// Its SHA-256 (of a log of several files: the digest of their digests).
    pub sha256: String,
}

/// One class row as the blob carries it, beside its ideal real values.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FixedRow {
    /// The class's name.
    pub name: String,
    /// Integer weights, in channel order.
    pub weights: Vec<i32>,
    /// Integer bias, in accumulator units.
    pub bias: i64,
    /// Ideal real weights A·w/(half·κ).
    pub ideal_weights: Vec<f64>,
    /// Ideal real bias A·b.
    pub ideal_bias: f64,
}

/// A channel's conversion: `x = ((raw − offset)·multiplier + 2^(shift−1)) >> shift` for
/// `raw_min ≤ raw ≤ raw_max` (no rounding term when `shift` is 0), else FAULT.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Conversion {
    /// Lowest valid raw reading.
    pub raw_min: i32,
    /// Highest valid raw reading.
    pub raw_max: i32,
    /// Raw reading at the range's middle.
    pub offset: i32,
    /// Multiplier.
    pub multiplier: i32,
    /// Right shift.
    pub shift: u8,
}

/// One unit of a listing (flips, tightest) and of the units CSV.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ClassUnit {
    /// The log.
    pub set: String,
    /// Line in its file.
    pub line: u64,
    /// Unit id, or its place.
    pub unit: String,
    /// True class (empty without one of the model's classes).
    pub class: String,
    /// The float rule's decided class, or RECHECK.
    pub float: String,
    /// The float lead, in accumulator units.
    pub float_lead: f64,
    /// The device's verdict: GO, NO-GO, RECHECK or FAULT.
    pub device: String,
    /// The class the device's leader is (also under RECHECK; empty for a FAULT).
    pub device_class: String,
    /// The device's lead (accumulator units; none for a FAULT).
    pub device_lead: Option<i64>,
    /// The smallest distance to a decision edge in multiples of its pair's bound.
    pub margin_multiple: Option<f64>,
    /// Whether rounding provably cannot change its decision.
    pub proved: bool,
}

/// The audit of a model of several classes.
#[derive(Clone, Debug, Serialize)]
pub struct ClassAudit {
    /// Always "classes": what a reader of audit.json tells the two kinds apart by.
    pub kind: &'static str,
    /// The float model's id.
    pub model_id: String,
    /// SHA-256 of the float model file's content.
    pub model_sha256: String,
    /// SHA-256 of the blob the audit names (version 5, or 6 signed).
    pub blob_sha256: String,
    /// The release key's id, for a signed blob.
    pub key_id: Option<String>,
    /// Every log audited: its report name and SHA-256 (what `pack --audited` compares).
    pub sets: Vec<ClassSet>,
    /// The settings of the release with their sources (what `pack --audited` compares).
    pub settings: Vec<crate::project::Setting>,
    /// The blob's id (its CRC, as the device's lines name it).
    pub blob_id: String,
    /// The blob's size in bytes.
    pub blob_bytes: usize,
    /// Scaled input word.
    pub input_bits: u8,
    /// Weight word.
    pub weight_bits: u8,
    /// Fractional bits of the weights' Q-format.
    pub weight_frac_bits: u8,
    /// Accumulator width.
    pub acc_bits: u8,
    /// Bits the largest difference of two rows' scores needs (the overflow proof: at most
    /// `acc_bits`).
    pub needed_bits: u8,
    /// `acc_bits − needed_bits`.
    pub headroom_bits: i32,
    /// Accumulator units per float score unit (A).
    pub scale: f64,
    /// The channels, in order.
    pub channels: Vec<String>,
    /// Each channel's conversion as the blob holds it (raw range, offset, multiplier,
    /// shift): with `rows`, every device score can be recomputed from the readings.
    pub conversions: Vec<Conversion>,
    /// The classes, in row order.
    pub classes: Vec<String>,
    /// The GO class's row, if any.
    pub go: Option<usize>,
    /// The GO gap on the device (accumulator units) and A × the float gap.
    pub go_gap: (i64, f64),
    /// The class gap on the device (accumulator units) and A × the float gap.
    pub class_gap: (i64, f64),
    /// The rows.
    pub rows: Vec<FixedRow>,
    /// The rounding bound of each pair of rows' difference.
    pub pair_bounds: PairBounds,
    /// The confidence of the confusion matrix's intervals.
    pub confidence: f64,
    /// Each log's tally.
    pub logs: Vec<ClassLog>,
    /// Every scored unit proved, on every log.
    pub proved: bool,
    /// Flipped units (at most 100 per log).
    pub flips: Vec<ClassUnit>,
    /// The tightest units over all logs.
    pub tightest: Vec<ClassUnit>,
    /// The misrouting limit applied.
    pub max_misroute: Limit,
    /// Every gate.
    pub gates: Vec<Gate>,
    /// Whether every gate held.
    pub passed: bool,
    /// Why not, one line per failed gate.
    pub reasons: Vec<String>,
    /// The field baseline: none for a model of several classes (see `baseline_note`).
    pub baseline: Option<()>,
    /// Why there is no baseline.
    pub baseline_note: &'static str,
    /// The command line that asked for the audit.
    pub command_line: Option<String>,
    /// What this audit does not cover that a two-sided one would (e.g. declared noise).
    pub notes: Vec<String>,
}

/// Audits a quantised model of several classes on the training log and on `others`.
pub fn audit_classes(
    q: &QuantisedClasses,
    fm: &FloatModel,
    fc: &FloatClasses,
    train: &Dataset,
    others: &[(&str, &Dataset)],
    cfg: AuditConfig,
    misroute: Limit,
) -> ClassAudit {
    // The float rule at the device's gaps: both decide at the same edges.
    let fc = &q.float_rule(fc);
    let pairs = q.pairs.clone();
    let all: Vec<(&str, &Dataset)> = std::iter::once(("train", train))
        .chain(others.iter().copied())
        .collect();
    let logs: Vec<ClassLog> = all
        .iter()
        .map(|&(n, ds)| tally_classes(n, q, fc, &pairs, ds))
        .collect();
    let names: Vec<String> = fc.rows.iter().map(|r| r.name.clone()).collect();
    let gates = class_gates(&logs, &names, fc.go, cfg, misroute);
    let reasons: Vec<String> = gates.iter().filter(|g| !g.passed).map(reason).collect();
    let rows_of = |name: &str, ds: &Dataset, idx: &mut dyn Iterator<Item = usize>| {
        idx.map(|i| unit_of(name, q, fc, &pairs, ds, i))
            .collect::<Vec<_>>()
    };
    let mut flips = Vec::new();
    let mut tight: Vec<(f64, ClassUnit)> = Vec::new();
    for (l, &(n, ds)) in logs.iter().zip(&all) {
        flips.extend(rows_of(n, ds, &mut l.flip_units.iter().copied()));
        tight.extend(
            l.tight
                .iter()
                .map(|&(m, i)| (m, unit_of(n, q, fc, &pairs, ds, i))),
        );
    }
    tight.sort_by(|a, b| a.0.total_cmp(&b.0));
    tight.truncate(TIGHTEST_CLASSES);
    let m = &q.fixed;
    let mut r = ClassAudit {
        kind: "classes",
        model_id: fm.model_id.clone(),
        model_sha256: fm.content_digest(),
        blob_sha256: String::new(),
        key_id: None,
        sets: all
            .iter()
            .map(|(n, ds)| ClassSet {
                name: (*n).to_string(),
                sha256: ds.sha256.clone(),
            })
            .collect(),
        settings: Vec::new(),
        blob_id: String::new(),
        blob_bytes: 0,
        input_bits: m.input_bits,
        weight_bits: m.weight_bits,
        weight_frac_bits: m.weight_frac_bits,
        acc_bits: m.acc_bits,
        needed_bits: q.needed_bits,
        headroom_bits: i32::from(m.acc_bits) - i32::from(q.needed_bits),
        scale: q.scale,
        channels: fm.channels.iter().map(|c| c.name.clone()).collect(),
        conversions: m
            .channels
            .iter()
            .map(|c| Conversion {
                raw_min: c.raw_min,
                raw_max: c.raw_max,
                offset: c.offset,
                multiplier: c.multiplier,
                shift: c.shift,
            })
            .collect(),
        classes: names,
        go: fc.go,
        go_gap: (q.section.go_gap, q.ideal_go_gap),
        class_gap: (q.section.class_gap, q.ideal_class_gap),
        rows: q
            .section
            .rows
            .iter()
            .zip(&q.ideal_weights)
            .zip(&q.ideal_bias)
            .map(|((r, w), &b)| FixedRow {
                name: r.name.to_string(),
                weights: r.weights.to_vec(),
                bias: r.bias,
                ideal_weights: w.clone(),
                ideal_bias: b,
            })
            .collect(),
        pair_bounds: pairs,
        confidence: DEFAULT_CONFIDENCE,
        proved: logs.iter().all(|l| l.unproved == 0),
        logs,
        flips,
        tightest: tight.into_iter().map(|t| t.1).collect(),
        max_misroute: misroute,
        passed: reasons.is_empty(),
        gates,
        reasons,
        baseline: None,
        baseline_note: NO_BASELINE,
        command_line: None,
        notes: q
            .raised
            .iter()
            .map(|(what, from, to)| {
                format!(
                    "{what} raised from {from} to {to} accumulator units: just above the widest rounding bound of the pairs it decides, so a unit the float rule leaves tied stays RECHECK on the device; the float rule is held to the same gaps"
                )
            })
            .collect(),
    };
    r.name_blob(&class_blob(q, r.passed, None));
    r
}

impl ClassAudit {
    /// Names `blob` (the bytes `pack` writes) in the report.
    pub fn name_blob(&mut self, blob: &[u8]) {
        self.blob_sha256 = crate::digest::sha256_hex(blob);
        self.key_id =
            shared_model::blob::signature(blob).map(|s| crate::digest::lower_hex(&s.key_id));
        self.blob_id =
            shared_model::blob::blob_id(blob).map_or(String::new(), |id| format!("{id:08x}"));
        self.blob_bytes = blob.len();
    }
}

/// The blob of a model of several classes (version 5, or 6 signed with `signer`), marked
/// passed or overridden.
pub fn class_blob(
    q: &QuantisedClasses,
    passed: bool,
    signer: Option<&ed25519_dalek::SigningKey>,
) -> Vec<u8> {
    let mut m = q.fixed.clone();
    m.audit = release_mark(passed);
    // The mark changes nothing validation looks at, so the model validated again holds.
    let Ok(model) = CheckedModel::with_outcomes(m, Readings, q.section.clone()) else {
        return Vec::new();
    };
    match signer {
        Some(k) => crate::release::sign::signed_blob(&model, k),
        None => crate::release::pack::blob_bytes(&model),
    }
}

/// What a unit check says, as a listing's row.
fn unit_of(
    set: &str,
    q: &QuantisedClasses,
    fc: &FloatClasses,
    pairs: &PairBounds,
    ds: &Dataset,
    i: usize,
) -> ClassUnit {
    let forms: Vec<RawForm> = fc
        .rows
        .iter()
        .map(|r| RawForm::new(ds, &r.weights, r.bias))
        .collect();
    let u = check_unit(q, fc, &forms, pairs, ds, i);
    row(set, q, ds, i, &u)
}

fn row(set: &str, q: &QuantisedClasses, ds: &Dataset, i: usize, u: &UnitCheck) -> ClassUnit {
    let name = |k: usize| {
        q.section
            .name(u8::try_from(k).unwrap_or(u8::MAX))
            .to_string()
    };
    ClassUnit {
        set: set.into(),
        line: ds.lines[i],
        unit: ds.unit_name(i),
        class: u.class.map_or(String::new(), name),
        float: if u.float_decided {
            name(u.float_leader)
        } else {
            "RECHECK".into()
        },
        float_lead: u.float_lead,
        device: u.device.map_or("FAULT", |(v, _, _)| v.as_str()).into(),
        device_class: u.device.map_or(String::new(), |(_, c, _)| name(c)),
        device_lead: u.device.map(|d| d.2),
        margin_multiple: u.device.is_some().then_some(u.multiple),
        proved: u.proved,
    }
}

/// Writes every unit of `sets` as CSV: set, line, unit, true class, the float rule's
/// decision and lead, the device's verdict, class and lead, the margin multiple, proved.
///
/// # Errors
/// The writer's.
pub fn write_class_units_csv(
    w: &mut dyn Write,
    q: &QuantisedClasses,
    fc: &FloatClasses,
    sets: &[(&str, &Dataset)],
) -> std::io::Result<()> {
    let fc = &q.float_rule(fc);
    let pairs = q.pairs.clone();
    writeln!(
        w,
        "set,line,unit,class,float,float_lead_lsb,device,device_class,device_lead,margin_multiple,proved"
    )?;
    for &(set, ds) in sets {
        let forms: Vec<RawForm> = fc
            .rows
            .iter()
            .map(|r| RawForm::new(ds, &r.weights, r.bias))
            .collect();
        for i in 0..ds.len() {
            let u = check_unit(q, fc, &forms, &pairs, ds, i);
            let r = row(set, q, ds, i, &u);
            writeln!(
                w,
                "{},{},{},{},{},{},{},{},{},{},{}",
                csv_cell(&r.set),
                r.line,
                csv_cell(&r.unit),
                csv_cell(&r.class),
                csv_cell(&r.float),
                r.float_lead,
                r.device,
                csv_cell(&r.device_class),
                r.device_lead.map_or(String::new(), |v| v.to_string()),
                r.margin_multiple.map_or(String::new(), |v| v.to_string()),
                r.proved
            )?;
        }
    }
    Ok(())
}

/// A CSV cell, quoted when it holds a comma, quote or line break (RFC 4180).
fn csv_cell(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}
