//! Replay: the shared kernel over a log, printing exactly the lines the device prints.
//!
//! First line `# model <model id> blob <blob id>` (the blob id is the blob's CRC-32 in
//! eight hex digits), then one line per unit in log order (0-based index):
//! `<index> <GO|NO-GO|RECHECK> <score>` (a model of several classes:
//! `<index> <GO|NO-GO|RECHECK> <lead> <class>`, the leading class's name and its lead over
//! the runner-up) or `<index> FAULT ch<channel>`; for a model with
//! signal features also `<index> FAULT signal<k>` (a window refused: a sample out of range,
//! or a window shorter or longer than declared).
//!
//! One path for both kinds of model: a unit is its reading channels' raw readings and one
//! window per signal (none for a model of readings), classified by the kernel's
//! `classify_windows` ([`line()`]); [`replay_log`] reads a bench log or a signal log, as the
//! float model says, and hands each unit's line and vector on.

use crate::release::pack::DeviceModel;
use shared_model::{CheckedModel, ClassSection, Decision, Fault, Inputs, Outcomes, SignalFault};

use std::path::Path;

use crate::error::InputError;
use crate::ingest::dataset::Dataset;
use crate::ingest::{LogOptions, SkipReport};
use crate::train::float_model::FloatModel;

/// The device's line for one unit: its reading channels' raw readings (every channel's,
/// for a model of readings) and one window per signal (none for a model of readings). A
/// refused reading is `FAULT ch<channel>`, a refused window `FAULT signal<k>` (k the
/// signal's index), a wrong reading count `FAULT count`.
pub fn line<I: Inputs, K: Outcomes>(
    index: usize,
    model: &CheckedModel<I, K>,
    readings: &[i32],
    windows: &[&[i32]],
) -> String {
    let mut out = String::new();
    write_line(
        &mut out,
        index,
        &model.classify_windows(readings, windows),
        model.classes(),
    );
    out
}

/// Appends the device's line for the unit at `index` whose classification is `result`
/// (what [`line()`] prints, without the line feed): for callers that classify once and
/// print the line beside other fields. `classes` is the model's class section (`None` for
/// a two-sided model): a decided line then ends with the leading class's name.
pub fn write_line(
    out: &mut String,
    index: usize,
    result: &Result<Decision, SignalFault>,
    classes: Option<&ClassSection>,
) {
    use std::fmt::Write as _;
    // Writing into a String cannot fail.
    let _ = match result {
        Ok(d) => match (classes, d.class) {
            (Some(c), Some(k)) => write!(
                out,
                "{index} {} {} {}",
                d.verdict.as_str(),
                d.score,
                c.name(k)
            ),
            _ => write!(out, "{index} {} {}", d.verdict.as_str(), d.score),
        },
        Err(SignalFault::Reading(Fault::OutOfRange { channel, .. })) => {
            write!(out, "{index} FAULT ch{channel}")
        }
        Err(SignalFault::Reading(Fault::ReadingCount { .. })) => write!(out, "{index} FAULT count"),
        Err(SignalFault::Window { signal, .. }) => write!(out, "{index} FAULT signal{signal}"),
        Err(_) => write!(out, "{index} FAULT other"),
    };
}

/// Replays a log through `model` (decoded from a blob of the float model `fm`) as the
/// device runs it: a bench log for a model of readings, a signal log for a model with
/// signal features. Per unit in log order, `each` gets the device's line ([`line()`]) and
/// the unit's raw readings and windows (for [`vector`]; no windows for a bench log).
///
/// # Errors
/// The log's [`InputError`]: a row (or a unit) that cannot be read, unless skipped into
/// `skipped`.
pub fn replay_log(
    path: &Path,
    opts: &LogOptions,
    fm: &FloatModel,
    model: &DeviceModel,
    skipped: &mut SkipReport,
    mut each: impl FnMut(&str, &[i32], &[Vec<i32>]) + Send,
) -> Result<(), InputError> {
    let mut index = 0usize;
    crate::ingest::stream(path, opts, &fm.channels, &fm.signals, skipped, |u| {
        let windows: Vec<&[i32]> = u.windows.iter().map(Vec::as_slice).collect();
        each(&line(index, model, u.raw, &windows), u.raw, u.windows);
        index += 1;
        Ok(())
    })
}

/// One unit as the example device takes it from its vectors: the reading channels' raw
/// readings, then every signal's window (none for a model of readings), separated by
/// spaces.
pub fn vector(readings: &[i32], windows: &[Vec<i32>]) -> String {
    let row: Vec<String> = readings
        .iter()
        .chain(windows.iter().flatten())
        .map(i32::to_string)
        .collect();
    row.join(" ")
}

/// The first line, `# model <id> blob <blob id>`, with ` key <key id>` for a signed blob,
/// as the device prints it; `blob` is the blob the model came from.
pub fn model_line<I: Inputs, K: Outcomes>(model: &CheckedModel<I, K>, blob: &[u8]) -> String {
    let key = shared_model::blob::signature(blob).map_or(String::new(), |s| {
        format!(" key {}", crate::digest::lower_hex(&s.key_id))
    });
    format!(
        "# model {} blob {:08x}{key}\n",
        crate::digest::lower_hex(&model.model().model_id),
        shared_model::blob::blob_id(blob).unwrap_or(0)
    )
}

/// The model line, then every unit's line of a bench log already read (trailing newline
/// included).
pub fn replay(model: &CheckedModel, ds: &Dataset) -> String {
    let mut out = model_line(model, &crate::release::pack::blob_bytes(model));
    for i in 0..ds.len() {
        out.push_str(&line(i, model, ds.raw_row(i), &[]));
        out.push('\n');
    }
    out
}

/// The raw test vectors for the device build: the model line of the model they were prepared
/// for, then one unit per line, readings separated by spaces.
pub fn vectors(model: &CheckedModel, ds: &Dataset) -> String {
    let mut out = model_line(model, &crate::release::pack::blob_bytes(model));
    for i in 0..ds.len() {
        out.push_str(&vector(ds.raw_row(i), &[]));
        out.push('\n');
    }
    out
}
