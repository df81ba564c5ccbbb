//! The C functions: every `unsafe` of the library is here, each with its reason.
//!
//! Storage: [`lg_classifier`] and [`lg_station`] are plain arrays of `u64` the caller
//! owns. A [`Slot`] (a tag, then the Rust value) is written into them by `lg_load` or
//! `lg_station_init`; every later call checks the tag before it reads the value, so a
//! struct that was never set up (C zeroes statics) answers `LG_ERR_NOT_LOADED`.

use core::ffi::{c_char, c_void};
use core::mem::{align_of, size_of};

use embedded_hal::digital::{ErrorType, OutputPin};
#[cfg(feature = "signed")]
use firmware::ReleaseKey;
use firmware::{ClassSection, GoNoGoLines, SensorSource, Station};
use shared_model::Readings;

use crate::api::{CClassifier, channel_name, field_of, plan_of, result_of, status_of, step_result};
use crate::{lg_classifier, lg_field, lg_field_plan, lg_line, lg_result, lg_station, lg_status};

/// A value in caller-owned storage, behind a tag saying what it is.
#[repr(C)]
struct Slot<T> {
    tag: u64,
    value: T,
}

const CLASSIFIER_TAG: u64 = 0x4C47_4D42_434C_5346; // "LGMBCLSF"
const STATION_TAG: u64 = 0x4C47_4D42_5354_4E31; // "LGMBSTN1"

/// The station C holds: readings, two-sided or of several classes.
type CStation = Station<'static, CSensor, CLine, CLine, CLine, Readings, ClassSection>;

mod classes;
pub use classes::*;

// The storage sizes in the header must hold the values: checked when this crate compiles.
const _: () = assert!(size_of::<Slot<CClassifier>>() <= size_of::<lg_classifier>());
const _: () = assert!(align_of::<Slot<CClassifier>>() <= align_of::<lg_classifier>());
const _: () = assert!(size_of::<Slot<CStation>>() <= size_of::<lg_station>());
const _: () = assert!(align_of::<Slot<CStation>>() <= align_of::<lg_station>());

/// Reads one raw reading per channel into `raw[0..n]`; returns true on success.
pub type lg_read_fn =
    Option<unsafe extern "C" fn(ctx: *mut c_void, raw: *mut i32, n: usize) -> bool>;
/// Drives one line high (`high` true) or low; returns true on success.
pub type lg_line_fn =
    Option<unsafe extern "C" fn(ctx: *mut c_void, line: lg_line, high: bool) -> bool>;

/// The sensor callback as a [`SensorSource`].
struct CSensor {
    read: lg_read_fn,
    ctx: *mut c_void,
}

/// The sensor callback said no (or there is none).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct SensorFailed;

impl SensorSource for CSensor {
    type Error = SensorFailed;
    fn read(&mut self, readings: &mut [i32]) -> Result<(), SensorFailed> {
        let f = self.read.ok_or(SensorFailed)?;
        // SAFETY: `f` is the caller's callback, documented to write at most `n` readings at
        // `raw`; `readings` is a live, exclusive buffer of exactly `n` i32.
        let ok = unsafe { f(self.ctx, readings.as_mut_ptr(), readings.len()) };
        if ok { Ok(()) } else { Err(SensorFailed) }
    }
}

/// One line through the line callback, as an embedded-hal pin.
struct CLine {
    set: lg_line_fn,
    ctx: *mut c_void,
    line: lg_line,
}

/// The line callback said no (or there is none).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct LineFailed;

impl embedded_hal::digital::Error for LineFailed {
    fn kind(&self) -> embedded_hal::digital::ErrorKind {
        embedded_hal::digital::ErrorKind::Other
    }
}

impl ErrorType for CLine {
    type Error = LineFailed;
}

impl CLine {
    fn drive(&mut self, high: bool) -> Result<(), LineFailed> {
        let f = self.set.ok_or(LineFailed)?;
        // SAFETY: `f` is the caller's callback; it receives the caller's own context.
        if unsafe { f(self.ctx, self.line, high) } {
            Ok(())
        } else {
            Err(LineFailed)
        }
    }
}

impl OutputPin for CLine {
    fn set_low(&mut self) -> Result<(), LineFailed> {
        self.drive(false)
    }
    fn set_high(&mut self) -> Result<(), LineFailed> {
        self.drive(true)
    }
}

/// The value in `storage` if its tag says it holds one.
///
/// # Safety
/// `storage` is NULL or points to at least `size_of::<Slot<T>>()` readable bytes aligned
/// to 8 (the header's structs are), which hold a `Slot<T>` whenever the tag matches.
unsafe fn get<'a, T>(storage: *const u64, tag: u64) -> Option<&'a Slot<T>> {
    if storage.is_null() {
        return None;
    }
    // SAFETY: non-null and aligned per the contract; the tag is the first field.
    let slot = unsafe { &*storage.cast::<Slot<T>>() };
    (slot.tag == tag).then_some(slot)
}

/// As [`get`], for changing the value.
///
/// # Safety
/// As [`get`], and the storage is not aliased during the call.
unsafe fn get_mut<'a, T>(storage: *mut u64, tag: u64) -> Option<&'a mut Slot<T>> {
    if storage.is_null() {
        return None;
    }
    // SAFETY: as in `get`; exclusive per the contract.
    let slot = unsafe { &mut *storage.cast::<Slot<T>>() };
    (slot.tag == tag).then_some(slot)
}

/// Writes `value` into `storage` behind `tag`.
///
/// # Safety
/// `storage` is non-NULL, aligned to 8, with room for a `Slot<T>` (checked at compile
/// time for the header's structs), and not aliased during the call.
unsafe fn put<T>(storage: *mut u64, tag: u64, value: T) {
    let slot = storage.cast::<Slot<T>>();
    // SAFETY: per the contract; `write` does not read or drop the old bytes. The value is
    // written on its own, not inside a temporary slot: one copy less on the stack.
    unsafe {
        core::ptr::addr_of_mut!((*slot).value).write(value);
        core::ptr::addr_of_mut!((*slot).tag).write(tag);
    }
}

/// A byte region from C, or `None` for a NULL pointer with a length.
///
/// # Safety
/// `ptr` is NULL or points to `len` readable bytes that stay unchanged during the call.
unsafe fn bytes_at<'a>(ptr: *const u8, len: usize) -> Option<&'a [u8]> {
    if ptr.is_null() {
        return (len == 0).then_some(&[]);
    }
    // SAFETY: per the contract.
    Some(unsafe { core::slice::from_raw_parts(ptr, len) })
}

/// Validates the model blob in `region[0..len]` (a flash region may be longer than the
/// blob) and sets up `c`. On any error `c` is left not loaded.
///
/// # Safety
/// `c` points to an `lg_classifier`; `region` to `len` readable bytes.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_load(
    c: *mut lg_classifier,
    region: *const u8,
    len: usize,
) -> lg_status {
    // SAFETY: per this function's contract.
    unsafe { load(c, region, len, None) }
}

/// A release key, in builds that verify signatures.
#[cfg(feature = "signed")]
type Key = ReleaseKey;
/// No release key can exist in a build without signature verification.
#[cfg(not(feature = "signed"))]
type Key = core::convert::Infallible;

#[cfg(feature = "signed")]
/// As [`lg_load`], but the blob must be signed with the Ed25519 public key `key[0..32]`
/// (a signed-release build): an unsigned blob, another key's, or a bad signature is refused.
///
/// # Safety
/// As [`lg_load`]; `key` points to 32 readable bytes.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_load_signed(
    c: *mut lg_classifier,
    region: *const u8,
    len: usize,
    key: *const u8,
) -> lg_status {
    if key.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: `key` is non-null and points to 32 bytes per the contract.
    let k = match unsafe { release_key(key) } {
        Ok(k) => k,
        Err(e) => return e,
    };
    // SAFETY: per this function's contract.
    unsafe { load(c, region, len, Some(&k)) }
}

/// The Ed25519 public key at `key[0..32]`, or `LG_ERR_BAD_KEY`.
///
/// # Safety
/// `key` is non-null and points to 32 readable bytes.
#[cfg(feature = "signed")]
unsafe fn release_key(key: *const u8) -> Result<ReleaseKey, lg_status> {
    // SAFETY: per the contract; [u8; 32] has alignment 1.
    ReleaseKey::from_bytes(unsafe { &*key.cast::<[u8; 32]>() }).ok_or(lg_status::LG_ERR_BAD_KEY)
}

/// # Safety
/// As [`lg_load`].
unsafe fn load(
    c: *mut lg_classifier,
    region_ptr: *const u8,
    len: usize,
    key: Option<&Key>,
) -> lg_status {
    if c.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    let storage = c.cast::<u64>();
    // SAFETY: `c` points to an lg_classifier (8-aligned, large enough, compile-time checked).
    unsafe { put(storage, 0, ()) };
    // SAFETY: per the contract.
    let Some(bytes) = (unsafe { bytes_at(region_ptr, len) }) else {
        return lg_status::LG_ERR_NULL;
    };
    let loaded = match key {
        #[cfg(feature = "signed")]
        Some(k) => CClassifier::from_flash_classes(bytes, Some(k)),
        #[cfg(not(feature = "signed"))]
        Some(never) => match *never {},
        None => CClassifier::from_flash_classes(bytes, None),
    };
    match loaded {
        Ok(model) => {
            // SAFETY: as above.
            unsafe { put(storage, CLASSIFIER_TAG, model) };
            lg_status::LG_OK
        }
        Err(e) => status_of(e),
    }
}

/// The loaded classifier in `c`.
///
/// # Safety
/// `c` is NULL or points to an `lg_classifier`.
unsafe fn classifier<'a>(c: *const lg_classifier) -> Result<&'a CClassifier, lg_status> {
    if c.is_null() {
        return Err(lg_status::LG_ERR_NULL);
    }
    // SAFETY: per the contract.
    unsafe { get::<CClassifier>(c.cast(), CLASSIFIER_TAG) }
        .map(|s| &s.value)
        .ok_or(lg_status::LG_ERR_NOT_LOADED)
}

/// Writes what `f` says of the classifier loaded in `c` to `*out`.
///
/// # Safety
/// `c` is NULL or points to an `lg_classifier`; `out` is NULL or points to a writable `T`.
unsafe fn answer<T>(
    c: *const lg_classifier,
    out: *mut T,
    f: impl FnOnce(&CClassifier) -> T,
) -> lg_status {
    // SAFETY: per the contract.
    let model = match unsafe { classifier(c) } {
        Ok(m) => m,
        Err(e) => return e,
    };
    if out.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: non-null and writable per the contract.
    unsafe { out.write(f(model)) };
    lg_status::LG_OK
}

/// Classifies one raw reading per channel (`raw[0..n]`, in the model's channel order)
/// into `out`: the score and verdict, or NO-GO with the fault (a wrong count, or the first
/// reading outside its valid range). Returns `LG_OK` whenever `out` was written.
///
/// # Safety
/// `c` points to an `lg_classifier`; `raw` to `n` readable `int32_t`; `out` to an
/// `lg_result`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_classify(
    c: *const lg_classifier,
    raw: *const i32,
    n: usize,
    out: *mut lg_result,
) -> lg_status {
    // SAFETY: per the contract.
    let model = match unsafe { classifier(c) } {
        Ok(m) => m,
        Err(e) => return e,
    };
    if out.is_null() || (raw.is_null() && n > 0) {
        return lg_status::LG_ERR_NULL;
    }
    let readings: &[i32] = if n == 0 {
        &[]
    } else {
        // SAFETY: non-null, `n` readable i32 per the contract.
        unsafe { core::slice::from_raw_parts(raw, n) }
    };
    // SAFETY: `out` is non-null and points to an lg_result per the contract.
    unsafe { out.write(result_of(model.classify(readings))) };
    lg_status::LG_OK
}

/// Writes the loaded model's 16-byte id (the id `linegate replay` prints) to `out[0..16]`.
///
/// # Safety
/// `c` points to an `lg_classifier`; `out` to 16 writable bytes.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_model_id(c: *const lg_classifier, out: *mut u8) -> lg_status {
    // SAFETY: per the contract: `out` is 16 writable bytes, and [u8; 16] has alignment 1.
    unsafe { answer(c, out.cast::<[u8; 16]>(), CClassifier::model_id) }
}

/// Writes the loaded blob's id (its CRC-32, as `linegate replay` prints it) to `*out`.
///
/// # Safety
/// `c` points to an `lg_classifier`; `out` to a `uint32_t`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_blob_id(c: *const lg_classifier, out: *mut u32) -> lg_status {
    // SAFETY: per the contract.
    unsafe { answer(c, out, CClassifier::blob_id) }
}

/// Writes the number of readings the model takes to `*out`.
///
/// # Safety
/// `c` points to an `lg_classifier`; `out` to a `size_t`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_channel_count(c: *const lg_classifier, out: *mut usize) -> lg_status {
    // SAFETY: per the contract.
    unsafe { answer(c, out, CClassifier::channel_count) }
}

/// Copies channel `index`'s name, NUL-terminated, into `buf[0..cap]`
/// (`LG_ERR_BUFFER` if it does not fit, `LG_ERR_INDEX` past the last channel).
///
/// # Safety
/// `c` points to an `lg_classifier`; `buf` to `cap` writable bytes.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_channel_name(
    c: *const lg_classifier,
    index: usize,
    buf: *mut c_char,
    cap: usize,
) -> lg_status {
    // SAFETY: per the contract.
    let model = match unsafe { classifier(c) } {
        Ok(m) => m,
        Err(e) => return e,
    };
    if buf.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: `cap` writable bytes per the contract, exclusive during the call.
    let out = unsafe { core::slice::from_raw_parts_mut(buf.cast::<u8>(), cap) };
    channel_name(model, index, out)
}

/// Sets up a station in `s`: the lines go to NO-GO through `set_line`, then the blob in
/// `region[0..len]` is validated (signed with `key[0..32]` when `key` is not NULL). The
/// station is usable whatever the blob: with a bad one every step shows NO-GO with
/// `LG_FAULT_BLOB`, and the blob's status is returned. `ctx` is passed to both callbacks.
///
/// No station is set up (steps answer `LG_ERR_NOT_LOADED`; the lines were driven towards
/// NO-GO as far as they could be) when a line cannot be driven (`LG_ERR_LINE`), the key is
/// not a valid Ed25519 public key (`LG_ERR_BAD_KEY`), or a key is given to a library built
/// without signed releases (`LG_ERR_NO_SIGNING`).
///
/// # Safety
/// `s` points to an `lg_station`; `region` to `len` readable bytes; `key` is NULL or
/// points to 32 readable bytes; the callbacks are safe to call with `ctx` for as long as
/// the station is used.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_station_init(
    s: *mut lg_station,
    region: *const u8,
    len: usize,
    key: *const u8,
    read: lg_read_fn,
    set_line: lg_line_fn,
    ctx: *mut c_void,
) -> lg_status {
    if s.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    let storage = s.cast::<u64>();
    // SAFETY: `s` points to an lg_station (8-aligned, large enough, compile-time checked).
    unsafe { put(storage, 0, ()) };
    let line = |line| CLine {
        set: set_line,
        ctx,
        line,
    };
    let Ok(lines) = GoNoGoLines::new(
        line(lg_line::LG_LINE_GO),
        line(lg_line::LG_LINE_NOGO),
        Some(line(lg_line::LG_LINE_RECHECK)),
    ) else {
        return lg_status::LG_ERR_LINE;
    };
    // SAFETY: per the contract.
    let bytes = unsafe { bytes_at(region, len) }.unwrap_or(&[]);
    #[cfg(feature = "signed")]
    let key = if key.is_null() {
        None
    } else {
        // SAFETY: non-null, 32 readable bytes per the contract.
        match unsafe { release_key(key) } {
            Ok(k) => Some(k),
            Err(e) => return e,
        }
    };
    #[cfg(not(feature = "signed"))]
    let key = if key.is_null() {
        None
    } else {
        return lg_status::LG_ERR_NO_SIGNING;
    };
    // Built straight into the caller's storage, not in a local first: a station is 3 KiB
    // (its field statistics 1 KiB of it), and a local would stand on the stack beside
    // the validation's frames.
    // SAFETY: as above.
    unsafe {
        put::<CStation>(
            storage,
            STATION_TAG,
            Station::with_classes(bytes, key, CSensor { read, ctx }, lines),
        );
    }
    // SAFETY: just written behind its tag.
    match unsafe { get::<CStation>(storage, STATION_TAG) }.map(|s| s.value.classifier()) {
        Some(Ok(_)) => lg_status::LG_OK,
        Some(Err(e)) => status_of(e),
        None => lg_status::LG_ERR_NOT_LOADED,
    }
}

/// Writes the station's model id (16 bytes, to `model_id`) and blob id (to `*blob_id`),
/// as `linegate replay` prints them; when its blob was refused, returns why (the same
/// status `lg_station_init` returned) and writes nothing.
///
/// # Safety
/// `s` points to an `lg_station`; `model_id` to 16 writable bytes; `blob_id` to a `uint32_t`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_station_ids(
    s: *const lg_station,
    model_id: *mut u8,
    blob_id: *mut u32,
) -> lg_status {
    if s.is_null() || model_id.is_null() || blob_id.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: per the contract.
    let Some(slot) = (unsafe { get::<CStation>(s.cast(), STATION_TAG) }) else {
        return lg_status::LG_ERR_NOT_LOADED;
    };
    match slot.value.classifier() {
        Ok(c) => {
            // SAFETY: 16 writable bytes and a uint32_t per the contract.
            unsafe {
                model_id.cast::<[u8; 16]>().write(c.model_id());
                blob_id.write(c.blob_id());
            }
            lg_status::LG_OK
        }
        Err(e) => status_of(e),
    }
}

/// One step of the station: read the sensors, classify, show the verdict on the lines
/// (NO-GO on any fault: the blob, the sensor callback, a reading out of range), and write
/// what happened to `out`.
///
/// # Safety
/// `s` points to an `lg_station` set up by `lg_station_init`; `out` to an `lg_result`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_station_step(s: *mut lg_station, out: *mut lg_result) -> lg_status {
    if out.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: per the contract.
    let Some(slot) = (unsafe { get_mut::<CStation>(s.cast(), STATION_TAG) }) else {
        return if s.is_null() {
            lg_status::LG_ERR_NULL
        } else {
            lg_status::LG_ERR_NOT_LOADED
        };
    };
    match slot.value.step() {
        Ok(step) => {
            // SAFETY: `out` is non-null and points to an lg_result per the contract.
            unsafe { out.write(step_result(step)) };
            lg_status::LG_OK
        }
        Err(LineFailed) => lg_status::LG_ERR_LINE,
    }
}

/// The station set up in `s`, or why there is none.
///
/// # Safety
/// `s` is NULL or points to an `lg_station`, not aliased during the borrow.
unsafe fn station_mut<'a>(s: *mut lg_station) -> Result<&'a mut CStation, lg_status> {
    if s.is_null() {
        return Err(lg_status::LG_ERR_NULL);
    }
    // SAFETY: per the contract.
    unsafe { get_mut::<CStation>(s.cast(), STATION_TAG) }
        .map(|slot| &mut slot.value)
        .ok_or(lg_status::LG_ERR_NOT_LOADED)
}

/// Keeps the station's field statistics under `*plan` from now on (bins and CUSUMs, in
/// accumulator units) and starts them afresh. The record names the blob the station
/// loaded, not one the plan gives. `LG_ERR_PLAN` (nothing changed) for a shift above 62.
///
/// # Safety
/// `s` points to an `lg_station`; `plan` to an `lg_field_plan`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_station_set_field_plan(
    s: *mut lg_station,
    plan: *const lg_field_plan,
) -> lg_status {
    // SAFETY: per the contract.
    let station = match unsafe { station_mut(s) } {
        Ok(st) => st,
        Err(e) => return e,
    };
    if plan.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: non-null, an lg_field_plan per the contract.
    match plan_of(unsafe { &*plan }) {
        Ok(p) => {
            station.set_field_plan(p);
            lg_status::LG_OK
        }
        Err(e) => e,
    }
}

/// Copies the station's field statistics (since init, plan or reset) into `*out`.
///
/// # Safety
/// `s` points to an `lg_station`; `out` to an `lg_field`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_station_field(s: *const lg_station, out: *mut lg_field) -> lg_status {
    if s.is_null() || out.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: per the contract.
    let Some(slot) = (unsafe { get::<CStation>(s.cast(), STATION_TAG) }) else {
        return lg_status::LG_ERR_NOT_LOADED;
    };
    // SAFETY: non-null, an lg_field per the contract.
    unsafe { out.write(field_of(slot.value.field())) };
    lg_status::LG_OK
}

/// Writes the station's field record (`shared-model/FORMAT.md`, "Field record") into
/// `buf[0..cap]` and its length to `*len`. `LG_ERR_BUFFER` when `cap` is shorter than the
/// record: nothing is written to `buf`, and `*len` says the length needed (at most
/// `LG_FIELD_RECORD_MAX`).
///
/// # Safety
/// `s` points to an `lg_station`; `buf` to `cap` writable bytes; `len` to a `size_t`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_station_field_record(
    s: *const lg_station,
    buf: *mut u8,
    cap: usize,
    len: *mut usize,
) -> lg_status {
    if s.is_null() || len.is_null() || (buf.is_null() && cap > 0) {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: per the contract.
    let Some(slot) = (unsafe { get::<CStation>(s.cast(), STATION_TAG) }) else {
        return lg_status::LG_ERR_NOT_LOADED;
    };
    let field = slot.value.field();
    let need = field.record_len();
    // SAFETY: non-null, a size_t per the contract.
    unsafe { len.write(need) };
    if cap < need {
        return lg_status::LG_ERR_BUFFER;
    }
    // SAFETY: `cap` writable bytes per the contract (non-null: cap >= need > 0).
    let out = unsafe { core::slice::from_raw_parts_mut(buf, cap) };
    match field.encode(out) {
        Ok(_) => lg_status::LG_OK,
        Err(_) => lg_status::LG_ERR_BUFFER,
    }
}

/// Starts the station's field statistics afresh under the same plan.
///
/// # Safety
/// `s` points to an `lg_station`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_station_field_reset(s: *mut lg_station) -> lg_status {
    // SAFETY: per the contract.
    match unsafe { station_mut(s) } {
        Ok(st) => {
            st.reset_field();
            lg_status::LG_OK
        }
        Err(e) => e,
    }
}

// A device build with signed releases: the one bounds check left in the Ed25519 verifier
// (never reached for any input, but not provably so to the compiler) hands over to the
// firmware, which must show NO-GO and reset.
#[cfg(all(target_os = "none", feature = "signed"))]
mod fatal {
    unsafe extern "C" {
        /// Defined by the C firmware: drive NO-GO, then reset; never returns.
        fn lg_fatal() -> !;
    }

    #[panic_handler]
    fn panic(_: &core::panic::PanicInfo) -> ! {
        // SAFETY: the firmware's handler takes nothing and never returns.
        unsafe { lg_fatal() }
    }
}

// The desktop build: a panic (none is expected) aborts, and the unwinding hook the host's
// precompiled `core` refers to is never called (the library is built with panic=abort).
#[cfg(not(target_os = "none"))]
mod desktop {
    unsafe extern "C" {
        fn abort() -> !;
    }

    #[panic_handler]
    fn panic(_: &core::panic::PanicInfo) -> ! {
        // SAFETY: C's abort takes nothing and never returns.
        unsafe { abort() }
    }

    /// Never called: with panic=abort nothing unwinds.
    #[unsafe(no_mangle)]
    extern "C" fn rust_eh_personality() {}
}
