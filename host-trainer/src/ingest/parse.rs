//! One record to one row: cells to numbers (or raw counts), the label token to ±1, with
//! an error naming file, line and column for every cell that cannot be read.

use std::path::Path;

use super::fast;
use super::header::Columns;
use super::options::{LogOptions, is_reading, unmapped_label};
use super::records::{Fields, count_lf, fields, record_ends, strip_line_end};
use crate::error::{InputError, Place};
use crate::error::{empty_cell_hint, shown_bytes};
use crate::ingest::classes::Classes;
use crate::ingest::scaling::ChannelScale;

/// What the parser needs to know to turn a record into a row.
pub(super) struct Parser<'a> {
    pub(super) path: &'a Path,
    pub(super) opts: &'a LogOptions,
    pub(super) cols: &'a Columns,
    pub(super) delimiter: u8,
    /// A comma in a number is its decimal mark.
    pub(super) decimal_comma: bool,
    /// Convert to raw readings while parsing.
    pub(super) scales: Option<&'a [ChannelScale]>,
    /// Keep a reading outside its channel's range as the raw count the device would read
    /// (the kernel then FAULTs the unit), instead of refusing the row. Set for a trained
    /// model's scaling: the host must show every unit the device would see.
    pub(super) keep_faults: bool,
    /// The one-pass reader for plain records, when every channel allows it.
    pub(super) fast: Option<fast::FastPlan>,
    /// The classes the label cells name ([`LogOptions::classes`], built once).
    pub(super) classes: Classes,
}

/// A run of parsed records, in file order: values (or raw readings) row-major, and the errors,
/// each placed after the rows that precede it. Buffers are reused from block to block.
#[derive(Default)]
pub(super) struct Parsed {
    pub(super) values: Vec<f64>,
    pub(super) raw: Vec<i32>,
    pub(super) labels: Vec<i8>,
    pub(super) lines: Vec<u64>,
    pub(super) unit_bytes: Vec<u8>,
    pub(super) unit_ends: Vec<usize>,
    /// Timestamp cells, packed like the unit ids (only under `keep_times`).
    pub(super) time_bytes: Vec<u8>,
    pub(super) time_ends: Vec<usize>,
    /// Each error with the number of rows before it in this run.
    pub(super) errors: Vec<(usize, InputError)>,
    /// Rows with no cell filled, left out.
    pub(super) empty_rows: usize,
}

impl Parsed {
    pub(super) fn clear(&mut self) {
        self.values.clear();
        self.raw.clear();
        self.labels.clear();
        self.lines.clear();
        self.unit_bytes.clear();
        self.unit_ends.clear();
        self.time_bytes.clear();
        self.time_ends.clear();
        self.errors.clear();
        self.empty_rows = 0;
    }
}

/// Whether a record's cells are the header's names (ASCII case ignored): the header of a
/// second file inside a log joined by hand.
fn repeats_header(f: &Fields<'_>, names: &[String]) -> bool {
    f.len() >= names.len()
        && names
            .iter()
            .enumerate()
            .all(|(i, n)| trim(f.get(i)).eq_ignore_ascii_case(n.trim().as_bytes()))
}

impl Parser<'_> {
    /// Parses one record's fields into `values`; `Ok(None)` for a blank line.
    pub(super) fn record(
        &self,
        f: &Fields<'_>,
        raw_len: usize,
        line: u64,
        values: &mut [f64],
    ) -> Result<Option<i8>, InputError> {
        let (path, opts, cols) = (self.path, self.opts, self.cols);
        if raw_len > opts.max_line_len {
            return Err(InputError::LineTooLong {
                path: path.into(),
                line,
                max: opts.max_line_len,
            });
        }
        if (0..f.len()).all(|i| trim(f.get(i)).is_empty()) {
            return Ok(None);
        }
        // Cells under the header's trailing unnamed columns may be there, but empty.
        let extra_empty = f.len() > cols.names.len()
            && f.len() <= cols.width
            && (cols.names.len()..f.len()).all(|i| trim(f.get(i)).is_empty());
        if f.len() != cols.names.len() && !extra_empty {
            return Err(InputError::Ragged {
                hint: String::new(),
                path: path.into(),
                line,
                expected: cols.names.len(),
                found: f.len(),
            });
        }
        for (v, &c) in values.iter_mut().zip(&cols.channels) {
            let cell = trim(f.get(c));
            let column = || cols.names[c].clone();
            if cell.is_empty() {
                return Err(InputError::Missing {
                    path: path.into(),
                    at: line.into(),
                    column: column(),
                    hint: empty_cell_hint(&cols.names[c]),
                });
            }
            // fast-float2 parses the bytes directly (no UTF-8 pass) and accepts exactly a whole
            // decimal number, like str::parse, several times faster.
            let Some(x) = parse_number(cell, self.decimal_comma) else {
                // Logs joined by hand carry the second file's header as a row.
                if repeats_header(f, &cols.names) {
                    return Err(InputError::RepeatedHeader {
                        path: path.into(),
                        line,
                    });
                }
                return Err(InputError::NotNumeric {
                    path: path.into(),
                    at: line.into(),
                    column: column(),
                    value: cell_text(cell),
                });
            };
            if !is_reading(x) {
                return Err(InputError::NotFinite {
                    path: path.into(),
                    at: line.into(),
                    column: column(),
                    value: cell_text(cell),
                });
            }
            *v = x;
        }
        // A log without a label column gives every unit label 0 (unknown).
        let Some(lc) = cols.label else {
            return Ok(Some(0));
        };
        label_cell(
            trim(f.get(lc)),
            &self.classes,
            opts,
            path,
            line.into(),
            &cols.names[lc],
        )
        .map(Some)
    }

    /// Converts parsed readings to raw integers; a reading outside its channel's range is
    /// refused, or kept as the device's raw count under `keep_faults`.
    pub(super) fn to_raw(
        &self,
        scales: &[ChannelScale],
        vals: &[f64],
        out: &mut [i32],
        line: u64,
    ) -> Result<(), InputError> {
        raw_readings(scales, vals, out, self.keep_faults)
            .map_err(|k| out_of_range(self.path, self.cols, scales, vals, k, line.into()))
    }

    /// Parses whole records `bytes` (ending at record ends) whose first byte is on `first_line`
    /// into `out` (cleared first).
    /// `plain` says the bytes are known to hold no quote.
    pub(super) fn piece(&self, bytes: &[u8], first_line: u64, plain: bool, out: &mut Parsed) {
        let d = self.cols.channels.len();
        out.clear();
        let mut scratch = Scratch {
            vals: vec![0.0; d],
            raw_row: vec![0i32; d],
            owned: csv::ByteRecord::new(),
            ranges: Vec::with_capacity(self.cols.names.len()),
        };
        let mut line = first_line;
        // Without a quote in the run, a record is a line: the fast reader finds its end as it
        // goes, and hands what it cannot read to the general path.
        let fast = self
            .fast
            .as_ref()
            .filter(|_| plain || memchr::memchr(b'"', bytes).is_none());
        if let Some(f) = fast {
            let mut pos = 0;
            while pos < bytes.len() {
                let slot = if self.scales.is_some() {
                    fast::Out::Raw(grow(&mut out.raw, d))
                } else {
                    fast::Out::Values(grow(&mut out.values, d))
                };
                let end = match f.record_at(bytes, pos, slot) {
                    Some((r, end)) => {
                        if let Some((a, b)) = r.unit {
                            out.unit_bytes.extend_from_slice(&bytes[a..b]);
                            out.unit_ends.push(out.unit_bytes.len());
                        }
                        if let Some((a, b)) = r.time {
                            out.time_bytes.extend_from_slice(&bytes[a..b]);
                            out.time_ends.push(out.time_bytes.len());
                        }
                        out.labels.push(r.label);
                        out.lines.push(line);
                        end
                    }
                    None => {
                        out.raw.truncate(out.labels.len() * d);
                        out.values.truncate(out.labels.len() * d);
                        let end = memchr::memchr(b'\n', &bytes[pos..])
                            .map_or(bytes.len(), |k| pos + k + 1);
                        self.general(&bytes[pos..end], line, out, &mut scratch);
                        end
                    }
                };
                line += u64::from(bytes[end - 1] == b'\n');
                pos = end;
            }
            return;
        }
        let mut quote = false;
        let mut start = 0;
        // Records end at line feeds outside quotes; the last one may lack its line feed.
        let mut ends = record_ends(bytes, &mut quote);
        if ends.last() != Some(&bytes.len()) && !bytes.is_empty() {
            ends.push(bytes.len());
        }
        for end in ends {
            let raw = &bytes[start..end];
            start = end;
            self.general(raw, line, out, &mut scratch);
            line += count_lf(raw);
        }
    }

    /// Reads one record (with its line end) on `line` the general way, into `out`.
    pub(super) fn general(&self, raw: &[u8], line: u64, out: &mut Parsed, scratch: &mut Scratch) {
        let Scratch {
            vals,
            raw_row,
            owned,
            ranges,
        } = scratch;
        let parsed = match fields(strip_line_end(raw), self.delimiter, owned, ranges) {
            Ok(src) => {
                let f = Fields { src, ranges };
                let read = self.record(&f, raw.len(), line, vals).map_err(|mut e| {
                    if let InputError::Ragged { hint, .. } = &mut e {
                        if raw.iter().filter(|&&b| b == b'"').count() % 2 == 1 {
                            *hint = "; a quote opened here is never closed, so the rest of the file became this row".into();
                        } else if strip_line_end(raw).contains(&b'\r') {
                            *hint = "; the line holds a carriage return (CR) without a line feed: lines end only at a line feed (LF or CR LF), so a CR-only line end joins rows".into();
                        }
                    }
                    e
                });
                read.and_then(|label| {
                    if let (Some(_), Some(scales)) = (label, self.scales) {
                        self.to_raw(scales, vals, raw_row, line)?;
                    }
                    if let (Some(_), Some(u)) = (label, self.cols.unit) {
                        out.unit_bytes.extend_from_slice(trim(f.get(u)));
                        out.unit_ends.push(out.unit_bytes.len());
                    }
                    if let (Some(_), Some(t), true) = (label, self.cols.time, self.opts.keep_times)
                    {
                        out.time_bytes.extend_from_slice(trim(f.get(t)));
                        out.time_ends.push(out.time_bytes.len());
                    }
                    Ok(label)
                })
            }
            Err(message) => Err(InputError::Format {
                path: self.path.into(),
                message: format!("line {line}: {message}"),
            }),
        };
        match parsed {
            Ok(None) => out.empty_rows += 1,
            Ok(Some(label)) => {
                if self.scales.is_some() {
                    out.raw.extend_from_slice(raw_row);
                } else {
                    out.values.extend_from_slice(vals);
                }
                out.labels.push(label);
                out.lines.push(line);
            }
            Err(e) => out.errors.push((out.labels.len(), e)),
        }
    }
}

/// A cell as error messages show it: cut to a readable length, lossily decoded.
pub(super) fn cell_text(f: &[u8]) -> String {
    shown_bytes(f)
}

/// The label `token` (trimmed) of the label column `column` stands for, or the error naming
/// the place and the tokens accepted.
pub(super) fn label_cell(
    token: &[u8],
    classes: &Classes,
    opts: &LogOptions,
    path: &Path,
    at: Place,
    column: &str,
) -> Result<i8, InputError> {
    classes.label(token).ok_or_else(|| {
        if token.is_empty() {
            return InputError::Missing {
                path: path.into(),
                at,
                column: column.to_string(),
                hint: empty_label_hint(opts),
            };
        }
        match unmapped_label(token) {
            Some(boolean) => InputError::UnmappedLabel {
                path: path.into(),
                at,
                column: column.to_string(),
                value: cell_text(token),
                boolean,
            },
            None => InputError::UnknownLabel {
                path: path.into(),
                at,
                column: column.to_string(),
                value: cell_text(token),
                tokens: format!("{}; {}", classes.tokens(), classes.how_to_map()),
            },
        }
    })
}

/// What to do about an empty label cell.
pub(super) fn empty_label_hint(opts: &LogOptions) -> String {
    format!(
        "a unit needs its verdict: fill in a label ({}), or skip the row with --skip-bad-rows",
        opts.tokens()
    )
}

/// Converts readings to raw integers; a reading outside its channel's range is refused
/// (`Err` with its channel), or kept as the device's raw count under `keep_faults`.
pub(super) fn raw_readings(
    scales: &[ChannelScale],
    vals: &[f64],
    out: &mut [i32],
    keep_faults: bool,
) -> Result<(), usize> {
    for (k, ((o, &v), s)) in out.iter_mut().zip(vals).zip(scales).enumerate() {
        *o = match s.to_raw(v) {
            Some(r) => r,
            None if keep_faults => s.raw_reading(v),
            None => return Err(k),
        };
    }
    Ok(())
}

/// The error for channel `k`'s reading in `vals` being outside its range.
pub(super) fn out_of_range(
    path: &Path,
    cols: &Columns,
    scales: &[ChannelScale],
    vals: &[f64],
    k: usize,
    at: Place,
) -> InputError {
    let s = &scales[k];
    InputError::OutOfRange {
        path: path.into(),
        at,
        column: cols.names[cols.channels[k]].clone(),
        value: vals[k],
        min: s.min,
        max: s.max,
    }
}

/// One good row as a scan hands it on (a text log's or a Parquet log's).
pub(super) struct Row<'r> {
    pub(super) line: u64,
    pub(super) values: &'r [f64],
    /// Raw readings, when the scan was given the channel scaling (else empty).
    pub(super) raw: &'r [i32],
    pub(super) label: i8,
    pub(super) unit: Option<&'r [u8]>,
    /// The timestamp cell, under `keep_times`.
    pub(super) time: Option<&'r [u8]>,
}

/// Buffers the general path reuses from record to record.
pub(super) struct Scratch {
    pub(super) vals: Vec<f64>,
    pub(super) raw_row: Vec<i32>,
    pub(super) owned: csv::ByteRecord,
    pub(super) ranges: Vec<(usize, usize)>,
}

/// Appends `d` zeros to `v` and returns them, for the fast path to fill.
pub(super) fn grow<T: Copy + Default>(v: &mut Vec<T>, d: usize) -> &mut [T] {
    let n = v.len();
    v.resize(n + d, T::default());
    &mut v[n..]
}

/// A whole decimal number; with `decimal_comma`, one comma may stand for the decimal point
/// (`-5,25`), and a cell holding both marks is refused: thousands separators are not read,
/// since `1.234` would mean 1234 in one locale and 1.234 in another.
pub(super) fn parse_number(cell: &[u8], decimal_comma: bool) -> Option<f64> {
    if let Ok(x) = fast_float2::parse(cell) {
        return Some(x);
    }
    let comma = memchr::memchr(b',', cell)?;
    if !decimal_comma
        || memchr::memchr2(b',', b'.', &cell[comma + 1..]).is_some()
        || memchr::memchr(b'.', &cell[..comma]).is_some()
    {
        return None;
    }
    // No number needs more than 64 bytes; a longer cell is not one.
    let mut buf = [0u8; 64];
    let copy = buf.get_mut(..cell.len())?;
    copy.copy_from_slice(cell);
    copy[comma] = b'.';
    fast_float2::parse(copy).ok()
}

pub(super) fn trim(f: &[u8]) -> &[u8] {
    f.trim_ascii()
}
