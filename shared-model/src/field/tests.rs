//! The field statistics' tests: counts, bins, the CUSUM by hand, the record's bytes.

use super::*;

fn plan() -> FieldPlan {
    FieldPlan {
        blob_id: 0xDEAD_BEEF,
        origin: -160,
        shift: 4,
        go: CusumPlan {
            target: 50,
            slack: 5,
            limit: 40,
        },
        nogo: CusumPlan {
            target: 60,
            slack: 5,
            limit: 40,
        },
    }
}

const T: Thresholds = Thresholds {
    nogo_max: -10,
    go_min: 10,
};

fn decide(score: i64) -> Decision {
    T.decide(score)
}

#[test]
fn counts_bins_and_channel_figures() {
    let mut s = FieldStats::new(plan(), 2, 1);
    s.decided(&T, &decide(60), &[3, -4]);
    s.decided(&T, &decide(-70), &[5, -9]);
    s.decided(&T, &decide(0), &[1, 2]);
    s.faulted(FieldFault::Channel(1));
    s.faulted(FieldFault::Signal(0));
    s.faulted(FieldFault::Channel(7)); // no such channel: counted as other
    assert_eq!(
        (s.units, s.go, s.nogo, s.recheck, s.faults),
        (6, 1, 1, 1, 3)
    );
    assert_eq!(
        (s.channel_faults[1], s.signal_faults[0], s.other_faults),
        (1, 1, 1)
    );
    // Bins of 16 from -160: 60 → (220 >> 4) = 13; -70 → 5; 0 → 10.
    assert_eq!((s.bins[13], s.bins[5], s.bins[10]), (1, 1, 1));
    assert_eq!((s.min[0], s.max[0], s.sum[0]), (1, 5, 9));
    assert_eq!((s.min[1], s.max[1], s.sum[1]), (-9, 2, -11));
}

#[test]
fn scores_outside_the_bins_are_counted_below_and_above() {
    let mut s = FieldStats::new(plan(), 0, 0);
    s.decided(&T, &decide(-161), &[]);
    s.decided(&T, &decide(-160 + 32 * 16), &[]);
    s.decided(&T, &decide(i64::MIN), &[]);
    s.decided(&T, &decide(i64::MAX), &[]);
    assert_eq!((s.below, s.above), (2, 2));
}

#[test]
fn cusum_follows_its_published_recursion() {
    // Worked by hand from C⁺ᵢ = max(0, C⁺ᵢ₋₁ + xᵢ − μ₀ − k), C⁻ᵢ = max(0, C⁻ᵢ₋₁ + μ₀ − k − xᵢ)
    // (tabular CUSUM), μ₀ = 50, k = 5, h = 40, margins m = score − go_min (go_min = 10).
    let mut s = FieldStats::new(plan(), 0, 0);
    // Margins 40, 30, 25, 20: C⁻ = 5, 20, 40, 65 (> 40 at the 4th unit); C⁺ stays 0.
    for score in [50, 40, 35, 30] {
        s.decided(&T, &decide(score), &[]);
    }
    assert_eq!((s.cusum_go.up, s.cusum_go.down), (0, 65));
    assert_eq!((s.cusum_go.alarm_up, s.cusum_go.alarm_down), (0, 4));
    assert!(!s.cusum_nogo.alarmed());
}

#[test]
fn the_record_round_trips_and_refuses_a_changed_byte() {
    let mut s = FieldStats::new(plan(), 3, 2);
    s.decided(&T, &decide(60), &[3, -4, 7]);
    s.faulted(FieldFault::Signal(1));
    let mut buf = [0u8; MAX_RECORD_LEN];
    let n = s.encode(&mut buf).unwrap();
    assert_eq!(n, s.record_len());
    assert_eq!(FieldStats::decode(&buf[..n]), Ok(s.clone()));
    for i in 0..n {
        let mut b = buf;
        b[i] ^= 0x01;
        assert!(FieldStats::decode(&b[..n]).is_err(), "byte {i}");
    }
    assert_eq!(
        FieldStats::decode(&buf[..n - 1]),
        Err(RecordError::Truncated)
    );
    assert_eq!(
        FieldStats::decode(&buf[..n + 1]),
        Err(RecordError::TrailingBytes)
    );
    assert_eq!(
        s.encode(&mut buf[..n - 1]),
        Err(RecordError::BufferTooSmall)
    );
}

#[test]
fn a_full_count_saturates_and_freezes_the_record() {
    let mut s = FieldStats::new(plan(), 1, 0);
    s.units = u32::MAX;
    s.go = u32::MAX;
    s.decided(&T, &decide(60), &[1]);
    s.faulted(FieldFault::Other);
    assert!(s.saturated);
    assert_eq!(
        (s.units, s.go, s.faults, s.bins[13]),
        (u32::MAX, u32::MAX, 0, 0)
    );
}

/// The record of a small log, written out by hand from FORMAT.md ("Field record"), field by
/// field. The working: plan blob_id 0x01020304, origin −64, shift 3 (bins of 8), GO CUSUM
/// μ₀ 20 k 2 h 2, NO-GO CUSUM μ₀ 26 k 2 h 10; thresholds nogo_max −10, go_min 10; one
/// channel, one signal. Units: (1) score 25, GO, value 7; (2) score −40, NO-GO, value −3;
/// (3) signal 0's window refused.
/// - Bins: 25 → (25 + 64) >> 3 = 11; −40 → (−40 + 64) >> 3 = 3.
/// - GO CUSUM, unit 1: m = 25 − 10 = 15, m − μ₀ = −5: C⁺ = max(0, 0 − 5 − 2) = 0,
///   C⁻ = max(0, 0 + 5 − 2) = 3 > h = 2: alarm_down = 1.
/// - NO-GO CUSUM, unit 2: m = −10 − (−40) = 30, m − μ₀ = 4: C⁺ = 4 − 2 = 2 (≤ 10),
///   C⁻ = max(0, −4 − 2) = 0.
/// - Channel 0: min −3, max 7, sum 4; signal 0: 1 fault. 288 + 20 + 4 = 312 bytes.
/// - CRC-32 of bytes 0..308: 0xFF32AEA1 (Python: `zlib.crc32(record[:308])`).
const GOLDEN: [&str; 29] = [
    "4c474652",                         // 0: magic "LGFR"
    "0100",                             // 4: version 1
    "01",                               // 6: channels 1
    "01",                               // 7: signals 1
    "04030201",                         // 8: blob_id 0x01020304
    "c0ffffffffffffff",                 // 12: origin −64
    "03000000",                         // 20: shift 3, reserved
    "1400000000000000",                 // 24: go.target 20
    "0200000000000000",                 // 32: go.slack 2
    "0200000000000000",                 // 40: go.limit 2
    "1a00000000000000",                 // 48: nogo.target 26
    "0200000000000000",                 // 56: nogo.slack 2
    "0a00000000000000",                 // 64: nogo.limit 10
    "03000000010000000100000000000000", // 72: units 3, go 1, nogo 1, recheck 0
    "010000000000000000000000",         // 88: faults 1; 92: saturated 0, reserved; 96: other 0
    "0000000000000000",                 // 100: below 0, above 0
    // 108: bins 0..32, four to a line; bin 3 and bin 11 hold one unit each.
    "00000000000000000000000001000000", // bins 0..4
    "00000000000000000000000000000000", // bins 4..8
    "00000000000000000000000001000000", // bins 8..12
    "00000000000000000000000000000000", // bins 12..16
    "00000000000000000000000000000000", // bins 16..20
    "00000000000000000000000000000000", // bins 20..24
    "00000000000000000000000000000000", // bins 24..28
    "00000000000000000000000000000000", // bins 28..32
    "000000000000000003000000000000000000000001000000", // 236: cusum_go up 0, down 3, alarms 0, 1
    "020000000000000000000000000000000000000000000000", // 260: cusum_nogo up 2, down 0, no alarm
    "00000000fdffffff070000000400000000000000", // 284: channel 0: faults 0, min −3, max 7, sum 4
    "01000000",                         // 304: signal 0: faults 1
    "a1ae32ff",                         // 308: CRC-32 0xFF32AEA1
];

fn unhex(s: &str) -> std::vec::Vec<u8> {
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap())
        .collect()
}

#[test]
fn golden_record_of_a_small_log() {
    let want = unhex(&GOLDEN.concat());
    assert_eq!(want.len(), 312);
    let t = Thresholds {
        nogo_max: -10,
        go_min: 10,
    };
    let plan = FieldPlan {
        blob_id: 0x0102_0304,
        origin: -64,
        shift: 3,
        go: CusumPlan {
            target: 20,
            slack: 2,
            limit: 2,
        },
        nogo: CusumPlan {
            target: 26,
            slack: 2,
            limit: 10,
        },
    };
    let mut s = FieldStats::new(plan, 1, 1);
    s.decided(&t, &t.decide(25), &[7]);
    s.decided(&t, &t.decide(-40), &[-3]);
    s.faulted(FieldFault::Signal(0));
    let mut buf = [0u8; MAX_RECORD_LEN];
    let n = s.encode(&mut buf).unwrap();
    assert_eq!(&buf[..n], &want[..]);
    assert_eq!(FieldStats::decode(&want), Ok(s));
}

#[test]
fn reserved_bytes_and_the_flag_are_checked_after_the_crc() {
    let mut s = FieldStats::new(plan(), 1, 0);
    s.decided(&T, &decide(60), &[1]);
    let mut buf = [0u8; MAX_RECORD_LEN];
    let n = s.encode(&mut buf).unwrap();
    // A reserved byte, the flag at 2: refused even with the CRC made to match.
    for (at, v) in [(21, 1u8), (93, 1), (92, 2)] {
        let mut b = buf;
        b[at] = v;
        let crc = crate::blob::CRC32.checksum(&b[..n - 4]);
        b[n - 4..n].copy_from_slice(&crc.to_le_bytes());
        assert_eq!(
            FieldStats::decode(&b[..n]),
            Err(RecordError::BadHeader),
            "byte {at}"
        );
    }
    // A count that does not add up, CRC made to match: refused as inconsistent.
    let mut b = buf;
    b[76] = 2; // go 2 of 1 unit
    let crc = crate::blob::CRC32.checksum(&b[..n - 4]);
    b[n - 4..n].copy_from_slice(&crc.to_le_bytes());
    assert_eq!(FieldStats::decode(&b[..n]), Err(RecordError::Inconsistent));
}

#[test]
fn reset_clears_the_counts_and_keeps_the_plan() {
    let mut s = FieldStats::new(plan(), 2, 1);
    s.decided(&T, &decide(60), &[3, -4]);
    s.faulted(FieldFault::Other);
    s.reset();
    assert_eq!(s, FieldStats::new(plan(), 2, 1));
}

/// One observation of a property test's log.
#[derive(Clone, Debug)]
enum Obs {
    Decided(i64, [i32; 3]),
    Fault(FieldFault),
}

fn arb_obs() -> impl proptest::strategy::Strategy<Value = Obs> {
    use proptest::prelude::*;
    prop_oneof![
        4 => (
            prop_oneof![9 => -400i64..400, 1 => any::<i64>()],
            any::<[i32; 3]>()
        )
            .prop_map(|(s, v)| Obs::Decided(s, v)),
        1 => prop_oneof![
            (0u8..5).prop_map(FieldFault::Channel),
            (0u8..3).prop_map(FieldFault::Signal),
            Just(FieldFault::Other),
        ]
        .prop_map(Obs::Fault),
    ]
}

fn arb_cusum() -> impl proptest::strategy::Strategy<Value = CusumPlan> {
    use proptest::prelude::*;
    (-100i64..100, 0i64..20, 0i64..200).prop_map(|(target, slack, limit)| CusumPlan {
        target,
        slack,
        limit,
    })
}

/// The tabular CUSUM from its published recursion (Montgomery §9.1), in i128 with no
/// saturation: the reference the accumulator's saturating i64 steps must meet.
fn reference_cusum(plan: &CusumPlan, margins: &[(i128, u32)]) -> (i128, i128, u32, u32) {
    let (mut up, mut down, mut au, mut ad) = (0i128, 0i128, 0, 0);
    let (mu, k, h) = (
        i128::from(plan.target),
        i128::from(plan.slack),
        i128::from(plan.limit),
    );
    for &(m, unit) in margins {
        up = (up + m - mu - k).max(0);
        down = (down + mu - m - k).max(0);
        if au == 0 && up > h {
            au = unit;
        }
        if ad == 0 && down > h {
            ad = unit;
        }
    }
    (up, down, au, ad)
}

proptest::proptest! {
    /// Any log: the counts add up, the record decodes to the statistics and re-encodes to
    /// the same bytes, and the CUSUMs and channel figures equal plain recomputations.
    #[test]
    fn any_log_adds_up_and_round_trips(
        obs in proptest::collection::vec(arb_obs(), 0..60),
        channels in 0usize..4,
        signals in 0usize..3,
        go in arb_cusum(),
        nogo in arb_cusum(),
        origin in -300i64..300,
        shift in 0u8..8,
    ) {
        let plan = FieldPlan { blob_id: 7, origin, shift, go, nogo };
        let mut s = FieldStats::new(plan, channels, signals);
        let (mut gm, mut nm) = (std::vec::Vec::new(), std::vec::Vec::new());
        let (mut decided, mut faults) = (0u32, 0u32);
        let mut values: std::vec::Vec<[i32; 3]> = std::vec::Vec::new();
        for (i, o) in obs.iter().enumerate() {
            let unit = u32::try_from(i + 1).unwrap();
            match *o {
                Obs::Decided(score, v) => {
                    let d = T.decide(score);
                    s.decided(&T, &d, &v);
                    decided += 1;
                    values.push(v);
                    match d.verdict {
                        Verdict::Go => gm.push((i128::from(score) - i128::from(T.go_min), unit)),
                        Verdict::NoGo => nm.push((i128::from(T.nogo_max) - i128::from(score), unit)),
                        Verdict::Recheck => {}
                    }
                }
                Obs::Fault(f) => {
                    s.faulted(f);
                    faults += 1;
                }
            }
        }
        proptest::prop_assert!(s.adds_up());
        proptest::prop_assert_eq!(s.units, decided + faults);
        proptest::prop_assert_eq!(s.go + s.nogo + s.recheck, decided);
        proptest::prop_assert_eq!(s.faults, faults);
        for (c, state, margins) in [(&go, &s.cusum_go, &gm), (&nogo, &s.cusum_nogo, &nm)] {
            // Saturation aside (any::<i64>() scores reach it), the steps are the recursion.
            if margins.iter().all(|&(m, _)| m.abs() < 1 << 40) {
                let (up, down, au, ad) = reference_cusum(c, margins);
                proptest::prop_assert_eq!(
                    (i128::from(state.up), i128::from(state.down), state.alarm_up, state.alarm_down),
                    (up, down, au, ad)
                );
            }
        }
        for ch in 0..channels {
            if let Some(lo) = values.iter().map(|v| v[ch]).min() {
                proptest::prop_assert_eq!(s.min[ch], lo);
                proptest::prop_assert_eq!(s.max[ch], values.iter().map(|v| v[ch]).max().unwrap());
                proptest::prop_assert_eq!(s.sum[ch], values.iter().map(|v| i64::from(v[ch])).sum::<i64>());
            }
        }
        let mut buf = [0u8; MAX_RECORD_LEN];
        let n = s.encode(&mut buf).unwrap();
        let back = FieldStats::decode(&buf[..n]).unwrap();
        let mut again = [0u8; MAX_RECORD_LEN];
        let m = back.encode(&mut again).unwrap();
        proptest::prop_assert_eq!(&back, &s);
        proptest::prop_assert_eq!(&buf[..n], &again[..m]);
    }
}
