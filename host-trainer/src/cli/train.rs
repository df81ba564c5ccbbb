//! `linegate train`: a float model from a bench log, with holdout and cross-validation.

use crate::confidence::rate_text;
use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use anyhow::Result;
use clap::Args;

use super::args::LogArgs;
use super::to_json;
use crate::output::OutputSet;
use crate::release::gates::Limit;
use crate::release::point_record::HeldOutRates;
use crate::train::c_choice::{self, CPolicy};
use crate::train::eval::TrainerKind;
use crate::train::float_model::HoldoutSplit;
use crate::train::operating_point::Target;
use crate::train::svm::ClassWeight;
use crate::workflow::{self, CvTrainers};

/// Flags of `linegate train`.
#[derive(Args)]
pub struct TrainArgs {
    /// Bench log: delimited text (CSV, TSV, semicolon…) or Parquet; several files (or a
    /// quoted glob pattern) are one log of the same columns, each file hashed on its own.
    /// Default: `[logs] train` of the project file.
    #[arg(value_name = "LOG")]
    pub log: Vec<PathBuf>,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// Channel sheet (TOML).
    #[arg(long)]
    pub sheet: Option<PathBuf>,
    /// Trainer. max-margin: the soft margin (hinge loss, penalty C) on every log, trained on
    /// each channel's spread over the training units; hard-margin: the exact largest gap,
    /// only for a separable log (it fits every unit, noise included); perceptron, averaged,
    /// pocket: the perceptron family.
    #[arg(long, value_enum, default_value_t = TrainerKind::MaxMargin)]
    pub trainer: TrainerKind,
    /// Epoch cap for the perceptron family.
    #[arg(long, default_value_t = 1000)]
    pub epochs: u32,
    /// Seed for shuffles and folds.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// The soft margin's penalty C: `auto` chooses it by stratified, seeded cross-validation
    /// (--folds, --seed) over --c-grid, on the cost --false-go-weight × false GO + false
    /// NO-GO of the held-out units (of equal costs the largest C); a number fixes it. Without
    /// folds, auto means C = 1. The choice and its reason are printed and kept in the model.
    #[arg(long, value_name = "auto|C", default_value = "auto", value_parser = c_choice::parse_policy)]
    pub c: CPolicy,
    /// The values of C that `--c auto` tries (standard-score units; each channel is trained
    /// on its spread over the training units).
    #[arg(
        long,
        value_name = "C,C,…",
        default_value = "0.001,0.01,0.1,1,10,100,1000"
    )]
    pub c_grid: String,
    /// What one false GO (a NO-GO unit passed) costs against one false NO-GO (a GO unit
    /// turned away), in the choice of C and of the operating point.
    #[arg(long, value_name = "W", default_value_t = c_choice::DEFAULT_FALSE_GO_WEIGHT)]
    pub false_go_weight: f64,
    /// Multipliers of C for GO and NO-GO units (`GO,NOGO`, e.g. 1,3 makes a NO-GO unit inside
    /// the margin cost three times a GO one), or `balanced` (each class weighs
    /// units ÷ (2 × its units)). Max-margin only.
    #[arg(long, value_name = "GO,NOGO|balanced", default_value = "1,1")]
    pub class_weight: String,
    /// The operating point: the threshold and RECHECK band chosen on held-out scores
    /// (out-of-fold units of cross-validation, else the holdout split) for the least
    /// --false-go-weight × false GO + false NO-GO with RECHECK at most this share of units.
    #[arg(long, value_name = "SHARE", default_value = "5%", value_parser = parse_share, conflicts_with_all = ["false_go_target", "no_operating_point", "max_false_go"])]
    pub recheck_budget: Option<f64>,
    /// The operating point instead meets a false-GO target on the held-out units, e.g. 1%@95%
    /// (the exact upper bound at 95 % confidence at most 1 %), with the fewest GO units lost
    /// and then the fewest RECHECK; refused, naming the units needed, if the held-out NO-GO
    /// units are too few to show it.
    #[arg(long, value_name = "RATE@CONF", conflicts_with_all = ["no_operating_point", "max_false_go"])]
    pub false_go_target: Option<Limit>,
    /// No operating point: threshold 0 and no RECHECK band.
    #[arg(long)]
    pub no_operating_point: bool,
    /// Move the threshold so at most N NO-GO training units pass (training units, not held
    /// out; replaces the operating point).
    #[arg(long, value_name = "N")]
    pub max_false_go: Option<usize>,
    /// Holdout log to evaluate on (repeat the flag, or a quoted glob pattern, for a log of
    /// several files).
    #[arg(long, value_name = "LOG", conflicts_with_all = ["holdout_fraction", "holdout_after"])]
    pub holdout: Vec<PathBuf>,
    /// Hold out this fraction of each class of the training log (seeded by --seed), train on
    /// the rest and evaluate on it. The split is recorded in the model's provenance.
    #[arg(long, value_name = "F", value_parser = parse_fraction, conflicts_with = "holdout_after")]
    pub holdout_fraction: Option<f64>,
    /// Hold out the units whose timestamp comes after T (the timestamp column: timestamp,
    /// time or date, or --timestamp), train on the earlier ones and evaluate on the later.
    /// Numbers compare as numbers (epoch seconds), anything else as text, which orders ISO
    /// 8601 times of one format (2026-11-30T14:05:00).
    #[arg(long, value_name = "T")]
    pub holdout_after: Option<String>,
    /// k-fold cross-validation (0: off). Each fold trains on the other k − 1 folds, so it
    /// costs about k trainings per trainer validated (see --cv-trainers).
    #[arg(long, default_value_t = 5)]
    pub folds: usize,
    /// Which trainers cross-validation compares. auto: every trainer on logs of up to
    /// 100000 units, only the chosen trainer above that, so that on large logs `train` costs
    /// about (1 + k/cores) trainings rather than 4·k; all: every trainer; chosen: only --trainer.
    #[arg(long, value_enum, default_value_t = CvTrainers::Auto)]
    pub cv_trainers: CvTrainers,
    /// Also write the folds that chose C (CSV: repeat, fold, line, unit, label), so that the
    /// choice can be checked with another tool on the same folds.
    #[arg(long, value_name = "FILE")]
    pub cv_output: Option<PathBuf>,
    /// Output float model (JSON). Default: `[outputs] model` of the project file.
    #[arg(long, short)]
    pub output: Option<PathBuf>,
    /// Overwrite existing files.
    #[arg(long)]
    pub force: bool,
    /// Print the outcome as JSON.
    #[arg(long)]
    pub json: bool,
    /// How a model of classes (--class) is trained. one-vs-rest: one row per class, each
    /// class against the rest by --trainer; joint: every row at once by the multi-class
    /// maximum margin (Crammer–Singer, penalty --c, trained on standard scores).
    /// Default: one-vs-rest. Only with --class.
    #[arg(long, value_enum, value_name = "one-vs-rest|joint")]
    pub class_rule: Option<crate::train::class_rows::ClassRule>,
}

impl TrainArgs {
    /// Runs `linegate train`.
    pub fn run(&self, quiet: bool, settings: Vec<crate::project::Setting>) -> Result<()> {
        let Self {
            log,
            log_args,
            sheet,
            trainer,
            epochs,
            seed,
            c,
            c_grid,
            false_go_weight,
            class_weight,
            recheck_budget,
            false_go_target,
            no_operating_point,
            max_false_go,
            holdout,
            holdout_fraction,
            holdout_after,
            folds,
            cv_trainers,
            cv_output,
            output,
            force,
            json,
            class_rule,
        } = self;
        let output = super::settings::required(output, "-o/--output", "[outputs] model")?;
        let files = super::log_files(
            log,
            "name the bench log (or several files of it), or set [logs] train in the project file",
        )?;
        let log = &files[0];
        let mut opts = log_args.options(quiet);
        opts.keep_times = holdout_after.is_some();
        opts.classes = log_args.declared_classes()?;
        if opts.classes.is_none() && class_rule.is_some() {
            anyhow::bail!(
                "--class-rule trains a model of classes: declare the classes with --class NAME=TOKEN[,TOKEN…] (one per class)"
            );
        }
        if opts.classes.is_some() {
            for (given, flag) in [
                (max_false_go.is_some(), "--max-false-go"),
                (cv_output.is_some(), "--cv-output"),
                (class_weight.trim() != "1,1", "--class-weight"),
            ] {
                if given {
                    anyhow::bail!(
                        "{flag} applies to a model of GO and NO-GO; a model of classes (--class) places its gaps by --false-go-target or --recheck-budget"
                    );
                }
            }
        }
        let (full, sheet) = workflow::load(&files, &opts, sheet.as_deref())?;
        // A holdout taken out of the training log: train on the rest, evaluate on it.
        let split = HoldoutSplit::asked(*holdout_fraction, *seed, holdout_after.as_deref());
        let (ds, held, holdout_split) = match split {
            Some(sp) => {
                let (train_idx, hold_idx) = sp
                    .units(&full)
                    .map_err(|m| anyhow::anyhow!("{}: --holdout-after: {m}", log.display()))?;
                if hold_idx.is_empty() || train_idx.is_empty() {
                    anyhow::bail!(
                        "{}: the holdout split leaves {} units to train on and {} to hold out; both need some",
                        log.display(),
                        train_idx.len(),
                        hold_idx.len()
                    );
                }
                let record = sp.made(&full, &train_idx, &hold_idx);
                let held = full.subset(&hold_idx);
                (full.subset(&train_idx), Some(held), Some(record))
            }
            None => (full, None, None),
        };
        if !quiet {
            super::warn_skipped(&ds.name(), &ds.skipped);
            super::warn_sheet(log, &ds, sheet.as_ref());
            warn_observed(&ds, sheet.is_some());
        }
        if !false_go_weight.is_finite() || *false_go_weight <= 0.0 {
            anyhow::bail!("--false-go-weight {false_go_weight}: give a positive number (e.g. 5)");
        }
        let c = match c {
            CPolicy::Search(_) => CPolicy::Search(
                c_choice::parse_grid(c_grid).map_err(|e| anyhow::anyhow!("--c-grid {e}"))?,
            ),
            fixed => fixed.clone(),
        };
        if opts.classes.is_some() {
            let run = super::train_classes::ClassRun {
                files: &files,
                holdout,
                sheet_path: self.sheet.as_deref(),
                rule: class_rule.unwrap_or(crate::train::class_rows::ClassRule::OneVsRest),
                trainer: *trainer,
                epochs: *epochs,
                seed: *seed,
                c,
                false_go_weight: *false_go_weight,
                recheck_budget: *recheck_budget,
                false_go_target: *false_go_target,
                no_operating_point: *no_operating_point,
                folds: *folds,
                output,
                force: *force,
                json: *json,
            };
            return run.run(quiet, &opts, ds, held, holdout_split, sheet, settings);
        }
        let target = match (false_go_target, max_false_go, no_operating_point) {
            (_, Some(_), _) | (_, _, true) => None,
            (Some(Limit::Upper { rate, confidence }), _, _) => Some(Target::FalseGo {
                rate: *rate,
                confidence: *confidence,
            }),
            (Some(other), _, _) => anyhow::bail!(
                "--false-go-target {other}: give a rate at a confidence level, e.g. 1%@95%"
            ),
            (None, None, false) => Some(Target::RecheckBudget {
                share: recheck_budget
                    .unwrap_or(crate::train::operating_point::DEFAULT_RECHECK_BUDGET),
                false_go_weight: *false_go_weight,
            }),
        };
        let req = workflow::TrainRequest {
            trainer: *trainer,
            epochs: *epochs,
            seed: *seed,
            c,
            class_weight: parse_class_weight(class_weight, &ds)?,
            false_go_weight: *false_go_weight,
            target,
            max_false_go: *max_false_go,
            folds: *folds,
            cv_trainers: *cv_trainers,
            point_holdout: held.as_ref(),
            holdout_split,
            read_with: Some((&opts).into()),
            settings,
            progress: !quiet && std::io::stderr().is_terminal(),
            figures: crate::train::separability::Figures::VERDICT,
        };
        let mut out = workflow::train_model(&ds, sheet.as_ref().map(|(_, f)| f), &req)?;
        if !quiet {
            for n in &out.notes {
                eprintln!("note: {n}");
            }
        }
        if let Some(hd) = &held {
            out.evaluate_holdout(hd);
        }
        let holdout_files = if holdout.is_empty() {
            Vec::new()
        } else {
            crate::input::expand_files(holdout)?
        };
        if !holdout_files.is_empty() {
            let hd = workflow::load_for_model(&holdout_files, &opts, &out.model)?;
            if !quiet {
                super::warn_skipped(&hd.name(), &hd.skipped);
            }
            out.evaluate_holdout(&hd);
        }
        let mut set = OutputSet::default();
        for f in &files {
            set.input("bench log", f);
        }
        if let Some(s) = &self.sheet {
            set.input("channel sheet (--sheet)", s);
        }
        for h in &holdout_files {
            set.input("holdout log (--holdout)", h);
        }
        set.add_as("float model (-o)", output, out.model.to_json());
        if let Some(p) = cv_output {
            let Some(choice) = &out.model.provenance.c_choice else {
                anyhow::bail!(
                    "--cv-output: no folds chose C here (it needs --trainer max-margin, --c auto and --folds 2 or more)"
                );
            };
            set.add_as("folds (--cv-output)", p, c_choice::fold_table(&ds, choice));
        }
        set.commit(*force)?;
        if *json {
            say_raw!("{}", to_json(&out));
        } else if !quiet {
            print_train(&out, output);
        }
        Ok(())
    }
}

/// Says on stderr which channels had no declared range: their valid range is the training
/// units' observed one widened by half its span, so a later unit beyond it is a FAULT (the
/// device answers NO-GO), and its lsb was chosen from that range.
fn warn_observed(ds: &crate::ingest::dataset::Dataset, sheet: bool) {
    let observed: Vec<&str> = ds
        .scales
        .iter()
        .filter(|c| c.source.is_none())
        .map(|c| c.name.as_str())
        .collect();
    if observed.is_empty() || sheet {
        // With a sheet, `warn_sheet` names each undeclared channel.
        return;
    }
    eprintln!(
        "note: no channel sheet: the valid range of all {} channels is the one observed in the training units, widened by half its span on each side, and each lsb is chosen from it; a later unit with a reading outside that range is a FAULT (the device answers NO-GO). Declare the ranges your sensors really have in a sheet (`linegate sheet` writes one to start from) and train with --sheet",
        observed.len()
    );
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
    if let Some(ch) = &m.provenance.c_choice {
        say!(
            "{:>10} {:>9} {:>12} {:>9}",
            "C",
            "false GO",
            "false NO-GO",
            "cost"
        );
        for r in &ch.rows {
            say!(
                "{:>10} {:>9} {:>12} {:>9}{}",
                r.c,
                r.false_go,
                r.false_nogo,
                r.cost,
                if r.c == ch.chosen { "  ← chosen" } else { "" }
            );
        }
        say!("{}", ch.reason);
    } else if let Some(c) = m.provenance.c {
        say!("C = {c}");
    }
    if let Some(op) = &m.operating_point {
        let c = &op.counts;
        let rates = HeldOutRates::new(c, op);
        say!(
            "operating point: threshold {:.6}, RECHECK band ±{:.6} (model score units), from {}",
            op.threshold,
            op.band,
            op.source
        );
        say!(
            "  on those units: false GO {}; false NO-GO {}; RECHECK {} ({} GO, {} NO-GO)",
            rate_text(&rates.false_go, "NO-GO units"),
            rate_text(&rates.false_nogo, "GO units"),
            rate_text(&rates.recheck, "units"),
            c.recheck_go,
            c.recheck_nogo
        );
    }
    if let Some(s) = &m.summary.threshold_shift {
        say!(
            "--max-false-go: {} NO-GO units pass, {} GO units lost",
            s.false_go,
            s.go_lost
        );
    }
    if let Some(h) = &o.holdout {
        let (fg, fng) = h.rates();
        say!(
            "holdout: accuracy {:.4}; false GO {}; false NO-GO {}; FAULT {} (a reading or window the device refuses: it shows NO-GO)",
            h.accuracy(),
            rate_text(&fg, "NO-GO units"),
            rate_text(&fng, "GO units"),
            h.faults
        );
    }
    if !o.cross_validation.is_empty() {
        say!(
            "cross-validation (each unit decided by a model that did not train on it, threshold 0):"
        );
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
        // The pooled held-out counts as rates, each with its exact bounds.
        for r in &o.cross_validation {
            let (fg, fng) = r.counts.rates();
            say!(
                "{:<12} false GO {}; false NO-GO {}",
                r.trainer.name(),
                rate_text(&fg, "NO-GO units"),
                rate_text(&fng, "GO units")
            );
        }
    }
    say!("wrote {} (model id {})", path.display(), m.model_id);
}

/// `--recheck-budget`'s value: a share such as 3% or 0.03, from 0 to 1.
fn parse_share(s: &str) -> Result<f64, String> {
    let t = s.trim();
    let v = match t.strip_suffix('%') {
        Some(p) => p.trim().parse::<f64>().map(|v| v / 100.0),
        None => t.parse::<f64>(),
    };
    match v {
        Ok(v) if (0.0..=1.0).contains(&v) => Ok(v),
        _ => Err(format!(
            "'{s}' is not a share between 0 and 1 (e.g. 3% or 0.03)"
        )),
    }
}

/// `--class-weight`: `GO,NOGO` multipliers, or `balanced` from the log's class counts.
fn parse_class_weight(s: &str, ds: &crate::ingest::dataset::Dataset) -> Result<ClassWeight> {
    if s.trim().eq_ignore_ascii_case("balanced") {
        let go = ds.labels.iter().filter(|&&l| l > 0).count().max(1) as f64;
        let nogo = (ds.len() as f64 - go).max(1.0);
        let n = ds.len() as f64;
        return Ok(ClassWeight {
            go: n / (2.0 * go),
            nogo: n / (2.0 * nogo),
        });
    }
    let parts: Vec<Option<f64>> = s
        .split(',')
        .map(|p| {
            p.trim()
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite() && *v > 0.0)
        })
        .collect();
    match parts.as_slice() {
        [Some(go), Some(nogo)] => Ok(ClassWeight {
            go: *go,
            nogo: *nogo,
        }),
        _ => anyhow::bail!(
            "--class-weight '{s}': give two positive numbers GO,NOGO (e.g. 1,3) or balanced"
        ),
    }
}

/// `--holdout-fraction`'s value: strictly between 0 and 1.
fn parse_fraction(s: &str) -> Result<f64, String> {
    match s.parse::<f64>() {
        Ok(f) if f > 0.0 && f < 1.0 => Ok(f),
        _ => Err(format!(
            "'{s}' is not a fraction between 0 and 1 (e.g. 0.2)"
        )),
    }
}
