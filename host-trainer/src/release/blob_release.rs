//! The blob release: the bytes `pack` writes for an audit outcome, marked passed or
//! overridden and signed when a release key is given.

use shared_model::CheckedModel;

use crate::release::quantise::Quantised;

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
    // One encoder picks the version: `q`'s section is empty for a model of readings
    // (version 1/2). A model with signals is never written without them: were the pair
    // refused (which `quantise` rules out: it validated the same section against the same
    // channels, and a mark or a move of the weights changes no channel's range), the blob
    // would be empty and refused everywhere, not one whose features a station would take
    // for readings.
    let Ok(model) = CheckedModel::with_inputs(marked.into_inner(), q.signals.clone()) else {
        return Vec::new();
    };
    match signer {
        Some(k) => crate::release::sign::signed_blob(&model, k),
        None => crate::release::pack::blob_bytes(&model),
    }
}

/// Marks a checked model with the audit outcome (for packing).
pub fn mark(model: &CheckedModel, mark: shared_model::AuditMark) -> CheckedModel {
    let mut m = model.model().clone();
    m.audit = mark;
    CheckedModel::new(m).unwrap_or_else(|_| model.clone())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_passed_audit_marks_passed_and_a_failed_one_overridden() {
        assert_eq!(release_mark(true), shared_model::AuditMark::Passed);
        assert_eq!(release_mark(false), shared_model::AuditMark::Overridden);
    }
}
