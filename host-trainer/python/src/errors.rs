//! Linegate's errors as the package's exceptions (defined in `linegate/errors.py`, so
//! they carry typed attributes and docstrings): an [`InputError`] becomes `LogError`
//! with its file, line and column; the command line's usage errors `UsageError`; a check
//! that ran and failed `CheckFailed`; a blob, key or model that do not belong together
//! `ReleaseError`.

use host_trainer::error::{InputError, Place};
use pyo3::prelude::*;

/// The exception class `name` of `linegate.errors`, called with `args`.
fn raise<'py>(py: Python<'py>, name: &str, args: impl pyo3::call::PyCallArgs<'py>) -> PyErr {
    match py
        .import("linegate.errors")
        .and_then(|m| m.getattr(name))
        .and_then(|class| class.call1(args))
    {
        Ok(value) => PyErr::from_value(value),
        Err(e) => e,
    }
}

/// `LogError(message, file, line, column)`: `line` is a text log's line (from 1), a
/// Parquet log's row within the file (from 0), or a frame's or array's row (from 0).
pub fn log_error(
    py: Python<'_>,
    message: String,
    file: Option<String>,
    line: Option<u64>,
    column: Option<String>,
) -> PyErr {
    raise(py, "LogError", (message, file, line, column))
}

/// The `LogError` for an [`InputError`]: its message, file, line and column.
pub fn input_error(py: Python<'_>, e: &InputError) -> PyErr {
    input_error_saying(py, e, e.to_string())
}

/// The `LogError` for an [`InputError`] with `message` (the error with its context).
fn input_error_saying(py: Python<'_>, e: &InputError, message: String) -> PyErr {
    let at = e.location();
    let line = at.place.map(|p| match p {
        Place::Line(n) => n,
        Place::Row { file_row, .. } => file_row,
    });
    log_error(
        py,
        message,
        Some(at.path.display().to_string()),
        line,
        at.column.map(str::to_string),
    )
}

/// `UsageError(message)`.
pub fn usage_error(py: Python<'_>, message: String) -> PyErr {
    raise(py, "UsageError", (message,))
}

/// `ReleaseError(message)`.
pub fn release_error(py: Python<'_>, message: String) -> PyErr {
    raise(py, "ReleaseError", (message,))
}

/// `CheckFailed(message)` (the Python side attaches the result when there is one).
pub fn check_failed(py: Python<'_>, message: String) -> PyErr {
    raise(py, "CheckFailed", (message,))
}

/// `LinegateError(message)`: an output error, or anything else the command line reports
/// with exit 2 that is neither a log's nor a usage error.
pub fn linegate_error(py: Python<'_>, message: String) -> PyErr {
    raise(py, "LinegateError", (message,))
}

/// The message with its causes, as `linegate` prints them (`caused by: …`).
pub fn chain(e: &anyhow::Error) -> String {
    let mut out = e.to_string();
    for cause in e.chain().skip(1) {
        out.push_str("\n  caused by: ");
        out.push_str(&cause.to_string());
    }
    out
}

/// An error of the library or the command layer as the package's exception: the command
/// line's `CheckFailed` (exit 1) → `CheckFailed`; parts of a release that do not fit →
/// `ReleaseError`; an [`InputError`] anywhere in the chain
/// → `LogError`; an output error → `LinegateError`; anything else (exit 2) → `UsageError`.
pub fn from_anyhow(py: Python<'_>, e: &anyhow::Error) -> PyErr {
    if let Some(c) = e.downcast_ref::<host_trainer::cli::CheckFailed>() {
        return check_failed(py, c.0.clone());
    }
    // Parts of a release that do not fit together (or a blob that is not the model's).
    if e.chain().any(|c| {
        c.downcast_ref::<host_trainer::cli::parts::PartsRelease>()
            .is_some()
            || c.downcast_ref::<host_trainer::release::audit_part::MergeError>()
                .is_some()
            || c.downcast_ref::<host_trainer::release::audit_part::ReleasedError>()
                .is_some()
    }) {
        return release_error(py, chain(e));
    }
    if let Some(input) = e.chain().find_map(|c| c.downcast_ref::<InputError>()) {
        return input_error_saying(py, input, chain(e));
    }
    if e.chain().any(|c| {
        c.downcast_ref::<host_trainer::error::OutputError>()
            .is_some()
    }) {
        return linegate_error(py, chain(e));
    }
    usage_error(py, chain(e))
}
