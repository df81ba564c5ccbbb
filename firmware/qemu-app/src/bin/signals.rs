//! Example device application for a model with signal features (blob format version 3),
//! on the same boards as the main example: a `SignalStation` over the model region, fed by
//! linked-in units, each a row of LINEGATE_VECTORS holding the reading channels' readings
//! and then every signal's window of samples, in the model's order. Prints one line per
//! unit (`i VERDICT score`, or `i FAULT …`) over semihosting and exits QEMU: 0 after the
//! units, 2 on a bad blob.
#![no_std]
#![no_main]

// The board module serves the main example too; this one uses part of it.
#[allow(dead_code, unused_imports)]
#[path = "../board.rs"]
mod board;

use board::{debug, entry, hprintln};
use firmware::{GoNoGoLines, SensorSource, SignalStation, StationFault, Step, WindowSource};
#[cfg(target_arch = "arm")]
use panic_semihosting as _;
use shared_model::SignalFault;

#[cfg(target_arch = "riscv32")]
#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    hprintln!("panic");
    debug::exit(debug::EXIT_FAILURE);
    board::idle()
}

mod vectors {
    include!(concat!(env!("OUT_DIR"), "/vectors.rs"));
}

/// Samples the station may hold: every signal's window end to end (the demo's signal
/// model: 256 vibration and 128 current samples).
const SAMPLES: usize = 384;

/// Plays the linked-in rows: `read` starts a row and takes its readings, `fill` takes the
/// next window's samples from the same row.
struct Units {
    /// The row `read` starts next.
    next: usize,
    /// The row being read, and the position in it.
    row: usize,
    at: usize,
}

/// The rows ran out or do not fit the model.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct NoMoreUnits;

impl Units {
    fn take(&mut self, out: &mut [i32]) -> Result<(), NoMoreUnits> {
        let start = self.row.checked_mul(vectors::WIDTH).ok_or(NoMoreUnits)?;
        let row = vectors::VECTORS
            .get(start..start + vectors::WIDTH)
            .ok_or(NoMoreUnits)?;
        let v = row.get(self.at..self.at + out.len()).ok_or(NoMoreUnits)?;
        out.copy_from_slice(v);
        self.at += out.len();
        Ok(())
    }
}

impl SensorSource for Units {
    type Error = NoMoreUnits;
    fn read(&mut self, readings: &mut [i32]) -> Result<(), NoMoreUnits> {
        (self.row, self.at) = (self.next, 0);
        self.next += 1;
        self.take(readings)
    }
}

impl WindowSource for Units {
    fn fill(&mut self, _signal: usize, window: &mut [i32]) -> Result<(), NoMoreUnits> {
        self.take(window)
    }
}

/// Samples of the window the feature costs are measured on.
const COST_WINDOW: usize = 1024;

/// One feature of a 1,024-sample window of a 12-bit signal.
#[inline(always)]
fn feature_of(feature: shared_model::features::Feature, window: &[i32]) -> i32 {
    use shared_model::features::{CheckedFeature, SignalSpec};
    let spec = SignalSpec {
        raw_min: 0,
        raw_max: 4095,
        offset: 2048,
        window: COST_WINDOW as u16,
    };
    CheckedFeature::new(spec, feature)
        .ok()
        .and_then(|f| f.compute(window).ok())
        .unwrap_or(i32::MIN)
}

/// One function per feature, not inlined, named after it: the footprint script counts each
/// one's instructions in the QEMU trace.
macro_rules! cost {
    ($($name:ident => $feature:expr;)*) => {$(
        #[inline(never)]
        fn $name(window: &[i32]) -> i32 {
            use shared_model::features::Feature;
            feature_of($feature, window)
        }
    )*};
}

cost! {
    cost_mean => Feature::Mean;
    cost_rms => Feature::Rms;
    cost_min => Feature::Min;
    cost_max => Feature::Max;
    cost_peak_to_peak => Feature::PeakToPeak;
    cost_abs_peak => Feature::AbsPeak;
    cost_std_dev => Feature::StdDev;
    cost_zero_crossings => Feature::ZeroCrossings;
    // Bin 64 of 1024: round(2cos(2π/16)·2²⁹).
    cost_band => Feature::Band { coeff: 992_008_094 };
}

/// Every feature once on a 1,024-sample window of a 12-bit signal (a tone and a ramp),
/// with the stack each takes, for the footprint report. Not inlined: its 4 KiB window
/// must not stay in `main`'s frame beside the station.
#[inline(never)]
fn feature_costs() {
    let mut window = [0i32; COST_WINDOW];
    for (i, s) in window.iter_mut().enumerate() {
        // Bin 64's tone plus a slow ramp, in integers: a triangle of period 16.
        let t = (i % 16) as i32;
        let tri = if t < 8 { t } else { 16 - t };
        *s = 2048 + (tri - 4) * 200 + (i as i32 % 97);
    }
    let window = core::hint::black_box(&window[..]);
    let top = board::stack_pointer();
    let painted = board::paint_stack(top);
    let values = [
        cost_mean(window),
        cost_rms(window),
        cost_min(window),
        cost_max(window),
        cost_peak_to_peak(window),
        cost_abs_peak(window),
        cost_std_dev(window),
        cost_zero_crossings(window),
        cost_band(window),
    ];
    let stack = board::stack_used(painted, top);
    hprintln!("# features of a 1024-sample window: {:?}", values);
    hprintln!(
        "# stack bytes used by a feature of a 1024-sample window: {}",
        stack
    );
}

#[entry]
fn main() -> ! {
    feature_costs();
    let lines = match GoNoGoLines::new(
        board::Line(&board::GO),
        board::Line(&board::NOGO),
        Some(board::Line(&board::RECHECK)),
    ) {
        Ok(l) => l,
        Err(e) => match e {},
    };
    let painted = board::paint_stack(board::stack_pointer());
    let mut samples = [0i32; SAMPLES];
    let units = Units {
        next: 0,
        row: 0,
        at: 0,
    };
    let mut station = SignalStation::new(board::model_region(), None, &mut samples, units, lines);
    let startup = board::stack_used(painted, board::stack_start());
    match station.model() {
        Ok(m) => {
            let id = shared_model::blob::blob_id(board::model_region()).unwrap_or(0);
            board::model_line(&m.model().model().model_id, id, None);
        }
        Err(e) => {
            let _ = station.step();
            hprintln!("FAULT blob: {}", e);
            debug::exit(Err(()));
            board::idle()
        }
    }
    let count = vectors::VECTORS
        .len()
        .checked_div(vectors::WIDTH)
        .unwrap_or(0);
    let mut deepest = 0usize;
    for i in 0..count {
        let top = board::stack_pointer();
        let painted = board::paint_stack(top);
        let step = station.step();
        deepest = deepest.max(board::stack_used(painted, top));
        match step {
            Ok(Step::Decided(d)) => hprintln!("{} {} {}", i, d.verdict.as_str(), d.score),
            Ok(Step::Faulted {
                fault: StationFault::Reading(shared_model::Fault::OutOfRange { channel, .. }),
                ..
            }) => hprintln!("{} FAULT ch{}", i, channel),
            Ok(Step::Faulted {
                fault: StationFault::Window(SignalFault::Window { signal, .. }),
                ..
            }) => hprintln!("{} FAULT signal{}", i, signal),
            Ok(Step::Faulted { .. }) => hprintln!("{} FAULT other", i),
            Err(e) => match e {},
        }
    }
    hprintln!("# stack bytes used by one step: {}", deepest);
    hprintln!(
        "# stack bytes used from reset through start-up: {}",
        startup
    );
    debug::exit(Ok(()));
    board::idle()
}
