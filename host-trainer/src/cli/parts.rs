//! The commands' work on one file of a log at a time, for an engine that spreads a log's
//! files over worker processes (the Python package's `linegate.parts` and
//! `linegate.dask`). The driver resolves the command's settings once ([`resolve`]: given
//! flags, then the project file, as explicit flags), expands the log's files as the command
//! does ([`log_files`]) and checks they make one log ([`check_log`]); each worker call reads
//! one file exactly as the command reads a log, with the command's checks on model, blob and
//! audit record, and returns its part as bytes. Audit parts are the library's
//! (`release::audit_part`); replay and drift parts travel as a [`Piece`]: the release they
//! were counted with, the run of files they cover and the rows skipped, so that only
//! neighbouring parts of one release merge. Not subcommands: they print nothing.

use std::ffi::OsString;
use std::path::{Path, PathBuf};

use anyhow::{Result, bail};
use clap::{CommandFactory, FromArgMatches, Parser};
use serde::{Deserialize, Serialize};
use shared_model::Thresholds;

use super::args::LogArgs;
use super::drift::{audit_record, the_audited_blob};
use crate::field::baseline;
use crate::field::drift::{DriftConfig, DriftReport, Field, Source, drift};
use crate::field::record;
use crate::field::replay_part::ReplayPart;
use crate::field::run::FieldRun;
use crate::field::run_part::RunPart;
use crate::ingest::dataset::{LogPart, counted_twice};
use crate::ingest::{LogOptions, SkipReport};
use crate::release::audit_part::{AuditPart, Released};
use crate::release::matching::{BlobMismatch, decode_from};
use crate::release::pack::DeviceModel;
use crate::train::float_model::FloatModel;
use crate::workflow;

/// A release that does not fit: a blob that is not the model's, not the audited one, or
/// parts that do not belong together. The Python package raises `ReleaseError` for it.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct PartsRelease(pub String);

/// The commands' log flags alone (`--label`, `--channels`, `--unit-id`, …).
#[derive(Parser)]
#[command(name = "log flags", no_binary_name = true)]
struct LogFlags {
    #[command(flatten)]
    log_args: LogArgs,
}

/// A command's settings as the parts take them.
pub struct Resolved {
    /// The log flags, explicit (`--flag=value`, bare switches).
    pub log_flags: Vec<String>,
    /// The `--noise` entries.
    pub noise: Vec<String>,
    /// Every other setting: flag, values and source (flag, default, project file key), for
    /// the caller to apply (`--public-key`, `--alpha`, …) or to refuse.
    pub other: Vec<(String, Vec<String>, String)>,
}

/// The settings `command` (`audit`, `replay` or `drift`) reads a log for `model` with:
/// `flags` as given, then the project file's keys (`project`, else `linegate.toml` in the
/// working folder unless `no_project`), as the command line resolves them; the log flags
/// as explicit flags a worker parses without any project file.
///
/// # Errors
/// A usage error of the flags or the project file.
pub fn resolve(
    command: &str,
    model: &Path,
    flags: &[String],
    project: Option<&Path>,
    no_project: bool,
) -> Result<Resolved> {
    let mut argv: Vec<OsString> = vec!["linegate".into(), command.into()];
    if command == "replay" {
        argv.push("LOG".into());
    }
    argv.extend(["--model".into(), model.as_os_str().to_owned()]);
    argv.extend(flags.iter().map(OsString::from));
    match project {
        Some(p) => argv.extend(["--project".into(), p.as_os_str().to_owned()]),
        None if no_project => argv.push("--no-project".into()),
        None => {}
    }
    let parsed = super::settings::parse_from(&argv)?;
    let log = LogFlags::command();
    let switch = |flag: &str| {
        log.get_arguments()
            .find(|a| a.get_long().is_some_and(|l| flag == format!("--{l}")))
            .map(|a| !a.get_action().takes_values())
    };
    let (mut log_flags, mut noise, mut other) = (Vec::new(), Vec::new(), Vec::new());
    for s in parsed.settings {
        if s.flag == "--noise" {
            noise.extend(s.value);
            continue;
        }
        match switch(&s.flag) {
            Some(true) if s.value.iter().any(|v| v == "true") => log_flags.push(s.flag),
            // `--flag=value`: a value that starts with `-` stays a value.
            Some(false) => log_flags.extend(s.value.iter().map(|v| format!("{}={v}", s.flag))),
            _ => other.push((s.flag, s.value, s.source)),
        }
    }
    Ok(Resolved {
        log_flags,
        noise,
        other,
    })
}

/// The files of the log `given` names (files or quoted glob patterns), expanded and ordered
/// as the commands expand them.
///
/// # Errors
/// No file given, or a pattern that matches nothing.
pub fn log_files(given: &[PathBuf]) -> Result<Vec<PathBuf>> {
    super::log_files(given, "name the log (or several files of it)")
}

/// Refuses files that do not make one log for `command`, as the commands refuse them when
/// they read a log of several files: the same file twice (by path), or channel columns that
/// differ.
///
/// # Errors
/// The first file that does not belong, named, with the command's message.
pub fn check_log(command: &str, model: &Path, files: &[PathBuf], flags: &[String]) -> Result<()> {
    let (fm, opts) = model_options(model, flags)?;
    // Replay and drift read field logs, which need no label column.
    let opts = LogOptions {
        label_optional: command != "audit",
        ..opts
    };
    // Paths only here: each part's digest is compared when the parts merge.
    let named = |f: &PathBuf| LogPart {
        path: f.clone(),
        sha256: String::new(),
        units: 0,
    };
    for (k, f) in files.iter().enumerate() {
        let earlier: Vec<LogPart> = files[..k].iter().map(named).collect();
        if let Some(message) = counted_twice(&earlier, &named(f)) {
            bail!(crate::error::InputError::Format {
                path: f.clone(),
                message,
            });
        }
    }
    if fm.signals.is_empty() {
        crate::ingest::same_columns(files, &opts)?;
    }
    Ok(())
}

/// The float model at `model` and the options the commands read a log with for it, from
/// the log flags `flags` (explicit, as [`resolve`] gives them).
fn model_options(model: &Path, flags: &[String]) -> Result<(FloatModel, LogOptions)> {
    let args: Vec<OsString> = flags.iter().map(OsString::from).collect();
    let matches = LogFlags::command().try_get_matches_from(args)?;
    let f = LogFlags::from_arg_matches(&matches)?;
    let fm = FloatModel::read(model)?;
    let opts = f
        .log_args
        .options_for_model(true, &fm, model, &mut Vec::new())?;
    Ok((fm, opts))
}

/// The float model, the blob's device model and the options for one file of a field log
/// (`replay`, `drift`: no label needed, no digest; `keep_times` as the command keeps them).
fn field_reader(
    model: &Path,
    blob: &[u8],
    flags: &[String],
    keep_times: bool,
) -> Result<(FloatModel, DeviceModel, LogOptions)> {
    let (fm, opts) = model_options(model, flags)?;
    let m = device(&fm, blob, model)?;
    let opts = LogOptions {
        label_optional: true,
        digest: false,
        keep_times,
        ..opts
    };
    Ok((fm, m, opts))
}

/// The blob's bytes decoded as a blob of `fm`, or [`PartsRelease`].
fn device(fm: &FloatModel, blob: &[u8], model: &Path) -> Result<DeviceModel> {
    decode_from(fm, blob).map_err(|e| {
        PartsRelease(match e {
            BlobMismatch::Decode(e) => format!("the blob: {e}"),
            BlobMismatch::Mismatch(e) => format!(
                "the blob is not one of the float model {}: {e}; give the float model the blob was packed from",
                model.display()
            ),
        })
        .into()
    })
}

/// How a part's own bytes are made: replay parts are JSON text, drift parts postcard.
pub trait PartBytes: Sized {
    /// The part's bytes.
    fn to_part_bytes(&self) -> Result<Vec<u8>>;
    /// The part from its bytes.
    fn from_part_bytes(bytes: &[u8]) -> Result<Self>;
}

impl PartBytes for ReplayPart {
    fn to_part_bytes(&self) -> Result<Vec<u8>> {
        Ok(self.to_bytes())
    }
    fn from_part_bytes(bytes: &[u8]) -> Result<Self> {
        Ok(Self::from_bytes(bytes)?)
    }
}

impl PartBytes for RunPart {
    fn to_part_bytes(&self) -> Result<Vec<u8>> {
        Ok(postcard::to_allocvec(self)?)
    }
    fn from_part_bytes(bytes: &[u8]) -> Result<Self> {
        Ok(postcard::from_bytes(bytes)?)
    }
}

/// A replay or drift part with what it was counted with: its release (model and blob
/// ids), the files of the log it covers (places `first..=last`) and the rows it skipped.
pub struct Piece<T> {
    /// Model and blob ids.
    pub release: String,
    /// The first file's place in the log.
    pub first: u32,
    /// The last file's place.
    pub last: u32,
    /// Rows skipped under `--skip-bad-rows`.
    pub skipped: SkipReport,
    /// The part itself.
    pub part: T,
}

/// A [`Piece`]'s bytes: postcard over plain fields (the skip report as JSON text, since its
/// form leaves empty fields out, and the part in its own bytes).
#[derive(Serialize, Deserialize)]
struct PieceBytes {
    release: String,
    first: u32,
    last: u32,
    skipped: String,
    part: Vec<u8>,
}

impl<T: PartBytes> Piece<T> {
    fn bytes(&self) -> Result<Vec<u8>> {
        let b = PieceBytes {
            release: self.release.clone(),
            first: self.first,
            last: self.last,
            skipped: serde_json::to_string(&self.skipped)?,
            part: self.part.to_part_bytes()?,
        };
        Ok(postcard::to_allocvec(&b)?)
    }

    fn of(bytes: &[u8], what: &str) -> Result<Self> {
        let not = |e: &dyn std::fmt::Display| PartsRelease(format!("not a {what} part: {e}"));
        let b: PieceBytes = postcard::from_bytes(bytes).map_err(|e| not(&e))?;
        Ok(Self {
            release: b.release,
            first: b.first,
            last: b.last,
            skipped: serde_json::from_str(&b.skipped).map_err(|e| not(&e))?,
            part: T::from_part_bytes(&b.part).map_err(|e| not(&e))?,
        })
    }

    /// `earlier` then `later`, merged by `join`: refused unless both are of one release and
    /// `later` starts at the file after `earlier`'s last (no file twice, none left out).
    fn merge(
        earlier: &[u8],
        later: &[u8],
        what: &str,
        join: impl FnOnce(T, T) -> Result<T>,
    ) -> Result<Vec<u8>> {
        let (a, b) = (Self::of(earlier, what)?, Self::of(later, what)?);
        if a.first > a.last || b.first > b.last {
            bail!(PartsRelease(format!(
                "a {what} start is not a part of a file: count a file into it first"
            )));
        }
        if a.release != b.release {
            bail!(PartsRelease(format!(
                "{what} parts of different releases ({} and {}) do not merge",
                a.release, b.release
            )));
        }
        if a.last.checked_add(1) != Some(b.first) {
            bail!(PartsRelease(format!(
                "{what} parts merge in log order, each file once: files {}..={} cannot be followed by files {}..={}",
                a.first, a.last, b.first, b.last
            )));
        }
        let mut skipped = a.skipped;
        skipped.merge(&b.skipped);
        Piece {
            release: a.release,
            first: a.first,
            last: b.last,
            skipped,
            part: join(a.part, b.part)?,
        }
        .bytes()
    }
}

/// The ids a piece of `m` records.
fn release_ids(fm: &FloatModel, blob: &[u8]) -> String {
    format!(
        "model {} blob {:08x}",
        fm.model_id,
        shared_model::blob::blob_id(blob).unwrap_or(0)
    )
}

/// One file of a log audited as `linegate audit` audits the log it names `name`
/// (`validation-1`, `holdout`, …) with the release of `model` and `blob`, `part` its place
/// in the log; `noise` the `--noise` entries over the model's declared noise and `flags`
/// the log flags, both as [`resolve`] gives them. The part's bytes.
///
/// # Errors
/// The flags', the model's, the blob's ([`PartsRelease`]) or the file's error.
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
    let released = Released::new(fm, blob, &noise).map_err(|e| PartsRelease(e.to_string()))?;
    Ok(AuditPart::count(released.counter(), name, &ds, Some(part)).to_bytes())
}

/// One file of a log, the `part`-th, through the blob, as `linegate replay --form device`
/// prints it: lines numbered from 0 within the file, and counts.
///
/// # Errors
/// The flags', the model's, the blob's ([`PartsRelease`]) or the file's error.
pub fn replay_part(
    model: &Path,
    blob: &[u8],
    (file, part): (&Path, u32),
    flags: &[String],
) -> Result<Vec<u8>> {
    // As `replay` reads a log: timestamps kept for its forms.
    let (fm, m, opts) = field_reader(model, blob, flags, true)?;
    let counted = ReplayPart::count(file, &opts, &fm, &m)?;
    Piece {
        release: release_ids(&fm, blob),
        first: part,
        last: part,
        skipped: counted.skipped.clone(),
        part: counted,
    }
    .bytes()
}

/// Two replay parts as one: `earlier`'s units, then `later`'s.
///
/// # Errors
/// [`PartsRelease`]: not parts, other releases, or not neighbours in the log.
pub fn replay_merge(earlier: &[u8], later: &[u8]) -> Result<Vec<u8>> {
    Piece::<ReplayPart>::merge(earlier, later, "replay", |a, b| Ok(a.merge(b)?))
}

/// The log's replay from the merge of all its parts (files `0..files`).
///
/// # Errors
/// [`PartsRelease`]: not a part, or files missing.
pub fn replay_finish(merged: &[u8], files: usize) -> Result<ReplayPart> {
    let p = Piece::<ReplayPart>::of(merged, "replay")?;
    whole(p.first, p.last, files, "replay")?;
    Ok(p.part)
}

/// Refuses a merge that does not cover files `0..files`.
fn whole(first: u32, last: u32, files: usize, what: &str) -> Result<()> {
    if first != 0 || usize::try_from(last).ok().map(|l| l + 1) != Some(files) {
        bail!(PartsRelease(format!(
            "the {what} parts cover files {first}..={last} of a log of {files}: merge every file's part"
        )));
    }
    Ok(())
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
    the_audited_blob(&a, Path::new("the blob"), blob, &m, t)
        .map_err(|e| PartsRelease(e.to_string()))?;
    Ok((a, m, t))
}

/// The empty drift part every file of a field log is counted into: the audit's device
/// plan and thresholds, after `linegate drift`'s checks of the blob against the audit.
///
/// # Errors
/// The model's, the blob's ([`PartsRelease`]) or the audit record's error.
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
    // first > last: no file counted yet, so it never merges as a part.
    Piece {
        release: release_ids(&fm, blob),
        first: 1,
        last: 0,
        skipped: SkipReport::default(),
        part,
    }
    .bytes()
}

/// The `part`-th file of a field log counted into a copy of `start` (from
/// [`drift_start`]), read as `linegate drift` reads a field log. The part's bytes.
///
/// # Errors
/// The flags', the model's, the blob's or the file's error; `start` not a part.
pub fn drift_part(
    model: &Path,
    blob: &[u8],
    start: &[u8],
    (file, part): (&Path, u32),
    flags: &[String],
) -> Result<Vec<u8>> {
    let (fm, m, opts) = field_reader(model, blob, flags, false)?;
    let mut piece = Piece::<RunPart>::of(start, "drift")?;
    if piece.first <= piece.last || piece.part.units != 0 {
        bail!(PartsRelease(
            "not a drift start: give drift_start's empty part, not a file's part".into()
        ));
    }
    if piece.release != release_ids(&fm, blob) {
        bail!(PartsRelease(format!(
            "the drift start was made for {}, not this release",
            piece.release
        )));
    }
    record::run_log(file, &opts, &fm, &m, &mut piece.skipped, &mut piece.part)?;
    piece.first = part;
    piece.last = part;
    piece.bytes()
}

/// Two drift parts as one: `earlier`'s units, then `later`'s.
///
/// # Errors
/// [`PartsRelease`]: not parts, other releases or plans, or not neighbours in the log.
pub fn drift_merge(earlier: &[u8], later: &[u8]) -> Result<Vec<u8>> {
    Piece::<RunPart>::merge(earlier, later, "drift", |a, b| Ok(RunPart::merge(&a, &b)?))
}

/// The drift report over the field log of `files` whose parts merged into `merged`, against
/// the baseline of the audit record `audit`, as `linegate drift --json` reports it (no
/// CUSUM chart: parts keep no per-unit path), and the rows skipped.
///
/// # Errors
/// The audit record's error, `merged` not a part or not of every file, a level outside
/// (0, 1), or a field without units.
pub fn drift_finish(
    audit: &Path,
    merged: &[u8],
    files: &[PathBuf],
    cfg: DriftConfig,
) -> Result<(DriftReport, SkipReport)> {
    let cfg = super::drift::config(cfg.alpha, cfg.two_sided)?;
    let a = baseline::read(&audit_record(audit))?;
    let piece = Piece::<RunPart>::of(merged, "drift")?;
    whole(piece.first, piece.last, files.len(), "drift")?;
    let run = FieldRun::from_part(piece.part)?;
    let mut r = drift(&a.baseline, Field::Run(&run), Source::Log, cfg);
    r.files = files.iter().map(|f| f.display().to_string()).collect();
    r.require_units()?;
    Ok((r, piece.skipped))
}
