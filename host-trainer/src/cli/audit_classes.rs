//! `linegate audit` and `linegate pack` on a model of several classes: quantise its rows,
//! audit (confusion matrix, gates per class, the per-pair rounding proof), write its
//! reports or its blob.

use anyhow::Result;

use super::args::{Release, command_line};
use super::audit::AuditArgs;
use super::pack::PackArgs;
use super::{CheckFailed, to_json};
use host_trainer::output::OutputSet;
use host_trainer::release::audit_record::{AuditRecord, Release as Record};
use host_trainer::release::class_audit::{
    ClassAudit, audit_classes, class_blob, write_class_units_csv,
};
use host_trainer::release::quantise_classes::{QuantisedClasses, quantise_classes};
use host_trainer::report;

/// Runs the class audit for `args` on the logs and settings `rel` holds.
pub fn run(args: &AuditArgs, rel: &Release, quiet: bool) -> Result<()> {
    if args.sweep {
        anyhow::bail!(
            "--sweep is not available for a model of several classes yet; give the word lengths with --weight-bits/--input-bits"
        );
    }
    let (q, r) = release(rel, quiet)?;
    let fc = rel
        .fm
        .classes
        .as_ref()
        .unwrap_or_else(|| unreachable!("release() checked"));
    let others = rel.named_others();
    let doc = report::class_document(&r);
    let md = doc.markdown();
    let mut set = OutputSet::default();
    args.release.name_inputs(&mut set);
    if let Some(dir) = &args.report_dir {
        set.add_as(
            "report audit.md (--out-dir)",
            dir.join("audit.md"),
            md.as_bytes(),
        );
        set.add_as(
            "report audit.html (--out-dir)",
            dir.join("audit.html"),
            report::class_html(&r, &doc),
        );
        set.add_as(
            "report audit.json (--out-dir)",
            dir.join("audit.json"),
            report::class_json(&r),
        );
    }
    if let Some(path) = &args.units {
        let mut sets = vec![("train", &rel.train)];
        sets.extend(others.iter().copied());
        set.add_written("units CSV (--units)", path, args.force, |w| {
            write_class_units_csv(w, &q, fc, &sets)
        })?;
    }
    set.commit(args.force)?;
    if args.json {
        // As the two-sided audit prints it: the report under "audit".
        say_raw!("{}", to_json(&serde_json::json!({ "audit": r })));
    } else if !quiet {
        say_raw!("{md}");
    }
    if !r.passed {
        return Err(CheckFailed(format!("audit failed: {}", r.reasons.join("; "))).into());
    }
    Ok(())
}

/// `linegate pack` of a model of several classes: the same release as [`run`]'s, then the
/// blob (version 5, or 6 signed) written only if the audit passed (or `--override-audit`,
/// recorded in the blob). With `--audited`, the record must be a class audit of the same
/// release: the same model, logs (SHA-256), settings of the release flags and blob bytes
/// (the two-sided audit's comparison, `AuditRecord::differences_of`).
pub fn pack(args: &PackArgs, rel: &Release, quiet: bool, output: &std::path::Path) -> Result<()> {
    let (q, r) = release(rel, quiet)?;
    if !r.passed && !args.override_audit {
        return Err(CheckFailed(format!("audit failed, nothing written: {} (pass --override-audit to pack anyway; the blob will record it)", r.reasons.join("; "))).into());
    }
    let blob = class_blob(&q, r.passed, rel.signer.as_ref());
    if let Some(given) = &args.audited {
        let path = if given.is_dir() {
            given.join("audit.json")
        } else {
            given.clone()
        };
        if !path.exists() {
            anyhow::bail!(
                "{}: no audit record there; run `linegate audit` (with --out-dir, or [outputs] audit_dir) first: pack writes only the blob an audit passed",
                path.display()
            );
        }
        let record = AuditRecord::read(&path)?;
        if record.kind.as_deref() != Some("classes") {
            return Err(CheckFailed(format!(
                "{}: the record is a two-sided audit, and this model decides between several classes; nothing written",
                path.display()
            ))
            .into());
        }
        if !record.passed && !args.override_audit {
            return Err(CheckFailed(format!(
                "{}: that audit failed ({}); nothing written",
                path.display(),
                record.reasons.join("; ")
            ))
            .into());
        }
        let sets: Vec<(String, String)> = r
            .sets
            .iter()
            .map(|s| (s.name.clone(), s.sha256.clone()))
            .collect();
        let now = Record {
            settings: &r.settings,
            model_id: &r.model_id,
            sets: &sets,
            key_id: r.key_id.as_deref(),
            blob_sha256: &r.blob_sha256,
        };
        let differs = record.differences_of(&now, &super::pack::release_flags());
        if !differs.is_empty() {
            return Err(CheckFailed(format!(
                "{}: this is not the audited release, nothing written; what differs: {}. Run the audit again with these settings, or pack with the audit's",
                path.display(),
                differs.join("; ")
            ))
            .into());
        }
        if !quiet {
            eprintln!(
                "the blob is the one the audit {} passed (same model, logs, settings and SHA-256 {})",
                path.display(),
                r.blob_sha256
            );
        }
    } else if !quiet {
        eprintln!(
            "note: no audit record given (--audited, or [outputs] audit_dir in the project file): pack audited the model itself with the settings above"
        );
    }
    super::pack::write_blob(args, output, &blob, r.passed, &rel.fm.model_id, quiet)
}

/// Quantises and audits a model of several classes as `audit` and `pack` both do,
/// naming the blob `pack` writes (signed with the release key, if given).
fn release(rel: &Release, quiet: bool) -> Result<(QuantisedClasses, ClassAudit)> {
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
