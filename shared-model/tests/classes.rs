//! Models of several classes against FORMAT.md ("Versions 5 and 6"): a version-5 blob
//! written byte by byte from the spec decodes to the model it describes and encodes back to
//! the same bytes; the kernel's row scores equal an i128 reference of the published
//! conversion and sums; the decision equals the published rule applied by a plain
//! reference; no mutated version-5 or 6 blob makes the decoder panic.

use proptest::prelude::*;
use shared_model::blob::{self, CRC32, KEY_ID_LEN, SIGNATURE_LEN};
use shared_model::{
    AuditMark, ChannelSpec, CheckedModel, ClassRow, ClassSection, DecodeError, FixedModel,
    MAX_CLASSES, NO_GO_CLASS, Readings, SignalSection, Verdict,
};

/// CRC-32/ISO-HDLC bit by bit from FORMAT.md's definition (reflected polynomial
/// 0xEDB88320, initial value and final XOR 0xFFFFFFFF), independent of the crate's.
fn crc32(bytes: &[u8]) -> u32 {
    let mut crc = 0xFFFF_FFFFu32;
    for &b in bytes {
        crc ^= u32::from(b);
        for _ in 0..8 {
            crc = if crc & 1 != 0 {
                (crc >> 1) ^ 0xEDB8_8320
            } else {
                crc >> 1
            };
        }
    }
    !crc
}

/// The version-5 blob of FORMAT.md's worked example, byte by byte from the spec.
fn hand_written() -> Vec<u8> {
    let mut payload: Vec<u8> = (1..=16).collect(); // model_id [u8; 16], no prefix
    payload.extend([
        0x00, // audit: 0 not audited
        0x08, // input_bits 8
        0x08, // weight_bits 8
        0x00, // weight_frac_bits 0
        0x20, // acc_bits 32
        0x00, // bias 0 (zig-zag 0)
        0x01, // nogo_max −1 (zig-zag 1)
        0x00, // go_min 0
        0x01, // channels: 1
        0x01, b'a', // name "a"
        0x00, // raw_min 0
        0xC8, 0x01, // raw_max 100 (zig-zag 200, LEB128 C8 01)
        0x64, // offset 50 (zig-zag 100)
        0x02, // multiplier 1 (zig-zag 2)
        0x00, // shift 0 (u8)
        0x00, // weight 0
        0x00, // signal section: no signals
        0x00, // no sources
        0x00, // class section: go = class 0 (u8)
        0x14, // go_gap 10 (zig-zag 20)
        0x0A, // class_gap 5 (zig-zag 10)
        0x02, // rows: 2
        0x02, b'o', b'k', // row 0: name "ok"
        0x06, // bias 3 (zig-zag 6)
        0x01, 0x04, // weights: 1, +2 (zig-zag 4)
        0x05, b'c', b'r', b'a', b'c', b'k', // row 1: name "crack"
        0x05, // bias −3 (zig-zag 5)
        0x01, 0x03, // weights: 1, −2 (zig-zag 3)
    ]);
    assert_eq!(payload.len(), 55);
    let mut b = vec![0x4C, 0x47, 0x4D, 0x42, 0x05, 0x00, 0x01, 0x37, 0x00];
    b.extend(&payload);
    let crc = crc32(&b);
    b.extend(crc.to_le_bytes());
    b
}

fn expected_model() -> CheckedModel<Readings, ClassSection> {
    let mut channels = heapless::Vec::new();
    channels
        .push(ChannelSpec {
            name: heapless::String::try_from("a").unwrap(),
            raw_min: 0,
            raw_max: 100,
            offset: 50,
            multiplier: 1,
            shift: 0,
            weight: 0,
        })
        .unwrap();
    let m = FixedModel {
        model_id: core::array::from_fn(|i| i as u8 + 1),
        audit: AuditMark::NotAudited,
        input_bits: 8,
        weight_bits: 8,
        weight_frac_bits: 0,
        acc_bits: 32,
        bias: 0,
        nogo_max: -1,
        go_min: 0,
        channels,
    };
    let row = |name: &str, bias: i64, w: i32| ClassRow {
        name: heapless::String::try_from(name).unwrap(),
        bias,
        weights: heapless::Vec::from_slice(&[w]).unwrap(),
    };
    let mut rows = heapless::Vec::new();
    rows.push(row("ok", 3, 2)).unwrap();
    rows.push(row("crack", -3, -2)).unwrap();
    let classes = ClassSection {
        go: 0,
        go_gap: 10,
        class_gap: 5,
        rows,
    };
    CheckedModel::with_outcomes(m, Readings, classes).unwrap()
}

#[test]
fn crc_check_value_of_the_reference() {
    // FORMAT.md: the check value of ASCII "123456789".
    assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
    assert_eq!(CRC32.checksum(b"123456789"), 0xCBF4_3926);
}

#[test]
fn golden_version_5_bytes_written_from_the_spec() {
    let bytes = hand_written();
    // The CRC as Python's zlib.crc32 computes it over the 64 bytes before it.
    assert_eq!(&bytes[64..], &[0x87, 0x40, 0xA9, 0x8B]);
    let got: CheckedModel<Readings, ClassSection> = blob::decode_classes(&bytes).unwrap();
    assert_eq!(got, expected_model());
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(&got, &mut buf).unwrap();
    assert_eq!(&buf[..n], &bytes[..], "encode gives the spec's bytes");
    // A two-sided decoder refuses it by its version, before anything else.
    assert_eq!(
        blob::decode::<SignalSection>(&bytes).unwrap_err(),
        DecodeError::Classes
    );
    // The worked decisions of FORMAT.md: (reading, verdict, class, lead).
    let cases = [
        (100, Verdict::Go, 0, 206),
        (50, Verdict::Recheck, 0, 6),
        (49, Verdict::Recheck, 0, 2),
        (48, Verdict::Recheck, 1, 2),
        (47, Verdict::NoGo, 1, 6),
        (0, Verdict::NoGo, 1, 194),
    ];
    for (r, verdict, class, lead) in cases {
        let d = got.classify(&[r]).unwrap();
        assert_eq!(
            (d.verdict, d.class, d.score),
            (verdict, Some(class), lead),
            "r = {r}"
        );
    }
    assert!(got.classify(&[101]).is_err(), "out of range is a fault");
}

/// A valid model of several classes from the generated numbers: `narrow` keeps every row
/// bound under 2^30 with a 32-bit accumulator; otherwise 64 bits and wide weights.
#[allow(clippy::type_complexity)]
fn arb_class_model() -> impl Strategy<Value = CheckedModel<Readings, ClassSection>> {
    let channel =
        (any::<i32>(), 0u32..1_000_000, 0u8..=20, 0.0f64..1.0).prop_map(|(lo, span, shift, at)| {
            let raw_min = lo.clamp(i32::MIN / 2, i32::MAX / 2 - 1_000_000);
            let raw_max = raw_min + span as i32;
            let offset = raw_min + (f64::from(span) * at) as i32;
            let far = i64::from((raw_max - offset).max(offset - raw_min)).max(1);
            let multiplier = ((32767i64 << shift) / far).clamp(1, i64::from(i32::MAX)) as i32;
            ChannelSpec {
                name: heapless::String::new(),
                raw_min,
                raw_max,
                offset,
                multiplier,
                shift,
                weight: 0,
            }
        });
    (
        prop::collection::vec(channel, 1..=16),
        2usize..=MAX_CLASSES,
        any::<bool>(),
        prop::collection::vec(any::<(i32, i64)>(), MAX_CLASSES * 17),
        (any::<u8>(), 1i64..1_000_000, 1i64..1_000_000),
    )
        .prop_filter_map(
            "a model the validation accepts",
            |(chans, k, narrow, numbers, (go, go_gap, class_gap))| {
                let mut m = FixedModel::example_two_channel();
                m.channels = chans.into_iter().collect();
                m.input_bits = 16;
                (m.bias, m.nogo_max, m.go_min) = (0, -1, 0);
                let (wbits, acc) = if narrow { (8u8, 32u8) } else { (32, 64) };
                (m.weight_bits, m.acc_bits) = (wbits, acc);
                let limit = (1i64 << (wbits - 1)) - 1;
                let mut nums = numbers.into_iter();
                let mut rows = heapless::Vec::new();
                for c in 0..k {
                    let mut weights = heapless::Vec::new();
                    for _ in 0..m.channels.len() {
                        let (w, _) = nums.next()?;
                        weights.push((i64::from(w) % (limit + 1)) as i32).ok()?;
                    }
                    let (_, b) = nums.next()?;
                    let bias = if narrow { b % 1_000_000 } else { b % (1 << 40) };
                    rows.push(ClassRow {
                        name: heapless::String::try_from(format!("c{c}").as_str()).ok()?,
                        bias,
                        weights,
                    })
                    .ok()?;
                }
                let go = if go % 3 == 0 {
                    NO_GO_CLASS
                } else {
                    go % k as u8
                };
                let mut section = ClassSection {
                    go,
                    go_gap,
                    class_gap,
                    rows,
                };
                let mut model = CheckedModel::with_outcomes(m.clone(), Readings, section.clone());
                if model.is_err() && narrow {
                    // Too many channels for 32 bits: halve the weights until it fits.
                    for _ in 0..16 {
                        for r in section.rows.iter_mut() {
                            for w in r.weights.iter_mut() {
                                *w /= 2;
                            }
                        }
                        model = CheckedModel::with_outcomes(m.clone(), Readings, section.clone());
                        if model.is_ok() {
                            break;
                        }
                    }
                }
                model.ok()
            },
        )
}

/// FORMAT.md's conversion in i128: round to nearest, ties towards +∞.
fn convert(c: &ChannelSpec, r: i32) -> i128 {
    let p = (i128::from(r) - i128::from(c.offset)) * i128::from(c.multiplier);
    if c.shift == 0 {
        p
    } else {
        (p + (1i128 << (c.shift - 1))).div_euclid(1i128 << c.shift)
    }
}

/// The published rule, plainly: (verdict, leader, lead).
fn rule(s: &ClassSection, scores: &[i128]) -> (Verdict, u8, i128) {
    let mut leader = 0;
    for k in 1..scores.len() {
        if scores[k] > scores[leader] {
            leader = k;
        }
    }
    let runner_up = (0..scores.len())
        .filter(|&k| k != leader)
        .map(|k| scores[k])
        .max()
        .unwrap();
    let lead = scores[leader] - runner_up;
    let verdict = if leader as u8 == s.go && usize::from(s.go) < scores.len() {
        if lead >= i128::from(s.go_gap) {
            Verdict::Go
        } else {
            Verdict::Recheck
        }
    } else if lead >= i128::from(s.class_gap) {
        Verdict::NoGo
    } else {
        Verdict::Recheck
    };
    (verdict, leader as u8, lead)
}

/// The generated models are narrow (the all-32-bit kernel) and wide alike, with and
/// without a GO class.
#[test]
fn the_generator_reaches_narrow_and_wide_models() {
    use proptest::strategy::ValueTree;
    let mut runner = proptest::test_runner::TestRunner::deterministic();
    let strategy = arb_class_model();
    let (mut narrow, mut wide, mut no_go) = (0, 0, 0);
    for _ in 0..200 {
        let m = strategy.new_tree(&mut runner).unwrap().current();
        if m.is_narrow() {
            narrow += 1;
        } else {
            wide += 1;
        }
        no_go += usize::from(m.classes().unwrap().go_class().is_none());
    }
    assert!(
        narrow > 20 && wide > 20 && no_go > 20,
        "{narrow} narrow, {wide} wide, {no_go} without GO"
    );
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    /// Row scores and decisions against the i128 reference, for narrow (32-bit) and wide
    /// (64-bit) models alike; readings in range, and near the ends of the ranges.
    #[test]
    fn scores_and_decisions_equal_the_reference(
        model in arb_class_model(),
        picks in prop::collection::vec((0.0f64..=1.0, 0u8..4), 16),
    ) {
        let m = model.model();
        let raw: Vec<i32> = m.channels.iter().zip(&picks).map(|(c, &(at, end))| match end {
            0 => c.raw_min,
            1 => c.raw_max,
            _ => c.raw_min + ((f64::from(c.raw_max) - f64::from(c.raw_min)) * at) as i32,
        }).collect();
        let s = model.classes().unwrap();
        let want: Vec<i128> = s.rows.iter().map(|row| {
            i128::from(row.bias) + row.weights.iter().zip(&m.channels).zip(&raw)
                .map(|((&w, c), &r)| i128::from(w) * convert(c, r)).sum::<i128>()
        }).collect();
        let mut scores = [0i64; MAX_CLASSES];
        let n = model.class_scores(&raw, &mut scores).unwrap();
        prop_assert_eq!(n, s.rows.len());
        let got: Vec<i128> = scores[..n].iter().map(|&v| i128::from(v)).collect();
        prop_assert_eq!(&got, &want);
        let d = model.classify(&raw).unwrap();
        let (verdict, leader, lead) = rule(s, &want);
        prop_assert_eq!((d.verdict, d.class, i128::from(d.score)), (verdict, Some(leader), lead));
        // The proof's bound: every score within half the accumulator's range.
        let half = 1i128 << (m.acc_bits - 2);
        prop_assert!(want.iter().all(|v| v.abs() < half));
    }

    /// Any mutation of a valid version-5 or 6 blob (bytes changed, cut, extended) decodes or
    /// is refused: never a panic, and what decodes is valid.
    #[test]
    fn mutated_class_blobs_never_panic(
        model in arb_class_model(),
        signed in any::<bool>(),
        edits in prop::collection::vec((any::<u16>(), any::<u8>()), 0..6),
        cut in any::<u16>(),
        reseal in any::<bool>(),
    ) {
        let mut buf = vec![0u8; blob::MAX_BLOB_LEN];
        let n = if signed {
            let n = blob::encode_for_signing(&model, [7; KEY_ID_LEN], &mut buf).unwrap();
            n + SIGNATURE_LEN
        } else {
            blob::encode(&model, &mut buf).unwrap()
        };
        buf.truncate(n);
        prop_assert_eq!(buf[4], if signed { 6 } else { 5 });
        prop_assert_eq!(&blob::decode_classes::<Readings>(&buf).unwrap(), &model);
        for (at, v) in edits {
            let i = usize::from(at) % buf.len();
            buf[i] = v;
        }
        if reseal && buf.len() >= 13 {
            // Behind a correct CRC, so the payload's own checks are reached.
            let len = usize::from(u16::from_le_bytes([buf[7], buf[8]])).min(buf.len() - 13);
            let crc = CRC32.checksum(&buf[..9 + len]);
            buf[9 + len..13 + len].copy_from_slice(&crc.to_le_bytes());
        }
        buf.truncate(usize::from(cut).max(buf.len() / 2).min(buf.len()));
        if let Ok(m) = blob::decode_classes::<SignalSection>(&buf) {
            let _ = m.classify(&vec![0; m.channel_count()]);
        }
        let _ = blob::decode_classes::<Readings>(&buf);
        let _ = blob::decode::<SignalSection>(&buf);
    }
}
