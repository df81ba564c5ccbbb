//! `linegate._native`: the Rust side of the Python package `linegate`.
//!
//! One module per Python-facing area, each registering its own classes and functions:
//! [`errors`] (Linegate's errors as the package's exceptions), [`release`] (a release
//! loaded and checked, classification by the device kernel), [`log`] (a log read into
//! numpy arrays), [`commands`] (the command line run in process), [`parts`] (audit, replay
//! and drift one file of a log at a time, with their exact merges). The Python sources in
//! `linegate/` wrap these in typed classes; the stubs are `linegate/_native.pyi`.
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![warn(clippy::unwrap_used, clippy::panic, clippy::print_stdout)]

use pyo3::prelude::*;

pub mod commands;
pub mod errors;
pub mod log;
pub mod parts;
pub mod release;

/// The extension module: every area adds its items.
#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    release::register(m)?;
    log::register(m)?;
    commands::register(m)?;
    parts::register(m)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
