//! Rows and their errors: which errors are about one row (skipped and counted under
//! `skip_bad_rows`) and the report of what was skipped.

use std::collections::BTreeMap;

use crate::error::InputError;

/// Rows skipped under `skip_bad_rows`, by reason.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SkipReport {
    /// Rows skipped in all (units, for a signal log: see `unit_rows`).
    pub total: usize,
    /// The rows of the skipped units of a signal log (whose units are skipped whole; each
    /// has at least one row, so zero means rows of a log of one row per unit were skipped).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub unit_rows: usize,
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
    /// Adds the counts of another file's report (a log read from several files); the
    /// examples keep the first few of both.
    pub(crate) fn merge(&mut self, other: &SkipReport) {
        self.total += other.total;
        self.unit_rows += other.unit_rows;
        for (r, n) in &other.by_reason {
            *self.by_reason.entry(r.clone()).or_default() += n;
        }
        for e in &other.examples {
            if self.examples.len() < 5 {
                self.examples.push(e.clone());
            }
        }
        self.empty_rows += other.empty_rows;
        self.empty_columns = self.empty_columns.max(other.empty_columns);
    }

    pub(super) fn add(&mut self, e: &InputError) {
        self.total += 1;
        let reason = match e {
            InputError::Ragged { .. } => "ragged row",
            InputError::Missing { .. } => "empty cell",
            InputError::NotNumeric { .. } => "not a number",
            InputError::RepeatedHeader { .. } => "a repeated header row",
            InputError::NotFinite { .. } => "not finite",
            InputError::BeyondReading { .. } => "beyond the largest reading",
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
    /// Counts a unit of a signal log, of `rows` rows, skipped whole for `e`.
    pub(super) fn add_unit(&mut self, e: &InputError, rows: usize) {
        self.add(e);
        self.unit_rows += rows;
    }

    /// What was skipped, in words with plural forms: `1 unit (10,000,000 rows)` for a
    /// signal log, `3 rows` otherwise.
    pub fn counted(&self) -> String {
        let plural = |n: usize, one: &str, many: &str| {
            format!("{} {}", grouped(n), if n == 1 { one } else { many })
        };
        if self.unit_rows > 0 {
            format!(
                "{} ({})",
                plural(self.total, "unit", "units"),
                plural(self.unit_rows, "row", "rows")
            )
        } else {
            plural(self.total, "row", "rows")
        }
    }

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
            | InputError::RepeatedHeader { .. }
            | InputError::NotFinite { .. }
            | InputError::BeyondReading { .. }
            | InputError::OutOfRange { .. }
            | InputError::UnknownLabel { .. }
            | InputError::LineTooLong { .. }
    )
}

/// `n` with thousands separators (10,000,000).
fn grouped(n: usize) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn skipped_rows_and_units_are_counted_in_words() {
        let e = InputError::NoRows {
            path: "x".into(),
            skipped: String::new(),
        };
        let mut r = SkipReport::default();
        r.add(&e);
        assert_eq!(r.counted(), "1 row");
        r.add(&e);
        assert_eq!(r.counted(), "2 rows");
        let mut u = SkipReport::default();
        u.add_unit(&e, 10_000_000);
        assert_eq!(u.counted(), "1 unit (10,000,000 rows)");
        u.add_unit(&e, 1);
        assert_eq!(u.counted(), "2 units (10,000,001 rows)");
        assert_eq!(grouped(0), "0");
        assert_eq!(grouped(999), "999");
        assert_eq!(grouped(1000), "1,000");
    }
}
