//! `read_log`: a log read by the library's reader with the commands' log flags
//! (`host_trainer::cli::read_log`), handed to Python as numpy arrays.

use std::ffi::OsString;

use numpy::{IntoPyArray, PyArrayMethods};
use pyo3::prelude::*;
use pyo3::types::PyDict;

use crate::errors;

/// Adds `read_log` to the module.
pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(read_log, m)?)
}

/// Reads the log `args` names (its files, then `--model`, `--sheet` and log flags, as the
/// commands take them) and returns its arrays and names as a dict (see `_native.pyi`).
#[pyfunction]
fn read_log<'py>(py: Python<'py>, args: Vec<String>) -> PyResult<Bound<'py, PyDict>> {
    let args: Vec<OsString> = args.into_iter().map(OsString::from).collect();
    let ds = py
        .detach(|| host_trainer::cli::read_log::read_log(&args))
        .map_err(|e| errors::from_anyhow(py, &e))?;
    let (n, d) = (ds.len(), ds.dim());
    let physical: Vec<f64> = (0..n)
        .flat_map(|i| {
            ds.raw_row(i)
                .iter()
                .zip(&ds.scales)
                .map(|(&r, s)| s.physical(r))
                .collect::<Vec<_>>()
        })
        .collect();
    let out = PyDict::new(py);
    out.set_item("raw", ds.raw.clone().into_pyarray(py).reshape([n, d])?)?;
    out.set_item("physical", physical.into_pyarray(py).reshape([n, d])?)?;
    out.set_item("labels", ds.labels.clone().into_pyarray(py))?;
    let class_index: Vec<i32> = (0..n)
        .map(|i| ds.class_of(i).map_or(-1, i32::from))
        .collect();
    out.set_item("class_index", class_index.into_pyarray(py))?;
    out.set_item(
        "classes",
        ds.classes.names().map(str::to_string).collect::<Vec<_>>(),
    )?;
    out.set_item("lines", ds.lines.clone().into_pyarray(py))?;
    let ids: Option<Vec<String>> = (ds.unit_ids.len() == n && n > 0).then(|| {
        (0..n)
            .map(|i| ds.unit_ids.get(i).unwrap_or("").to_string())
            .collect()
    });
    out.set_item("unit_ids", ids)?;
    out.set_item(
        "channels",
        ds.scales.iter().map(|s| s.name.clone()).collect::<Vec<_>>(),
    )?;
    out.set_item(
        "files",
        ds.parts
            .iter()
            .map(|p| p.path.display().to_string())
            .collect::<Vec<_>>(),
    )?;
    let part_of: Vec<u32> = ds.part_of.clone();
    out.set_item("part_of", part_of.into_pyarray(py))?;
    out.set_item("skipped", ds.skipped.total)?;
    Ok(out)
}
