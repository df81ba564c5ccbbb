//! `Release`: a float model with its blob, checked as `linegate replay` checks them (the
//! blob decodes and is one this model produces; with a public key, signed by that key and
//! unchanged), and classification by the device kernel: physical readings → raw counts by
//! `ChannelScale::to_raw` (a reading outside the range kept as the device's count by
//! `ChannelScale::raw_reading`, as the log reader does for replay) → `classify_windows`,
//! each unit's line written by replay's own `write_line`.

use std::path::PathBuf;

use host_trainer::field::score::ReleaseIds;
use host_trainer::ingest::MAX_READING;
use host_trainer::release::matching::{BlobMismatch, decode_from};
use host_trainer::release::pack::DeviceModel;
use host_trainer::release::{replay, sign, values};
use host_trainer::train::float_model::FloatModel;
use numpy::{IntoPyArray, PyReadonlyArray2};
use pyo3::prelude::*;
use pyo3::types::PyDict;
use shared_model::{Fault, SignalFault, Verdict};

use crate::errors;

/// Adds `Release` to the module.
pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<Release>()
}

/// A release: the float model and the device model its blob holds.
#[pyclass(module = "linegate._native", frozen)]
pub struct Release {
    fm: FloatModel,
    model: DeviceModel,
    ids: Option<ReleaseIds>,
}

/// Words of the plain quantisation when no blob is given (`linegate values`' defaults).
const PLAIN_BITS: u8 = 16;

#[pymethods]
impl Release {
    /// Loads the float model `model` and its blob `blob`, checked as replay checks them;
    /// with `public_key`, the blob's signature is verified. Without a blob the model is
    /// quantised plainly at 16-bit words, as `linegate values` does without `--blob`.
    #[staticmethod]
    #[pyo3(signature = (model, blob=None, public_key=None))]
    fn load(
        py: Python<'_>,
        model: PathBuf,
        blob: Option<PathBuf>,
        public_key: Option<PathBuf>,
    ) -> PyResult<Self> {
        let fm = FloatModel::read(&model).map_err(|e| errors::input_error(py, &e))?;
        let Some(blob) = blob else {
            if public_key.is_some() {
                return Err(errors::usage_error(
                    py,
                    "public_key: a signature is checked on a blob; give blob= too".into(),
                ));
            }
            let m = values::plain_model(&fm, PLAIN_BITS, PLAIN_BITS)
                .map_err(|e| errors::release_error(py, format!("{}: {e}", model.display())))?;
            return Ok(Self {
                fm,
                model: m,
                ids: None,
            });
        };
        let bytes = host_trainer::input::read_bounded(
            &blob,
            "model blob",
            host_trainer::input::MAX_IMAGE_FILE,
        )
        .map_err(|e| errors::input_error(py, &e))?;
        let m = decode_from(&fm, &bytes).map_err(|e| {
            errors::release_error(
                py,
                match e {
                    BlobMismatch::Decode(e) => format!("{}: {e}", blob.display()),
                    BlobMismatch::Mismatch(e) => format!(
                        "{}: not a blob of the float model {}: {e}; give the float model the blob was packed from",
                        blob.display(),
                        model.display()
                    ),
                },
            )
        })?;
        if let Some(k) = &public_key {
            let key = sign::read_public(k).map_err(|e| errors::input_error(py, &e))?;
            sign::verify(&bytes, &key).map_err(|e| {
                errors::release_error(py, format!("{}: {e} ({})", blob.display(), k.display()))
            })?;
        }
        let ids = Some(ReleaseIds::of_blob(&m, &bytes));
        Ok(Self { fm, model: m, ids })
    }

    /// The model id (32 hex digits).
    #[getter]
    fn model_id(&self) -> String {
        host_trainer::digest::lower_hex(&self.model.model().model_id)
    }

    /// The blob's id (its CRC-32, 8 hex digits); `None` without a blob.
    #[getter]
    fn blob_id(&self) -> Option<String> {
        self.ids.as_ref().and_then(|i| i.blob_id.clone())
    }

    /// The signing key's id for a signed blob, else `None`.
    #[getter]
    fn key_id(&self) -> Option<String> {
        self.ids.as_ref().and_then(|i| i.key_id.clone())
    }

    /// The device's first line (`# model … blob …`); `None` without a blob.
    #[getter]
    fn model_line(&self) -> Option<String> {
        self.ids.as_ref().map(|i| i.model_line.clone())
    }

    /// The channels' names, in the model's order.
    #[getter]
    fn channels(&self) -> Vec<String> {
        self.fm.channels.iter().map(|c| c.name.clone()).collect()
    }

    /// The log column each channel is read from (its name unless the model keeps an alias).
    #[getter]
    fn columns(&self) -> Vec<String> {
        self.fm
            .channels
            .iter()
            .map(|c| c.log_column().to_string())
            .collect()
    }

    /// The signals' names (a model with signal features); empty for a model of readings.
    #[getter]
    fn signals(&self) -> Vec<String> {
        self.fm.signals.iter().map(|s| s.name.clone()).collect()
    }

    /// The class names of a model of several classes, in the blob's row order (the
    /// indices of `class_index`); else `None`.
    #[getter]
    fn classes(&self) -> Option<Vec<String>> {
        self.model
            .classes()
            .map(|c| c.rows.iter().map(|r| r.name.to_string()).collect())
    }

    /// Each channel's place among `names` (a frame's columns), found as the log reader
    /// finds a channel's column (ASCII case-insensitively); a missing or doubled column is
    /// a `LogError` naming it.
    fn column_places(
        &self,
        py: Python<'_>,
        names: Vec<String>,
        source: String,
    ) -> PyResult<Vec<usize>> {
        let mut out = Vec::with_capacity(self.fm.channels.len());
        for c in &self.fm.channels {
            let col = c.log_column();
            let Some(k) = host_trainer::ingest::find_column(&names, col) else {
                return Err(errors::log_error(
                    py,
                    format!(
                        "{source}: no column '{col}' for channel '{}'; columns: {}",
                        c.name,
                        names.join(", ")
                    ),
                    Some(source),
                    None,
                    Some(col.to_string()),
                ));
            };
            if let Some(j) = names
                .iter()
                .enumerate()
                .position(|(j, n)| j != k && host_trainer::ingest::same_name(n, col))
            {
                return Err(errors::log_error(
                    py,
                    format!(
                        "{source}: columns '{}' and '{}' are the same name (names compare without case); rename one",
                        names[k], names[j]
                    ),
                    Some(source),
                    None,
                    Some(names[j].clone()),
                ));
            }
            out.push(k);
        }
        Ok(out)
    }

    /// Classifies physical readings (`n × channels`, float64, in channel order): each
    /// reading to raw as the log reader converts it, then the device kernel. A NaN, an
    /// infinity or a value beyond 1e15 is a `LogError` naming its row (from 0) and column
    /// (`names[k]`). Returns the decisions as a dict of arrays (see `_native.pyi`).
    #[pyo3(signature = (physical, names, source))]
    fn classify<'py>(
        &self,
        py: Python<'py>,
        physical: PyReadonlyArray2<'py, f64>,
        names: Vec<String>,
        source: String,
    ) -> PyResult<Bound<'py, PyDict>> {
        let x = physical.as_array();
        self.check_shape(py, x.ncols())?;
        let mut raw = Vec::with_capacity(x.len());
        for (i, row) in x.rows().into_iter().enumerate() {
            for ((k, &v), s) in row.iter().enumerate().zip(&self.fm.channels) {
                if !(v.is_finite() && v.abs() <= MAX_READING) {
                    let column = names.get(k).cloned().unwrap_or_else(|| s.name.clone());
                    let what = if v.is_finite() {
                        format!("beyond {MAX_READING:e} in magnitude; is it a reading?")
                    } else {
                        "not a finite number (the log reader refuses it too)".to_string()
                    };
                    return Err(errors::log_error(
                        py,
                        format!("{source}: row {i}: column '{column}': {v} is {what}"),
                        Some(source),
                        Some(i as u64),
                        Some(column),
                    ));
                }
                // As the reader converts for replay: in range to its count, out of range
                // kept as the device's count, which the kernel then refuses (FAULT).
                raw.push(s.to_raw(v).unwrap_or_else(|| s.raw_reading(v)));
            }
        }
        self.decide(py, &raw, x.ncols())
    }

    /// Classifies raw readings (`n × channels`, int32, the device's counts) with the
    /// device kernel. Returns the decisions as `classify` does.
    fn classify_raw<'py>(
        &self,
        py: Python<'py>,
        raw: PyReadonlyArray2<'py, i32>,
    ) -> PyResult<Bound<'py, PyDict>> {
        let x = raw.as_array();
        self.check_shape(py, x.ncols())?;
        let flat: Vec<i32> = x.iter().copied().collect();
        self.decide(py, &flat, x.ncols())
    }
}

/// Verdict codes in the arrays: index into `VERDICTS`.
const VERDICTS: [&str; 4] = ["GO", "NO-GO", "RECHECK", "FAULT"];

impl Release {
    /// Refuses a model with signal features (its units are windows) and a column count
    /// that is not the model's.
    fn check_shape(&self, py: Python<'_>, cols: usize) -> PyResult<()> {
        if !self.fm.signals.is_empty() {
            return Err(errors::usage_error(
                py,
                format!(
                    "model {} takes sample windows of its signals ({}): classify its signal logs with linegate.replay",
                    self.model_id(),
                    self.signals().join(", ")
                ),
            ));
        }
        if cols != self.fm.channels.len() {
            return Err(errors::usage_error(
                py,
                format!(
                    "{cols} columns given; the model reads {} channels ({}), in that order",
                    self.fm.channels.len(),
                    self.channels().join(", ")
                ),
            ));
        }
        Ok(())
    }

    /// Every row of `raw` (`d` per row) through the kernel: the arrays and replay's lines.
    fn decide<'py>(&self, py: Python<'py>, raw: &[i32], d: usize) -> PyResult<Bound<'py, PyDict>> {
        let n = raw.len().checked_div(d).unwrap_or(0);
        let mut verdict = Vec::with_capacity(n);
        let mut score = Vec::with_capacity(n);
        let mut fault = Vec::with_capacity(n);
        let mut class = Vec::with_capacity(n);
        let mut lines = String::with_capacity(n * 16);
        let classes = self.model.classes();
        for i in 0..n {
            let row = &raw[i * d..(i + 1) * d];
            let r = self.model.classify_windows(row, &[]);
            replay::write_line(&mut lines, i, &r, classes);
            lines.push('\n');
            match r {
                Ok(dec) => {
                    verdict.push(match dec.verdict {
                        Verdict::Go => 0u8,
                        Verdict::NoGo => 1,
                        Verdict::Recheck => 2,
                    });
                    score.push(dec.score);
                    fault.push(-1i32);
                    class.push(dec.class.map_or(-1i32, i32::from));
                }
                Err(e) => {
                    verdict.push(3);
                    score.push(0);
                    fault.push(match e {
                        SignalFault::Reading(Fault::OutOfRange { channel, .. }) => {
                            i32::from(channel)
                        }
                        _ => -2,
                    });
                    class.push(-1);
                }
            }
        }
        let out = PyDict::new(py);
        out.set_item("verdict", verdict.into_pyarray(py))?;
        out.set_item("verdict_names", VERDICTS.to_vec())?;
        out.set_item("score", score.into_pyarray(py))?;
        out.set_item("fault_channel", fault.into_pyarray(py))?;
        out.set_item("class_index", class.into_pyarray(py))?;
        out.set_item("lines", lines)?;
        Ok(out)
    }
}
