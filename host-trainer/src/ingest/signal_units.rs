//! A signal log's units streamed whole: rows grouped by unit id over one file or several,
//! each unit checked whole (`signal_check` takes its rows) and its windows cut under
//! `take` (`signal_take`) before it is handed on as a [`SignalUnit`]. Feature computation
//! is not here: `signals` turns the units into a dataset, `values` and `replay` stream them.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use shared_model::WindowFault;

use crate::error::{InputError, Place};
use crate::ingest::options::LogOptions;
use crate::ingest::signal_check::{Open, TRAINING_REFUSES};
use crate::ingest::signal_columns::{Columns, ReadFor};
use crate::ingest::signal_files::{log_digest, signal_log_files};
use crate::ingest::signal_rows::LongRows;
use crate::ingest::signal_scale::SignalScale;
use crate::ingest::signal_take::cut_windows;
use crate::ingest::skip::SkipReport;

/// One whole unit of a signal log.
pub struct SignalUnit<'a> {
    /// The file the unit is read from (one of a folder's).
    pub file: &'a Path,
    /// The unit id.
    pub id: &'a str,
    /// 1-based line of the unit's first row.
    pub line: u64,
    /// The unit's class code (`Classes::code`: +1 GO, −1 NO-GO), 0 when the log has no
    /// label column.
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
    let classes = opts.classes();
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
                    &classes,
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
    cut_windows(signals, &mut open.windows, &mut open.firsts);
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

/// An error about the log as a whole (the path is the log's).
pub(super) fn log_error(path: &Path, message: &str) -> InputError {
    InputError::Format {
        path: path.into(),
        message: message.to_string(),
    }
}
