//! The blob release: the bytes `pack` writes for an audit outcome, marked passed or
//! overridden and signed when a release key is given.

use shared_model::{CheckedModel, Inputs, SignalSection};

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
    if q.signals.is_empty() {
        return bytes(&marked, signer);
    }
    // A model with signals is never written without them: were the pair refused (which
    // `quantise` rules out), the blob would be empty and refused everywhere, not a blob
    // whose features a station would take for readings.
    match with_signals(q, marked) {
        Some(m) => bytes(&m, signer),
        None => Vec::new(),
    }
}

/// The blob of `model`, signed when a key is given.
fn bytes<I: Inputs>(
    model: &CheckedModel<I>,
    signer: Option<&ed25519_dalek::SigningKey>,
) -> Vec<u8> {
    match signer {
        Some(k) => crate::release::sign::signed_blob(model, k),
        None => crate::release::pack::blob_bytes(model),
    }
}

/// Marks a checked model with the audit outcome (for packing).
pub fn mark(model: &CheckedModel, mark: shared_model::AuditMark) -> CheckedModel {
    let mut m = model.model().clone();
    m.audit = mark;
    CheckedModel::new(m).unwrap_or_else(|_| model.clone())
}

/// `model` (`q`'s model, perhaps marked by the audit) with `q`'s signals, for a signal blob;
/// `None` for a model of readings, or if the pair were refused, which `quantise` rules out:
/// it validated the same section against the same channels, and a mark or a move of the
/// weights changes no channel's range.
fn with_signals(q: &Quantised, model: CheckedModel) -> Option<CheckedModel<SignalSection>> {
    if q.signals.is_empty() {
        return None;
    }
    CheckedModel::with_inputs(model.into_inner(), q.signals.clone()).ok()
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
