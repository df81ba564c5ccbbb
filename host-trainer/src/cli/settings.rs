//! One set of settings per release: the command line over the project file over the
//! defaults. The command line is parsed once to see which flags it gives; each key of the
//! project file the command line leaves out is added as the flag it stands for, and the
//! whole is parsed again, so every value passes the same checks whatever its source.
//! What each command finally used is a list of [`Setting`]s with their sources.

use std::ffi::OsString;
use std::path::{Path, PathBuf};

use crate::project::{Injected, PROJECT_FILE, Project, Setting};
use clap::parser::ValueSource;
use clap::{ArgMatches, CommandFactory, FromArgMatches};

use super::Cli;

/// The parsed command line and what the command works with.
pub struct Parsed {
    /// The flags, the project file's included.
    pub cli: Cli,
    /// Every setting of the command with its value and source.
    pub settings: Vec<Setting>,
}

/// The command line's definition, its long help listing every project-file key.
fn command() -> clap::Command {
    let c = Cli::command();
    let about = c
        .get_long_about()
        .map(|a| a.to_string().replace("{KEYS}", &crate::project::key_list()))
        .unwrap_or_default();
    c.long_about(about)
}

/// Commands that take no setting of a release: a project file is not read for them.
const NO_SETTINGS: &[&str] = &["generate", "demo", "key"];

/// Arguments not recorded as settings: they choose no value of the release, only where
/// and how its outputs are written (so a model file is the same whatever its name).
const NOT_SETTINGS: &[&str] = &[
    "help",
    "version",
    "quiet",
    "project",
    "no_project",
    "output",
    "force",
    "json",
    "cv_output",
    "report_dir",
    "units",
    "vectors",
];

/// Parses this process's command line with the project file, or exits as clap does (help,
/// version, usage errors: 0 or 2).
pub fn parse() -> Parsed {
    let args: Vec<OsString> = std::env::args_os().collect();
    match parse_from(&args) {
        Ok(p) => p,
        Err(e) => e.exit(),
    }
}

/// [`parse`] of the given argument list (the program name first, as
/// `std::env::args_os` gives it), with the same project-file handling; help, version and
/// usage errors come back as clap's error (its `kind()` says which) instead of exiting,
/// so a front end running commands in process decides what they become.
///
/// # Errors
/// clap's error for help, version, a usage error or an unreadable project file.
pub fn parse_from(args: &[OsString]) -> Result<Parsed, clap::Error> {
    let first = command().try_get_matches_from(args)?;
    let Some((sub, given)) = first.subcommand().map(|(s, m)| (s.to_string(), m.clone())) else {
        return Cli::from_arg_matches(&first).map(|cli| Parsed {
            cli,
            settings: Vec::new(),
        });
    };
    let sub = sub.as_str();
    let given = &given;
    // Commands that take no setting of a release never read a project file.
    if NO_SETTINGS.contains(&sub) {
        return Cli::from_arg_matches(&first).map(|cli| Parsed {
            cli,
            settings: Vec::new(),
        });
    }
    let project =
        find_project(&first, given).map_err(|m| command().error(clap::error::ErrorKind::Io, m))?;
    let Some(sub_cmd) = command().find_subcommand(sub).cloned() else {
        return Cli::from_arg_matches(&first).map(|cli| Parsed {
            cli,
            settings: Vec::new(),
        });
    };
    let has = |id: &str| sub_cmd.get_arguments().any(|a| a.get_id() == id);
    let injected: Vec<Injected> = project
        .as_ref()
        .map(|p| p.for_command(sub, has))
        .unwrap_or_default()
        .into_iter()
        .filter(|i| given.value_source(i.arg) != Some(ValueSource::CommandLine))
        // A key whose flag conflicts with one the command line gives yields to it (a
        // `--holdout-after` on the line overrides `[split] holdout_fraction`).
        .filter(|i| {
            !sub_cmd
                .get_arguments()
                .find(|a| a.get_id() == i.arg)
                .is_some_and(|a| {
                    sub_cmd.get_arg_conflicts_with(a).iter().any(|c| {
                        given.value_source(c.get_id().as_str()) == Some(ValueSource::CommandLine)
                    })
                })
        })
        .collect();
    let matches = if injected.is_empty() {
        first
    } else {
        let argv = with_injected(args, sub, &sub_cmd, &injected);
        command().try_get_matches_from(&argv).map_err(|e| {
            let named = injected
                .iter()
                .map(|i| i.source.clone())
                .collect::<Vec<_>>()
                .join(", ");
            let mut cmd = command();
            cmd.error(
                clap::error::ErrorKind::ValueValidation,
                format!(
                    "a value of the project file does not fit its flag (keys used: {named}):\n{}",
                    e.render()
                ),
            )
        })?
    };
    let cli = Cli::from_arg_matches(&matches)?;
    let settings = matches
        .subcommand_matches(sub)
        .map(|m| record(m, &sub_cmd, &injected))
        .unwrap_or_default();
    Ok(Parsed { cli, settings })
}

/// The project file: `--project FILE`, else `linegate.toml` in the working folder (unless
/// `--no-project`), else none.
fn find_project(top: &ArgMatches, sub: &ArgMatches) -> Result<Option<Project>, String> {
    let flag = |id: &str| {
        sub.try_get_one::<bool>(id)
            .ok()
            .flatten()
            .copied()
            .unwrap_or(false)
            || top
                .try_get_one::<bool>(id)
                .ok()
                .flatten()
                .copied()
                .unwrap_or(false)
    };
    let named = sub
        .try_get_one::<PathBuf>("project")
        .ok()
        .flatten()
        .or_else(|| top.try_get_one::<PathBuf>("project").ok().flatten())
        .cloned();
    let path = match named {
        Some(_) if flag("no_project") => {
            return Err("--project and --no-project: give one".to_string());
        }
        Some(p) => p,
        None if flag("no_project") => return Ok(None),
        None => {
            let here = PathBuf::from(PROJECT_FILE);
            if !here.is_file() {
                return Ok(None);
            }
            here
        }
    };
    Project::read(&path).map(Some).map_err(|e| e.to_string())
}

/// The command line with the project's values inserted after the subcommand's name
/// (options) or at its end (a positional the command line left out).
fn with_injected(
    args: &[OsString],
    sub: &str,
    sub_cmd: &clap::Command,
    injected: &[Injected],
) -> Vec<OsString> {
    // The subcommand's name is the first argument equal to it that is not a flag's value.
    let at = args
        .iter()
        .enumerate()
        .skip(1)
        .find(|(k, a)| *a == sub && args.get(k - 1).is_none_or(|p| p != "--project"))
        .map_or(args.len(), |(k, _)| k);
    let mut options = Vec::new();
    let mut positional = Vec::new();
    for i in injected {
        let Some(arg) = sub_cmd.get_arguments().find(|a| a.get_id() == i.arg) else {
            continue;
        };
        match arg.get_long() {
            Some(long) if i.switch => options.push(OsString::from(format!("--{long}"))),
            Some(long) => {
                for v in &i.values {
                    options.push(OsString::from(format!("--{long}={v}")));
                }
            }
            None => positional.extend(i.values.iter().map(OsString::from)),
        }
    }
    let mut out: Vec<OsString> = args[..=at.min(args.len() - 1)].to_vec();
    out.extend(options);
    out.extend(args.iter().skip(at + 1).cloned());
    if !positional.is_empty() {
        if !args.iter().skip(at + 1).any(|a| a == "--") {
            out.push("--".into());
        }
        out.extend(positional);
    }
    out
}

/// The command's settings: each argument with a value, and its source.
fn record(m: &ArgMatches, cmd: &clap::Command, injected: &[Injected]) -> Vec<Setting> {
    let mut out = Vec::new();
    for arg in cmd.get_arguments() {
        let id = arg.get_id().as_str();
        if NOT_SETTINGS.contains(&id) {
            continue;
        }
        let Some(raw) = m.get_raw(id) else { continue };
        let value: Vec<String> = raw.map(|v| v.to_string_lossy().into_owned()).collect();
        let source = match m.value_source(id) {
            Some(ValueSource::DefaultValue) => {
                // A switch left off is no setting worth a line.
                if !arg.get_action().takes_values() {
                    continue;
                }
                "default".to_string()
            }
            _ => injected
                .iter()
                .find(|i| i.arg == id)
                .map_or_else(|| "flag".to_string(), |i| i.source.clone()),
        };
        let flag = arg.get_long().map_or_else(
            || {
                arg.get_value_names()
                    .and_then(|n| n.first())
                    .map_or_else(|| id.to_uppercase(), |n| n.to_string())
            },
            |l| format!("--{l}"),
        );
        out.push(Setting {
            flag,
            value,
            source,
        });
    }
    out
}

/// The settings of `args` (for tests of the command line).
#[cfg(test)]
fn parse_args(args: &[&str]) -> Result<Parsed, clap::Error> {
    let args: Vec<OsString> = args.iter().map(OsString::from).collect();
    parse_from(&args)
}

/// The value a setting list gives `flag`, if any.
#[cfg(test)]
pub fn value_of<'a>(settings: &'a [Setting], flag: &str) -> Option<&'a Setting> {
    settings.iter().find(|s| s.flag == flag)
}

/// Says where a project file was read from (stderr), so a file found in the working folder
/// never changes a run unannounced.
pub fn announce(settings: &[Setting], quiet: bool) {
    if quiet {
        return;
    }
    let mut files: Vec<&str> = settings
        .iter()
        .filter_map(|s| s.source.split_once(" [").map(|(f, _)| f))
        .collect();
    files.dedup();
    if let Some(f) = files.first() {
        let n = settings
            .iter()
            .filter(|s| s.source.starts_with(&format!("{f} [")))
            .count();
        eprintln!(
            "settings: {n} from the project file {f} (a flag on the command line overrides its key; --no-project ignores it)"
        );
    }
}

/// A path the project file or a flag must give: `what` names both ways.
pub fn required<'a>(v: &'a Option<PathBuf>, flag: &str, key: &str) -> anyhow::Result<&'a Path> {
    v.as_deref().ok_or_else(|| {
        anyhow::anyhow!(
            "{flag} is needed: give it, or set {key} in the project file ({PROJECT_FILE})"
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_flag_overrides_the_project_and_sources_are_recorded() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("p.toml");
        std::fs::write(
            &p,
            "[logs]\ntrain = \"bench.csv\"\n[train]\nseed = 7\nfolds = 3\n[outputs]\nmodel = \"m.json\"\n",
        )
        .unwrap();
        let ps = p.display().to_string();
        let parsed = parse_args(&["linegate", "--project", &ps, "train", "--seed", "9"]).unwrap();
        let s = &parsed.settings;
        let seed = value_of(s, "--seed").unwrap();
        assert_eq!(
            (seed.value.as_slice(), seed.source.as_str()),
            (&["9".to_string()][..], "flag")
        );
        let folds = value_of(s, "--folds").unwrap();
        assert_eq!(folds.value, ["3"]);
        assert!(folds.source.ends_with("[train] folds"), "{}", folds.source);
        let log = value_of(s, "LOG").unwrap();
        let dirs = dir.path().join("bench.csv").display().to_string();
        assert_eq!(log.value, [dirs]);
        let epochs = value_of(s, "--epochs").unwrap();
        assert_eq!(epochs.source, "default");
    }

    #[test]
    fn a_flag_overrides_a_key_it_conflicts_with_and_other_commands_ignore_the_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("p.toml");
        std::fs::write(
            &p,
            "[split]\nholdout_fraction = 0.2\n[columns]\nchannels = [\"a\", \"b\"]\n",
        )
        .unwrap();
        let ps = p.display().to_string();
        let parsed = parse_args(&[
            "linegate",
            "--project",
            &ps,
            "train",
            "x.csv",
            "--holdout-after",
            "2026-10-10",
            "-o",
            "m.json",
        ])
        .unwrap();
        assert!(value_of(&parsed.settings, "--holdout-fraction").is_none());
        assert_eq!(
            value_of(&parsed.settings, "--holdout-after")
                .unwrap()
                .source,
            "flag"
        );
        // generate's --channels is a count, not the log's columns: the file is not read.
        let parsed = parse_args(&[
            "linegate",
            "--project",
            &ps,
            "generate",
            "--rows",
            "5",
            "-o",
            "g.csv",
        ])
        .unwrap();
        assert!(parsed.settings.is_empty());
        let e = parse_args(&["linegate", "--project", &ps, "check", "--no-project"])
            .err()
            .unwrap()
            .to_string();
        assert!(e.contains("--project and --no-project"), "{e}");
    }

    #[test]
    fn a_value_of_the_wrong_kind_names_the_key() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("p.toml");
        std::fs::write(&p, "[train]\nseed = \"many\"\n").unwrap();
        let ps = p.display().to_string();
        let e = parse_args(&[
            "linegate",
            "--project",
            &ps,
            "train",
            "x.csv",
            "-o",
            "m.json",
        ])
        .err()
        .unwrap()
        .to_string();
        assert!(e.contains("[train] seed"), "{e}");
    }
}
