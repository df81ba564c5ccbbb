//! Signal logs: one row per sample, a window of samples per unit, reduced to feature channels
//! by the device's own integer code.
//!
//! The layout a test station exports with a loop over its buffers: a unit-id column, one
//! column per signal (physical values, converted to raw counts by the signal's `lsb` and
//! `zero`), and on the same rows the unit's label and any reading channels. The rows of a
//! unit are together and in sample order; a unit has as many rows as its longest window,
//! and a signal with a shorter window leaves its cells empty after its last sample. An
//! optional `sample` column numbers the rows of each unit from 0 (or 1) and catches gaps.
//! The label and reading cells repeat on every row of a unit, or are left empty after its
//! first row.
//!
//! ```text
//! unit_id,sample,vibration,current,temperature,label
//! FM-0001,0,0.012,1.204,31.5,GO
//! FM-0001,1,-0.034,1.198,,
//! …
//! FM-0001,255,0.021,1.207,,
//! FM-0002,0,0.140,1.420,33.0,NO-GO
//! …
//! ```
//!
//! Each unit is checked whole: a gap, an empty or non-numeric sample, a label or reading
//! that changes within the unit, and a unit whose rows appear in two places are errors
//! naming the line, unit, column and sample; under `--skip-bad-rows` a unit with such a
//! fault is skipped whole and counted (a unit split in two places still ends the read: its
//! rows cannot be told apart). A short or over-long window is such an error in a training
//! log; a log read for a model keeps it, as the device's kernel refuses it (see [`ReadFor`]).
//!
//! Features are computed with [`CheckedFeature::compute`], the function the device runs,
//! so training, audit, replay and the device see the same integers.

use std::collections::HashMap;
use std::path::Path;

use shared_model::WindowFault;
use shared_model::features::CheckedFeature;

use crate::error::{InputError, Place};
use crate::error::{shell_word, shown, shown_bytes};
use crate::ingest::dataset::Dataset;
use crate::ingest::header::{detect_delimiter, find};
use crate::ingest::names::{same_name, unique_names};
use crate::ingest::options::{
    LABEL_NAMES, LogOptions, TIME_NAMES, UNIT_NAMES, is_reading, unmapped_label_hint,
};
use crate::ingest::parse::{empty_label_hint, label_cell, parse_number};
use crate::ingest::read::{checked_classes, spread_checked};
use crate::ingest::scaling::{ChannelScale, ChannelSheet};
use crate::ingest::signal_scale::SignalScale;
use crate::ingest::signal_source::{Hashing, csv_error, read_error};
use crate::ingest::skip::SkipReport;

/// Said where a training log refuses a unit whose window the device would refuse: a log
/// evaluated by a model keeps it as a FAULT unit instead.
const TRAINING_REFUSES: &str = " (a log read to train refuses such a unit; a holdout, audited or replayed log keeps it as a FAULT unit, as the device refuses it)";

/// Names of the optional column that numbers a unit's samples.
pub const SAMPLE_NAMES: &[&str] = &["sample", "sample_index"];

/// One whole unit of a signal log.
pub struct SignalUnit<'a> {
    /// The unit id.
    pub id: &'a str,
    /// 1-based line of the unit's first row.
    pub line: u64,
    /// +1 GO, −1 NO-GO, 0 when the log has no label column.
    pub label: i8,
    /// The reading channels' values (physical), in the order the reader was given.
    pub readings: &'a [f64],
    /// Each signal's window of raw samples, in the order of the signals.
    pub windows: &'a [Vec<i32>],
    /// The line of each row of the unit (sample `k` of any signal is on `lines[k]`).
    pub lines: &'a [u64],
    /// The timestamp cell of its first row, when asked for and present.
    pub time: Option<&'a str>,
}

impl SignalUnit<'_> {
    /// The error for this unit at row `k` (its line), naming the unit.
    pub fn error(&self, k: usize, path: &Path, message: String) -> InputError {
        InputError::Signal {
            path: path.into(),
            line: self.lines.get(k).copied().unwrap_or(self.line),
            unit: self.id.to_string(),
            message,
        }
    }
}

/// What the reader found in the header.
pub struct SignalLogHeader {
    /// Reading channels, in log column order (or the order asked for).
    pub readings: Vec<String>,
    /// SHA-256 of the file, when asked for (else empty).
    pub sha256: String,
}

/// The unit being read.
#[derive(Default)]
struct Open {
    id: String,
    rows: usize,
    label: Option<i8>,
    readings: Vec<Option<f64>>,
    windows: Vec<Vec<i32>>,
    lines: Vec<u64>,
    first_sample: Option<i64>,
    time: Option<String>,
    /// The first fault, kept while the rest of the unit's rows are passed over (only under
    /// `skip_bad_rows`).
    fault: Option<InputError>,
}

/// Reads a signal log, calling `each` on every whole unit in file order.
///
/// `read_for` decides the reading channels and what becomes of a window the device would
/// refuse (see [`ReadFor`]). Errors of one unit returned by `each` (an
/// [`InputError::Signal`]) skip the unit under `opts.skip_bad_rows`, as the reader's own.
///
/// # Errors
/// I/O, a missing column, a column that is no declared channel (training), a unit that is
/// not whole (see the module documentation).
pub fn stream_signal_units(
    path: &Path,
    opts: &LogOptions,
    signals: &[SignalScale],
    read_for: ReadFor<'_>,
    skipped: &mut SkipReport,
    mut each: impl FnMut(&SignalUnit<'_>) -> Result<(), InputError>,
) -> Result<SignalLogHeader, InputError> {
    crate::input::regular_file(path)?;
    if crate::ingest::parquet::is_parquet(path) {
        return Err(InputError::Format {
            path: path.into(),
            message: "a signal log is read from delimited text (one row per sample); export it as CSV or TSV".into(),
        });
    }
    let file = std::fs::File::open(path).map_err(|e| InputError::io(path, e))?;
    let mut source = std::io::BufReader::with_capacity(
        1 << 16,
        Hashing::new(file, opts.digest, opts.max_line_len),
    );
    let delimiter = match opts.delimiter {
        Some(d) => d,
        None => {
            let tsv = path
                .extension()
                .is_some_and(|e| e.eq_ignore_ascii_case("tsv") || e.eq_ignore_ascii_case("tab"));
            let head =
                std::io::BufRead::fill_buf(&mut source).map_err(|e| read_error(path, opts, e))?;
            let first = head.split(|&b| b == b'\n').next().unwrap_or_default();
            if tsv { b'\t' } else { detect_delimiter(first) }
        }
    };
    let decimal_comma = opts.decimal_comma.unwrap_or(delimiter != b',');
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(true)
        .flexible(true)
        .from_reader(&mut source);
    let names: Vec<String> = match rdr.byte_headers() {
        Ok(h) if h.iter().any(|n| !n.is_empty()) => h
            .iter()
            .map(|n| String::from_utf8_lossy(n).trim().to_string())
            .collect(),
        Ok(_) => return Err(InputError::Empty { path: path.into() }),
        Err(e) => return Err(csv_error(path, opts, e)),
    };
    let cols = Columns::resolve(path, &names, opts, signals, &read_for)?;
    let keep_faults = matches!(read_for, ReadFor::Model { .. });
    let width = names.len();
    let mut open = Open::default();
    let mut seen: HashMap<String, u64> = HashMap::new();
    let longest = signals
        .iter()
        .map(|s| usize::from(s.window))
        .max()
        .unwrap_or(0);
    let mut record = csv::ByteRecord::new();
    let mut any = false;
    loop {
        let more = rdr
            .read_byte_record(&mut record)
            .map_err(|e| csv_error(path, opts, e))?;
        if !more {
            break;
        }
        let line = record.position().map_or(0, |p| p.line());
        if record.iter().all(|f| f.trim_ascii().is_empty()) {
            // A blank row (a spreadsheet's trailing line) belongs to no unit.
            continue;
        }
        if record.len() != width {
            return Err(InputError::Ragged {
                hint: String::new(),
                path: path.into(),
                line,
                expected: width,
                found: record.len(),
            });
        }
        let id = String::from_utf8_lossy(record[cols.unit].trim_ascii());
        if id.is_empty() {
            return Err(InputError::Missing {
                path: path.into(),
                at: Place::Line(line),
                column: names[cols.unit].clone(),
                hint: "every row of a signal log needs its unit's id; fill it in, or skip the unit with --skip-bad-rows".into(),
            });
        }
        if !any || id != open.id.as_str() {
            if any {
                finish(
                    path,
                    opts,
                    &cols,
                    signals,
                    longest,
                    keep_faults,
                    &mut open,
                    skipped,
                    &mut each,
                )?;
            }
            if let Some(first) = seen.insert(id.to_string(), line) {
                return Err(InputError::Signal {
                    path: path.into(),
                    line,
                    unit: id.into_owned(),
                    message: format!(
                        "the unit's rows appear again after other units (it began on line {first}); keep the rows of a unit together, in sample order"
                    ),
                });
            }
            open.start(&id, line, signals.len(), cols.readings.len());
            any = true;
        }
        if open.fault.is_none()
            && let Err(message) = open.row(
                &record,
                &cols,
                signals,
                longest,
                keep_faults,
                decimal_comma,
                opts,
            )
        {
            let e = InputError::Signal {
                path: path.into(),
                line,
                unit: open.id.clone(),
                message,
            };
            if !opts.skip_bad_rows {
                return Err(e);
            }
            open.fault = Some(e);
        }
        open.lines.push(line);
        open.rows += 1;
        if opts.keep_times
            && open.rows == 1
            && let Some(t) = cols.time
        {
            open.time = Some(String::from_utf8_lossy(record[t].trim_ascii()).into_owned());
        }
    }
    if any {
        finish(
            path,
            opts,
            &cols,
            signals,
            longest,
            keep_faults,
            &mut open,
            skipped,
            &mut each,
        )?;
    }
    drop(rdr);
    let sha256 = source.into_inner().sha256();
    Ok(SignalLogHeader {
        readings: cols.readings.iter().map(|&i| names[i].clone()).collect(),
        sha256,
    })
}

/// Ends the open unit: checks it is whole, then hands it to `each` (or counts it skipped).
#[allow(clippy::too_many_arguments)]
fn finish(
    path: &Path,
    opts: &LogOptions,
    cols: &Columns,
    signals: &[SignalScale],
    longest: usize,
    keep_faults: bool,
    open: &mut Open,
    skipped: &mut SkipReport,
    each: &mut impl FnMut(&SignalUnit<'_>) -> Result<(), InputError>,
) -> Result<(), InputError> {
    let last = open.lines.last().copied().unwrap_or(0);
    let fault = open.fault.take().or_else(|| {
        (open.rows < longest && !keep_faults).then(|| {
            let short: Vec<String> = signals
                .iter()
                .filter(|s| usize::from(s.window) > open.rows)
                .map(|s| format!("'{}' needs {}", s.name, s.window))
                .collect();
            InputError::Signal {
                path: path.into(),
                line: last,
                unit: open.id.clone(),
                message: format!(
                    "short window: the unit has {} rows ({}){TRAINING_REFUSES}",
                    open.rows,
                    short.join(", ")
                ),
            }
        })
    });
    let result = match fault {
        Some(e) => Err(e),
        None => {
            let readings: Vec<f64> = open.readings.iter().map(|r| r.unwrap_or(0.0)).collect();
            let unit = SignalUnit {
                id: &open.id,
                line: open.lines.first().copied().unwrap_or(0),
                label: if cols.label.is_some() {
                    open.label.unwrap_or(0)
                } else {
                    0
                },
                readings: &readings,
                windows: &open.windows,
                lines: &open.lines,
                time: open.time.as_deref(),
            };
            each(&unit)
        }
    };
    match result {
        Err(e @ InputError::Signal { .. }) if opts.skip_bad_rows => {
            skipped.add_unit(&e, open.rows);
            Ok(())
        }
        r => r,
    }
}

impl Open {
    fn start(&mut self, id: &str, _line: u64, signals: usize, readings: usize) {
        self.id.clear();
        self.id.push_str(id);
        self.rows = 0;
        self.label = None;
        self.readings.clear();
        self.readings.resize(readings, None);
        self.windows.resize_with(signals, Vec::new);
        self.windows.iter_mut().for_each(Vec::clear);
        self.lines.clear();
        self.first_sample = None;
        self.time = None;
        self.fault = None;
    }

    /// Takes one row of the unit; `Err` is the message of the unit's fault. `keep`: keep
    /// windows of any length (see [`stream_signal_units`]).
    #[allow(clippy::too_many_arguments)]
    fn row(
        &mut self,
        record: &csv::ByteRecord,
        cols: &Columns,
        signals: &[SignalScale],
        longest: usize,
        keep: bool,
        decimal_comma: bool,
        opts: &LogOptions,
    ) -> Result<(), String> {
        let k = self.rows;
        if k >= longest && !keep {
            return Err(format!(
                "over-long window: more than {longest} rows (the longest window is {longest} samples); is a unit id missing or repeated?{TRAINING_REFUSES}"
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
                        "gap: signal '{}' has no sample {k} (0-based; an empty cell)",
                        s.name
                    ));
                }
                continue;
            }
            if k >= n && !keep {
                return Err(format!(
                    "over-long window: signal '{}' has a sample {k} (0-based), beyond its window of {n} samples; leave its cells empty after the window{TRAINING_REFUSES}",
                    s.name
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
                        "signal '{}', sample {k} (0-based): '{}' is not a finite number",
                        s.name,
                        text(cell)
                    )
                })?;
            w.push(s.raw_sample(v));
        }
        if let Some(c) = cols.label {
            let cell = record[c].trim_ascii();
            if !(k > 0 && cell.is_empty()) {
                let l = label_cell(cell, opts, Path::new(""), Place::Line(0), &cols.names[c])
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
                            "column '{}': unknown label '{}' ({}; set --go-labels / --nogo-labels)",
                            cols.names[c],
                            text(cell),
                            opts.tokens()
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

/// What a signal log is read for: its reading channels, and what becomes of a unit whose
/// window the device would refuse.
pub enum ReadFor<'a> {
    /// Training or a check, with a sheet: the reading channels are `--channels` when given,
    /// else the columns the sheet declares (`[[channel]]`); any other column that is not the
    /// unit id, label, sample number, timestamp or a signal is refused (unless left out with
    /// `--ignore`), since it would be taken for a reading. A window the device would refuse
    /// is an error.
    Training {
        /// The reading channels the sheet declares.
        declared: &'a [String],
        /// The feature channels the sheet declares, counted with the readings against the
        /// device's capacity as soon as the header is read.
        features: usize,
    },
    /// Evaluation by a model (holdout, audit, replay): its reading channels, every other
    /// column passed over. A window shorter or longer than its signal's is handed on as it
    /// is, so that the kernel refuses it (a FAULT unit), as it refuses a sample out of range.
    Model {
        /// The model's reading channels, in model order.
        readings: &'a [String],
    },
}

/// Where each kind of column is.
struct Columns {
    names: Vec<String>,
    unit: usize,
    label: Option<usize>,
    sample: Option<usize>,
    time: Option<usize>,
    signals: Vec<usize>,
    readings: Vec<usize>,
}

impl Columns {
    fn resolve(
        path: &Path,
        names: &[String],
        opts: &LogOptions,
        signals: &[SignalScale],
        read_for: &ReadFor<'_>,
    ) -> Result<Self, InputError> {
        unique_names(path, names)?;
        let unknown = |name: &str| InputError::UnknownColumn {
            path: path.into(),
            name: name.to_string(),
            columns: names.join(", "),
        };
        let pick = |given: &Option<String>, defaults: &[&str]| match given {
            Some(n) => find(names, n).map(Some).ok_or_else(|| unknown(n)),
            None => Ok(defaults.iter().find_map(|d| find(names, d))),
        };
        let unit = pick(&opts.unit_id, UNIT_NAMES)?.ok_or_else(|| InputError::Format {
            path: path.into(),
            message: format!(
                "a signal log needs a unit-id column to tell one unit's rows from the next (looked for: {}; name it with --unit-id)",
                UNIT_NAMES.join(", ")
            ),
        })?;
        let label = pick(&opts.label, LABEL_NAMES)?;
        if label.is_none() && !opts.label_optional {
            return Err(InputError::NoLabel {
                path: path.into(),
                hint: String::new(),
            });
        }
        let time = pick(&opts.timestamp, TIME_NAMES)?;
        let signals = signals
            .iter()
            .map(|s| find(names, &s.name).ok_or_else(|| unknown(&s.name)))
            .collect::<Result<Vec<_>, _>>()?;
        // A signal named like the sample-number column is a signal.
        let sample = pick(&None, SAMPLE_NAMES)?.filter(|i| !signals.contains(i));
        let taken = |i: usize| {
            i == unit
                || Some(i) == label
                || Some(i) == sample
                || Some(i) == time
                || signals.contains(&i)
        };
        let (wanted, declared, features) = match *read_for {
            ReadFor::Model { readings } => (Some(readings.to_vec()), &[][..], 0),
            ReadFor::Training { declared, features } => (opts.channels.clone(), declared, features),
        };
        let readings = match wanted {
            Some(list) => list
                .iter()
                .map(|n| find(names, n).ok_or_else(|| unknown(n)))
                .collect::<Result<Vec<_>, _>>()?,
            None => {
                let (readings, other): (Vec<usize>, Vec<usize>) = (0..names.len())
                    .filter(|&i| {
                        !taken(i)
                            && !names[i].is_empty()
                            && !opts.ignore.iter().any(|g| same_name(g, &names[i]))
                    })
                    .partition(|&i| declared.iter().any(|d| same_name(d, &names[i])));
                if !other.is_empty() {
                    let role = |what: &str, c: Option<usize>| {
                        c.map(|c| format!(", {what} '{}'", names[c]))
                            .unwrap_or_default()
                    };
                    return Err(undeclared_columns(
                        path,
                        other.iter().map(|&i| names[i].as_str()).collect(),
                        format!(
                            "unit id '{}'{}{}{}",
                            names[unit],
                            role("sample number", sample),
                            role("label", label),
                            role("timestamp", time),
                        ),
                    ));
                }
                readings
            }
        };
        if let Some(&i) = readings.iter().find(|&&i| taken(i)) {
            return Err(InputError::Format {
                path: path.into(),
                message: format!(
                    "column '{}' is asked for as a reading channel but is the unit id, label, sample number, timestamp or a signal",
                    names[i]
                ),
            });
        }
        let count = readings.len() + features;
        if count > shared_model::MAX_CHANNELS {
            return Err(InputError::TooManyChannels {
                path: path.into(),
                count,
                detail: format!(
                    " ({} reading columns and {features} features of the sheet)",
                    readings.len()
                ),
                max: shared_model::MAX_CHANNELS,
                hint: "declare fewer [[feature]] entries, or choose the readings with --channels",
            });
        }
        Ok(Self {
            names: names.to_vec(),
            unit,
            label,
            sample,
            time,
            signals,
            readings,
        })
    }
}

/// The refusal of columns a training signal log would take for readings although the sheet
/// declares none of them: a signal log's reading is one number per unit, so such a column
/// (a time in seconds, an operator's note) would otherwise fail as a reading that changes
/// within the unit, or enter the model unannounced. `recognised` lists the columns taken by
/// role, so that a timestamp taken (or not taken) by its name is seen.
fn undeclared_columns(path: &Path, columns: Vec<&str>, recognised: String) -> InputError {
    let quoted: Vec<String> = columns.iter().map(|c| format!("'{}'", shown(c))).collect();
    let like_time: Vec<&str> = columns
        .iter()
        .copied()
        .filter(|c| {
            let c = c.to_ascii_lowercase();
            TIME_NAMES.iter().any(|t| c.starts_with(t))
        })
        .collect();
    let time_hint = match like_time.first() {
        Some(t) => format!(
            "; if '{}' is the timestamp, name it with --timestamp {} (by name only {} are taken)",
            shown(t),
            shell_word(t),
            TIME_NAMES.join(", ")
        ),
        None => String::new(),
    };
    InputError::Format {
        path: path.into(),
        message: format!(
            "line 1: column{} {} {} neither a signal, a reading channel the sheet declares ([[channel]]), the unit id, label, sample number nor timestamp (recognised: {recognised}); leave {} out with --ignore {}, declare {} in the sheet, or choose the reading channels with --channels{time_hint}",
            if columns.len() == 1 { "" } else { "s" },
            quoted.join(", "),
            if columns.len() == 1 { "is" } else { "are" },
            if columns.len() == 1 { "it" } else { "them" },
            shell_word(&columns.join(",")),
            if columns.len() == 1 { "it" } else { "them" },
        ),
    }
}

/// Where a signal log's channels come from.
pub enum SignalChannels<'a> {
    /// A channel sheet with signals: its features, and every other column as a reading
    /// channel (scaled by the sheet where declared, else by the observed range).
    Sheet(&'a ChannelSheet),
    /// A trained model's channels and signals (audit, holdout).
    Model {
        /// The model's channels, readings and features, in model order.
        channels: &'a [ChannelScale],
        /// The model's signals.
        signals: &'a [SignalScale],
    },
}

/// The refusal of a window, as an error of its unit naming the signal and sample.
pub fn window_error(
    path: &Path,
    unit: &SignalUnit<'_>,
    signal: &SignalScale,
    fault: WindowFault,
) -> InputError {
    match fault {
        WindowFault::OutOfRange { index, raw } => unit.error(
            usize::from(index),
            path,
            format!(
                "signal '{}', sample {index} (0-based): raw {raw} is outside the signal's valid samples [{}, {}]{TRAINING_REFUSES}",
                signal.name, signal.raw_min, signal.raw_max
            ),
        ),
        WindowFault::Length { expected, got } => unit.error(
            0,
            path,
            format!(
                "signal '{}': {got} samples where the window is {expected}{TRAINING_REFUSES}",
                signal.name
            ),
        ),
    }
}

/// Reads a signal log into a [`Dataset`] whose channels are the readings and the features
/// (each unit's feature values computed by the shared integer code).
///
/// # Errors
/// As [`stream_signal_units`]; too few units. In a training log (a sheet's channels) a
/// window the device would refuse (a sample outside its signal's valid range, a window
/// shorter or longer than declared) or a reading outside its channel's range is an error;
/// in a log read for a model the unit is kept as the FAULT the device gives.
pub fn read_signal_log(
    path: &Path,
    opts: &LogOptions,
    from: SignalChannels<'_>,
) -> Result<Dataset, InputError> {
    // Where the signals, the feature channels and the reading channels' scaling come from.
    let (signals, features, model, sheet) = match from {
        SignalChannels::Sheet(s) => (&s.signals[..], s.features.clone(), None, Some(s)),
        SignalChannels::Model { channels, signals } => (
            signals,
            channels
                .iter()
                .filter(|c| c.source.is_some())
                .cloned()
                .collect(),
            Some(channels),
            None,
        ),
    };
    // The feature channels, each with its signal's index and its proved computation.
    let computed = features
        .iter()
        .map(|c| {
            let src = c
                .source
                .as_ref()
                .ok_or_else(|| log_error(path, "a feature channel has no source"))?;
            let j = signals
                .iter()
                .position(|s| s.name == src.signal)
                .ok_or_else(|| log_error(path, &format!("no signal '{}'", src.signal)))?;
            let f = src.checked(&signals[j]).map_err(|m| log_error(path, &m))?;
            Ok((j, f))
        })
        .collect::<Result<Vec<(usize, CheckedFeature)>, InputError>>()?;
    let reading_names: Vec<String> = match (model, sheet) {
        (Some(ch), _) => reading_channels(ch)
            .map(|c| c.log_column().into())
            .collect(),
        (None, Some(s)) => s.channels.iter().map(|c| c.log_column().into()).collect(),
        (None, None) => Vec::new(),
    };
    let mut skipped = SkipReport::default();
    let (mut physical, mut values, mut labels, mut lines) =
        (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    let (mut ids, mut times) = (Vec::<String>::new(), Vec::<String>::new());
    let mut unit_rows = Vec::new();
    let mut row = Vec::with_capacity(computed.len());
    // Each signal's lowest and highest raw sample, to say why a feature may be constant.
    let mut sample_ranges = vec![(i32::MAX, i32::MIN); signals.len()];
    // A log read for a model keeps the units the device refuses, as FAULT units.
    let keep_faults = model.is_some();
    let header = stream_signal_units(
        path,
        opts,
        signals,
        if keep_faults {
            ReadFor::Model {
                readings: &reading_names,
            }
        } else {
            ReadFor::Training {
                declared: &reading_names,
                features: computed.len(),
            }
        },
        &mut skipped,
        |u| {
            if ids.len() >= opts.max_rows {
                return Err(InputError::TooManyRows {
                    path: path.into(),
                    max: opts.max_rows,
                });
            }
            row.clear();
            for (&(j, f), c) in computed.iter().zip(&features) {
                let w = u.windows.get(j).map_or(&[][..], Vec::as_slice);
                row.push(match (f.compute(w), keep_faults) {
                    (Ok(v), _) => v,
                    // The device refuses the window: the unit is a FAULT, as one with a
                    // reading out of range is (a count the kernel refuses on that channel).
                    (Err(e), true) => {
                        refused_count(c).ok_or_else(|| window_error(path, u, &signals[j], e))?
                    }
                    (Err(e), false) => return Err(window_error(path, u, &signals[j], e)),
                });
            }
            for (r, w) in sample_ranges.iter_mut().zip(u.windows.iter()) {
                for &x in w {
                    *r = (r.0.min(x), r.1.max(x));
                }
            }
            values.extend_from_slice(&row);
            physical.extend_from_slice(u.readings);
            labels.push(u.label);
            lines.push(u.line);
            unit_rows.push(u.lines.len());
            ids.push(u.id.to_string());
            if let Some(t) = u.time {
                times.push(t.to_string());
            }
            Ok(())
        },
    )?;
    let nr = header.readings.len();
    // Reading channels' scaling: the model's; else the sheet's, or the observed range.
    let reading_scales: Vec<ChannelScale> = match model {
        Some(ch) => reading_channels(ch).cloned().collect(),
        None => header
            .readings
            .iter()
            .enumerate()
            .map(|(r, name)| match sheet.and_then(|s| s.get(name)) {
                Some(s) => Ok(s.clone()),
                None => {
                    let (lo, hi) = physical
                        .iter()
                        .skip(r)
                        .step_by(nr.max(1))
                        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
                            (a.min(v), b.max(v))
                        });
                    spread_checked(path, name, lo, hi, || {
                        format!(
                            "drop it with --ignore {} or declare its range in the sheet",
                            shell_word(name)
                        )
                    })?;
                    ChannelScale::observed(name, lo, hi).map_err(|m| log_error(path, &m))
                }
            })
            .collect::<Result<_, _>>()?,
    };
    // Channel order: the model's; for a sheet, the readings then the features.
    let order: Vec<ChannelScale> = match model {
        Some(ch) => ch.to_vec(),
        None => reading_scales.iter().chain(&features).cloned().collect(),
    };
    let mut ds = Dataset::empty(path, order);
    ds.signals = signals.to_vec();
    ds.sha256 = header.sha256;
    let nf = computed.len();
    let mut raw_readings = vec![0i32; nr];
    'units: for i in 0..labels.len() {
        for (r, s) in reading_scales.iter().enumerate() {
            let v = physical[i * nr + r];
            match s.to_raw(v) {
                Some(x) => raw_readings[r] = x,
                // As the device reads it: the kernel FAULTs the unit.
                None if keep_faults => raw_readings[r] = s.raw_reading(v),
                None => {
                    let e = InputError::OutOfRange {
                        path: path.into(),
                        at: Place::Line(lines[i]),
                        column: s.name.clone(),
                        value: v,
                        min: s.min,
                        max: s.max,
                    };
                    if opts.skip_bad_rows {
                        skipped.add_unit(&e, unit_rows[i]);
                        continue 'units;
                    }
                    return Err(e);
                }
            }
        }
        let feats = &values[i * nf..(i + 1) * nf];
        let (mut next_r, mut next_f) = (raw_readings.iter(), feats.iter());
        for c in &ds.scales {
            let v = if c.source.is_some() {
                next_f.next()
            } else {
                next_r.next()
            };
            ds.raw.push(v.copied().unwrap_or(0));
        }
        ds.labels.push(labels[i]);
        ds.lines.push(lines[i]);
        ds.unit_ids.push(ids[i].as_bytes());
        if let Some(t) = times.get(i) {
            ds.times.push(t.as_bytes());
        }
    }
    ds.skipped = skipped;
    if !keep_faults && !ds.is_empty() {
        constant_features(path, &ds, &computed, signals, &sample_ranges)?;
    }
    // The rule a plain log follows: no units, or one class for training, is refused.
    checked_classes(path, ds, keep_faults)
}

/// Refuses a feature channel whose every unit of a training log has the same value, as a
/// constant plain channel is refused; the message says whether its signal's samples were
/// all one count (an lsb far too large, a stuck sensor) or the feature alone is constant.
fn constant_features(
    path: &Path,
    ds: &Dataset,
    computed: &[(usize, CheckedFeature)],
    signals: &[SignalScale],
    sample_ranges: &[(i32, i32)],
) -> Result<(), InputError> {
    let d = ds.dim();
    let mut features = computed.iter();
    for (k, c) in ds.scales.iter().enumerate() {
        let Some(src) = &c.source else { continue };
        let Some(&(j, _)) = features.next() else {
            break;
        };
        let (lo, hi) = ds
            .raw
            .iter()
            .skip(k)
            .step_by(d.max(1))
            .fold((i32::MAX, i32::MIN), |(a, b), &v| (a.min(v), b.max(v)));
        let s = &signals[j];
        spread_checked(path, &c.name, c.physical(lo), c.physical(hi), || {
            let (slo, shi) = sample_ranges.get(j).copied().unwrap_or((0, 0));
            if slo == shi {
                format!(
                    "it is computed from signal '{}', and every sample of that signal in this log is the raw count {slo} (lsb {:e}, zero {}): check the signal's lsb and zero in the sheet (an lsb far larger than the readings makes every sample one count), or remove the [[feature]]",
                    src.signal, s.lsb, s.zero
                )
            } else {
                format!(
                    "it is computed from signal '{}', whose samples vary, but this feature is the same for every unit: remove the [[feature]] from the sheet",
                    src.signal
                )
            }
        })?;
    }
    Ok(())
}

/// A count outside channel `c`'s valid range, which the kernel refuses (FAULT) on that
/// channel; `None` only for a channel whose range is every 32-bit count.
fn refused_count(c: &ChannelScale) -> Option<i32> {
    c.raw_max
        .checked_add(1)
        .or_else(|| c.raw_min.checked_sub(1))
}

/// A model's reading channels (those that are not features), in channel order: the
/// readings a station passes beside its windows.
pub fn reading_channels(channels: &[ChannelScale]) -> impl Iterator<Item = &ChannelScale> {
    channels.iter().filter(|c| c.source.is_none())
}

/// The raw readings of a unit's reading channels as the device reads them (in range or
/// not), in the order of `channels`' readings.
pub fn device_readings(channels: &[ChannelScale], unit: &SignalUnit<'_>) -> Vec<i32> {
    reading_channels(channels)
        .zip(unit.readings)
        .map(|(c, &v)| c.raw_reading(v))
        .collect()
}

/// An error about the log as a whole (the path is the log's).
fn log_error(path: &Path, message: &str) -> InputError {
    InputError::Format {
        path: path.into(),
        message: message.to_string(),
    }
}
