//! The project file (`linegate.toml`): one release's settings, read by every command.
//!
//! Each key stands for one command-line flag of the commands it applies to, so a project
//! file and a command line say the same things in the same words: a flag given on the
//! command line overrides the key, a key overrides the flag's default. What each command
//! finally used, and where each value came from, is a list of [`Setting`]s that the
//! outputs record (the float model, the audit reports) and that `pack` compares with the
//! audit's. Paths in the file are taken relative to the file's folder.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::InputError;

/// The name a project file is looked for under in the working folder.
pub const PROJECT_FILE: &str = "linegate.toml";

/// Largest project file read (it is a page of settings).
const MAX_PROJECT_FILE: u64 = 1 << 20;

/// One effective setting of a command: its flag, its value and where the value came from.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Setting {
    /// The flag (`--max-false-go`), or the positional argument's name in capitals (`LOG`).
    pub flag: String,
    /// The value as the command line would give it; several for a repeated flag.
    pub value: Vec<String>,
    /// `flag`, `default`, the project file and key (`linegate.toml [gates] max_false_go`),
    /// or the float model it was recorded in (`model model.json`).
    pub source: String,
}

impl Setting {
    /// The value as one line of text (repeated values joined by a space).
    pub fn value_text(&self) -> String {
        self.value.join(" ")
    }
}

/// How a key's TOML value becomes command-line tokens.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Kind {
    /// A string or number: one value.
    Value,
    /// A list (or one string): one value per item, the flag repeated.
    List,
    /// A list of paths or glob patterns (or one): one value per item, relative to the file.
    Paths,
    /// One path, relative to the file.
    Path,
    /// A boolean: the flag is given when the value is `when`.
    Switch { when: bool },
    /// A table of channel = number: one `CHANNEL=NUMBER` value each.
    PerChannel,
}

/// One key of the project file and the flag it stands for.
struct Key {
    section: &'static str,
    key: &'static str,
    /// The flag's argument id (its field name in the command's flags).
    arg: &'static str,
    /// The commands it applies to; empty: every command that reads logs ([`READING`]) and
    /// has that argument.
    commands: &'static [&'static str],
    kind: Kind,
    /// What the key holds, for `--help` and error messages.
    help: &'static str,
}

const RELEASE: &[&str] = &["audit", "pack"];

/// The commands that read logs: a key of `[columns]` or `[sheet]` applies to these only.
const READING: &[&str] = &[
    "check", "train", "audit", "pack", "replay", "values", "sheet", "compare", "drift",
];

/// Every key a project file may hold, one per line.
#[rustfmt::skip]
const KEYS: &[Key] = &[
    key("logs", "train", "log", &["check", "train", "sheet"], Kind::Paths, "the training log's files or glob patterns"),
    key("logs", "train", "train", RELEASE, Kind::Paths, "the training log's files or glob patterns"),
    key("logs", "holdout", "holdout", RELEASE, Kind::Paths, "the holdout log's files or glob patterns (audited and gated; train evaluates a holdout given with --holdout)"),
    key("logs", "validation", "validate", RELEASE, Kind::Paths, "validation logs, each a file or a glob pattern"),
    key("columns", "label", "label", &[], Kind::Value, "the label column"),
    key("columns", "go", "go_labels", &[], Kind::List, "the GO label tokens"),
    key("columns", "nogo", "nogo_labels", &[], Kind::List, "the NO-GO label tokens"),
    key("columns", "classes", "classes", &[], Kind::List, "classes and their label tokens, e.g. [\"GO=go,pass\", \"SHORT=short\"]"),
    key("columns", "go_class", "go_class", &[], Kind::Value, "which class is GO, or none"),
    key("columns", "unit_id", "unit_id", &[], Kind::Value, "the unit-id column"),
    key("columns", "timestamp", "timestamp", &[], Kind::Value, "the timestamp column"),
    key("columns", "ignore", "ignore", &[], Kind::List, "columns left out"),
    key("columns", "channels", "channels", &[], Kind::List, "the channel columns, in order"),
    key("columns", "delimiter", "delimiter", &[], Kind::Value, "comma, semicolon, tab or pipe"),
    key("columns", "decimal_comma", "decimal_comma", &[], Kind::Switch { when: true }, "true: a comma in a number is its decimal mark"),
    key("columns", "skip_bad_rows", "skip_bad_rows", &[], Kind::Switch { when: true }, "true: skip and count bad rows"),
    key("columns", "max_rows", "max_rows", &[], Kind::Value, "most units held in memory"),
    key("sheet", "path", "sheet", &[], Kind::Path, "the channel sheet file"),
    key("split", "holdout_fraction", "holdout_fraction", &["train"], Kind::Value, "the fraction of each class held out"),
    key("split", "holdout_after", "holdout_after", &["train"], Kind::Value, "units after this timestamp held out"),
    key("train", "trainer", "trainer", &["train"], Kind::Value, "max-margin, hard-margin, perceptron, averaged or pocket"),
    key("train", "seed", "seed", &["train"], Kind::Value, "the seed of shuffles, folds and the split"),
    key("train", "epochs", "epochs", &["train"], Kind::Value, "the perceptron family's epoch cap"),
    key("train", "c", "c", &["train"], Kind::Value, "auto or a number"),
    key("train", "c_grid", "c_grid", &["train"], Kind::Value, "the values of C auto tries, e.g. \"0.01,0.1,1,10\""),
    key("train", "false_go_weight", "false_go_weight", &["train"], Kind::Value, "what a false GO costs against a false NO-GO"),
    key("train", "class_weight", "class_weight", &["train"], Kind::Value, "\"GO,NOGO\" multipliers of C, or balanced"),
    key("train", "class_rule", "class_rule", &["train"], Kind::Value, "one-vs-rest or joint (a model of classes)"),
    key("train", "folds", "folds", &["train"], Kind::Value, "k of the cross-validation"),
    key("train", "cv_trainers", "cv_trainers", &["train"], Kind::Value, "auto, all or chosen"),
    key("train", "recheck_budget", "recheck_budget", &["train"], Kind::Value, "the operating point's RECHECK budget, e.g. \"5%\""),
    key("train", "false_go_target", "false_go_target", &["train"], Kind::Value, "the operating point's false-GO target, e.g. \"1%@95%\""),
    key("train", "operating_point", "no_operating_point", &["train"], Kind::Switch { when: false }, "false: threshold 0 and no RECHECK band"),
    key("train", "max_false_go", "max_false_go", &["train"], Kind::Value, "at most N NO-GO training units pass (replaces the operating point)"),
    key("device", "weight_bits", "weight_bits", RELEASE, Kind::Value, "weight word length, 2 to 32"),
    key("device", "input_bits", "input_bits", RELEASE, Kind::Value, "input word length, 8 or 16"),
    key("device", "acc_bits", "acc_bits", RELEASE, Kind::Value, "accumulator width, 32 or 64"),
    key("device", "optimise", "no_optimise", RELEASE, Kind::Switch { when: false }, "false: plain rounding only"),
    key("device", "flash_address", "hex", &["pack"], Kind::Value, "write an Intel HEX image placing the blob here, e.g. \"0x3F000\""),
    key("device", "bin", "bin", &["pack"], Kind::Switch { when: true }, "true: also write the raw image"),
    key("gates", "max_false_go", "max_false_go", RELEASE, Kind::Value, "e.g. 0, \"0.1%\" or \"1%@95%\""),
    key("gates", "max_false_nogo", "max_false_nogo", RELEASE, Kind::Value, "e.g. \"1%\" or \"2%@95%\""),
    key("gates", "max_recheck", "max_recheck", RELEASE, Kind::Value, "e.g. \"5%\""),
    key("gates", "max_misroute", "max_misroute", RELEASE, Kind::Value, "a model of several classes: failure units decided another failure class, e.g. \"1%\""),
    key("gates", "max_flips", "max_flips", RELEASE, Kind::Value, "most flipped decisions"),
    key("gates", "min_margin_lsb", "min_margin_lsb", RELEASE, Kind::Value, "smallest fixed margin, LSB"),
    key("gates", "require_guarantee", "no_require_guarantee", RELEASE, Kind::Switch { when: false }, "false: the rounding guarantee is not required"),
    key("gates", "noise_gate", "no_noise_gate", RELEASE, Kind::Switch { when: false }, "false: no noise gate"),
    key("gates", "recheck_band", "recheck_band", RELEASE, Kind::Value, "the RECHECK half-band, model score units"),
    key("gates", "noise", "noise", RELEASE, Kind::PerChannel, "a table of channel = noise (physical units)"),
    key("gates", "apply_suggested_band", "apply_suggested_band", RELEASE, Kind::Switch { when: true }, "true: widen the band as the noise analysis suggests"),
    key("gates", "apply_recommended_format", "apply_recommended_format", RELEASE, Kind::Switch { when: true }, "true: the sweep's recommended word lengths"),
    key("release", "key", "sign", RELEASE, Kind::Path, "the private key file that signs the blob"),
    key("release", "public_key", "public_key", &["replay", "inspect"], Kind::Path, "the public key a blob must be signed with"),
    key("outputs", "model", "output", &["train"], Kind::Path, "the float model"),
    key("outputs", "model", "model", &[], Kind::Path, "the float model"),
    key("outputs", "audit_dir", "report_dir", &["audit"], Kind::Path, "the folder of audit.md, audit.html and audit.json"),
    key("outputs", "audit_dir", "audited", &["pack"], Kind::Path, "the folder of the audit pack must match"),
    key("outputs", "audit_dir", "audit", &["drift"], Kind::Path, "the folder of the audit.json drift reads its baseline from"),
    key("outputs", "blob", "output", &["pack"], Kind::Path, "the blob"),
    key("outputs", "blob", "blob", &["replay", "values", "compare", "drift"], Kind::Path, "the blob"),
];

const fn key(
    section: &'static str,
    key: &'static str,
    arg: &'static str,
    commands: &'static [&'static str],
    kind: Kind,
    help: &'static str,
) -> Key {
    Key {
        section,
        key,
        arg,
        commands,
        kind,
        help,
    }
}

/// A project file, read and checked: every key known, every value of its kind.
#[derive(Clone, Debug)]
pub struct Project {
    /// The file.
    pub path: PathBuf,
    entries: Vec<Entry>,
    /// The inline channel sheet (`[sheet]` with `[[sheet.channel]]` …), as sheet text.
    inline_sheet: bool,
}

/// One key of a project file, as the values a flag takes.
#[derive(Clone, Debug)]
struct Entry {
    section: &'static str,
    key: &'static str,
    values: Vec<String>,
    /// Whether `values` are present at all (a switch at its default gives no flag).
    given: bool,
}

/// A value a project file gives a command: the argument it sets and its values.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Injected {
    /// The argument id (the flag's field name).
    pub arg: &'static str,
    /// The values (none for a switch: the flag alone).
    pub values: Vec<String>,
    /// Whether the argument takes no value (a switch).
    pub switch: bool,
    /// Where it came from: `linegate.toml [section] key`.
    pub source: String,
}

impl Project {
    /// Reads and checks a project file.
    ///
    /// # Errors
    /// The file cannot be read, is not TOML, names a key no command knows, or gives a key a
    /// value of the wrong kind; each message names the key and what it takes.
    pub fn read(path: &Path) -> Result<Self, InputError> {
        let text = crate::input::read_text(path, "project file", MAX_PROJECT_FILE)?;
        Self::parse(path, &text)
    }

    /// Checks a project file's text (`path` names it in errors and anchors its paths).
    ///
    /// # Errors
    /// As [`Project::read`].
    pub fn parse(path: &Path, text: &str) -> Result<Self, InputError> {
        let bad = |message: String| InputError::Format {
            path: path.into(),
            message,
        };
        let table: toml::Table = text.parse().map_err(|e: toml::de::Error| {
            let line = e
                .span()
                .and_then(|s| text.get(..s.start))
                .map_or(0, |t| t.matches('\n').count() + 1);
            bad(format!(
                "line {line}: not a project file (TOML): {}",
                e.message().trim_end()
            ))
        })?;
        let dir = path.parent().unwrap_or(Path::new(""));
        let mut entries = Vec::new();
        let mut inline_sheet = false;
        for (section, body) in &table {
            let Some(body) = body.as_table() else {
                return Err(bad(format!(
                    "'{section}' is not a section; a project file holds sections ({}) of keys",
                    sections().join(", ")
                )));
            };
            if !KEYS.iter().any(|k| k.section == section) {
                return Err(bad(format!(
                    "[{section}] is not a section of a project file; the sections are {}",
                    sections().join(", ")
                )));
            }
            for (name, value) in body {
                if section == "sheet" && matches!(name.as_str(), "channel" | "signal" | "feature") {
                    inline_sheet = true;
                    continue;
                }
                let Some(k) = KEYS.iter().find(|k| k.section == section && k.key == name) else {
                    let known: Vec<&str> = KEYS
                        .iter()
                        .filter(|k| k.section == section)
                        .map(|k| k.key)
                        .collect();
                    return Err(bad(format!(
                        "[{section}] {name} is not a key of a project file; [{section}] holds {}",
                        dedup(known).join(", ")
                    )));
                };
                let (values, given) = values_of(k, value, dir)
                    .map_err(|m| bad(format!("[{section}] {name}: {m} ({} expected)", k.help)))?;
                entries.push(Entry {
                    section: k.section,
                    key: k.key,
                    values,
                    given,
                });
            }
        }
        if inline_sheet && entries.iter().any(|e| e.section == "sheet") {
            return Err(bad(
                "[sheet] has both a path and channels of its own; give one".to_string(),
            ));
        }
        Ok(Self {
            path: path.to_path_buf(),
            entries,
            inline_sheet,
        })
    }

    /// What this file gives `command`, one entry per argument that command has (`has`
    /// says whether it has an argument id).
    pub fn for_command(&self, command: &str, has: impl Fn(&str) -> bool) -> Vec<Injected> {
        let mut out: Vec<Injected> = Vec::new();
        let shown = self.path.display();
        for k in KEYS {
            let applies = if k.commands.is_empty() {
                READING.contains(&command)
            } else {
                k.commands.contains(&command)
            };
            if !applies || !has(k.arg) {
                continue;
            }
            if out.iter().any(|i| i.arg == k.arg) {
                continue;
            }
            let source = format!("{shown} [{}] {}", k.section, k.key);
            if k.section == "sheet" && k.key == "path" && self.inline_sheet {
                out.push(Injected {
                    arg: k.arg,
                    values: vec![self.path.display().to_string()],
                    switch: false,
                    source: format!("{shown} [sheet]"),
                });
                continue;
            }
            let Some(e) = self
                .entries
                .iter()
                .find(|e| e.section == k.section && e.key == k.key)
            else {
                continue;
            };
            if !e.given {
                continue;
            }
            out.push(Injected {
                arg: k.arg,
                values: e.values.clone(),
                switch: matches!(k.kind, Kind::Switch { .. }),
                source,
            });
        }
        out
    }
}

fn sections() -> Vec<&'static str> {
    dedup(KEYS.iter().map(|k| k.section).collect())
}

fn dedup(mut v: Vec<&'static str>) -> Vec<&'static str> {
    let mut seen = Vec::new();
    v.retain(|s| {
        let new = !seen.contains(s);
        seen.push(*s);
        new
    });
    v
}

/// A key's value as flag values, and whether the flag is given at all.
fn values_of(k: &Key, v: &toml::Value, dir: &Path) -> Result<(Vec<String>, bool), String> {
    let scalar = |v: &toml::Value| -> Result<String, String> {
        match v {
            toml::Value::String(s) => Ok(s.clone()),
            toml::Value::Integer(i) => Ok(i.to_string()),
            toml::Value::Float(f) if f.is_finite() => Ok(f.to_string()),
            // An unquoted date or time reads as TOML's own kind: the text as written.
            toml::Value::Datetime(d) => Ok(d.to_string()),
            other => Err(format!("{} is not a text or a number", other.type_str())),
        }
    };
    let path = |s: String| -> String {
        let p = Path::new(&s);
        if p.is_absolute() || dir.as_os_str().is_empty() {
            s
        } else {
            dir.join(p).display().to_string()
        }
    };
    let list = |v: &toml::Value| -> Result<Vec<String>, String> {
        match v {
            toml::Value::Array(items) => items.iter().map(scalar).collect(),
            other => Ok(vec![scalar(other)?]),
        }
    };
    Ok(match k.kind {
        Kind::Value => (vec![scalar(v)?], true),
        Kind::List => (list(v)?, true),
        Kind::Paths => (list(v)?.into_iter().map(path).collect(), true),
        Kind::Path => (vec![path(scalar(v)?)], true),
        Kind::Switch { when } => match v {
            toml::Value::Boolean(b) => (Vec::new(), *b == when),
            other => return Err(format!("{} is not true or false", other.type_str())),
        },
        Kind::PerChannel => match v {
            toml::Value::Table(t) => (
                t.iter()
                    .map(|(c, n)| scalar(n).map(|n| format!("{c}={n}")))
                    .collect::<Result<_, _>>()?,
                true,
            ),
            other => return Err(format!("{} is not a table", other.type_str())),
        },
    })
}

/// The inline channel sheet of a project file (its `[sheet]` table), as sheet text, or
/// `None` when `text` has none.
///
/// # Errors
/// The text is not TOML.
pub fn inline_sheet(text: &str) -> Option<String> {
    let table: toml::Table = text.parse().ok()?;
    let sheet = table.get("sheet")?.as_table()?;
    if !["channel", "signal", "feature"]
        .iter()
        .any(|k| sheet.contains_key(*k))
    {
        return None;
    }
    toml::to_string(sheet).ok()
}

/// Every key of a project file with what it holds, as `--help` lists them.
pub fn key_list() -> String {
    let mut out = String::new();
    let mut last = "";
    for k in KEYS {
        if k.section != last {
            out.push_str(&format!("[{}]\n", k.section));
            last = k.section;
        }
        let line = format!("  {:<26}{}\n", k.key, k.help);
        if !out.contains(&line) {
            out.push_str(&line);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn has_all(_: &str) -> bool {
        true
    }

    #[test]
    fn keys_become_flag_values_relative_to_the_file() {
        let p = Project::parse(
            Path::new("site/linegate.toml"),
            "[logs]\ntrain = [\"a.csv\", \"day-*.csv\"]\n[gates]\nmax_false_go = \"1%@95%\"\nnoise = { vib = 2.5 }\n[device]\noptimise = false\nweight_bits = 12\n",
        )
        .unwrap();
        let audit = p.for_command("audit", has_all);
        let train = audit.iter().find(|i| i.arg == "train").unwrap();
        assert_eq!(train.values, ["site/a.csv", "site/day-*.csv"]);
        assert_eq!(train.source, "site/linegate.toml [logs] train");
        let fg = audit.iter().find(|i| i.arg == "max_false_go").unwrap();
        assert_eq!(fg.values, ["1%@95%"]);
        assert!(audit.iter().any(|i| i.arg == "no_optimise" && i.switch));
        assert!(
            audit
                .iter()
                .any(|i| i.arg == "noise" && i.values == ["vib=2.5"])
        );
        assert!(
            audit
                .iter()
                .any(|i| i.arg == "weight_bits" && i.values == ["12"])
        );
        // The same key reaches train as its positional log; the gates do not reach train.
        let train_cmd = p.for_command("train", has_all);
        assert!(train_cmd.iter().any(|i| i.arg == "log"));
        assert!(!train_cmd.iter().any(|i| i.arg == "max_false_go"));
    }

    #[test]
    fn unknown_keys_and_wrong_kinds_are_named() {
        let e = Project::parse(Path::new("p.toml"), "[gates]\nmax_false_gp = 1\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("[gates] max_false_gp is not a key"), "{e}");
        assert!(e.contains("max_false_go"), "{e}");
        let e = Project::parse(Path::new("p.toml"), "[device]\noptimise = \"no\"\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("[device] optimise: string is not true or false"),
            "{e}"
        );
        let e = Project::parse(Path::new("p.toml"), "[train2]\nx = 1\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("[train2] is not a section"), "{e}");
    }

    #[test]
    fn a_switch_at_its_default_gives_no_flag() {
        let p = Project::parse(Path::new("p.toml"), "[device]\noptimise = true\n").unwrap();
        assert!(p.for_command("audit", has_all).is_empty());
    }

    #[test]
    fn an_inline_sheet_is_read_from_the_project_file() {
        let text = "[sheet]\n[[sheet.channel]]\nname = \"a\"\nmin = 0\nmax = 1\n";
        let p = Project::parse(Path::new("p.toml"), text).unwrap();
        let i = p.for_command("train", has_all);
        assert!(i.iter().any(|i| i.arg == "sheet" && i.values == ["p.toml"]));
        let sheet = inline_sheet(text).unwrap();
        assert!(sheet.contains("[[channel]]"), "{sheet}");
    }
}
