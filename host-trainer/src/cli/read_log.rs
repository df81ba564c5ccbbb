//! A log read as the commands read it, for front ends that want its readings (the Python
//! package's `read_log`): the same flags (`LogArgs`) and the same library calls
//! (`workflow::load`, or `workflow::load_for_model` with a model), so a log reads the
//! same in both. Not a subcommand: it prints nothing.

use std::ffi::OsString;
use std::path::PathBuf;

use anyhow::Result;
use clap::{FromArgMatches, Parser};

use super::args::LogArgs;
use crate::ingest::LogOptions;
use crate::ingest::dataset::Dataset;
use crate::train::float_model::FloatModel;
use crate::workflow;

/// `read-log LOG… [--model M] [--sheet S] [log flags]`.
#[derive(Parser)]
#[command(name = "read-log", no_binary_name = true)]
struct ReadLogArgs {
    /// The log (several files are one log).
    #[arg(value_name = "LOG", required = true)]
    log: Vec<PathBuf>,
    #[command(flatten)]
    log_args: LogArgs,
    /// Read with this float model's channels and scaling (as audit and replay read).
    #[arg(long)]
    model: Option<PathBuf>,
    /// A channel sheet for the scaling (without a model).
    #[arg(long, conflicts_with = "model")]
    sheet: Option<PathBuf>,
}

/// Reads the log an argument list names (the log's files, then `--model`, `--sheet` and the
/// commands' log flags such as `--label` or `--channels`; no program name first). With a
/// model the log is read as `replay` reads it (its channels, scaling and reading options;
/// a label column optional); without, as `train` reads it (observed ranges or the sheet's).
///
/// # Errors
/// A usage error of the flags (clap's, its message kept), or the log's [`InputError`]
/// (file, line, column) in the chain.
///
/// [`InputError`]: crate::error::InputError
pub fn read_log(args: &[OsString]) -> Result<Dataset> {
    let matches = <ReadLogArgs as clap::CommandFactory>::command().try_get_matches_from(args)?;
    let a = ReadLogArgs::from_arg_matches(&matches)?;
    let files = super::log_files(&a.log, "name the log (or several files of it)")?;
    match &a.model {
        Some(path) => {
            let fm = FloatModel::read(path)?;
            let opts = LogOptions {
                label_optional: true,
                ..a.log_args
                    .options_for_model(true, &fm, path, &mut Vec::new())?
            };
            Ok(workflow::load_for_model(&files, &opts, &fm)?)
        }
        None => {
            a.log_args.declared_classes()?;
            let opts = a.log_args.options(true);
            Ok(workflow::load(&files, &opts, a.sheet.as_deref())?.0)
        }
    }
}
