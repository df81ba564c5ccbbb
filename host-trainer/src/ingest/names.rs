//! Names from a file, as Linegate compares them.
//!
//! Column, channel, signal and feature names compare without regard to ASCII case
//! everywhere (a log's header, a Parquet schema, a channel sheet, `--channels` and
//! `--ignore`): exports change the case of names, and `a` and `A` as two channels would
//! let one sheet entry scale both. How a name is echoed ([`shown`], `shell_word`) lives in
//! `error`, below every module that words a message.

use std::collections::HashMap;
use std::path::Path;

use crate::error::{InputError, shell_word, shown};

/// Whether two names are the same name (ASCII case-insensitively).
pub fn same_name(a: &str, b: &str) -> bool {
    a.eq_ignore_ascii_case(b)
}

/// The key a set of names is kept under: equal exactly for [`same_name`]s.
pub(crate) fn name_key(name: &str) -> String {
    name.to_ascii_lowercase()
}

/// A name of at most `max` bytes for the column `column`, for a channel sheet to suggest:
/// its letters, digits and underscores, any run of other characters one underscore, then
/// whole words (split at underscores) while they fit, cut at a character only if the first
/// word alone does not. `od280/od315_of_diluted_wines` gives `od280_od315_of_diluted` at 24.
pub(crate) fn short_name(column: &str, max: usize) -> String {
    let mut clean = String::with_capacity(column.len());
    for c in column.chars() {
        if c.is_alphanumeric() {
            clean.push(c);
        } else if !clean.is_empty() && !clean.ends_with('_') {
            clean.push('_');
        }
    }
    let clean = clean.trim_end_matches('_');
    let mut out = String::new();
    for word in clean.split('_') {
        let extra = word.len() + usize::from(!out.is_empty());
        if out.len() + extra > max {
            break;
        }
        if !out.is_empty() {
            out.push('_');
        }
        out.push_str(word);
    }
    if out.is_empty() {
        for c in clean.chars() {
            if out.len() + c.len_utf8() > max {
                break;
            }
            out.push(c);
        }
    }
    if out.is_empty() {
        out.push_str("channel");
    }
    out
}

/// Refuses a header (or schema) holding one name twice, naming both columns as spelled and
/// their places, unless the name is left out with `--ignore` (`ignore`): then every column of
/// that name is left out. A map, not a scan per name: a header of 100,000 columns must not
/// take minutes.
pub(crate) fn unique_names(
    path: &Path,
    names: &[String],
    ignore: &[String],
) -> Result<(), InputError> {
    let mut seen = HashMap::with_capacity(names.len());
    for (i, n) in names.iter().enumerate() {
        if let Some(&j) = seen.get(&name_key(n)) {
            if ignore.iter().any(|g| same_name(g, n)) {
                continue;
            }
            return Err(duplicate(path, names, j, i));
        }
        seen.insert(name_key(n), i);
    }
    Ok(())
}

/// The error for columns `j` and `i` (0-based, `j < i`) of `names` holding one name.
fn duplicate(path: &Path, names: &[String], j: usize, i: usize) -> InputError {
    InputError::DuplicateHeader {
        path: path.into(),
        first: shown(&names[j]),
        second: shown(&names[i]),
        first_at: j + 1,
        second_at: i + 1,
        ignore: shell_word(&names[j]),
    }
}

/// The column named `wanted` (the first, by [`same_name`]), if any.
pub fn find(names: &[String], wanted: &str) -> Option<usize> {
    names.iter().position(|n| same_name(n, wanted))
}

/// A log's header names, looked up by the one rule: the column resolution bench logs and
/// signal logs share (roles by name or by default names, channel lists, `--ignore`).
pub(crate) struct Lookup<'a> {
    path: &'a Path,
    names: &'a [String],
}

impl<'a> Lookup<'a> {
    /// The header `names` of `path`, refused if it holds a name twice that `ignore` does not
    /// leave out.
    pub(crate) fn new(
        path: &'a Path,
        names: &'a [String],
        ignore: &[String],
    ) -> Result<Self, InputError> {
        unique_names(path, names, ignore)?;
        Ok(Self { path, names })
    }

    /// The column named `wanted`, if any.
    pub(crate) fn find(&self, wanted: &str) -> Option<usize> {
        find(self.names, wanted)
    }

    /// The error for a column asked for by name that the header lacks.
    pub(crate) fn unknown(&self, name: &str) -> InputError {
        InputError::UnknownColumn {
            path: self.path.into(),
            name: name.to_string(),
            columns: self.names.join(", "),
        }
    }

    /// The column `given` names (an error if there is none), else the first of `defaults`
    /// the header has, else `None`. A column chosen for a role must be the only one of its
    /// name: a name left out with `--ignore` may be in the header twice, and a role must
    /// not take one of the two.
    pub(crate) fn pick(
        &self,
        given: &Option<String>,
        defaults: &[&str],
    ) -> Result<Option<usize>, InputError> {
        let at = match given {
            Some(n) => Some(self.find(n).ok_or_else(|| self.unknown(n))?),
            None => defaults.iter().find_map(|d| self.find(d)),
        };
        if let Some(j) = at
            && let Some(i) =
                (j + 1..self.names.len()).find(|&i| same_name(&self.names[i], &self.names[j]))
        {
            return Err(duplicate(self.path, self.names, j, i));
        }
        Ok(at)
    }

    /// The columns of the channel list `list`, in its order: each must be in the header,
    /// and no two names of the list may name one column (`a` and `A` are one name).
    pub(crate) fn columns(&self, list: &[String]) -> Result<Vec<usize>, InputError> {
        let mut out: Vec<usize> = Vec::with_capacity(list.len());
        for n in list {
            let c = self.find(n).ok_or_else(|| self.unknown(n))?;
            if let Some(k) = out.iter().position(|&o| o == c) {
                return Err(InputError::Format {
                    path: self.path.into(),
                    message: format!(
                        "the channel list names column '{}' twice (as '{}' and '{}'; names compare without regard to case); name each channel once",
                        shown(&self.names[c]),
                        shown(&list[k]),
                        shown(n)
                    ),
                });
            }
            out.push(c);
        }
        Ok(out)
    }

    /// Whether column `i` is left out by `ignore` (`--ignore`).
    pub(crate) fn ignored(&self, ignore: &[String], i: usize) -> bool {
        ignore.iter().any(|g| same_name(g, &self.names[i]))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::{not_numeric_hint, shell_word, shown_bytes};

    #[test]
    fn long_text_is_cut_and_measured() {
        assert_eq!(shown("abc"), "abc");
        let long = "é".repeat(50_000);
        let s = shown(&long);
        assert!(
            s.starts_with(&"é".repeat(80)) && s.ends_with("… (100000 bytes)"),
            "{s}"
        );
        assert_eq!(shown_bytes(long.as_bytes()), s);
        assert_eq!(shown_bytes(b"a,b"), "a,b");
    }

    #[test]
    fn short_names_keep_whole_words_that_fit() {
        assert_eq!(
            short_name("od280/od315_of_diluted_wines", 24),
            "od280_od315_of_diluted"
        );
        assert_eq!(short_name("mean radius", 24), "mean_radius");
        assert_eq!(
            short_name("Température moteur (°C)", 24),
            "Température_moteur_C"
        );
        assert_eq!(short_name("x".repeat(30).as_str(), 24), "x".repeat(24));
        assert_eq!(short_name("é".repeat(20).as_str(), 24), "é".repeat(12));
        assert_eq!(short_name("//", 24), "channel");
        for s in [
            "a b c d e f g h i j k l m n",
            "___lead",
            "ünïcödé_wörds_ärë_lönger",
        ] {
            let n = short_name(s, 24);
            assert!(!n.is_empty() && n.len() <= 24, "{s}: {n}");
        }
    }

    #[test]
    fn shell_words_paste_into_a_shell() {
        assert_eq!(shell_word("serial_no"), "serial_no");
        assert_eq!(shell_word("serial number"), "'serial number'");
        assert_eq!(shell_word("a$b"), "'a$b'");
        assert_eq!(shell_word("it's"), r"'it'\''s'");
        assert_eq!(shell_word(""), "''");
    }

    #[test]
    fn an_id_column_holding_text_suggests_both_roles() {
        let h = not_numeric_hint("serial_number");
        assert!(h.contains("--unit-id serial_number") && h.contains("--ignore serial_number"));
        let h = not_numeric_hint("Serial Number");
        assert!(h.contains("--unit-id 'Serial Number'"), "{h}");
        assert!(!not_numeric_hint("voltage").contains("--unit-id"));
    }

    #[test]
    fn a_header_naming_one_column_in_two_cases_is_refused_unless_ignored() {
        let names: Vec<String> = ["unit_id", "Temp", "temp", "label"]
            .iter()
            .map(|s| s.to_string())
            .collect();
        let e = unique_names(Path::new("log.csv"), &names, &[])
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("columns 'Temp' and 'temp' have the same name")
                && e.contains("columns 2 and 3 of the header")
                && e.contains("rename one, or leave both out with --ignore Temp"),
            "{e}"
        );
        assert!(unique_names(Path::new("log.csv"), &names, &["TEMP".into()]).is_ok());
        let look = Lookup::new(Path::new("log.csv"), &names, &["temp".into()]).unwrap();
        assert!(
            look.pick(&Some("temp".into()), &[]).is_err(),
            "a role takes one of two"
        );
        assert!(look.columns(&["label".into(), "LABEL".into()]).is_err());
        assert_eq!(
            look.columns(&["label".into(), "unit_id".into()]).unwrap(),
            [3, 0]
        );
    }
}
