//! `linegate pack`: the model blob and flash images, only from a model that passed its audit.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use super::CheckFailed;
use super::args::{ReleaseArgs, release_inputs};
use crate::output::OutputSet;
use crate::release::audit_record::{AuditRecord, Release as Record};
use crate::release::hex;

/// Flags of `linegate pack`.
#[derive(Args)]
pub struct PackArgs {
    #[command(flatten)]
    pub release: ReleaseArgs,
    /// Output blob (default: `[outputs] blob` of the project file).
    #[arg(long, short)]
    pub output: Option<PathBuf>,
    /// The audit record (audit.json, from `linegate audit --out-dir`, or that folder) the
    /// blob must be:
    /// pack refuses (exit 1, nothing written), naming each difference, unless its model,
    /// logs, settings and blob bytes are the audited ones. Default: audit.json in
    /// `[outputs] audit_dir` of the project file; without either, pack audits the model
    /// itself and says so.
    #[arg(long, value_name = "AUDIT_JSON|DIR")]
    pub audited: Option<PathBuf>,
    /// Also write an Intel HEX image placing the blob at this flash address (e.g. 0x3F000).
    #[arg(long, value_name = "ADDRESS", value_parser = parse_address)]
    pub hex: Option<u32>,
    /// Also write the raw image (.bin).
    #[arg(long)]
    pub bin: bool,
    /// Pack even if the audit fails; recorded in the blob.
    #[arg(long)]
    pub override_audit: bool,
    /// Overwrite existing files.
    #[arg(long)]
    pub force: bool,
}

impl PackArgs {
    /// Runs `linegate pack`.
    pub fn run(&self, quiet: bool, settings: Vec<crate::project::Setting>) -> Result<()> {
        let Self {
            release, output, ..
        } = self;
        let output = super::settings::required(output, "-o/--output", "[outputs] blob")?;
        let mut rel = release_inputs(release, quiet, settings)?;
        if rel.fm.classes.is_some() {
            return pack_classes(self, &rel, quiet, output);
        }
        let done = rel.run()?;
        let (r, blob, fm) = (done.report, done.blob, rel.fm);
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
        self.check_release(r.passed, &r.reasons, &now, None, quiet)?;
        write_blob(self, output, &blob, r.passed, &fm.model_id, quiet)
    }
}

impl PackArgs {
    /// What pack asks of a release before it writes a byte: its audit passed (or
    /// `--override-audit`), and with `--audited`, the record is an audit of the same kind
    /// (`kind`: `None` two-sided, `Some("classes")`), passed (or overridden), of the same
    /// model, logs, settings of the release flags and blob bytes as `now`.
    fn check_release(
        &self,
        passed: bool,
        reasons: &[String],
        now: &Record<'_>,
        kind: Option<&str>,
        quiet: bool,
    ) -> Result<()> {
        if !passed && !self.override_audit {
            return Err(CheckFailed(format!("audit failed, nothing written: {} (pass --override-audit to pack anyway; the blob will record it)", reasons.join("; "))).into());
        }
        let Some(given) = &self.audited else {
            if !quiet {
                eprintln!(
                    "note: no audit record given (--audited, or [outputs] audit_dir in the project file): pack audited the model itself with the settings above"
                );
            }
            return Ok(());
        };
        // The audit's folder names its record.
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
        if record.kind.as_deref() != kind {
            let what = |k: Option<&str>| {
                if k == Some("classes") {
                    "a model of several classes"
                } else {
                    "a two-sided (GO / NO-GO) model"
                }
            };
            return Err(CheckFailed(format!(
                "{}: the record is the audit of {}, and this model is {}; nothing written",
                path.display(),
                what(record.kind.as_deref()),
                what(kind)
            ))
            .into());
        }
        if !record.passed && !self.override_audit {
            return Err(CheckFailed(format!(
                "{}: that audit failed ({}); nothing written",
                path.display(),
                record.reasons.join("; ")
            ))
            .into());
        }
        let differs = record.differences_of(now, &release_flags());
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
                now.blob_sha256
            );
        }
        Ok(())
    }
}

/// Writes the blob and the images asked for, all or nothing, and says what was written.
pub fn write_blob(
    args: &PackArgs,
    output: &std::path::Path,
    blob: &[u8],
    passed: bool,
    model_id: &str,
    quiet: bool,
) -> Result<()> {
    let mut set = OutputSet::default();
    args.release.name_inputs(&mut set);
    set.add_as("blob (-o)", output, blob.to_vec());
    if let Some(a) = args.hex {
        hex::check_placement(a, blob.len())?;
        set.add_as(
            "Intel HEX image (--hex, the blob's name with .hex)",
            output.with_extension("hex"),
            hex::to_hex(a, blob),
        );
    }
    if args.bin {
        set.add_as(
            "raw image (--bin, the blob's name with .bin)",
            output.with_extension("bin"),
            blob.to_vec(),
        );
    }
    let files = set.commit(args.force)?;
    if !quiet {
        say!(
            "audit {}; model id {model_id}; blob id {:08x}; {} bytes",
            if passed {
                "passed"
            } else {
                "FAILED (override recorded in the blob)"
            },
            shared_model::blob::blob_id(blob).unwrap_or(0),
            blob.len()
        );
        for f in files {
            say!("wrote {}", f.display());
        }
    }
    Ok(())
}

/// The flags that decide a release's blob and verdict (every flag `audit` and `pack`
/// share): `pack` compares their values with the audit's. Files are left to their
/// contents: the model's id, each log's SHA-256 and the blob's (key included) are compared
/// themselves, so `logs/a.csv` and `./logs/a.csv` are the same log.
fn release_flags() -> Vec<String> {
    use clap::Args as _;
    const FILES: &[&str] = &["model", "train", "holdout", "validate", "sign"];
    ReleaseArgs::augment_args(clap::Command::new("release"))
        .get_arguments()
        .filter(|a| !FILES.contains(&a.get_id().as_str()))
        .filter_map(|a| a.get_long().map(|l| format!("--{l}")))
        .collect()
}

fn parse_address(s: &str) -> Result<u32, String> {
    let t = s.trim();
    let r = match t.strip_prefix("0x").or_else(|| t.strip_prefix("0X")) {
        Some(h) => u32::from_str_radix(&h.replace('_', ""), 16),
        None => t.replace('_', "").parse(),
    };
    r.map_err(|_| format!("'{s}' is not an address (use e.g. 0x3F000 or 258048)"))
}

/// `linegate pack` of a model of several classes: the same release as `audit`'s, then the
/// blob (version 5, or 6 signed) written only if the audit passed (or `--override-audit`,
/// recorded in the blob). With `--audited`, the record must be a class audit of the same
/// release: the same model, logs (SHA-256), settings of the release flags and blob bytes
/// (the two-sided audit's comparison, `AuditRecord::differences_of`).
fn pack_classes(
    args: &PackArgs,
    rel: &super::args::Release,
    quiet: bool,
    output: &std::path::Path,
) -> Result<()> {
    let (q, r) = super::audit_classes::release(rel, quiet)?;
    let blob = crate::release::class_audit::class_blob(&q, r.passed, rel.signer.as_ref());
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
    args.check_release(r.passed, &r.reasons, &now, Some("classes"), quiet)?;
    write_blob(args, output, &blob, r.passed, &rel.fm.model_id, quiet)
}
