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
//! load a model that needs windows).
//! The full specification, with the payload's field order, is in
//! `shared-model/FORMAT.md`. Stability rule: any change to this layout or to
//! the payload's fields bumps [`FORMAT_VERSION`]; a decoder refuses versions
//! it does not know.

use crate::error::{DecodeError, EncodeError};
use crate::features::SignalSection;
use crate::limits::MAX_CHANNELS;
pub use crate::limits::{
    CRC_LEN, FORMAT_VERSION, HEADER_LEN, KEY_ID_LEN, MAGIC, MAX_BLOB_LEN, MAX_PAYLOAD_LEN,
    SIGNAL_VERSION, SIGNATURE_LEN, SIGNATURE_SECTION_LEN, SIGNED_SIGNAL_VERSION, SIGNED_VERSION,
};
use crate::model::{ChannelSpec, CheckedModel, FixedModel, Inputs};

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
pub fn encode_for_signing<I: Inputs>(
    model: &CheckedModel<I>,
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
pub fn encode<I: Inputs>(model: &CheckedModel<I>, out: &mut [u8]) -> Result<usize, EncodeError> {
    encode_version(model, false, out)
}

/// Header, payload (the model, then its signal section if it has one) and CRC; the version
/// says whether a section and a signature section follow (one layout per model: a model
/// without signals is version 1 or 2 whatever its kind).
fn encode_version<I: Inputs>(
    model: &CheckedModel<I>,
    signed: bool,
    out: &mut [u8],
) -> Result<usize, EncodeError> {
    let signals = model.inputs().section();
    let version = match (signals.is_some(), signed) {
        (false, false) => FORMAT_VERSION,
        (false, true) => SIGNED_VERSION,
        (true, false) => SIGNAL_VERSION,
        (true, true) => SIGNED_SIGNAL_VERSION,
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

/// Decodes and validates a blob into a model of input kind `I`. Never panics, whatever
/// the bytes.
///
/// `CheckedModel<SignalSection>` takes every version (1 and 2 with an empty section);
/// `CheckedModel` (readings) versions 1 and 2, and refuses 3 and 4 before reading further.
///
/// # Errors
/// The first problem found, in this order: [`DecodeError::Truncated`],
/// [`DecodeError::BadMagic`], [`DecodeError::UnsupportedVersion`],
/// [`DecodeError::ChannelOverCapacity`], [`DecodeError::Signals`] (readings only),
/// [`DecodeError::TrailingBytes`], [`DecodeError::CrcMismatch`],
/// [`DecodeError::MalformedPayload`], [`DecodeError::InconsistentLengths`] (also a
/// version-3 blob whose section is empty), [`DecodeError::Invalid`] (the model's or the
/// section's [`ModelError`](crate::ModelError)).
pub fn decode<I: Inputs>(bytes: &[u8]) -> Result<CheckedModel<I>, DecodeError> {
    let header = Header::read(bytes)?;
    if header.has_signals() && !I::WINDOWS {
        return Err(DecodeError::Signals);
    }
    let payload = checked_payload(bytes, header)?;
    let (model, mut rest) = take_model(payload)?;
    let mut inputs = I::default();
    // `I::WINDOWS` first: for readings the section's code drops out. The section is read
    // in place: a section moved through an `Option` would be one more copy on the stack.
    if I::WINDOWS && header.has_signals() {
        let section = inputs.section_mut().ok_or(DecodeError::Signals)?;
        rest = take_signals(rest, section)?;
        // A model without signals is written as version 1: one layout per model.
        if section.is_empty() {
            return Err(DecodeError::InconsistentLengths);
        }
    }
    if !rest.is_empty() || model.channels.len() != usize::from(header.channel_count) {
        return Err(DecodeError::InconsistentLengths);
    }
    Ok(CheckedModel::with_inputs(model, inputs)?)
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
/// a Cortex-M, too much for a 16 KiB part); this reads it in one.
#[inline(always)]
fn take_model(payload: &[u8]) -> Result<(FixedModel, &[u8]), DecodeError> {
    let mut m = FixedModel::default();
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
    Ok((m, rest))
}

/// The signal section after the model (format version 3), element by element into
/// `section`, as [`take_model`] reads the channels: serde's reader for the whole section
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

    /// Whether the blob ends in a signature section (version 2 or 4).
    pub fn is_signed(&self) -> bool {
        self.version == SIGNED_VERSION || self.version == SIGNED_SIGNAL_VERSION
    }

    /// Whether the payload carries the signal section after the model (version 3 or 4).
    pub fn has_signals(&self) -> bool {
        self.version == SIGNAL_VERSION || self.version == SIGNED_SIGNAL_VERSION
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
        if !(FORMAT_VERSION..=SIGNED_SIGNAL_VERSION).contains(&version) {
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
mod tests {
    use super::*;
    use crate::error::ModelError;
    use crate::features::{Feature, SignalSpec, Source};
    use crate::model::AuditMark;
    use crate::model::Readings;
    use proptest::prelude::*;
    use std::vec::Vec;

    /// [`decode`] for a station that passes readings alone.
    fn decode_readings(bytes: &[u8]) -> Result<CheckedModel<Readings>, DecodeError> {
        decode(bytes)
    }

    /// [`decode`] for a station that passes windows too.
    fn decode_windows(bytes: &[u8]) -> Result<CheckedModel<SignalSection>, DecodeError> {
        decode(bytes)
    }

    /// Any model as plain data (valid or not: the reader must match serde on both).
    fn arb_model() -> impl Strategy<Value = FixedModel> {
        let channel = ("[a-z_0-9]{0,24}", any::<(i32, i32, i32, i32, u8, i32)>()).prop_map(
            |(name, (raw_min, raw_max, offset, multiplier, shift, weight))| ChannelSpec {
                name: heapless::String::try_from(name.as_str()).unwrap(),
                raw_min,
                raw_max,
                offset,
                multiplier,
                shift,
                weight,
            },
        );
        (
            any::<([u8; 16], u8, u8, u8, u8, i64, i64, i64)>(),
            0u8..3,
            prop::collection::vec(channel, 0..=MAX_CHANNELS),
        )
            .prop_map(
                |((id, ib, wb, wf, ab, bias, lo, hi), audit, chans)| FixedModel {
                    model_id: id,
                    audit: [
                        AuditMark::NotAudited,
                        AuditMark::Passed,
                        AuditMark::Overridden,
                    ][usize::from(audit)],
                    input_bits: ib,
                    weight_bits: wb,
                    weight_frac_bits: wf,
                    acc_bits: ab,
                    bias,
                    nogo_max: lo,
                    go_min: hi,
                    channels: chans.into_iter().collect(),
                },
            )
    }

    proptest! {
        /// The field-by-field reader and serde's derived reader (postcard's reference
        /// deserialisation) agree on every encoded model and on arbitrary bytes: the same
        /// model and remainder, or both refuse.
        #[test]
        fn payload_reader_matches_serde(m in arb_model(), tail in prop::collection::vec(any::<u8>(), 0..4)) {
            let mut buf = [0u8; 4096];
            let mut bytes = postcard::to_slice(&m, &mut buf).unwrap().to_vec();
            bytes.extend_from_slice(&tail);
            let (got, rest) = take_model(&bytes).unwrap();
            prop_assert_eq!(&got, &m);
            prop_assert_eq!(rest, &tail[..]);
        }

        #[test]
        fn payload_reader_matches_serde_on_any_bytes(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
            let ours = take_model(&bytes).ok();
            let serde = postcard::take_from_bytes::<FixedModel>(&bytes).ok();
            prop_assert_eq!(ours, serde);
        }
    }

    fn model_with(channels: usize, weight_bits: u8) -> CheckedModel {
        let mut m = FixedModel::example_two_channel();
        m.channels.clear();
        let wmax = ((1i64 << (weight_bits - 1)) - 1) as i32;
        for i in 0..channels {
            let mut c: ChannelSpec = FixedModel::example_two_channel().channels[0].clone();
            c.name = heapless::String::try_from("ch").unwrap();
            c.weight = if i % 2 == 0 {
                wmax - i as i32
            } else {
                -(wmax - i as i32)
            };
            m.channels.push(c).unwrap();
        }
        m.weight_bits = weight_bits;
        m.weight_frac_bits = weight_bits - 1;
        m.acc_bits = 64;
        m.model_id = [0xA5; 16];
        CheckedModel::new(m).unwrap()
    }

    fn encoded<I: Inputs>(m: &CheckedModel<I>) -> Vec<u8> {
        let mut buf = [0u8; MAX_BLOB_LEN];
        let n = encode(m, &mut buf).unwrap();
        buf[..n].to_vec()
    }

    #[test]
    fn round_trip_1_5_32_channels_8_16_32_bit_weights() {
        for channels in [1, 5, 32] {
            for bits in [8, 16, 32] {
                let m = model_with(channels, bits);
                let b = encoded(&m);
                assert_eq!(
                    decode_readings(&b).unwrap(),
                    m,
                    "{channels} channels, {bits}-bit weights"
                );
            }
        }
    }

    #[test]
    fn golden_bytes_of_the_example_model() {
        // Pinned layout: any change here is a format change and must bump FORMAT_VERSION.
        let b = encoded(&CheckedModel::new(FixedModel::example_two_channel()).unwrap());
        let want: &[u8] = &[
            0x4C, 0x47, 0x4D, 0x42, // magic "LGMB"
            0x01, 0x00, // version 1
            0x02, // channels
            0x35, 0x00, // payload length 53
            0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0,    // model id
            0x00, // audit: NotAudited
            16, 8, 7, 32, // input bits, weight bits, weight frac, acc bits
            0x00, 0x00, 0x02, // bias 0, nogo_max 0, go_min 1 (zigzag varints)
            0x02, // channel vec length
            // name "a"; raw_min 0, raw_max 1000 (zigzag 2000 = D0 0F), offset 500 (E8 07),
            // multiplier 4_294_836 (zigzag 8_589_672 = E8 A2 8C 04), shift 16, weight 100 (C8 01)
            0x01, b'a', 0x00, 0xD0, 0x0F, 0xE8, 0x07, 0xE8, 0xA2, 0x8C, 0x04, 0x10, 0xC8,
            0x01, // channel a
            0x01, b'b', 0x00, 0xD0, 0x0F, 0xE8, 0x07, 0xE8, 0xA2, 0x8C, 0x04, 0x10, 0xC7,
            0x01, // channel b
        ];
        let crc = CRC32.checksum(want).to_le_bytes();
        assert_eq!(&b[..want.len()], want);
        assert_eq!(&b[want.len()..], &crc);
    }

    #[test]
    fn crc32_check_value() {
        // CRC-32/ISO-HDLC check value for ASCII "123456789" is 0xCBF43926, as published in
        // the "Catalogue of parametrised CRC algorithms" (reveng.sourceforge.net/crc-catalogue,
        // entry CRC-32/ISO-HDLC, field `check`); the number is quoted from memory of that entry.
        assert_eq!(CRC32.checksum(b"123456789"), 0xCBF4_3926);
    }

    #[test]
    fn every_single_bit_flip_of_a_5_channel_blob_is_rejected() {
        let b = encoded(&model_with(5, 16));
        for i in 0..b.len() * 8 {
            let mut f = b.clone();
            f[i / 8] ^= 1 << (i % 8);
            assert!(decode_readings(&f).is_err(), "flip of bit {i} accepted");
        }
    }

    #[test]
    fn every_truncation_is_rejected() {
        let b = encoded(&model_with(5, 16));
        for n in 0..b.len() {
            let e = decode_readings(&b[..n]).unwrap_err();
            assert!(
                matches!(e, DecodeError::Truncated { .. }),
                "length {n}: {e:?}"
            );
        }
    }

    #[test]
    fn trailing_bytes_newer_version_and_capacity() {
        let mut b = encoded(&model_with(5, 16));
        b.push(0);
        assert!(matches!(
            decode_readings(&b),
            Err(DecodeError::TrailingBytes { .. })
        ));
        b.pop();
        let mut v = b.clone();
        v[4] = 5;
        assert_eq!(decode_readings(&v), Err(DecodeError::UnsupportedVersion(5)));
        // Version 2 declares a signature section the bytes do not have.
        let mut v2 = b.clone();
        v2[4] = 2;
        assert!(matches!(
            decode_readings(&v2),
            Err(DecodeError::Truncated { .. })
        ));
        let mut c = b.clone();
        c[6] = 33;
        assert_eq!(
            decode_readings(&c),
            Err(DecodeError::ChannelOverCapacity(33))
        );
        let mut m = b;
        m[0] = b'X';
        assert_eq!(decode_readings(&m), Err(DecodeError::BadMagic));
    }

    #[test]
    fn a_signed_blob_is_version_1_bytes_then_key_id_then_signature() {
        let m = model_with(3, 16);
        let plain = encoded(&m);
        let mut buf = [0u8; MAX_BLOB_LEN];
        let key_id = [1, 2, 3, 4, 5, 6, 7, 8];
        let n = encode_for_signing(&m, key_id, &mut buf).unwrap();
        // Same bytes but the version, and a CRC over them; then the key id.
        assert_eq!(n, plain.len() + KEY_ID_LEN);
        assert_eq!(buf[4..6], SIGNED_VERSION.to_le_bytes());
        assert_eq!(
            buf[6..plain.len() - CRC_LEN],
            plain[6..plain.len() - CRC_LEN]
        );
        assert_eq!(buf[plain.len()..n], key_id);
        buf[n..n + SIGNATURE_LEN].copy_from_slice(&[0xAB; SIGNATURE_LEN]);
        let blob = &buf[..n + SIGNATURE_LEN];
        assert_eq!(decode_readings(blob).unwrap().model(), m.model());
        let s = signature(blob).unwrap();
        assert_eq!(
            (s.key_id, s.signature, s.signed),
            (key_id, [0xAB; SIGNATURE_LEN], &blob[..n])
        );
        let crc = CRC32.checksum(&blob[..plain.len() - CRC_LEN]);
        assert_eq!(blob_id(blob), Some(crc));
        assert!(
            signature(&plain).is_none(),
            "a version-1 blob has no signature"
        );
        let mut longer = blob.to_vec();
        longer.push(0);
        assert!(matches!(
            decode_readings(&longer),
            Err(DecodeError::TrailingBytes { .. })
        ));
        assert!(signature(&longer).is_none());
    }

    /// Re-seals a header + payload with a correct CRC, to reach the checks behind the CRC.
    fn seal(count: u8, payload: &[u8]) -> Vec<u8> {
        let mut b = Vec::from(MAGIC);
        b.extend_from_slice(&FORMAT_VERSION.to_le_bytes());
        b.push(count);
        b.extend_from_slice(&(payload.len() as u16).to_le_bytes());
        b.extend_from_slice(payload);
        let crc = CRC32.checksum(&b);
        b.extend_from_slice(&crc.to_le_bytes());
        b
    }

    #[test]
    fn checks_behind_the_crc() {
        let good = model_with(5, 16);
        let mut buf = [0u8; MAX_BLOB_LEN];
        let payload = postcard::to_slice(good.model(), &mut buf).unwrap().to_vec();
        assert_eq!(decode_readings(&seal(5, &payload)).unwrap(), good);
        assert_eq!(
            decode_readings(&seal(4, &payload)),
            Err(DecodeError::InconsistentLengths)
        );
        let mut extra = payload.clone();
        extra.push(0);
        assert_eq!(
            decode_readings(&seal(5, &extra)),
            Err(DecodeError::InconsistentLengths)
        );
        assert_eq!(
            decode_readings(&seal(5, &payload[..payload.len() - 3])),
            Err(DecodeError::MalformedPayload)
        );
        let mut bad = good.into_inner();
        bad.nogo_max = bad.go_min;
        let p = postcard::to_slice(&bad, &mut buf).unwrap().to_vec();
        assert_eq!(
            decode_readings(&seal(5, &p)),
            Err(DecodeError::Invalid(ModelError::ThresholdsOutOfOrder))
        );
    }

    #[test]
    fn largest_model_fits_max_blob_len() {
        let mut m = model_with(MAX_CHANNELS, 32).into_inner();
        for c in m.channels.iter_mut() {
            c.name = heapless::String::try_from("ABCDEFGHIJKLMNOPQRSTUVWX").unwrap();
            c.raw_min = i32::MIN;
            c.raw_max = i32::MIN;
            c.offset = i32::MIN;
            c.multiplier = i32::MAX;
            c.weight = -(i32::MAX);
        }
        m.bias = i64::MIN + 1;
        m.nogo_max = i64::MIN + 1;
        m.go_min = i64::MAX;
        m.audit = AuditMark::Overridden;
        let m = CheckedModel::new(m).unwrap();
        let b = encoded(&m);
        assert!(b.len() <= MAX_BLOB_LEN, "{} > {}", b.len(), MAX_BLOB_LEN);
        assert_eq!(decode_readings(&b).unwrap(), m);
        // And with the largest signal section, signed: every varint at its longest, every
        // channel a Band feature.
        let mut signals = SignalSection::default();
        for i in 0..crate::limits::MAX_SIGNALS {
            signals
                .signals
                .push(SignalSpec {
                    raw_min: i32::MIN,
                    raw_max: i32::MIN + (1 << 20),
                    offset: i32::MIN,
                    window: 1 + i as u16,
                })
                .unwrap();
        }
        for _ in 0..MAX_CHANNELS {
            let feature = Feature::Band { coeff: -(1 << 30) };
            signals
                .sources
                .push(Source::Feature { signal: 7, feature })
                .unwrap();
        }
        let m = CheckedModel::with_inputs(m.into_inner(), signals).unwrap();
        let mut buf = [0u8; MAX_BLOB_LEN];
        let n = encode_for_signing(&m, [7; KEY_ID_LEN], &mut buf).unwrap();
        assert!(n + SIGNATURE_LEN <= MAX_BLOB_LEN);
        assert_eq!(Header::read(&buf).unwrap().version, SIGNED_SIGNAL_VERSION);
    }

    /// The example model with channel `a` the band magnitude of a 12-bit, 64-sample signal
    /// and `b` still a reading.
    fn with_signal() -> CheckedModel<SignalSection> {
        let mut m = FixedModel::example_two_channel();
        m.acc_bits = 64;
        let mut signals = SignalSection::default();
        signals
            .signals
            .push(SignalSpec {
                raw_min: 0,
                raw_max: 4095,
                offset: 2048,
                window: 64,
            })
            .unwrap();
        let band = Source::Feature {
            signal: 0,
            feature: Feature::Band { coeff: 0 },
        };
        signals.sources.push(band).unwrap();
        signals.sources.push(Source::Reading).unwrap();
        CheckedModel::with_inputs(m, signals).unwrap()
    }

    fn encoded_signals(m: &CheckedModel<SignalSection>) -> Vec<u8> {
        let mut buf = [0u8; MAX_BLOB_LEN];
        let n = encode(m, &mut buf).unwrap();
        buf[..n].to_vec()
    }

    #[test]
    fn signals_travel_in_version_3_and_4_and_only_a_windows_model_loads_them() {
        let m = with_signal();
        let b = encoded_signals(&m);
        assert_eq!(Header::read(&b).unwrap().version, SIGNAL_VERSION);
        assert_eq!(decode_windows(&b).unwrap(), m);
        // A station that passes readings alone must not load it.
        assert_eq!(decode_readings(&b), Err(DecodeError::Signals));
        // The model's own bytes come first, exactly version 1's payload; the section follows.
        let v1 = encoded(&CheckedModel::new(m.model().clone()).unwrap());
        assert_eq!(Header::read(&v1).unwrap().version, FORMAT_VERSION);
        assert_eq!(
            &b[HEADER_LEN..v1.len() - CRC_LEN],
            &v1[HEADER_LEN..v1.len() - CRC_LEN]
        );
        // Version 1 read as a model with signals: every channel a reading.
        let plain = decode_windows(&v1).unwrap();
        assert!(plain.signals().is_empty());
        assert_eq!(plain.model(), m.model());
        // Signed: version 4, and the signature section is found.
        let mut buf = [0u8; MAX_BLOB_LEN];
        let n = encode_for_signing(&m, [1; KEY_ID_LEN], &mut buf).unwrap();
        let signed = &buf[..n + SIGNATURE_LEN];
        assert_eq!(Header::read(signed).unwrap().version, SIGNED_SIGNAL_VERSION);
        assert_eq!(signature(signed).unwrap().key_id, [1; KEY_ID_LEN]);
        assert_eq!(decode_windows(signed).unwrap(), m);
    }

    #[test]
    fn golden_bytes_of_a_model_with_a_signal() {
        // Pinned layout of version 3: the example model (64-bit accumulator) with channel
        // `a` the band magnitude of a 64-sample signal; any change is a format change.
        let b = encoded_signals(&with_signal());
        // The model's 53 bytes are version 1's, pinned by `golden_bytes_of_the_example_model`
        // (here with a 64-bit accumulator); then the section.
        let v1 = encoded(&CheckedModel::new(with_signal().into_inner()).unwrap());
        let model = &v1[HEADER_LEN..v1.len() - CRC_LEN];
        assert_eq!(
            (model.len(), model[20]),
            (53, 64),
            "acc bits at payload byte 20"
        );
        let header: &[u8] = &[
            0x4C, 0x47, 0x4D, 0x42, // magic "LGMB"
            0x03, 0x00, // version 3
            0x02, // channels
            0x42, 0x00, // payload length 66: the model's 53 bytes, then the section's 13
        ];
        let section: &[u8] = &[
            0x01, // signal vec length
            // raw_min 0, raw_max 4095 (zigzag 8190 = FE 3F), offset 2048 (zigzag 4096 =
            // 80 20), window 64
            0x00, 0xFE, 0x3F, 0x80, 0x20, 0x40, // signal 0
            0x02, // source vec length
            0x01, 0x00, 0x08, 0x00, // Feature { signal 0, Band { coeff 0 } }
            0x00, // Reading
        ];
        let want = [header, model, section].concat();
        let want = &want[..];
        let crc = CRC32.checksum(want).to_le_bytes();
        assert_eq!(&b[..want.len()], want);
        assert_eq!(&b[want.len()..], &crc);
        // The same model held as a model of windows without signals is written as version 1.
        let plain = with_signal().into_inner();
        let empty = CheckedModel::with_inputs(plain.clone(), SignalSection::default()).unwrap();
        assert_eq!(encoded(&empty), encoded(&CheckedModel::new(plain).unwrap()));
    }

    #[test]
    fn a_signal_section_where_none_belongs_is_refused() {
        let fix_crc = |v: &mut Vec<u8>| {
            let n = v.len() - CRC_LEN;
            let crc = CRC32.checksum(&v[..n]).to_le_bytes();
            v[n..].copy_from_slice(&crc);
        };
        // Version 3 with an empty section: a model without signals is written as version 1.
        let mut v = encoded(&CheckedModel::new(FixedModel::example_two_channel()).unwrap());
        let n = v.len() - CRC_LEN;
        v[4] = 3;
        v.splice(n..n, [0u8, 0]);
        v[7] += 2;
        fix_crc(&mut v);
        assert_eq!(decode_windows(&v), Err(DecodeError::InconsistentLengths));
        // Version 1 with a section after the model: unread bytes.
        let mut v = encoded_signals(&with_signal());
        v[4] = 1;
        fix_crc(&mut v);
        assert_eq!(decode_windows(&v), Err(DecodeError::InconsistentLengths));
        assert_eq!(decode_readings(&v), Err(DecodeError::InconsistentLengths));
        // A source naming a signal the model lacks; a source count that is not the channels'.
        let m = with_signal();
        let mut signals = m.signals().clone();
        signals.sources[0] = Source::Feature {
            signal: 1,
            feature: Feature::Mean,
        };
        assert_eq!(
            CheckedModel::with_inputs(m.model().clone(), signals.clone()),
            Err(ModelError::SignalIndex { channel: 0 })
        );
        signals.sources.pop();
        assert_eq!(
            CheckedModel::with_inputs(m.model().clone(), signals),
            Err(ModelError::Sources)
        );
    }

    proptest! {
        /// Any bytes: decoding for windows never panics, and agrees with decoding for
        /// readings on every blob that has no signals.
        #[test]
        fn windows_and_readings_decoders_agree_on_any_bytes(bytes in prop::collection::vec(any::<u8>(), 0..200)) {
            let ours = decode_windows(&bytes);
            match decode_readings(&bytes) {
                Ok(m) => prop_assert_eq!(ours.map(|s| s.model().clone()), Ok(m.into_inner())),
                Err(DecodeError::Signals) => {}
                Err(e) => prop_assert_eq!(ours.err(), Some(e)),
            }
        }
    }
}
