//! `linegate audit` on a model of several classes: quantise its rows, audit (confusion
//! matrix, gates per class, the per-pair rounding proof), write its reports.

use anyhow::Result;

use super::args::{Release, command_line};
use super::audit::AuditArgs;
use super::{CheckFailed, to_json};
use host_trainer::output::OutputSet;
use host_trainer::release::class_audit::{audit_classes, write_class_units_csv};
use host_trainer::release::gates::Limit;
use host_trainer::release::quantise_classes::quantise_classes;
use host_trainer::report;

/// Runs the class audit for `args` on the logs and settings `rel` holds.
pub fn run(args: &AuditArgs, rel: &Release, quiet: bool, misroute: Limit) -> Result<()> {
    let Some(fc) = rel.fm.classes.as_ref() else {
        anyhow::bail!("the model has no classes");
    };
    // What the two-sided audit offers and this one does not yet: refused, never dropped.
    if args.sweep || rel.apply.recommended_format || rel.apply.suggested_band {
        anyhow::bail!(
            "--sweep and --apply-… are not available for a model of several classes yet; give the word lengths with --weight-bits/--input-bits"
        );
    }
    let q = quantise_classes(&rel.fm, rel.qc)?;
    let others = rel.named_others();
    let mut r = audit_classes(&q, &rel.fm, fc, &rel.train, &others, rel.ac, misroute);
    r.command_line = Some(command_line());
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
