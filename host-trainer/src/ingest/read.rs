//! Whole logs: read into a dataset (observed ranges first where the sheet declares none),
//! or streamed unit by unit for logs of any length.

use std::fs::File;
use std::io::Read;
use std::path::Path;

use super::header::{Columns, read_header};
use super::options::{LogOptions, ScaleFrom};
use super::records::BlockReader;
use super::scan::scan;
use super::skip::SkipReport;
use crate::error::InputError;
use crate::ingest::dataset::Dataset;
use crate::ingest::scaling::ChannelScale;

/// Reads a bench log into a [`Dataset`] of raw readings.
///
/// With observed scaling the file is read twice: once for the ranges, once to convert.
///
/// # Errors
/// The first [`InputError`] (or, with `skip_bad_rows`, only errors that are not about one row).
pub fn read_log(
    path: &Path,
    opts: &LogOptions,
    scale: ScaleFrom<'_>,
) -> Result<Dataset, InputError> {
    let model = match scale {
        ScaleFrom::Model(m) => Some(m),
        _ => None,
    };
    let sheet = match scale {
        ScaleFrom::Sheet(s) => Some(s),
        _ => None,
    };
    // The header alone settles the channel list; a model fixes it outright.
    let names: Vec<String> = match model {
        Some(m) => m.iter().map(|c| c.name.clone()).collect(),
        None => header_channels(path, opts)?,
    };
    // Pass 1, only if some channel has no declared range: observe min/max.
    let mut ranges: Vec<(f64, f64)> = Vec::new();
    if model.is_none() && names.iter().any(|n| sheet.and_then(|s| s.get(n)).is_none()) {
        let mut skipped = SkipReport::default();
        let mut rows = 0usize;
        // The second pass hashes the file; this one need not.
        let first_pass = |_: &_, row: super::parse::Row<'_>| {
            if ranges.is_empty() {
                ranges = row.values.iter().map(|&v| (v, v)).collect();
            }
            for (r, &v) in ranges.iter_mut().zip(row.values) {
                r.0 = r.0.min(v);
                r.1 = r.1.max(v);
            }
            rows += 1;
            Ok(())
        };
        scan(path, opts, model, None, &mut skipped, first_pass, false)?;
        if rows == 0 {
            return Err(no_rows(path, &skipped));
        }
    }
    let scales: Vec<ChannelScale> = match model {
        Some(m) => m.to_vec(),
        None => names
            .iter()
            .enumerate()
            .map(|(i, n)| match sheet.and_then(|s| s.get(n)) {
                // The log's spelling names the channel from here on.
                Some(s) => Ok(ChannelScale {
                    name: n.clone(),
                    ..s.clone()
                }),
                None => {
                    let (lo, hi) = ranges.get(i).copied().unwrap_or((0.0, 0.0));
                    if lo == hi {
                        return Err(InputError::ZeroSpread {
                            path: path.into(),
                            column: n.clone(),
                            value: lo,
                        });
                    }
                    ChannelScale::observed(n, lo, hi).map_err(|message| InputError::Sheet {
                        path: path.into(),
                        message,
                    })
                }
            })
            .collect::<Result<_, _>>()?,
    };
    // Pass 2: convert to raw.
    let mut ds = Dataset::empty(path, scales);
    // Reserve once from an estimate of the row count: growing by doubling would briefly hold
    // the old and the new buffer, half again the data's size.
    if super::parquet::is_parquet(path) {
        // The footer counts the rows (bounded by the file's size).
        let rows = super::parquet::row_count(path)
            .unwrap_or(0)
            .min(opts.max_rows);
        ds.raw.reserve_exact(rows * ds.scales.len());
        ds.labels.reserve_exact(rows);
        ds.lines.reserve_exact(rows);
    } else if let Some(rows) = estimate_rows(path) {
        // An estimate is never trusted alone: a record holds at least one byte and one
        // delimiter (or line end) per channel and for the label, so the file's size bounds
        // the rows, and --max-rows bounds them too (a log that starts with blank lines
        // would otherwise ask for many times its size).
        let len = std::fs::metadata(path).map_or(0, |m| m.len());
        let most = usize::try_from(len / (2 * (ds.scales.len() as u64 + 1))).unwrap_or(usize::MAX);
        let rows = rows.min(most).min(opts.max_rows);
        ds.raw.reserve_exact(rows * ds.scales.len());
        ds.labels.reserve_exact(rows);
        ds.lines.reserve_exact(rows);
    }
    let mut skipped = SkipReport::default();
    let scales = ds.scales.clone();
    let (cols2, sha) = scan(
        path,
        opts,
        model,
        Some(&scales),
        &mut skipped,
        |_, row| {
            if ds.labels.len() >= opts.max_rows {
                return Err(InputError::TooManyRows {
                    path: path.into(),
                    max: opts.max_rows,
                });
            }
            ds.raw.extend_from_slice(row.raw);
            ds.labels.push(row.label);
            ds.lines.push(row.line);
            if let Some(u) = row.unit {
                ds.unit_ids.push(u);
            }
            if let Some(t) = row.time {
                ds.times.push(t);
            }
            Ok(())
        },
        opts.digest,
    )?;
    if cols2.unit.is_none() {
        ds.unit_ids.clear();
    }
    ds.sha256 = sha;
    ds.skipped = skipped;
    if ds.is_empty() {
        return Err(no_rows(path, &ds.skipped));
    }
    let go = ds.labels.iter().filter(|&&l| l > 0).count();
    if model.is_none() && (go == 0 || go == ds.len()) {
        return Err(InputError::OneClass {
            path: path.into(),
            rows: ds.len(),
            class: if go == 0 { "NO-GO" } else { "GO" },
        });
    }
    Ok(ds)
}

/// One unit as streamed by [`stream_units`].
pub struct StreamedUnit<'a> {
    /// 1-based line in the file.
    pub line: u64,
    /// Raw readings, in the order of `scales`.
    pub raw: &'a [i32],
    /// +1 GO, -1 NO-GO.
    pub label: i8,
    /// The unit id cell, if the log has a unit-id column.
    pub unit: Option<&'a [u8]>,
}

/// Streams the units of a log converted to raw readings with `scales` (from a trained model),
/// without holding the log in memory: for logs of any length. Returns the file's SHA-256
/// (empty unless [`LogOptions::digest`]).
///
/// # Errors
/// The first [`InputError`] (row errors are skipped and counted under `skip_bad_rows`), or
/// whatever `on_unit` returns.
pub fn stream_units(
    path: &Path,
    opts: &LogOptions,
    scales: &[ChannelScale],
    skipped: &mut SkipReport,
    mut on_unit: impl FnMut(StreamedUnit<'_>) -> Result<(), InputError> + Send,
) -> Result<String, InputError> {
    let (_, sha) = scan(
        path,
        opts,
        Some(scales),
        Some(scales),
        skipped,
        |_, row| {
            on_unit(StreamedUnit {
                line: row.line,
                raw: row.raw,
                label: row.label,
                unit: row.unit,
            })
        },
        opts.digest,
    )?;
    Ok(sha)
}

/// Rows in the file, estimated from the first 256 KiB (2 % extra), or `None` for small files.
pub(super) fn estimate_rows(path: &Path) -> Option<usize> {
    let len = std::fs::metadata(path).ok()?.len();
    if len < 1 << 20 {
        return None;
    }
    let mut head = vec![0u8; 256 << 10];
    let n = File::open(path).ok()?.read(&mut head).ok()?;
    let lines = head[..n].iter().filter(|&&b| b == b'\n').count().max(1);
    Some((len as f64 / (n as f64 / lines as f64) * 1.02) as usize + 16)
}

pub(super) fn no_rows(path: &Path, skipped: &SkipReport) -> InputError {
    InputError::NoRows {
        path: path.into(),
        skipped: if skipped.total > 0 {
            format!(" ({} rows skipped as bad)", skipped.total)
        } else {
            String::new()
        },
    }
}

/// The channel names a log would use under `opts`, from its header (or a Parquet file's
/// schema) alone.
///
/// # Errors
/// Header problems: empty file, duplicate or unknown names, no label.
pub fn header_channels(path: &Path, opts: &LogOptions) -> Result<Vec<String>, InputError> {
    crate::input::regular_file(path)?;
    let names = if super::parquet::is_parquet(path) {
        super::parquet::column_names(path)?
    } else {
        let file = File::open(path).map_err(|e| InputError::io(path, e))?;
        let mut reader = BlockReader {
            file,
            bar: None,
            block: 64 << 10,
            eof: false,
        };
        read_header(path, opts, &mut reader, &mut Vec::new())?.names
    };
    let cols = Columns::resolve(path, names, opts, None)?;
    Ok(cols
        .channels
        .iter()
        .map(|&c| cols.names[c].clone())
        .collect())
}
