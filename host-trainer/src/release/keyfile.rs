//! Release key files: their layout, writing and strict reading.
//!
//! The layout is TOML with named fields (version 1):
//!
//! ```toml
//! # Linegate release key, public: give it to devices and to inspect.
//! format = "linegate-key"
//! version = 1
//! kind = "public"            # "private" in NAME.key
//! algorithm = "Ed25519"
//! key_id = "…"               # 16 lower-case hex digits: first 8 bytes of SHA-512(public key)
//! public_key = "…"           # 64 lower-case hex digits: the 32-byte Ed25519 public key
//! secret_seed = "…"          # NAME.key only: 64 hex digits, the 32-byte RFC 8032 seed
//! ```
//!
//! Hex rather than base64: the device build reads the public file without a TOML or base64
//! library, and the key id is printed in hex everywhere. Files of the older layout (a title
//! line, then `ed25519-secret <hex>`, or `ed25519-public <hex>` and `key-id <hex>`) are
//! still read, as strictly: one key line, and a key id that matches.
//!
//! A private key file must be open to its owner only (unix mode bits): a file that group or
//! others may read or write signs nothing.

use std::path::Path;

use ed25519_dalek::{SigningKey, VerifyingKey};

use sha2::{Digest, Sha512};
use shared_model::blob;

use crate::digest::{lower_hex, parse_hex};
use crate::error::InputError;

/// The `format` field's value.
pub const FORMAT: &str = "linegate-key";
/// The layout's version.
pub const VERSION: i64 = 1;
/// The only algorithm.
pub const ALGORITHM: &str = "Ed25519";

/// Largest key file read (a key file is a few hundred bytes).
const MAX_KEY_FILE: u64 = 4096;

/// Which half of a key pair a file holds.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
enum Kind {
    Public,
    Private,
}

impl Kind {
    fn name(self) -> &'static str {
        match self {
            Self::Public => "public",
            Self::Private => "private",
        }
    }
}

/// The key id of a public key: the first 8 bytes of its SHA-512 (FORMAT.md).
pub fn key_id(public: &VerifyingKey) -> [u8; blob::KEY_ID_LEN] {
    let h = Sha512::digest(public.as_bytes());
    let mut id = [0u8; blob::KEY_ID_LEN];
    id.copy_from_slice(&h[..blob::KEY_ID_LEN]);
    id
}

/// The private key file's text (NAME.key).
pub fn secret_text(key: &SigningKey) -> String {
    format!(
        "# Linegate release key, PRIVATE: keep it off test stations and out of version control.\n{}secret_seed = \"{}\"\n",
        common_fields(&key.verifying_key(), Kind::Private),
        lower_hex(key.as_bytes())
    )
}

/// The public key file's text (NAME.pub).
pub fn public_text(key: &VerifyingKey) -> String {
    format!(
        "# Linegate release key, public: give it to devices and to inspect.\n{}",
        common_fields(key, Kind::Public)
    )
}

fn common_fields(key: &VerifyingKey, kind: Kind) -> String {
    format!(
        "format = \"{FORMAT}\"\nversion = {VERSION}\nkind = \"{}\"\nalgorithm = \"{ALGORITHM}\"\nkey_id = \"{}\"\npublic_key = \"{}\"\n",
        kind.name(),
        lower_hex(&key_id(key)),
        lower_hex(key.as_bytes())
    )
}

fn bad(path: &Path, message: impl Into<String>) -> InputError {
    InputError::Format {
        path: path.into(),
        message: message.into(),
    }
}

/// Refuses a private key file that group or others may read or write.
#[cfg(unix)]
fn owner_only(path: &Path) -> Result<(), InputError> {
    use std::os::unix::fs::PermissionsExt;
    let mode = crate::input::regular_file(path)?.permissions().mode() & 0o777;
    if mode & 0o077 != 0 {
        return Err(InputError::KeyFileOpen {
            path: path.into(),
            mode,
        });
    }
    Ok(())
}

#[cfg(not(unix))]
fn owner_only(_: &Path) -> Result<(), InputError> {
    Ok(())
}

/// Reads a private key file (either layout).
///
/// # Errors
/// Open to group or others, unreadable, or not exactly one well-formed private key.
pub fn read_secret(path: &Path) -> Result<SigningKey, InputError> {
    owner_only(path)?;
    let text = crate::input::read_text(path, "key file", MAX_KEY_FILE)?;
    if is_old_layout(&text) {
        let seed = old_line(path, &text, "ed25519-secret")?
            .ok_or_else(|| bad(path, "no 'ed25519-secret' line: not a private key file"))?;
        return Ok(SigningKey::from_bytes(&seed));
    }
    let fields = parse(path, &text, Kind::Private)?;
    let key = SigningKey::from_bytes(&hex32(path, &fields, "secret_seed")?);
    check_public(path, &fields, &key.verifying_key())?;
    Ok(key)
}

/// Reads a public key file (either layout).
///
/// # Errors
/// Unreadable, not exactly one valid Ed25519 public key, or a key id that is not the key's.
pub fn read_public(path: &Path) -> Result<VerifyingKey, InputError> {
    let text = crate::input::read_text(path, "key file", MAX_KEY_FILE)?;
    if is_old_layout(&text) {
        let bytes = old_line(path, &text, "ed25519-public")?
            .ok_or_else(|| bad(path, "no 'ed25519-public' line: not a public key file"))?;
        let key = point(path, &bytes, "ed25519-public")?;
        let id = old_key_id(path, &text)?;
        if let Some(id) = id {
            same_id(path, "key-id", &id, &key)?;
        }
        return Ok(key);
    }
    let fields = parse(path, &text, Kind::Public)?;
    let key = point(path, &hex32(path, &fields, "public_key")?, "public_key")?;
    same_id(path, "key_id", &text_field(path, &fields, "key_id")?, &key)?;
    Ok(key)
}

/// A file of the older layout has a line starting with one of its key words.
fn is_old_layout(text: &str) -> bool {
    text.lines().any(|l| {
        l.starts_with("ed25519-secret ")
            || l.starts_with("ed25519-public ")
            || l.starts_with("key-id ")
    })
}

/// The one `name <64 hex>` line of an old-layout file, if any.
fn old_line(path: &Path, text: &str, name: &str) -> Result<Option<[u8; 32]>, InputError> {
    let mut found = Vec::new();
    for (n, l) in text.lines().enumerate() {
        if let Some(rest) = l.strip_prefix(name).and_then(|r| r.strip_prefix(' ')) {
            found.push((n + 1, rest.trim()));
        }
    }
    match found.as_slice() {
        [] => Ok(None),
        [(_, hex)] => parse_hex(hex)
            .and_then(|b| b.try_into().ok())
            .map(Some)
            .ok_or_else(|| bad(path, format!("'{name}' must be 64 hex digits"))),
        [(a, _), (b, _), ..] => Err(bad(
            path,
            format!(
                "'{name}' appears on line {a} and line {b}: a key file holds one key; which one is meant is not clear, so none is used"
            ),
        )),
    }
}

/// The old layout's `key-id` line, if any (at most one).
fn old_key_id(path: &Path, text: &str) -> Result<Option<String>, InputError> {
    let ids: Vec<&str> = text
        .lines()
        .filter_map(|l| l.strip_prefix("key-id "))
        .map(str::trim)
        .collect();
    match ids.as_slice() {
        [] => Ok(None),
        [id] => Ok(Some((*id).to_string())),
        _ => Err(bad(
            path,
            "'key-id' appears more than once: a key file holds one key",
        )),
    }
}

/// The fields of a new-layout file, checked: every field known, present, of its type, and
/// `format`, `version`, `kind`, `algorithm` as this layout's.
fn parse(path: &Path, text: &str, want: Kind) -> Result<toml::Table, InputError> {
    // The TOML reader itself refuses a field given twice (naming it, with line and column).
    let fields: toml::Table = text
        .parse()
        .map_err(|e: toml::de::Error| bad(path, format!("not a Linegate key file: {e}")))?;
    let mut known = vec![
        "format",
        "version",
        "kind",
        "algorithm",
        "key_id",
        "public_key",
    ];
    if want == Kind::Private {
        known.push("secret_seed");
    }
    let kind = text_field(path, &fields, "kind")?;
    if kind != want.name() {
        let hint = match want {
            Kind::Public => "give the .pub file, not the private key",
            Kind::Private => "give the private .key file to sign",
        };
        return Err(bad(
            path,
            format!(
                "field 'kind' is \"{kind}\", a {} key file is needed here: {hint}",
                want.name()
            ),
        ));
    }
    if let Some(unknown) = fields.keys().find(|k| !known.contains(&k.as_str())) {
        return Err(bad(
            path,
            format!(
                "unknown field '{unknown}' (a {} key file has: {})",
                want.name(),
                known.join(", ")
            ),
        ));
    }
    let format = text_field(path, &fields, "format")?;
    if format != FORMAT {
        return Err(bad(
            path,
            format!("field 'format' is \"{format}\", not \"{FORMAT}\": not a Linegate key file"),
        ));
    }
    match fields.get("version") {
        Some(toml::Value::Integer(VERSION)) => {}
        Some(v) => {
            return Err(bad(
                path,
                format!(
                    "field 'version' is {v}; this Linegate reads key files of version {VERSION}"
                ),
            ));
        }
        None => return Err(bad(path, "no field 'version'")),
    }
    let algorithm = text_field(path, &fields, "algorithm")?;
    if algorithm != ALGORITHM {
        return Err(bad(
            path,
            format!(
                "field 'algorithm' is \"{algorithm}\"; Linegate signs with \"{ALGORITHM}\" only"
            ),
        ));
    }
    Ok(fields)
}

/// A string field that must be present.
fn text_field(path: &Path, fields: &toml::Table, name: &str) -> Result<String, InputError> {
    match fields.get(name) {
        Some(toml::Value::String(s)) => Ok(s.clone()),
        Some(v) => Err(bad(
            path,
            format!("field '{name}' must be a quoted string, not {v}"),
        )),
        None => Err(bad(path, format!("no field '{name}'"))),
    }
}

/// A field of 32 bytes in 64 hex digits.
fn hex32(path: &Path, fields: &toml::Table, name: &str) -> Result<[u8; 32], InputError> {
    let s = text_field(path, fields, name)?;
    parse_hex(&s)
        .and_then(|b| b.try_into().ok())
        .ok_or_else(|| {
            bad(
                path,
                format!(
                    "field '{name}' must be 64 hex digits (32 bytes); it has {} characters",
                    s.chars().count()
                ),
            )
        })
}

/// A valid Ed25519 public key.
fn point(path: &Path, bytes: &[u8; 32], field: &str) -> Result<VerifyingKey, InputError> {
    VerifyingKey::from_bytes(bytes).map_err(|_| {
        bad(
            path,
            format!("field '{field}': the public key is not a valid Ed25519 key"),
        )
    })
}

/// The key id the file states must be the key's own.
fn same_id(path: &Path, field: &str, stated: &str, key: &VerifyingKey) -> Result<(), InputError> {
    let real = lower_hex(&key_id(key));
    if !stated.eq_ignore_ascii_case(&real) {
        return Err(bad(
            path,
            format!(
                "field '{field}' says key id {stated}, but the file's key has key id {real}; the file was edited or mixed from two keys: use the file `linegate key new` wrote"
            ),
        ));
    }
    Ok(())
}

/// A private file's `public_key` and `key_id` must be those of its seed.
fn check_public(path: &Path, fields: &toml::Table, key: &VerifyingKey) -> Result<(), InputError> {
    let stated = hex32(path, fields, "public_key")?;
    if &stated != key.as_bytes() {
        return Err(bad(
            path,
            format!(
                "field 'public_key' is {}, but the seed's public key is {}; the file was edited or mixed from two keys",
                lower_hex(&stated),
                lower_hex(key.as_bytes())
            ),
        ));
    }
    same_id(path, "key_id", &text_field(path, fields, "key_id")?, key)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// RFC 8032, section 7.1, TEST 1: secret key (seed) and public key, hex.
    const RFC8032_SEED: &str = "9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60";
    const RFC8032_PUBLIC: &str = "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a";

    fn rfc_key() -> SigningKey {
        SigningKey::from_bytes(&parse_hex(RFC8032_SEED).unwrap().try_into().unwrap())
    }

    /// Writes `text` as a file only its owner may read.
    fn private_file(dir: &Path, name: &str, text: &str) -> std::path::PathBuf {
        let p = dir.join(name);
        std::fs::write(&p, text).unwrap();
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            std::fs::set_permissions(&p, std::fs::Permissions::from_mode(0o600)).unwrap();
        }
        p
    }

    fn message(e: InputError) -> String {
        e.to_string()
    }

    #[test]
    fn rfc_8032_key_round_trips_through_the_new_layout_with_the_old_layouts_key_id() {
        // RFC 8032, section 7.1, TEST 1: this seed's public key is the RFC's.
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        let key = rfc_key();
        assert_eq!(lower_hex(key.verifying_key().as_bytes()), RFC8032_PUBLIC);
        let secret = private_file(d, "rfc.key", &secret_text(&key));
        let public = private_file(d, "rfc.pub", &public_text(&key.verifying_key()));
        let text = std::fs::read_to_string(&public).unwrap();
        assert!(
            text.contains(&format!("public_key = \"{RFC8032_PUBLIC}\"")),
            "{text}"
        );
        assert!(
            text.contains("format = \"linegate-key\"") && text.contains("algorithm = \"Ed25519\"")
        );
        assert_eq!(read_secret(&secret).unwrap().as_bytes(), key.as_bytes());
        assert_eq!(read_public(&public).unwrap(), key.verifying_key());
        // The older layout, written by hand as `key new` wrote it before: the same key and id.
        let id = lower_hex(&key_id(&key.verifying_key()));
        assert_eq!(id.len(), 16);
        let old_pub = private_file(
            d,
            "old.pub",
            &format!(
                "linegate release key, public\ned25519-public {RFC8032_PUBLIC}\nkey-id {id}\n"
            ),
        );
        let old_key = private_file(
            d,
            "old.key",
            &format!("linegate release key, PRIVATE\ned25519-secret {RFC8032_SEED}\n"),
        );
        assert_eq!(read_public(&old_pub).unwrap(), key.verifying_key());
        assert_eq!(read_secret(&old_key).unwrap().as_bytes(), key.as_bytes());
        assert!(text.contains(&format!("key_id = \"{id}\"")), "{text}");
        // Each reader refuses the other half.
        assert!(message(read_secret(&public).unwrap_err()).contains("field 'kind'"));
        assert!(message(read_public(&secret).unwrap_err()).contains("give the .pub file"));
    }

    #[test]
    fn malformed_key_files_are_refused_naming_file_and_field() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        let key = rfc_key();
        let public = public_text(&key.verifying_key());
        let secret = secret_text(&key);
        let id = lower_hex(&key_id(&key.verifying_key()));
        let cases: Vec<(&str, String, &str)> = vec![
            (
                "unknown field",
                public.clone() + "comment = \"x\"\n",
                "unknown field 'comment'",
            ),
            (
                "duplicate field",
                public.clone() + &format!("key_id = \"{id}\"\n"),
                "key_id",
            ),
            (
                "wrong algorithm",
                public.replace("\"Ed25519\"", "\"Ed448\""),
                "field 'algorithm' is \"Ed448\"",
            ),
            (
                "wrong format",
                public.replace("\"linegate-key\"", "\"other\""),
                "field 'format'",
            ),
            (
                "wrong version",
                public.replace("version = 1", "version = 2"),
                "field 'version' is 2",
            ),
            (
                "key id of another key",
                public.replace(&id, "0123456789abcdef"),
                "field 'key_id' says key id 0123456789abcdef, but the file's key has key id",
            ),
            (
                "short key",
                public.replace(RFC8032_PUBLIC, &RFC8032_PUBLIC[..62]),
                "field 'public_key' must be 64 hex digits",
            ),
            (
                "missing key",
                public.replace(&format!("public_key = \"{RFC8032_PUBLIC}\"\n"), ""),
                "no field 'public_key'",
            ),
            (
                "number for text",
                public.replace(&format!("\"{id}\""), "12"),
                "field 'key_id' must be a quoted string",
            ),
        ];
        for (what, text, want) in cases {
            let p = private_file(d, "k.pub", &text);
            let m = message(read_public(&p).unwrap_err());
            assert!(
                m.contains(&p.display().to_string()) && m.contains(want),
                "{what}: {m}"
            );
        }
        let cases: Vec<(&str, String, &str)> = vec![
            (
                "long seed",
                secret.replace(RFC8032_SEED, &format!("{RFC8032_SEED}00")),
                "field 'secret_seed' must be 64 hex digits",
            ),
            (
                "public key of another seed",
                secret.replace(RFC8032_SEED, &"11".repeat(32)),
                "field 'public_key' is",
            ),
            (
                "duplicate seed",
                secret.clone() + &format!("secret_seed = \"{}\"\n", "22".repeat(32)),
                "secret_seed",
            ),
            (
                "unknown field",
                secret.clone() + "note = 1\n",
                "unknown field 'note'",
            ),
        ];
        for (what, text, want) in cases {
            let p = private_file(d, "k.key", &text);
            let m = message(read_secret(&p).unwrap_err());
            assert!(
                m.contains(&p.display().to_string()) && m.contains(want),
                "{what}: {m}"
            );
        }
    }
}
