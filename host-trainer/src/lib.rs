//! Linegate host tool: bench logs in, audited fixed-point model blobs out.
//!
//! The folders follow the data:
//!
//! 1. [`ingest`]: a bench log (CSV/TSV) and its channel sheet → a [`Dataset`] of raw
//!    readings with each channel's scaling.
//! 2. [`train`]: the dataset → a float linear model ([`FloatModel`]), with the exact
//!    separability test, evaluation and cross-validation.
//! 3. [`release`]: the float model → quantised fixed-point model → release audit → blob,
//!    Intel HEX image, replay of the device's lines. Every fixed-point decision is made
//!    by `shared_model`'s kernel, the same code the firmware runs.
//! 4. [`field`]: after the release: scoring field logs, comparing two releases, drift
//!    against the audit's baseline.
//! 5. [`report`]: the audit (and what `field` finds) as Markdown, HTML and SVG.
//!
//! [`workflow`] runs the steps as single calls, the release step in `workflow::release`
//! (the CLI and [`demo`] both use them);
//! [`synth`] writes synthetic logs of any size; [`output`] writes files atomically and
//! [`input`] opens them with bounds; [`digest`], [`error`] and [`confidence`] (exact binomial
//! bounds on rates) are the leaves every step uses. Imports point down this
//! list only: no module imports one that imports it back.
//!
//! [`cli`] is the command layer on top of them all (flags, printing; `main.rs` parses
//! the process's arguments, calls [`cli::run`] and picks the exit code), in the library so
//! that other front ends (the Python package) run the same commands in process.
//!
//! The library returns typed errors; only the `linegate` binary picks exit codes.
//!
//! [`Dataset`]: ingest::dataset::Dataset
//! [`FloatModel`]: train::float_model::FloatModel
#![forbid(unsafe_code)]
#![deny(missing_docs)]
// The library only returns: it prints nothing (progress goes through `progress`, which the
// CLI installs), never exits, and a failure is an error value, not a panic.
#![warn(
    rust_2018_idioms,
    unused_qualifications,
    clippy::dbg_macro,
    clippy::todo,
    clippy::unimplemented,
    clippy::print_stdout,
    clippy::print_stderr,
    clippy::exit,
    clippy::mem_forget,
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic,
    clippy::cast_lossless
)]
#![cfg_attr(test, allow(clippy::unwrap_used, clippy::expect_used, clippy::panic))]
// Errors carry file, line, column and the offending text; they are built once, on the
// cold path, so their size does not matter.
#![allow(clippy::result_large_err)]

// The command layer prints its reports and ends the process quietly when stdout's reader
// has gone (`say!`); the rest of the library does neither.
#[allow(clippy::print_stdout, clippy::print_stderr, clippy::exit)]
pub mod cli;
pub mod confidence;
pub mod demo;
pub mod digest;
pub mod error;
pub mod field;
pub mod ingest;
pub mod input;
pub mod output;
pub mod progress;
pub mod project;
pub mod release;
pub mod report;
pub mod synth;
pub mod train;
pub mod workflow;
