//! The commands' work on one file of a log at a time, for an engine that spreads a log's
//! files over worker processes (the Python package's `linegate.parts` and
//! `linegate.dask`): each call reads one file exactly as the command reads a log (the same
//! log flags, the same checks on model, blob and audit record) and returns its part as
//! bytes; the merges and the finished results are the library's
//! (`release::audit_part`, `field::replay_part`, `field::run_part`). Not subcommands: they
//! print nothing.

use std::ffi::OsString;
use std::path::{Path, PathBuf};

use anyhow::{Result, bail};
use clap::{FromArgMatches, Parser};
use shared_model::Thresholds;

use super::args::LogArgs;
use super::drift::{audit_record, the_audited_blob};
use crate::field::baseline;
use crate::field::drift::{DriftConfig, DriftReport, Field, Source, drift};
use crate::field::record;
use crate::field::replay_part::ReplayPart;
use crate::field::run::FieldRun;
use crate::field::run_part::RunPart;
use crate::ingest::{LogOptions, SkipReport};
use crate::release::audit_part::{AuditPart, Released};
use crate::release::pack::DeviceModel;
use crate::train::float_model::FloatModel;
use crate::workflow;

/// The commands' log flags alone (`--label`, `--channels`, `--unit-id`, …).
#[derive(Parser)]
#[command(name = "log flags", no_binary_name = true)]
struct LogFlags {
    #[command(flatten)]
    log_args: LogArgs,
}

/// The float model at `model` and the options the commands read a log with for it, from
/// the commands' log flags `flags` (no program name, no files).
///
/// # Errors
/// A usage error of the flags, or the model's [`InputError`](crate::error::InputError).
pub fn model_options(model: &Path, flags: &[String]) -> Result<(FloatModel, LogOptions)> {
    let args: Vec<OsString> = flags.iter().map(OsString::from).collect();
    let matches = <LogFlags as clap::CommandFactory>::command().try_get_matches_from(args)?;
    let f = LogFlags::from_arg_matches(&matches)?;
    let fm = FloatModel::read(model)?;
    let opts = f
        .log_args
        .options_for_model(true, &fm, model, &mut Vec::new())?;
    Ok((fm, opts))
}

/// The blob's bytes decoded as a blob of `fm` (the commands' own check and message).
fn device(fm: &FloatModel, blob: &[u8], model: &Path) -> Result<DeviceModel> {
    super::blob_of_model(fm, blob, Path::new("the blob"), model)
}

/// One file of a log audited as `linegate audit` audits the log it names `name`
/// (`validation-1`, `holdout`, …) with the release of `model` and `blob`, `part` its place
/// in the log; `noise` the `--noise` entries (`CHANNEL=VALUE`) over the model's declared
/// noise, as the audit takes them. The part's bytes.
///
/// # Errors
/// The flags', the model's, the blob's (not of this model) or the file's error.
pub fn audit_part(
    model: &Path,
    blob: &[u8],
    file: &Path,
    (name, part): (&str, u32),
    noise: &[String],
    flags: &[String],
) -> Result<Vec<u8>> {
    let (fm, opts) = model_options(model, flags)?;
    device(&fm, blob, model)?;
    let noise = crate::release::tolerance::declared_noise(&fm, noise)?;
    let ds = workflow::load_for_model(&[file.to_path_buf()], &opts, &fm)?;
    let released = Released::new(fm, blob, &noise)?;
    Ok(AuditPart::count(released.counter(), name, &ds, Some(part)).to_bytes())
}

/// One file of a log through the blob, as `linegate replay --form device` prints it: the
/// part's bytes (lines numbered from 0 within the file, and counts).
///
/// # Errors
/// The flags', the model's, the blob's or the file's error.
pub fn replay_part(model: &Path, blob: &[u8], file: &Path, flags: &[String]) -> Result<Vec<u8>> {
    let (fm, opts) = model_options(model, flags)?;
    let m = device(&fm, blob, model)?;
    // As `replay` reads a log: no label needed, no digest, timestamps kept.
    let opts = LogOptions {
        label_optional: true,
        digest: false,
        keep_times: true,
        ..opts
    };
    Ok(ReplayPart::count(file, &opts, &fm, &m)?.to_bytes())
}

/// The audit record at `audit` and its baseline's thresholds, after `linegate drift`'s
/// check that `blob` is the blob the audit named.
fn audited(
    audit: &Path,
    fm: &FloatModel,
    blob: &[u8],
    model: &Path,
) -> Result<(baseline::AuditBaseline, DeviceModel, Thresholds)> {
    let a = baseline::read(&audit_record(audit))?;
    let m = device(fm, blob, model)?;
    let t = Thresholds {
        nogo_max: a.baseline.nogo_max,
        go_min: a.baseline.go_min,
    };
    the_audited_blob(&a, Path::new("the blob"), blob, &m, t)?;
    Ok((a, m, t))
}

/// The empty drift part every file of a field log is counted into: the audit's device
/// plan and thresholds, after `linegate drift`'s checks of the blob against the audit.
///
/// # Errors
/// The model's, the blob's or the audit record's error.
pub fn drift_start(model: &Path, blob: &[u8], audit: &Path) -> Result<Vec<u8>> {
    let fm = FloatModel::read(model)?;
    let (a, m, t) = audited(audit, &fm, blob, model)?;
    let part = RunPart::new(
        a.baseline.plan.field_plan(),
        t,
        m.channel_count(),
        m.signal_count(),
        true,
    );
    Ok(postcard::to_allocvec(&part)?)
}

/// One file of a field log counted into a copy of `start` (from [`drift_start`]), read as
/// `linegate drift` reads a field log. The part's bytes.
///
/// # Errors
/// The flags', the model's, the blob's or the file's error; `start` not a part.
pub fn drift_part(
    model: &Path,
    blob: &[u8],
    start: &[u8],
    file: &Path,
    flags: &[String],
) -> Result<Vec<u8>> {
    let (fm, opts) = model_options(model, flags)?;
    let m = device(&fm, blob, model)?;
    let opts = LogOptions {
        label_optional: true,
        digest: false,
        ..opts
    };
    let mut part: RunPart = postcard::from_bytes(start)?;
    record::run_log(file, &opts, &fm, &m, &mut SkipReport::default(), &mut part)?;
    Ok(postcard::to_allocvec(&part)?)
}

/// Two drift parts as one: `earlier`'s units, then `later`'s.
///
/// # Errors
/// Parts of different plans, or bytes that are not parts.
pub fn drift_merge(earlier: &[u8], later: &[u8]) -> Result<Vec<u8>> {
    let (a, b): (RunPart, RunPart) = (postcard::from_bytes(earlier)?, postcard::from_bytes(later)?);
    Ok(postcard::to_allocvec(&RunPart::merge(&a, &b)?)?)
}

/// The drift report over a field log of `files` whose parts merged into `merged`, against
/// the baseline of the audit record `audit`, as `linegate drift --json` reports it (no
/// CUSUM chart: parts keep no per-unit path).
///
/// # Errors
/// The audit record's error, `merged` not a part, a level outside (0, 1), or a field
/// without units.
pub fn drift_finish(
    audit: &Path,
    merged: &[u8],
    files: &[PathBuf],
    cfg: DriftConfig,
) -> Result<DriftReport> {
    if !(cfg.alpha > 0.0 && cfg.alpha < 1.0) {
        bail!(
            "alpha {}: the level must lie between 0 and 1 (e.g. 0.01)",
            cfg.alpha
        );
    }
    let a = baseline::read(&audit_record(audit))?;
    let part: RunPart = postcard::from_bytes(merged)?;
    let run = FieldRun::from_part(part)?;
    let mut r = drift(&a.baseline, Field::Run(&run), Source::Log, cfg);
    r.files = files.iter().map(|f| f.display().to_string()).collect();
    r.require_units()?;
    Ok(r)
}
