//! The C functions of models of several classes: how many classes, and each one's name
//! (`lg_result.class_index` is the index they take). Their `unsafe` is the parent module's kind:
//! reading the caller's storage behind its tag and writing the caller's buffers.

use core::ffi::c_char;

use super::{CStation, STATION_TAG, answer, classifier, get};
use crate::api::{class_name, status_of};
use crate::{lg_classifier, lg_station, lg_status};

/// Writes how many classes the loaded model decides between to `*out`: 0 for a two-sided
/// model (blob version 1 or 2), 2 to 8 for a model of several classes (version 5 or 6).
///
/// # Safety
/// `c` points to an `lg_classifier`; `out` to a `uint8_t`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_class_count(c: *const lg_classifier, out: *mut u8) -> lg_status {
    // SAFETY: per the contract.
    unsafe { answer(c, out, |m| count_u8(m.class_count())) }
}

/// Copies class `class`'s name (the index `lg_result.class_index` gives), NUL-terminated, into
/// `buf[0..cap]` (`LG_ERR_BUFFER` if it does not fit; `LG_ERR_CLASS` past the last class,
/// and for every index of a two-sided model).
///
/// # Safety
/// `c` points to an `lg_classifier`; `buf` to `cap` writable bytes.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_class_name(
    c: *const lg_classifier,
    class: u8,
    buf: *mut c_char,
    cap: usize,
) -> lg_status {
    // SAFETY: per the contract.
    let model = match unsafe { classifier(c) } {
        Ok(m) => m,
        Err(e) => return e,
    };
    // SAFETY: per the contract.
    match unsafe { buffer(buf, cap) } {
        Some(out) => class_name(model, class, out),
        None => lg_status::LG_ERR_NULL,
    }
}

/// As `lg_class_count`, for the station's model; when its blob was refused, returns why
/// (the status `lg_station_init` returned) and writes nothing.
///
/// # Safety
/// `s` points to an `lg_station`; `out` to a `uint8_t`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_station_class_count(s: *const lg_station, out: *mut u8) -> lg_status {
    if s.is_null() || out.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: per the contract.
    let Some(slot) = (unsafe { get::<CStation>(s.cast(), STATION_TAG) }) else {
        return lg_status::LG_ERR_NOT_LOADED;
    };
    match slot.value.classifier() {
        Ok(c) => {
            // SAFETY: a writable uint8_t per the contract.
            unsafe { out.write(count_u8(c.class_count())) };
            lg_status::LG_OK
        }
        Err(e) => status_of(e),
    }
}

/// As `lg_class_name`, for the station's model (the class of an `lg_station_step` result);
/// when its blob was refused, returns why and writes nothing.
///
/// # Safety
/// `s` points to an `lg_station`; `buf` to `cap` writable bytes.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn lg_station_class_name(
    s: *const lg_station,
    class: u8,
    buf: *mut c_char,
    cap: usize,
) -> lg_status {
    if s.is_null() {
        return lg_status::LG_ERR_NULL;
    }
    // SAFETY: per the contract.
    let Some(slot) = (unsafe { get::<CStation>(s.cast(), STATION_TAG) }) else {
        return lg_status::LG_ERR_NOT_LOADED;
    };
    let c = match slot.value.classifier() {
        Ok(c) => c,
        Err(e) => return status_of(e),
    };
    // SAFETY: per the contract.
    match unsafe { buffer(buf, cap) } {
        Some(out) => class_name(c, class, out),
        None => lg_status::LG_ERR_NULL,
    }
}

/// The caller's buffer, or `None` when it is NULL.
///
/// # Safety
/// `buf` is NULL or points to `cap` writable bytes, not aliased during the borrow.
unsafe fn buffer<'a>(buf: *mut c_char, cap: usize) -> Option<&'a mut [u8]> {
    if buf.is_null() {
        return None;
    }
    // SAFETY: `cap` writable bytes per the contract, exclusive during the call.
    Some(unsafe { core::slice::from_raw_parts_mut(buf.cast::<u8>(), cap) })
}

/// A class count (at most 8 by validation) as the C interface gives it.
fn count_u8(n: usize) -> u8 {
    u8::try_from(n).unwrap_or(u8::MAX)
}
