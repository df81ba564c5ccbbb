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
use crate::release::quantise::{QuantConfig, QuantError, Quantised, fixed_margin, quantise};
use crate::train::float_model::FloatModel;

/// Gate thresholds.
#[derive(Clone, Copy, Debug)]
pub struct AuditConfig {
    /// Smallest acceptable fixed margin over correctly classified units, in LSB.
    pub min_margin_lsb: f64,
    /// Largest acceptable number of decision flips versus the float model.
    pub max_flips: usize,
    /// Require the analytic guarantee.
    pub require_guarantee: bool,
}

impl Default for AuditConfig {
    fn default() -> Self {
        Self {
            min_margin_lsb: 1.0,
            max_flips: 0,
            require_guarantee: true,
        }
    }
}

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
    /// Units.
    pub units: usize,
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
    /// Smallest fixed margin over float-correct units (LSB).
    pub min_margin_lsb: Option<f64>,
    /// Float-correct units whose fixed margin does not exceed the bound.
    pub within_bound: usize,
}

/// Sensitivity to declared sensor noise.
#[derive(Clone, Debug, Serialize)]
pub struct Tolerance {
    /// Per channel: name, declared noise (physical), drift before the first unit flips (physical), unit.
    pub channels: Vec<ChannelTolerance>,
    /// Worst score change the declared noise can cause (LSB).
    pub noise_radius_lsb: f64,
    /// Units whose verdict can change within the declared noise.
    pub units_at_risk: Vec<String>,
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
    /// Accumulator units per float score unit.
    pub scale: f64,
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
    /// The units closest to the boundary.
    pub tightest: Vec<UnitRow>,
    /// Sensor-noise analysis, when noise is declared.
    pub tolerance: Option<Tolerance>,
    /// The gate's verdict.
    pub passed: bool,
    /// Why it failed.
    pub reasons: Vec<String>,
    /// Fixed margins of the audited units (for the histogram), in LSB.
    #[serde(skip)]
    pub fixed_margins: Vec<f64>,
    /// Float margins of the audited units, in LSB.
    #[serde(skip)]
    pub float_margins: Vec<f64>,
}

struct Acc {
    s: SetSummary,
    /// Smallest float margin over correctly classified units, in LSB.
    float_min: f64,
    flips: Vec<(usize, f64)>,
    tight: Vec<(f64, usize)>,
    margins: Vec<(f64, f64)>,
    min_fixed_abs: f64,
    /// Units whose verdict declared noise could change, in file order (at most `AT_RISK`).
    at_risk: Vec<usize>,
}

const TIGHTEST: usize = 20;
const AT_RISK: usize = 1000;
const HISTOGRAM_SAMPLE: usize = 20_000;

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
    let stride = (ds.len() / HISTOGRAM_SAMPLE).max(1);
    let empty = || Acc {
        s: SetSummary {
            name: name.into(),
            path: ds.path.display().to_string(),
            ..Default::default()
        },
        float_min: f64::INFINITY,
        flips: Vec::new(),
        tight: Vec::new(),
        margins: Vec::new(),
        min_fixed_abs: f64::INFINITY,
        at_risk: Vec::new(),
    };
    let merge = |mut a: Acc, b: Acc| {
        a.s.units += b.s.units;
        a.s.float_correct += b.s.float_correct;
        a.s.fixed_correct += b.s.fixed_correct;
        a.s.flips += b.s.flips;
        a.s.faults += b.s.faults;
        a.s.recheck += b.s.recheck;
        a.s.within_bound += b.s.within_bound;
        a.s.min_margin_lsb = match (a.s.min_margin_lsb, b.s.min_margin_lsb) {
            (Some(x), Some(y)) => Some(x.min(y)),
            (x, y) => x.or(y),
        };
        a.flips.extend(b.flips);
        a.tight.extend(b.tight);
        a.tight
            .sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1)));
        a.tight.truncate(TIGHTEST);
        a.margins.extend(b.margins);
        a.min_fixed_abs = a.min_fixed_abs.min(b.min_fixed_abs);
        a.float_min = a.float_min.min(b.float_min);
        // Chunks merge in file order, so the first AT_RISK units are kept.
        a.at_risk.extend(b.at_risk);
        a.at_risk.truncate(AT_RISK);
        a
    };
    (0..ds.len())
        .into_par_iter()
        .with_min_len(1 << 16)
        .fold(empty, |mut a, i| {
            let raw = ds.raw_row(i);
            let fs = float.score(raw);
            let label = ds.labels[i];
            let float_go = fs > fm.threshold;
            let float_ok = float_go == (label > 0);
            a.s.units += 1;
            a.s.float_correct += usize::from(float_ok);
            if float_ok {
                a.float_min = a
                    .float_min
                    .min(f64::from(label) * (fs - fm.threshold) * q.scale);
            }
            match m.classify(raw) {
                Err(_) => {
                    a.s.faults += 1;
                    a.flips.push((i, f64::NAN));
                }
                Ok(d) => {
                    let margin = fixed_margin(band.1, d.score, label);
                    let fixed_ok = margin > 0.0 && d.verdict != Verdict::Recheck;
                    a.s.fixed_correct += usize::from(fixed_ok);
                    a.s.recheck += usize::from(d.verdict == Verdict::Recheck);
                    let float_verdict = if float_go { Verdict::Go } else { Verdict::NoGo };
                    // With a RECHECK band a RECHECK is not a flip; a GO/NO-GO swap is.
                    if d.verdict != Verdict::Recheck && d.verdict != float_verdict {
                        a.s.flips += 1;
                        a.flips.push((i, margin));
                    }
                    if float_ok {
                        a.s.min_margin_lsb =
                            Some(a.s.min_margin_lsb.map_or(margin, |v: f64| v.min(margin)));
                        a.s.within_bound += usize::from(margin <= bound);
                        a.min_fixed_abs = a.min_fixed_abs.min(margin);
                    }
                    if risk.is_some_and(|r| margin.abs() <= r) && a.at_risk.len() < AT_RISK {
                        a.at_risk.push(i);
                    }
                    if a.tight.len() < TIGHTEST
                        || margin < a.tight.last().map_or(f64::INFINITY, |t| t.0)
                    {
                        a.tight.push((margin, i));
                        a.tight
                            .sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1)));
                        a.tight.truncate(TIGHTEST);
                    }
                    if i % stride == 0 {
                        let fmargin = if label > 0 {
                            fs * q.scale - band.0
                        } else {
                            band.0 - fs * q.scale
                        };
                        a.margins.push((fmargin, margin));
                    }
                }
            }
            a
        })
        .reduce(empty, merge)
}

fn unit_row(set: &str, q: &Quantised, fm: &FloatModel, ds: &Dataset, i: usize) -> UnitRow {
    let m = q.model.model();
    let lin = fm.linear();
    let fs = lin.scores(ds, &[i])[0];
    let d = q.model.classify(ds.raw_row(i)).ok();
    let margin = d.map_or(f64::NAN, |d| fixed_margin(m, d.score, ds.labels[i]));
    UnitRow {
        set: set.into(),
        line: ds.lines[i],
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

/// Every unit of the logs as CSV: log, line, unit, label, float score and verdict, fixed score
/// and verdict (by the device kernel), margin in LSB and along each channel in its unit.
pub fn units_csv(q: &Quantised, fm: &FloatModel, sets: &[(&str, &Dataset)]) -> String {
    let mut out = String::from(
        "model_id,log,line,unit,label,float_score,float_verdict,fixed_score,fixed_verdict,margin_lsb",
    );
    for c in &fm.channels {
        out.push_str(&format!(",margin_{}", c.name));
    }
    out.push('\n');
    for (name, ds) in sets {
        for i in 0..ds.len() {
            let r = unit_row(name, q, fm, ds, i);
            let unit = if r.unit.contains([',', '"']) {
                format!("\"{}\"", r.unit.replace('"', "\"\""))
            } else {
                r.unit
            };
            out.push_str(&format!(
                "{},{},{},{},{},{},{},{},{},{}",
                fm.model_id,
                r.set,
                r.line,
                unit,
                r.label,
                r.float_score,
                r.float_verdict,
                r.fixed_score.map_or(String::new(), |v| v.to_string()),
                r.fixed_verdict,
                r.margin_lsb
            ));
            for m in &r.margin_physical {
                out.push_str(&format!(",{m}"));
            }
            out.push('\n');
        }
    }
    out
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

/// Audits a quantised model on the training log and, if given, a holdout log.
pub fn audit(
    q: &Quantised,
    fm: &FloatModel,
    train: &Dataset,
    holdout: Option<&Dataset>,
    noise: &[Option<f64>],
    cfg: AuditConfig,
) -> AuditReport {
    let m = q.model.model();
    let bound = error_bound(q);
    let mut sets = Vec::new();
    let mut flips = Vec::new();
    let mut tight: Vec<(f64, &str, &Dataset, usize)> = Vec::new();
    let mut fixed_margins = Vec::new();
    let mut float_margins = Vec::new();
    let mut min_all = f64::INFINITY;
    let mut float_min = f64::INFINITY;
    let risk = noise_radius(q, fm, noise);
    let mut units_at_risk = Vec::new();
    for (name, ds) in std::iter::once(("train", train)).chain(holdout.map(|h| ("holdout", h))) {
        let a = audit_set(name, q, fm, ds, bound.total, risk);
        for &i in &a.at_risk {
            if units_at_risk.len() < AT_RISK {
                units_at_risk.push(format!("{name}: {}", ds.unit_name(i)));
            }
        }
        flips.extend(a.flips.iter().map(|&(i, _)| unit_row(name, q, fm, ds, i)));
        tight.extend(a.tight.iter().map(|&(mg, i)| (mg, name, ds, i)));
        for (f, x) in &a.margins {
            float_margins.push(*f);
            fixed_margins.push(*x);
        }
        min_all = min_all.min(a.min_fixed_abs);
        if name == "train" {
            float_min = a.float_min;
        }
        sets.push(a.s);
    }
    tight.sort_by(|a, b| a.0.total_cmp(&b.0));
    tight.truncate(TIGHTEST);
    let tightest: Vec<UnitRow> = tight
        .iter()
        .map(|&(_, n, ds, i)| unit_row(n, q, fm, ds, i))
        .collect();
    let guaranteed = sets.iter().all(|s| s.within_bound == 0 && s.faults == 0);
    let channel_margin = fm
        .channels
        .iter()
        .zip(physical_margins(q, fm, min_all))
        .map(|(c, v)| (c.name.clone(), v, c.unit.clone()))
        .collect();
    let tolerance = risk.map(|radius| tolerance(q, fm, noise, &sets, radius, units_at_risk));
    let total_flips: usize = sets.iter().map(|s| s.flips).sum();
    let faults: usize = sets.iter().map(|s| s.faults).sum();
    let mut reasons = Vec::new();
    if total_flips > cfg.max_flips {
        reasons.push(format!(
            "{total_flips} decision flips versus the float model (allowed: {})",
            cfg.max_flips
        ));
    }
    if faults > 0 {
        reasons.push(format!(
            "{faults} units have readings the device would refuse (outside the valid range)"
        ));
    }
    if min_all.is_finite() && min_all < cfg.min_margin_lsb {
        reasons.push(format!(
            "smallest fixed margin {min_all:.1} LSB is below the required {} LSB",
            cfg.min_margin_lsb
        ));
    }
    if cfg.require_guarantee && !guaranteed {
        let n: usize = sets.iter().map(|s| s.within_bound).sum();
        reasons.push(format!("not guaranteed: {n} correctly classified units have a margin within the rounding bound ({:.1} LSB)", bound.total));
    }
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let blob_bytes = blob::encode(&q.model, &mut buf).unwrap_or(0);
    AuditReport {
        model_id: fm.model_id.clone(),
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
        blob_bytes,
        sets,
        float_min_margin_lsb: float_min.is_finite().then_some(float_min),
        plain_min_margin_lsb: q.plain_min_margin,
        optimised_min_margin_lsb: q.optimised_min_margin,
        search_moves: q.moves,
        bound,
        guaranteed,
        channel_margin,
        flips,
        tightest,
        tolerance,
        passed: reasons.is_empty(),
        reasons,
        fixed_margins,
        float_margins,
    }
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
    units_at_risk: Vec<String>,
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
    /// Multiply-accumulates per classification and the instruction that does them on a 32-bit MCU.
    pub mac_cost: String,
}

/// The word-length sweep: weights 8/12/16/24/32 × inputs 8/16. Returns rows and the recommended
/// row: the passing format with the narrowest weights, then the narrowest inputs.
///
/// # Errors
/// A [`QuantError`] other than a refused format (refused formats appear as failing rows).
pub fn sweep(
    fm: &FloatModel,
    train: &Dataset,
    holdout: Option<&Dataset>,
    base: QuantConfig,
    cfg: AuditConfig,
) -> Result<(Vec<SweepRow>, Option<usize>), QuantError> {
    let mut rows = Vec::new();
    for input_bits in [8u8, 16] {
        for weight_bits in [8u8, 12, 16, 24, 32] {
            let qc = QuantConfig {
                input_bits,
                weight_bits,
                acc_bits: None,
                ..base
            };
            let q = quantise(fm, Some(train), qc)?;
            let r = audit(&q, fm, train, holdout, &[], cfg);
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
                mac_cost: if r.acc_bits == 32 {
                    format!("{n} × MLA (32-bit)")
                } else {
                    format!("{n} × SMLAL (64-bit)")
                },
            });
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
    holdout: Option<&Dataset>,
    qc: QuantConfig,
    noise: &[Option<f64>],
    cfg: AuditConfig,
) -> Result<(Quantised, AuditReport), QuantError> {
    let q = quantise(fm, Some(train), qc)?;
    let r = audit(&q, fm, train, holdout, noise, cfg);
    Ok((q, r))
}

/// Marks a checked model with the audit outcome (for packing).
pub fn mark(model: &CheckedModel, mark: shared_model::AuditMark) -> CheckedModel {
    let mut m = model.model().clone();
    m.audit = mark;
    CheckedModel::new(m).unwrap_or_else(|_| model.clone())
}
