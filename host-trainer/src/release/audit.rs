//! The release audit: does the fixed-point model decide as the float model did, and is that proved?
//!
//! Every fixed-point decision here comes from `shared_model`'s kernel, the
//! code the firmware runs. Error bound, in accumulator LSB, for any in-range
//! reading (Wᵢ the integer weights, Wᵢ* the ideal real ones, Xᵢ = κᵢ·(raw −
//! offsetᵢ) the exact scaled input, |Xᵢ| ≤ Xmaxᵢ):
//!
//! ```text
//! |acc − A·score_float| ≤ ½·Σ|Wᵢ|  +  Σ|Wᵢ − Wᵢ*|·Xmaxᵢ  +  |B − b·A|
//!                          inputs      weights              bias
//! ```
//!
//! It follows from acc − A·score = Σ Wᵢ·δxᵢ + Σ (Wᵢ − Wᵢ*)·Xᵢ + (B − bA) with
//! |δxᵢ| ≤ ½ (the kernel rounds to nearest). It is never looser than the
//! textbook Σ|Wᵢ*|·εx + Σ|Xᵢ|·εw + n·εx·εw (+ εb), which is reported beside it.
//! A unit whose fixed margin exceeds the bound cannot have had its decision
//! changed by rounding; the model is "guaranteed" when that holds for every
//! correctly classified unit.

use rayon::prelude::*;
use serde::Serialize;
use shared_model::{CheckedModel, Verdict, blob};

use crate::ingest::dataset::Dataset;
pub use crate::release::gates::{AuditConfig, Gate, Limit};
use crate::release::gates::{LogCounts, SetRates, gates, reason};
use crate::release::quantise::{QuantConfig, QuantError, Quantised, fixed_margin, quantise};
use crate::train::float_model::FloatModel;

/// The rounding-error bound, in accumulator LSB.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize)]
pub struct ErrorBound {
    /// ½·Σ|Wᵢ|: input rounding.
    pub inputs: f64,
    /// Σ|Wᵢ − Wᵢ*|·Xmaxᵢ: weight rounding.
    pub weights: f64,
    /// |B − b·A|: bias rounding.
    pub bias: f64,
    /// The sum: the bound used for the guarantee.
    pub total: f64,
    /// The textbook form Σ|Wᵢ*|·εx + Σ Xmaxᵢ·εw + n·εx·εw + εb, for comparison.
    pub textbook: f64,
}

/// Computes the bound for a quantised model.
pub fn error_bound(q: &Quantised) -> ErrorBound {
    let m = q.model.model();
    let xmax: Vec<f64> = m
        .channels
        .iter()
        .zip(&q.kappa)
        .map(|(c, k)| {
            k * (f64::from(c.raw_max) - f64::from(c.offset))
                .abs()
                .max((f64::from(c.offset) - f64::from(c.raw_min)).abs())
        })
        .collect();
    let inputs = 0.5
        * m.channels
            .iter()
            .map(|c| f64::from(c.weight).abs())
            .sum::<f64>();
    let dw: Vec<f64> = m
        .channels
        .iter()
        .zip(&q.ideal_weights)
        .map(|(c, w)| (f64::from(c.weight) - w).abs())
        .collect();
    let weights = dw.iter().zip(&xmax).map(|(d, x)| d * x).sum::<f64>();
    let bias = (m.bias as f64 - q.ideal_bias).abs();
    let eps_w = dw.iter().copied().fold(0.0, f64::max);
    let n = m.channels.len() as f64;
    let textbook = 0.5 * q.ideal_weights.iter().map(|w| w.abs()).sum::<f64>()
        + eps_w * xmax.iter().sum::<f64>()
        + n * 0.5 * eps_w
        + bias;
    ErrorBound {
        inputs,
        weights,
        bias,
        total: inputs + weights + bias,
        textbook,
    }
}

/// One unit in the audit listing.
#[derive(Clone, Debug, Serialize)]
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
    pub label: &'static str,
    /// Float score.
    pub float_score: f64,
    /// Float verdict.
    pub float_verdict: &'static str,
    /// Fixed score (accumulator units), or `None` on a fault.
    pub fixed_score: Option<i64>,
    /// Fixed verdict, or "FAULT".
    pub fixed_verdict: &'static str,
    /// Fixed margin in LSB.
    pub margin_lsb: f64,
    /// The same margin along each channel alone, in its physical unit.
    pub margin_physical: Vec<f64>,
}

/// Per-log figures.
#[derive(Clone, Debug, Default, Serialize)]
pub struct SetSummary {
    /// "train" or "holdout".
    pub name: String,
    /// Log path.
    pub path: String,
    /// SHA-256 of the log, hex (of a log of several files: the digest of their digests).
    pub sha256: String,
    /// The files of a log of several, each with its SHA-256 and units.
    #[serde(skip_serializing_if = "Vec::is_empty")]
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
    /// `within_bound` compares with the bound, in the bins of [`margin_bin_edges`]: at most 0,
    /// then between successive edges (closed on the right), then beyond the last.
    pub margin_histogram: Vec<u64>,
    /// Every scored unit (faults have no score) counted by its rounding error, the fixed
    /// score minus A times the float score, in LSB, in the bins of
    /// [`rounding_bin_edges`]: below −bound, twenty equal bins from −bound to +bound
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

/// Bins of the rounding-error histogram: below −B, 20 bins of B/10 from −B to B, above B.
pub const ROUNDING_BINS: usize = 22;

/// The edges of the rounding-error histogram's bins, in LSB, for a rounding bound `bound`
/// (1 LSB when the bound is 0): −B, −0.9·B, …, 0.9·B, B.
pub fn rounding_bin_edges(bound: f64) -> [f64; ROUNDING_BINS - 1] {
    let u = if bound > 0.0 { bound } else { 1.0 };
    let mut e = [0.0; ROUNDING_BINS - 1];
    for (k, v) in e.iter_mut().enumerate() {
        *v = u * (k as f64 - 10.0) / 10.0;
    }
    e
}

/// Bins of the margin histogram: at most 0 LSB, then (0, u], (u, 2u], (2u, 4u], … doubling
/// up to 2¹⁵·u, then beyond; u is the rounding bound (1 LSB when the bound is 0).
pub const MARGIN_BINS: usize = 18;

/// The edges of the margin histogram's bins, in LSB, for a rounding bound `bound`.
pub fn margin_bin_edges(bound: f64) -> [f64; MARGIN_BINS - 1] {
    let u = if bound > 0.0 { bound } else { 1.0 };
    let mut e = [0.0; MARGIN_BINS - 1];
    for (k, v) in e.iter_mut().enumerate().skip(1) {
        *v = u * f64::from(1u32 << (k - 1));
    }
    e
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
}

struct Acc {
    s: SetSummary,
    /// The margin histogram's bin edges.
    edges: [f64; MARGIN_BINS - 1],
    /// Smallest float margin over correctly classified units, in LSB.
    float_min: f64,
    flips: Vec<(usize, f64)>,
    tight: Vec<(f64, usize)>,
    /// The rounding-error histogram's bin edges.
    rounding_edges: [f64; ROUNDING_BINS - 1],
    /// Units at risk from declared noise, in all of the log (`at_risk` keeps the first).
    at_risk_count: usize,
    min_fixed_abs: f64,
    /// Units whose verdict declared noise could change, in file order (at most `AT_RISK`).
    at_risk: Vec<usize>,
    /// False GO, false NO-GO and noise-unsafe units, in file order (at most `WRONG`).
    wrong: Vec<usize>,
}

impl Acc {
    /// Notes a unit behind a decision gate (the first `WRONG` of a log are kept).
    fn note_wrong(&mut self, i: usize) {
        if self.wrong.len() < WRONG && self.wrong.last() != Some(&i) {
            self.wrong.push(i);
        }
    }
}

const TIGHTEST: usize = 20;
const AT_RISK: usize = 1000;
const WRONG: usize = 200;

/// Audits one log with the shared kernel. Parallel over units.
/// `risk`: the score change declared noise can cause, if any noise is declared.
fn audit_set(
    name: &str,
    q: &Quantised,
    fm: &FloatModel,
    ds: &Dataset,
    bound: f64,
    risk: Option<f64>,
) -> Acc {
    let m = &q.model;
    let float = crate::ingest::dataset::RawForm::new(ds, &fm.weights, fm.bias);
    let band = (fm.threshold * q.scale, m.model());
    // How far each decision edge lies beyond the float threshold, in LSB: the edges the
    // margins are measured from (go_min − ½, nogo_max + ½) against ⌊A·t⌋ + ½, where they sit
    // without a band.
    let t_floor = band.0.floor();
    let go_past = (band.1.go_min as f64 - 1.0 - t_floor).max(0.0);
    let nogo_past = (t_floor - band.1.nogo_max as f64).max(0.0);
    let empty = || Acc {
        s: SetSummary {
            name: name.into(),
            path: ds.name().display().to_string(),
            sha256: ds.sha256.clone(),
            files: ds.parts.clone(),
            skipped_rows: ds.skipped.total,
            ..Default::default()
        },
        float_min: f64::INFINITY,
        edges: margin_bin_edges(bound),
        flips: Vec::new(),
        tight: Vec::new(),
        rounding_edges: rounding_bin_edges(bound),
        at_risk_count: 0,
        min_fixed_abs: f64::INFINITY,
        at_risk: Vec::new(),
        wrong: Vec::new(),
    };
    let merge = |mut a: Acc, b: Acc| {
        a.s.units += b.s.units;
        a.s.float_correct += b.s.float_correct;
        a.s.fixed_correct += b.s.fixed_correct;
        a.s.flips += b.s.flips;
        a.s.faults += b.s.faults;
        a.s.recheck += b.s.recheck;
        a.s.recheck_go += b.s.recheck_go;
        a.s.false_go += b.s.false_go;
        a.s.false_nogo += b.s.false_nogo;
        a.s.noise_unsafe += b.s.noise_unsafe;
        a.s.within_bound += b.s.within_bound;
        add_counts(&mut a.s.margin_histogram, b.s.margin_histogram);
        add_counts(&mut a.s.rounding_histogram, b.s.rounding_histogram);
        a.s.rounding_max_lsb = a.s.rounding_max_lsb.max(b.s.rounding_max_lsb);
        a.at_risk_count += b.at_risk_count;
        a.s.min_margin_lsb = match (a.s.min_margin_lsb, b.s.min_margin_lsb) {
            (Some(x), Some(y)) => Some(x.min(y)),
            (x, y) => x.or(y),
        };
        a.flips.extend(b.flips);
        a.tight.extend(b.tight);
        a.tight
            .sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1)));
        a.tight.truncate(TIGHTEST);
        a.min_fixed_abs = a.min_fixed_abs.min(b.min_fixed_abs);
        a.float_min = a.float_min.min(b.float_min);
        // Chunks merge in file order, so the first AT_RISK units are kept.
        a.at_risk.extend(b.at_risk);
        a.at_risk.truncate(AT_RISK);
        a.wrong.extend(b.wrong);
        a.wrong.truncate(WRONG);
        a
    };
    let visit = |a: &mut Acc, i: usize| {
        let raw = ds.raw_row(i);
        let label = ds.labels[i];
        a.s.units += 1;
        let d = match m.classify(raw) {
            Ok(d) => d,
            Err(_) => {
                // The device shows NO-GO on a fault: wrong for a GO unit, safe for a NO-GO one.
                a.s.faults += 1;
                if label > 0 {
                    a.s.false_nogo += 1;
                    a.note_wrong(i);
                }
                return;
            }
        };
        let fs = float.score(raw);
        // Rounding error of the score itself, the quantity the bound bounds.
        let err = d.score as f64 - fs * q.scale;
        if a.s.rounding_histogram.is_empty() {
            a.s.rounding_histogram = vec![0; ROUNDING_BINS];
        }
        // Closed on the side away from zero, so a unit exactly at ±bound counts inside.
        let bin = if err > 0.0 {
            edges_below(&a.rounding_edges, |e| e < err)
        } else {
            edges_below(&a.rounding_edges, |e| e <= err)
        };
        if let Some(c) = a.s.rounding_histogram.get_mut(bin) {
            *c += 1;
        }
        a.s.rounding_max_lsb = a.s.rounding_max_lsb.max(err.abs());
        let float_go = fs > fm.threshold;
        let float_ok = float_go == (label > 0);
        a.s.float_correct += usize::from(float_ok);
        if float_ok {
            a.float_min = a
                .float_min
                .min(f64::from(label) * (fs - fm.threshold) * q.scale);
        }
        let margin = fixed_margin(band.1, d.score, label);
        // A RECHECK is a retest: no decision, so neither right nor wrong, and not part of
        // the margin and guarantee figures, which are about decisions.
        let decided = d.verdict != Verdict::Recheck;
        if decided {
            if a.s.margin_histogram.is_empty() {
                a.s.margin_histogram = vec![0; MARGIN_BINS];
            }
            // The quantity the bound is compared with: the margin plus its edge's
            // distance beyond the float threshold (the RECHECK band, 0 without one).
            let past = if label > 0 { go_past } else { nogo_past };
            // Bins are closed on the right, as `within_bound` counts a unit at the bound.
            let bin = edges_below(&a.edges, |e| e < margin + past);
            if let Some(c) = a.s.margin_histogram.get_mut(bin) {
                *c += 1;
            }
        }
        a.s.fixed_correct += usize::from(decided && margin > 0.0);
        a.s.recheck += usize::from(!decided);
        a.s.recheck_go += usize::from(!decided && label > 0);
        match (d.verdict, label > 0) {
            (Verdict::Go, false) => {
                a.s.false_go += 1;
                a.note_wrong(i);
            }
            (Verdict::NoGo, true) => {
                a.s.false_nogo += 1;
                a.note_wrong(i);
            }
            _ => {}
        }
        let float_verdict = if float_go { Verdict::Go } else { Verdict::NoGo };
        // With a RECHECK band a RECHECK is not a flip; a GO/NO-GO swap is.
        if decided && d.verdict != float_verdict {
            a.s.flips += 1;
            a.flips.push((i, margin));
        }
        if float_ok && decided {
            a.s.min_margin_lsb = Some(a.s.min_margin_lsb.map_or(margin, |v: f64| v.min(margin)));
            // Rounding swaps a decision only across the float threshold; with a RECHECK
            // band the unit's own edge lies beyond it by the band (0 without one).
            let past = if label > 0 { go_past } else { nogo_past };
            a.s.within_bound += usize::from(margin + past <= bound);
            a.min_fixed_abs = a.min_fixed_abs.min(margin);
        }
        if let Some(r) = risk {
            if margin.abs() <= r {
                a.at_risk_count += 1;
                if a.at_risk.len() < AT_RISK {
                    a.at_risk.push(i);
                }
            }
            // How far the score may move before the opposite decision: GO units from
            // nogo_max + ½, NO-GO units from go_min − ½ (the same edges as the margins).
            let room = match d.verdict {
                Verdict::Go => d.score as f64 - (band.1.nogo_max as f64 + 0.5),
                Verdict::NoGo => (band.1.go_min as f64 - 0.5) - d.score as f64,
                Verdict::Recheck => f64::INFINITY,
            };
            if room <= r {
                a.s.noise_unsafe += 1;
                a.note_wrong(i);
            }
        }
        if a.tight.len() < TIGHTEST || margin < a.tight.last().map_or(f64::INFINITY, |t| t.0) {
            a.tight.push((margin, i));
            a.tight
                .sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1)));
            a.tight.truncate(TIGHTEST);
        }
    };
    // Chunks of units, each folded into its own accumulator in place: a fold that passes
    // the accumulator by value copied its several hundred bytes once per unit.
    const CHUNK: usize = 1 << 16;
    (0..ds.len().div_ceil(CHUNK))
        .into_par_iter()
        .map(|c| {
            let mut a = empty();
            for i in c * CHUNK..ds.len().min((c + 1) * CHUNK) {
                visit(&mut a, i);
            }
            a
        })
        .reduce(empty, merge)
}

/// How many of the ascending `edges` satisfy `below` (a predicate true up to some edge and
/// false after): a unit's bin. The same number as `partition_point`, counted over all 17–21
/// edges, which the compiler does without branches; a binary search's unpredictable branches
/// cost more than that on every unit of the audit pass.
#[inline]
fn edges_below<const N: usize>(edges: &[f64; N], below: impl Fn(f64) -> bool) -> usize {
    edges.iter().map(|&e| usize::from(below(e))).sum()
}

/// Adds one chunk's bin counts to another's (either may not have started counting).
fn add_counts(into: &mut Vec<u64>, from: Vec<u64>) {
    if into.is_empty() {
        *into = from;
    } else {
        for (x, y) in into.iter_mut().zip(&from) {
            *x += y;
        }
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
        label: if ds.labels[i] > 0 { "GO" } else { "NO-GO" },
        float_score: fs,
        float_verdict: if fs > fm.threshold { "GO" } else { "NO-GO" },
        fixed_score: d.map(|d| d.score),
        fixed_verdict: d.map_or("FAULT", |d| d.verdict.as_str()),
        margin_lsb: margin,
        margin_physical: physical_margins(q, fm, margin),
    }
}

/// A margin of `lsb` accumulator units, expressed along each channel alone in its physical unit.
fn physical_margins(q: &Quantised, fm: &FloatModel, lsb: f64) -> Vec<f64> {
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

/// Audits a quantised model on the training log and on `others` (holdout and validation
/// logs, each with its name), gate by gate.
pub fn audit(
    q: &Quantised,
    fm: &FloatModel,
    train: &Dataset,
    others: &[(&str, &Dataset)],
    noise: &[Option<f64>],
    cfg: AuditConfig,
) -> AuditReport {
    let m = q.model.model();
    let bound = error_bound(q);
    let mut sets = Vec::new();
    let mut flips = Vec::new();
    let mut wrong = Vec::new();
    let mut tight: Vec<(f64, &str, &Dataset, usize)> = Vec::new();
    let mut min_all = f64::INFINITY;
    let mut float_min = f64::INFINITY;
    let risk = noise_radius(q, fm, noise);
    let mut units_at_risk = Vec::new();
    let mut at_risk_count = 0;
    for &(name, ds) in std::iter::once(&("train", train)).chain(others) {
        let a = audit_set(name, q, fm, ds, bound.total, risk);
        units_at_risk.extend(a.at_risk.iter().map(|&i| unit_row(name, q, fm, ds, i)));
        at_risk_count += a.at_risk_count;
        flips.extend(a.flips.iter().map(|&(i, _)| unit_row(name, q, fm, ds, i)));
        wrong.extend(a.wrong.iter().map(|&i| unit_row(name, q, fm, ds, i)));
        tight.extend(a.tight.iter().map(|&(mg, i)| (mg, name, ds, i)));
        min_all = min_all.min(a.min_fixed_abs);
        if name == "train" {
            float_min = a.float_min;
        }
        let mut s = a.s;
        s.go_units = ds.labels.iter().filter(|&&l| l > 0).count();
        s.nogo_units = s.units - s.go_units;
        s.rates = SetRates::of(&s.counts());
        sets.push(s);
    }
    tight.sort_by(|a, b| a.0.total_cmp(&b.0));
    tight.truncate(TIGHTEST);
    let tightest: Vec<UnitRow> = tight
        .iter()
        .map(|&(_, n, ds, i)| unit_row(n, q, fm, ds, i))
        .collect();
    // Faults are decisions of their own (NO-GO), gated as false NO-GO on GO units; the
    // rounding guarantee is about the units the kernel scores.
    let guaranteed = sets.iter().all(|s| s.within_bound == 0);
    let channel_margin = fm
        .channels
        .iter()
        .zip(physical_margins(q, fm, min_all))
        .map(|(c, v)| (c.name.clone(), v, c.unit.clone()))
        .collect();
    let tolerance =
        risk.map(|radius| tolerance(q, fm, noise, &sets, radius, (units_at_risk, at_risk_count)));
    let counts: Vec<LogCounts<'_>> = sets.iter().map(SetSummary::counts).collect();
    let gates = gates(
        &counts,
        cfg,
        risk.is_some(),
        min_all,
        guaranteed,
        bound.total,
    );
    let reasons: Vec<String> = gates.iter().filter(|g| !g.passed).map(reason).collect();
    let passed = reasons.is_empty();
    let packed = released_blob(q, passed, None);
    let mut r = AuditReport {
        model_id: fm.model_id.clone(),
        model_sha256: fm.content_digest(),
        blob_sha256: String::new(),
        blob_id: String::new(),
        key_id: None,
        input_bits: m.input_bits,
        weight_bits: m.weight_bits,
        weight_frac_bits: m.weight_frac_bits,
        acc_bits: m.acc_bits,
        needed_bits: q.needed_bits,
        headroom_bits: i32::from(m.acc_bits) - i32::from(q.needed_bits),
        weights: m.channels.iter().map(|c| c.weight).collect(),
        bias: m.bias,
        nogo_max: m.nogo_max,
        go_min: m.go_min,
        scale: q.scale,
        threshold_acc: q.threshold_acc,
        ideal_weights: q.ideal_weights.clone(),
        ideal_bias: q.ideal_bias,
        plain_weights: q.plain_weights.clone(),
        plain_bias: q.plain_bias,
        search_changes: m
            .channels
            .iter()
            .zip(&q.plain_weights)
            .filter(|(c, p)| c.weight != **p)
            .map(|(c, p)| format!("{}: {} -> {}", c.name, p, c.weight))
            .chain(
                (m.bias != q.plain_bias).then(|| format!("bias: {} -> {}", q.plain_bias, m.bias)),
            )
            .collect(),
        blob_bytes: 0,
        sets,
        float_min_margin_lsb: float_min.is_finite().then_some(float_min),
        plain_min_margin_lsb: q.plain_min_margin,
        optimised_min_margin_lsb: q.optimised_min_margin,
        search_moves: q.moves,
        bound,
        guaranteed,
        channel_margin,
        flips,
        wrong,
        tightest,
        tolerance,
        recheck_band: q.recheck_band,
        applied: Vec::new(),
        from_model: Vec::new(),
        gates,
        passed,
        reasons,
        command_line: None,
        features: crate::release::features::feature_proofs(fm),
        operating_point: fm
            .operating_point
            .as_ref()
            .map(|op| crate::release::point_record::OperatingPointRecord::new(op, q.scale)),
        c_choice: fm.provenance.c_choice.clone(),
        split: None,
        settings: Vec::new(),
    };
    r.name_blob(&packed);
    r
}

/// The most the declared noise can move a score, in LSB; `None` if no noise is declared.
fn noise_radius(q: &Quantised, fm: &FloatModel, noise: &[Option<f64>]) -> Option<f64> {
    if noise.iter().all(Option::is_none) {
        return None;
    }
    // A reading moved by Δraw moves x_q by at most κ·|Δraw| + 1 (the two roundings differ by < 1 LSB).
    Some(
        q.model
            .model()
            .channels
            .iter()
            .zip(&q.kappa)
            .zip(fm.channels.iter().zip(noise))
            .map(|((c, k), (s, n))| {
                f64::from(c.weight).abs() * n.map_or(0.0, |n| k * n / s.lsb + 1.0)
            })
            .sum(),
    )
}

fn tolerance(
    q: &Quantised,
    fm: &FloatModel,
    noise: &[Option<f64>],
    sets: &[SetSummary],
    radius: f64,
    (units_at_risk, units_at_risk_count): (Vec<UnitRow>, usize),
) -> Tolerance {
    let min_margin = sets
        .iter()
        .filter_map(|s| s.min_margin_lsb)
        .fold(f64::INFINITY, f64::min);
    let channels = q
        .model
        .model()
        .channels
        .iter()
        .zip(&q.kappa)
        .zip(fm.channels.iter().zip(noise))
        .map(|((c, k), (s, n))| ChannelTolerance {
            channel: s.name.clone(),
            noise: n.unwrap_or(0.0),
            max_drift: if c.weight == 0 {
                f64::INFINITY
            } else {
                ((min_margin / f64::from(c.weight).abs() - 1.0).max(0.0) / k) * s.lsb
            },
            unit: s.unit.clone(),
        })
        .collect();
    Tolerance {
        channels,
        noise_radius_lsb: radius,
        units_at_risk,
        units_at_risk_count,
        suggested_band: radius / q.scale,
    }
}

/// One row of the word-length sweep.
#[derive(Clone, Debug, Serialize)]
pub struct SweepRow {
    /// Weight word bits.
    pub weight_bits: u8,
    /// Input word bits.
    pub input_bits: u8,
    /// Accumulator bits.
    pub acc_bits: u8,
    /// Smallest fixed margin (LSB of that format) over correct units.
    pub min_margin_lsb: Option<f64>,
    /// The same relative to the bound (margin / bound): above 1 means guaranteed.
    pub margin_over_bound: Option<f64>,
    /// Decision flips.
    pub flips: usize,
    /// Guarantee holds.
    pub guaranteed: bool,
    /// Gate passed.
    pub passed: bool,
    /// Blob bytes.
    pub blob_bytes: usize,
    /// The arithmetic the device kernel runs the format in: 32 or 64 bits
    /// (`CheckedModel::is_narrow`). Not the accumulator's proved width: a 32-bit
    /// accumulator still runs in 64 bits when a channel's range is not ADC-sized.
    pub kernel_bits: u8,
    /// About how many instructions one classification takes on a Cortex-M0 and a
    /// Cortex-M3 (the footprint model's measurement scaled to this model's channels),
    /// window features not included (they cost the same in every format).
    pub kernel_instructions: (usize, usize),
}

/// A format's cost on the device: the instructions classify took on the footprint model.
fn kernel_instructions(channels: usize, narrow: bool) -> (usize, usize) {
    // Measured by firmware/qemu-app/footprint.sh (16 channels, QEMU instruction trace,
    // 2026-12-02): classify takes 714 (Cortex-M0) / 426 (Cortex-M3) instructions in 32-bit
    // arithmetic, 2,378 / 520 in 64-bit. Scaled per channel here.
    let (m0, m3) = if narrow { (714, 426) } else { (2378, 520) };
    (m0 * channels / 16, m3 * channels / 16)
}

/// Weight word lengths the sweep tries, for each input word length in [`SWEEP_INPUTS`].
pub const SWEEP_WEIGHTS: [u8; 5] = [8, 12, 16, 24, 32];
/// Input word lengths the sweep tries.
pub const SWEEP_INPUTS: [u8; 2] = [8, 16];

/// The word-length sweep: weights 8/12/16/24/32 × inputs 8/16. Returns rows and the recommended
/// row: the passing format with the narrowest weights, then the narrowest inputs.
///
/// Each format costs one quantisation (with its margin search on the training log) and one
/// audit of every log: the same work as an audit, ten times. With `progress`, a bar on
/// stderr names the format being tried and estimates the time left.
///
/// # Errors
/// A [`QuantError`] other than a refused format (refused formats appear as failing rows).
pub fn sweep(
    fm: &FloatModel,
    train: &Dataset,
    others: &[(&str, &Dataset)],
    base: QuantConfig,
    cfg: AuditConfig,
    progress: bool,
) -> Result<(Vec<SweepRow>, Option<usize>), QuantError> {
    let mut rows = Vec::new();
    let formats = SWEEP_INPUTS.len() * SWEEP_WEIGHTS.len();
    let bar = progress.then(|| {
        crate::progress::ticking_bar(
            formats as u64,
            "word-length sweep: {msg} [{bar:20}] {pos}/{len} formats, {elapsed} elapsed, about {eta} left",
        )
    });
    for input_bits in SWEEP_INPUTS {
        for weight_bits in SWEEP_WEIGHTS {
            if let Some(b) = &bar {
                b.set_message(format!(
                    "{weight_bits}-bit weights × {input_bits}-bit inputs"
                ));
            }
            let qc = QuantConfig {
                input_bits,
                weight_bits,
                acc_bits: None,
                ..base
            };
            let q = quantise(fm, Some(train), qc)?;
            let r = audit(&q, fm, train, others, &[], cfg);
            let n = q.model.channel_count();
            let min = r
                .sets
                .iter()
                .filter_map(|s| s.min_margin_lsb)
                .fold(None, |a: Option<f64>, v| Some(a.map_or(v, |a| a.min(v))));
            rows.push(SweepRow {
                weight_bits,
                input_bits,
                acc_bits: r.acc_bits,
                min_margin_lsb: min,
                margin_over_bound: min.map(|m| m / r.bound.total),
                flips: r.sets.iter().map(|s| s.flips).sum(),
                guaranteed: r.guaranteed,
                passed: r.passed,
                blob_bytes: r.blob_bytes,
                kernel_bits: if q.model.is_narrow() { 32 } else { 64 },
                kernel_instructions: kernel_instructions(n, q.model.is_narrow()),
            });
            if let Some(b) = &bar {
                b.inc(1);
            }
        }
    }
    let best = rows
        .iter()
        .enumerate()
        .filter(|(_, r)| r.passed)
        .min_by_key(|(_, r)| (r.weight_bits, r.input_bits))
        .map(|(i, _)| i);
    Ok((rows, best))
}

/// Shortcut used by the CLI and tests: quantise then audit.
///
/// # Errors
/// [`QuantError`] from the quantiser.
pub fn release(
    fm: &FloatModel,
    train: &Dataset,
    others: &[(&str, &Dataset)],
    qc: QuantConfig,
    noise: &[Option<f64>],
    cfg: AuditConfig,
) -> Result<(Quantised, AuditReport), QuantError> {
    let q = quantise(fm, Some(train), qc)?;
    let r = audit(&q, fm, train, others, noise, cfg);
    Ok((q, r))
}

/// The mark a released blob carries: passed, or overridden (a failed audit packed with
/// `--override-audit`).
pub fn release_mark(passed: bool) -> shared_model::AuditMark {
    if passed {
        shared_model::AuditMark::Passed
    } else {
        shared_model::AuditMark::Overridden
    }
}

/// The blob `pack` writes for an audit outcome: marked passed, or overridden (a failed
/// audit packed with `--override-audit`), and signed when a release key is given. A model
/// with signal features is written as format version 3 (4 signed).
pub fn released_blob(
    q: &Quantised,
    passed: bool,
    signer: Option<&ed25519_dalek::SigningKey>,
) -> Vec<u8> {
    let marked = mark(&q.model, release_mark(passed));
    if q.signals.is_empty() {
        return match signer {
            Some(k) => crate::release::sign::signed_blob(&marked, k),
            None => crate::release::pack::blob_bytes(&marked),
        };
    }
    // A model with signals is never written without them: were the pair refused (which
    // `quantise` rules out), the blob would be empty and refused everywhere, not a blob
    // whose features a station would take for readings.
    match (q.with_signals(marked), signer) {
        (Some(m), Some(k)) => crate::release::sign::signed_blob(&m, k),
        (Some(m), None) => crate::release::pack::blob_bytes(&m),
        (None, _) => Vec::new(),
    }
}

impl AuditReport {
    /// Names `blob`, the bytes `pack` writes for this audit, in the report: its SHA-256,
    /// blob id, size and, for a signed blob, the key id.
    pub fn name_blob(&mut self, blob: &[u8]) {
        self.blob_sha256 = crate::digest::sha256_hex(blob);
        self.blob_id = blob::blob_id(blob).map_or(String::new(), |id| format!("{id:08x}"));
        self.blob_bytes = blob.len();
        self.key_id = blob::signature(blob).map(|s| crate::digest::lower_hex(&s.key_id));
    }
}

/// Marks a checked model with the audit outcome (for packing).
pub fn mark(model: &CheckedModel, mark: shared_model::AuditMark) -> CheckedModel {
    let mut m = model.model().clone();
    m.audit = mark;
    CheckedModel::new(m).unwrap_or_else(|_| model.clone())
}

/// Choices `release_applying` may make for the user.
#[derive(Clone, Copy, Debug, Default)]
pub struct Apply {
    /// Use the sweep's recommended word lengths (the narrowest that pass).
    pub recommended_format: bool,
    /// Show the sweep's progress on stderr.
    pub progress: bool,
    /// Widen the RECHECK band to the suggested one until the noise gate passes.
    pub suggested_band: bool,
}

/// What `release_applying` settled on.
pub struct Released {
    /// The quantised model.
    pub q: Quantised,
    /// Its audit, with `applied` saying what was chosen.
    pub report: AuditReport,
    /// The configuration actually used.
    pub qc: QuantConfig,
    /// The sweep, when it was run to pick the format.
    pub sweep: Option<(Vec<SweepRow>, Option<usize>)>,
}

/// [`release`], first applying what `apply` asks: the sweep's recommended word lengths, then
/// the suggested RECHECK band, widened until no unit's GO/NO-GO verdict can be swapped by
/// the declared noise (a few rounds at most: the band only grows).
///
/// # Errors
/// [`QuantError`] from the quantiser.
pub fn release_applying(
    fm: &FloatModel,
    train: &Dataset,
    others: &[(&str, &Dataset)],
    mut qc: QuantConfig,
    noise: &[Option<f64>],
    cfg: AuditConfig,
    apply: Apply,
) -> Result<Released, QuantError> {
    let mut applied = Vec::new();
    let mut sw = None;
    if apply.recommended_format {
        let s = sweep(fm, train, others, qc, cfg, apply.progress)?;
        match s.1.and_then(|i| s.0.get(i)) {
            Some(row) => {
                qc.weight_bits = row.weight_bits;
                qc.input_bits = row.input_bits;
                applied.push(format!(
                    "word lengths from the sweep: {}-bit weights, {}-bit inputs",
                    row.weight_bits, row.input_bits
                ));
            }
            None => applied
                .push("no format of the sweep passes; the given word lengths were kept".into()),
        }
        sw = Some(s);
    }
    let (mut q, mut r) = release(fm, train, others, qc, noise, cfg)?;
    if apply.suggested_band {
        for _ in 0..8 {
            let unsafe_units: usize = r.sets.iter().map(|s| s.noise_unsafe).sum();
            let Some(t) = &r.tolerance else { break };
            if unsafe_units == 0 {
                break;
            }
            // The band must reach past the noise radius of the model it will be applied to;
            // widen by at least an eighth a round so the loop ends.
            let next = t.suggested_band.max(qc.recheck_band * 1.125);
            if next <= qc.recheck_band {
                break;
            }
            qc.recheck_band = next;
            (q, r) = release(fm, train, others, qc, noise, cfg)?;
        }
        if qc.recheck_band > 0.0 {
            applied.push(format!(
                "RECHECK half-band {:.6} (float score units) from the noise analysis",
                qc.recheck_band
            ));
        }
    }
    r.applied = applied;
    Ok(Released {
        q,
        report: r,
        qc,
        sweep: sw,
    })
}
