//! The board side of the example: the model region, pins and a sensor source.
//!
//! All `unsafe` of the application is in this module.

use core::convert::Infallible;
use core::sync::atomic::{AtomicBool, Ordering};

use embedded_hal::digital::{ErrorType, OutputPin};
use firmware::{SensorSource, WindowSource};

// The runtime and the semihosting console of each architecture, under one set of names.
#[cfg(target_arch = "arm")]
pub use cortex_m_rt::entry;
#[cfg(target_arch = "arm")]
pub use cortex_m_semihosting::{debug, hprint, hprintln};
#[cfg(target_arch = "riscv32")]
pub use riscv_rt::entry;
#[cfg(target_arch = "riscv32")]
pub use riscv_semihosting::{debug, hprint, hprintln};

/// The current stack pointer.
#[inline(always)]
pub fn stack_pointer() -> usize {
    #[cfg(target_arch = "arm")]
    {
        cortex_m::register::msp::read() as usize
    }
    #[cfg(target_arch = "riscv32")]
    {
        let sp: usize;
        // SAFETY: reads the stack pointer register into a general register; no memory access.
        unsafe { core::arch::asm!("mv {}, sp", out(reg) sp) };
        sp
    }
}

/// Waits for interrupts forever (after the semihosting exit, which QEMU honours at once).
pub fn idle() -> ! {
    loop {
        #[cfg(target_arch = "arm")]
        cortex_m::asm::wfi();
        #[cfg(target_arch = "riscv32")]
        riscv::asm::wfi();
    }
}

unsafe extern "C" {
    // Defined in memory.x: the flash region that holds the model blob.
    static _model_start: u8;
    static _model_len: u8;
}

/// Prints the same first line as `linegate replay`: which model this device runs (its id,
/// the blob id, and the key id of a signed blob).
pub fn model_line(model_id: &[u8], blob_id: u32, key_id: Option<&[u8]>) {
    hprint!("# model ");
    for b in model_id {
        hprint!("{:02x}", b);
    }
    hprint!(" blob {:08x}", blob_id);
    if let Some(k) = key_id {
        hprint!(" key ");
        for b in k {
            hprint!("{:02x}", b);
        }
    }
    hprintln!();
}

/// The model region in flash.
pub fn model_region() -> &'static [u8] {
    // SAFETY: memory.x defines `_model_start` as the start of a 4 KiB flash region that is
    // always mapped and readable, and `_model_len` (the symbol's address) as its length.
    // Nothing writes flash while the firmware runs, so a shared 'static slice is sound.
    unsafe {
        let start = core::ptr::addr_of!(_model_start);
        let len = core::ptr::addr_of!(_model_len) as usize;
        core::slice::from_raw_parts(start, len)
    }
}

/// A result line: its level lives in an atomic the test harness can read (a GPIO on a real board).
pub struct Line(pub &'static AtomicBool);

impl ErrorType for Line {
    type Error = Infallible;
}

impl OutputPin for Line {
    fn set_low(&mut self) -> Result<(), Infallible> {
        self.0.store(false, Ordering::SeqCst);
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Infallible> {
        self.0.store(true, Ordering::SeqCst);
        Ok(())
    }
}

/// GO line level.
pub static GO: AtomicBool = AtomicBool::new(false);
/// NO-GO line level.
pub static NOGO: AtomicBool = AtomicBool::new(false);
/// RECHECK line level.
pub static RECHECK: AtomicBool = AtomicBool::new(false);
/// Whether a linked-in row is one unit of the loaded model (set once the model is known).
pub static ROWS_FIT: AtomicBool = AtomicBool::new(false);

/// Plays linked-in rows, one unit per row: `read` starts a row and takes its readings,
/// `fill` takes the next window's samples from the same row (a model of readings asks for
/// none). A row must hold exactly one unit of the model ([`ROWS_FIT`]), else every read
/// fails.
pub struct Rows {
    pub data: &'static [i32],
    pub width: usize,
    /// The row `read` starts next.
    pub next: usize,
    /// The row being read, and the position in it.
    pub row: usize,
    pub at: usize,
}

/// The rows ran out or do not fit the model.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct NoMoreReadings;

impl Rows {
    fn take(&mut self, out: &mut [i32]) -> Result<(), NoMoreReadings> {
        let start = self.row.checked_mul(self.width).ok_or(NoMoreReadings)?;
        let row = self
            .data
            .get(start..start + self.width)
            .ok_or(NoMoreReadings)?;
        let v = row
            .get(self.at..self.at + out.len())
            .ok_or(NoMoreReadings)?;
        out.copy_from_slice(v);
        self.at += out.len();
        Ok(())
    }
}

impl SensorSource for Rows {
    type Error = NoMoreReadings;
    fn read(&mut self, readings: &mut [i32]) -> Result<(), NoMoreReadings> {
        if !ROWS_FIT.load(Ordering::SeqCst) {
            return Err(NoMoreReadings);
        }
        (self.row, self.at) = (self.next, 0);
        self.next += 1;
        self.take(readings)
    }
}

impl WindowSource for Rows {
    fn fill(&mut self, _signal: usize, window: &mut [i32]) -> Result<(), NoMoreReadings> {
        self.take(window)
    }
}

/// Bytes left unpainted just below the caller's stack pointer: room for this function's own frame.
const PAINT_SLACK: usize = 64;

/// Fills the free RAM between the end of .bss and `top - PAINT_SLACK` with a pattern, where
/// `top` is the caller's stack pointer; returns the start of the painted range.
#[inline(never)]
pub fn paint_stack(top: usize) -> usize {
    unsafe extern "C" {
        static mut __sheap: u32;
    }
    let end = top - PAINT_SLACK;
    // SAFETY: [__sheap, top - PAINT_SLACK) is RAM above .bss and below the caller's frame; this
    // function's own frame (a few pushed registers) fits in the slack, and no heap exists, so
    // nothing else owns that memory.
    unsafe {
        let start = core::ptr::addr_of_mut!(__sheap) as usize;
        let mut p = start;
        while p < end {
            core::ptr::write_volatile(p as *mut u32, 0xA5A5_A5A5);
            p += 4;
        }
        start
    }
}

/// The top of the stack (its first address above RAM's last word), where it starts at reset.
pub fn stack_start() -> usize {
    unsafe extern "C" {
        // Defined by the runtime's linker script (cortex-m-rt and riscv-rt alike).
        static _stack_start: u32;
    }
    // Only the symbol's address is taken, never its contents.
    core::ptr::addr_of!(_stack_start) as usize
}

/// Stack bytes used below `top` since [`paint_stack`]: `top` minus the lowest overwritten word.
pub fn stack_used(start: usize, top: usize) -> usize {
    let mut p = start;
    // SAFETY: reads RAM in [start, top), the range `paint_stack` wrote (or above it, still RAM).
    unsafe {
        while p < top && core::ptr::read_volatile(p as *const u32) == 0xA5A5_A5A5 {
            p += 4;
        }
    }
    top - p
}
