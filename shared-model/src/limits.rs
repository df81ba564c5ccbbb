//! The numbers every other module agrees on: capacities and the blob's layout constants.
//!
//! A leaf: `model`, `blob`, `error` and `kernel` all depend on it and it depends on none of
//! them, so the format version and the capacities have one home. The layout itself is
//! specified in `shared-model/FORMAT.md`; any change to it bumps [`FORMAT_VERSION`].

/// Most channels a model may fuse. Fixed at compile time so the device needs no heap.
pub const MAX_CHANNELS: usize = 32;

/// Most samples in one signal window (a feature's overflow proof covers any length up to it).
pub const MAX_WINDOW: usize = 4096;

/// Longest channel name, in UTF-8 bytes.
pub const NAME_CAPACITY: usize = 24;

/// The four bytes every Linegate blob starts with.
pub const MAGIC: [u8; 4] = *b"LGMB";
/// The blob layout version of an unsigned blob.
pub const FORMAT_VERSION: u16 = 1;
/// The blob layout version of a signed blob: version 1's bytes, then a signature section.
pub const SIGNED_VERSION: u16 = 2;
/// The blob layout version of a model with signal features: version 1's payload followed
/// by the signal section (the signals' windows and each channel's source).
pub const SIGNAL_VERSION: u16 = 3;
/// A signed blob of a model with signal features: version 3's bytes, then a signature
/// section.
pub const SIGNED_SIGNAL_VERSION: u16 = 4;
/// The blob layout version of a model of several classes: version 1's payload, then the
/// signal section (empty for a model of readings), then the class section.
pub const CLASS_VERSION: u16 = 5;
/// A signed blob of a model of several classes: version 5's bytes, then a signature section.
pub const SIGNED_CLASS_VERSION: u16 = 6;
/// Most classes (rows of weights) one model may decide between.
pub const MAX_CLASSES: usize = 8;
/// Most signals (sample windows) one model may reduce to features.
pub const MAX_SIGNALS: usize = 8;
/// Bytes of a key id: the first 8 bytes of SHA-512 of the 32-byte Ed25519 public key.
pub const KEY_ID_LEN: usize = 8;
/// Bytes of an Ed25519 signature (RFC 8032).
pub const SIGNATURE_LEN: usize = 64;
/// Bytes of the signature section of a version-2 blob: key id, then signature.
pub const SIGNATURE_SECTION_LEN: usize = KEY_ID_LEN + SIGNATURE_LEN;
/// Bytes before the payload: magic, version, channel count, payload length.
pub const HEADER_LEN: usize = 9;
/// Bytes of the trailing CRC-32.
pub const CRC_LEN: usize = 4;
/// Largest payload a valid model can need (every varint at its longest, every name full):
/// the model, then the signal section (each signal: three i32 and a u16; each source: tag,
/// signal index, feature tag and coefficient), then the class section (GO index, two gaps,
/// each row: name, bias, one weight per channel).
pub const MAX_PAYLOAD_LEN: usize = 16
    + 5
    + 3 * 10
    + 1
    + MAX_CHANNELS * (1 + NAME_CAPACITY + 5 * 5 + 1)
    + 1
    + MAX_SIGNALS * (3 * 5 + 3)
    + 1
    + MAX_CHANNELS * (5 + 1 + 5 + 5)
    + 1
    + 2 * 10
    + 1
    + MAX_CLASSES * (1 + NAME_CAPACITY + 10 + 1 + MAX_CHANNELS * 5);
/// A buffer of this size holds any blob, signed or not.
pub const MAX_BLOB_LEN: usize = HEADER_LEN + MAX_PAYLOAD_LEN + CRC_LEN + SIGNATURE_SECTION_LEN;
