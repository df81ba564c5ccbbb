//! The release of a model of several classes, as `audit` and `pack` both run it: quantise
//! its rows, audit (confusion matrix, gates per class, the per-pair rounding proof), name
//! the blob. `audit` writes the reports (`cli/audit.rs`), `pack` the blob (`cli/pack.rs`).

use anyhow::Result;

use super::args::{Release, command_line};
use crate::release::class_audit::{ClassAudit, audit_classes, class_blob};
use crate::release::quantise_classes::{QuantisedClasses, quantise_classes};

/// Quantises and audits a model of several classes as `audit` and `pack` both do,
/// naming the blob `pack` writes (signed with the release key, if given).
pub fn release(rel: &Release, quiet: bool) -> Result<(QuantisedClasses, ClassAudit)> {
    let Some(fc) = rel.fm.classes.as_ref() else {
        anyhow::bail!("the model has no classes");
    };
    // What the two-sided audit offers and this one does not yet: refused, never dropped.
    if rel.apply.recommended_format || rel.apply.suggested_band {
        anyhow::bail!(
            "--apply-… is not available for a model of several classes yet; give the word lengths with --weight-bits/--input-bits"
        );
    }
    // The class audit's margin is its proof (every unit's distance to a decision edge
    // against its pair's rounding bound): a margin in LSB is not a gate it has yet.
    if (rel.ac.min_margin_lsb - 1.0).abs() > 0.0 {
        anyhow::bail!(
            "--min-margin-lsb {} is not available for a model of several classes yet: its audit gates the rounding proof (every unit proved; --no-require-guarantee lifts it)",
            rel.ac.min_margin_lsb
        );
    }
    let q = quantise_classes(&rel.fm, rel.qc)?;
    let others = rel.named_others();
    let mut r = audit_classes(
        &q,
        &rel.fm,
        fc,
        &rel.train,
        &others,
        rel.ac,
        rel.max_misroute,
    );
    r.name_blob(&class_blob(&q, r.passed, rel.signer.as_ref()));
    r.command_line = Some(command_line());
    r.settings = rel.settings.clone();
    if !quiet {
        for note in &r.notes {
            eprintln!("note: {note}");
        }
    }
    // Declared noise (by flag or recorded in the model) has no gate here yet: said in the
    // report and on stderr, never dropped in silence.
    let noisy: Vec<&str> = rel
        .fm
        .channels
        .iter()
        .zip(&rel.noise)
        .filter(|(_, n)| n.is_some())
        .map(|(c, _)| c.name.as_str())
        .collect();
    if !noisy.is_empty() {
        let note = format!(
            "declared sensor noise ({}) is not analysed for a model of several classes yet: no noise gate",
            noisy.join(", ")
        );
        if !quiet {
            eprintln!("note: {note}");
        }
        r.notes.push(note);
    }
    Ok((q, r))
}
