//! The release audit: does the fixed-point model decide as the float model did, and is that
//! proved? Every log's units go through `shared_model`'s kernel, the code the firmware runs
//! (`tally.rs`); the rounding bound (`bound.rs`), the noise tolerance (`tolerance.rs`) and
//! the gates (`gates.rs`) turn the counts into the report (`audit_report.rs`).

use crate::ingest::dataset::Dataset;
use crate::release::audit_baseline::{baseline, choose};
use crate::release::audit_part::{AuditPart, Counter, physical_margins};
use crate::release::audit_report::{AuditReport, SetSummary, Tolerance, UnitRow};
use crate::release::blob_release::released_blob;
use crate::release::bound::{ErrorBound, error_bound};
use crate::release::gates::{AuditConfig, LogCounts, gates, reason};
use crate::release::quantise::Quantised;
use crate::release::tally::TIGHTEST;
use crate::release::tolerance::{noise_radius, tolerance};
use crate::train::float_model::FloatModel;

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
    let bound = error_bound(q);
    let risk = noise_radius(q, fm, noise);
    let mut logs = tally_logs(q, fm, train, others, bound.total, risk);
    // Faults are decisions of their own (NO-GO), gated as false NO-GO on GO units; the
    // rounding guarantee is about the units the kernel scores.
    let guaranteed = logs.sets.iter().all(|s| s.within_bound == 0);
    let counts: Vec<LogCounts<'_>> = logs.sets.iter().map(SetSummary::counts).collect();
    let gates = gates(
        &counts,
        cfg,
        risk.is_some(),
        logs.min_all,
        guaranteed,
        bound.total,
    );
    let reasons: Vec<String> = gates.iter().filter(|g| !g.passed).map(reason).collect();
    let at_risk = (std::mem::take(&mut logs.units_at_risk), logs.at_risk_count);
    let tolerance = risk.map(|radius| tolerance(q, fm, noise, &logs.sets, radius, at_risk));
    let all: Vec<(&str, &Dataset)> = std::iter::once(("train", train))
        .chain(others.iter().copied())
        .collect();
    let names: Vec<&str> = all.iter().map(|l| l.0).collect();
    let (at, rule) = choose(&names);
    let budget: Vec<(f64, f64)> = tolerance.as_ref().map_or(Vec::new(), |t| {
        t.channels.iter().map(|c| (c.noise, c.max_drift)).collect()
    });
    let base = baseline(q, fm, (all[at].0, rule), all[at].1, &budget);
    let mut r = assemble(q, fm, bound, guaranteed, logs, tolerance);
    r.baseline = Some(base);
    r.passed = reasons.is_empty();
    r.gates = gates;
    r.reasons = reasons;
    r.name_blob(&released_blob(q, r.passed, None));
    r
}

/// Every log's tally, and the units the report lists from them.
struct Logs {
    sets: Vec<SetSummary>,
    flips: Vec<UnitRow>,
    wrong: Vec<UnitRow>,
    tightest: Vec<UnitRow>,
    units_at_risk: Vec<UnitRow>,
    at_risk_count: usize,
    /// Smallest fixed margin over every log's float-correct decided units.
    min_all: f64,
    /// Smallest float margin over the training log's correct units.
    float_min: f64,
}

/// Tallies the training log, then each of `others` (each as one [`AuditPart`], the
/// path an engine's partitions take too), and lists their units.
fn tally_logs(
    q: &Quantised,
    fm: &FloatModel,
    train: &Dataset,
    others: &[(&str, &Dataset)],
    bound: f64,
    risk: Option<f64>,
) -> Logs {
    let c = Counter { q, fm, bound, risk };
    let mut l = Logs {
        sets: Vec::new(),
        flips: Vec::new(),
        wrong: Vec::new(),
        tightest: Vec::new(),
        units_at_risk: Vec::new(),
        at_risk_count: 0,
        min_all: f64::INFINITY,
        float_min: f64::INFINITY,
    };
    for &(name, ds) in std::iter::once(&("train", train)).chain(others) {
        let a = AuditPart::count(c, name, ds, None).into_audit();
        l.units_at_risk.extend(a.units_at_risk);
        l.at_risk_count += a.at_risk_count;
        l.flips.extend(a.flips);
        l.wrong.extend(a.wrong);
        l.tightest.extend(a.tightest);
        l.min_all = l
            .min_all
            .min(a.min_fixed_margin_lsb.unwrap_or(f64::INFINITY));
        if name == "train" {
            l.float_min = a.float_min_margin_lsb.unwrap_or(f64::INFINITY);
        }
        l.sets.push(a.set);
    }
    // Closest first over all logs; equal margins keep log order, then unit order.
    l.tightest
        .sort_by(|a, b| a.margin_lsb.total_cmp(&b.margin_lsb));
    l.tightest.truncate(TIGHTEST);
    l
}

/// The report of the model, its bound and its logs, before the gates' verdict and the blob
/// are written into it.
fn assemble(
    q: &Quantised,
    fm: &FloatModel,
    bound: ErrorBound,
    guaranteed: bool,
    logs: Logs,
    tolerance: Option<Tolerance>,
) -> AuditReport {
    let m = q.model.model();
    let channel_margin = fm
        .channels
        .iter()
        .zip(physical_margins(q, fm, logs.min_all))
        .map(|(c, v)| (c.name.clone(), v, c.unit.clone()))
        .collect();
    let float_min = logs.float_min;
    AuditReport {
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
        sets: logs.sets,
        float_min_margin_lsb: float_min.is_finite().then_some(float_min),
        plain_min_margin_lsb: q.plain_min_margin,
        optimised_min_margin_lsb: q.optimised_min_margin,
        search_moves: q.moves,
        bound,
        guaranteed,
        channel_margin,
        flips: logs.flips,
        wrong: logs.wrong,
        tightest: logs.tightest,
        tolerance,
        recheck_band: q.recheck_band,
        applied: Vec::new(),
        from_model: Vec::new(),
        gates: Vec::new(),
        passed: false,
        reasons: Vec::new(),
        command_line: None,
        features: crate::release::features::feature_proofs(fm),
        operating_point: fm
            .operating_point
            .as_ref()
            .map(|op| crate::release::point_record::OperatingPointRecord::new(op, q.scale)),
        c_choice: fm.provenance.c_choice.clone(),
        split: None,
        settings: Vec::new(),
        baseline: None,
    }
}
