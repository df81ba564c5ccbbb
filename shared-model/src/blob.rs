//! The model blob: the bytes that travel to flash.
//!
//! | offset  | size | field                                                    |
//! |---------|------|----------------------------------------------------------|
//! | 0       | 4    | magic `LGMB` (`4C 47 4D 42`)                             |
//! | 4       | 2    | format version, u16 little-endian ([`FORMAT_VERSION`])   |
//! | 6       | 1    | channel count                                            |
//! | 7       | 2    | payload length `N`, u16 little-endian                    |
//! | 9       | N    | postcard encoding of [`FixedModel`]                      |
//! | 9 + N   | 4    | CRC-32/ISO-HDLC of bytes `0 .. 9+N`, little-endian       |
//!
//! One encoder and one decoder serve both input kinds ([`Inputs`]). A model with signal
//! features (a non-empty [`SignalSection`]) is written as format version 3 (4 signed): the
//! same bytes, with the signal section after the model in the payload; any other model as
//! version 1 (2 signed), whatever its kind. [`decode`] into a
//! `CheckedModel<SignalSection>` reads every version (1 and 2 with an empty section); into
//! a `CheckedModel` of [`Readings`](crate::model::Readings) versions 1 and 2 only
//! ([`DecodeError::Signals`] for 3 and 4: a station that passes only readings must not
//! load a model that needs windows). A model of several classes (a non-empty
//! [`ClassSection`]) is written as version 5 (6 signed): version 1's payload, the signal
//! section (empty for a model of readings), then the class section. [`decode`] gives a
//! two-sided model and refuses 5 and 6 ([`DecodeError::Classes`]); [`decode_classes`]
//! reads every version into a model whose class section is empty for versions 1 to 4.
//! The full specification, with the payload's field order, is in
//! `shared-model/FORMAT.md`. Stability rule: any change to this layout or to
//! the payload's fields bumps [`FORMAT_VERSION`]; a decoder refuses versions
//! it does not know.

use crate::classes::ClassSection;
use crate::error::{DecodeError, EncodeError};
use crate::features::SignalSection;
use crate::limits::MAX_CHANNELS;
pub use crate::limits::{
    CLASS_VERSION, CRC_LEN, FORMAT_VERSION, HEADER_LEN, KEY_ID_LEN, MAGIC, MAX_BLOB_LEN,
    MAX_PAYLOAD_LEN, SIGNAL_VERSION, SIGNATURE_LEN, SIGNATURE_SECTION_LEN, SIGNED_CLASS_VERSION,
    SIGNED_SIGNAL_VERSION, SIGNED_VERSION,
};
use crate::model::{ChannelSpec, CheckedModel, FixedModel, Inputs, Outcomes};

/// CRC-32/ISO-HDLC (poly 0x04C11DB7, reflected, init and xorout 0xFFFFFFFF): the CRC of
/// zip, PNG and Ethernet. Bitwise, without a table, to keep ~1 KiB out of device flash;
/// blobs are small and checked once at start-up.
pub const CRC32: crc::Crc<u32, crc::NoTable> =
    crc::Crc::<u32, crc::NoTable>::new(&crc::CRC_32_ISO_HDLC);

/// The blob's id: the CRC-32 it stores (its last four bytes, little-endian), which the
/// device prints beside the model id. One float model quantised at other word lengths or
/// with another RECHECK band gives another blob and so another id. It tells blobs apart;
/// like the CRC it is, it does not protect against a deliberate rewrite.
///
/// `None` if `blob` is shorter than a header and CRC.
///
/// ```
/// use shared_model::{blob, CheckedModel, FixedModel};
/// let m = CheckedModel::new(FixedModel::example_two_channel()).unwrap();
/// let mut buf = [0u8; blob::MAX_BLOB_LEN];
/// let n = blob::encode(&m, &mut buf).unwrap();
/// let crc = blob::CRC32.checksum(&buf[..n - blob::CRC_LEN]);
/// assert_eq!(blob::blob_id(&buf[..n]), Some(crc));
/// ```
pub fn blob_id(blob: &[u8]) -> Option<u32> {
    let h = Header::read(blob).ok()?;
    let at = HEADER_LEN + usize::from(h.payload_len);
    let crc: &[u8; CRC_LEN] = blob.get(at..at + CRC_LEN)?.try_into().ok()?;
    Some(u32::from_le_bytes(*crc))
}

/// The signature section of a version-2 blob, and the bytes it signs.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Signed<'a> {
    /// Which key signed: the first 8 bytes of SHA-512 of its 32-byte public key.
    pub key_id: [u8; KEY_ID_LEN],
    /// The Ed25519 signature (RFC 8032) over `signed`.
    pub signature: [u8; SIGNATURE_LEN],
    /// Every byte before the signature: header, payload, CRC and key id.
    pub signed: &'a [u8],
}

/// The signature section of `blob`, or `None` if it is not a whole signed (version 2 or
/// 4) blob. The
/// signature is not checked here: that needs the public key (firmware, `linegate inspect`).
pub fn signature(blob: &[u8]) -> Option<Signed<'_>> {
    let h = Header::read(blob).ok()?;
    if !h.is_signed() || blob.len() != h.blob_len() {
        return None;
    }
    let crc_end = HEADER_LEN + usize::from(h.payload_len) + CRC_LEN;
    let key_id = blob.get(crc_end..crc_end + KEY_ID_LEN)?.try_into().ok()?;
    let signed = blob.get(..crc_end + KEY_ID_LEN)?;
    let signature = blob.get(crc_end + KEY_ID_LEN..)?.try_into().ok()?;
    Some(Signed {
        key_id,
        signature,
        signed,
    })
}

/// Writes a signed blob for `model` (version 2, or 4 for a model with signal features) up
/// to and including `key_id` into `out` and returns that length: the bytes to sign. The
/// caller writes the 64-byte signature right after them, at `out[n..n + SIGNATURE_LEN]`.
///
/// # Errors
/// [`EncodeError::BufferTooSmall`] if `out` cannot hold the whole signed blob.
pub fn encode_for_signing<I: Inputs, K: Outcomes>(
    model: &CheckedModel<I, K>,
    key_id: [u8; KEY_ID_LEN],
    out: &mut [u8],
) -> Result<usize, EncodeError> {
    let n = encode_version(model, true, out)?;
    sign_section(n, key_id, out)
}

/// Writes `key_id` after the `n` bytes of an unsigned blob and checks room for the
/// signature: the length to sign.
fn sign_section(n: usize, key_id: [u8; KEY_ID_LEN], out: &mut [u8]) -> Result<usize, EncodeError> {
    out.get_mut(n..n + KEY_ID_LEN)
        .ok_or(EncodeError::BufferTooSmall)?
        .copy_from_slice(&key_id);
    if out.len() < n + SIGNATURE_SECTION_LEN {
        return Err(EncodeError::BufferTooSmall);
    }
    Ok(n + KEY_ID_LEN)
}

/// Writes the blob for `model` into `out` (version 1, or 3 for a model with signal
/// features) and returns its length.
///
/// # Errors
/// [`EncodeError::BufferTooSmall`] if `out` is shorter than the blob; a
/// buffer of [`MAX_BLOB_LEN`] bytes always suffices.
pub fn encode<I: Inputs, K: Outcomes>(
    model: &CheckedModel<I, K>,
    out: &mut [u8],
) -> Result<usize, EncodeError> {
    encode_version(model, false, out)
}

/// Header, payload (the model, then its signal section if it has one) and CRC; the version
/// says whether a section and a signature section follow (one layout per model: a model
/// without signals is version 1 or 2 whatever its kind).
fn encode_version<I: Inputs, K: Outcomes>(
    model: &CheckedModel<I, K>,
    signed: bool,
    out: &mut [u8],
) -> Result<usize, EncodeError> {
    let classes = model.classes();
    let signals = model.inputs().section();
    let version = match (classes.is_some(), signals.is_some(), signed) {
        (true, _, false) => CLASS_VERSION,
        (true, _, true) => SIGNED_CLASS_VERSION,
        (false, false, false) => FORMAT_VERSION,
        (false, false, true) => SIGNED_VERSION,
        (false, true, false) => SIGNAL_VERSION,
        (false, true, true) => SIGNED_SIGNAL_VERSION,
    };
    // Versions 5 and 6 always carry the signal section, empty for a model of readings.
    let empty = SignalSection::default();
    let signals = if classes.is_some() {
        Some(signals.unwrap_or(&empty))
    } else {
        signals
    };
    let (header, rest) = out
        .split_at_mut_checked(HEADER_LEN)
        .ok_or(EncodeError::BufferTooSmall)?;
    let mut n = postcard::to_slice(model.model(), rest)
        .map_err(|_| EncodeError::BufferTooSmall)?
        .len();
    if let Some(signals) = signals {
        let section = rest.get_mut(n..).ok_or(EncodeError::BufferTooSmall)?;
        n += postcard::to_slice(signals, section)
            .map_err(|_| EncodeError::BufferTooSmall)?
            .len();
    }
    if let Some(classes) = classes {
        let section = rest.get_mut(n..).ok_or(EncodeError::BufferTooSmall)?;
        n += postcard::to_slice(classes, section)
            .map_err(|_| EncodeError::BufferTooSmall)?
            .len();
    }
    let len16 = u16::try_from(n).map_err(|_| EncodeError::BufferTooSmall)?;
    let count = u8::try_from(model.channel_count()).map_err(|_| EncodeError::BufferTooSmall)?;
    let [m0, m1, m2, m3] = MAGIC;
    let [v0, v1] = version.to_le_bytes();
    let [l0, l1] = len16.to_le_bytes();
    header.copy_from_slice(&[m0, m1, m2, m3, v0, v1, count, l0, l1]);
    let body_len = HEADER_LEN + n;
    let total = body_len + CRC_LEN;
    let body = out.get(..body_len).ok_or(EncodeError::BufferTooSmall)?;
    let crc = CRC32.checksum(body);
    out.get_mut(body_len..total)
        .ok_or(EncodeError::BufferTooSmall)?
        .copy_from_slice(&crc.to_le_bytes());
    Ok(total)
}

/// Decodes and validates a blob into a two-sided model of input kind `I`. Never panics,
/// whatever the bytes.
///
/// `CheckedModel<SignalSection>` takes versions 1 to 4 (1 and 2 with an empty section);
/// `CheckedModel` (readings) versions 1 and 2, and refuses 3 and 4 before reading further.
/// Versions 5 and 6 (several classes) are refused: [`decode_classes`] reads them.
///
/// # Errors
/// The first problem found, in this order: [`DecodeError::Truncated`],
/// [`DecodeError::BadMagic`], [`DecodeError::UnsupportedVersion`],
/// [`DecodeError::ChannelOverCapacity`], [`DecodeError::Classes`],
/// [`DecodeError::Signals`] (readings only), [`DecodeError::TrailingBytes`],
/// [`DecodeError::CrcMismatch`], [`DecodeError::MalformedPayload`],
/// [`DecodeError::InconsistentLengths`] (also a version-3 blob whose section is empty),
/// [`DecodeError::Invalid`] (the model's or the section's [`ModelError`](crate::ModelError)).
pub fn decode<I: Inputs>(bytes: &[u8]) -> Result<CheckedModel<I>, DecodeError> {
    decode_into(bytes)
}

/// Decodes and validates a blob of any version into a model that may decide between
/// several classes: versions 1 to 4 give an empty class section (two-sided), 5 and 6 the
/// blob's classes. Never panics, whatever the bytes.
///
/// # Errors
/// As [`decode`], without [`DecodeError::Classes`]; a version-5 blob whose class section
/// is empty is [`DecodeError::InconsistentLengths`], and one whose signal section is not
/// empty read into readings is [`DecodeError::Signals`].
pub fn decode_classes<I: Inputs>(
    bytes: &[u8],
) -> Result<CheckedModel<I, ClassSection>, DecodeError> {
    decode_into(bytes)
}

/// Decodes and validates a blob into a model of input kind `I` and outcome kind `K`: what
/// [`decode`] does for [`TwoSided`](crate::TwoSided) and [`decode_classes`] for
/// [`ClassSection`], for code generic over the outcome kind (a station of either kind).
/// Never panics, whatever the bytes.
///
/// # Errors
/// As [`decode`] (`K` two-sided) or [`decode_classes`] (`K` a class section).
#[inline(always)]
pub fn decode_as<I: Inputs, K: Outcomes>(bytes: &[u8]) -> Result<CheckedModel<I, K>, DecodeError> {
    decode_into(bytes)
}

/// [`decode`] and [`decode_classes`]: one reader for every version and kind.
#[inline(always)]
fn decode_into<I: Inputs, K: Outcomes>(bytes: &[u8]) -> Result<CheckedModel<I, K>, DecodeError> {
    let header = Header::read(bytes)?;
    if header.has_classes() && !K::CLASSES {
        return Err(DecodeError::Classes);
    }
    // A version-5 blob of readings carries an empty signal section: it is refused only if
    // the section turns out not to be empty.
    if header.has_signals() && !header.has_classes() && !I::WINDOWS {
        return Err(DecodeError::Signals);
    }
    let payload = checked_payload(bytes, header)?;
    // The model is built where it is returned and filled in place: a model of several
    // classes moved through this frame would be a copy of about 2 KiB each time.
    let mut checked = CheckedModel::<I, K>::unchecked();
    let (model, inputs, outcomes) = checked.parts_mut();
    let mut rest = take_model_into(payload, model)?;
    // `I::WINDOWS` first: for readings the section's code drops out. The section is read
    // in place: a section moved through an `Option` would be one more copy on the stack.
    if header.has_signals() {
        match inputs.section_mut() {
            Some(section) => {
                rest = take_signals(rest, section)?;
                // A model without signals is written as version 1 (or 5): one layout per model.
                if section.is_empty() && !header.has_classes() {
                    return Err(DecodeError::InconsistentLengths);
                }
            }
            None => rest = skip_empty_signals(rest)?,
        }
    }
    if header.has_classes() {
        let section = outcomes.classes_mut().ok_or(DecodeError::Classes)?;
        rest = take_classes(rest, section)?;
        // A two-sided model is written as versions 1 to 4: one layout per model.
        if section.is_empty() {
            return Err(DecodeError::InconsistentLengths);
        }
    }
    if !rest.is_empty() || model.channels.len() != usize::from(header.channel_count) {
        return Err(DecodeError::InconsistentLengths);
    }
    checked.check_in_place()?;
    Ok(checked)
}

/// The payload of a blob whose length and CRC check.
#[inline(always)]
fn checked_payload(bytes: &[u8], header: Header) -> Result<&[u8], DecodeError> {
    let body_len = HEADER_LEN + usize::from(header.payload_len);
    let total = header.blob_len();
    if bytes.len() < total {
        return Err(DecodeError::Truncated {
            needed: total,
            got: bytes.len(),
        });
    }
    if bytes.len() > total {
        return Err(DecodeError::TrailingBytes {
            expected: total,
            got: bytes.len(),
        });
    }
    let (body, rest) = bytes
        .split_at_checked(body_len)
        .ok_or(DecodeError::Truncated {
            needed: total,
            got: bytes.len(),
        })?;
    let crc_bytes: &[u8; CRC_LEN] =
        rest.get(..CRC_LEN)
            .and_then(|c| c.try_into().ok())
            .ok_or(DecodeError::Truncated {
                needed: total,
                got: bytes.len(),
            })?;
    let stored = u32::from_le_bytes(*crc_bytes);
    let computed = CRC32.checksum(body);
    if stored != computed {
        return Err(DecodeError::CrcMismatch { stored, computed });
    }
    body.get(HEADER_LEN..).ok_or(DecodeError::MalformedPayload)
}

/// One postcard value from the front of `bytes`.
fn take<'a, T: serde::Deserialize<'a>>(bytes: &'a [u8]) -> Result<(T, &'a [u8]), DecodeError> {
    postcard::take_from_bytes(bytes).map_err(|_| DecodeError::MalformedPayload)
}

/// The payload's model, field by field in declaration order (exactly what serde's derive
/// reads for [`FixedModel`]: a struct is its fields in order, a sequence its varint length
/// then its elements), with each channel pushed straight into the model. Reading the whole
/// struct through serde builds the channel list in several stack frames (about 15 KiB on
/// a Cortex-M, too much for a 16 KiB part); this reads it in one, into a model the caller
/// holds (its defaults overwritten field by field).
#[inline(always)]
fn take_model_into<'a>(payload: &'a [u8], m: &mut FixedModel) -> Result<&'a [u8], DecodeError> {
    let rest = payload;
    let rest = {
        let (v, r) = take(rest)?;
        m.model_id = v;
        r
    };
    let rest = {
        let (v, r) = take(rest)?;
        m.audit = v;
        r
    };
    let (input_bits, rest) = take(rest)?;
    let (weight_bits, rest) = take(rest)?;
    let (weight_frac_bits, rest) = take(rest)?;
    let (acc_bits, rest) = take(rest)?;
    let (bias, rest) = take(rest)?;
    let (nogo_max, rest) = take(rest)?;
    let (go_min, rest) = take(rest)?;
    (m.input_bits, m.weight_bits, m.weight_frac_bits, m.acc_bits) =
        (input_bits, weight_bits, weight_frac_bits, acc_bits);
    (m.bias, m.nogo_max, m.go_min) = (bias, nogo_max, go_min);
    let (count, mut rest): (u32, _) = take(rest)?;
    for _ in 0..count {
        let (c, r) = take::<ChannelSpec>(rest)?;
        m.channels
            .push(c)
            .map_err(|_| DecodeError::MalformedPayload)?;
        rest = r;
    }
    Ok(rest)
}

/// The model of a payload and the bytes after it (`take_model_into` on a fresh model; the
/// tests check it against serde's reader).
#[cfg(test)]
fn take_model(payload: &[u8]) -> Result<(FixedModel, &[u8]), DecodeError> {
    let mut m = FixedModel::default();
    let rest = take_model_into(payload, &mut m)?;
    Ok((m, rest))
}

/// The signal section after the model (format version 3), element by element into
/// `section`, as [`take_model_into`] reads the channels: serde's reader for the whole section
/// would build its lists in frames of their own. Kept out of line so that loading a
/// version-1 blob does not reserve its stack.
#[inline(never)]
fn take_signals<'a>(bytes: &'a [u8], section: &mut SignalSection) -> Result<&'a [u8], DecodeError> {
    let (count, mut rest): (u32, _) = take(bytes)?;
    for _ in 0..count {
        let (spec, r) = take(rest)?;
        section
            .signals
            .push(spec)
            .map_err(|_| DecodeError::MalformedPayload)?;
        rest = r;
    }
    let (count, mut rest): (u32, _) = take(rest)?;
    for _ in 0..count {
        let (source, r) = take(rest)?;
        section
            .sources
            .push(source)
            .map_err(|_| DecodeError::MalformedPayload)?;
        rest = r;
    }
    Ok(rest)
}

/// The signal section of a version-5 blob read where only readings are passed: it must be
/// empty (no signals, no sources), else the model needs windows.
fn skip_empty_signals(bytes: &[u8]) -> Result<&[u8], DecodeError> {
    let (signals, rest): (u32, _) = take(bytes)?;
    let (sources, rest): (u32, _) = take(rest)?;
    if signals != 0 || sources != 0 {
        return Err(DecodeError::Signals);
    }
    Ok(rest)
}

/// The class section (format version 5) into `section`: its three numbers, then each row
/// pushed in place (a row is small; the whole section read by serde would be built in
/// frames of its own).
#[inline(never)]
fn take_classes<'a>(bytes: &'a [u8], section: &mut ClassSection) -> Result<&'a [u8], DecodeError> {
    let (go, rest) = take(bytes)?;
    let (go_gap, rest) = take(rest)?;
    let (class_gap, rest) = take(rest)?;
    (section.go, section.go_gap, section.class_gap) = (go, go_gap, class_gap);
    let (count, mut rest): (u32, _) = take(rest)?;
    for _ in 0..count {
        let (row, r) = take(rest)?;
        section
            .rows
            .push(row)
            .map_err(|_| DecodeError::MalformedPayload)?;
        rest = r;
    }
    Ok(rest)
}

/// The fixed header, as read from a blob.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Header {
    /// Format version.
    pub version: u16,
    /// Declared channel count.
    pub channel_count: u8,
    /// Declared payload length.
    pub payload_len: u16,
}

impl Header {
    /// The whole blob's length: header, payload, CRC, and for a signed blob the signature
    /// section.
    pub fn blob_len(&self) -> usize {
        let unsigned = HEADER_LEN + usize::from(self.payload_len) + CRC_LEN;
        if self.is_signed() {
            unsigned + SIGNATURE_SECTION_LEN
        } else {
            unsigned
        }
    }

    /// Whether the blob ends in a signature section (version 2, 4 or 6).
    pub fn is_signed(&self) -> bool {
        matches!(
            self.version,
            SIGNED_VERSION | SIGNED_SIGNAL_VERSION | SIGNED_CLASS_VERSION
        )
    }

    /// Whether the payload carries the signal section after the model (versions 3 to 6;
    /// in 5 and 6 it may be empty).
    pub fn has_signals(&self) -> bool {
        (SIGNAL_VERSION..=SIGNED_CLASS_VERSION).contains(&self.version)
    }

    /// Whether the payload ends with the class section (version 5 or 6).
    pub fn has_classes(&self) -> bool {
        self.version == CLASS_VERSION || self.version == SIGNED_CLASS_VERSION
    }

    /// Reads and checks the header: length, magic, version, channel capacity.
    ///
    /// # Errors
    /// [`DecodeError::Truncated`], [`DecodeError::BadMagic`],
    /// [`DecodeError::UnsupportedVersion`] or [`DecodeError::ChannelOverCapacity`].
    pub fn read(bytes: &[u8]) -> Result<Self, DecodeError> {
        let truncated = DecodeError::Truncated {
            needed: HEADER_LEN + CRC_LEN,
            got: bytes.len(),
        };
        let magic = bytes.get(0..4).ok_or(truncated)?;
        if magic != MAGIC {
            return Err(DecodeError::BadMagic);
        }
        let h: &[u8; HEADER_LEN] = bytes
            .get(..HEADER_LEN)
            .and_then(|h| h.try_into().ok())
            .ok_or(truncated)?;
        let [_, _, _, _, v0, v1, channel_count, l0, l1] = *h;
        let version = u16::from_le_bytes([v0, v1]);
        if !(FORMAT_VERSION..=SIGNED_CLASS_VERSION).contains(&version) {
            return Err(DecodeError::UnsupportedVersion(version));
        }
        if usize::from(channel_count) > MAX_CHANNELS {
            return Err(DecodeError::ChannelOverCapacity(channel_count));
        }
        Ok(Self {
            version,
            channel_count,
            payload_len: u16::from_le_bytes([l0, l1]),
        })
    }
}

#[cfg(test)]
mod tests;
