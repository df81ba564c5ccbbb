//! Names from a file, as Linegate compares them.
//!
//! Column, channel, signal and feature names compare without regard to ASCII case
//! everywhere (a log's header, a Parquet schema, a channel sheet, `--channels` and
//! `--ignore`): exports change the case of names, and `a` and `A` as two channels would
//! let one sheet entry scale both. How a name is echoed ([`shown`], `shell_word`) lives in
//! `error`, below every module that words a message.

use std::collections::HashMap;
use std::path::Path;

use crate::error::{InputError, shown};

/// Whether two names are the same name (ASCII case-insensitively).
pub(crate) fn same_name(a: &str, b: &str) -> bool {
    a.eq_ignore_ascii_case(b)
}

/// The key a set of names is kept under: equal exactly for [`same_name`]s.
pub(crate) fn name_key(name: &str) -> String {
    name.to_ascii_lowercase()
}

/// Refuses a header (or schema) holding one name twice, naming both columns as spelled.
/// A map, not a scan per name: a header of 100,000 columns must not take minutes.
pub(crate) fn unique_names(path: &Path, names: &[String]) -> Result<(), InputError> {
    let mut seen = HashMap::with_capacity(names.len());
    for (i, n) in names.iter().enumerate() {
        if let Some(&j) = seen.get(&name_key(n)) {
            let first: &String = &names[j];
            return Err(InputError::DuplicateHeader {
                path: path.into(),
                first: shown(first),
                second: shown(n),
            });
        }
        seen.insert(name_key(n), i);
    }
    Ok(())
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
}
