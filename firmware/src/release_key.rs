//! The release key a device accepts: signed model blobs (format version 2) are loaded only
//! when their Ed25519 signature (RFC 8032) verifies against it.

use ed25519_dalek::{Signature, VerifyingKey};
use sha2::{Digest, Sha512};
use shared_model::{DecodeError, blob};

/// A public key compiled into the firmware (or given by the board), with its key id.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ReleaseKey {
    key: VerifyingKey,
    id: [u8; blob::KEY_ID_LEN],
}

impl ReleaseKey {
    /// The key from its 32 bytes (RFC 8032 encoding); `None` if they are not a valid point.
    pub fn from_bytes(bytes: &[u8; 32]) -> Option<Self> {
        let key = VerifyingKey::from_bytes(bytes).ok()?;
        Some(Self {
            key,
            id: key_id(bytes),
        })
    }

    /// The key id: the first 8 bytes of SHA-512 of the public key.
    pub fn id(&self) -> [u8; blob::KEY_ID_LEN] {
        self.id
    }

    /// Checks the signature section of a whole blob (its length taken from its header).
    ///
    /// # Errors
    /// [`DecodeError::Unsigned`] for a blob without a signature section,
    /// [`DecodeError::UnknownKey`] if another key signed it, [`DecodeError::BadSignature`]
    /// if the signature does not verify (strict verification: no malleable signatures).
    pub fn verify(&self, blob_bytes: &[u8]) -> Result<(), DecodeError> {
        let s = blob::signature(blob_bytes).ok_or(DecodeError::Unsigned)?;
        if s.key_id != self.id {
            return Err(DecodeError::UnknownKey);
        }
        self.verify_bytes(s.signed, &s.signature)
    }

    /// Checks an Ed25519 signature over `message` (strict RFC 8032 verification).
    ///
    /// # Errors
    /// [`DecodeError::BadSignature`] if it does not verify.
    pub fn verify_bytes(&self, message: &[u8], signature: &[u8; 64]) -> Result<(), DecodeError> {
        self.key
            .verify_strict(message, &Signature::from_bytes(signature))
            .map_err(|_| DecodeError::BadSignature)
    }
}

/// The key id of a 32-byte Ed25519 public key: the first 8 bytes of its SHA-512.
pub fn key_id(public_key: &[u8; 32]) -> [u8; blob::KEY_ID_LEN] {
    let h = Sha512::digest(public_key);
    let mut id = [0u8; blob::KEY_ID_LEN];
    for (o, b) in id.iter_mut().zip(h.iter()) {
        *o = *b;
    }
    id
}
