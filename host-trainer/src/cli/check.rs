//! `linegate check`: is the log linearly separable, exactly, and by how much.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use super::args::LogArgs;
use super::{CheckFailed, to_json};
use host_trainer::workflow;

/// Flags of `linegate check`.
#[derive(Args)]
pub struct CheckArgs {
    /// Bench log: delimited text (CSV, TSV, semicolon…) or Parquet.
    pub log: PathBuf,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// Channel sheet (TOML) with valid ranges, raw conversion and noise.
    #[arg(long)]
    pub sheet: Option<PathBuf>,
    /// Epoch cap for the perceptron run shown beside the bound.
    #[arg(long, default_value_t = 1000)]
    pub epochs: u32,
    /// Seed for the perceptron's shuffle.
    #[arg(long, default_value_t = 1)]
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
            epochs,
            seed,
            json,
        } = self;
        let (ds, sheet) = workflow::load(log, &log_args.options(quiet), sheet.as_deref())?;
        if !quiet {
            super::warn_skipped(log, &ds.skipped);
            super::warn_sheet(log, &ds, sheet.as_ref());
        }
        let r = host_trainer::train::separability::check(&ds, &ds.all(), *epochs, *seed);
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

fn print_check(
    r: &host_trainer::train::separability::SeparabilityReport,
    ds: &host_trainer::ingest::dataset::Dataset,
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
        print_units(&r.support, "α");
    }
    say!("R = max ‖(x, 1)‖ = {:.4}", r.radius);
    // `check` always runs the perceptron; the figures are there.
    let (updates, epochs, converged) = (
        r.perceptron_updates.unwrap_or(0),
        r.perceptron_epochs.unwrap_or(0),
        r.perceptron_converged.unwrap_or(false),
    );
    match (r.novikoff_margin, r.novikoff_bound) {
        (Some(g), Some(b)) => say!(
            "Novikoff: γ = {g:.6} (constant-1 feature appended, scaled into the unit ball, unit-norm separator through the origin); bound 1/γ² = {b:.0} updates; perceptron made {updates} in {epochs} epochs"
        ),
        _ => say!("perceptron: {updates} updates in {epochs} epochs, converged: {converged}"),
    }
    if let Some(n) = &r.novikoff_note {
        say!("Novikoff: {n}");
    }
    if !r.conflict.is_empty() {
        say!("units no hyperplane can split (their convex hulls meet; weights λ):");
        print_units(&r.conflict, "λ");
    }
    if ds.skipped.total > 0 {
        say!(
            "skipped {} bad rows: {:?}",
            ds.skipped.total,
            ds.skipped.by_reason
        );
    }
}

/// One line per unit: its id (escaped), label, line and weight under `symbol`.
fn print_units(units: &[host_trainer::train::separability::UnitRef], symbol: &str) {
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
