//! Link-time proof of panic-freedom: the decode + classify + drive path, and every signal
//! feature of a window, linked with `panic-never`, whose panic handler is an undefined
//! symbol. If any panic path survives optimisation, this binary fails to link.
#![no_std]
#![no_main]

#[allow(dead_code, unused_imports)]
#[path = "../board.rs"]
mod board;

use board::entry;
use firmware::{GoNoGoLines, SensorSource, Station, Step};
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
    // A whole unit of readings and windows through a model from flash.
    if let Ok(m) = shared_model::blob::decode_signals(board::model_region()) {
        let mut readings = [0i32; shared_model::MAX_CHANNELS];
        for r in readings.iter_mut() {
            *r = outside();
        }
        let count = usize::try_from(outside()).unwrap_or(0);
        let readings = readings.get(..count).unwrap_or(&[]);
        let windows = [buf.get(..len).unwrap_or(&[]); 2];
        let windows = windows
            .get(..usize::try_from(outside()).unwrap_or(0))
            .unwrap_or(&[]);
        match m.classify_windows(readings, windows) {
            Ok(d) => observe(d.score as u32),
            Err(_) => observe(12),
        }
    }
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

#[entry]
fn main() -> ! {
    let Ok(lines) = GoNoGoLines::new(
        board::Line(&board::GO),
        board::Line(&board::NOGO),
        Some(board::Line(&board::RECHECK)),
    );
    let mut station = Station::new(board::model_region(), Inputs, lines);
    loop {
        window_features();
        let Ok(step) = station.step();
        match step {
            Step::Decided(d) => {
                observe(d.score as u32);
                observe((d.score >> 32) as u32);
                observe(d.verdict as u32);
            }
            Step::Faulted { first, .. } => observe(if first { 10 } else { 11 }),
        }
    }
}
