//! Linegate on the device: load a model blob from flash, read sensors, classify,
//! drive GO / NO-GO lines, and fall to NO-GO on any fault.
//!
//! Layers, bottom up:
//!
//! - [`Classifier`]: a model blob validated once at start-up
//!   ([`shared_model::blob::decode`]); afterwards classification cannot panic.
//! - [`ReleaseKey`]: with one, only a blob signed by its owner (Ed25519, format
//!   version 2) is accepted; verified once at load, never per unit.
//! - [`SensorSource`]: what a board implements to fill one raw reading per channel.
//! - [`GoNoGoLines`]: the output driver, generic over embedded-hal 1.0
//!   [`OutputPin`](embedded_hal::digital::OutputPin)s. It owns its pins and
//!   keeps one invariant: NO-GO is asserted whenever GO is not, and GO is
//!   always dropped before anything else changes.
//! - [`WindowSource`]: a [`SensorSource`] that also fills sample windows, for a model
//!   some of whose channels are features of a signal (blob format version 3).
//! - [`Station`]: the loop body tying the three together, with fault
//!   reporting that tells a new fault from a repeated one; one station for readings
//!   ([`Station::new`]) or readings and windows ([`Station::with_windows`], the board
//!   filling each window into a buffer the caller owns). It keeps field statistics
//!   ([`FieldStats`]: counts per verdict and per fault source, a score histogram, each
//!   channel's figures, two CUSUMs) and writes them as a field record.
//!
//! No heap, no floating point, no `unsafe`.
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![warn(
    clippy::indexing_slicing,
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic
)]
#![cfg_attr(
    test,
    allow(
        clippy::indexing_slicing,
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic
    )
)]

mod classifier;
mod driver;
mod release_key;
mod sensor;
mod station;

pub use classifier::Classifier;
pub use driver::GoNoGoLines;
pub use release_key::{ReleaseKey, key_id};
pub use sensor::{SensorSource, WindowSource};
pub use shared_model::field::{CusumPlan, CusumState, FieldPlan, FieldStats, RecordError};
pub use shared_model::{
    ClassSection, Decision, DecodeError, Fault, FieldFault, Outcomes, TwoSided, Verdict,
};
pub use station::{Gather, Station, StationFault, Step};
