//! Linegate host tool: bench logs in, audited fixed-point model blobs out.
//!
//! The modules follow the data: [`log`] → [`dataset`] → [`scaling`] →
//! [`trainer`] / [`maxmargin`] / [`separability`] → [`float_model`] →
//! [`quantise`] → [`audit`] → [`pack`] (blob, Intel HEX) → device. [`eval`],
//! [`report`], [`replay`] and [`demo`] sit beside the flow. Every fixed-point
//! decision is made by `shared_model`'s kernel, the same code the firmware runs.
//!
//! The library returns typed errors; only the `linegate` binary picks exit codes.
#![forbid(unsafe_code)]
// Errors carry file, line, column and the offending text; they are built once, on the
// cold path, so their size does not matter.
#![allow(clippy::result_large_err)]

pub mod audit;
pub mod dataset;
pub mod demo;
pub mod error;
pub mod eval;
pub mod float_model;
pub mod hex;
pub mod log;
pub mod maxmargin;
pub mod output;
pub mod pack;
pub mod quantise;
pub mod replay;
pub mod report;
pub mod scaling;
pub mod separability;
pub mod synth;
pub mod trainer;
pub mod workflow;
