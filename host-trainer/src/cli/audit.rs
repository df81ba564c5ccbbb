//! `linegate audit`: quantise, run the release audit, write its reports.

use std::io::IsTerminal;
use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use super::args::{Release, ReleaseArgs, release_inputs};
use super::{CheckFailed, to_json};
use crate::output::OutputSet;
use crate::release::units;
use crate::report;

/// Flags of `linegate audit`.
#[derive(Args)]
pub struct AuditArgs {
    #[command(flatten)]
    pub release: ReleaseArgs,
    /// Also run the word-length sweep (weights 8/12/16/24/32 × inputs 8/16).
    #[arg(long)]
    pub sweep: bool,
    /// Output folder for audit.md, audit.html and audit.json.
    #[arg(long = "out-dir", alias = "report-dir", value_name = "DIR")]
    pub report_dir: Option<PathBuf>,
    /// Write every unit's float and fixed scores, verdicts and margins to this CSV file.
    #[arg(long, value_name = "FILE")]
    pub units: Option<PathBuf>,
    /// Overwrite existing report files.
    #[arg(long)]
    pub force: bool,
    /// Print the report as JSON.
    #[arg(long)]
    pub json: bool,
}

impl AuditArgs {
    /// Runs `linegate audit`.
    pub fn run(&self, quiet: bool, settings: Vec<crate::project::Setting>) -> Result<()> {
        let Self {
            release,
            sweep,
            report_dir,
            units,
            force,
            json,
        } = self;
        let mut rel = release_inputs(release, quiet, settings)?;
        if rel.fm.classes.is_some() {
            return run_classes(self, &rel, quiet);
        }
        let done = rel.run()?;
        let (q, r) = (done.q, done.report);
        let others = rel.named_others();
        let Release {
            fm, train, qc, ac, ..
        } = &rel;
        let sw = if *sweep {
            let progress = !quiet && std::io::stderr().is_terminal();
            Some(crate::release::sweep::sweep(
                fm, train, &others, *qc, *ac, progress,
            )?)
        } else {
            None
        };
        let doc = report::document(fm, &r, sw.as_ref());
        let md = doc.markdown();
        let mut set = OutputSet::default();
        release.name_inputs(&mut set);
        if let Some(dir) = report_dir {
            add_reports(
                &mut set,
                dir,
                &md,
                report::html(fm, &r, sw.as_ref(), &doc),
                report::json(&r, sw.as_ref()),
            );
        }
        if let Some(path) = units {
            let mut sets = vec![("train", train)];
            sets.extend(others.iter().copied());
            // Streamed: the rows go to disk as they are made, never whole in memory.
            set.add_written("units CSV (--units)", path, *force, |w| {
                units::write_units_csv(w, &q, fm, &sets)
            })?;
        }
        set.commit(*force)?;
        if *json {
            say_raw!(
                "{}",
                to_json(
                    &serde_json::json!({ "audit": r, "sweep": sw.as_ref().map(|s| &s.0), "recommended": sw.as_ref().and_then(|s| s.1) })
                )
            );
        } else if !quiet {
            say_raw!("{md}");
        }
        if !r.passed {
            return Err(CheckFailed(format!("audit failed: {}", r.reasons.join("; "))).into());
        }
        Ok(())
    }
}

/// Runs the class audit for `args` on the logs and settings `rel` holds.
fn run_classes(args: &AuditArgs, rel: &Release, quiet: bool) -> Result<()> {
    if args.sweep {
        anyhow::bail!(
            "--sweep is not available for a model of several classes yet; give the word lengths with --weight-bits/--input-bits"
        );
    }
    let (q, r) = super::audit_classes::release(rel, quiet)?;
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
        add_reports(
            &mut set,
            dir,
            &md,
            report::class_html(&r, &doc),
            report::class_json(&r),
        );
    }
    if let Some(path) = &args.units {
        let mut sets = vec![("train", &rel.train)];
        sets.extend(others.iter().copied());
        set.add_written("units CSV (--units)", path, args.force, |w| {
            crate::release::class_audit::write_class_units_csv(w, &q, fc, &sets)
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

/// The report folder's three files (`--out-dir`), for either kind of model.
fn add_reports(
    set: &mut OutputSet,
    dir: &std::path::Path,
    md: &str,
    html: impl Into<Vec<u8>>,
    json: impl Into<Vec<u8>>,
) {
    set.add_as(
        "report audit.md (--out-dir)",
        dir.join("audit.md"),
        md.as_bytes(),
    );
    set.add_as(
        "report audit.html (--out-dir)",
        dir.join("audit.html"),
        html,
    );
    set.add_as(
        "report audit.json (--out-dir)",
        dir.join("audit.json"),
        json,
    );
}
