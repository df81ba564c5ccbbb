//! The demo's one flow: each scenario goes through the same steps a user runs (data, train,
//! audit, pack, replay, drift), each step one library call, and adds its files to the demo's
//! output set. What differs between the scenarios is data (`Scenario`), not code.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::error::{InputError, OutputError};
use crate::field::drift::DriftReport;
use crate::ingest::LogOptions;
use crate::ingest::dataset::Dataset;
use crate::output::OutputSet;
use crate::release::applying::Apply;
use crate::release::audit_report::AuditReport;
use crate::release::quantise::QuantError;
use crate::release::sweep::SweepRow;
use crate::train::separability::SeparabilityReport;
use crate::workflow::release::{self as release_step, ReleaseRequest};
use crate::workflow::{self, TrainOutcome, TrainRequest};

/// Where the demo places the model in flash: the last 4 KiB of the 256 KiB part the QEMU example uses.
pub const MODEL_REGION: u32 = 0x0003_F000;

/// Why the demo stopped.
#[derive(Debug, thiserror::Error)]
pub enum DemoError {
    /// Reading a generated file failed.
    #[error(transparent)]
    Input(#[from] InputError),
    /// Writing failed.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// Quantisation failed.
    #[error(transparent)]
    Quant(#[from] QuantError),
    /// A scenario lacks a log its flow needs (a defect of the built-in scenario).
    #[error("the demo's {0} scenario has no {1} log")]
    Scenario(&'static str, &'static str),
}

/// What a log of a scenario is for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Role {
    /// The training log.
    Train,
    /// The holdout log: evaluated, audited, and replayed when [`Scenario::replay`] says so.
    Holdout,
    /// A log only checked for separability (read with the sheet, as a training log).
    Checked,
    /// An unlabelled log from the field, replayed.
    Field,
}

impl Role {
    /// The log's name in the files written from it (`replay-holdout.txt`).
    fn name(self) -> &'static str {
        match self {
            Self::Train => "train",
            Self::Holdout => "holdout",
            Self::Checked => "drift",
            Self::Field => "field",
        }
    }
}

/// One scenario: its files, how it trains and releases, and which of its results it writes.
pub(super) struct Scenario {
    /// Prefix of the files the scenario writes ("signal-" for the signal scenario).
    pub(super) prefix: &'static str,
    /// The synthetic logs, in the order they are written, each with its role.
    pub(super) logs: Vec<(&'static str, String, Role)>,
    /// The channel sheet's file name and text.
    pub(super) sheet: (&'static str, String),
    /// How to train.
    pub(super) train: TrainRequest<'static>,
    /// What the release may choose.
    pub(super) apply: Apply,
    /// The role of the log replayed (its lines and input vectors written).
    pub(super) replay: Role,
    /// Also write what a reviewer reads beside the Markdown: the separability checks as
    /// JSON, audit.json, audit.html and the Intel HEX image at [`MODEL_REGION`].
    pub(super) full: bool,
}

/// What one scenario did.
pub struct Outcome {
    /// The training.
    pub train: TrainOutcome,
    /// The separability check of the log only checked (the second shift's), if the
    /// scenario has one.
    pub checked: Option<SeparabilityReport>,
    /// The audit of the released model.
    pub audit: AuditReport,
    /// The sweep, when the release ran one to pick the format.
    pub sweep: Option<(Vec<SweepRow>, Option<usize>)>,
    /// Units replayed.
    pub replayed: usize,
    /// Replayed units the device refuses (FAULT).
    pub refused: usize,
    /// `linegate drift` on the checked (drifted) log and on the training log, when the
    /// scenario has a checked log and writes its full files.
    pub drift: Option<(DriftReport, DriftReport)>,
}

/// Writes `text` to `dir/name` (the demo's scratch folder) and returns the path.
fn write_file(dir: &Path, name: &str, text: &str) -> Result<PathBuf, DemoError> {
    let p = dir.join(name);
    std::fs::write(&p, text).map_err(|e| OutputError::Io {
        path: p.clone(),
        source: e,
    })?;
    Ok(p)
}

/// Runs `sc` step by step: its logs and sheet written in `tmp`, its results added to `set`
/// as files of `out`.
///
/// # Errors
/// [`DemoError`] of any step.
pub(super) fn run_scenario(
    sc: &Scenario,
    tmp: &Path,
    out: &Path,
    set: &mut OutputSet,
) -> Result<Outcome, DemoError> {
    // Data: the logs and sheet, written where the steps read them.
    let paths = sc
        .logs
        .iter()
        .map(|(n, t, _)| write_file(tmp, n, t))
        .collect::<Result<Vec<_>, _>>()?;
    let path_of = |role: Role| {
        sc.logs
            .iter()
            .position(|l| l.2 == role)
            .map(|i| (&paths[i], sc.logs[i].0))
    };
    let scenario = match sc.prefix.trim_end_matches('-') {
        "" => "readings",
        p => p,
    };
    let need =
        |role: Role, what: &'static str| path_of(role).ok_or(DemoError::Scenario(scenario, what));
    let sheet_path = write_file(tmp, sc.sheet.0, &sc.sheet.1)?;
    let opts = LogOptions::default();
    // Provenance and reports name the files as the user will find them in `out`.
    let (train_path, train_name) = need(Role::Train, "training")?;
    let (mut train_ds, sheet) =
        workflow::load(std::slice::from_ref(train_path), &opts, Some(&sheet_path))?;
    train_ds.path = out.join(train_name);
    let sheet = sheet.map(|(_, mut f)| {
        f.path = out.join(sc.sheet.0);
        f
    });
    let checked = match path_of(Role::Checked) {
        Some((p, _)) => {
            let (ds, _) = workflow::load(std::slice::from_ref(p), &opts, Some(&sheet_path))?;
            Some(crate::train::separability::check(&ds, &ds.all(), 200, 1))
        }
        None => None,
    };
    // Train.
    let mut train = workflow::train_model(&train_ds, sheet.as_ref(), &sc.train)?;
    let (holdout_path, holdout_name) = need(Role::Holdout, "holdout")?;
    let mut holdout_ds =
        workflow::load_for_model(std::slice::from_ref(holdout_path), &opts, &train.model)?;
    holdout_ds.path = out.join(holdout_name);
    train.evaluate_holdout(&holdout_ds);
    let fm = &train.model;
    // Audit and pack: the release engineer's choices, the blob pack writes.
    let noise: Vec<Option<f64>> = fm.channels.iter().map(|c| c.noise).collect();
    let others = [("holdout", &holdout_ds)];
    let done = release_step::release(&ReleaseRequest {
        apply: sc.apply,
        ..ReleaseRequest::new(fm, &train_ds, &others, &noise)
    })?;
    // Replay: the device's lines and input vectors, as `linegate replay` writes them.
    let replayed = match sc.replay {
        Role::Holdout => Replayed::Units(&holdout_ds),
        role => Replayed::File(need(role, "replayed")?.0),
    };
    let (replay, vectors, units, refused) = replay(&done.blob, fm, replayed, out, sc.prefix)?;
    // The files, in the order the user reads about them.
    let name = |n: &str| out.join(format!("{}{n}", sc.prefix));
    for (n, text, _) in &sc.logs {
        set.add(out.join(n), text.as_bytes());
    }
    set.add(out.join(sc.sheet.0), sc.sheet.1.as_bytes());
    let sweep = done.sweep.as_ref();
    let doc = crate::report::document(fm, &done.report, sweep);
    if sc.full {
        set.add(
            out.join("DATA-IS-SYNTHETIC.txt"),
            "Every log in this folder is SYNTHETIC: generated by `linegate demo` for an invented fan-module test station.\nDo not use it to judge real products.\n",
        );
        set.add(name("check-train.json"), json(&train.check));
        if let Some(c) = &checked {
            set.add(
                name(&format!("check-{}.json", Role::Checked.name())),
                json(c),
            );
        }
    }
    set.add(name("model.json"), fm.to_json());
    if sc.full {
        set.add(name("audit.json"), crate::report::json(&done.report, sweep));
    }
    set.add(name("audit.md"), doc.markdown().into_bytes());
    if sc.full {
        set.add(
            name("audit.html"),
            crate::report::html(fm, &done.report, sweep, &doc),
        );
    }
    set.add(name("model.lgmb"), done.blob.clone());
    if sc.full {
        set.add(
            name("model.hex"),
            crate::release::hex::to_hex(MODEL_REGION, &done.blob),
        );
    }
    // Drift: the drifted log and the training log against the audit's baseline.
    let drift = match (
        sc.full,
        path_of(Role::Checked),
        done.report.baseline.as_ref(),
    ) {
        (true, Some((p, n)), Some(base)) => {
            let test = |log: &Path, file: &str| field_drift(&done.blob, fm, base, log, file);
            let on_drift = test(p, n)?;
            let on_train = test(train_path, train_name)?;
            set.add(
                name("drift-report.md"),
                crate::report::drift_markdown(
                    &on_drift,
                    Some(&format!("{}drift-report-cusum.svg", sc.prefix)),
                ),
            );
            set.add(
                name("drift-report-cusum.svg"),
                crate::report::cusum_svg(&on_drift),
            );
            Some((on_drift, on_train))
        }
        _ => None,
    };
    let replayed = sc.replay.name();
    set.add(name(&format!("replay-{replayed}.txt")), replay);
    set.add(name(&format!("vectors-{replayed}.txt")), vectors);
    Ok(Outcome {
        train,
        checked,
        audit: done.report,
        sweep: done.sweep,
        replayed: units,
        refused,
        drift,
    })
}

/// `linegate drift` on `log` (named `file` in the report) at its defaults (α = 0.01, lower
/// CUSUM sums alarm), as the command runs it.
fn field_drift(
    blob: &[u8],
    fm: &crate::train::float_model::FloatModel,
    base: &crate::release::audit_baseline::Baseline,
    log: &Path,
    file: &str,
) -> Result<DriftReport, DemoError> {
    use crate::field::drift::{DriftConfig, Field, Source, drift};
    let model: crate::release::pack::DeviceModel = shared_model::blob::decode_classes(blob)
        .map_err(|e| OutputError::Io {
            path: log.into(),
            source: std::io::Error::other(e.to_string()),
        })?;
    let t = shared_model::Thresholds::of(model.model());
    let mut run = crate::field::run::FieldRun::new(
        base.plan.field_plan(),
        t,
        model.channel_count(),
        model.signal_count(),
        true,
    );
    let opts = LogOptions {
        label_optional: true,
        ..LogOptions::default()
    };
    crate::field::record::run_log(log, &opts, fm, &model, &mut Default::default(), &mut run)?;
    let cfg = DriftConfig {
        alpha: 0.01,
        two_sided: false,
    };
    let mut r = drift(base, Field::Run(&run), Source::Log, cfg);
    r.files = vec![file.to_string()];
    Ok(r)
}

/// The log a scenario replays: units already read, or a file the replay reads itself.
enum Replayed<'a> {
    /// A log read for the model.
    Units(&'a Dataset),
    /// A file read as `linegate replay` reads it (labels optional).
    File(&'a Path),
}

/// The device's lines for `log` under `blob`, its input vectors (each after the model's
/// line), the units replayed and those refused.
fn replay(
    blob: &[u8],
    fm: &crate::train::float_model::FloatModel,
    log: Replayed<'_>,
    out: &Path,
    prefix: &str,
) -> Result<(String, String, usize, usize), DemoError> {
    use crate::release::replay::{line, model_line, replay_log, vector};
    let refused = |e: shared_model::DecodeError| OutputError::Io {
        path: out.join(format!("{prefix}model.lgmb")),
        source: std::io::Error::other(e.to_string()),
    };
    let model: crate::release::pack::DeviceModel =
        shared_model::blob::decode_classes(blob).map_err(refused)?;
    let mut lines = model_line(&model, blob);
    let mut vectors = lines.clone();
    let (mut units, mut faults) = (0usize, 0usize);
    let mut each = |l: &str, v: String| {
        faults += usize::from(l.contains("FAULT"));
        units += 1;
        let _ = writeln!(lines, "{l}");
        let _ = writeln!(vectors, "{v}");
    };
    match log {
        Replayed::Units(ds) => {
            for i in 0..ds.len() {
                let raw = ds.raw_row(i);
                each(&line(i, &model, raw, &[]), vector(raw, &[]));
            }
        }
        Replayed::File(path) => replay_log(
            path,
            &LogOptions {
                label_optional: true,
                ..LogOptions::default()
            },
            fm,
            &model,
            &mut Default::default(),
            |l, raw, windows| each(l, vector(raw, windows)),
        )?,
    }
    Ok((lines, vectors, units, faults))
}

fn json<T: serde::Serialize>(v: &T) -> String {
    let mut s = serde_json::to_string_pretty(v).unwrap_or_default();
    s.push('\n');
    s
}
