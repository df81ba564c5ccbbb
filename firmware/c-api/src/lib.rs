//! Linegate's device side for C firmware: the very kernel the host audit runs
//! ([`shared_model`]) and the firmware's fail-safe station logic ([`firmware::Station`]),
//! behind a C interface with plain C types. The header, `include/linegate.h`, is
//! generated from this crate by cbindgen.
//!
//! - [`lg_load`] (and `lg_load_signed` with the `signed` feature) validate a blob in a memory region once, into a
//!   caller-owned [`lg_classifier`] (no heap);
//! - [`lg_classify`] turns one set of raw readings into score, verdict and fault;
//! - [`lg_model_id`], [`lg_blob_id`], [`lg_channel_count`], [`lg_channel_name`] say what
//!   was loaded; a model may decide between several classes (blob version 5 or 6): each
//!   result's `class` names the leading one, [`lg_class_count`] / [`lg_class_name`] (and
//!   [`lg_station_class_count`] / [`lg_station_class_name`]) say how many and what each is;
//! - [`lg_station_init`] / [`lg_station_step`] (and [`lg_station_ids`]) run the firmware's station: read the
//!   sensors through a callback, classify, and drive the GO / NO-GO / RECHECK lines through
//!   a callback, falling to NO-GO on any fault.
//! - [`lg_station_set_field_plan`], [`lg_station_field`], [`lg_station_field_record`] and
//!   [`lg_station_field_reset`]: the station's field statistics (counts per verdict and
//!   fault source, a score histogram, each channel's figures, two CUSUMs), their plan, and
//!   the field record (`shared-model/FORMAT.md`) written into a buffer the caller owns.
//!
//! Every function returns an [`lg_status`]; none panics: a device release build that could
//! panic does not link (`panic-never`). With the `signed` feature (signed releases,
//! [`lg_load_signed`]) the Ed25519 verifier keeps one bounds check the compiler cannot
//! remove, so that build instead calls `void lg_fatal(void)`, which the C firmware
//! defines (drive NO-GO, then reset). All `unsafe` lives in the `ffi` module.
#![no_std]
#![deny(missing_docs)]
#![warn(
    clippy::indexing_slicing,
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic
)]
// The C names are the interface.
#![allow(non_camel_case_types)]

mod api;
mod ffi;

pub use ffi::*;

// A device release build links only if no panic path is left (the handler refers to a
// symbol that does not exist). The desktop build, for tests against `linegate replay`,
// links with the host's precompiled `core`, which keeps panic paths of its own: there a
// panic aborts the process (see `ffi`).
#[cfg(all(target_os = "none", not(feature = "signed")))]
use panic_never as _;

/// Status of every call. `LG_OK` is 0; anything else means the call did nothing more
/// than report it, and a station holds NO-GO.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum lg_status {
    /// Success.
    LG_OK = 0,
    /// A pointer argument was NULL.
    LG_ERR_NULL = 1,
    /// The classifier or station was not set up by a successful load or init.
    LG_ERR_NOT_LOADED = 2,
    /// The region is shorter than the blob's header or its declared length.
    LG_ERR_TRUNCATED = 3,
    /// The region does not start with the blob magic `LGMB`.
    LG_ERR_BAD_MAGIC = 4,
    /// The blob's format version is not one this build reads.
    LG_ERR_VERSION = 5,
    /// Bytes follow the blob's CRC.
    LG_ERR_TRAILING_BYTES = 6,
    /// The stored CRC-32 does not match the bytes.
    LG_ERR_CRC = 7,
    /// More channels than this build holds.
    LG_ERR_TOO_MANY_CHANNELS = 8,
    /// The payload does not parse as a model.
    LG_ERR_MALFORMED = 9,
    /// The header and the payload disagree.
    LG_ERR_INCONSISTENT = 10,
    /// The model parsed but failed validation (ranges, conversion, accumulator proof).
    LG_ERR_INVALID_MODEL = 11,
    /// A signed blob is required and this one is unsigned.
    LG_ERR_UNSIGNED = 12,
    /// The blob is signed with another key.
    LG_ERR_UNKNOWN_KEY = 13,
    /// The signature does not verify.
    LG_ERR_BAD_SIGNATURE = 14,
    /// The release key given is not a valid Ed25519 public key.
    LG_ERR_BAD_KEY = 15,
    /// A channel index beyond the model's channels.
    LG_ERR_INDEX = 16,
    /// The caller's buffer is too small (a channel name and its terminating NUL).
    LG_ERR_BUFFER = 17,
    /// A line callback reported failure; the lines were driven as far as they could
    /// towards NO-GO.
    LG_ERR_LINE = 18,
    /// A release key was given to a library built without signed releases (the `signed`
    /// feature).
    LG_ERR_NO_SIGNING = 19,
    /// A field plan's bin shift is above 62.
    LG_ERR_PLAN = 20,
    /// A class index beyond the model's classes (a two-sided model has none).
    LG_ERR_CLASS = 21,
}

/// The decision a device shows.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum lg_verdict {
    /// The unit fails, or something is wrong: the safe state.
    LG_NOGO = 0,
    /// The unit passes.
    LG_GO = 1,
    /// Too close to call: retest.
    LG_RECHECK = 2,
}

/// Why a result is NO-GO without a decision, if it is.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum lg_fault {
    /// No fault: the verdict is the model's decision.
    LG_FAULT_NONE = 0,
    /// The number of readings differs from the model's channel count.
    LG_FAULT_COUNT = 1,
    /// A reading lies outside its channel's valid raw range (`channel`, `raw` say which).
    LG_FAULT_RANGE = 2,
    /// The sensor callback reported a failure.
    LG_FAULT_SENSOR = 3,
    /// No valid model is loaded (the station's blob failed validation).
    LG_FAULT_BLOB = 4,
}

/// The outcome of one classification or station step.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct lg_result {
    /// The integer score (accumulator units); 0 on a fault. For a model of several classes,
    /// the lead: the leading class's score minus the runner-up's (≥ 0).
    pub score: i64,
    /// The verdict shown: `LG_NOGO` on any fault.
    pub verdict: lg_verdict,
    /// The fault, or `LG_FAULT_NONE`.
    pub fault: lg_fault,
    /// For `LG_FAULT_RANGE`: the channel's index (0-based); otherwise 0.
    pub channel: u32,
    /// For `LG_FAULT_RANGE`: the refused raw reading; otherwise 0.
    pub raw: i32,
    /// For a station step: 1 the first time this fault is seen in a row (report it then).
    pub first: bool,
    /// For a model of several classes: the leading class (decided, or named under
    /// `LG_RECHECK`), an index for `lg_class_name`; `LG_NO_CLASS` (255) for a two-sided
    /// model and on a fault. GO is the GO class decided; any failure class decided is NO-GO.
    pub class_index: u8,
}

/// `lg_result.class_index` of a two-sided model's result, and of a fault.
pub const LG_NO_CLASS: u8 = 255;
const _: () = assert!(LG_NO_CLASS == shared_model::NO_GO_CLASS);

/// The three lines a station drives.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum lg_line {
    /// The GO line.
    LG_LINE_GO = 0,
    /// The NO-GO line.
    LG_LINE_NOGO = 1,
    /// The RECHECK line.
    LG_LINE_RECHECK = 2,
}

/// Bins of the field statistics' score histogram.
pub const LG_FIELD_BINS: usize = 32;
/// Most channels a model has: the length of the field statistics' per-channel arrays.
pub const LG_MAX_CHANNELS: usize = 32;
/// Most signals a model has: the length of the per-signal fault counts.
pub const LG_MAX_SIGNALS: usize = 8;
/// Bytes of the largest field record (`288 + 20·channels + 4·signals` for a model).
pub const LG_FIELD_RECORD_MAX: usize = 960;

const _: () = assert!(LG_FIELD_BINS == shared_model::field::FIELD_BINS);
const _: () = assert!(LG_MAX_CHANNELS == shared_model::MAX_CHANNELS);
const _: () = assert!(LG_MAX_SIGNALS == shared_model::limits::MAX_SIGNALS);
const _: () = assert!(LG_FIELD_RECORD_MAX == shared_model::field::MAX_RECORD_LEN);

/// One CUSUM's settings, in accumulator units of the margin.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct lg_cusum_plan {
    /// The in-control mean margin (μ₀).
    pub target: i64,
    /// The allowance k: shifts smaller than this are not accumulated.
    pub slack: i64,
    /// The decision interval h: a sum above it is an alarm.
    pub limit: i64,
}

/// The field statistics' plan: the score histogram's bins and the two CUSUMs (the host
/// derives it from the release audit). The blob id is not part of it: the record names the
/// blob the station loaded.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct lg_field_plan {
    /// Lower edge of bin 0, in accumulator units of the score.
    pub origin: i64,
    /// Each bin is `2^shift` accumulator units wide, 0..=62.
    pub shift: u8,
    /// CUSUM over GO units' margins, `score − go_min`.
    pub go: lg_cusum_plan,
    /// CUSUM over NO-GO units' margins, `nogo_max − score`.
    pub nogo: lg_cusum_plan,
}

/// A CUSUM's state.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct lg_cusum {
    /// The upper sum C⁺: margins growing.
    pub up: i64,
    /// The lower sum C⁻: margins shrinking (units walking towards the boundary).
    pub down: i64,
    /// 1-based unit number at which `up` first exceeded the limit; 0 never.
    pub alarm_up: u32,
    /// 1-based unit number at which `down` first exceeded the limit; 0 never.
    pub alarm_down: u32,
}

/// The station's field statistics, as `lg_station_field` copies them out (the record's
/// fields; `shared-model/FORMAT.md`, "Field record", says what each one counts).
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct lg_field {
    /// The id (CRC-32) of the blob the statistics belong to; 0 when none is valid.
    pub blob_id: u32,
    /// The plan they are kept under.
    pub plan: lg_field_plan,
    /// The model's channels: entries used in the per-channel arrays.
    pub channels: u8,
    /// The model's signals: entries used in `signal_faults`.
    pub signals: u8,
    /// Set when `units` reached 2³² − 1: nothing after that unit was counted.
    pub saturated: bool,
    /// Units seen (decided or faulted).
    pub units: u32,
    /// Units decided GO.
    pub go: u32,
    /// Units decided NO-GO.
    pub nogo: u32,
    /// Units decided RECHECK.
    pub recheck: u32,
    /// Units that faulted.
    pub faults: u32,
    /// Faults charged to no channel or signal (a wrong count, the sensor callback, no
    /// valid model).
    pub other_faults: u32,
    /// Decided units whose score lies below bin 0.
    pub below: u32,
    /// Decided units whose score lies above the last bin.
    pub above: u32,
    /// Decided units per score bin.
    pub bins: [u32; LG_FIELD_BINS],
    /// The CUSUM over GO units' margins.
    pub cusum_go: lg_cusum,
    /// The CUSUM over NO-GO units' margins.
    pub cusum_nogo: lg_cusum,
    /// Faults per channel (a reading out of its range).
    pub channel_faults: [u32; LG_MAX_CHANNELS],
    /// Faults per signal (a refused window).
    pub signal_faults: [u32; LG_MAX_SIGNALS],
    /// Least value per channel over decided units (the reading, or for a feature channel the feature the weights multiplied) (`INT32_MAX` before the first).
    pub min: [i32; LG_MAX_CHANNELS],
    /// Greatest value per channel over decided units (`INT32_MIN` before the first).
    pub max: [i32; LG_MAX_CHANNELS],
    /// Sum of the values per channel over decided units.
    pub sum: [i64; LG_MAX_CHANNELS],
}

/// 64-bit words of storage in an [`lg_classifier`].
pub const LG_CLASSIFIER_WORDS: usize = 432;
/// 64-bit words of storage in an [`lg_station`].
pub const LG_STATION_WORDS: usize = 600;

/// A validated model, in storage the caller owns (a static or a stack variable; no heap).
/// Set it up with [`lg_load`]; its contents are private.
#[repr(C)]
pub struct lg_classifier {
    /// Private.
    pub opaque: [u64; LG_CLASSIFIER_WORDS],
}

/// A station: model, sensor callback and line callback, in storage the caller owns. Set it
/// up with [`lg_station_init`]; its contents are private.
#[repr(C)]
pub struct lg_station {
    /// Private.
    pub opaque: [u64; LG_STATION_WORDS],
}
