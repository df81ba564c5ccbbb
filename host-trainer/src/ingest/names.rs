//! Names and cells from a file, as Linegate compares them and as its messages echo them.
//!
//! Column, channel, signal and feature names compare without regard to ASCII case
//! everywhere (a log's header, a Parquet schema, a channel sheet, `--channels` and
//! `--ignore`): exports change the case of names, and `a` and `A` as two channels would
//! let one sheet entry scale both. Anything echoed from a file is cut to a readable length,
//! so a 100 KB name does not bury the message.

use std::collections::HashMap;
use std::path::Path;

use crate::error::InputError;

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

/// Characters of a name or cell echoed whole; longer ones are cut.
const SHOWN_CHARS: usize = 80;

/// `text` from a file as a message echoes it: whole up to 80 characters, else its first 80
/// followed by `… (N bytes)`.
pub(crate) fn shown(text: &str) -> String {
    match text.char_indices().nth(SHOWN_CHARS) {
        None => text.to_string(),
        Some((cut, _)) => format!("{}… ({} bytes)", &text[..cut], text.len()),
    }
}

/// [`shown`] for bytes, decoded lossily.
pub(crate) fn shown_bytes(bytes: &[u8]) -> String {
    // No more than 4 bytes a character: decode only what can be shown.
    let head = String::from_utf8_lossy(&bytes[..bytes.len().min(4 * SHOWN_CHARS + 4)]);
    match head.char_indices().nth(SHOWN_CHARS) {
        None if bytes.len() <= 4 * SHOWN_CHARS + 4 => head.into_owned(),
        None => format!("{head}… ({} bytes)", bytes.len()),
        Some((cut, _)) => format!("{}… ({} bytes)", &head[..cut], bytes.len()),
    }
}

/// `name` as a shell argument: as it is when it holds only characters no shell treats
/// specially, else in single quotes (a quote inside written `'\''`), so that a hint such as
/// `--ignore 'serial number'` pastes into a shell. A name too long to echo is cut as
/// [`shown`] cuts it: no one pastes 100 KB.
pub(crate) fn shell_word(name: &str) -> String {
    if name.chars().nth(SHOWN_CHARS).is_some() {
        return shown(name);
    }
    let plain = !name.is_empty()
        && name
            .bytes()
            .all(|b| b.is_ascii_alphanumeric() || b"_-.,:/+=@%".contains(&b));
    if plain {
        name.to_string()
    } else {
        format!("'{}'", name.replace('\'', r"'\''"))
    }
}

/// Whether a column name reads like a unit's id (`serial_number`, `unit`, `DUT id`), for
/// hints: such a column holding text is more likely the unit id than a channel.
fn looks_like_id(name: &str) -> bool {
    let key = name_key(name);
    ["serial", "unit", "uuid", "barcode", "device"]
        .iter()
        .any(|w| key.contains(w))
        || key
            .split(|c: char| !c.is_ascii_alphanumeric())
            .any(|part| matches!(part, "id" | "sn" | "uid" | "dut"))
}

/// What to do about a cell of channel `column` that is not a number: leave the column out,
/// or skip the row; for an id-looking column, name it as the unit id.
pub(crate) fn not_numeric_hint(column: &str) -> String {
    let q = shell_word(column);
    if looks_like_id(column) {
        format!(
            "if '{}' identifies the units, name it with --unit-id {q}; else exclude the column with --ignore {q}, or the row with --skip-bad-rows",
            shown(column)
        )
    } else {
        format!("exclude the column with --ignore {q}, or the row with --skip-bad-rows")
    }
}

/// What to do about an empty cell of channel `column`.
pub(crate) fn empty_cell_hint(column: &str) -> String {
    format!(
        "fill in the reading, leave the column out with --ignore {}, or skip the row with --skip-bad-rows",
        shell_word(column)
    )
}

#[cfg(test)]
mod tests {
    use super::*;

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
