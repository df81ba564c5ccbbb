//! Opening inputs: regular files only, and files read whole only up to a size their kind
//! can have, so a FIFO, a device or `/dev/zero` is refused at once instead of hanging or
//! filling memory.

use std::io::Read;
use std::path::Path;

use crate::error::InputError;

/// Largest model file, channel sheet or report read whole (a 32-channel model is a few KiB).
pub const MAX_TEXT_FILE: u64 = 16 << 20;

/// Largest blob or flash image read whole (a blob is at most a few KiB; HEX doubles it).
pub const MAX_IMAGE_FILE: u64 = 1 << 20;

/// Refuses anything but a regular file (a log is read more than once).
///
/// # Errors
/// [`InputError::Io`] if it cannot be examined, [`InputError::NotAFile`] if it is not a
/// regular file.
pub fn regular_file(path: &Path) -> Result<std::fs::Metadata, InputError> {
    let meta = std::fs::metadata(path).map_err(|e| InputError::io(path, e))?;
    if !meta.is_file() {
        return Err(InputError::NotAFile { path: path.into() });
    }
    Ok(meta)
}

/// Reads a regular file whole, refusing one larger than `max` bytes (`kind` names it in
/// the message).
///
/// # Errors
/// As [`regular_file`], [`InputError::TooLarge`], or an I/O error.
pub fn read_bounded(path: &Path, kind: &'static str, max: u64) -> Result<Vec<u8>, InputError> {
    let meta = regular_file(path)?;
    let too_large = |size| InputError::TooLarge {
        path: path.into(),
        kind,
        size,
        max,
    };
    if meta.len() > max {
        return Err(too_large(meta.len()));
    }
    let mut out = Vec::new();
    // The file may grow between the check and the read: read one byte past the limit.
    std::fs::File::open(path)
        .and_then(|f| f.take(max + 1).read_to_end(&mut out))
        .map_err(|e| InputError::io(path, e))?;
    if out.len() as u64 > max {
        return Err(too_large(out.len() as u64));
    }
    Ok(out)
}

/// [`read_bounded`] as UTF-8 text.
///
/// # Errors
/// As [`read_bounded`], or [`InputError::Format`] if the text is not UTF-8.
pub fn read_text(path: &Path, kind: &'static str, max: u64) -> Result<String, InputError> {
    String::from_utf8(read_bounded(path, kind, max)?).map_err(|_| InputError::Format {
        path: path.into(),
        message: format!("not a {kind}: the file is not UTF-8 text"),
    })
}

/// Checks that no JSON object in `text` names a key twice, at any depth.
///
/// A JSON parser keeps one of two equal keys (serde_json the last) without a word, so a
/// file could carry a second `"bias"` that a reader other than ours takes; a record read
/// for a release must mean one thing. Returns the first repeated key, with the path to its
/// object (`provenance.training_log`) and serde_json's line and column.
///
/// # Errors
/// The repeated key as a message, or the parser's own message for text that is not JSON.
pub fn json_keys_unique(text: &str) -> Result<(), String> {
    use serde::de::{DeserializeSeed, Deserializer, Error as _, MapAccess, SeqAccess, Visitor};

    /// Walks one value; `path` names where it sits.
    struct Walk<'p>(&'p str);

    impl<'de> DeserializeSeed<'de> for Walk<'_> {
        type Value = ();
        fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
            d.deserialize_any(self)
        }
    }

    impl<'de> Visitor<'de> for Walk<'_> {
        type Value = ();
        fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
            f.write_str("a JSON value")
        }
        fn visit_bool<E>(self, _: bool) -> Result<(), E> {
            Ok(())
        }
        fn visit_i64<E>(self, _: i64) -> Result<(), E> {
            Ok(())
        }
        fn visit_u64<E>(self, _: u64) -> Result<(), E> {
            Ok(())
        }
        fn visit_f64<E>(self, _: f64) -> Result<(), E> {
            Ok(())
        }
        fn visit_str<E>(self, _: &str) -> Result<(), E> {
            Ok(())
        }
        fn visit_unit<E>(self) -> Result<(), E> {
            Ok(())
        }
        fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<(), A::Error> {
            let mut i = 0usize;
            loop {
                let here = format!("{}[{i}]", self.0);
                if seq.next_element_seed(Walk(&here))?.is_none() {
                    return Ok(());
                }
                i += 1;
            }
        }
        fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<(), A::Error> {
            let mut seen = std::collections::HashSet::new();
            while let Some(key) = map.next_key::<String>()? {
                let here = if self.0.is_empty() {
                    key.clone()
                } else {
                    format!("{}.{key}", self.0)
                };
                if !seen.insert(key) {
                    return Err(A::Error::custom(format!("the key '{here}' appears twice")));
                }
                map.next_value_seed(Walk(&here))?;
            }
            Ok(())
        }
    }

    let mut de = serde_json::Deserializer::from_str(text);
    Walk("").deserialize(&mut de).map_err(|e| e.to_string())?;
    de.end().map_err(|e| e.to_string())
}

/// The files a log role names: each path as given, or, for a pattern holding `*`, `?` or
/// `[` that names no file itself, the files it matches in name order. A pattern matching
/// nothing is an error: a role silently short of a day's file would change the release.
///
/// # Errors
/// [`InputError::Format`] for a pattern that is not valid or matches no file.
pub fn expand_files(paths: &[std::path::PathBuf]) -> Result<Vec<std::path::PathBuf>, InputError> {
    let mut out = Vec::new();
    for p in paths {
        let text = p.to_string_lossy();
        if p.exists() || !text.contains(['*', '?', '[']) {
            out.push(p.clone());
            continue;
        }
        let bad = |message: String| InputError::Format {
            path: p.clone(),
            message,
        };
        let mut found: Vec<std::path::PathBuf> = glob::glob(&text)
            .map_err(|e| bad(format!("not a file pattern: {e}")))?
            .filter_map(Result::ok)
            .filter(|f| f.is_file())
            .collect();
        if found.is_empty() {
            return Err(bad("the pattern matches no file".to_string()));
        }
        found.sort();
        out.extend(found);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::json_keys_unique;

    #[test]
    fn a_key_named_twice_is_found_at_any_depth() {
        assert!(json_keys_unique(r#"{"a": 1, "b": [{"c": 2}, {"c": 3}]}"#).is_ok());
        let e = json_keys_unique("{\"a\": 1,\n \"a\": 2}").unwrap_err();
        assert!(
            e.contains("'a' appears twice") && e.contains("line 2"),
            "{e}"
        );
        let e = json_keys_unique(r#"{"p": {"x": [1, {"k": 0, "k": 1}]}}"#).unwrap_err();
        assert!(e.contains("'p.x[1].k' appears twice"), "{e}");
        assert!(json_keys_unique("{} {}").is_err());
    }
}
