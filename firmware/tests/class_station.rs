//! The station for models of several classes: each step's decision is the kernel's (class
//! included), the lines show GO only for the GO class decided, NO-GO for any failure class
//! and for a fault, RECHECK as RECHECK; two-sided blobs decide in it as in a two-sided
//! station; a two-sided station refuses a class blob; the field statistics count the
//! decisions through the two-sided view.

mod common;

use std::convert::Infallible;

use common::{Log, recorded_lines};
use firmware::{SensorSource, Station, StationFault, Step, Verdict};
use shared_model::field::{FieldPlan, FieldStats, class_view};
use shared_model::{
    CheckedModel, ClassSection, DecodeError, FieldFault, FixedModel, Readings, SignalSection, blob,
};

fn class_blob() -> (Vec<u8>, CheckedModel<Readings, ClassSection>) {
    let (m, classes) = ClassSection::example_three_class();
    let model = CheckedModel::with_outcomes(m, Readings, classes).unwrap();
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(&model, &mut buf).unwrap();
    assert_eq!(buf[4], 5, "a class model is written as version 5");
    (buf[..n].to_vec(), model)
}

/// Plays readings in order.
struct Rows(std::vec::IntoIter<[i32; 2]>);

impl SensorSource for Rows {
    type Error = Infallible;
    fn read(&mut self, readings: &mut [i32]) -> Result<(), Infallible> {
        readings.copy_from_slice(&self.0.next().expect("rows exhausted"));
        Ok(())
    }
}

/// The (GO, NO-GO, RECHECK) levels the log ends at.
fn shown(log: &Log) -> (bool, bool, bool) {
    let (mut go, mut nogo, mut rc) = (false, false, false);
    for &(line, v) in log.borrow().iter() {
        match line {
            "GO" => go = v,
            "NOGO" => nogo = v,
            _ => rc = v,
        }
    }
    (go, nogo, rc)
}

/// Readings over the valid range (and one past it) in steps of 25.
fn grid() -> Vec<[i32; 2]> {
    let mut v = Vec::new();
    for a in (0..=1025).step_by(25) {
        for b in (0..=1000).step_by(25) {
            v.push([a, b]);
        }
    }
    v
}

#[test]
fn each_step_is_the_kernels_decision_with_its_class_and_the_lines_follow_it() {
    let (bytes, model) = class_blob();
    let units = grid();
    let (lines, log) = recorded_lines();
    let mut st = Station::with_classes(&bytes, None, Rows(units.clone().into_iter()), lines);
    let c = st.classifier().unwrap();
    assert_eq!(c.class_count(), 3);
    assert_eq!(
        (0..4).map(|k| c.class_name(k)).collect::<Vec<_>>(),
        [Some("good"), Some("short"), Some("crack"), None]
    );
    let mut want_field = FieldStats::new(FieldPlan::default(), 2, 0);
    want_field.plan.blob_id = c.blob_id();
    let classes = model.classes().unwrap().clone();
    let mut seen = std::collections::BTreeSet::new();
    for u in &units {
        let step = st.step().unwrap();
        let levels = shown(&log);
        match model.classify(u) {
            Ok(want) => {
                assert_eq!(step, Step::Decided(want), "unit {u:?}");
                let class = want.class.expect("a class model names the leader");
                seen.insert((want.verdict.as_str(), class));
                let expect = match want.verdict {
                    Verdict::Go => (true, false, false),
                    Verdict::NoGo => (false, true, false),
                    Verdict::Recheck => (false, true, true),
                };
                assert_eq!(levels, expect, "unit {u:?}: {want:?}");
                // GO only for the GO class.
                assert!(want.verdict != Verdict::Go || class == 0);
                want_field.decided_classes(&classes, &want, u);
            }
            Err(f) => {
                assert!(
                    matches!(step, Step::Faulted { fault: StationFault::Reading(g), .. } if g == f),
                    "unit {u:?}: {step:?}"
                );
                assert_eq!(levels, (false, true, false), "a fault shows NO-GO");
                want_field.faulted(FieldFault::Channel(0));
            }
        }
    }
    // The grid reaches every class decided and under RECHECK.
    for v in ["GO", "NO-GO", "RECHECK"] {
        assert!(seen.iter().any(|&(s, _)| s == v), "no {v} in {seen:?}");
    }
    for k in 1..3 {
        assert!(seen.contains(&("NO-GO", k)), "class {k} never decided");
    }
    assert_eq!(st.field(), &want_field);
    assert!(st.field().go > 0 && st.field().nogo > 0 && st.field().recheck > 0);
}

#[test]
fn the_field_view_of_a_class_decision_has_the_decisions_verdict() {
    let (_, model) = class_blob();
    let classes = model.classes().unwrap();
    for u in grid() {
        if let Ok(d) = model.classify(&u) {
            let (t, view) = class_view(classes, &d);
            assert_eq!(t.verdict(view.score), d.verdict, "unit {u:?}: {d:?}");
            assert_eq!(view.score.abs(), d.score);
        }
    }
}

#[test]
fn a_two_sided_blob_decides_in_a_class_station_as_in_a_two_sided_one() {
    let mut m = FixedModel::example_two_channel();
    (m.nogo_max, m.go_min) = (-1_000_000, 1_000_000);
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(&CheckedModel::new(m).unwrap(), &mut buf).unwrap();
    let bytes = &buf[..n];
    let units = grid();
    let (l1, log1) = recorded_lines();
    let (l2, log2) = recorded_lines();
    let mut two = Station::new(bytes, Rows(units.clone().into_iter()), l1);
    let mut cls = Station::with_classes(bytes, None, Rows(units.clone().into_iter()), l2);
    assert_eq!(cls.classifier().unwrap().class_count(), 0);
    for _ in &units {
        let (a, b) = (two.step().unwrap(), cls.step().unwrap());
        assert_eq!(a, b);
        if let Step::Decided(d) = b {
            assert_eq!(d.class, None);
        }
    }
    assert_eq!(*log1.borrow(), *log2.borrow());
    assert_eq!(two.field(), cls.field());
}

#[test]
fn a_two_sided_station_refuses_a_class_blob_and_holds_no_go() {
    let (bytes, _) = class_blob();
    let (lines, log) = recorded_lines();
    let mut st = Station::new(&bytes, Rows(vec![[500, 500]].into_iter()), lines);
    assert_eq!(st.classifier().err(), Some(DecodeError::Classes));
    assert!(matches!(
        st.step().unwrap(),
        Step::Faulted {
            fault: StationFault::Blob(DecodeError::Classes),
            first: true
        }
    ));
    assert_eq!(shown(&log), (false, true, false));
}

/// A source of readings and windows for the windows-and-classes station (no signals here).
struct Both(std::vec::IntoIter<[i32; 2]>);

impl SensorSource for Both {
    type Error = Infallible;
    fn read(&mut self, readings: &mut [i32]) -> Result<(), Infallible> {
        readings.copy_from_slice(&self.0.next().expect("rows exhausted"));
        Ok(())
    }
}

impl firmware::WindowSource for Both {
    fn fill(&mut self, _signal: usize, _window: &mut [i32]) -> Result<(), Infallible> {
        Ok(())
    }
}

#[test]
fn the_windows_and_classes_station_loads_a_class_blob_of_readings_and_reloads() {
    let (bytes, model) = class_blob();
    let (lines, _log) = recorded_lines();
    let mut samples = [0i32; 8];
    let units = grid();
    let mut st = Station::with_windows_and_classes(
        &bytes,
        None,
        &mut samples,
        Both(units.clone().into_iter()),
        lines,
    );
    let m: &CheckedModel<SignalSection, ClassSection> = st.classifier().unwrap().model();
    assert_eq!(m.signal_count(), 0);
    for u in units.iter().take(50) {
        match (st.step().unwrap(), model.classify(u)) {
            (Step::Decided(d), Ok(w)) => assert_eq!(d, w),
            (Step::Faulted { .. }, Err(_)) => {}
            (got, want) => panic!("unit {u:?}: {got:?} against {want:?}"),
        }
    }
    // A corrupt blob on reload drops the model and holds NO-GO.
    let mut bad = bytes.clone();
    let last = bad.len() - 1;
    bad[last] ^= 1;
    st.reload(&bad).unwrap();
    assert!(matches!(
        st.classifier(),
        Err(DecodeError::CrcMismatch { .. })
    ));
    st.reload(&bytes).unwrap();
    assert_eq!(st.classifier().unwrap().class_count(), 3);
}
