//! The audit's field baseline read back from `audit.json`, and the device plan written out
//! for firmware (a C initializer and a Rust struct literal).

use std::fmt::Write as _;
use std::path::Path;

use crate::error::InputError;
use crate::release::audit_baseline::{Baseline, MAX_AUDIT_FILE, ROUGH_SIGMA_UNITS};

/// What `drift` needs of an audit record: its model, blob and baseline.
#[derive(Clone, Debug)]
pub struct AuditBaseline {
    /// The audited model's id (hex).
    pub model_id: String,
    /// The blob id the audit named (hex, as the device prints it).
    pub blob_id: String,
    /// The baseline.
    pub baseline: Baseline,
}

/// Reads `audit.json`'s baseline.
///
/// # Errors
/// [`InputError`]: the file cannot be read, is not an audit record, or is one written
/// before audits kept a baseline (run the audit again).
pub fn read(path: &Path) -> Result<AuditBaseline, InputError> {
    let text = crate::input::read_text(path, "audit record", MAX_AUDIT_FILE)?;
    let format = |message: String| InputError::Format {
        path: path.into(),
        message,
    };
    let v: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
        format(format!(
            "not an audit record (audit.json of `linegate audit --out-dir`): {e}"
        ))
    })?;
    let text_of = |key: &str| {
        v.get(key)
            .and_then(serde_json::Value::as_str)
            .map(str::to_string)
            .ok_or_else(|| {
                format(format!(
                    "not an audit record (audit.json of `linegate audit --out-dir`): no `{key}`"
                ))
            })
    };
    let model_id = text_of("model_id")?;
    let blob_id = text_of("blob_id")?;
    // An audit of a model of several classes keeps no baseline yet, and says so.
    if v.get("kind").and_then(serde_json::Value::as_str) == Some("classes") {
        return Err(format(
            "the audit of a model of several classes keeps no field baseline yet: `drift` checks two-sided (GO / NO-GO) releases only".into(),
        ));
    }
    let Some(b) = v.get("baseline") else {
        return Err(format(
            "this audit record has no field baseline (it was written before audits kept one): run `linegate audit` again with the same model and logs, then give its audit.json".into(),
        ));
    };
    let baseline: Baseline = serde_json::from_value(b.clone())
        .map_err(|e| format(format!("the audit record's `baseline` cannot be read: {e}")))?;
    if !baseline.scores.is_sorted() {
        return Err(format(
            "the baseline's scores are not sorted (the file was changed)".into(),
        ));
    }
    Ok(AuditBaseline {
        model_id,
        blob_id,
        baseline,
    })
}

/// The device plan as a C designated initializer and a Rust struct literal, to paste into
/// firmware; says where each figure comes from.
pub fn plan_text(a: &AuditBaseline) -> String {
    let b = &a.baseline;
    let p = b.plan.field_plan();
    let mut s = String::new();
    let _ = writeln!(
        s,
        "// Field plan of blob {:08x} (model {}), from the audit's baseline: log '{}' ({}).",
        p.blob_id, a.model_id, b.log, b.rule
    );
    let _ = writeln!(
        s,
        "// Bins: {} from score {}, each 2^{} wide. CUSUMs (tabular; Montgomery, Introduction to Statistical Quality Control, 9.1):",
        shared_model::field::FIELD_BINS,
        p.origin,
        p.shift
    );
    let _ = writeln!(
        s,
        "// target = mean margin, slack = sd/2, limit = 5 sd, each rounded to a whole LSB and slack and limit at least 1 LSB;\n// GO side over {} units (sd {:.1}), NO-GO side over {} units (sd {:.1}).",
        b.plan.go.units, b.plan.go.sd, b.plan.nogo.units, b.plan.nogo.sd
    );
    for (name, side) in [("GO", &b.plan.go), ("NO-GO", &b.plan.nogo)] {
        if side.limit == i64::MAX {
            let _ = writeln!(
                s,
                "// CUSUM of {name} margins: no limit, the baseline had {} < 2 units on that side (limit = INT64_MAX: this side never alarms).",
                side.units
            );
        } else if side.units < ROUGH_SIGMA_UNITS {
            let _ = writeln!(
                s,
                "// CUSUM of {name} margins: sd from {} units (fewer than {ROUGH_SIGMA_UNITS}) is rough: slack and limit are too.",
                side.units
            );
        }
    }
    let _ = writeln!(s, "\n// C (designated initializer of the field plan):");
    let c = |x: &shared_model::field::CusumPlan| {
        format!(
            "{{ .target = {}LL, .slack = {}LL, .limit = {}LL }}",
            x.target, x.slack, x.limit
        )
    };
    let _ = writeln!(
        s,
        "{{ .blob_id = 0x{:08x}u, .origin = {}LL, .shift = {}u,\n  .go = {},\n  .nogo = {} }}",
        p.blob_id,
        p.origin,
        p.shift,
        c(&p.go),
        c(&p.nogo)
    );
    let r = |x: &shared_model::field::CusumPlan| {
        format!(
            "CusumPlan {{ target: {}, slack: {}, limit: {} }}",
            x.target, x.slack, x.limit
        )
    };
    let _ = writeln!(s, "\n// Rust (shared_model::FieldPlan):");
    let _ = writeln!(
        s,
        "FieldPlan {{\n    blob_id: 0x{:08x},\n    origin: {},\n    shift: {},\n    go: {},\n    nogo: {},\n}}",
        p.blob_id,
        p.origin,
        p.shift,
        r(&p.go),
        r(&p.nogo)
    );
    let _ = write!(
        s,
        "\n# Plan file (`key = integer` lines; the QEMU example's LINEGATE_FIELD_PLAN):\n{}",
        plan_file(&p)
    );
    s
}

/// `plan` as the example device build reads it (`LINEGATE_FIELD_PLAN`): one
/// `key = integer` line per field the device uses (the blob id is the loaded blob's).
pub fn plan_file(p: &shared_model::FieldPlan) -> String {
    format!(
        "origin = {}\nshift = {}\ngo_target = {}\ngo_slack = {}\ngo_limit = {}\nnogo_target = {}\nnogo_slack = {}\nnogo_limit = {}\n",
        p.origin,
        p.shift,
        p.go.target,
        p.go.slack,
        p.go.limit,
        p.nogo.target,
        p.nogo.slack,
        p.nogo.limit
    )
}
