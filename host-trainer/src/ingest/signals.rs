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
//! Other layouts reach this reader as the same long rows (`signal_rows`):
//! one row per unit with numbered sample columns or a list per unit (Parquet), a file without
//! unit-id column as one unit, a folder of files as one log. A signal declared with `take`
//! ([`Take`]) keeps its first or last `window` samples of a longer window.
//!
//! Features are computed with [`CheckedFeature::compute`], the function the device runs,
//! so training, audit, replay and the device see the same integers.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use shared_model::WindowFault;
use shared_model::features::CheckedFeature;

use crate::error::{InputError, Place};
use crate::error::{shell_word, shown, shown_bytes};
use crate::ingest::dataset::{Dataset, LogPart};
use crate::ingest::header::find;
use crate::ingest::names::{same_name, unique_names};
use crate::ingest::options::{
    LABEL_NAMES, LogOptions, TIME_NAMES, UNIT_NAMES, is_reading, unmapped_label_hint,
};
use crate::ingest::parse::{empty_label_hint, label_cell, parse_number};
use crate::ingest::read::{checked_classes, spread_checked};
use crate::ingest::scaling::{ChannelScale, ChannelSheet};
use crate::ingest::signal_files::{log_digest, signal_log_files};
use crate::ingest::signal_rows::LongRows;
use crate::ingest::signal_scale::{SignalScale, Take};
use crate::ingest::skip::SkipReport;

/// Said where a training log refuses a unit whose window the device would refuse: a log
/// evaluated by a model keeps it as a FAULT unit instead.
const TRAINING_REFUSES: &str = " (a log read to train refuses such a unit; a holdout, audited or replayed log keeps it as a FAULT unit, as the device refuses it)";

/// Names of the optional column that numbers a unit's samples.
pub const SAMPLE_NAMES: &[&str] = &["sample", "sample_index"];

/// One whole unit of a signal log.
pub struct SignalUnit<'a> {
    /// The file the unit is read from (one of a folder's).
    pub file: &'a Path,
    /// The unit id.
    pub id: &'a str,
    /// 1-based line of the unit's first row.
    pub line: u64,
    /// +1 GO, −1 NO-GO, 0 when the log has no label column.
    pub label: i8,
    /// The reading channels' values (physical), in the order the reader was given.
    pub readings: &'a [f64],
    /// Each signal's window of raw samples, in the order of the signals (cut to the
    /// signal's window under its `take`).
    pub windows: &'a [Vec<i32>],
    /// Each window's first sample's row of the unit (`lines` index; not 0 after a cut
    /// under `take = "last"`).
    pub firsts: &'a [usize],
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
    /// SHA-256 of the log, when asked for (else empty): the file's, or for several files
    /// [`log_digest`]'s.
    pub sha256: String,
    /// Each file read and its SHA-256 (empty when not asked for).
    pub files: Vec<(PathBuf, String)>,
}

/// The unit being read.
#[derive(Default)]
struct Open {
    id: String,
    rows: usize,
    label: Option<i8>,
    readings: Vec<Option<f64>>,
    windows: Vec<Vec<i32>>,
    /// The unit's row of each window's first sample (not 0 after `take = "last"`).
    firsts: Vec<usize>,
    lines: Vec<u64>,
    first_sample: Option<i64>,
    time: Option<String>,
    /// The first fault, kept while the rest of the unit's rows are passed over (only under
    /// `skip_bad_rows`).
    fault: Option<InputError>,
}

/// Reads a signal log, calling `each` on every whole unit in file order.
///
/// `path` is a file (delimited text or Parquet, in any layout of the module documentation) or a
/// folder of such files ([`signal_log_files`]). `read_for` decides the reading channels
/// and what becomes of a window the device would refuse (see [`ReadFor`]). Errors of one
/// unit returned by `each` (an [`InputError::Signal`]) skip the unit under
/// `opts.skip_bad_rows`, as the reader's own.
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
    each: impl FnMut(&SignalUnit<'_>) -> Result<(), InputError>,
) -> Result<SignalLogHeader, InputError> {
    let files = signal_log_files(path)?;
    stream_signal_files(path, &files, opts, signals, read_for, skipped, each)
}

/// [`stream_signal_units`] over the files `files`, read one after the other as one log
/// named `name` (its digest: [`log_digest`]). A unit's rows lie in one file; a unit id
/// found in two files is an error, as one found in two places of a file.
///
/// # Errors
/// As [`stream_signal_units`]; files whose reading channels differ.
pub fn stream_signal_files(
    name: &Path,
    files: &[PathBuf],
    opts: &LogOptions,
    signals: &[SignalScale],
    read_for: ReadFor<'_>,
    skipped: &mut SkipReport,
    mut each: impl FnMut(&SignalUnit<'_>) -> Result<(), InputError>,
) -> Result<SignalLogHeader, InputError> {
    let keep_faults = matches!(read_for, ReadFor::Model { .. });
    let mut open = Open::default();
    // Each unit id's file and first line.
    let mut seen: HashMap<String, (usize, u64)> = HashMap::new();
    let longest = signals
        .iter()
        .map(|s| usize::from(s.window))
        .max()
        .unwrap_or(0);
    let mut record = csv::ByteRecord::new();
    let mut readings: Option<(Vec<String>, &Path)> = None;
    let mut digests = Vec::with_capacity(files.len());
    for (f, path) in files.iter().enumerate() {
        let path = path.as_path();
        let mut rows = LongRows::open(path, opts, signals)?;
        let mut cols = Columns::resolve(path, &rows.names, opts, signals, &read_for)?;
        cols.wide = std::mem::take(&mut rows.wide);
        cols.row_per_unit = rows.row_per_unit;
        cols.one_unit = rows.one_unit.is_some();
        let names: Vec<String> = cols
            .readings
            .iter()
            .map(|&i| cols.names[i].clone())
            .collect();
        match &readings {
            Some((first, at)) if first != &names => {
                return Err(log_error(
                    path,
                    &format!(
                        "its reading channels ({}) differ from those of {} ({}): the files of one log need the same columns",
                        names.join(", "),
                        at.display(),
                        first.join(", ")
                    ),
                ));
            }
            Some(_) => {}
            None => readings = Some((names, path)),
        }
        let decimal_comma = rows.decimal_comma;
        let mut any = false;
        while let Some(next) = rows.next(&mut record)? {
            let line = next.line;
            let id = String::from_utf8_lossy(record[cols.unit].trim_ascii());
            if id.is_empty() {
                return Err(InputError::Missing {
                    path: path.into(),
                    at: Place::Line(line),
                    column: cols.names[cols.unit].clone(),
                    hint: "every row of a signal log needs its unit's id; fill it in, or skip the unit with --skip-bad-rows".into(),
                });
            }
            // In a log of one row per unit each row begins a unit, even one with the id
            // of the row before it (which then appears twice).
            let starts = id != open.id.as_str() || (cols.row_per_unit && next.new_file_row);
            if !any || starts {
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
                if let Some((g, first)) = seen.insert(id.to_string(), (f, line)) {
                    let where_ = if g == f {
                        format!("it began on line {first}")
                    } else {
                        format!("it began on line {first} of {}", files[g].display())
                    };
                    return Err(InputError::Signal {
                        path: path.into(),
                        line,
                        unit: id.into_owned(),
                        message: format!(
                            "the unit's rows appear again after other units ({where_}); keep the rows of a unit together, in sample order, and each unit id once"
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
        // A unit ends with its file: the next file's first row begins one.
        open.id.clear();
        digests.push(rows.sha256()?);
    }
    Ok(SignalLogHeader {
        readings: readings.map(|r| r.0).unwrap_or_default(),
        sha256: log_digest(name, files, &digests),
        files: files.iter().cloned().zip(digests).collect(),
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
                    "short window: the unit has {} {} ({}){TRAINING_REFUSES}",
                    open.rows,
                    cols.rows_word(),
                    short.join(", ")
                ),
            }
        })
    });
    // A longer window under `take` is cut to the samples the device is handed.
    for ((w, s), first) in open.windows.iter_mut().zip(signals).zip(&mut open.firsts) {
        let n = usize::from(s.window);
        *first = 0;
        match s.take {
            Some(Take::First) => w.truncate(n),
            Some(Take::Last) if w.len() > n => {
                *first = w.len() - n;
                w.drain(..w.len() - n);
            }
            _ => {}
        }
    }
    let result = match fault {
        Some(e) => Err(e),
        None => {
            let readings: Vec<f64> = open.readings.iter().map(|r| r.unwrap_or(0.0)).collect();
            let unit = SignalUnit {
                file: path,
                id: &open.id,
                line: open.lines.first().copied().unwrap_or(0),
                label: if cols.label.is_some() {
                    open.label.unwrap_or(0)
                } else {
                    0
                },
                readings: &readings,
                windows: &open.windows,
                firsts: &open.firsts,
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
    /// Each signal's sample columns in a wide file (else empty), for messages.
    wide: Vec<Vec<String>>,
    /// Each row of the file is a unit (wide or list layout).
    row_per_unit: bool,
    /// The file has no unit-id column: it is one unit.
    one_unit: bool,
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
            wide: Vec::new(),
            row_per_unit: false,
            one_unit: false,
        })
    }

    /// " (column 'vib_5')" for sample `k` of signal `j` in a wide file, else "".
    fn sample_column(&self, j: usize, k: usize) -> String {
        self.wide
            .get(j)
            .and_then(|w| w.get(k))
            .map(|c| format!(" (column '{c}')"))
            .unwrap_or_default()
    }

    /// What a unit's rows are called in messages: rows of the file, or samples of the
    /// unit's one row.
    fn rows_word(&self) -> &'static str {
        if self.row_per_unit { "samples" } else { "rows" }
    }

    /// Said of an over-long unit in a file without unit-id column.
    fn one_unit_note(&self) -> &'static str {
        if self.one_unit {
            "; the file has no unit-id column (looked for: unit_id, unit, serial), so it is read as one unit: name its unit-id column with --unit-id if it holds several"
        } else {
            ""
        }
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
    unit: &SignalUnit<'_>,
    signals: &[SignalScale],
    j: usize,
    fault: WindowFault,
) -> InputError {
    let (path, signal) = (unit.file, &signals[j]);
    match fault {
        WindowFault::OutOfRange { index, raw } => unit.error(
            usize::from(index) + unit.firsts.get(j).copied().unwrap_or(0),
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
    read_signal_files(path, &signal_log_files(path)?, opts, from, false)
}

/// [`read_signal_log`] of the files `files`, read one after the other as one log named
/// `path`; each unit remembers its file. With `listed` (files given one by one, not a
/// folder's) the log's digest is the one a log of several files has
/// ([`combined_digest`](crate::ingest::dataset::combined_digest)) and each file is kept
/// in [`Dataset::parts`].
///
/// # Errors
/// As [`read_signal_log`].
pub fn read_signal_files(
    path: &Path,
    files: &[PathBuf],
    opts: &LogOptions,
    from: SignalChannels<'_>,
    listed: bool,
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
    let mut unit_files: Vec<u32> = Vec::new();
    // Units come in file order: the file of each is found from the last one's on, once
    // per file rather than once per unit (a folder may hold one file per unit).
    let mut file_at = 0usize;
    let header = stream_signal_files(
        path,
        files,
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
                        refused_count(c).ok_or_else(|| window_error(u, signals, j, e))?
                    }
                    (Err(e), false) => return Err(window_error(u, signals, j, e)),
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
            if let Some(k) = files[file_at..].iter().position(|f| f == u.file) {
                file_at += k;
            }
            unit_files.push(u32::try_from(file_at).unwrap_or(u32::MAX));
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
        if files.len() > 1 {
            ds.part_of.push(unit_files.get(i).copied().unwrap_or(0));
        }
    }
    if files.len() > 1 {
        ds.parts = files
            .iter()
            .enumerate()
            .map(|(k, p)| LogPart {
                path: p.clone(),
                sha256: header
                    .files
                    .get(k)
                    .map_or(String::new(), |(_, sha)| sha.clone()),
                units: ds.part_of.iter().filter(|&&f| f as usize == k).count(),
            })
            .collect();
        if listed && opts.digest {
            ds.sha256 = crate::ingest::dataset::combined_digest(&ds.parts);
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
