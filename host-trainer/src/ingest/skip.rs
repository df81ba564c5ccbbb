//! Rows and their errors: which errors are about one row (skipped and counted under
//! `skip_bad_rows`) and the report of what was skipped.

use std::collections::BTreeMap;

use crate::error::InputError;

/// Rows skipped under `skip_bad_rows`, by reason.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct SkipReport {
    /// Rows skipped in all.
    pub total: usize,
    /// Count per reason.
    pub by_reason: BTreeMap<String, usize>,
    /// The first few messages, for the user to look at.
    pub examples: Vec<String>,
    /// Rows with no cell filled (blank lines, or only delimiters as spreadsheets export
    /// them): not units, left out and counted.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub empty_rows: usize,
    /// Unnamed columns at the header's end (spreadsheet exports) whose cells are all empty.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub empty_columns: usize,
}

fn is_zero(n: &usize) -> bool {
    *n == 0
}

impl SkipReport {
    pub(super) fn add(&mut self, e: &InputError) {
        self.total += 1;
        let reason = match e {
            InputError::Ragged { .. } => "ragged row",
            InputError::Missing { .. } => "empty cell",
            InputError::NotNumeric { .. } => "not a number",
            InputError::NotFinite { .. } => "not finite",
            InputError::OutOfRange { .. } => "outside valid range",
            InputError::UnknownLabel { .. } => "unknown label",
            InputError::LineTooLong { .. } => "line too long",
            InputError::Signal { .. } => "unit of a signal log not whole",
            _ => "other",
        };
        *self.by_reason.entry(reason.to_string()).or_default() += 1;
        if self.examples.len() < 5 {
            self.examples.push(e.to_string());
        }
    }
}

impl SkipReport {
    /// What a scan does with an error: under `skip_bad_rows` an error about one row is
    /// counted here and the scan goes on; any other error ends it.
    pub(super) fn settle(&mut self, skip_bad_rows: bool, e: InputError) -> Result<(), InputError> {
        if skip_bad_rows && is_row_error(&e) {
            self.add(&e);
            Ok(())
        } else {
            Err(e)
        }
    }
}

pub(super) fn is_row_error(e: &InputError) -> bool {
    matches!(
        e,
        InputError::Ragged { .. }
            | InputError::Missing { .. }
            | InputError::NotNumeric { .. }
            | InputError::NotFinite { .. }
            | InputError::OutOfRange { .. }
            | InputError::UnknownLabel { .. }
            | InputError::LineTooLong { .. }
    )
}
