//! `linegate sheet`: a starting channel sheet drawn from a log, every entry to be confirmed.

use std::path::PathBuf;

use anyhow::Result;
use clap::Args;

use super::args::LogArgs;
use crate::output::OutputSet;

/// Flags of `linegate sheet`.
#[derive(Args)]
pub struct SheetArgs {
    /// Bench log (CSV, TSV or Parquet) whose channels the sheet declares; several files (or
    /// a quoted glob pattern) are one log. Default: `[logs] train` of the project file.
    #[arg(value_name = "LOG")]
    pub log: Vec<PathBuf>,
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
        let files = super::log_files(
            &self.log,
            "name the bench log (or several files of it), or set [logs] train in the project file",
        )?;
        let draft = crate::ingest::draft::draft_sheet(&files, &opts)?;
        if !quiet {
            super::warn_skipped(&files[0], &draft.skipped);
        }
        let mut set = OutputSet::default();
        for f in &files {
            set.input("bench log", f);
        }
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
