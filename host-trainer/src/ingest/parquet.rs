//! Parquet logs: the columns a scan needs, decoded batch by batch (a row group at most at a
//! time) by the `parquet` crate, turned into the same rows a text log gives.
//!
//! Each value becomes the number its column's text export would parse to, so a Parquet log
//! and the same log as CSV give the same units, reading for reading:
//! - 64-bit floats are taken as they are;
//! - 32-bit floats as the shortest decimal that reads back to the same float (the number
//!   every tool prints for it), not as the binary value widened, which would differ from a
//!   CSV export in the ninth digit and could move a reading across a rounding boundary;
//! - integers exactly (any integer a reading can be, at most 1e15, is exact in an `f64`);
//!   with a sheet whose lsb is 1 and zero an integer, each raw count is the stored integer;
//! - decimals rounded once to the nearest `f64`, as parsing their text does;
//! - text cells parsed as in a text log (decimal comma under `--decimal-comma`).
//!
//! Labels, unit ids and timestamps are read through their text form (booleans as
//! `true`/`false`, timestamps in ISO 8601). A null cell is an empty one. A unit's line is
//! its row in the file plus 2: the line it has when the log is written as CSV with a header,
//! so reports name the same unit by the same line in either form.

use std::fs::File;
use std::path::Path;

use arrow_array::cast::AsArray;
use arrow_array::{Array, ArrayRef};
use arrow_buffer::ScalarBuffer;
use arrow_schema::DataType;
use parquet::arrow::ProjectionMask;
use parquet::arrow::arrow_reader::{
    ArrowReaderMetadata, ParquetRecordBatchReader, ParquetRecordBatchReaderBuilder,
};

use super::header::Columns;
use super::options::{LogOptions, is_reading};
use super::parquet_cells::{Numbers, blank, cell, numbers};
use super::parquet_file::{Opened, open};
use super::parse::{Row, label_cell, out_of_range, parse_number, raw_readings};
use super::skip::SkipReport;
use crate::error::{InputError, Place};
use crate::error::{empty_cell_hint, shown as shown_text};
use crate::ingest::classes::Classes;
use crate::ingest::scaling::ChannelScale;

/// Rows decoded at a time, per column: a slice of a row group, so that memory stays bounded
/// however large the groups are (pyarrow writes one group of a million rows by default).
/// Small enough that a column's buffers stay below the allocator's mapping threshold and
/// are reused, not mapped and faulted in afresh for every slice (5 % faster than 65,536).
const SLICE: usize = 16 * 1024;

/// One column of one slice of rows, decoded and, for channels and labels, converted in
/// the decoding task (in parallel with the other columns).
enum Decoded {
    /// A channel: its cells as numbers (NaN where null or not a number), their raw readings
    /// when the scan converts, the rows whose cell is refused (not finite, or outside the
    /// range), and the column itself for the message.
    Channel {
        values: ScalarBuffer<f64>,
        raw: Vec<i32>,
        bad: Vec<u32>,
        array: ArrayRef,
    },
    /// The label column: ±1 per row (0 where the token is unknown), the rows whose token is
    /// unknown, and the cells as text.
    Label {
        labels: Vec<i8>,
        bad: Vec<u32>,
        text: ArrayRef,
    },
    /// Unit id or timestamp, as text.
    Text(ArrayRef),
}

/// What the scan of a Parquet log needs to know, fixed before the first row group.
struct Plan<'a> {
    path: &'a Path,
    opts: &'a LogOptions,
    meta: ArrowReaderMetadata,
    cols: Columns,
    /// Each channel's conversion, in channel order.
    kinds: Vec<Numbers>,
    /// The timestamp column, when its cells are kept.
    time: Option<usize>,
    decimal_comma: bool,
    /// Convert to raw readings.
    scales: Option<&'a [ChannelScale]>,
    keep_faults: bool,
    /// First row of each row group, and one past the last row.
    group_starts: Vec<u64>,
    /// The columns read, in file order.
    used: Vec<usize>,
    /// The classes the label cells name.
    classes: Classes,
}

impl Plan<'_> {
    fn group_error(&self, group: usize, e: impl std::fmt::Display) -> InputError {
        InputError::Parquet {
            path: self.path.into(),
            at: format!("row group {group}"),
            message: e.to_string(),
        }
    }

    /// A page of column `c` in row group `g` could not be decoded (a damaged page, or one
    /// whose checksum does not match its bytes): the error names the column too.
    fn column_error(&self, group: usize, c: usize, e: impl std::fmt::Display) -> InputError {
        let message = e.to_string();
        let message = if message.contains("CRC checksum mismatch") {
            format!(
                "{message} (the page's bytes are not the ones written: the file is damaged; \
                 export it again)"
            )
        } else {
            message
        };
        InputError::Parquet {
            path: self.path.into(),
            at: format!(
                "row group {group}, column '{}'",
                self.cols.names.get(c).map_or("?", String::as_str)
            ),
            message,
        }
    }

    /// A reader of column `c` in row group `g`: one per column, so that the columns of a
    /// group decode in parallel.
    fn reader(&self, g: usize, c: usize) -> Result<ParquetRecordBatchReader, InputError> {
        let file = File::open(self.path).map_err(|e| InputError::io(self.path, e))?;
        let mask = ProjectionMask::roots(self.meta.parquet_schema(), [c]);
        ParquetRecordBatchReaderBuilder::new_with_metadata(file, self.meta.clone())
            .with_row_groups(vec![g])
            .with_projection(mask)
            .with_batch_size(SLICE)
            .build()
            .map_err(|e| self.column_error(g, c, e))
    }

    /// Converts column `c`'s cells of one slice.
    fn convert(&self, c: usize, array: ArrayRef, g: usize) -> Result<Decoded, InputError> {
        if let Some(j) = self.cols.channels.iter().position(|&k| k == c) {
            let values = numbers(&array, self.kinds[j], self.decimal_comma);
            let mut bad = Vec::new();
            let mut raw = Vec::new();
            let refused = |v: f64| !is_reading(v);
            match self.scales.and_then(|s| s.get(j)) {
                Some(s) => {
                    let mut out_of_range = Vec::new();
                    s.to_raw_slice(&values, &mut raw, &mut out_of_range);
                    // A refused value is bad, in range or not; one out of range is bad too,
                    // unless faults are kept as the raw count the device would read.
                    let mut out = out_of_range.into_iter().peekable();
                    for (i, (r, &v)) in raw.iter_mut().zip(values.iter()).enumerate() {
                        let outside = out.next_if_eq(&(i as u32)).is_some();
                        if refused(v) || (outside && !self.keep_faults) {
                            bad.push(i as u32);
                        } else if outside {
                            *r = s.raw_reading(v);
                        }
                    }
                }
                None => bad.extend(
                    values
                        .iter()
                        .enumerate()
                        .filter(|&(_, &v)| refused(v))
                        .map(|(i, _)| i as u32),
                ),
            }
            return Ok(Decoded::Channel {
                values,
                raw,
                bad,
                array,
            });
        }
        let text = arrow_cast::cast(&array, &DataType::Utf8).map_err(|e| self.group_error(g, e))?;
        if Some(c) != self.cols.label {
            return Ok(Decoded::Text(text));
        }
        let cells = text.as_string::<i32>();
        let mut bad = Vec::new();
        // A label column holds a few tokens over and over: a cell like the one before it
        // has its label.
        let mut last: (&[u8], Option<i8>) = (b"", None);
        let labels = (0..cells.len())
            .map(|i| {
                let token = cell(cells, i);
                if token != last.0 || i == 0 {
                    last = (token, self.classes.label(token));
                }
                last.1.unwrap_or_else(|| {
                    bad.push(i as u32);
                    0
                })
            })
            .collect();
        Ok(Decoded::Label { labels, bad, text })
    }

    /// Why cell `i` of channel `j`'s column `a` is not a reading: empty (null or blank
    /// text), not a number, or not finite.
    fn bad_cell(&self, j: usize, a: &ArrayRef, i: usize, at: Place) -> InputError {
        let path = self.path.into();
        let column = self.cols.names[self.cols.channels[j]].clone();
        let kind = self.kinds[j];
        let shown = arrow_cast::display::ArrayFormatter::try_new(a.as_ref(), &Default::default())
            .map(|f| f.value(i).to_string())
            .unwrap_or_default();
        let value = shown_text(shown.trim());
        if blank(a, i, kind) {
            let hint = empty_cell_hint(&column);
            return InputError::Missing {
                path,
                at,
                column,
                hint,
            };
        }
        if matches!(kind, Numbers::Text)
            && parse_number(value.as_bytes(), self.decimal_comma).is_none()
        {
            return InputError::NotNumeric {
                path,
                at,
                column,
                value,
            };
        }
        // A finite number too large to be a reading (integers and decimals): said as such,
        // and an integer beyond 2^53 as one no 64-bit float holds exactly.
        let v = numbers(&a.slice(i, 1), kind, self.decimal_comma)
            .first()
            .copied()
            .unwrap_or(f64::NAN);
        if v.is_finite() {
            let inexact = value
                .parse::<i128>()
                .is_ok_and(|n| n.unsigned_abs() > 1u128 << 53);
            return InputError::BeyondReading {
                path,
                at,
                column,
                value,
                inexact,
            };
        }
        InputError::NotFinite {
            path,
            at,
            column,
            value,
        }
    }

    /// The place of row `file_row`, which lies in row group `group`.
    fn place(&self, group: usize, file_row: u64) -> Place {
        Place::Row {
            // Each row group costs footer bytes: no file holds 2^32 of them.
            group: u32::try_from(group).unwrap_or(u32::MAX),
            row: file_row - self.group_starts[group],
            file_row,
        }
    }
}

/// The slices of a Parquet log, row group after row group.
struct Slices<'a> {
    plan: &'a Plan<'a>,
    /// The group being read, its column readers, and the rows read of it so far.
    group: usize,
    readers: Vec<ParquetRecordBatchReader>,
    done_rows: u64,
}

/// One slice of rows, decoded: its row group, first row in the file, and used columns.
struct Slice {
    group: usize,
    first: u64,
    len: usize,
    columns: Vec<Decoded>,
}

impl Slices<'_> {
    /// Decodes the next slice, its columns in parallel; `None` after the last row group.
    fn next(&mut self) -> Result<Option<Slice>, InputError> {
        use rayon::prelude::*;
        let plan = self.plan;
        let groups = plan.group_starts.len() - 1;
        loop {
            if self.group >= groups {
                return Ok(None);
            }
            let g = self.group;
            if self.readers.is_empty() {
                self.readers = plan
                    .used
                    .iter()
                    .map(|&c| plan.reader(g, c))
                    .collect::<Result<_, _>>()?;
                self.done_rows = 0;
            }
            let declared = plan.group_starts[g + 1] - plan.group_starts[g];
            // Every column's result first, then the first error in column order: a parallel
            // collect into a Result keeps whichever error came first in time, so two reads
            // of one damaged file could name different columns.
            let batches: Vec<Option<ArrayRef>> = self
                .readers
                .par_iter_mut()
                .zip(&plan.used)
                .map(|(r, &c)| {
                    // The parquet crate can panic on a damaged page (an `expect` on a
                    // dictionary the page never set): that is a damaged file, not a crash.
                    // The reader is dropped with the error, so its state after the panic
                    // is never used again.
                    std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| r.next()))
                        .unwrap_or_else(|_| {
                            Some(Err(arrow_schema::ArrowError::ParquetError(
                                "a page the reader cannot decode (the file is damaged)".into(),
                            )))
                        })
                        .transpose()
                        .map(|b| b.map(|b| b.column(0).clone()))
                        .map_err(|e| plan.column_error(g, c, e))
                })
                .collect::<Vec<_>>()
                .into_iter()
                .collect::<Result<_, _>>()?;
            let lens: Vec<Option<usize>> = batches
                .iter()
                .map(|b| b.as_ref().map(|a| a.len()))
                .collect();
            let len = lens.first().copied().flatten();
            if lens.iter().any(|&l| l != len) {
                return Err(
                    plan.group_error(g, "its columns hold different numbers of rows".to_string())
                );
            }
            let Some(len) = len else {
                if self.done_rows != declared {
                    return Err(plan.group_error(
                        g,
                        format!(
                            "its columns hold {} rows where the footer declares {declared}",
                            self.done_rows
                        ),
                    ));
                }
                self.readers.clear();
                self.group += 1;
                continue;
            };
            let first = plan.group_starts[g] + self.done_rows;
            self.done_rows += len as u64;
            if self.done_rows > declared {
                return Err(plan.group_error(
                    g,
                    format!("its columns hold more rows than the footer declares ({declared})"),
                ));
            }
            let columns = batches
                .into_par_iter()
                .zip(&plan.used)
                .map(|(a, &c)| match a {
                    Some(a) => plan.convert(c, a, g),
                    None => Err(plan.group_error(g, "a column ended before the others")),
                })
                .collect::<Vec<_>>()
                .into_iter()
                .collect::<Result<_, _>>()?;
            return Ok(Some(Slice {
                group: g,
                first,
                len,
                columns,
            }));
        }
    }
}

/// Streams a Parquet log once, calling `on_row` for each good row in file order, like the
/// text scan. Returns the columns and the file's SHA-256. Slice by slice: the columns of a
/// slice decode and convert in parallel while the rows of the one before are handed on, and
/// the file is hashed beside it all.
pub(super) fn scan_parquet(
    path: &Path,
    opts: &LogOptions,
    model: Option<&[ChannelScale]>,
    scales: Option<&[ChannelScale]>,
    skipped: &mut SkipReport,
    mut on_row: impl FnMut(&Columns, Row<'_>) -> Result<(), InputError> + Send,
    hash: bool,
) -> Result<(Columns, String), InputError> {
    let Opened { meta, names } = open(path)?;
    let cols = Columns::resolve(path, names, opts, model)?;
    let fields = meta.schema().fields().clone();
    let kinds = cols
        .channels
        .iter()
        .map(|&c| {
            let t = fields[c].data_type();
            Numbers::of(t).ok_or_else(|| InputError::ColumnType {
                path: path.into(),
                column: cols.names[c].clone(),
                found: format!("{t}"),
            })
        })
        .collect::<Result<Vec<_>, _>>()?;
    let time = cols.time.filter(|_| opts.keep_times);
    for c in [cols.label, cols.unit, time].into_iter().flatten() {
        let t = fields[c].data_type();
        if !arrow_cast::can_cast_types(t, &DataType::Utf8) {
            return Err(InputError::ColumnType {
                path: path.into(),
                column: cols.names[c].clone(),
                found: format!("{t}, which has no text form"),
            });
        }
    }
    // Only the columns used are decoded.
    let mut used: Vec<usize> = cols.channels.clone();
    used.extend([cols.label, cols.unit, time].into_iter().flatten());
    used.sort_unstable();
    used.dedup();
    let mut group_starts = vec![0u64];
    for g in meta.metadata().row_groups() {
        let end = group_starts.last().copied().unwrap_or(0);
        group_starts.push(end + u64::try_from(g.num_rows()).unwrap_or(0));
    }
    let total = group_starts.last().copied().unwrap_or(0);
    let d = cols.channels.len();
    let plan = Plan {
        path,
        opts,
        meta,
        cols,
        kinds,
        time,
        decimal_comma: opts.decimal_comma.unwrap_or(false),
        scales,
        keep_faults: model.is_some(),
        group_starts,
        used,
        classes: opts.classes(),
    };
    let bar = (opts.progress && total > 1_000_000).then(|| {
        let b = crate::progress::bar(
            total,
            "{msg} [{bar:30}] {human_pos}/{human_len} rows ({eta})",
        );
        b.set_message(format!("reading {}", path.display()));
        b
    });
    let mut rows = Rows {
        plan: &plan,
        values: vec![0.0; d],
        raw: vec![0; d],
    };
    let mut slices = Slices {
        plan: &plan,
        group: 0,
        readers: Vec::new(),
        done_rows: 0,
    };
    // Three workers: the decoder (its columns in parallel on the thread pool), a feeder
    // that hands rows on in file order, and the hasher. A bounded queue between decoder and
    // feeder keeps at most a few slices in memory.
    let (hash, read) = std::thread::scope(|scope| {
        let hasher = scope.spawn(|| {
            if hash {
                crate::digest::sha256_file(path)
            } else {
                Ok(String::new())
            }
        });
        let (tx, rx) = std::sync::mpsc::sync_channel::<Slice>(2);
        let bar = &bar;
        let feeder = scope.spawn(move || -> Result<(), InputError> {
            for slice in rx {
                rows.feed(&slice, skipped, &mut on_row)?;
                if let Some(b) = bar {
                    b.inc(slice.len as u64);
                }
            }
            Ok(())
        });
        let decoded = loop {
            match slices.next() {
                Ok(Some(slice)) => {
                    if tx.send(slice).is_err() {
                        // The feeder stopped at an error; it is the one to report.
                        break Ok(());
                    }
                }
                Ok(None) => break Ok(()),
                Err(e) => break Err(e),
            }
        };
        drop(tx);
        // Rows before a decoding error come first, with their own errors.
        let fed = feeder
            .join()
            .unwrap_or_else(|p| std::panic::resume_unwind(p));
        let read = fed.and(decoded);
        let hash = hasher
            .join()
            .unwrap_or_else(|p| std::panic::resume_unwind(p));
        (hash, read)
    });
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    read?;
    let hash = hash.map_err(|e| InputError::io(path, e))?;
    Ok((plan.cols, hash))
}

/// Turns decoded slices into rows.
struct Rows<'a> {
    plan: &'a Plan<'a>,
    values: Vec<f64>,
    raw: Vec<i32>,
}

impl Rows<'_> {
    /// Hands on the rows of `slice`: rows no column refused take the short way (their
    /// readings and label are already converted); the others are checked cell by cell, in
    /// column order, so that the error named is the one a text log would give.
    fn feed(
        &mut self,
        slice: &Slice,
        skipped: &mut SkipReport,
        on_row: &mut impl FnMut(&Columns, Row<'_>) -> Result<(), InputError>,
    ) -> Result<(), InputError> {
        let plan = self.plan;
        let cols = &plan.cols;
        let of = |c: usize| {
            plan.used
                .binary_search(&c)
                .ok()
                .and_then(|k| slice.columns.get(k))
        };
        let text = |c: Option<usize>| match c.and_then(of) {
            Some(Decoded::Text(a) | Decoded::Label { text: a, .. }) => Some(a.as_string::<i32>()),
            _ => None,
        };
        let (units, times) = (text(cols.unit), text(plan.time));
        let labels = match cols.label.and_then(of) {
            Some(Decoded::Label { labels, bad, text }) => {
                Some((labels.as_slice(), bad.as_slice(), text.as_string::<i32>()))
            }
            _ => None,
        };
        let mut channels: Vec<Channel<'_>> = Vec::with_capacity(cols.channels.len());
        let mut bad: Vec<u32> = labels.map(|l| l.1.to_vec()).unwrap_or_default();
        for &c in &cols.channels {
            if let Some(Decoded::Channel {
                values,
                raw,
                bad: b,
                array,
            }) = of(c)
            {
                channels.push(Channel {
                    values: &values[..],
                    raw,
                    array,
                });
                bad.extend_from_slice(b);
            }
        }
        bad.sort_unstable();
        bad.dedup();
        let mut bad = bad.into_iter().peekable();
        let convert = plan.scales.is_some();
        for i in 0..slice.len {
            let file_row = slice.first + i as u64;
            let checked = bad.next_if_eq(&(i as u32)).is_some();
            let label = if checked {
                for (v, ch) in self.values.iter_mut().zip(&channels) {
                    *v = ch.values.get(i).copied().unwrap_or(f64::NAN);
                }
                let at = plan.place(slice.group, file_row);
                self.check(&channels, labels.map(|l| cell(l.2, i)), i, at)
            } else {
                for (j, ch) in channels.iter().enumerate() {
                    if convert {
                        self.raw[j] = ch.raw.get(i).copied().unwrap_or(0);
                    } else {
                        self.values[j] = ch.values.get(i).copied().unwrap_or(f64::NAN);
                    }
                }
                Ok(Some(labels.map_or(0, |l| l.0.get(i).copied().unwrap_or(0))))
            };
            let out = match label {
                Ok(None) => {
                    skipped.empty_rows += 1;
                    Ok(())
                }
                Ok(Some(label)) => on_row(
                    cols,
                    Row {
                        // The line the unit has in the log written as CSV with a header.
                        line: file_row + 2,
                        values: if convert { &[] } else { &self.values },
                        raw: if convert { &self.raw } else { &[] },
                        label,
                        unit: units.map(|a| cell(a, i)),
                        time: times.map(|a| cell(a, i)),
                    },
                ),
                Err(e) => Err(e),
            };
            if let Err(e) = out {
                skipped.settle(plan.opts.skip_bad_rows, e)?;
            }
        }
        Ok(())
    }

    /// Checks row `i`, whose readings are in `self.values`, the way a text log's row is
    /// checked: its label (and raw readings in `self.raw`), `None` for a row with no cell
    /// filled, or the error for its first bad cell.
    fn check(
        &mut self,
        channels: &[Channel<'_>],
        label: Option<&[u8]>,
        i: usize,
        at: Place,
    ) -> Result<Option<i8>, InputError> {
        let plan = self.plan;
        let (path, cols, opts) = (plan.path, &plan.cols, plan.opts);
        // A row with no cell filled in the columns read is no unit.
        if self.values.iter().all(|v| v.is_nan())
            && label.is_none_or(<[u8]>::is_empty)
            && channels
                .iter()
                .zip(&plan.kinds)
                .all(|(ch, &k)| blank(ch.array, i, k))
        {
            return Ok(None);
        }
        for (j, &v) in self.values.iter().enumerate() {
            if !is_reading(v) {
                return Err(plan.bad_cell(j, channels[j].array, i, at));
            }
        }
        let label = match (label, cols.label) {
            (Some(t), Some(lc)) => label_cell(t, &plan.classes, opts, path, at, &cols.names[lc])?,
            _ => 0,
        };
        if let Some(s) = plan.scales {
            raw_readings(s, &self.values, &mut self.raw, plan.keep_faults)
                .map_err(|k| out_of_range(path, cols, s, &self.values, k, at))?;
        }
        Ok(Some(label))
    }
}

/// A channel's column of one slice, as [`Rows`] reads it.
struct Channel<'a> {
    values: &'a [f64],
    raw: &'a [i32],
    array: &'a ArrayRef,
}
