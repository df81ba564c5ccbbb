//! A log of several files (one per shift, day or station) read as one log: the same
//! channel columns in every file, observed ranges over all of them, each file's digest
//! kept, and each unit's file known.

use std::path::{Path, PathBuf};

use super::options::{LogOptions, ScaleFrom};
use super::parse::Parsed;
use super::read::{header_channels, read_log, spread_checked};
use super::scan::scan;
use super::skip::SkipReport;
use crate::error::{InputError, shell_word};
use crate::ingest::dataset::Dataset;
use crate::ingest::scaling::{ChannelScale, ChannelSheet};

/// Reads the files of one log (in the order given) into one [`Dataset`]. One file reads as
/// [`read_log`] reads it. Several must have the same channel columns, in the same order;
/// a channel without a declared range gets the range observed over all of them, so every
/// file is converted alike.
///
/// # Errors
/// No file; files whose channel columns differ (both named); any error of a file.
pub fn read_logs(
    files: &[PathBuf],
    opts: &LogOptions,
    scale: ScaleFrom<'_>,
) -> Result<Dataset, InputError> {
    let (first, rest) = match files {
        [] => {
            return Err(InputError::Format {
                path: PathBuf::new(),
                message: "no log file given".into(),
            });
        }
        [one] => return read_log(one, opts, scale),
        [first, rest @ ..] => (first, rest),
    };
    let names = same_columns(files, opts)?;
    let derived;
    let scale = match scale {
        ScaleFrom::Model(_) => scale,
        ScaleFrom::Sheet(_) | ScaleFrom::Observed => {
            let sheet = match scale {
                ScaleFrom::Sheet(s) => Some(s),
                _ => None,
            };
            let declared = |n: &str| sheet.and_then(|s| s.get(n)).cloned();
            let ranges = if names.iter().all(|n| declared(n).is_some()) {
                Vec::new()
            } else {
                observed_over(files, opts, names.len())?
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
            derived = ChannelSheet {
                channels,
                ..ChannelSheet::default()
            };
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
        ds.append(next);
    }
    Ok(ds)
}

/// The channel columns every file shares, or an error naming the first file that differs
/// from the first file and how.
fn same_columns(files: &[PathBuf], opts: &LogOptions) -> Result<Vec<String>, InputError> {
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

/// Each channel's (min, max) over every file (readings only: a first pass that converts
/// nothing).
fn observed_over(
    files: &[PathBuf],
    opts: &LogOptions,
    dim: usize,
) -> Result<Vec<(f64, f64)>, InputError> {
    let mut ranges = vec![(f64::INFINITY, f64::NEG_INFINITY); dim];
    for f in files {
        observe_file(f, opts, &mut ranges)?;
    }
    Ok(ranges)
}

/// Widens `ranges` to the readings of `path`.
fn observe_file(
    path: &Path,
    opts: &LogOptions,
    ranges: &mut [(f64, f64)],
) -> Result<(), InputError> {
    let state = std::sync::Mutex::new(ranges);
    let observe = |ranges: &mut [(f64, f64)], values: &[f64]| {
        for (r, &v) in ranges.iter_mut().zip(values) {
            r.0 = r.0.min(v);
            r.1 = r.1.max(v);
        }
    };
    let poisoned = || InputError::Format {
        path: path.into(),
        message: "the reader stopped".into(),
    };
    let mut run = |cols: &super::header::Columns, p: &Parsed| -> Result<(), InputError> {
        let mut st = state.lock().map_err(|_| poisoned())?;
        let d = cols.channels.len().max(1);
        for values in p.values.chunks_exact(d) {
            observe(&mut st, values);
        }
        Ok(())
    };
    let mut skipped = SkipReport::default();
    scan(
        path,
        opts,
        None,
        None,
        &mut skipped,
        |_, row| {
            let mut st = state.lock().map_err(|_| poisoned())?;
            observe(&mut st, row.values);
            Ok(())
        },
        Some(&mut run),
        false,
    )?;
    Ok(())
}
