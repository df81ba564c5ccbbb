//! Audit, replay and drift by parts: one file of a log per call (`host_trainer::cli::parts`:
//! the file read and checked as the command reads a log), the part as `bytes` (so an engine
//! moves it between processes), the library's exact merges, and the finished result as
//! JSON. `linegate/parts.py` says what merges how; `linegate/dask.py` runs them on Dask.

use std::path::PathBuf;

use host_trainer::cli::parts as cmd;
use host_trainer::field::drift::DriftConfig;
use host_trainer::release::audit_part::AuditPart;
use pyo3::prelude::*;
use pyo3::types::PyBytes;

use crate::errors;

/// Adds the parts' functions to the module.
pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(resolve, m)?)?;
    m.add_function(wrap_pyfunction!(log_files, m)?)?;
    m.add_function(wrap_pyfunction!(check_log, m)?)?;
    m.add_function(wrap_pyfunction!(audit_part, m)?)?;
    m.add_function(wrap_pyfunction!(merge_audit_parts, m)?)?;
    m.add_function(wrap_pyfunction!(finish_audit, m)?)?;
    m.add_function(wrap_pyfunction!(replay_part, m)?)?;
    m.add_function(wrap_pyfunction!(merge_replay_parts, m)?)?;
    m.add_function(wrap_pyfunction!(finish_replay, m)?)?;
    m.add_function(wrap_pyfunction!(drift_start, m)?)?;
    m.add_function(wrap_pyfunction!(drift_part, m)?)?;
    m.add_function(wrap_pyfunction!(merge_drift_parts, m)?)?;
    m.add_function(wrap_pyfunction!(finish_drift, m)?)
}

/// The bytes as a Python `bytes`, or the error as the package's exception.
fn bytes(py: Python<'_>, made: anyhow::Result<Vec<u8>>) -> PyResult<Py<PyBytes>> {
    made.map(|b| PyBytes::new(py, &b).unbind())
        .map_err(|e| errors::from_anyhow(py, &e))
}

/// A part's bytes that do not read back, or parts that do not merge: `ReleaseError`.
fn refused(py: Python<'_>, e: impl std::fmt::Display) -> PyErr {
    errors::release_error(py, e.to_string())
}

/// `command`'s settings for `model`: `flags` as given, then the project file's keys
/// (`project`, else `linegate.toml` here unless `no_project`): the log flags as explicit
/// flags for the workers, the `--noise` entries, and every other setting as (flag, values,
/// source).
#[pyfunction]
#[pyo3(signature = (command, model, flags, project=None, no_project=false))]
#[allow(clippy::type_complexity)]
fn resolve(
    py: Python<'_>,
    command: &str,
    model: PathBuf,
    flags: Vec<String>,
    project: Option<PathBuf>,
    no_project: bool,
) -> PyResult<(Vec<String>, Vec<String>, Vec<(String, Vec<String>, String)>)> {
    cmd::resolve(command, &model, &flags, project.as_deref(), no_project)
        .map(|r| (r.log_flags, r.noise, r.other))
        .map_err(|e| errors::from_anyhow(py, &e))
}

/// The log's files, expanded and ordered as the commands expand them.
#[pyfunction]
fn log_files(py: Python<'_>, given: Vec<PathBuf>) -> PyResult<Vec<PathBuf>> {
    cmd::log_files(&given).map_err(|e| errors::from_anyhow(py, &e))
}

/// Refuses files that do not make one log for `command` (a file twice, channel columns
/// that differ).
#[pyfunction]
fn check_log(
    py: Python<'_>,
    command: String,
    model: PathBuf,
    files: Vec<PathBuf>,
    flags: Vec<String>,
) -> PyResult<()> {
    py.detach(|| cmd::check_log(&command, &model, &files, &flags))
        .map_err(|e| errors::from_anyhow(py, &e))
}

/// One file of a log audited as `linegate audit` audits the log it names `name`; `part`
/// is the file's place in the log, `noise` the `--noise` entries, `log_args` the log flags.
#[pyfunction]
#[pyo3(signature = (model, blob, file, name, part, noise=Vec::new(), log_args=Vec::new()))]
#[allow(clippy::too_many_arguments)]
fn audit_part(
    py: Python<'_>,
    model: PathBuf,
    blob: Vec<u8>,
    file: PathBuf,
    name: String,
    part: u32,
    noise: Vec<String>,
    log_args: Vec<String>,
) -> PyResult<Py<PyBytes>> {
    let made =
        py.detach(|| cmd::audit_part(&model, &blob, &file, (&name, part), &noise, &log_args));
    bytes(py, made)
}

/// Two audit parts of one log as one (either order gives the same bytes' meaning).
#[pyfunction]
fn merge_audit_parts(py: Python<'_>, a: Vec<u8>, b: Vec<u8>) -> PyResult<Py<PyBytes>> {
    let merged = py.detach(|| {
        AuditPart::from_bytes(&a)?
            .merge(AuditPart::from_bytes(&b)?)
            .map(|m| m.to_bytes())
    });
    merged
        .map(|b| PyBytes::new(py, &b).unbind())
        .map_err(|e| refused(py, e))
}

/// The audit of a log of `files` files from the merge of all its parts, as JSON.
#[pyfunction]
fn finish_audit(py: Python<'_>, part: Vec<u8>, files: usize) -> PyResult<String> {
    let a = AuditPart::from_bytes(&part)
        .and_then(|p| p.finish(files))
        .map_err(|e| refused(py, e))?;
    serde_json::to_string(&a).map_err(|e| refused(py, e))
}

/// The `part`-th file of a log through the blob: its device lines (numbered from 0) and
/// counts.
#[pyfunction]
#[pyo3(signature = (model, blob, file, part, log_args=Vec::new()))]
fn replay_part(
    py: Python<'_>,
    model: PathBuf,
    blob: Vec<u8>,
    file: PathBuf,
    part: u32,
    log_args: Vec<String>,
) -> PyResult<Py<PyBytes>> {
    let made = py.detach(|| cmd::replay_part(&model, &blob, (&file, part), &log_args));
    bytes(py, made)
}

/// Two replay parts as one: `earlier`'s units, then `later`'s (neighbours in the log).
#[pyfunction]
fn merge_replay_parts(py: Python<'_>, earlier: Vec<u8>, later: Vec<u8>) -> PyResult<Py<PyBytes>> {
    let made = py.detach(|| cmd::replay_merge(&earlier, &later));
    bytes(py, made)
}

/// The lines and counts of a log of `files` files from the merge of all its parts, as JSON.
#[pyfunction]
fn finish_replay(py: Python<'_>, merged: Vec<u8>, files: usize) -> PyResult<String> {
    let p = cmd::replay_finish(&merged, files).map_err(|e| errors::from_anyhow(py, &e))?;
    serde_json::to_string(&p).map_err(|e| refused(py, e))
}

/// The empty drift part of the audit record `audit`'s plan, after checking the blob is
/// the one the audit named.
#[pyfunction]
fn drift_start(
    py: Python<'_>,
    model: PathBuf,
    blob: Vec<u8>,
    audit: PathBuf,
) -> PyResult<Py<PyBytes>> {
    let made = py.detach(|| cmd::drift_start(&model, &blob, &audit));
    bytes(py, made)
}

/// The `part`-th file of a field log counted into a copy of `start`.
#[pyfunction]
#[pyo3(signature = (model, blob, start, file, part, log_args=Vec::new()))]
#[allow(clippy::too_many_arguments)]
fn drift_part(
    py: Python<'_>,
    model: PathBuf,
    blob: Vec<u8>,
    start: Vec<u8>,
    file: PathBuf,
    part: u32,
    log_args: Vec<String>,
) -> PyResult<Py<PyBytes>> {
    let made = py.detach(|| cmd::drift_part(&model, &blob, &start, (&file, part), &log_args));
    bytes(py, made)
}

/// Two drift parts as one: `earlier`'s units, then `later`'s (neighbours in the log).
#[pyfunction]
fn merge_drift_parts(py: Python<'_>, earlier: Vec<u8>, later: Vec<u8>) -> PyResult<Py<PyBytes>> {
    let made = py.detach(|| cmd::drift_merge(&earlier, &later));
    bytes(py, made)
}

/// The drift report (`linegate drift --json`'s) over the field log of `files` whose parts
/// merged into `merged`, against the baseline of `audit`, and the rows skipped:
/// `{"report": …, "skipped": …}`.
#[pyfunction]
#[pyo3(signature = (audit, merged, files, alpha=0.01, two_sided=false))]
fn finish_drift(
    py: Python<'_>,
    audit: PathBuf,
    merged: Vec<u8>,
    files: Vec<PathBuf>,
    alpha: f64,
    two_sided: bool,
) -> PyResult<String> {
    let cfg = DriftConfig { alpha, two_sided };
    let (report, skipped) = py
        .detach(|| cmd::drift_finish(&audit, &merged, &files, cfg))
        .map_err(|e| errors::from_anyhow(py, &e))?;
    let both = serde_json::json!({"report": report, "skipped": skipped});
    serde_json::to_string(&both).map_err(|e| refused(py, e))
}
