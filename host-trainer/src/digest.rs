//! How hashes and ids are written: lower-case hex, the SHA-256 of a file's bytes.
//!
//! A leaf module: ingest, training and release all name files and models by these strings,
//! and none of them owns the format.

use sha2::{Digest, Sha256};

/// Lower-case hex of `bytes`: how model ids and file hashes are written everywhere.
///
/// ```
/// assert_eq!(host_trainer::digest::lower_hex(&[0x0a, 0xff]), "0aff");
/// ```
pub fn lower_hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// The bytes `text` spells in hex, two digits a byte (either case); `None` unless every
/// character is an ASCII hex digit and there is an even number of them. Stricter than
/// `u8::from_str_radix`, which takes a sign.
///
/// ```
/// use host_trainer::digest::parse_hex;
/// assert_eq!(parse_hex("0aFF"), Some(vec![0x0a, 0xff]));
/// assert_eq!(parse_hex("+1"), None);
/// assert_eq!(parse_hex("abc"), None);
/// ```
pub fn parse_hex(text: &str) -> Option<Vec<u8>> {
    let b = text.as_bytes();
    if !b.len().is_multiple_of(2) || !b.iter().all(u8::is_ascii_hexdigit) {
        return None;
    }
    let digit = |c: u8| char::from(c).to_digit(16).unwrap_or(0) as u8;
    Some(
        b.chunks_exact(2)
            .map(|p| digit(p[0]) << 4 | digit(p[1]))
            .collect(),
    )
}

/// Lower-case hex SHA-256 of `bytes`.
///
/// ```
/// // FIPS 180-4 example "abc" (NIST CSRC example values).
/// assert_eq!(
///     host_trainer::digest::sha256_hex(b"abc"),
///     "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
/// );
/// ```
pub fn sha256_hex(bytes: &[u8]) -> String {
    lower_hex(&Sha256::digest(bytes))
}

/// Lower-case hex SHA-256 of the file at `path`, read in 1 MiB blocks.
///
/// # Errors
/// Any read error.
pub fn sha256_file(path: &std::path::Path) -> std::io::Result<String> {
    use std::io::Read;
    let mut file = std::fs::File::open(path)?;
    let mut hasher = Sha256::new();
    let mut block = vec![0u8; 1 << 20];
    loop {
        let n = file.read(&mut block)?;
        if n == 0 {
            break;
        }
        hasher.update(&block[..n]);
    }
    Ok(lower_hex(&hasher.finalize()))
}
