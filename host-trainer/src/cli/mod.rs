//! The command line: one module per subcommand, each typed flags → a validated
//! configuration → one library call → printing. [`run`] dispatches; `main` picks the
//! exit code from the error it returns ([`CheckFailed`] is exit 1, anything else 2).

/// `println!` that ends the process quietly when the reader has gone away (e.g. `| head`),
/// with the exit status a shell gives a process killed by SIGPIPE.
macro_rules! say {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        if writeln!(std::io::stdout().lock(), $($t)*).is_err() {
            std::process::exit(141);
        }
    }};
}

/// `print!` with the same handling as [`say!`].
macro_rules! say_raw {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        if write!(std::io::stdout().lock(), $($t)*).is_err() {
            std::process::exit(141);
        }
    }};
}

mod args;
mod audit;
mod audit_classes;
mod check;
mod compare;
mod demo;
mod drift;
mod generate;
mod inspect;
mod key;
mod pack;
pub mod parts;
pub mod read_log;
mod replay;
pub mod settings;
mod sheet;
mod train;
mod train_classes;
mod values;

use anyhow::Result;
use clap::{Parser, Subcommand};

/// The command line: global flags and the subcommand.
#[derive(Parser)]
#[command(
    name = "linegate",
    version,
    about = "Train, audit and pack go/no-go classifiers for microcontrollers without an FPU.",
    long_about = "Linegate turns bench logs (units × sensor channels, each judged GO or NO-GO) into a \
fixed-point linear classifier for a small microcontroller, proves that rounding cannot change the \
validated decisions, and packs a checked model blob and flash image.\n\n\
Typical flow, with the release's settings in a project file (linegate.toml in the working folder):\n  \
linegate check\n  linegate train\n  linegate audit --sweep\n  linegate pack\n  linegate inspect model.lgmb\n\n\
The same with flags only:\n  linegate check  bench.csv --sheet channels.toml\n  linegate train  bench.csv --sheet channels.toml -o model.json\n  \
linegate audit  --model model.json --holdout holdout.csv --out-dir audit\n  \
linegate pack   --model model.json --holdout holdout.csv --audited audit/audit.json -o model.lgmb --hex 0x3F000\n\n\
A project file (TOML) holds one release's settings; each key stands for the flag of the same \
name, a flag on the command line overrides it, and every output records each setting with \
its source (flag, project file, model, default). Paths are relative to the file. Example:\n\n  [logs]\n  train = [\"logs/shift-*.csv\"]      # several files of one log: same columns\n  \
holdout = \"logs/holdout.csv\"\n  validation = [\"site-b/*.csv\"]       # each entry one log\n  \
[columns]\n  label = \"verdict\"\n  go = [\"pass\"]\n  nogo = [\"fail\"]\n  unit_id = \"serial\"\n  \
ignore = [\"operator\"]\n  [sheet]\n  path = \"channels.toml\"            # or [[sheet.channel]] entries inline\n  \
[split]\n  holdout_fraction = 0.2\n  [train]\n  trainer = \"max-margin\"\n  c = \"auto\"\n  \
false_go_target = \"1%@95%\"\n  seed = 1\n  [device]\n  weight_bits = 16\n  input_bits = 16\n  \
flash_address = \"0x3F000\"\n  [gates]\n  max_false_nogo = \"2%\"\n  noise = { vibration_mg = 2.5 }\n  \
[release]\n  key = \"release.key\"\n  [outputs]\n  model = \"model.json\"\n  audit_dir = \"audit\"\n  blob = \"model.lgmb\"\n\n\
Every key:\n\n{KEYS}\n\
Exit codes: 0 success; 1 a check ran and failed (not separable, audit failed, corrupt or mismatched blob, \
a blob that is not the audited one); 2 usage, input or output error.\n\n\
A go/no-go classifier is not by itself a safety function."
)]
pub struct Cli {
    /// No progress bars or summaries; errors only.
    #[arg(long, short, global = true)]
    pub quiet: bool,
    /// The project file holding this release's settings (default: linegate.toml in the
    /// working folder, if there is one).
    #[arg(long, global = true, value_name = "FILE")]
    pub project: Option<std::path::PathBuf>,
    /// Ignore linegate.toml in the working folder.
    #[arg(long, global = true, conflicts_with = "project")]
    pub no_project: bool,
    /// The subcommand to run.
    #[command(subcommand)]
    pub cmd: Cmd,
}

/// The subcommands.
#[derive(Subcommand)]
pub enum Cmd {
    /// Decide exactly whether a bench log is linearly separable (LP), with γ* and its support units.
    #[command(
        after_help = "Example:\n  linegate check bench.csv --sheet channels.toml\n  linegate check export.parquet --json\n  linegate check bench.csv --novikoff          # also Novikoff's γ, bound and a perceptron run\n\nComputes: the verdict, certified (an LP certificate of overlap, or a separator checked on every unit); the maximum margin γ* with its support units, in scaled and physical units; R. With --novikoff also Novikoff's γ and bound 1/γ² (a second solve, through the origin) and a classic perceptron run beside the bound; a converged perceptron then proves separability first and the two solves run side by side. The log is not hashed: check records no provenance.\n\nExit codes: 0 separable; 1 not separable (conflicting units listed); 2 usage, input or output error."
    )]
    Check(check::CheckArgs),
    /// Train a float model from a bench log; writes our JSON float-model file.
    #[command(
        after_help = "Example:\n  linegate train bench.csv --sheet channels.toml --holdout holdout.csv -o model.json   # soft margin, C and operating point chosen\n  linegate train bench.csv --false-go-target 1%@95% -o model.json      # threshold for a false-GO rate shown at 95 %\n  linegate train bench.csv --c 10 --recheck-budget 2% -o model.json    # C given; RECHECK at most 2 % of held-out units\n  linegate train bench.csv --trainer hard-margin -o model.json         # the exact largest gap (separable logs only)\n  linegate train bench.csv --trainer pocket --epochs 200 --max-false-go 0 -o model.json\n  linegate train export.csv --holdout-fraction 0.2 -o model.json        # seeded, stratified\n  linegate train bench.csv --holdout-after 2026-11-01 -o model.json     # later units held out\n\nComputes: the separability verdict (recorded in the model; `hard-margin` refuses a log that is not separable), C for max-margin by repeated stratified folds over --c-grid (the costs of every C printed and kept), the chosen trainer on every unit, k-fold cross-validation (--folds, --cv-trainers), the operating point (threshold and RECHECK band) from the held-out scores, the holdout. Novikoff's figures are left to `linegate check --novikoff`.\n\nExit codes: 0 model written; 2 usage, input or output error (nothing written), a model with no direction, hard-margin on a log that is not separable, or a false-GO target the held-out units cannot show."
    )]
    Train(train::TrainArgs),
    /// Quantise and run the release audit; exit 1 if it fails.
    #[command(
        after_help = "Example:\n  linegate audit --model model.json --train bench.csv --holdout holdout.csv --sweep --out-dir audit/\n  linegate audit --model model.json --train bench.csv --weight-bits 8 --noise vibration_mg=2.5 --json\n\nComputes: the quantisation (a ±1 LSB search on the training log's tightest units for the most margin over the rounding bound), one pass of the device kernel over every unit of every log, the gates. --sweep repeats quantisation and pass for each of its 10 formats.\n\nExit codes: 0 every gate passed; 1 the audit ran and a gate failed; 2 usage, input or output error."
    )]
    Audit(audit::AuditArgs),
    /// Quantise, audit, and write the model blob (and flash images) only if the audit passes.
    #[command(
        after_help = "Example:\n  linegate pack --model model.json --train bench.csv --holdout holdout.csv -o model.lgmb --hex 0x3F000 --bin\n\nWith --override-audit a failing model is packed anyway; the blob records the override.\n\nExit codes: 0 blob written; 1 the audit failed (nothing written); 2 usage, input or output error."
    )]
    Pack(pack::PackArgs),
    /// Decode a blob (or an Intel HEX image of one) and print its contents, CRC status and model id.
    #[command(
        after_help = "Example:\n  linegate inspect model.lgmb --model model.json --report audit.json\n\nExit codes: 0 the blob decodes and matches what was given; 1 corrupt, or it does not match the model, report or key; 2 usage or input error."
    )]
    Inspect(inspect::InspectArgs),
    /// Run the device kernel over a log: the device's lines, with unit ids and timestamps, or as CSV or JSON.
    #[command(
        after_help = "Example:\n  linegate replay --blob model.lgmb --model model.json field.csv                      # text: device line # unit=… time=… line=…\n  linegate replay --blob model.lgmb --model model.json holdout.csv --form device > host.txt   # diff with the device's serial log\n  linegate replay --blob model.lgmb --model model.json 'field/day-*.csv' --form csv > scored.csv\n  linegate replay --blob model.lgmb --model model.json field.csv --form json            # JSON Lines\n\nExit codes: 0 every unit replayed (FAULT units included: they are device lines); 1 the blob is corrupt or does not match; 2 usage, input or output error."
    )]
    Replay(replay::ReplayArgs),
    /// Compare two releases on the same field logs: the units whose verdict changes, counts with bounds, margin shifts, a gate.
    #[command(
        after_help = "Example:\n  linegate compare field-*.csv --model model.json --blob model.lgmb --against model-v2.json --against-blob model-v2.lgmb --changes changes.csv --report change.md\n  linegate compare field.csv --model model.json --against retrained.json     # no blobs: both quantised plainly\n  linegate compare field.csv --model a.json --against b.json --allow-nogo-to-go 2\n\nA release is a float model with its blob (--model/--blob for A, the one in use; --against/--against-blob for B, the candidate), or a float model alone, then quantised plainly at --input-bits/--weight-bits as `linegate values` does. Each reads the log as its model says; both must read the same units.\n\nComputes, for every unit: both outcomes (GO, NO-GO, RECHECK, FAULT) and scores. Lists the units whose outcome changes (file, line, unit id, both scores), counts each transition (GO→NO-GO, NO-GO→GO, into or out of RECHECK or FAULT) with exact Clopper–Pearson bounds on its rate among all units, and the margin shift B − A (min, median, max) in float-score units: each release's score divided by its quantisation scale, minus its float model's threshold (both models have max |weight| = 1 over inputs scaled to [−1, 1]). --report writes a section a reviewer signs: the model, blob and key ids, the logs' SHA-256, the counts, every change, the gate's verdict, and lines for Reviewed by / Date / Decision. The output files are written all or nothing.\n\nExit codes: 0 the gate passed (RECHECK→GO changes are named, not gated); 1 NO-GO→GO changes (FAULT→GO included: the device shows a FAULT as NO-GO) beyond those allowed (--allow-nogo-to-go; the files are written); 2 usage, input or output error (a blob not of its model included)."
    )]
    Compare(compare::CompareArgs),
    /// List each unit's channel values as the device computes them: physical, raw, scaled input, score.
    #[command(
        after_help = "Example:\n  linegate values --model model.json --blob model.lgmb holdout.csv --unit FAN-C00012\n  linegate values --model model.json --blob model.lgmb holdout.csv --line 14 --line 15\n  linegate values --model signal-model.json signal-field.csv --limit 3 --csv > values.csv\n  linegate values --model model.json holdout.csv --json       # no blob: the model quantised plainly\n\nComputes, per unit of the log (read as replay reads it): for each channel the physical value (zero + lsb·raw), the raw integer (a reading in counts; a feature of a signal log: the device's integer feature), the kernel's scaled input word; then the integer score and the unit's replay line (GO, NO-GO, RECHECK or FAULT, the same words). A refused reading or window shows as FAULT ch<n> or FAULT signal<k> in its channel's place.\n\nExit codes: 0 listed; 1 the blob is corrupt or not one the model produces; 2 usage, input or output error (an id or line no unit has is named; nothing is printed)."
    )]
    Values(values::ValuesArgs),
    /// Write a starting channel sheet from a log: each channel's observed range, as train uses it, to confirm.
    #[command(
        after_help = "Example:\n  linegate sheet bench.csv -o channels.toml\n  linegate sheet export.csv --ignore operator --label verdict -o channels.toml --force\n\nWrites one [[channel]] per channel column (the columns train would use with the same flags): the observed range widened by half its span on each side and a decimal lsb of at least 20,000 counts over it (what train uses without a sheet, so training with the sheet as written gives the same model ranges), unit empty, and `confirmed = false` with a comment. Put in each sensor's real range and set `confirmed = true`; train and check warn while entries are unconfirmed. A column whose name is longer than the device keeps (24 bytes) gets a suggested `name` and is read by `column`. The file is written whole or not at all, and an existing one only with --force.\n\nExit codes: 0 sheet written; 2 usage, input or output error (nothing written)."
    )]
    Sheet(sheet::SheetArgs),
    /// Write a SYNTHETIC separable bench log of any size (and its channel sheet), to try Linegate at scale.
    #[command(
        after_help = "Example:\n  linegate generate --rows 1000000 --channels 16 -o big.csv   # also writes big.toml\n  linegate generate --rows 1000 -o small.tsv                 # tab-separated, by extension\n  linegate generate --rows 1000000 -o big.parquet            # Parquet, by extension\n\nExit codes: 0 written; 2 usage or output error."
    )]
    Generate(generate::GenerateArgs),
    /// Run the whole job on built-in synthetic data (an invented fan-module test station).
    #[command(
        after_help = "Example:\n  linegate demo --out-dir linegate-demo\n\nExit codes: 0 demo written; 2 output error (nothing half-written)."
    )]
    Demo(demo::DemoArgs),
    /// Test a field log (or the device's lines or field record) for drift against the release audit's baseline; exit 1 on an alarm.
    #[command(
        after_help = "Example:\n  linegate drift field.csv --audit audit/audit.json --model model.json --blob model.lgmb --report drift.md\n  linegate drift --lines device.txt --audit audit/audit.json --json\n  linegate drift --record field.lgfr --audit audit/audit.json\n  linegate drift field.csv --audit audit/audit.json --model model.json --blob model.lgmb --record-out host.lgfr\n  linegate drift --audit audit/audit.json --plan              # the device plan, for firmware\n\nComputes, against the audit's baseline (its held-out log's scores, counts and channel figures): each channel's mean shift in units of its declared noise and of its allowed drift (alarm when the shift less z standard errors exceeds the budget; z Bonferroni over the channels at --alpha); the score distribution's two-sample Kolmogorov-Smirnov D and asymptotic p (Smirnov 1939; alarm at p < --alpha; on a record D over the bin edges, a lower bound); the RECHECK and FAULT rates with exact Clopper-Pearson intervals at 1 - alpha (alarm when the field's lower end exceeds the baseline's upper end); the tabular CUSUM of each side's margins, k = sigma/2, h = 5 sigma (Page 1954; Montgomery, Introduction to Statistical Quality Control, 9.1), stepped by the device's own field statistics (alarm when margins shrinking pass h; --two-sided: growing too).\n\nExit codes: 0 in control; 1 an alarm; 2 usage, input or output error (a blob that is not the audited one, a field with no unit, an audit.json without a baseline: run the audit again)."
    )]
    Drift(drift::DriftArgs),
    /// Create the owner's release key pair, to sign model blobs that devices then require.
    Key(key::KeyArgs),
}

/// An error that means "a check failed" (exit 1) rather than a usage problem (exit 2).
#[derive(Debug)]
pub struct CheckFailed(pub String);

impl std::fmt::Display for CheckFailed {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for CheckFailed {}

/// The blob `bytes` (read from `blob`) decoded for the float model `fm` (read from
/// `model`): a damaged blob, or one another model packed, fails the check (exit 1).
/// Reads the blob file at `blob` (bounded as an image) and checks it is a blob of `fm`
/// ([`blob_of_model`]): its bytes and the model it holds.
fn read_blob_of_model(
    fm: &crate::train::float_model::FloatModel,
    blob: &std::path::Path,
    model: &std::path::Path,
) -> Result<(Vec<u8>, crate::release::pack::DeviceModel)> {
    let bytes = crate::input::read_bounded(blob, "model blob", crate::input::MAX_IMAGE_FILE)?;
    let m = blob_of_model(fm, &bytes, blob, model)?;
    Ok((bytes, m))
}

fn blob_of_model(
    fm: &crate::train::float_model::FloatModel,
    bytes: &[u8],
    blob: &std::path::Path,
    model: &std::path::Path,
) -> Result<crate::release::pack::DeviceModel> {
    use crate::release::matching::{BlobMismatch, decode_from};
    decode_from(fm, bytes).map_err(|e| match e {
        BlobMismatch::Decode(e) => anyhow::Error::new(CheckFailed(format!("{}: {e}", blob.display()))),
        BlobMismatch::Mismatch(e) => anyhow::Error::new(CheckFailed(format!(
            "{}: not a blob of the float model {}: {e}; give the float model the blob was packed from",
            blob.display(),
            model.display()
        ))),
    })
}

/// A log of several files named as `Dataset::name` names it: the first, and how many more.
fn files_name(files: &[std::path::PathBuf]) -> std::path::PathBuf {
    files.first().map_or_else(std::path::PathBuf::new, |first| {
        crate::ingest::dataset::log_name(first, files.len())
    })
}

/// Says on stderr how many rows of `path` were skipped as unreadable (`--skip-bad-rows`),
/// by reason: a skipped row is a unit the report does not show, so it is never silent.
fn warn_skipped(path: &std::path::Path, skipped: &crate::ingest::SkipReport) {
    if skipped.total > 0 {
        let reasons: Vec<String> = skipped
            .by_reason
            .iter()
            .map(|(r, n)| format!("{n} {r}"))
            .collect();
        eprintln!(
            "warning: {}: skipped {} that could not be read ({}); first: {}",
            path.display(),
            skipped.counted(),
            reasons.join(", "),
            skipped.examples.first().map_or("", String::as_str)
        );
    }
    if skipped.empty_rows > 0 || skipped.empty_columns > 0 {
        eprintln!(
            "note: {}: left out {} empty rows and {} unnamed empty columns at the header's end (as spreadsheets export them)",
            path.display(),
            skipped.empty_rows,
            skipped.empty_columns
        );
    }
}

/// Says on stderr where a channel sheet and a log disagree: a log channel the sheet does not
/// declare gets its observed range (so the device's range check is the data's, not a
/// declared one), and a sheet channel the log does not have is not used.
fn warn_sheet(
    log: &std::path::Path,
    ds: &crate::ingest::dataset::Dataset,
    sheet: Option<&(
        crate::ingest::sheet::ChannelSheet,
        crate::train::float_model::InputFile,
    )>,
) {
    use crate::ingest::sheet_findings::{SheetFinding, sheet_findings};
    let Some((sheet, file)) = sheet else { return };
    for finding in sheet_findings(sheet, ds) {
        match finding {
            SheetFinding::Unconfirmed { count, of, first } => eprintln!(
                "warning: {}: {count} of {of} channel entries are still to be confirmed (`confirmed = false`: observed ranges, not the sensors'), first '{}'; check each range and set `confirmed = true`",
                file.path.display(),
                shown(&first)
            ),
            SheetFinding::Undeclared { channel, min, max } => eprintln!(
                "warning: {}: channel '{}' of {} is not declared there; its observed range [{min}, {max}] is the device's valid range",
                file.path.display(),
                channel.escape_debug(),
                log.display(),
            ),
            SheetFinding::Unused { column } => eprintln!(
                "warning: {}: channel '{}' is not a channel of {}; it is not used",
                file.path.display(),
                column.escape_debug(),
                log.display()
            ),
        }
    }
}

/// The files of one log: as given, glob patterns expanded; none is an error naming the
/// flag and the project key that give them.
fn log_files(given: &[std::path::PathBuf], how: &str) -> Result<Vec<std::path::PathBuf>> {
    if given.is_empty() {
        anyhow::bail!("no log given: {how}");
    }
    Ok(crate::input::expand_files(given)?)
}

/// Text from a file made safe for a terminal: control characters (an escape sequence in a
/// cell or a column name could retitle or clear the screen) are shown escaped, `\u{1b}`.
pub fn shown(text: &str) -> String {
    if !text.chars().any(char::is_control) {
        return text.to_string();
    }
    text.chars()
        .map(|c| {
            if c.is_control() {
                c.escape_debug().to_string()
            } else {
                c.to_string()
            }
        })
        .collect()
}

/// Pretty JSON with a final line feed, as every `--json` prints.
fn to_json<T: serde::Serialize>(v: &T) -> String {
    serde_json::to_string_pretty(v).unwrap_or_default() + "\n"
}

/// Runs the parsed command line.
///
/// # Errors
/// [`CheckFailed`] when a check ran and failed; any other error for usage, input or output.
pub fn run(cli: &Cli, settings: Vec<crate::project::Setting>) -> Result<()> {
    let quiet = cli.quiet;
    if !quiet {
        crate::progress::install(|l| eprintln!("{l}"));
    }
    settings::announce(&settings, quiet);
    match &cli.cmd {
        Cmd::Check(a) => a.run(quiet),
        Cmd::Train(a) => a.run(quiet, settings),
        Cmd::Audit(a) => a.run(quiet, settings),
        Cmd::Pack(a) => a.run(quiet, settings),
        Cmd::Inspect(a) => a.run(quiet),
        Cmd::Replay(a) => a.run(quiet, settings),
        Cmd::Values(a) => a.run(quiet, settings),
        Cmd::Compare(a) => a.run(quiet, settings),
        Cmd::Sheet(a) => a.run(quiet),
        Cmd::Generate(a) => a.run(quiet),
        Cmd::Demo(a) => a.run(quiet),
        Cmd::Drift(a) => a.run(quiet, settings),
        Cmd::Key(a) => a.run(quiet),
    }
}
