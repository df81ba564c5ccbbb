//! Whole bench logs: read into a dataset (observed ranges first where the sheet declares
//! none), or streamed unit by unit for logs of any length; and the rules every log kind
//! shares once read (`checked_classes`: units present, two classes, both present for
//! training; `spread_checked`: no constant channel).

use std::fs::File;
use std::io::Read;
use std::path::Path;

use super::header::{Columns, read_header};
use super::options::{LogOptions, ScaleFrom};
use super::parse::Parsed;
use super::records::BlockReader;
use super::scan::scan;
use super::skip::SkipReport;
use crate::error::InputError;
use crate::error::shell_word;
use crate::ingest::classes::{Classes, GO, NO_GO};
use crate::ingest::dataset::Dataset;
use crate::ingest::names::same_name;
use crate::ingest::scaling::ChannelScale;
use crate::ingest::sheet::ChannelSheet;

/// Reads a bench log into a [`Dataset`] of raw readings.
///
/// With observed scaling every channel's lsb comes from its range, known only at the end of
/// the file. When no channel has a declared range the first pass keeps the readings (as the
/// exact doubles a second pass would convert) and converts them once the ranges are known,
/// up to 1 GiB of them (`KEEP_READINGS`); a longer log, or one with some channels in the
/// sheet, is read twice: once for the ranges, once to convert.
///
/// # Errors
/// The first [`InputError`] (or, with `skip_bad_rows`, only errors that are not about one row).
pub(crate) fn read_log(
    path: &Path,
    opts: &LogOptions,
    scale: ScaleFrom<'_>,
) -> Result<Dataset, InputError> {
    read_log_keeping(path, opts, scale, KEEP_READINGS)
}

/// Bytes of readings (8 per reading) the first pass of observed scaling keeps to spare the
/// second pass: 1 GiB, 8 million units of 16 channels.
pub const KEEP_READINGS: usize = 1 << 30;

/// The first pass's rows, kept for [`read_log`]'s single pass.
struct Kept {
    values: Vec<f64>,
    rows: Dataset,
}

/// [`read_log`] keeping at most `keep` bytes of readings from the first pass.
pub(super) fn read_log_keeping(
    path: &Path,
    opts: &LogOptions,
    scale: ScaleFrom<'_>,
    keep: usize,
) -> Result<Dataset, InputError> {
    let model = match scale {
        ScaleFrom::Model { channels, .. } => Some(channels),
        _ => None,
    };
    let sheet = match scale {
        ScaleFrom::Sheet(s) => Some(s),
        _ => None,
    };
    // The header alone settles the channel list; a model fixes it outright.
    let names: Vec<String> = match model {
        Some(m) => m.iter().map(|c| c.log_column().to_string()).collect(),
        None => {
            let cols = header_columns(path, opts)?;
            if let Some(s) = sheet {
                no_alias_clash(path, &cols, s)?;
            }
            cols.channels
                .iter()
                .map(|&c| cols.names[c].clone())
                .collect()
        }
    };
    // Pass 1, only if some channel has no declared range: observe min/max.
    let mut ranges: Vec<(f64, f64)> = Vec::new();
    let mut kept: Option<Kept> = None;
    let mut first_digest = String::new();
    let mut first_skipped = SkipReport::default();
    if model.is_none() && names.iter().any(|n| sheet.and_then(|s| s.get(n)).is_none()) {
        // Keep the rows only if no channel is in the sheet: a declared range can refuse a
        // reading, and the second pass words that error.
        let all_observed = names.iter().all(|n| sheet.and_then(|s| s.get(n)).is_none());
        if all_observed && keep > 0 {
            let mut rows = Dataset::empty(path, Vec::new());
            let mut values = Vec::new();
            if let Some(n) = estimate_rows(path) {
                let len = std::fs::metadata(path).map_or(0, |m| m.len());
                let most = usize::try_from(len / (2 * (names.len() as u64 + 1))).unwrap_or(0);
                let cells = n.min(most).min(opts.max_rows).saturating_mul(names.len());
                if cells.saturating_mul(8) <= keep {
                    values.reserve_exact(cells);
                    rows.labels.reserve_exact(cells / names.len().max(1));
                    rows.lines.reserve_exact(cells / names.len().max(1));
                }
            }
            kept = Some(Kept { values, rows });
        }
        // A pass that may be the only one hashes the file; else the second pass does.
        let hash = kept.is_some() && opts.digest;
        let pass = observe_pass(path, opts, &mut first_skipped, &mut kept, keep, hash)?;
        ranges = pass.ranges;
        first_digest = pass.digest;
    }
    let scales: Vec<ChannelScale> = match model {
        Some(m) => m.to_vec(),
        None => names
            .iter()
            .enumerate()
            .map(|(i, n)| match sheet.and_then(|s| s.get(n)) {
                // The log's spelling names the channel from here on, or its column when the
                // sheet names the channel otherwise.
                Some(s) if s.column.is_some() => Ok(ChannelScale {
                    column: Some(n.clone()),
                    ..s.clone()
                }),
                Some(s) => Ok(ChannelScale {
                    name: n.clone(),
                    ..s.clone()
                }),
                None => {
                    let (lo, hi) = ranges.get(i).copied().unwrap_or((0.0, 0.0));
                    spread_checked(path, n, lo, hi, || {
                        format!(
                            "drop it with --ignore {} or declare its range in a channel sheet",
                            shell_word(n)
                        )
                    })?;
                    ChannelScale::observed(n, lo, hi).map_err(|message| InputError::Sheet {
                        path: path.into(),
                        message,
                    })
                }
            })
            .collect::<Result<_, _>>()?,
    };
    if let Some(ds) = kept.and_then(|k| convert_kept(k, &scales)) {
        let ds = Dataset {
            sha256: first_digest,
            skipped: first_skipped,
            ..ds
        };
        return checked_classes(path, ds, model.is_some(), opts.classes());
    }
    // Pass 2: convert to raw.
    let mut ds = Dataset::empty(path, scales);
    // Reserve once from an estimate of the row count: growing by doubling would briefly hold
    // the old and the new buffer, half again the data's size.
    if super::parquet_file::is_parquet(path) {
        // The footer counts the rows (bounded by the file's size).
        let rows = super::parquet_file::row_count(path)
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
    let too_many = || InputError::TooManyRows {
        path: path.into(),
        max: opts.max_rows,
    };
    // Runs of good rows are appended as slices; rows one by one only around a bad row. Both
    // sinks append to the one dataset, in file order (the scan calls one at a time).
    let shared = std::sync::Mutex::new(&mut ds);
    let mut run = |cols: &Columns, p: &Parsed| -> Result<(), InputError> {
        let mut ds = shared.lock().map_err(|_| too_many())?;
        if ds.labels.len() + p.labels.len() > opts.max_rows {
            return Err(too_many());
        }
        ds.raw.extend_from_slice(&p.raw);
        ds.labels.extend_from_slice(&p.labels);
        ds.lines.extend_from_slice(&p.lines);
        if cols.unit.is_some() {
            ds.unit_ids.extend_packed(&p.unit_bytes, &p.unit_ends);
        }
        if cols.time.is_some() && opts.keep_times {
            ds.times.extend_packed(&p.time_bytes, &p.time_ends);
        }
        Ok(())
    };
    let (cols2, sha) = scan(
        path,
        opts,
        model,
        Some(&scales),
        &mut skipped,
        |_, row| {
            let mut ds = shared.lock().map_err(|_| too_many())?;
            if ds.labels.len() >= opts.max_rows {
                return Err(too_many());
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
        Some(&mut run),
        opts.digest,
    )?;
    if cols2.unit.is_none() {
        ds.unit_ids.clear();
    }
    ds.sha256 = sha;
    ds.skipped = skipped;
    checked_classes(path, ds, model.is_some(), opts.classes())
}

/// The kept rows of the first pass converted with `scales`, as the second pass would convert
/// them (`to_raw_inv` equals `to_raw`); `None` if a reading is refused, which the observed
/// ranges rule out, so that the second pass words it.
fn convert_kept(kept: Kept, scales: &[ChannelScale]) -> Option<Dataset> {
    use rayon::prelude::*;
    let Kept { values, mut rows } = kept;
    let d = scales.len().max(1);
    let mut raw = vec![0i32; values.len()];
    raw.par_chunks_mut(d * 4096)
        .zip(values.par_chunks(d * 4096))
        .try_for_each(|(out, vals)| ChannelScale::to_raw_rows(scales, vals, out))?;
    drop(values);
    rows.raw = raw;
    rows.scales = scales.to_vec();
    Some(rows)
}

/// Refuses channel `column` whose every unit reads the same (`lo == hi`): the one rule for
/// plain channels and a signal log's readings and features. `hint` says why it may be
/// constant and what to do.
pub(super) fn spread_checked(
    path: &Path,
    column: &str,
    lo: f64,
    hi: f64,
    hint: impl FnOnce() -> String,
) -> Result<(), InputError> {
    if lo == hi {
        return Err(InputError::ZeroSpread {
            path: path.into(),
            column: column.to_string(),
            value: lo,
            hint: hint(),
        });
    }
    Ok(())
}

/// `ds`, unless it is empty, names more than two classes without declaring them, or, for
/// training (no model), holds one class only (of declared classes: lacks one): the one
/// rule for plain, Parquet and signal logs. The dataset carries `classes`, the list its
/// labels were read with.
pub(super) fn checked_classes(
    path: &Path,
    mut ds: Dataset,
    for_model: bool,
    classes: Classes,
) -> Result<Dataset, InputError> {
    // Every step of two outcomes reads a unit's code as its ±1 side; a third class's code
    // (−2…) reaches only the steps that decide between declared classes.
    if !classes.declared && (classes.list.len() > 2 || ds.labels.iter().any(|&l| l < -1)) {
        return Err(InputError::MoreClasses {
            path: path.into(),
            classes: classes.list.len(),
        });
    }
    ds.classes = classes;
    if ds.is_empty() {
        return Err(no_rows(path, &ds.skipped));
    }
    if ds.classes.declared {
        if !for_model {
            let counts = ds.class_counts();
            let missing: Vec<&str> = counts
                .iter()
                .filter(|(_, n)| *n == 0)
                .map(|(c, _)| *c)
                .collect();
            if !missing.is_empty() {
                return Err(InputError::ClassWithoutUnits {
                    path: path.into(),
                    missing: missing.join(", "),
                    counts: counts
                        .iter()
                        .map(|(c, n)| format!("{c} {n}"))
                        .collect::<Vec<_>>()
                        .join(", "),
                });
            }
        }
        return Ok(ds);
    }
    let go = ds.labels.iter().filter(|&&l| l > 0).count();
    if !for_model && (go == 0 || go == ds.len()) {
        return Err(InputError::OneClass {
            path: path.into(),
            rows: ds.len(),
            class: if go == 0 { NO_GO } else { GO },
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
    /// The unit's class code (`Classes::code`: +1 GO, −1 NO-GO), 0 without a label.
    pub label: i8,
    /// The unit id cell, if the log has a unit-id column.
    pub unit: Option<&'a [u8]>,
    /// The timestamp cell, if the log has a timestamp column and
    /// [`LogOptions::keep_times`] asks for it.
    pub time: Option<&'a [u8]>,
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
                time: row.time,
            })
        },
        None,
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
            format!(" ({} skipped as bad)", skipped.counted())
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
    let cols = header_columns(path, opts)?;
    Ok(cols
        .channels
        .iter()
        .map(|&c| cols.names[c].clone())
        .collect())
}

/// The columns of a log under `opts`, from its header (or a Parquet file's schema) alone.
pub(super) fn header_columns(path: &Path, opts: &LogOptions) -> Result<Columns, InputError> {
    crate::input::regular_file(path)?;
    let names = if super::parquet_file::is_parquet(path) {
        super::parquet_file::column_names(path)?
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
    Columns::resolve(path, names, opts, None)
}

/// Refuses a sheet channel that reads one column of the log under the name of another
/// column (any column of the header: a report's channel must not be taken for another
/// column), naming both.
fn no_alias_clash(path: &Path, cols: &Columns, sheet: &ChannelSheet) -> Result<(), InputError> {
    for &c in &cols.channels {
        let Some(s) = sheet.get(&cols.names[c]).filter(|s| s.column.is_some()) else {
            continue;
        };
        if let Some(other) = cols
            .names
            .iter()
            .enumerate()
            .find(|&(k, n)| k != c && same_name(n, &s.name))
        {
            return Err(InputError::AliasClash {
                path: path.into(),
                name: s.name.clone(),
                column: cols.names[c].clone(),
                other: other.1.clone(),
                position: other.0 + 1,
            });
        }
    }
    Ok(())
}

/// A channel column's smallest and largest reading.
pub struct ObservedColumn {
    /// The column, as the log spells it.
    pub column: String,
    /// Smallest reading.
    pub lo: f64,
    /// Largest reading.
    pub hi: f64,
}

/// Each channel column's smallest and largest reading under `opts`, as `train` observes
/// them before it scales a channel the sheet does not declare (the same rows: bad ones are
/// errors, or skipped and counted in `skipped` under `skip_bad_rows`), with the number of
/// rows read. The labels are read and checked as a training log's; the file is not hashed.
///
/// # Errors
/// The first [`InputError`] of the log; a log without rows.
pub fn observed_ranges(
    path: &Path,
    opts: &LogOptions,
    skipped: &mut SkipReport,
) -> Result<(Vec<ObservedColumn>, usize), InputError> {
    let names = header_channels(path, opts)?;
    let pass = observe_pass(path, opts, skipped, &mut None, 0, false)?;
    let ranges = names
        .into_iter()
        .zip(pass.ranges)
        .map(|(column, (lo, hi))| ObservedColumn { column, lo, hi })
        .collect();
    Ok((ranges, pass.rows))
}

/// What [`observe_pass`] found.
struct Observed {
    /// Each channel's smallest and largest reading, in channel order.
    ranges: Vec<(f64, f64)>,
    /// Rows read.
    rows: usize,
    /// The file's SHA-256 when hashed, else empty.
    digest: String,
}

/// The one pass that observes each channel's range over the rows `train` reads (bad rows
/// errors, or skipped and counted under `skip_bad_rows`), for [`observed_ranges`] and the
/// first pass of [`read_log`]. When `kept` holds rows, each row read is also kept there (as
/// the doubles parsed, with label, line, id and time) while its readings fit in `keep`
/// bytes; past that, `kept` becomes `None` and the caller converts in a second pass.
///
/// # Errors
/// The first [`InputError`]; more than `max_rows` rows while keeping; no rows.
fn observe_pass(
    path: &Path,
    opts: &LogOptions,
    skipped: &mut SkipReport,
    kept: &mut Option<Kept>,
    keep: usize,
    hash: bool,
) -> Result<Observed, InputError> {
    let mut ranges: Vec<(f64, f64)> = Vec::new();
    let mut rows = 0usize;
    // Both sinks update the ranges and the kept rows, one call at a time, in file order:
    // a run of good rows as slices, rows one by one only around a bad row.
    let state = std::sync::Mutex::new((&mut ranges, &mut rows, &mut *kept));
    let too_many = || InputError::TooManyRows {
        path: path.into(),
        max: opts.max_rows,
    };
    let observe = |ranges: &mut Vec<(f64, f64)>, values: &[f64]| {
        if ranges.is_empty() {
            *ranges = values.iter().map(|&v| (v, v)).collect();
        }
        for (r, &v) in ranges.iter_mut().zip(values) {
            r.0 = r.0.min(v);
            r.1 = r.1.max(v);
        }
    };
    let on_row = |_: &_, row: super::parse::Row<'_>| {
        let mut st = state.lock().map_err(|_| too_many())?;
        let (ranges, rows, kept) = &mut *st;
        observe(ranges, row.values);
        **rows += 1;
        if let Some(k) = kept.as_mut() {
            if k.rows.labels.len() >= opts.max_rows {
                return Err(too_many());
            }
            if (k.values.len() + row.values.len()) * 8 > keep {
                // Too long to keep: the second pass converts.
                **kept = None;
            } else {
                k.values.extend_from_slice(row.values);
                k.rows.labels.push(row.label);
                k.rows.lines.push(row.line);
                if let Some(u) = row.unit {
                    k.rows.unit_ids.push(u);
                }
                if let Some(t) = row.time {
                    k.rows.times.push(t);
                }
            }
        }
        Ok(())
    };
    let mut on_run = |cols: &Columns, p: &Parsed| -> Result<(), InputError> {
        let mut st = state.lock().map_err(|_| too_many())?;
        let (ranges, rows, kept) = &mut *st;
        let d = cols.channels.len().max(1);
        for values in p.values.chunks_exact(d) {
            observe(ranges, values);
        }
        **rows += p.labels.len();
        if let Some(k) = kept.as_mut() {
            // As row by row: the limit on rows first, then the budget (once over it,
            // nothing is kept whatever the order).
            if k.rows.labels.len() + p.labels.len() > opts.max_rows {
                return Err(too_many());
            }
            if (k.values.len() + p.values.len()) * 8 > keep {
                **kept = None;
            } else {
                k.values.extend_from_slice(&p.values);
                k.rows.labels.extend_from_slice(&p.labels);
                k.rows.lines.extend_from_slice(&p.lines);
                if cols.unit.is_some() {
                    k.rows.unit_ids.extend_packed(&p.unit_bytes, &p.unit_ends);
                }
                if cols.time.is_some() && opts.keep_times {
                    k.rows.times.extend_packed(&p.time_bytes, &p.time_ends);
                }
            }
        }
        Ok(())
    };
    let (cols, digest) = scan(
        path,
        opts,
        None,
        None,
        skipped,
        on_row,
        Some(&mut on_run),
        hash,
    )?;
    if rows == 0 {
        return Err(no_rows(path, skipped));
    }
    if let (None, Some(k)) = (cols.unit, kept.as_mut()) {
        k.rows.unit_ids.clear();
    }
    Ok(Observed {
        ranges,
        rows,
        digest,
    })
}
