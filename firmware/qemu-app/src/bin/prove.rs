//! Link-time proof of panic-freedom: the decode + classify + drive path linked with
//! `panic-never`, whose panic handler is an undefined symbol. If any panic path
//! survives optimisation, this binary fails to link.
#![no_std]
#![no_main]

#[allow(dead_code, unused_imports)]
#[path = "../board.rs"]
mod board;

use core::sync::atomic::{AtomicI32, AtomicU32, Ordering};

use board::entry;
use firmware::{GoNoGoLines, SensorSource, Station, Step};
use panic_never as _;

/// Readings arrive here from outside the program (a DMA target on a real board), so the
/// optimiser cannot assume anything about them.
static INPUT: [AtomicI32; shared_model::MAX_CHANNELS] =
    [const { AtomicI32::new(0) }; shared_model::MAX_CHANNELS];
/// Last score and verdict, observable from outside.
static OUTPUT: [AtomicU32; 3] = [const { AtomicU32::new(0) }; 3];

struct Inputs;

impl SensorSource for Inputs {
    type Error = ();
    fn read(&mut self, readings: &mut [i32]) -> Result<(), ()> {
        for (r, i) in readings.iter_mut().zip(INPUT.iter()) {
            *r = i.load(Ordering::Relaxed);
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
        let Ok(step) = station.step();
        match step {
            Step::Decided(d) => {
                OUTPUT[0].store(d.score as u32, Ordering::Relaxed);
                OUTPUT[1].store((d.score >> 32) as u32, Ordering::Relaxed);
                OUTPUT[2].store(d.verdict as u32, Ordering::Relaxed);
            }
            Step::Faulted { first, .. } => {
                OUTPUT[2].store(if first { 10 } else { 11 }, Ordering::Relaxed)
            }
        }
    }
}
