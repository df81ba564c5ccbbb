//! The device's field record (`shared_model::FieldStats`, FORMAT.md "Field record") read
//! from a file and written for one, and a field log replayed into the statistics the device
//! would keep over it.

use crate::release::pack::DeviceModel;
use std::path::Path;

use shared_model::FieldStats;
use shared_model::field::MAX_RECORD_LEN;

use crate::error::InputError;
use crate::field::run::FieldRun;
use crate::field::run_part::{Outcome, RunPart, outcome};
use crate::ingest::{LogOptions, SkipReport};
use crate::train::float_model::FloatModel;
use shared_model::{Decision, FieldFault};

/// Reads a field record and checks it was kept under `plan` (the audit's).
///
/// # Errors
/// [`InputError::Format`]: not a record (magic, version, CRC-32, counts), or one kept under
/// another plan (another release, or a plan that is not the audit's).
pub fn read_record(path: &Path, plan: &shared_model::FieldPlan) -> Result<FieldStats, InputError> {
    let bytes = crate::input::read_bounded(path, "field record", MAX_RECORD_LEN as u64)?;
    let format = |message: String| InputError::Format {
        path: path.into(),
        message,
    };
    let s = FieldStats::decode(&bytes).map_err(|e| {
        // The device prints its record as a `# field <hex>` line: saved as it is printed,
        // the file is text, not the record's bytes.
        let text = bytes.strip_prefix(b"# field ").unwrap_or(&bytes);
        let hex = !text.is_empty()
            && text
                .iter()
                .all(|b| b.is_ascii_hexdigit() || b.is_ascii_whitespace());
        if e == shared_model::field::RecordError::BadMagic && hex {
            format(format!(
                "{e}: this is the record as hex text (the device's `# field <hex>` line); give its bytes (e.g. `xxd -r -p`)"
            ))
        } else {
            format(e.to_string())
        }
    })?;
    if s.plan.blob_id != plan.blob_id {
        return Err(format(format!(
            "the record is of blob {:08x}; the audit is of blob {:08x}",
            s.plan.blob_id, plan.blob_id
        )));
    }
    if s.plan != *plan {
        return Err(format(format!(
            "the record was kept under another plan than the audit's (record {:?}, audit {:?}): give the device the plan `linegate drift --plan` prints",
            s.plan, plan
        )));
    }
    Ok(s)
}

/// The record's bytes.
pub fn record_bytes(s: &FieldStats) -> Vec<u8> {
    let mut buf = vec![0u8; s.record_len()];
    let n = s.encode(&mut buf).unwrap_or(0);
    buf.truncate(n);
    buf
}

/// What a field log's units are counted into: a whole run (with its chart) or a part of a
/// log (one file, merged later in log order).
pub trait FieldUnits {
    /// One decided unit, with the values the weights multiplied.
    fn decided_unit(&mut self, d: &Decision, values: &[i32]);
    /// One unit the kernel refused.
    fn faulted_unit(&mut self, fault: FieldFault);

    /// One unit's readings and windows through `model`'s kernel (the values the weights
    /// multiply, then the decision), counted as the device counts it.
    fn count_unit(&mut self, model: &DeviceModel, readings: &[i32], windows: &[&[i32]]) {
        match outcome(model, readings, windows) {
            Outcome::Decided(d, v, n) => self.decided_unit(&d, v.get(..n).unwrap_or(&[])),
            Outcome::Faulted(f) => self.faulted_unit(f),
        }
    }
}

impl FieldUnits for FieldRun {
    fn decided_unit(&mut self, d: &Decision, values: &[i32]) {
        self.decided(d, Some(values));
    }
    fn faulted_unit(&mut self, fault: FieldFault) {
        self.faulted(fault);
    }
}

impl FieldUnits for RunPart {
    fn decided_unit(&mut self, d: &Decision, values: &[i32]) {
        self.decided(d, Some(values));
    }
    fn faulted_unit(&mut self, fault: FieldFault) {
        self.faulted(fault);
    }
}

/// Replays the log `path` through `model` (the blob of `fm`) into `run`, unit by unit as
/// the device steps; returns the units read.
///
/// # Errors
/// The log's [`InputError`].
pub fn run_log(
    path: &Path,
    opts: &LogOptions,
    fm: &FloatModel,
    model: &DeviceModel,
    skipped: &mut SkipReport,
    run: &mut (impl FieldUnits + Send),
) -> Result<usize, InputError> {
    let mut units = 0usize;
    crate::ingest::stream(path, opts, &fm.channels, &fm.signals, skipped, |u| {
        let windows: Vec<&[i32]> = u.windows.iter().map(Vec::as_slice).collect();
        run.count_unit(model, u.raw, &windows);
        units += 1;
        Ok(())
    })?;
    Ok(units)
}
