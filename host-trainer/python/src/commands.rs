//! The command line run in process: an argument list through the same parsing (project
//! file included, `host_trainer::cli::settings::parse_from`) and the same command code
//! (`host_trainer::cli::run`) as the `linegate` binary, its errors as the package's
//! exceptions instead of exit codes.

use std::ffi::OsString;

use clap::error::ErrorKind;
use pyo3::prelude::*;

use crate::errors;

/// Adds `run` and `project_values` to the module.
pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(run, m)?)?;
    m.add_function(wrap_pyfunction!(project_values, m)?)
}

/// The values the project file gives `command`'s arguments (argument id → values; a switch
/// has none), as the command line adds them: `project` names the file, else
/// `linegate.toml` in the working folder if there is one (else an empty dict).
#[pyfunction]
#[pyo3(signature = (command, project=None))]
fn project_values(
    py: Python<'_>,
    command: &str,
    project: Option<std::path::PathBuf>,
) -> PyResult<std::collections::BTreeMap<String, Vec<String>>> {
    use clap::CommandFactory;
    use host_trainer::project::{PROJECT_FILE, Project};
    let path = match project {
        Some(p) => p,
        None => {
            let here = std::path::PathBuf::from(PROJECT_FILE);
            if !here.is_file() {
                return Ok(Default::default());
            }
            here
        }
    };
    let p = Project::read(&path).map_err(|e| errors::input_error(py, &e))?;
    let cli = host_trainer::cli::Cli::command();
    let Some(sub) = cli.find_subcommand(command) else {
        return Err(errors::usage_error(py, format!("no command '{command}'")));
    };
    let has = |id: &str| sub.get_arguments().any(|a| a.get_id() == id);
    Ok(p.for_command(command, has)
        .into_iter()
        .map(|i| (i.arg.to_string(), i.values))
        .collect())
}

/// Runs `linegate <args…>` in this process. Returns 0 on success (help and version are
/// printed and return 0); raises `CheckFailed` where the binary exits 1, `UsageError`,
/// `LogError` or `LinegateError` where it exits 2.
#[pyfunction]
fn run(py: Python<'_>, args: Vec<String>) -> PyResult<i32> {
    let argv: Vec<OsString> = std::iter::once(OsString::from("linegate"))
        .chain(args.into_iter().map(OsString::from))
        .collect();
    let parsed = match host_trainer::cli::settings::parse_from(&argv) {
        Ok(p) => p,
        Err(e) => {
            return match e.kind() {
                ErrorKind::DisplayHelp | ErrorKind::DisplayVersion => {
                    let _ = e.print();
                    Ok(0)
                }
                _ => Err(errors::usage_error(py, e.render().to_string())),
            };
        }
    };
    let done = py.detach(|| {
        let done = host_trainer::cli::run(&parsed.cli, parsed.settings);
        // What the command printed reaches the file descriptor before Python reads it
        // (a caller capturing standard output).
        let _ = std::io::Write::flush(&mut std::io::stdout());
        done
    });
    done.map(|()| 0).map_err(|e| errors::from_anyhow(py, &e))
}
