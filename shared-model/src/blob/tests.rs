//! The blob codec's tests: golden bytes of each format version, round trips, and every
//! refusal of a damaged or foreign blob.

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
    v[4] = 7;
    assert_eq!(decode_readings(&v), Err(DecodeError::UnsupportedVersion(7)));
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

#[test]
fn a_model_of_classes_round_trips_as_version_5_and_6_and_decides_by_its_rows() {
    use crate::classes::ClassSection;
    let (model, classes) = ClassSection::example_three_class();
    let m = CheckedModel::with_outcomes(model, Readings, classes.clone()).unwrap();
    let mut buf = [0u8; MAX_BLOB_LEN];
    let n = encode(&m, &mut buf).unwrap();
    assert_eq!(u16::from_le_bytes([buf[4], buf[5]]), CLASS_VERSION);
    let back = decode_classes::<Readings>(&buf[..n]).unwrap();
    assert_eq!(back, m);
    let windows = decode_classes::<SignalSection>(&buf[..n]).unwrap();
    assert_eq!(windows.classes(), Some(&classes));
    // A station of two-sided models refuses it before the CRC.
    assert_eq!(decode::<Readings>(&buf[..n]), Err(DecodeError::Classes));
    assert_eq!(
        decode::<SignalSection>(&buf[..n]),
        Err(DecodeError::Classes)
    );
    // Signed: version 6, the same payload.
    let mut signed = [0u8; MAX_BLOB_LEN];
    let k = encode_for_signing(&m, [7; KEY_ID_LEN], &mut signed).unwrap();
    assert_eq!(
        u16::from_le_bytes([signed[4], signed[5]]),
        SIGNED_CLASS_VERSION
    );
    let whole = k + SIGNATURE_LEN;
    assert_eq!(decode_classes::<Readings>(&signed[..whole]).unwrap(), m);
    // The decision: scores by hand. Readings (1000, 0) scale to (32767, −32767) (the
    // example's full range): good 1000 + 100·32767 + 100·32767, short −100·32767 − 50·32767,
    // crack −500 + 20·32767 − 100·32767.
    let d = m.classify(&[1000, 0]).unwrap();
    let good = 1000 + 200 * 32767_i64;
    let short = -150 * 32767_i64;
    let crack = -500 - 80 * 32767_i64;
    assert_eq!(d.class, Some(0));
    assert_eq!(d.score, good - crack, "crack is the runner-up");
    assert_eq!(d.verdict, crate::decision::Verdict::Go);
    let mut scores = [0i64; crate::limits::MAX_CLASSES];
    assert_eq!(m.class_scores(&[1000, 0], &mut scores), Ok(3));
    assert_eq!(scores[..3], [good, short, crack]);
    // A two-sided blob read as classes has an empty section and decides as before.
    let two = CheckedModel::new(FixedModel::example_two_channel()).unwrap();
    let n2 = encode(&two, &mut buf).unwrap();
    let read = decode_classes::<Readings>(&buf[..n2]).unwrap();
    assert_eq!(read.classes(), None);
    assert_eq!(read.classify(&[700, 300]), two.classify(&[700, 300]));
}

#[test]
fn version_5_refuses_an_empty_class_section_and_signals_where_only_readings_pass() {
    use crate::classes::ClassSection;
    let (model, classes) = ClassSection::example_three_class();
    // Hand-made version 5 with an empty class section: one layout per model.
    let two = CheckedModel::new(FixedModel::example_two_channel()).unwrap();
    let mut buf = [0u8; MAX_BLOB_LEN];
    let n = encode(&two, &mut buf).unwrap();
    let mut v = buf[..n - CRC_LEN].to_vec();
    v[4] = 5;
    v.extend_from_slice(&[0, 0]); // empty signal section
    v.extend_from_slice(&[0, 0, 0, 0]); // go, go_gap, class_gap, no rows
    let len = u16::try_from(v.len() - HEADER_LEN).unwrap();
    v[7..9].copy_from_slice(&len.to_le_bytes());
    let crc = CRC32.checksum(&v);
    v.extend_from_slice(&crc.to_le_bytes());
    assert_eq!(
        decode_classes::<Readings>(&v),
        Err(DecodeError::InconsistentLengths)
    );
    // A class model with a feature channel: readings-only stations refuse it.
    let mut section = SignalSection::default();
    section
        .signals
        .push(SignalSpec {
            raw_min: 0,
            raw_max: 1000,
            offset: 0,
            window: 8,
        })
        .unwrap();
    section
        .sources
        .push(Source::Feature {
            signal: 0,
            feature: Feature::Mean,
        })
        .unwrap();
    section.sources.push(Source::Reading).unwrap();
    let m = CheckedModel::with_outcomes(model, section, classes).unwrap();
    let n = encode(&m, &mut buf).unwrap();
    assert_eq!(u16::from_le_bytes([buf[4], buf[5]]), CLASS_VERSION);
    assert_eq!(
        decode_classes::<Readings>(&buf[..n]),
        Err(DecodeError::Signals)
    );
    assert_eq!(decode_classes::<SignalSection>(&buf[..n]).unwrap(), m);
}
