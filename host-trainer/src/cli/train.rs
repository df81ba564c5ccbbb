//! `linegate train`: a float model from a bench log, with holdout and cross-validation.

use host_trainer::confidence::rate_text;
use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use anyhow::Result;
use clap::Args;

use super::args::LogArgs;
use super::to_json;
use host_trainer::output::OutputSet;
use host_trainer::train::eval::TrainerKind;
use host_trainer::workflow::{self, CvTrainers};

/// Flags of `linegate train`.
#[derive(Args)]
pub struct TrainArgs {
    /// Bench log: delimited text (CSV, TSV, semicolon…) or Parquet.
    pub log: PathBuf,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// Channel sheet (TOML).
    #[arg(long)]
    pub sheet: Option<PathBuf>,
    /// Trainer.
    #[arg(long, value_enum, default_value_t = TrainerKind::MaxMargin)]
    pub trainer: TrainerKind,
    /// Epoch cap for the perceptron family.
    #[arg(long, default_value_t = 1000)]
    pub epochs: u32,
    /// Seed for shuffles and folds.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Soft-margin penalty C, used when the log is not separable.
    #[arg(long, default_value_t = 10.0)]
    pub c: f64,
    /// Move the threshold so at most N NO-GO training units pass.
    #[arg(long, value_name = "N")]
    pub max_false_go: Option<usize>,
    /// Holdout log to evaluate on.
    #[arg(long, conflicts_with_all = ["holdout_fraction", "holdout_after"])]
    pub holdout: Option<PathBuf>,
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
    /// Output float model (JSON).
    #[arg(long, short)]
    pub output: PathBuf,
    /// Overwrite existing files.
    #[arg(long)]
    pub force: bool,
    /// Print the outcome as JSON.
    #[arg(long)]
    pub json: bool,
}

impl TrainArgs {
    /// Runs `linegate train`.
    pub fn run(&self, quiet: bool) -> Result<()> {
        let Self {
            log,
            log_args,
            sheet,
            trainer,
            epochs,
            seed,
            c,
            max_false_go,
            holdout,
            holdout_fraction,
            holdout_after,
            folds,
            cv_trainers,
            output,
            force,
            json,
        } = self;
        let mut opts = log_args.options(quiet);
        opts.keep_times = holdout_after.is_some();
        let (full, sheet) = workflow::load(log, &opts, sheet.as_deref())?;
        // A holdout taken out of the training log: train on the rest, evaluate on it.
        let split = match (holdout_fraction, holdout_after) {
            (Some(f), _) => Some(("fraction", full.split_fraction(*f, *seed))),
            (None, Some(t)) => Some((
                "after",
                full.split_after(t)
                    .map_err(|m| anyhow::anyhow!("{}: --holdout-after: {m}", log.display()))?,
            )),
            (None, None) => None,
        };
        let (ds, held, holdout_split) = match split {
            Some((method, (train_idx, hold_idx))) => {
                if hold_idx.is_empty() || train_idx.is_empty() {
                    anyhow::bail!(
                        "{}: the holdout split leaves {} units to train on and {} to hold out; both need some",
                        log.display(),
                        train_idx.len(),
                        hold_idx.len()
                    );
                }
                let record = host_trainer::train::float_model::HoldoutSplit {
                    method: method.into(),
                    fraction: *holdout_fraction,
                    seed: holdout_fraction.map(|_| *seed),
                    after: holdout_after.clone(),
                    held_out: hold_idx.len(),
                    trained_on: train_idx.len(),
                };
                let held = full.subset(&hold_idx);
                (full.subset(&train_idx), Some(held), Some(record))
            }
            None => (full, None, None),
        };
        if !quiet {
            super::warn_skipped(log, &ds.skipped);
            super::warn_sheet(log, &ds, sheet.as_ref());
        }
        let req = workflow::TrainRequest {
            trainer: *trainer,
            epochs: *epochs,
            seed: *seed,
            c: *c,
            max_false_go: *max_false_go,
            folds: *folds,
            cv_trainers: *cv_trainers,
            holdout_split,
            progress: !quiet && std::io::stderr().is_terminal(),
            figures: host_trainer::train::separability::Figures::VERDICT,
        };
        let mut out = workflow::train_model(&ds, sheet.as_ref().map(|(_, f)| f), &req)?;
        if let Some(hd) = &held {
            out.evaluate_holdout(hd);
        }
        if let Some(h) = holdout {
            let hd = workflow::load_for_model(h, &opts, &out.model)?;
            if !quiet {
                super::warn_skipped(h, &hd.skipped);
            }
            out.evaluate_holdout(&hd);
        }
        let mut set = OutputSet::default();
        set.input("bench log", log);
        if let Some(s) = &self.sheet {
            set.input("channel sheet (--sheet)", s);
        }
        if let Some(h) = holdout {
            set.input("holdout log (--holdout)", h);
        }
        set.add_as("float model (-o)", output, out.model.to_json());
        set.commit(*force)?;
        if *json {
            say_raw!("{}", to_json(&out));
        } else if !quiet {
            print_train(&out, output);
        }
        Ok(())
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

/// `--holdout-fraction`'s value: strictly between 0 and 1.
fn parse_fraction(s: &str) -> Result<f64, String> {
    match s.parse::<f64>() {
        Ok(f) if f > 0.0 && f < 1.0 => Ok(f),
        _ => Err(format!(
            "'{s}' is not a fraction between 0 and 1 (e.g. 0.2)"
        )),
    }
}
