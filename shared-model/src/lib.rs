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
//! RMS, band magnitude…), the same integer on the desk and on the device. One
//! [`CheckedModel`] serves both input kinds ([`Inputs`]): `CheckedModel` of [`Readings`]
//! (the default, nothing held for signals) and `CheckedModel<SignalSection>`, whose
//! channels may be features of sample windows; one [`blob::encode`] and one
//! [`blob::decode`] write and read both (format version 3 for a model with signals), and
//! [`CheckedModel::classify_windows`] classifies a unit of readings and windows. Imports
//! point one way: `limits` ← `error` ← `features` ← `model` ← `decision` ← `blob`, `kernel`.
//! 3. [`kernel`]: raw readings → scaled integer inputs → integer score (the arithmetic),
//!    then [`decision`]: score → [`Verdict`] by the model's [`Thresholds`]. Integer only,
//!    explicit widths; the two steps are apart so that a rule over several classes can be
//!    added without touching the arithmetic.
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
//! // A station that passes readings alone holds a `CheckedModel` (of `Readings`).
//! let back: shared_model::CheckedModel = blob::decode(&buf[..n]).unwrap();
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
mod class_check;
pub mod classes;
pub mod decision;
pub mod error;
pub mod features;
pub mod field;
#[doc = include_str!("../FORMAT.md")]
pub mod format {}
pub mod kernel;
pub mod limits;
pub mod model;

pub use classes::{ClassRow, ClassSection, NO_GO_CLASS};
pub use decision::{Decision, Thresholds, Verdict};
pub use error::{
    DecodeError, EncodeError, Fault, ModelError, SignalError, SignalFault, WindowFault,
};
pub use features::SignalSection;
pub use field::{FieldFault, FieldPlan, FieldStats};
pub use limits::{MAX_CHANNELS, MAX_CLASSES, NAME_CAPACITY};
pub use model::{
    AuditMark, ChannelSpec, CheckedModel, FixedModel, Inputs, Outcomes, Readings, TwoSided,
};
