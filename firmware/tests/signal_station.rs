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
