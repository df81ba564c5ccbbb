//! Example device application (Cortex-M0, M3, M4F, M33 and RV32IMAC under QEMU; the board
//! module holds what differs): validates the model blob in flash, classifies the
//! linked-in vectors, prints one line per vector over semihosting (the same lines
//! as `linegate replay`), and exits QEMU: 0 after the vectors, 2 on a bad blob.
#![no_std]
#![no_main]

mod board;

use board::{debug, entry, hprintln};
use firmware::{Classifier, Decision, Fault, GoNoGoLines, Station, StationFault, Step};
#[cfg(target_arch = "arm")]
use panic_semihosting as _;

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

#[entry]
fn main() -> ! {
    let lines = match GoNoGoLines::new(
        board::Line(&board::GO),
        board::Line(&board::NOGO),
        Some(board::Line(&board::RECHECK)),
    ) {
        Ok(l) => l,
        Err(e) => match e {},
    };
    let sensor = board::Vectors {
        data: &vectors::VECTORS,
        width: vectors::WIDTH,
        next: 0,
    };
    // A signed-release build (a key compiled in) loads only blobs signed with that key; a key
    // that is not a valid point loads nothing, so the station holds NO-GO.
    let key = release_key::RELEASE_KEY.map(|k| firmware::ReleaseKey::from_bytes(&k));
    // Stack for start-up (the blob's validation), counted from reset: main's own frame
    // (which holds the station) included, so it is all the RAM the application needs.
    let painted = board::paint_stack(board::stack_pointer());
    let mut station = match key {
        None => Station::new(board::model_region(), sensor, lines),
        Some(Some(k)) => Station::with_key(board::model_region(), Some(k), sensor, lines),
        Some(None) => Station::new(&[], sensor, lines),
    };
    let startup = board::stack_used(painted, board::stack_start());
    if let Ok(c) = station.classifier() {
        board::model_line(
            &c.model_id(),
            c.blob_id(),
            c.key_id().as_ref().map(|k| &k[..]),
        );
    }
    if let Err(e) = station.classifier() {
        let _ = station.step();
        hprintln!("FAULT blob: {}", e);
        report_lines();
        debug::exit(Err(()));
        board::idle()
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
        // The kernel alone, once more, behind a call boundary the footprint script can count.
        if let (Ok(c), Some(v)) = (
            station.classifier(),
            vectors::VECTORS.get(i * vectors::WIDTH..(i + 1) * vectors::WIDTH),
        ) {
            let _ = core::hint::black_box(classify_once(c, v));
            // And the dot-product stage alone, on inputs already scaled.
            let mut x = [0i32; shared_model::MAX_CHANNELS];
            if let Some(x) = x.get_mut(..v.len())
                && c.model().scale(v, x).is_ok()
            {
                let _ = core::hint::black_box(score_once(c, x));
            }
        }
        match step {
            Ok(Step::Decided(d)) => hprintln!("{} {} {}", i, d.verdict.as_str(), d.score),
            Ok(Step::Faulted {
                fault: StationFault::Reading(shared_model::Fault::OutOfRange { channel, .. }),
                ..
            }) => {
                hprintln!("{} FAULT ch{}", i, channel)
            }
            Ok(Step::Faulted { .. }) => hprintln!("{} FAULT count", i),
            Err(e) => match e {},
        }
    }
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
fn classify_once(c: &Classifier, raw: &[i32]) -> Result<Decision, Fault> {
    c.classify(raw)
}

/// The dot-product stage only: bias + Σ weight·x over scaled inputs (not inlined, to be counted).
#[inline(never)]
fn score_once(c: &Classifier, x: &[i32]) -> i64 {
    c.model().score_scaled(x)
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
