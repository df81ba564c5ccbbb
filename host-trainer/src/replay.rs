//! Replay: the shared kernel over a log, printing exactly the lines the device prints.
//!
//! Line format, one per unit in log order (0-based index):
//! `<index> <GO|NO-GO|RECHECK> <score>` or `<index> FAULT ch<channel>`.

use shared_model::{CheckedModel, Fault};

use crate::dataset::Dataset;

/// The device's line for one set of raw readings.
pub fn line(index: usize, model: &CheckedModel, raw: &[i32]) -> String {
    match model.classify(raw) {
        Ok(d) => format!("{index} {} {}", d.verdict.as_str(), d.score),
        Err(Fault::OutOfRange { channel, .. }) => format!("{index} FAULT ch{channel}"),
        Err(Fault::ReadingCount { .. }) => format!("{index} FAULT count"),
    }
}

/// Every unit's line, joined with newlines (trailing newline included).
pub fn replay(model: &CheckedModel, ds: &Dataset) -> String {
    (0..ds.len())
        .map(|i| line(i, model, ds.raw_row(i)) + "\n")
        .collect()
}

/// The raw test vectors, one unit per line, readings separated by spaces (input for the device build).
pub fn vectors(ds: &Dataset) -> String {
    (0..ds.len())
        .map(|i| {
            ds.raw_row(i)
                .iter()
                .map(|r| r.to_string())
                .collect::<Vec<_>>()
                .join(" ")
                + "\n"
        })
        .collect()
}
