//! The one entry for reading a log: [`read`] takes a role's files (one or several, bench
//! logs or signal logs) and where the channels come from, and goes the way the sheet or
//! model says (declared signals: a signal log). A bench log of several files (one per
//! shift, day or station) is read as one log: the same channel columns in every file,
//! observed ranges over all of them, each file's digest kept, and each unit's file known.

use std::path::PathBuf;

use super::options::{LogOptions, ScaleFrom};
use super::read::{ObservedColumn, header_channels, observed_ranges, read_log, spread_checked};
use super::skip::SkipReport;
use crate::error::{InputError, shell_word};
use crate::ingest::dataset::Dataset;
use crate::ingest::scaling::ChannelScale;
use crate::ingest::sheet::ChannelSheet;
use crate::ingest::signal_files::signal_log_files;
use crate::ingest::signals::{read_signal_files, read_signal_log};

/// Reads the files of one log (in the order given) into one [`Dataset`]: the one entry for
/// bench logs and signal logs. When `from` declares signals (a sheet's `[[signal]]`s, a
/// model's signals) each path is a signal log's file or folder, read by
/// `read_signal_files` with its features computed; otherwise each is a bench log, read as
/// `read_log` reads one. Several bench files must have the same channel columns, in the
/// same order; a channel without a declared range gets the range observed over all of them,
/// so every file is converted alike.
///
/// # Errors
/// No file; files whose channel columns differ (both named); any error of a file.
pub fn read(
    files: &[PathBuf],
    opts: &LogOptions,
    from: ScaleFrom<'_>,
) -> Result<Dataset, InputError> {
    if from.signals().is_empty() {
        return read_logs(files, opts, from);
    }
    match files {
        [] => Err(no_file()),
        [one] => read_signal_log(one, opts, from),
        [first, ..] => {
            let mut listed = Vec::new();
            for p in files {
                listed.extend(signal_log_files(p)?);
            }
            read_signal_files(first, &listed, opts, from, true)
        }
    }
}

fn no_file() -> InputError {
    InputError::Format {
        path: PathBuf::new(),
        message: "no log file given".into(),
    }
}

/// [`read`] of bench logs (no signals declared).
fn read_logs(
    files: &[PathBuf],
    opts: &LogOptions,
    scale: ScaleFrom<'_>,
) -> Result<Dataset, InputError> {
    let (first, rest) = match files {
        [] => return Err(no_file()),
        [one] => return read_log(one, opts, scale),
        [first, rest @ ..] => (first, rest),
    };
    let names = same_columns(files, opts)?;
    let derived;
    let scale = match scale {
        ScaleFrom::Model { .. } => scale,
        ScaleFrom::Sheet(_) | ScaleFrom::Observed => {
            let sheet = match scale {
                ScaleFrom::Sheet(s) => Some(s),
                _ => None,
            };
            let declared = |n: &str| sheet.and_then(|s| s.get(n)).cloned();
            let ranges: Vec<(f64, f64)> = if names.iter().all(|n| declared(n).is_some()) {
                Vec::new()
            } else {
                observed_over(files, opts)?
                    .0
                    .iter()
                    .map(|c| (c.lo, c.hi))
                    .collect()
            };
            let channels = names
                .iter()
                .enumerate()
                .map(|(i, n)| match declared(n) {
                    Some(c) => Ok(c),
                    None => {
                        let (lo, hi) = ranges.get(i).copied().unwrap_or((0.0, 0.0));
                        spread_checked(first, n, lo, hi, || {
                            format!(
                                "over all {} files of the log; drop it with --ignore {} or declare its range in a channel sheet",
                                files.len(),
                                shell_word(n)
                            )
                        })?;
                        ChannelScale::observed(n, lo, hi).map_err(|message| InputError::Sheet {
                            path: first.clone(),
                            message,
                        })
                    }
                })
                .collect::<Result<Vec<_>, _>>()?;
            derived = ChannelSheet::of_channels(channels);
            ScaleFrom::Sheet(&derived)
        }
    };
    let mut ds = read_log(first, opts, scale)?;
    for f in rest {
        let next = read_log(f, opts, scale)?;
        if opts.max_rows.saturating_sub(ds.len()) < next.len() {
            return Err(InputError::TooManyRows {
                path: f.clone(),
                max: opts.max_rows,
            });
        }
        same_role_columns(&ds, &next)?;
        ds.append(next)?;
    }
    Ok(ds)
}

/// Refuses a file whose unit-id or timestamp column is missing where the earlier files
/// have one (or the other way round): its units would take other units' ids.
fn same_role_columns(ds: &Dataset, next: &Dataset) -> Result<(), InputError> {
    let differs = |a: bool, b: bool, what: &str| {
        (a != b).then(|| InputError::Format {
            path: next.path.clone(),
            message: format!(
                "{} a {what} column and {} {}; the files of one log need the same columns",
                if b { "it has" } else { "it has no" },
                ds.path.display(),
                if a { "has one" } else { "has none" }
            ),
        })
    };
    let ids = |d: &Dataset| d.unit_ids.get(0).is_some();
    let times = |d: &Dataset| d.times.get(0).is_some();
    match differs(ids(ds), ids(next), "unit-id")
        .or_else(|| differs(times(ds), times(next), "timestamp"))
    {
        Some(e) => Err(e),
        None => Ok(()),
    }
}

/// The channel columns every file shares, or an error naming the first file that differs
/// from the first file and how.
pub(crate) fn same_columns(
    files: &[PathBuf],
    opts: &LogOptions,
) -> Result<Vec<String>, InputError> {
    let first = header_channels(&files[0], opts)?;
    for f in &files[1..] {
        let other = header_channels(f, opts)?;
        if other != first {
            return Err(InputError::Format {
                path: f.clone(),
                message: format!(
                    "its channel columns differ from those of {}, an earlier file of the same log: {}; the files of one log need the same columns in the same order",
                    files[0].display(),
                    difference(&first, &other)
                ),
            });
        }
    }
    Ok(first)
}

/// The first difference between two column lists, in words.
fn difference(a: &[String], b: &[String]) -> String {
    let at = a.iter().zip(b).position(|(x, y)| x != y);
    match at {
        Some(k) => format!(
            "column {} is '{}' there and '{}' here",
            k + 1,
            crate::error::shown(&a[k]),
            crate::error::shown(&b[k])
        ),
        None if a.len() > b.len() => {
            format!("'{}' is missing here", crate::error::shown(&a[b.len()]))
        }
        None => format!(
            "'{}' is a column here only",
            crate::error::shown(&b[a.len()])
        ),
    }
}

/// Each channel column's smallest and largest reading over every file of a log (as
/// [`observed_ranges`] reads one: the rows `train`'s first pass reads), the rows read and
/// the rows skipped.
///
/// # Errors
/// Any file's [`InputError`].
pub fn observed_over(
    files: &[PathBuf],
    opts: &LogOptions,
) -> Result<(Vec<ObservedColumn>, usize, SkipReport), InputError> {
    let mut skipped = SkipReport::default();
    let mut all: Vec<ObservedColumn> = Vec::new();
    let mut rows = 0;
    for f in files {
        let (ranges, n) = observed_ranges(f, opts, &mut skipped)?;
        rows += n;
        if all.is_empty() {
            all = ranges;
            continue;
        }
        for (a, r) in all.iter_mut().zip(ranges) {
            a.lo = a.lo.min(r.lo);
            a.hi = a.hi.max(r.hi);
        }
    }
    Ok((all, rows, skipped))
}

/// One unit of a log streamed for a trained model ([`stream`]).
pub struct ModelUnit<'a> {
    /// 1-based line of the unit's first row.
    pub line: u64,
    /// The unit id, if the log has a unit-id column (a signal log always has one).
    pub id: Option<&'a [u8]>,
    /// The timestamp cell (of the unit's first row), if the log has a timestamp column
    /// and [`LogOptions::keep_times`] asks for it.
    pub time: Option<&'a [u8]>,
    /// The unit's class code (+1 GO, −1 NO-GO), 0 when the log has no label column.
    pub label: i8,
    /// The raw readings of the model's reading channels as the device reads them (in range
    /// or not); every channel's for a model of readings.
    pub raw: &'a [i32],
    /// Each signal's window of raw samples (none for a model of readings).
    pub windows: &'a [Vec<i32>],
}

/// Streams a log through a trained model's channels without holding it: the one entry
/// for bench logs and signal logs after training (`replay`, `values`). The model's
/// signals decide the kind, as in [`read`]; refused windows reach `each` (the device
/// shows them as FAULTs).
///
/// # Errors
/// The first [`InputError`] (row and unit errors skipped and counted under
/// `skip_bad_rows`), or whatever `each` returns.
pub fn stream(
    path: &std::path::Path,
    opts: &LogOptions,
    channels: &[ChannelScale],
    signals: &[crate::ingest::signal_scale::SignalScale],
    skipped: &mut SkipReport,
    mut each: impl FnMut(ModelUnit<'_>) -> Result<(), InputError> + Send,
) -> Result<(), InputError> {
    use crate::ingest::signals::{ReadFor, device_readings, reading_channels};
    if signals.is_empty() {
        super::read::stream_units(path, opts, channels, skipped, |u| {
            each(ModelUnit {
                line: u.line,
                id: u.unit,
                time: u.time,
                label: u.label,
                raw: u.raw,
                windows: &[],
            })
        })?;
        return Ok(());
    }
    let names: Vec<String> = reading_channels(channels).map(|c| c.name.clone()).collect();
    let read_for = ReadFor::Model { readings: &names };
    crate::ingest::signal_units::stream_signal_units(
        path,
        opts,
        signals,
        read_for,
        skipped,
        |u| {
            let raw = device_readings(channels, u);
            each(ModelUnit {
                line: u.line,
                id: Some(u.id.as_bytes()),
                time: u.time.map(str::as_bytes),
                label: u.label,
                raw: &raw,
                windows: u.windows,
            })
        },
    )?;
    Ok(())
}
