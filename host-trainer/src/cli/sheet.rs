//! `linegate sheet`: a starting channel sheet drawn from a log, every entry to be confirmed.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use super::args::LogArgs;
use host_trainer::output::OutputSet;

/// Flags of `linegate sheet`.
#[derive(Args)]
pub struct SheetArgs {
    /// Bench log (CSV, TSV or Parquet) whose channels the sheet declares.
    pub log: PathBuf,
    #[command(flatten)]
    pub log_args: LogArgs,
    /// Output channel sheet (TOML).
    #[arg(long, short)]
    pub output: PathBuf,
    /// Overwrite an existing file.
    #[arg(long)]
    pub force: bool,
}

impl SheetArgs {
    /// Runs `linegate sheet`.
    pub fn run(&self, quiet: bool) -> Result<()> {
        let mut opts = self.log_args.options(quiet);
        opts.digest = false;
        let draft = host_trainer::ingest::draft::draft_sheet(&self.log, &opts)?;
        if !quiet {
            super::warn_skipped(&self.log, &draft.skipped);
        }
        let mut set = OutputSet::default();
        set.input("bench log", &self.log);
        set.add_as("channel sheet (-o)", &self.output, draft.to_toml());
        for f in set.commit(self.force)? {
            if !quiet {
                say!(
                    "wrote {}: {} channels from {} rows, all to be confirmed ({} named apart from their column)",
                    f.display(),
                    draft.channels.len(),
                    draft.rows,
                    draft.aliased()
                );
            }
        }
        Ok(())
    }
}
