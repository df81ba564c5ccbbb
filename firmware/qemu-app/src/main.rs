//! Example device application (Cortex-M0, M3, M4F, M33 and RV32IMAC under QEMU; the board
//! module holds what differs): validates the model blob in flash, of readings (format
//! version 1 or 2) or with signal features (3 or 4), classifies the linked-in units, prints
//! one line per unit over semihosting (the same lines as `linegate replay`), and exits
//! QEMU: 0 after the units, 1 on a bad blob.
//!
//! One station, [`Station::with_windows`], runs both kinds of blob: each row of
//! LINEGATE_VECTORS is one unit, the reading channels' readings and then every signal's
//! window of samples in the model's order (a model of readings has no windows, so a row is
//! its readings). At start it computes every feature of a 1,024-sample window in functions
//! named `cost_<feature>`, which `footprint.sh` counts in the QEMU trace. After the units it
//! prints its field record (the statistics kept under the plan LINEGATE_FIELD_PLAN names,
//! see build.rs) as one line, `# field <lower-case hex of the record's bytes>`.
//!
//! A blob of several classes (format version 5 or 6, seen in its header) runs on
//! [`Station::with_windows_and_classes`] instead, in a frame of its own so that a two-sided
//! blob's start-up stack stays as it was; its unit lines name the leading class:
//! `<i> <GO|NO-GO|RECHECK> <lead> <class name>` (FAULT lines as for any blob).
#![no_std]
#![no_main]

mod board;

use board::{debug, entry, hprint, hprintln};
use firmware::{
    ClassSection, Classifier, Decision, Fault, GoNoGoLines, Outcomes, Station, StationFault, Step,
    TwoSided,
};
#[cfg(target_arch = "arm")]
use panic_semihosting as _;
use shared_model::{SignalFault, SignalSection};

/// On RISC-V there is no semihosting panic crate: report and exit with failure.
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

mod release_key {
    include!(concat!(env!("OUT_DIR"), "/release_key.rs"));
}

mod field_plan {
    include!(concat!(env!("OUT_DIR"), "/field_plan.rs"));
}

/// Samples the station may hold: every signal's window end to end (the demo's signal
/// model: 256 vibration and 128 current samples).
const SAMPLES: usize = 384;

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
    let classes =
        shared_model::blob::Header::read(board::model_region()).is_ok_and(|h| h.has_classes());
    if classes {
        run::<ClassSection>()
    } else {
        run::<TwoSided>()
    }
}

/// The board's station for outcome kind `Self`.
type BoardStation<'w, K> =
    Station<'w, board::Rows, board::Line, board::Line, board::Line, SignalSection, K>;

/// How the example builds its station and counts its kernel, per outcome kind.
trait Kind: Outcomes {
    /// The station over `region` (see [`Station::with_windows`]).
    fn station<'w>(
        region: &[u8],
        key: Option<firmware::ReleaseKey>,
        samples: &'w mut [i32],
        rows: board::Rows,
        lines: GoNoGoLines<board::Line, board::Line, board::Line>,
    ) -> BoardStation<'w, Self>;

    /// The kernel once, behind a call boundary the footprint script counts.
    fn classify_counted(
        c: &Classifier<SignalSection, Self>,
        raw: &[i32],
    ) -> Result<Decision, Fault>;
}

impl Kind for TwoSided {
    #[inline(always)]
    fn station<'w>(
        region: &[u8],
        key: Option<firmware::ReleaseKey>,
        samples: &'w mut [i32],
        rows: board::Rows,
        lines: GoNoGoLines<board::Line, board::Line, board::Line>,
    ) -> BoardStation<'w, Self> {
        Station::with_windows(region, key, samples, rows, lines)
    }

    #[inline(always)]
    fn classify_counted(
        c: &Classifier<SignalSection, Self>,
        raw: &[i32],
    ) -> Result<Decision, Fault> {
        classify_once(c, raw)
    }
}

impl Kind for ClassSection {
    #[inline(always)]
    fn station<'w>(
        region: &[u8],
        key: Option<firmware::ReleaseKey>,
        samples: &'w mut [i32],
        rows: board::Rows,
        lines: GoNoGoLines<board::Line, board::Line, board::Line>,
    ) -> BoardStation<'w, Self> {
        Station::with_windows_and_classes(region, key, samples, rows, lines)
    }

    #[inline(always)]
    fn classify_counted(
        c: &Classifier<SignalSection, Self>,
        raw: &[i32],
    ) -> Result<Decision, Fault> {
        classify_classes_once(c, raw)
    }
}

/// The station over the linked-in units. Its own frame, not `main`'s: the feature costs'
/// 4 KiB window must not stand on the stack beside the station (16 KiB on the M0 board).
/// One instance per outcome kind, each in its own frame.
#[inline(never)]
fn run<K: Kind>() -> ! {
    let lines = match GoNoGoLines::new(
        board::Line(&board::GO),
        board::Line(&board::NOGO),
        Some(board::Line(&board::RECHECK)),
    ) {
        Ok(l) => l,
        Err(e) => match e {},
    };
    let rows = board::Rows {
        data: &vectors::VECTORS,
        width: vectors::WIDTH,
        next: 0,
        row: 0,
        at: 0,
    };
    // A signed-release build (a key compiled in) loads only blobs signed with that key; a key
    // that is not a valid point loads nothing, so the station holds NO-GO.
    let key = release_key::RELEASE_KEY.map(|k| firmware::ReleaseKey::from_bytes(&k));
    // Stack for start-up (the blob's validation), counted from reset: main's own frame
    // (which holds the station and its sample buffer) included, so it is all the RAM the
    // application needs.
    let painted = board::paint_stack(board::stack_pointer());
    let mut samples = [0i32; SAMPLES];
    // One construction site: each would hold its own station in main's frame.
    let (region, key) = match key {
        None => (board::model_region(), None),
        Some(Some(k)) => (board::model_region(), Some(k)),
        Some(None) => (&[][..], None),
    };
    let mut station = K::station(region, key, &mut samples, rows, lines);
    let startup = board::stack_used(painted, board::stack_start());
    station.set_field_plan(field_plan::PLAN);
    match station.classifier() {
        Ok(c) => {
            board::model_line(
                &c.model_id(),
                c.blob_id(),
                c.key_id().as_ref().map(|k| &k[..]),
            );
            let m = c.model();
            let windows: usize = m
                .signals()
                .signals
                .iter()
                .map(|s| usize::from(s.window))
                .sum();
            let fits = m.reading_count() + windows == vectors::WIDTH;
            board::ROWS_FIT.store(fits, core::sync::atomic::Ordering::SeqCst);
        }
        Err(e) => {
            let _ = station.step();
            hprintln!("FAULT blob: {}", e);
            report_lines();
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
        // The kernel alone, once more, behind a call boundary the footprint script can count
        // (a model of readings: its row is one reading per channel).
        if let (Ok(c), Some(v)) = (
            station.classifier(),
            vectors::VECTORS.get(i * vectors::WIDTH..(i + 1) * vectors::WIDTH),
        ) && c.model().signal_count() == 0
        {
            let _ = core::hint::black_box(K::classify_counted(c, v));
            // And the dot-product stage alone, on inputs already scaled.
            let mut x = [0i32; shared_model::MAX_CHANNELS];
            // (Two-sided models only: a class model's rows are scored by its classify.)
            if let Some(x) = x.get_mut(..v.len())
                && c.classes().is_none()
                && c.model().scale(v, x).is_ok()
            {
                let _ = core::hint::black_box(score_once(c, x));
            }
        }
        match step {
            Ok(Step::Decided(d)) => match (d.class, station.classifier()) {
                (Some(k), Ok(c)) => hprintln!(
                    "{} {} {} {}",
                    i,
                    d.verdict.as_str(),
                    d.score,
                    c.class_name(k).unwrap_or("?")
                ),
                _ => hprintln!("{} {} {}", i, d.verdict.as_str(), d.score),
            },
            Ok(Step::Faulted {
                fault: StationFault::Reading(Fault::OutOfRange { channel, .. }),
                ..
            }) => hprintln!("{} FAULT ch{}", i, channel),
            Ok(Step::Faulted {
                fault: StationFault::Window(SignalFault::Window { signal, .. }),
                ..
            }) => hprintln!("{} FAULT signal{}", i, signal),
            // As replay's line: a wrong reading count is `count`, any other fault `other`.
            Ok(Step::Faulted {
                fault:
                    StationFault::Reading(Fault::ReadingCount { .. })
                    | StationFault::Window(SignalFault::Reading(Fault::ReadingCount { .. })),
                ..
            }) => hprintln!("{} FAULT count", i),
            Ok(Step::Faulted { .. }) => hprintln!("{} FAULT other", i),
            Err(e) => match e {},
        }
    }
    print_field(station.field());
    hprintln!("# stack bytes used by one step: {}", deepest);
    hprintln!(
        "# stack bytes used from reset through start-up: {}",
        startup
    );
    report_lines();
    debug::exit(Ok(()));
    board::idle()
}

/// One classification by the shared kernel (not inlined, so its instructions can be counted).
#[inline(never)]
fn classify_once(c: &Classifier<SignalSection>, raw: &[i32]) -> Result<Decision, Fault> {
    c.classify(raw)
}

/// One classification of a model of several classes (not inlined, to be counted): scale
/// once, score every row, decide.
#[inline(never)]
fn classify_classes_once(
    c: &Classifier<SignalSection, ClassSection>,
    raw: &[i32],
) -> Result<Decision, Fault> {
    c.classify(raw)
}

/// The dot-product stage only: bias + Σ weight·x over scaled inputs (not inlined, to be counted).
#[inline(never)]
fn score_once<K: Outcomes>(c: &Classifier<SignalSection, K>, x: &[i32]) -> i64 {
    c.model().score_scaled(x)
}

/// Prints the field record as `# field <hex>`. Out of line: its buffer (up to 960 bytes)
/// stands on the stack only while it prints, never beside the station at start-up.
#[inline(never)]
fn print_field(field: &shared_model::FieldStats) {
    let mut record = [0u8; shared_model::field::MAX_RECORD_LEN];
    let n = field.encode(&mut record).unwrap_or(0);
    hprint!("# field ");
    for b in record.get(..n).unwrap_or(&[]) {
        hprint!("{:02x}", b);
    }
    hprintln!();
}

fn report_lines() {
    use core::sync::atomic::Ordering::SeqCst;
    hprintln!(
        "# lines: GO={} NO-GO={} RECHECK={}",
        u8::from(board::GO.load(SeqCst)),
        u8::from(board::NOGO.load(SeqCst)),
        u8::from(board::RECHECK.load(SeqCst))
    );
}
