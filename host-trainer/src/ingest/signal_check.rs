//! One unit of a signal log taken row by row: its sample numbers counted (gaps, repeats),
//! each signal's cells appended to its window, and the label and readings checked to stay
//! the same over the unit's rows. The first fault is the unit's; `signal_units` decides
//! whether it ends the read or skips the unit.

use std::path::Path;

use crate::error::{InputError, Place, shown, shown_bytes};
use crate::ingest::classes::Classes;
use crate::ingest::options::{LogOptions, is_reading, unmapped_label_hint};
use crate::ingest::parse::{empty_label_hint, label_cell, parse_number};
use crate::ingest::signal_columns::Columns;
use crate::ingest::signal_scale::SignalScale;

/// Said where a training log refuses a unit whose window the device would refuse: a log
/// evaluated by a model keeps it as a FAULT unit instead.
pub(super) const TRAINING_REFUSES: &str = " (a log read to train refuses such a unit; a holdout, audited or replayed log keeps it as a FAULT unit, as the device refuses it)";

/// The unit being read.
#[derive(Default)]
pub(super) struct Open {
    pub(super) id: String,
    pub(super) rows: usize,
    pub(super) label: Option<i8>,
    pub(super) readings: Vec<Option<f64>>,
    pub(super) windows: Vec<Vec<i32>>,
    /// The unit's row of each window's first sample (not 0 after `take = "last"`).
    pub(super) firsts: Vec<usize>,
    pub(super) lines: Vec<u64>,
    pub(super) first_sample: Option<i64>,
    pub(super) time: Option<String>,
    /// The first fault, kept while the rest of the unit's rows are passed over (only under
    /// `skip_bad_rows`).
    pub(super) fault: Option<InputError>,
}

impl Open {
    pub(super) fn start(&mut self, id: &str, _line: u64, signals: usize, readings: usize) {
        self.id.clear();
        self.id.push_str(id);
        self.rows = 0;
        self.label = None;
        self.readings.clear();
        self.readings.resize(readings, None);
        self.windows.resize_with(signals, Vec::new);
        self.windows.iter_mut().for_each(Vec::clear);
        self.firsts.clear();
        self.firsts.resize(signals, 0);
        self.lines.clear();
        self.first_sample = None;
        self.time = None;
        self.fault = None;
    }

    /// Takes one row of the unit; `Err` is the message of the unit's fault. `keep`: keep
    /// windows of any length (see [`stream_signal_units`]).
    #[allow(clippy::too_many_arguments)]
    pub(super) fn row(
        &mut self,
        record: &csv::ByteRecord,
        cols: &Columns,
        signals: &[SignalScale],
        longest: usize,
        keep: bool,
        decimal_comma: bool,
        classes: &Classes,
        opts: &LogOptions,
    ) -> Result<(), String> {
        let k = self.rows;
        // A unit may run on only where a signal takes part of a longer window; a wide
        // row's trailing empty cells are checked signal by signal below.
        if k >= longest && !keep && !cols.row_per_unit && signals.iter().all(|s| s.take.is_none()) {
            return Err(format!(
                "over-long window: more than {longest} rows (the longest window is {longest} samples); is a unit id missing or repeated?{} If the station records longer windows, declare `take = \"first\"` or `take = \"last\"` in the [[signal]] to use the first or last samples{TRAINING_REFUSES}",
                cols.one_unit_note()
            ));
        }
        let text = shown_bytes;
        if let Some(c) = cols.sample {
            let cell = record[c].trim_ascii();
            let v = std::str::from_utf8(cell)
                .ok()
                .and_then(|t| t.parse::<i64>().ok())
                .ok_or_else(|| {
                    format!(
                        "column '{}': '{}' is not a sample number (a whole number counting the unit's rows)",
                        cols.names[c],
                        text(cell)
                    )
                })?;
            let base = *self.first_sample.get_or_insert(v);
            if k == 0 && !(v == 0 || v == 1) {
                return Err(format!(
                    "column '{}': the unit's first sample is numbered {v}; number samples from 0 (or 1)",
                    cols.names[c]
                ));
            }
            let want = base + k as i64;
            if v > want {
                return Err(format!(
                    "gap: sample {want} is missing (the row holds sample {v}, column '{}')",
                    cols.names[c]
                ));
            }
            if v < want {
                return Err(format!(
                    "sample {v} comes again or out of order (expected {want}, column '{}')",
                    cols.names[c]
                ));
            }
        }
        for ((j, s), w) in signals.iter().enumerate().zip(self.windows.iter_mut()) {
            let c = cols.signals[j];
            let cell = record[c].trim_ascii();
            let n = usize::from(s.window);
            // Where faults are kept a window may end early or run on: its samples are the
            // non-empty cells from the unit's first row on, without a gap.
            if cell.is_empty() {
                if k < n && !keep {
                    return Err(format!(
                        "gap: signal '{}' has no sample {k} (0-based; an empty cell){}",
                        s.name,
                        cols.sample_column(j, k)
                    ));
                }
                continue;
            }
            if k >= n && !keep && s.take.is_none() {
                return Err(format!(
                    "over-long window: signal '{}' has a sample {k} (0-based){}, beyond its window of {n} samples; leave its cells empty after the window, or declare `take = \"first\"` or `take = \"last\"` in its [[signal]] to use its first or last {n} samples{}{TRAINING_REFUSES}",
                    s.name,
                    cols.sample_column(j, k),
                    cols.one_unit_note()
                ));
            }
            if w.len() != k {
                return Err(format!(
                    "gap: signal '{}' has no sample {} (0-based; an empty cell), but a sample {k}",
                    s.name,
                    w.len()
                ));
            }
            let v = parse_number(cell, decimal_comma)
                .filter(|&v| is_reading(v))
                .ok_or_else(|| {
                    format!(
                        "signal '{}', sample {k} (0-based){}: '{}' is not a finite number",
                        s.name,
                        cols.sample_column(j, k),
                        text(cell)
                    )
                })?;
            w.push(s.raw_sample(v));
        }
        if let Some(c) = cols.label {
            let cell = record[c].trim_ascii();
            if !(k > 0 && cell.is_empty()) {
                let l = label_cell(
                    cell,
                    classes,
                    opts,
                    Path::new(""),
                    Place::Line(0),
                    &cols.names[c],
                )
                .map_err(|_| match unmapped_label_hint(cell) {
                    _ if cell.is_empty() => format!(
                        "column '{}': the label cell is empty on the unit's first row; {}",
                        shown(&cols.names[c]),
                        empty_label_hint(opts)
                    ),
                    Some(hint) => {
                        format!("column '{}': label '{}': {hint}", cols.names[c], text(cell))
                    }
                    None => format!(
                        "column '{}': unknown label '{}' ({}; {})",
                        cols.names[c],
                        text(cell),
                        classes.tokens(),
                        classes.how_to_map()
                    ),
                })?;
                match self.label {
                    Some(prev) if prev != l => {
                        return Err(format!(
                            "column '{}': the label changes within the unit (row {k} of the unit); a unit has one verdict",
                            cols.names[c]
                        ));
                    }
                    _ => self.label = Some(l),
                }
            }
        }
        for (r, &c) in self.readings.iter_mut().zip(&cols.readings) {
            let cell = record[c].trim_ascii();
            if k > 0 && cell.is_empty() {
                continue;
            }
            if cell.is_empty() {
                return Err(format!("column '{}': empty cell", cols.names[c]));
            }
            let v = parse_number(cell, decimal_comma)
                .filter(|&v| is_reading(v))
                .ok_or_else(|| {
                    format!(
                        "column '{}': '{}' is not a finite number",
                        cols.names[c],
                        text(cell)
                    )
                })?;
            match *r {
                Some(prev) if prev != v => {
                    return Err(format!(
                        "column '{}': the reading changes within the unit ({prev} on its first row, {v} here); a reading channel holds one value per unit",
                        cols.names[c]
                    ));
                }
                _ => *r = Some(v),
            }
        }
        Ok(())
    }
}
