//! Link-time proof of panic-freedom: the decode + classify + drive path for readings and for
//! sample windows (`Station::with_windows`), the field statistics (plan, counting in every
//! step, the record written, read back and reset), and every signal feature of a window with
//! its noise bound, the stations of several classes (readings, `Station::with_classes`,
//! and windows, `Station::with_windows_and_classes`: blob versions 1 to 6, each row's
//! score, the class decision, the class's name), linked with `panic-never`, whose panic handler is an undefined
//! symbol. If any panic path survives optimisation, this binary fails to link.
#![no_std]
#![no_main]

#[allow(dead_code, unused_imports)]
#[path = "../board.rs"]
mod board;

use board::entry;
use firmware::{
    CusumPlan, FieldPlan, FieldStats, GoNoGoLines, SensorSource, Station, Step, WindowSource,
};
use panic_never as _;

/// A value from outside the program (a DMA target or a register on a real board): the
/// optimiser may assume nothing about it. A static the program never writes would not do:
/// whole-program optimisation folds its loads to the initial value.
fn outside() -> i32 {
    core::hint::black_box(0)
}

/// A value handed to the outside world, so the work behind it must be done.
fn observe(v: u32) {
    core::hint::black_box(v);
}

const WINDOW: usize = 256;

/// Every feature of a window whose description and samples the optimiser cannot know.
fn window_features() {
    use shared_model::features::{CheckedFeature, Feature, SignalSpec};
    let window = outside();
    let spec = SignalSpec {
        raw_min: outside(),
        raw_max: outside(),
        offset: outside(),
        window: u16::try_from(window).unwrap_or(0),
    };
    let mut buf = [0i32; WINDOW];
    for b in buf.iter_mut() {
        *b = outside();
    }
    let feature = match outside() {
        0 => Feature::Mean,
        1 => Feature::Rms,
        2 => Feature::Min,
        3 => Feature::Max,
        4 => Feature::PeakToPeak,
        5 => Feature::AbsPeak,
        6 => Feature::StdDev,
        7 => Feature::ZeroCrossings,
        _ => Feature::Band { coeff: outside() },
    };
    let len = usize::try_from(window).unwrap_or(0);
    let value = match (CheckedFeature::new(spec, feature), buf.get(..len)) {
        (Ok(f), Some(window)) => f.compute(window).unwrap_or(i32::MIN),
        _ => i32::MIN + 1,
    };
    observe(value as u32);
    observe(c_noise(&spec, feature));
}

/// The noise bound of a feature too: integer arithmetic the device may run.
fn c_noise(
    spec: &shared_model::features::SignalSpec,
    feature: shared_model::features::Feature,
) -> u32 {
    shared_model::features::CheckedFeature::new(*spec, feature)
        .map_or(0, |f| f.noise_bound(outside() as u32) as u32)
}

struct Inputs;

impl SensorSource for Inputs {
    type Error = ();
    fn read(&mut self, readings: &mut [i32]) -> Result<(), ()> {
        for r in readings.iter_mut() {
            *r = outside();
        }
        Ok(())
    }
}

impl WindowSource for Inputs {
    fn fill(&mut self, _signal: usize, window: &mut [i32]) -> Result<(), ()> {
        for s in window.iter_mut() {
            *s = outside();
        }
        Ok(())
    }
}

/// Hands a step's outcome to the outside world.
fn observe_step(step: Step<()>) {
    match step {
        Step::Decided(d) => {
            observe(d.score as u32);
            observe((d.score >> 32) as u32);
            observe(d.verdict as u32);
            observe(d.class.map_or(255, u32::from));
        }
        Step::Faulted { first, .. } => observe(if first { 10 } else { 11 }),
    }
}

/// A field plan the optimiser cannot know.
fn plan() -> FieldPlan {
    let cusum = || CusumPlan {
        target: i64::from(outside()),
        slack: i64::from(outside()),
        limit: i64::from(outside()),
    };
    FieldPlan {
        blob_id: outside() as u32,
        origin: i64::from(outside()),
        shift: outside() as u8,
        go: cusum(),
        nogo: cusum(),
    }
}

/// The field statistics' calls a device makes besides the steps: the record into a buffer
/// of a length the optimiser cannot know, read back, the counts read, and a reset when the
/// outside world says so.
fn field_calls(field: &FieldStats, record: &mut [u8; shared_model::field::MAX_RECORD_LEN]) {
    let len = usize::try_from(outside()).unwrap_or(0);
    let n = record
        .get_mut(..len)
        .map_or(Ok(0), |out| field.encode(out))
        .unwrap_or(0);
    observe(n as u32);
    let back = record.get(..n).map(FieldStats::decode);
    observe(back.map_or(1, |b| b.map_or(2, |s| s.units)));
    observe(field.units ^ field.cusum_go.alarm_down ^ field.bins[0]);
}

#[entry]
fn main() -> ! {
    let lines = || {
        GoNoGoLines::new(
            board::Line(&board::GO),
            board::Line(&board::NOGO),
            Some(board::Line(&board::RECHECK)),
        )
    };
    let Ok(readings_lines) = lines();
    let Ok(window_lines) = lines();
    let Ok(class_lines) = lines();
    let Ok(class_window_lines) = lines();
    let mut station = Station::new(board::model_region(), Inputs, readings_lines);
    // The station with sample windows, on the same region: both input kinds are linked and
    // proved.
    let mut samples = [0i32; WINDOW];
    let mut windows = Station::with_windows(
        board::model_region(),
        None,
        &mut samples,
        Inputs,
        window_lines,
    );
    // The stations of several classes, both input kinds.
    let mut classes = Station::with_classes(board::model_region(), None, Inputs, class_lines);
    let mut class_samples = [0i32; WINDOW];
    let mut class_windows = Station::with_windows_and_classes(
        board::model_region(),
        None,
        &mut class_samples,
        Inputs,
        class_window_lines,
    );
    station.set_field_plan(plan());
    windows.set_field_plan(plan());
    classes.set_field_plan(plan());
    class_windows.set_field_plan(plan());
    let mut record = [0u8; shared_model::field::MAX_RECORD_LEN];
    loop {
        window_features();
        let Ok(step) = station.step();
        observe_step(step);
        let Ok(step) = windows.step();
        observe_step(step);
        let Ok(step) = classes.step();
        if let (Step::Decided(d), Ok(c)) = (step, classes.classifier()) {
            let name = d.class.and_then(|k| c.class_name(k)).unwrap_or("");
            observe(name.len() as u32 ^ u32::from(name.bytes().next().unwrap_or(0)));
            // Every row's exact score, as the kernel gives them.
            let mut raw = [0i32; shared_model::MAX_CHANNELS];
            for r in raw.iter_mut() {
                *r = outside();
            }
            let n = usize::try_from(outside()).unwrap_or(0);
            let mut scores = [0i64; shared_model::MAX_CLASSES];
            let rows = raw
                .get(..n)
                .map_or(Ok(0), |r| c.model().class_scores(r, &mut scores));
            observe(rows.unwrap_or(99) as u32 ^ scores[0] as u32);
        }
        observe_step(step);
        let Ok(step) = class_windows.step();
        observe_step(step);
        field_calls(classes.field(), &mut record);
        field_calls(station.field(), &mut record);
        let n = windows.field_record(&mut record).unwrap_or(0);
        observe(n as u32);
        if outside() == 1 {
            station.reset_field();
            windows.reset_field();
        }
    }
}
