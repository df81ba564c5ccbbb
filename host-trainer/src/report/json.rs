//! The audit report as JSON for machines (a CI job gates on it): every figure of the
//! report, and the word-length sweep when one ran.

use crate::release::audit_report::AuditReport;
use crate::release::sweep::SweepRow;

/// `audit.json`: the report's fields, plus `sweep` (every format tried) and `recommended`
/// (the index of the recommended row, or null) when a sweep ran. Pretty, with a final
/// line feed.
pub fn json(r: &AuditReport, sweep: Option<&(Vec<SweepRow>, Option<usize>)>) -> String {
    let mut v = serde_json::to_value(r).unwrap_or_default();
    if let (Some((rows, best)), Some(map)) = (sweep, v.as_object_mut()) {
        map.insert(
            "sweep".into(),
            serde_json::to_value(rows).unwrap_or_default(),
        );
        map.insert(
            "recommended".into(),
            serde_json::to_value(best).unwrap_or_default(),
        );
    }
    serde_json::to_string_pretty(&v).unwrap_or_default() + "\n"
}
