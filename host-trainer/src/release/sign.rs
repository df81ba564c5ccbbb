//! Signed releases: the owner's Ed25519 key pair (RFC 8032), signing a model blob at pack
//! time (format version 2, or 4 for a model with signal features), and checking a signature against a public key.
//!
//! Key files (TOML, `format = "linegate-key"`; written 0600, never printed) are read and
//! written by [`super::keyfile`]. Ed25519 signatures are deterministic, so the same inputs
//! give the same signed blob.

use ed25519_dalek::{Signature, Signer, SigningKey, VerifyingKey};
use shared_model::{CheckedModel, Inputs, Outcomes, blob};

use crate::digest::lower_hex;

/// A new key pair from the operating system's random source.
///
/// # Errors
/// When the system has no random source to give.
pub fn generate() -> Result<SigningKey, String> {
    use rand::RngCore;
    let mut seed = [0u8; 32];
    rand::rngs::OsRng
        .try_fill_bytes(&mut seed)
        .map_err(|e| format!("no system random source: {e}"))?;
    Ok(SigningKey::from_bytes(&seed))
}

pub use super::keyfile::{key_id, public_text, read_public, read_secret, secret_text};

/// The signed blob for `model` (format version 2, or 4 with signal features).
pub fn signed_blob<I: Inputs, K: Outcomes>(
    model: &CheckedModel<I, K>,
    key: &SigningKey,
) -> Vec<u8> {
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    // MAX_BLOB_LEN holds any signed blob, so encoding cannot fail here.
    let n = blob::encode_for_signing(model, key_id(&key.verifying_key()), &mut buf).unwrap_or(0);
    with_signature(&buf[..n], key)
}

/// The bytes to be signed, then their Ed25519 signature.
fn with_signature(signed: &[u8], key: &SigningKey) -> Vec<u8> {
    let sig: Signature = key.sign(signed);
    let mut out = signed.to_vec();
    out.extend_from_slice(&sig.to_bytes());
    out
}

/// Why a blob's signature was not accepted.
#[derive(Debug, PartialEq, Eq, thiserror::Error)]
pub enum SignatureError {
    /// A version-1 blob.
    #[error("the blob is not signed")]
    Unsigned,
    /// Signed by another key.
    #[error("the blob is signed by key {found}, not by key {expected}")]
    OtherKey {
        /// The blob's key id.
        found: String,
        /// The given key's id.
        expected: String,
    },
    /// The signature does not verify.
    #[error("the signature does not verify: the blob was changed after it was signed")]
    Bad,
}

/// Checks a blob's signature against `key` (strict RFC 8032 verification, as the device).
///
/// # Errors
/// [`SignatureError`].
pub fn verify(bytes: &[u8], key: &VerifyingKey) -> Result<(), SignatureError> {
    let s = blob::signature(bytes).ok_or(SignatureError::Unsigned)?;
    if s.key_id != key_id(key) {
        return Err(SignatureError::OtherKey {
            found: lower_hex(&s.key_id),
            expected: lower_hex(&key_id(key)),
        });
    }
    key.verify_strict(s.signed, &Signature::from_bytes(&s.signature))
        .map_err(|_| SignatureError::Bad)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// RFC 8032, section 7.1, TEST 1, TEST 2 and TEST 3: (secret key, public key,
    /// message, signature), hex.
    pub(crate) const RFC8032: [(&str, &str, &str, &str); 3] = [
        (
            "9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60",
            "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a",
            "",
            "e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e065224901555fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b",
        ),
        (
            "4ccd089b28ff96da9db6c346ec114e0f5b8a319f35aba624da8cf6ed4fb8a6fb",
            "3d4017c3e843895a92b70aa74d1b7ebc9c982ccf2ec4968cc0cd55f12af4660c",
            "72",
            "92a009a9f0d4cab8720e820b5f642540a2b27b5416503f8fb3762223ebdb69da085ac1e43e15996e458f3613d0f11d8c387b2eaeb4302aeeb00d291612bb0c00",
        ),
        (
            "c5aa8df43f9f837bedb7442f31dcb7b166d38535076f094b85ce3a2e0b4458f7",
            "fc51cd8e6218a1a38da47ed00230f0580816ed13ba3303ac5deb911548908025",
            "af82",
            "6291d657deec24024827e69c3abe01a30ce548a284743a445e3680d7db5ac3ac18ff9b538d16f290ae67f760984dc6594a7c15e9716ed28dc027beceea1ec40a",
        ),
    ];

    fn unhex(s: &str) -> Vec<u8> {
        (0..s.len() / 2)
            .map(|i| u8::from_str_radix(&s[2 * i..2 * i + 2], 16).unwrap())
            .collect()
    }

    #[test]
    fn rfc_8032_test_vectors_sign_and_verify() {
        // Source: RFC 8032, "Edwards-Curve Digital Signature Algorithm (EdDSA)", 7.1.
        for (sk, pk, msg, sig) in RFC8032 {
            let key = SigningKey::from_bytes(&unhex(sk).try_into().unwrap());
            assert_eq!(key.verifying_key().as_bytes().to_vec(), unhex(pk));
            let s = key.sign(&unhex(msg));
            assert_eq!(s.to_bytes().to_vec(), unhex(sig));
            assert!(key.verifying_key().verify_strict(&unhex(msg), &s).is_ok());
        }
    }

    #[test]
    fn key_files_round_trip() {
        let dir = tempfile::tempdir().unwrap();
        let key = SigningKey::from_bytes(&[7u8; 32]);
        std::fs::write(dir.path().join("k.key"), secret_text(&key)).unwrap();
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let private = std::fs::Permissions::from_mode(0o600);
            std::fs::set_permissions(dir.path().join("k.key"), private).unwrap();
        }
        std::fs::write(dir.path().join("k.pub"), public_text(&key.verifying_key())).unwrap();
        assert_eq!(
            read_secret(&dir.path().join("k.key")).unwrap().as_bytes(),
            key.as_bytes()
        );
        assert_eq!(
            read_public(&dir.path().join("k.pub")).unwrap(),
            key.verifying_key()
        );
        assert!(
            read_secret(&dir.path().join("k.pub")).is_err(),
            "a public key is not a private one"
        );
    }
}
