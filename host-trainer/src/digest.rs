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
