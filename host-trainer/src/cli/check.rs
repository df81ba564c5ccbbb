//! `linegate check`: is the log linearly separable, exactly, and by how much.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use super::args::LogArgs;
use super::{CheckFailed, to_json};
use crate::ingest::LogOptions;
use crate::train::separability::{self, Figures};
use crate::workflow;

/// Flags of `linegate check`.
#[derive(Args)]
pub struct CheckArgs {
    /// Bench log: delimited text (CSV, TSV, semicolon…) or Parquet; several files (or a
    /// quoted glob pattern) are one log. Default: `[logs] train` of the project file.
    #[arg(value_name = "LOG")]
    pub log: Vec<PathBuf>,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// Channel sheet (TOML) with valid ranges, raw conversion and noise.
    #[arg(long)]
    pub sheet: Option<PathBuf>,
    /// Also compute Novikoff's γ and bound 1/γ² (a second exact solve, through the origin)
    /// and run the classic perceptron beside the bound.
    #[arg(long)]
    pub novikoff: bool,
    /// Epoch cap for the perceptron run shown beside the bound (with --novikoff).
    #[arg(long, default_value_t = 1000, requires = "novikoff")]
    pub epochs: u32,
    /// Seed for the perceptron's shuffle (with --novikoff).
    #[arg(long, default_value_t = 1, requires = "novikoff")]
    pub seed: u64,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

impl CheckArgs {
    /// Runs `linegate check`.
    pub fn run(&self, quiet: bool) -> Result<()> {
        let Self {
            log,
            log_args,
            sheet,
            novikoff,
            epochs,
            seed,
            json,
        } = self;
        // `check` records no provenance, so the log's digest would be work for nobody.
        let opts = LogOptions {
            digest: false,
            ..log_args.options(quiet)
        };
        let files = super::log_files(
            log,
            "name the bench log (or several files of it), or set [logs] train in the project file",
        )?;
        let log = &files[0];
        let (ds, sheet) = workflow::load(&files, &opts, sheet.as_deref())?;
        if !quiet {
            super::warn_skipped(&ds.name(), &ds.skipped);
            super::warn_sheet(log, &ds, sheet.as_ref());
        }
        // With declared classes the test is the GO class against every failure class
        // together (the boundary a false GO crosses); said, never implied.
        if ds.classes.declared {
            let Some(go) = ds.classes.go else {
                anyhow::bail!(
                    "{}: check tests GO units against failure units, and --go-class none names no GO class; train with --class-rule joint to see how the classes separate",
                    log.display()
                );
            };
            let names: Vec<&str> = ds.classes.names().collect();
            let others: Vec<&str> = names
                .iter()
                .enumerate()
                .filter(|&(k, _)| k != usize::from(go))
                .map(|(_, n)| *n)
                .collect();
            if !quiet && !*json {
                say!(
                    "classes: GO ({}) against every failure class together ({}); the failure classes among themselves are not tested",
                    names[usize::from(go)],
                    others.join(", ")
                );
            }
        }
        let figures = Figures {
            margin: true,
            novikoff: *novikoff,
            perceptron: *novikoff,
        };
        // The GO-vs-rest view: +1 for GO, −1 for every other class (a unit's class code is
        // −1, −2… for the failure classes, and the test reads signs).
        let signs: Vec<i8> = ds.labels.iter().map(|l| l.signum()).collect();
        let task = crate::train::task::Binary::new(&ds, &signs, "GO");
        let r = separability::check_with(&task, &ds.all(), *epochs, *seed, figures, None);
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
        Ok(())
    }
}

fn print_check(r: &separability::SeparabilityReport, ds: &crate::ingest::dataset::Dataset) {
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
        print_units(&r.support, "α");
    }
    say!("R = max ‖(x, 1)‖ = {:.4}", r.radius);
    match (r.novikoff_margin, r.novikoff_bound, r.perceptron_updates) {
        (Some(g), Some(b), Some(updates)) => say!(
            "Novikoff: γ = {g:.6} (constant-1 feature appended, scaled into the unit ball, unit-norm separator through the origin); bound 1/γ² = {b:.0} updates; perceptron made {updates} in {} epochs",
            r.perceptron_epochs.unwrap_or(0)
        ),
        (_, _, Some(updates)) => say!(
            "perceptron: {updates} updates in {} epochs, converged: {}",
            r.perceptron_epochs.unwrap_or(0),
            r.perceptron_converged.unwrap_or(false)
        ),
        _ => {}
    }
    if let Some(n) = &r.novikoff_note {
        say!("Novikoff: {n}");
    }
    if !r.conflict.is_empty() {
        say!("units no hyperplane can split (their convex hulls meet; weights λ):");
        print_units(&r.conflict, "λ");
    }
    if ds.skipped.total > 0 {
        let reasons: Vec<String> = ds
            .skipped
            .by_reason
            .iter()
            .map(|(r, n)| format!("{n} {r}"))
            .collect();
        say!(
            "skipped {} that could not be read: {}",
            ds.skipped.counted(),
            reasons.join(", ")
        );
    }
}

/// One line per unit: its id (escaped), label, line and weight under `symbol`.
fn print_units(units: &[separability::UnitRef], symbol: &str) {
    for u in units {
        say!(
            "  {} ({}, line {}, {symbol} = {:.4})",
            super::shown(&u.unit),
            u.label,
            u.line,
            u.weight
        );
    }
}
