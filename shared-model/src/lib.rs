//! The Linegate model: what the host trainer produces and what the device runs.
//!
//! Three layers, in the order data crosses them:
//!
//! 1. [`model`]: the fixed-point model as plain data ([`FixedModel`]) and its
//!    validated form ([`CheckedModel`]). Validation proves, once, that every
//!    in-range reading gives an exact score without overflow.
//! 2. [`blob`]: the byte format that travels to flash: magic, format version,
//!    a postcard payload and a CRC-32. The layout is written down in
//!    `shared-model/FORMAT.md`, rendered here as [`format`]; any layout change
//!    bumps [`blob::FORMAT_VERSION`].
//!
//! [`limits`] holds the capacities and layout constants all three share; [`error`] the
//! error enums. [`features`] reduces a window of raw samples to one integer reading (mean,
//! RMS, band magnitude…), the same integer on the desk and on the device; a model whose
//! channels include features ([`CheckedSignalModel`]) carries its signals in the blob
//! (format version 3, [`blob::decode_signals`]) and classifies with
//! [`CheckedSignalModel::classify_windows`]; a model without them pays nothing for it. Imports point one way: `limits` ←
//! `error` ← `features` ← `model` ← `blob`, `kernel`.
//! 3. [`kernel`]: raw readings → scaled integer inputs → integer score →
//!    [`Verdict`]. Integer only, explicit widths.
//!
//! # Contract
//!
//! Validate once, then stay infallible: [`blob::decode`] and
//! [`CheckedModel::new`] check magic, version, lengths, CRC, ranges and the
//! accumulator bound. After that no accessor and no kernel call can panic or
//! overflow; the only run-time outcomes are a [`Decision`] or a [`Fault`]
//! naming the reading that was refused.
//!
//! The crate is `#![no_std]`, uses no heap and no floating point, so the host
//! audit and the firmware execute the same code and agree bit for bit.
//!
//! ```
//! use shared_model::{blob, ChannelSpec, FixedModel, Verdict};
//!
//! let mut model = FixedModel::example_two_channel();
//! let checked = shared_model::CheckedModel::new(model.clone()).unwrap();
//! let mut buf = [0u8; blob::MAX_BLOB_LEN];
//! let n = blob::encode(&checked, &mut buf).unwrap();
//! let back = blob::decode(&buf[..n]).unwrap();
//! assert_eq!(back.model(), checked.model());
//! let d = back.classify(&[900, 100]).unwrap();
//! assert_eq!(d.verdict, Verdict::Go);
//! # model.bias = 0; let _ = model;
//! # let _ = ChannelSpec::default();
//! ```
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![warn(
    clippy::cast_possible_truncation,
    clippy::cast_sign_loss,
    clippy::cast_possible_wrap,
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
        clippy::panic,
        clippy::cast_possible_truncation,
        clippy::cast_possible_wrap,
        clippy::cast_sign_loss,
        clippy::arithmetic_side_effects
    )
)]

#[cfg(test)]
extern crate std;

pub mod blob;
pub mod error;
pub mod features;
#[doc = include_str!("../FORMAT.md")]
pub mod format {}
pub mod kernel;
pub mod limits;
pub mod model;

pub use error::{
    DecodeError, EncodeError, Fault, ModelError, SignalError, SignalFault, WindowFault,
};
pub use kernel::{Decision, Verdict};
pub use limits::{MAX_CHANNELS, NAME_CAPACITY};
pub use model::{AuditMark, ChannelSpec, CheckedModel, CheckedSignalModel, FixedModel};
