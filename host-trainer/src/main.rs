//! `linegate`: the command line. Parses flags into configurations, calls the
//! library, prints, and picks the exit code: 0 success, 1 a check ran and
//! failed (not separable, audit failed, blob corrupt or not matching), 2 usage,
//! input or output error.

#![allow(clippy::result_large_err)]

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

use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{Context, Result, bail};
use clap::{Args, Parser, Subcommand};
use host_trainer::audit::{self, AuditConfig};
use host_trainer::eval::TrainerKind;
use host_trainer::float_model::FloatModel;
use host_trainer::log::LogOptions;
use host_trainer::output::OutputSet;
use host_trainer::quantise::QuantConfig;
use host_trainer::{demo, hex, pack, replay, report, workflow};

#[derive(Parser)]
#[command(
    name = "linegate",
    version,
    about = "Train, audit and pack go/no-go classifiers for microcontrollers without an FPU.",
    long_about = "Linegate turns bench logs (units × sensor channels, each judged GO or NO-GO) into a \
fixed-point linear classifier for a small microcontroller, proves that rounding cannot change the \
validated decisions, and packs a checked model blob and flash image.\n\n\
Typical flow:\n  linegate check  bench.csv --sheet channels.toml\n  linegate train  bench.csv --sheet channels.toml -o model.json\n  \
linegate audit  --model model.json --train bench.csv --holdout holdout.csv --sweep\n  \
linegate pack   --model model.json --train bench.csv --holdout holdout.csv -o model.lgb --hex 0x3F000\n  \
linegate inspect model.lgb\n\n\
Exit codes: 0 success; 1 a check ran and failed (not separable, audit failed, corrupt or mismatched blob); \
2 usage, input or output error.\n\n\
A go/no-go classifier is not by itself a safety function."
)]
struct Cli {
    /// No progress bars or summaries; errors only.
    #[arg(long, short, global = true)]
    quiet: bool,
    #[command(subcommand)]
    cmd: Cmd,
}

#[derive(Subcommand)]
enum Cmd {
    /// Decide exactly whether a bench log is linearly separable (LP), with γ*, support units and the Novikoff bound.
    #[command(
        after_help = "Example:\n  linegate check bench.csv --sheet channels.toml\n\nExit 0: separable; 1: not separable (conflicting units listed); 2: input error."
    )]
    Check {
        /// Bench log (CSV, or TSV by extension).
        log: PathBuf,
        #[command(flatten)]
        log_args: LogArgs,
        /// Channel sheet (TOML) with valid ranges, raw conversion and noise.
        #[arg(long)]
        sheet: Option<PathBuf>,
        /// Epoch cap for the perceptron run shown beside the bound.
        #[arg(long, default_value_t = 1000)]
        epochs: u32,
        /// Seed for the perceptron's shuffle.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Print JSON.
        #[arg(long)]
        json: bool,
    },
    /// Train a float model from a bench log; writes our JSON float-model file.
    #[command(
        after_help = "Example:\n  linegate train bench.csv --sheet channels.toml --trainer max-margin --holdout holdout.csv -o model.json\n  linegate train bench.csv --trainer pocket --epochs 200 --max-false-go 0 -o model.json"
    )]
    Train {
        /// Bench log.
        log: PathBuf,
        #[command(flatten)]
        log_args: LogArgs,
        /// Channel sheet (TOML).
        #[arg(long)]
        sheet: Option<PathBuf>,
        /// Trainer.
        #[arg(long, value_enum, default_value_t = TrainerKind::MaxMargin)]
        trainer: TrainerKind,
        /// Epoch cap for the perceptron family.
        #[arg(long, default_value_t = 1000)]
        epochs: u32,
        /// Seed for shuffles and folds.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Soft-margin penalty C, used when the log is not separable.
        #[arg(long, default_value_t = 10.0)]
        c: f64,
        /// Move the threshold so at most N NO-GO training units pass.
        #[arg(long, value_name = "N")]
        max_false_go: Option<usize>,
        /// Holdout log to evaluate on.
        #[arg(long)]
        holdout: Option<PathBuf>,
        /// k-fold cross-validation of every trainer (0: off).
        #[arg(long, default_value_t = 5)]
        folds: usize,
        /// Output float model (JSON).
        #[arg(long, short)]
        output: PathBuf,
        /// Overwrite existing files.
        #[arg(long)]
        force: bool,
        /// Print the outcome as JSON.
        #[arg(long)]
        json: bool,
    },
    /// Quantise and run the release audit; exit 1 if it fails.
    #[command(
        after_help = "Example:\n  linegate audit --model model.json --train bench.csv --holdout holdout.csv --sweep --report-dir audit/\n  linegate audit --model model.json --train bench.csv --weight-bits 8 --noise vibration_mg=2.5 --json"
    )]
    Audit {
        #[command(flatten)]
        release: ReleaseArgs,
        /// Also run the word-length sweep (weights 8/12/16/24/32 × inputs 8/16).
        #[arg(long)]
        sweep: bool,
        /// Write audit.md, audit.html and audit.json here.
        #[arg(long)]
        report_dir: Option<PathBuf>,
        /// Write every unit's float and fixed scores, verdicts and margins to this CSV file.
        #[arg(long, value_name = "FILE")]
        units: Option<PathBuf>,
        /// Overwrite existing report files.
        #[arg(long)]
        force: bool,
        /// Print the report as JSON.
        #[arg(long)]
        json: bool,
    },
    /// Quantise, audit, and write the model blob (and flash images) only if the audit passes.
    #[command(
        after_help = "Example:\n  linegate pack --model model.json --train bench.csv --holdout holdout.csv -o model.lgb --hex 0x3F000 --bin\n\nWith --override-audit a failing model is packed anyway; the blob records the override."
    )]
    Pack {
        #[command(flatten)]
        release: ReleaseArgs,
        /// Output blob.
        #[arg(long, short)]
        output: PathBuf,
        /// Also write an Intel HEX image placing the blob at this flash address (e.g. 0x3F000).
        #[arg(long, value_name = "ADDRESS", value_parser = parse_address)]
        hex: Option<u32>,
        /// Also write the raw image (.bin).
        #[arg(long)]
        bin: bool,
        /// Pack even if the audit fails; recorded in the blob.
        #[arg(long)]
        override_audit: bool,
        /// Overwrite existing files.
        #[arg(long)]
        force: bool,
    },
    /// Decode a blob (or an Intel HEX image of one) and print its contents, CRC status and model id.
    #[command(
        after_help = "Example:\n  linegate inspect model.lgb --model model.json --report audit.json\n\nExit 1 if the blob is corrupt or does not match the given model or report."
    )]
    Inspect {
        /// Blob (.lgb/.bin) or Intel HEX (.hex).
        blob: PathBuf,
        /// Check the blob was made from this float model.
        #[arg(long)]
        model: Option<PathBuf>,
        /// Check the blob matches this audit report (audit.json).
        #[arg(long)]
        report: Option<PathBuf>,
        /// Print JSON.
        #[arg(long)]
        json: bool,
    },
    /// Run the device kernel over a log and print the device's lines (compare with `diff`).
    #[command(
        after_help = "Example:\n  linegate replay --blob model.lgb --model model.json holdout.csv > host.txt"
    )]
    Replay {
        /// Bench log.
        log: PathBuf,
        #[command(flatten)]
        log_args: LogArgs,
        /// The blob.
        #[arg(long)]
        blob: PathBuf,
        /// The float model (its channel scaling converts physical readings to raw).
        #[arg(long)]
        model: PathBuf,
        /// Also write the raw test vectors here (one unit per line).
        #[arg(long)]
        vectors: Option<PathBuf>,
        /// Overwrite the vectors file.
        #[arg(long)]
        force: bool,
    },
    /// Write a SYNTHETIC separable bench log of any size (and its channel sheet), to try Linegate at scale.
    #[command(
        after_help = "Example:\n  linegate generate --rows 1000000 --channels 16 -o big.csv   # also writes big.toml"
    )]
    Generate {
        /// Units.
        #[arg(long, default_value_t = 10_000)]
        rows: usize,
        /// Channels (1..=32).
        #[arg(long, default_value_t = 16)]
        channels: usize,
        /// Empty gap kept around the hidden boundary (scaled units).
        #[arg(long, default_value_t = 0.02)]
        margin: f64,
        /// Seed.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Output log; the channel sheet goes beside it with extension .toml.
        #[arg(long, short)]
        output: PathBuf,
        /// Overwrite existing files.
        #[arg(long)]
        force: bool,
    },
    /// Run the whole job on built-in synthetic data (an invented fan-module test station).
    #[command(after_help = "Example:\n  linegate demo --out linegate-demo")]
    Demo {
        /// Output folder.
        #[arg(long, default_value = "linegate-demo")]
        out: PathBuf,
        /// Overwrite files from an earlier demo.
        #[arg(long)]
        force: bool,
    },
}

#[derive(Args, Clone)]
struct LogArgs {
    /// Channel columns, comma-separated (default: every column except label, unit id, timestamp and ignored).
    #[arg(long, value_delimiter = ',')]
    channels: Option<Vec<String>>,
    /// Label column (default: label, verdict, result or status).
    #[arg(long)]
    label: Option<String>,
    /// Unit-id column (default: unit_id, unit or serial, if present).
    #[arg(long)]
    unit_id: Option<String>,
    /// Timestamp column (default: timestamp, time or date, if present).
    #[arg(long)]
    timestamp: Option<String>,
    /// Columns to leave out, comma-separated.
    #[arg(long, value_delimiter = ',')]
    ignore: Vec<String>,
    /// GO tokens, comma-separated, case-insensitive (default: go,pass,ok,good,1,true).
    #[arg(long, value_delimiter = ',')]
    go_labels: Option<Vec<String>>,
    /// NO-GO tokens (default: nogo,no-go,no_go,fail,ng,bad,reject,0,false).
    #[arg(long, value_delimiter = ',')]
    nogo_labels: Option<Vec<String>>,
    /// Skip bad rows (counted and reported) instead of stopping at the first.
    #[arg(long)]
    skip_bad_rows: bool,
    /// Most units to hold in memory (4 bytes per reading each).
    #[arg(long, default_value_t = 50_000_000)]
    max_rows: usize,
}

impl LogArgs {
    fn options(&self, quiet: bool) -> LogOptions {
        let d = LogOptions::default();
        let lower = |v: &Option<Vec<String>>, def: Vec<String>| {
            v.as_ref()
                .map_or(def, |v| v.iter().map(|s| s.to_lowercase()).collect())
        };
        LogOptions {
            channels: self.channels.clone(),
            label: self.label.clone(),
            unit_id: self.unit_id.clone(),
            timestamp: self.timestamp.clone(),
            ignore: self.ignore.clone(),
            go_labels: lower(&self.go_labels, d.go_labels),
            nogo_labels: lower(&self.nogo_labels, d.nogo_labels),
            skip_bad_rows: self.skip_bad_rows,
            max_line_len: d.max_line_len,
            max_rows: self.max_rows,
            progress: !quiet && std::io::stderr().is_terminal(),
        }
    }
}

#[derive(Args, Clone)]
struct ReleaseArgs {
    /// Float model (from `linegate train`).
    #[arg(long)]
    model: PathBuf,
    /// The training log the model was trained on.
    #[arg(long)]
    train: PathBuf,
    /// A holdout log, audited too.
    #[arg(long)]
    holdout: Option<PathBuf>,
    #[command(flatten)]
    log_args: LogArgs,
    /// Weight word length in bits (2..=32).
    #[arg(long, default_value_t = 16)]
    weight_bits: u8,
    /// Scaled input word: 8 or 16 bits.
    #[arg(long, default_value_t = 16)]
    input_bits: u8,
    /// Force the accumulator width (32 or 64); default: narrowest proved safe.
    #[arg(long)]
    acc_bits: Option<u8>,
    /// Plain rounding only (no margin-preserving search).
    #[arg(long)]
    no_optimise: bool,
    /// RECHECK half-band around the threshold, in float score units.
    #[arg(long, default_value_t = 0.0)]
    recheck_band: f64,
    /// Sensor noise per channel, physical units, e.g. --noise vibration_mg=2.5 (overrides the sheet).
    #[arg(long, value_name = "CHANNEL=VALUE", value_delimiter = ',')]
    noise: Vec<String>,
    /// Smallest acceptable fixed margin, in LSB.
    #[arg(long, default_value_t = 1.0)]
    min_margin_lsb: f64,
    /// Largest acceptable number of flipped decisions.
    #[arg(long, default_value_t = 0)]
    max_flips: usize,
    /// Do not require the analytic rounding guarantee.
    #[arg(long)]
    no_require_guarantee: bool,
}

fn parse_address(s: &str) -> Result<u32, String> {
    let t = s.trim();
    let r = match t.strip_prefix("0x").or_else(|| t.strip_prefix("0X")) {
        Some(h) => u32::from_str_radix(&h.replace('_', ""), 16),
        None => t.replace('_', "").parse(),
    };
    r.map_err(|_| format!("'{s}' is not an address (use e.g. 0x3F000 or 258048)"))
}

/// An error that means "a check failed" (exit 1) rather than a usage problem (exit 2).
#[derive(Debug)]
struct CheckFailed(String);

impl std::fmt::Display for CheckFailed {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for CheckFailed {}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(&cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            let failed = e.downcast_ref::<CheckFailed>().is_some();
            let tag = if std::io::stderr().is_terminal() {
                "\x1b[31merror\x1b[0m"
            } else {
                "error"
            };
            if !(failed && cli.quiet) {
                eprintln!("{tag}: {e}");
                for cause in e.chain().skip(1) {
                    eprintln!("  caused by: {cause}");
                }
            }
            ExitCode::from(if failed { 1 } else { 2 })
        }
    }
}

/// What `audit` and `pack` work from.
struct Release {
    fm: FloatModel,
    train: host_trainer::dataset::Dataset,
    holdout: Option<host_trainer::dataset::Dataset>,
    qc: QuantConfig,
    noise: Vec<Option<f64>>,
    ac: AuditConfig,
}

impl Release {
    /// Quantises and audits: the step `audit` and `pack` share.
    fn run(&self) -> Result<(host_trainer::quantise::Quantised, audit::AuditReport)> {
        Ok(audit::release(
            &self.fm,
            &self.train,
            self.holdout.as_ref(),
            self.qc,
            &self.noise,
            self.ac,
        )?)
    }
}

fn release_inputs(r: &ReleaseArgs, quiet: bool) -> Result<Release> {
    let fm = FloatModel::read(&r.model)?;
    let opts = r.log_args.options(quiet);
    let train = workflow::load_for_model(&r.train, &opts, &fm)?;
    let holdout = r
        .holdout
        .as_ref()
        .map(|h| workflow::load_for_model(h, &opts, &fm))
        .transpose()?;
    let mut noise: Vec<Option<f64>> = fm.channels.iter().map(|c| c.noise).collect();
    for spec in &r.noise {
        let (name, value) = spec
            .split_once('=')
            .with_context(|| format!("--noise '{spec}': expected CHANNEL=VALUE"))?;
        let i = fm
            .channels
            .iter()
            .position(|c| c.name == name)
            .with_context(|| format!("--noise: no channel '{name}' in the model"))?;
        let v: f64 = value
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite() && *v >= 0.0)
            .with_context(|| format!("--noise '{spec}': value must be a non-negative number"))?;
        noise[i] = Some(v);
    }
    let qc = QuantConfig {
        input_bits: r.input_bits,
        weight_bits: r.weight_bits,
        optimise: !r.no_optimise,
        acc_bits: r.acc_bits,
        recheck_band: r.recheck_band,
    };
    let ac = AuditConfig {
        min_margin_lsb: r.min_margin_lsb,
        max_flips: r.max_flips,
        require_guarantee: !r.no_require_guarantee,
    };
    Ok(Release {
        fm,
        train,
        holdout,
        qc,
        noise,
        ac,
    })
}

fn to_json<T: serde::Serialize>(v: &T) -> String {
    serde_json::to_string_pretty(v).unwrap_or_default() + "\n"
}

fn run(cli: &Cli) -> Result<()> {
    let quiet = cli.quiet;
    match &cli.cmd {
        Cmd::Check {
            log,
            log_args,
            sheet,
            epochs,
            seed,
            json,
        } => {
            let (ds, _) = workflow::load(log, &log_args.options(quiet), sheet.as_deref())?;
            let r = host_trainer::separability::check(&ds, &ds.all(), *epochs, *seed);
            if *json {
                say_raw!("{}", to_json(&r));
            } else if !quiet {
                print_check(&r, &ds);
            }
            if !r.separable {
                return Err(CheckFailed(format!(
                    "{}: not linearly separable ({} conflicting units named above)",
                    log.display(),
                    r.conflict.len()
                ))
                .into());
            }
        }
        Cmd::Train {
            log,
            log_args,
            sheet,
            trainer,
            epochs,
            seed,
            c,
            max_false_go,
            holdout,
            folds,
            output,
            force,
            json,
        } => {
            let opts = log_args.options(quiet);
            let (ds, sheet) = workflow::load(log, &opts, sheet.as_deref())?;
            let req = workflow::TrainRequest {
                trainer: *trainer,
                epochs: *epochs,
                seed: *seed,
                c: *c,
                max_false_go: *max_false_go,
                folds: *folds,
                progress: !quiet && std::io::stderr().is_terminal(),
            };
            let mut out = workflow::train_model(&ds, sheet.as_ref().map(|(_, f)| f), &req);
            if let Some(h) = holdout {
                let hd = workflow::load_for_model(h, &opts, &out.model)?;
                out.evaluate_holdout(&hd);
            }
            let mut set = OutputSet::default();
            set.add(output, out.model.to_json());
            set.commit(*force)?;
            if *json {
                say_raw!("{}", to_json(&out));
            } else if !quiet {
                print_train(&out, output);
            }
        }
        Cmd::Audit {
            release,
            sweep,
            report_dir,
            units,
            force,
            json,
        } => {
            let rel = release_inputs(release, quiet)?;
            let (q, r) = rel.run()?;
            let Release {
                fm,
                train,
                holdout,
                qc,
                ac,
                ..
            } = rel;
            let sw = if *sweep {
                Some(audit::sweep(&fm, &train, holdout.as_ref(), qc, ac)?)
            } else {
                None
            };
            let md = report::markdown(&fm, &r, sw.as_ref());
            let mut set = OutputSet::default();
            if let Some(dir) = report_dir {
                set.add(dir.join("audit.md"), md.as_bytes());
                set.add(dir.join("audit.html"), report::html(&fm, &r, &md));
                set.add(dir.join("audit.json"), to_json(&r));
            }
            if let Some(path) = units {
                let mut sets = vec![("train", &train)];
                if let Some(h) = &holdout {
                    sets.push(("holdout", h));
                }
                set.add(path, audit::units_csv(&q, &fm, &sets));
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
        }
        Cmd::Pack {
            release,
            output,
            hex: hex_addr,
            bin,
            override_audit,
            force,
        } => {
            let rel = release_inputs(release, quiet)?;
            let (q, r) = rel.run()?;
            let fm = rel.fm;
            let mark = match (r.passed, override_audit) {
                (true, _) => shared_model::AuditMark::Passed,
                (false, true) => shared_model::AuditMark::Overridden,
                (false, false) => {
                    return Err(CheckFailed(format!("audit failed, nothing written: {} (pass --override-audit to pack anyway; the blob will record it)", r.reasons.join("; "))).into())
                }
            };
            let model = audit::mark(&q.model, mark);
            let blob = pack::blob_bytes(&model);
            let mut set = OutputSet::default();
            set.add(output, blob.clone());
            if let Some(a) = hex_addr {
                set.add(output.with_extension("hex"), hex::to_hex(*a, &blob));
            }
            if *bin {
                set.add(output.with_extension("bin"), blob.clone());
            }
            let files = set.commit(*force)?;
            if !quiet {
                say!(
                    "audit {}; model id {}; {} bytes",
                    if r.passed {
                        "passed"
                    } else {
                        "FAILED (override recorded in the blob)"
                    },
                    fm.model_id,
                    blob.len()
                );
                for f in files {
                    say!("wrote {}", f.display());
                }
            }
        }
        Cmd::Inspect {
            blob,
            model,
            report: rep,
            json,
        } => inspect(blob, model.as_deref(), rep.as_deref(), *json, quiet)?,
        Cmd::Replay {
            log,
            log_args,
            blob,
            model,
            vectors,
            force,
        } => {
            let fm = FloatModel::read(model)?;
            let bytes =
                std::fs::read(blob).with_context(|| format!("{}: cannot read", blob.display()))?;
            let m = shared_model::blob::decode(&bytes)
                .map_err(|e| anyhow::anyhow!("{}: {e}", blob.display()))?;
            // Streams: a log of any length, one line out per unit in.
            let mut vec_text = vectors.as_ref().map(|_| replay::model_line(&m));
            say_raw!("{}", replay::model_line(&m));
            let mut index = 0usize;
            let mut skipped = host_trainer::log::SkipReport::default();
            host_trainer::log::stream_units(
                log,
                &log_args.options(quiet),
                &fm.channels,
                &mut skipped,
                |u| {
                    say!("{}", replay::line(index, &m, u.raw));
                    if let Some(t) = vec_text.as_mut() {
                        let row: Vec<String> = u.raw.iter().map(|r| r.to_string()).collect();
                        t.push_str(&row.join(" "));
                        t.push('\n');
                    }
                    index += 1;
                    Ok(())
                },
            )?;
            if let (Some(v), Some(text)) = (vectors, vec_text) {
                let mut set = OutputSet::default();
                set.add(v, text);
                set.commit(*force)?;
            }
        }
        Cmd::Generate {
            rows,
            channels,
            margin,
            seed,
            output,
            force,
        } => {
            if *channels == 0 || *channels > shared_model::MAX_CHANNELS {
                bail!("--channels must be 1..={}", shared_model::MAX_CHANNELS);
            }
            let mut log = Vec::new();
            host_trainer::synth::write_log(&mut log, *rows, *channels, *margin, *seed)?;
            let mut set = OutputSet::default();
            set.add(output, log);
            set.add(
                output.with_extension("toml"),
                host_trainer::synth::sheet(*channels),
            );
            for f in set.commit(*force)? {
                if !quiet {
                    say!("wrote {}", f.display());
                }
            }
        }
        Cmd::Demo { out, force } => {
            let t0 = std::time::Instant::now();
            let s = demo::run(out, *force)?;
            if !quiet {
                print_demo(&s, out, t0.elapsed());
            }
        }
    }
    Ok(())
}

fn inspect(
    path: &Path,
    model: Option<&Path>,
    rep: Option<&Path>,
    json: bool,
    quiet: bool,
) -> Result<()> {
    let raw = std::fs::read(path).with_context(|| format!("{}: cannot read", path.display()))?;
    let bytes = if path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("hex"))
    {
        let text = String::from_utf8(raw)
            .with_context(|| format!("{}: not a text HEX file", path.display()))?;
        hex::from_hex(&text)
            .map_err(|e| CheckFailed(format!("{}: {e}", path.display())))?
            .1
    } else {
        raw
    };
    let (ins, decoded) = pack::inspect(&bytes);
    if json {
        say_raw!("{}", to_json(&ins));
    } else if !quiet {
        say!(
            "{}: {} bytes, format version {}",
            path.display(),
            ins.bytes,
            ins.version.map_or("?".into(), |v| v.to_string())
        );
        say!(
            "CRC-32: stored {}, computed {}",
            ins.crc_stored.as_deref().unwrap_or("–"),
            ins.crc_computed.as_deref().unwrap_or("–")
        );
        say!("status: {}", ins.status);
        if let Some(id) = &ins.model_id {
            say!(
                "model id: {id}\naudit: {}",
                ins.audit.as_deref().unwrap_or("?")
            );
            say!(
                "inputs Q{} ({}-bit); weights {}-bit, {} fractional bits; accumulator {} bits",
                ins.input_bits.unwrap_or(0).saturating_sub(1),
                ins.input_bits.unwrap_or(0),
                ins.weight_bits.unwrap_or(0),
                ins.weight_frac_bits.unwrap_or(0),
                ins.acc_bits.unwrap_or(0)
            );
            say!(
                "bias {}; NO-GO at score <= {}; GO at score >= {}",
                ins.bias.unwrap_or(0),
                ins.nogo_max.unwrap_or(0),
                ins.go_min.unwrap_or(0)
            );
            say!(
                "{:<18} {:>11} {:>11} {:>11} {:>11} {:>5} {:>11}",
                "channel",
                "raw_min",
                "raw_max",
                "offset",
                "multiplier",
                "shift",
                "weight"
            );
            for c in &ins.channels {
                say!(
                    "{:<18} {:>11} {:>11} {:>11} {:>11} {:>5} {:>11}",
                    c.name,
                    c.raw_min,
                    c.raw_max,
                    c.offset,
                    c.multiplier,
                    c.shift,
                    c.weight
                );
            }
        }
    }
    let m = decoded.map_err(|e| CheckFailed(format!("{}: {e}", path.display())))?;
    let id = host_trainer::float_model::lower_hex(&m.model().model_id);
    if let Some(p) = model {
        let fm = FloatModel::read(p)?;
        if fm.model_id != id {
            bail!(CheckFailed(format!(
                "blob model id {id} does not match {} ({})",
                p.display(),
                fm.model_id
            )));
        }
        if !quiet && !json {
            say!("matches float model {}", p.display());
        }
    }
    if let Some(p) = rep {
        let text =
            std::fs::read_to_string(p).with_context(|| format!("{}: cannot read", p.display()))?;
        let v: serde_json::Value =
            serde_json::from_str(&text).with_context(|| format!("{}: not JSON", p.display()))?;
        let r = v.get("audit").unwrap_or(&v);
        let same_id = r.get("model_id").and_then(|x| x.as_str()) == Some(id.as_str());
        let weights: Vec<i64> = m
            .model()
            .channels
            .iter()
            .map(|c| i64::from(c.weight))
            .collect();
        let rw: Option<Vec<i64>> = r
            .get("weights")
            .and_then(|w| serde_json::from_value(w.clone()).ok());
        let same_model = rw.as_ref() == Some(&weights)
            && r.get("bias").and_then(|b| b.as_i64()) == Some(m.model().bias);
        if !(same_id && same_model) {
            bail!(CheckFailed(format!(
                "blob does not match audit report {} (model id or integer weights differ)",
                p.display()
            )));
        }
        if !quiet && !json {
            say!("matches audit report {}", p.display());
        }
    }
    Ok(())
}

fn print_check(
    r: &host_trainer::separability::SeparabilityReport,
    ds: &host_trainer::dataset::Dataset,
) {
    say!(
        "{} units, {} channels: {}",
        r.units,
        r.channels,
        if r.separable {
            "LINEARLY SEPARABLE"
        } else {
            "NOT linearly separable"
        }
    );
    say!("decided by: {}", r.decided_by);
    if let Some(g) = r.margin {
        say!(
            "maximum margin γ* = {g:.6} (free bias; scaled units, every channel's valid range mapped to [-1, 1])"
        );
        for c in &r.margin_physical {
            say!("  along {:<22} {:>12.4} {}", c.channel, c.margin, c.unit);
        }
        say!("support units:");
        for u in &r.support {
            say!(
                "  {} ({}, line {}, α = {:.4})",
                u.unit,
                u.label,
                u.line,
                u.weight
            );
        }
    }
    say!("R = max ‖(x, 1)‖ = {:.4}", r.radius);
    match (r.novikoff_margin, r.novikoff_bound) {
        (Some(g), Some(b)) => say!(
            "Novikoff: γ = {g:.6} (constant-1 feature appended, scaled into the unit ball, unit-norm separator through the origin); bound 1/γ² = {b:.0} updates; perceptron made {} in {} epochs",
            r.perceptron_updates,
            r.perceptron_epochs
        ),
        _ => say!(
            "perceptron: {} updates in {} epochs, converged: {}",
            r.perceptron_updates,
            r.perceptron_epochs,
            r.perceptron_converged
        ),
    }
    if !r.conflict.is_empty() {
        say!("units no hyperplane can split (their convex hulls meet; weights λ):");
        for u in &r.conflict {
            say!(
                "  {} ({}, line {}, λ = {:.4})",
                u.unit,
                u.label,
                u.line,
                u.weight
            );
        }
    }
    if ds.skipped.total > 0 {
        say!(
            "skipped {} bad rows: {:?}",
            ds.skipped.total,
            ds.skipped.by_reason
        );
    }
}

fn print_train(o: &workflow::TrainOutcome, path: &Path) {
    let m = &o.model;
    say!(
        "trained {} on {} units ({} GO, {} NO-GO); separable: {}",
        m.provenance.trainer,
        m.summary.units,
        m.summary.go,
        m.summary.nogo,
        m.summary.separable
    );
    say!(
        "geometric margin {:.6}; training errors {}; threshold {:.6}",
        m.summary.geometric_margin,
        m.summary.training_errors,
        m.threshold
    );
    if let Some(s) = &m.summary.threshold_shift {
        say!(
            "--max-false-go: {} NO-GO units pass, {} GO units lost",
            s.false_go,
            s.go_lost
        );
    }
    if let Some(h) = &o.holdout {
        say!(
            "holdout: accuracy {:.4}, false GO {}, false NO-GO {}",
            h.accuracy(),
            h.false_go,
            h.false_nogo
        );
    }
    if !o.cross_validation.is_empty() {
        say!(
            "{:<12} {:>9} {:>9} {:>12}",
            "trainer",
            "accuracy",
            "false GO",
            "false NO-GO"
        );
        for r in &o.cross_validation {
            say!(
                "{:<12} {:>9.4} {:>9} {:>12}",
                r.trainer.name(),
                r.accuracy,
                r.counts.false_go,
                r.counts.false_nogo
            );
        }
    }
    say!("wrote {} (model id {})", path.display(), m.model_id);
}

fn print_demo(s: &demo::DemoSummary, out: &Path, took: std::time::Duration) {
    let c = &s.check_train;
    say!("Linegate demo: SYNTHETIC end-of-line test of a brushless fan module (invented scenario)");
    say!(
        "training log: {} units, separable: {}, γ* = {:.5}",
        c.units,
        c.separable,
        c.margin.unwrap_or(0.0)
    );
    if let Some(b) = c.novikoff_bound {
        say!(
            "  Novikoff bound {:.0} updates; classic perceptron made {}",
            b,
            s.perceptron_updates
        );
    }
    say!(
        "second-shift log: {} units, separable: {}; {} conflicting units named",
        s.check_drift.units,
        s.check_drift.separable,
        s.check_drift.conflict.len()
    );
    if let Some(h) = &s.train.holdout {
        say!(
            "max-margin model: holdout accuracy {:.4} (false GO {}, false NO-GO {})",
            h.accuracy(),
            h.false_go,
            h.false_nogo
        );
    }
    if let Some(i) = s.sweep.1 {
        let r = &s.sweep.0[i];
        say!(
            "sweep recommends {}-bit weights, {}-bit inputs ({} bytes)",
            r.weight_bits,
            r.input_bits,
            r.blob_bytes
        );
    }
    let a = &s.audit;
    say!(
        "audit {}: flips {}, guaranteed {}, min margin {} LSB > bound {:.1} LSB",
        if a.passed { "PASSED" } else { "FAILED" },
        a.flips.len(),
        a.guaranteed,
        a.optimised_min_margin_lsb
            .map_or("–".into(), |v| format!("{v:.1}")),
        a.bound.total
    );
    say!("wrote into {}:", out.display());
    for f in &s.files {
        say!("  {}", f.display());
    }
    say!("done in {:.1} s", took.as_secs_f64());
}
