//! The station with sample windows on the host: the verdict is the shared kernel's for the
//! windows the board filled, every fault shows NO-GO once, and the two kinds of blob stay
//! apart (a station of readings refuses a model that needs windows).

mod common;

use common::recorded_lines as lines;
use firmware::{SensorSource, Station, StationFault, Step, WindowSource};
use shared_model::features::{Feature, SignalSection, SignalSpec, Source};
use shared_model::{CheckedModel, DecodeError, FixedModel, SignalFault, WindowFault, blob};

/// The example model (weights +100 on `a`, −100 on `b`, Q15 inputs over 0..=1000 centred at
/// 500) with `a` the peak-to-peak of a 12-bit, 8-sample signal (0..=1000 counts of it
/// reach the channel's whole range) and `b` a reading.
fn model() -> CheckedModel<SignalSection> {
    let m = FixedModel::example_two_channel();
    let mut signals = SignalSection::default();
    signals
        .signals
        .push(SignalSpec {
            raw_min: 0,
            raw_max: 4095,
            offset: 2048,
            window: 8,
        })
        .unwrap();
    signals
        .sources
        .push(Source::Feature {
            signal: 0,
            feature: Feature::PeakToPeak,
        })
        .unwrap();
    signals.sources.push(Source::Reading).unwrap();
    CheckedModel::with_inputs(m, signals).unwrap()
}

fn blob_of(m: &CheckedModel<SignalSection>) -> Vec<u8> {
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(m, &mut buf).unwrap();
    buf[..n].to_vec()
}

#[derive(Clone, Copy, Debug, PartialEq)]
struct BusError;

/// One unit as the board sees it: the reading of `b`, the window of the signal, or a
/// failure of either.
#[derive(Clone)]
struct Unit {
    reading: Result<i32, BusError>,
    window: Result<Vec<i32>, BusError>,
}

struct Board(std::vec::IntoIter<Unit>, Option<Unit>);

impl SensorSource for Board {
    type Error = BusError;
    fn read(&mut self, readings: &mut [i32]) -> Result<(), BusError> {
        let u = self.0.next().expect("script exhausted");
        self.1 = Some(u.clone());
        readings.copy_from_slice(&[u.reading?]);
        Ok(())
    }
}

impl WindowSource for Board {
    fn fill(&mut self, signal: usize, window: &mut [i32]) -> Result<(), BusError> {
        assert_eq!(signal, 0);
        let w = self.1.as_ref().unwrap().window.clone()?;
        window.copy_from_slice(&w);
        Ok(())
    }
}

fn unit(reading: i32, window: [i32; 8]) -> Unit {
    Unit {
        reading: Ok(reading),
        window: Ok(window.to_vec()),
    }
}

#[test]
fn windows_are_classified_as_the_kernel_classifies_them() {
    let m = model();
    // A wide swing (peak-to-peak 900: GO with b low), a quiet one (NO-GO).
    let wide = [2048, 2500, 1600, 2048, 2400, 2000, 2048, 1700];
    let quiet = [2048, 2050, 2046, 2048, 2049, 2047, 2048, 2048];
    let units = vec![unit(100, wide), unit(900, quiet), unit(100, wide)];
    let (lines, log) = lines();
    let mut samples = [0i32; 8];
    let board = Board(units.clone().into_iter(), None);
    let mut st = Station::with_windows(&blob_of(&m), None, &mut samples, board, lines);
    for u in &units {
        let want = m
            .classify_windows(
                &[*u.reading.as_ref().unwrap()],
                &[u.window.as_ref().unwrap()],
            )
            .unwrap();
        assert_eq!(st.step().unwrap(), Step::Decided(want));
        // The lines show that verdict: the last write to its line is high.
        let shown = log
            .borrow()
            .iter()
            .rev()
            .find(|(_, high)| *high)
            .map(|p| p.0);
        let name = match want.verdict {
            firmware::Verdict::Go => "GO",
            firmware::Verdict::NoGo => "NOGO",
            firmware::Verdict::Recheck => "RECHECK",
        };
        assert_eq!(shown, Some(name));
    }
}

#[test]
fn every_fault_shows_nogo_once() {
    let m = model();
    let wide = [2048, 2500, 1600, 2048, 2400, 2000, 2048, 1700];
    let mut bad_sample = wide;
    bad_sample[3] = 4096;
    let units = vec![
        Unit {
            reading: Ok(100),
            window: Err(BusError),
        },
        Unit {
            reading: Ok(100),
            window: Err(BusError),
        },
        unit(100, bad_sample),
        unit(1001, wide),
        unit(100, wide),
    ];
    let (lines, log) = lines();
    let mut samples = [0i32; 8];
    let mut st = Station::with_windows(
        &blob_of(&m),
        None,
        &mut samples,
        Board(units.into_iter(), None),
        lines,
    );
    let faults: Vec<(StationFault<BusError>, bool)> = (0..4)
        .map(|_| match st.step().unwrap() {
            Step::Faulted { fault, first } => {
                assert_eq!(log.borrow().last(), Some(&("NOGO", true)));
                (fault, first)
            }
            other => panic!("unexpected {other:?}"),
        })
        .collect();
    assert_eq!(
        faults,
        [
            (StationFault::Sensor(BusError), true),
            (StationFault::Sensor(BusError), false),
            (
                StationFault::Window(SignalFault::Window {
                    signal: 0,
                    fault: WindowFault::OutOfRange {
                        index: 3,
                        raw: 4096
                    }
                }),
                true
            ),
            (
                StationFault::Reading(shared_model::Fault::OutOfRange {
                    channel: 1,
                    raw: 1001
                }),
                true
            ),
        ]
    );
    assert!(matches!(st.step().unwrap(), Step::Decided(_)));
}

#[test]
fn a_sample_buffer_too_short_for_the_windows_is_a_fault() {
    let m = model();
    let (lines, _) = lines();
    let mut samples = [0i32; 7];
    let units = vec![unit(100, [2048; 8])];
    let mut st = Station::with_windows(
        &blob_of(&m),
        None,
        &mut samples,
        Board(units.into_iter(), None),
        lines,
    );
    assert_eq!(
        st.step().unwrap(),
        Step::Faulted {
            fault: StationFault::Window(SignalFault::Windows {
                expected: 1,
                got: 0
            }),
            first: true
        }
    );
}

#[test]
fn the_two_kinds_of_blob_stay_apart() {
    let m = model();
    // A station of readings refuses a model that needs windows: NO-GO, Blob(Signals).
    struct Readings;
    impl SensorSource for Readings {
        type Error = BusError;
        fn read(&mut self, _: &mut [i32]) -> Result<(), BusError> {
            Ok(())
        }
    }
    let (lines_a, _) = lines();
    let mut st = Station::new(&blob_of(&m), Readings, lines_a);
    assert_eq!(
        st.step().unwrap(),
        Step::Faulted {
            fault: StationFault::Blob(DecodeError::Signals),
            first: true
        }
    );
    // A station of windows takes a version-1 blob: every channel a reading, no window.
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(&CheckedModel::new(m.model().clone()).unwrap(), &mut buf).unwrap();
    let (lines_b, _) = lines();
    let mut samples = [0i32; 0];
    struct Both;
    impl SensorSource for Both {
        type Error = BusError;
        fn read(&mut self, r: &mut [i32]) -> Result<(), BusError> {
            r.copy_from_slice(&[900, 100]);
            Ok(())
        }
    }
    impl WindowSource for Both {
        fn fill(&mut self, _: usize, _: &mut [i32]) -> Result<(), BusError> {
            unreachable!("a model without signals asks for no window")
        }
    }
    let mut st = Station::with_windows(&buf[..n], None, &mut samples, Both, lines_b);
    assert_eq!(st.classifier().unwrap().model().signal_count(), 0);
    assert_eq!(
        st.step().unwrap(),
        Step::Decided(m.classify(&[900, 100]).unwrap())
    );
}

/// The field statistics count every step: a decided unit with the values its weights
/// multiplied (`channel_values`, the peak-to-peak and the reading), each fault by where it
/// came from (sensor failures as other, a refused window as its signal's, a reading out of
/// range as its channel's). The record is the one `FieldStats` writes for the same steps;
/// the plan's blob id is the loaded blob's; reset and reload start afresh.
#[test]
fn field_statistics_count_every_step_as_the_shared_accumulator_does() {
    use firmware::{CusumPlan, FieldFault, FieldPlan, FieldStats, RecordError};
    let m = model();
    let bytes = blob_of(&m);
    let wide = [2048, 2500, 1600, 2048, 2400, 2000, 2048, 1700];
    let quiet = [2048, 2050, 2046, 2048, 2049, 2047, 2048, 2048];
    let mut bad_sample = wide;
    bad_sample[3] = 4096;
    let units = vec![
        Unit {
            reading: Ok(100),
            window: Err(BusError),
        },
        unit(100, bad_sample),
        unit(1001, wide),
        unit(100, wide),
        unit(900, quiet),
    ];
    let (lines, _) = lines();
    let mut samples = [0i32; 8];
    let mut st = Station::with_windows(
        &bytes,
        None,
        &mut samples,
        Board(units.clone().into_iter(), None),
        lines,
    );
    let blob_id = blob::blob_id(&bytes).unwrap();
    assert_eq!(
        st.field().plan.blob_id,
        blob_id,
        "the record names the blob"
    );
    let plan = FieldPlan {
        blob_id: 0xFFFF_FFFF, // not taken: the loaded blob's id is
        origin: -8_000_000,
        shift: 19,
        go: CusumPlan {
            target: 1_000_000,
            slack: 1000,
            limit: 10,
        },
        nogo: CusumPlan {
            target: 0,
            slack: 1000,
            limit: 10,
        },
    };
    st.set_field_plan(plan);
    let mut want = FieldStats::new(FieldPlan { blob_id, ..plan }, 2, 1);
    for u in &units {
        st.step().unwrap();
        let reading = [u.reading.unwrap()];
        let Ok(window) = u.window.as_ref() else {
            want.faulted(FieldFault::Other);
            continue;
        };
        let mut values = [0i32; shared_model::MAX_CHANNELS];
        match m.channel_values(&reading, &[window], &mut values) {
            Err(SignalFault::Window { signal, .. }) => want.faulted(FieldFault::Signal(signal)),
            Err(e) => panic!("{e}"),
            Ok(n) => match m.classify(&values[..n]) {
                Ok(d) => want.decided(&m.thresholds(), &d, &values[..n]),
                Err(shared_model::Fault::OutOfRange { channel, .. }) => {
                    want.faulted(FieldFault::Channel(channel))
                }
                Err(e) => panic!("{e}"),
            },
        }
    }
    assert_eq!(st.field(), &want);
    assert_eq!(
        (want.units, want.faults, want.other_faults),
        (5, 3, 1),
        "the log's units"
    );
    assert_eq!((want.signal_faults[0], want.channel_faults[1]), (1, 1));
    assert_eq!(want.go + want.nogo, 2);
    let mut rec = [0u8; shared_model::field::MAX_RECORD_LEN];
    let n = st.field_record(&mut rec).unwrap();
    let mut rec_want = [0u8; shared_model::field::MAX_RECORD_LEN];
    assert_eq!(want.encode(&mut rec_want), Ok(n));
    assert_eq!(rec[..n], rec_want[..n]);
    assert_eq!(FieldStats::decode(&rec[..n]), Ok(want.clone()));
    assert_eq!(
        st.field_record(&mut rec[..n - 1]),
        Err(RecordError::BufferTooSmall)
    );
    st.reset_field();
    assert_eq!(st.field(), &FieldStats::new(want.plan, 2, 1));
    // A reload with a damaged blob: no model, the statistics start afresh with blob id 0,
    // and the next step counts as an other fault.
    let mut damaged = bytes.clone();
    damaged[12] ^= 1;
    st.reload(&damaged).unwrap();
    assert_eq!(st.field().plan.blob_id, 0);
    assert_eq!(st.field().plan.origin, plan.origin, "the plan is kept");
    st.step().unwrap();
    assert_eq!((st.field().units, st.field().other_faults), (1, 1));
}
