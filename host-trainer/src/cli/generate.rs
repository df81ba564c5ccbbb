//! `linegate generate`: a synthetic separable log of any size, with its channel sheet.

use std::path::PathBuf;

use anyhow::{Result, bail};
use clap::Args;

use crate::output::OutputSet;

/// Flags of `linegate generate`.
#[derive(Args)]
pub struct GenerateArgs {
    /// Units.
    #[arg(long, default_value_t = 10_000)]
    pub rows: usize,
    /// Channels (1..=32).
    #[arg(long, default_value_t = 16)]
    pub channels: usize,
    /// Empty gap kept around the hidden boundary (scaled units; readings scaled to [-1, 1]).
    /// A finite number, 0 or more; one that too few random readings keep is refused with
    /// the largest accepted for these channels and seed.
    #[arg(long, default_value_t = 0.02, value_parser = parse_margin)]
    pub margin: f64,
    /// Seed.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Classes (2..=8). 2: GO and NO-GO by one hidden boundary; more: GO, fault1, fault2…,
    /// each unit the class of the highest of hidden rows (train it with
    /// --class GO=go --class FAULT1=fault1 …), units within --margin of a boundary between
    /// two classes redrawn.
    #[arg(long, default_value_t = 2)]
    pub classes: usize,
    /// Output log: Parquet for .parquet or .pq, tab-separated for .tsv, .tab or .txt,
    /// comma-separated otherwise. The channel sheet goes beside it with extension .toml.
    #[arg(long, short)]
    pub output: PathBuf,
    /// Overwrite existing files.
    #[arg(long)]
    pub force: bool,
}

impl GenerateArgs {
    /// Runs `linegate generate`.
    pub fn run(&self, quiet: bool) -> Result<()> {
        let Self {
            rows,
            channels,
            margin,
            seed,
            classes,
            output,
            force,
        } = self;
        if *channels == 0 || *channels > shared_model::MAX_CHANNELS {
            bail!("--channels must be 1..={}", shared_model::MAX_CHANNELS);
        }
        if *classes > 2 {
            crate::synth::class_margin(*channels, *classes, *margin, *seed)?;
        } else if *classes == 2 {
            crate::synth::check_margin(*channels, *margin, *seed)?;
        } else {
            bail!("--classes {classes}: a log has 2 to 8 classes");
        }
        let mut log = Vec::new();
        // The file says what it holds: Parquet for .parquet and .pq, tab-separated for
        // .tsv, .tab and .txt, comma-separated otherwise.
        if crate::synth::is_parquet_path(output) {
            crate::synth::write_class_log_parquet(
                &mut log, *rows, *channels, *classes, *margin, *seed,
            )?;
        } else {
            let delimiter = crate::synth::delimiter_for(output);
            crate::synth::write_class_log_delimited(
                &mut log, *rows, *channels, *classes, *margin, *seed, delimiter,
            )?;
        }
        let mut set = OutputSet::default();
        set.add_as("log (-o)", output, log);
        set.add_as(
            "channel sheet (the log's name with .toml)",
            output.with_extension("toml"),
            crate::synth::sheet(*channels),
        );
        for f in set.commit(*force)? {
            if !quiet {
                say!("wrote {}", f.display());
            }
        }
        Ok(())
    }
}

/// A margin: a finite number, 0 or more.
fn parse_margin(s: &str) -> Result<f64, String> {
    s.trim()
        .parse::<f64>()
        .ok()
        .filter(|m| m.is_finite() && *m >= 0.0)
        .ok_or_else(|| format!("'{s}' is not a margin: give a finite number, 0 or more"))
}
