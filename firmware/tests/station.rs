//! Host tests of the device library: pin sequences with embedded-hal-mock, and
//! fault injection with a scripted sensor source and order-recording pins.

mod common;

use common::{Log, Rec, recorded_lines};
use embedded_hal_mock::eh1::digital::{Mock as PinMock, State, Transaction as T};
use firmware::{GoNoGoLines, SensorSource, Station, StationFault, Step, Verdict};
use shared_model::{CheckedModel, DecodeError, Fault, FixedModel, blob};

/// The example model with a RECHECK band of ±1_000_000 around 0.
fn blob_bytes() -> Vec<u8> {
    let mut m = FixedModel::example_two_channel();
    m.nogo_max = -1_000_000;
    m.go_min = 1_000_000;
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(&CheckedModel::new(m).unwrap(), &mut buf).unwrap();
    buf[..n].to_vec()
}

// Readings for the example model (weights +100, -100 on Q15 inputs centred at 500):
const GO: [i32; 2] = [900, 100]; // score ≈ +5.2e6
const NOGO: [i32; 2] = [100, 900]; // score ≈ -5.2e6
const RECHECK: [i32; 2] = [505, 500]; // score ≈ +6.6e4, inside the band

#[derive(Clone, Copy, Debug, PartialEq)]
struct BusError;

/// Plays a fixed script of read results.
struct Script(std::vec::IntoIter<Result<[i32; 2], BusError>>);

impl Script {
    fn new(items: Vec<Result<[i32; 2], BusError>>) -> Self {
        Self(items.into_iter())
    }
}

impl SensorSource for Script {
    type Error = BusError;
    fn read(&mut self, readings: &mut [i32]) -> Result<(), BusError> {
        let r = self.0.next().expect("script exhausted")?;
        readings.copy_from_slice(&r);
        Ok(())
    }
}

fn mocks(go: &[State], nogo: &[State], recheck: &[State]) -> (PinMock, PinMock, PinMock) {
    let t = |s: &[State]| s.iter().map(|&x| T::set(x)).collect::<Vec<_>>();
    (
        PinMock::new(&t(go)),
        PinMock::new(&t(nogo)),
        PinMock::new(&t(recheck)),
    )
}

use State::{High as H, Low as L};

#[test]
fn valid_blob_drives_go_nogo_recheck() {
    // new(): NO-GO. Then GO, NO-GO, RECHECK, GO.
    let (go, nogo, rc) = mocks(&[L, H, L, L, H], &[H, L, H, H, L], &[L, L, L, H, L]);
    let lines = GoNoGoLines::new(go, nogo, Some(rc)).unwrap();
    let sensor = Script::new(vec![Ok(GO), Ok(NOGO), Ok(RECHECK), Ok(GO)]);
    let mut st = Station::new(&blob_bytes(), sensor, lines);
    let verdicts: Vec<Verdict> = (0..4)
        .map(|_| match st.step().unwrap() {
            Step::Decided(d) => d.verdict,
            other => panic!("unexpected {other:?}"),
        })
        .collect();
    assert_eq!(
        verdicts,
        [Verdict::Go, Verdict::NoGo, Verdict::Recheck, Verdict::Go]
    );
    let (_, _, lines) = st.release();
    let (mut go, mut nogo, rc) = lines.release();
    go.done();
    nogo.done();
    rc.unwrap().done();
}

#[test]
fn invalid_blob_holds_nogo_and_never_asserts_go() {
    let mut bad = blob_bytes();
    bad[20] ^= 0x10;
    // new() and two steps: each writes GO low, RECHECK low, NO-GO high.
    let (go, nogo, rc) = mocks(&[L, L, L], &[H, H, H], &[L, L, L]);
    let lines = GoNoGoLines::new(go, nogo, Some(rc)).unwrap();
    let mut st = Station::new(&bad, Script::new(vec![]), lines);
    assert!(matches!(
        st.classifier(),
        Err(DecodeError::CrcMismatch { .. })
    ));
    for first in [true, false] {
        match st.step().unwrap() {
            Step::Faulted {
                fault: StationFault::Blob(DecodeError::CrcMismatch { .. }),
                first: f,
            } => {
                assert_eq!(f, first)
            }
            other => panic!("unexpected {other:?}"),
        }
    }
    let (_, _, lines) = st.release();
    let (mut go, mut nogo, rc) = lines.release();
    go.done();
    nogo.done();
    rc.unwrap().done();
}

fn recorded_station(
    flash: &[u8],
    script: Vec<Result<[i32; 2], BusError>>,
) -> (Station<'static, Script, Rec, Rec, Rec>, Log) {
    let (lines, log) = recorded_lines();
    (Station::new(flash, Script::new(script), lines), log)
}

/// Replays the log and returns the GO/NO-GO levels after each write.
fn levels(log: &Log) -> Vec<(bool, bool)> {
    let (mut go, mut nogo) = (false, false);
    log.borrow()
        .iter()
        .map(|&(line, v)| {
            match line {
                "GO" => go = v,
                "NOGO" => nogo = v,
                _ => {}
            }
            (go, nogo)
        })
        .collect()
}

#[test]
fn go_and_nogo_are_never_asserted_together() {
    let (mut st, log) = recorded_station(
        &blob_bytes(),
        vec![Ok(GO), Ok(NOGO), Ok(GO), Ok(RECHECK), Ok(GO), Err(BusError)],
    );
    for _ in 0..6 {
        st.step().unwrap();
    }
    assert!(
        levels(&log).iter().all(|&(go, nogo)| !(go && nogo)),
        "{:?}",
        log.borrow()
    );
    assert_eq!(levels(&log).last(), Some(&(false, true)));
}

#[test]
fn fault_injection_never_asserts_go_and_reports_each_fault_once() {
    // Valid range is 0..=1000; an ADC stuck at a rail reads 0xFFF (4095) or -1 here.
    type Case = (
        &'static str,
        Vec<Result<[i32; 2], BusError>>,
        StationFault<BusError>,
    );
    let cases: Vec<Case> = vec![
        (
            "read failure",
            vec![Err(BusError); 3],
            StationFault::Sensor(BusError),
        ),
        (
            "stuck at the upper rail",
            vec![Ok([4095, 100]); 3],
            StationFault::Reading(Fault::OutOfRange {
                channel: 0,
                raw: 4095,
            }),
        ),
        (
            "stuck at the lower rail",
            vec![Ok([900, -1]); 3],
            StationFault::Reading(Fault::OutOfRange {
                channel: 1,
                raw: -1,
            }),
        ),
        (
            "out of range",
            vec![Ok([1001, 500]); 3],
            StationFault::Reading(Fault::OutOfRange {
                channel: 0,
                raw: 1001,
            }),
        ),
    ];
    for (name, script, want) in cases {
        let (mut st, log) = recorded_station(&blob_bytes(), script);
        let firsts: Vec<bool> = (0..3)
            .map(|_| match st.step().unwrap() {
                Step::Faulted { fault, first } => {
                    assert_eq!(fault, want, "{name}");
                    first
                }
                other => panic!("{name}: unexpected {other:?}"),
            })
            .collect();
        assert_eq!(firsts, [true, false, false], "{name}: reported once");
        assert!(
            log.borrow().iter().all(|&e| e != ("GO", true)),
            "{name}: GO asserted"
        );
        assert_eq!(
            levels(&log).last(),
            Some(&(false, true)),
            "{name}: NO-GO held"
        );
    }
}

#[test]
fn fault_clears_then_recurs_and_is_reported_again() {
    let (mut st, _) = recorded_station(&blob_bytes(), vec![Err(BusError), Ok(GO), Err(BusError)]);
    let firsts: Vec<Option<bool>> = (0..3)
        .map(|_| match st.step().unwrap() {
            Step::Faulted { first, .. } => Some(first),
            Step::Decided(_) => None,
        })
        .collect();
    assert_eq!(firsts, [Some(true), None, Some(true)]);
}

#[test]
fn blob_replaced_mid_run_with_a_corrupt_one_drops_go() {
    let good = blob_bytes();
    let mut corrupt = good.clone();
    let last = corrupt.len() - 1;
    corrupt[last] ^= 0x01;
    let (mut st, log) = recorded_station(&good, vec![Ok(GO), Ok(GO), Ok(GO)]);
    assert!(matches!(st.step().unwrap(), Step::Decided(d) if d.verdict == Verdict::Go));
    assert_eq!(levels(&log).last(), Some(&(true, false)));
    let before = log.borrow().len();
    st.reload(&corrupt).unwrap();
    assert_eq!(
        levels(&log).last(),
        Some(&(false, true)),
        "reload drops GO at once"
    );
    for _ in 0..2 {
        assert!(matches!(
            st.step().unwrap(),
            Step::Faulted {
                fault: StationFault::Blob(DecodeError::CrcMismatch { .. }),
                ..
            }
        ));
    }
    assert!(log.borrow()[before..].iter().all(|&e| e != ("GO", true)));
}

#[test]
fn blob_in_a_longer_flash_region_loads() {
    let mut region = blob_bytes();
    region.resize(4096, 0xFF); // erased flash after the blob
    assert!(firmware::Classifier::from_flash(&region).is_ok());
    assert!(
        firmware::Classifier::from_flash(&[0xFF; 64]).is_err(),
        "erased region is not a model"
    );
}
