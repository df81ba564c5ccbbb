//! Bench-log ingestion: CSV or TSV with a header row, streamed with the csv crate.
//!
//! Columns are found by name. The label column holds GO / NO-GO tokens
//! (case-insensitive); optional unit-id and timestamp columns are kept out of
//! the channels. Every channel cell must be a finite number. Problems are
//! reported with file, line and column; `skip_bad_rows` counts and skips
//! them instead.

use std::collections::BTreeMap;
use std::fs::File;
use std::io::Read;
use std::path::Path;

use sha2::{Digest, Sha256};

use crate::dataset::Dataset;
use crate::error::InputError;
use crate::scaling::{ChannelScale, ChannelSheet};

mod fast;

/// Readings beyond this magnitude are refused as not finite: no sensor reports 1e15 of anything.
pub const MAX_READING: f64 = 1e15;

/// Default GO tokens.
pub const GO_TOKENS: &[&str] = &["go", "pass", "ok", "good", "1", "true"];
/// Default NO-GO tokens.
pub const NOGO_TOKENS: &[&str] = &[
    "nogo", "no-go", "no_go", "fail", "ng", "bad", "reject", "0", "false",
];
/// Label column names looked for when none is given.
pub const LABEL_NAMES: &[&str] = &["label", "verdict", "result", "status"];
/// Unit-id column names looked for when none is given.
pub const UNIT_NAMES: &[&str] = &["unit_id", "unit", "serial"];
/// Timestamp column names looked for when none is given.
pub const TIME_NAMES: &[&str] = &["timestamp", "time", "date"];

/// How to read a bench log.
#[derive(Clone, Debug)]
pub struct LogOptions {
    /// Channel columns, in order; `None` means every remaining column.
    pub channels: Option<Vec<String>>,
    /// Label column; `None` looks for [`LABEL_NAMES`].
    pub label: Option<String>,
    /// Unit-id column; `None` looks for [`UNIT_NAMES`].
    pub unit_id: Option<String>,
    /// Timestamp column; `None` looks for [`TIME_NAMES`].
    pub timestamp: Option<String>,
    /// Columns to leave out.
    pub ignore: Vec<String>,
    /// GO tokens, lower case.
    pub go_labels: Vec<String>,
    /// NO-GO tokens, lower case.
    pub nogo_labels: Vec<String>,
    /// Skip and count bad rows instead of failing.
    pub skip_bad_rows: bool,
    /// Longest accepted line, in bytes.
    pub max_line_len: usize,
    /// Most units held in memory (4 bytes per reading each).
    pub max_rows: usize,
    /// Show a progress bar.
    pub progress: bool,
}

impl Default for LogOptions {
    fn default() -> Self {
        Self {
            channels: None,
            label: None,
            unit_id: None,
            timestamp: None,
            ignore: Vec::new(),
            go_labels: GO_TOKENS.iter().map(|s| s.to_string()).collect(),
            nogo_labels: NOGO_TOKENS.iter().map(|s| s.to_string()).collect(),
            skip_bad_rows: false,
            max_line_len: 1 << 20,
            max_rows: 50_000_000,
            progress: false,
        }
    }
}

/// Where channel scaling comes from.
#[derive(Clone, Copy, Debug)]
pub enum ScaleFrom<'a> {
    /// Observed ranges with headroom for every channel.
    Observed,
    /// A channel sheet; channels it does not declare use observed ranges.
    Sheet(&'a ChannelSheet),
    /// Exactly these channels and scalings (from a trained model).
    Model(&'a [ChannelScale]),
}

/// Rows skipped under `skip_bad_rows`, by reason.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct SkipReport {
    /// Rows skipped in all.
    pub total: usize,
    /// Count per reason.
    pub by_reason: BTreeMap<String, usize>,
    /// The first few messages, for the user to look at.
    pub examples: Vec<String>,
}

impl SkipReport {
    fn add(&mut self, e: &InputError) {
        self.total += 1;
        let reason = match e {
            InputError::Ragged { .. } => "ragged row",
            InputError::Missing { .. } => "empty cell",
            InputError::NotNumeric { .. } => "not a number",
            InputError::NotFinite { .. } => "not finite",
            InputError::OutOfRange { .. } => "outside valid range",
            InputError::UnknownLabel { .. } => "unknown label",
            InputError::LineTooLong { .. } => "line too long",
            _ => "other",
        };
        *self.by_reason.entry(reason.to_string()).or_default() += 1;
        if self.examples.len() < 5 {
            self.examples.push(e.to_string());
        }
    }
}

struct Columns {
    names: Vec<String>,
    label: usize,
    unit: Option<usize>,
    channels: Vec<usize>,
}

fn find(names: &[String], wanted: &str) -> Option<usize> {
    names.iter().position(|n| n.eq_ignore_ascii_case(wanted))
}

impl Columns {
    fn resolve(
        path: &Path,
        names: Vec<String>,
        opts: &LogOptions,
        model: Option<&[ChannelScale]>,
    ) -> Result<Self, InputError> {
        for (i, n) in names.iter().enumerate() {
            if names[..i].iter().any(|m| m == n) {
                return Err(InputError::DuplicateHeader {
                    path: path.into(),
                    name: n.clone(),
                });
            }
        }
        let unknown = |name: &str| InputError::UnknownColumn {
            path: path.into(),
            name: name.to_string(),
            columns: names.join(", "),
        };
        let pick =
            |given: &Option<String>, defaults: &[&str]| -> Result<Option<usize>, InputError> {
                match given {
                    Some(n) => find(&names, n).map(Some).ok_or_else(|| unknown(n)),
                    None => Ok(defaults.iter().find_map(|d| find(&names, d))),
                }
            };
        let label =
            pick(&opts.label, LABEL_NAMES)?.ok_or(InputError::NoLabel { path: path.into() })?;
        let unit = pick(&opts.unit_id, UNIT_NAMES)?;
        let time = pick(&opts.timestamp, TIME_NAMES)?;
        for n in &opts.ignore {
            find(&names, n).ok_or_else(|| unknown(n))?;
        }
        let wanted: Option<Vec<String>> = match (model, &opts.channels) {
            (Some(m), _) => Some(m.iter().map(|c| c.name.clone()).collect()),
            (None, Some(list)) => Some(list.clone()),
            (None, None) => None,
        };
        let channels = match wanted {
            Some(list) => list
                .iter()
                .map(|n| find(&names, n).ok_or_else(|| unknown(n)))
                .collect::<Result<_, _>>()?,
            None => (0..names.len())
                .filter(|&i| {
                    i != label
                        && Some(i) != unit
                        && Some(i) != time
                        && !opts
                            .ignore
                            .iter()
                            .any(|n| n.eq_ignore_ascii_case(&names[i]))
                })
                .collect::<Vec<_>>(),
        };
        if channels.is_empty() {
            return Err(InputError::NoChannels { path: path.into() });
        }
        if channels.len() > shared_model::MAX_CHANNELS {
            return Err(InputError::TooManyChannels {
                path: path.into(),
                count: channels.len(),
                max: shared_model::MAX_CHANNELS,
            });
        }
        Ok(Self {
            names,
            label,
            unit,
            channels,
        })
    }
}

/// Bytes read per block by the parallel reader.
const BLOCK: usize = 4 << 20;

struct Row<'r> {
    line: u64,
    values: &'r [f64],
    /// Raw readings, when the scan was given the channel scaling (else empty).
    raw: &'r [i32],
    label: i8,
    unit: Option<&'r [u8]>,
}

/// What the parser needs to know to turn a record into a row.
struct Parser<'a> {
    path: &'a Path,
    opts: &'a LogOptions,
    cols: &'a Columns,
    delimiter: u8,
    /// Convert to raw readings (and refuse out-of-range ones) while parsing.
    scales: Option<&'a [ChannelScale]>,
    /// The one-pass reader for plain records, when every channel allows it.
    fast: Option<fast::FastPlan>,
}

/// A run of parsed records, in file order: values (or raw readings) row-major, and the errors,
/// each placed after the rows that precede it. Buffers are reused from block to block.
#[derive(Default)]
struct Parsed {
    values: Vec<f64>,
    raw: Vec<i32>,
    labels: Vec<i8>,
    lines: Vec<u64>,
    unit_bytes: Vec<u8>,
    unit_ends: Vec<usize>,
    /// Each error with the number of rows before it in this run.
    errors: Vec<(usize, InputError)>,
}

impl Parsed {
    fn clear(&mut self) {
        self.values.clear();
        self.raw.clear();
        self.labels.clear();
        self.lines.clear();
        self.unit_bytes.clear();
        self.unit_ends.clear();
        self.errors.clear();
    }
}

/// A record's fields as byte ranges of one buffer.
struct Fields<'a> {
    src: &'a [u8],
    ranges: &'a [(usize, usize)],
}

impl Fields<'_> {
    fn len(&self) -> usize {
        self.ranges.len()
    }

    fn get(&self, i: usize) -> &[u8] {
        self.ranges
            .get(i)
            .map_or(&[][..], |&(a, b)| &self.src[a..b])
    }
}

/// Splits a record (without its line end) into fields: as ranges of `record` when it has no
/// quote, or of `owned` (filled by the csv crate, RFC 4180 quoting) when it has. Returns the
/// buffer the ranges index.
fn fields<'b>(
    record: &'b [u8],
    delimiter: u8,
    owned: &'b mut csv::ByteRecord,
    ranges: &mut Vec<(usize, usize)>,
) -> Result<&'b [u8], String> {
    ranges.clear();
    // Fields are short: a plain loop beats a vectorised search here.
    let mut start = 0;
    let mut quoted = false;
    for (k, &b) in record.iter().enumerate() {
        if b == delimiter {
            ranges.push((start, k));
            start = k + 1;
        } else if b == b'"' {
            quoted = true;
            break;
        }
    }
    if !quoted {
        ranges.push((start, record.len()));
        return Ok(record);
    }
    ranges.clear();
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(false)
        .flexible(true)
        .from_reader(record);
    rdr.read_byte_record(owned).map_err(|e| e.to_string())?;
    ranges.extend((0..owned.len()).filter_map(|i| owned.range(i).map(|r| (r.start, r.end))));
    Ok(owned.as_slice())
}

/// The record without its line end (`\n` or `\r\n`).
fn strip_line_end(r: &[u8]) -> &[u8] {
    let r = r.strip_suffix(b"\n").unwrap_or(r);
    r.strip_suffix(b"\r").unwrap_or(r)
}

/// Ends (exclusive offsets) of the complete records in `body`: a record ends at a line feed
/// outside quotes. `in_quote` carries the quote state in and out.
fn record_ends(body: &[u8], in_quote: &mut bool) -> Vec<usize> {
    if !*in_quote && memchr::memchr(b'"', body).is_none() {
        return memchr::memchr_iter(b'\n', body).map(|k| k + 1).collect();
    }
    let mut ends = Vec::new();
    for k in memchr::memchr2_iter(b'"', b'\n', body) {
        if body[k] == b'"' {
            *in_quote = !*in_quote;
        } else if !*in_quote {
            ends.push(k + 1);
        }
    }
    ends
}

fn count_lf(b: &[u8]) -> u64 {
    memchr::memchr_iter(b'\n', b).count() as u64
}

impl Parser<'_> {
    /// Parses one record's fields into `values`; `Ok(None)` for a blank line.
    fn record(
        &self,
        f: &Fields<'_>,
        raw_len: usize,
        line: u64,
        values: &mut [f64],
    ) -> Result<Option<i8>, InputError> {
        let (path, opts, cols) = (self.path, self.opts, self.cols);
        let cell_text = |f: &[u8]| String::from_utf8_lossy(&f[..f.len().min(40)]).into_owned();
        if raw_len > opts.max_line_len {
            return Err(InputError::LineTooLong {
                path: path.into(),
                line,
                max: opts.max_line_len,
            });
        }
        if f.len() == 1 && f.get(0).is_empty() {
            return Ok(None);
        }
        if f.len() != cols.names.len() {
            return Err(InputError::Ragged {
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
                    line,
                    column: column(),
                });
            }
            // fast-float2 parses the bytes directly (no UTF-8 pass) and accepts exactly a whole
            // decimal number, like str::parse, several times faster.
            let x: f64 = fast_float2::parse(cell).map_err(|_| InputError::NotNumeric {
                path: path.into(),
                line,
                column: column(),
                value: cell_text(cell),
            })?;
            if !x.is_finite() || x.abs() > MAX_READING {
                return Err(InputError::NotFinite {
                    path: path.into(),
                    line,
                    column: column(),
                    value: cell_text(cell),
                });
            }
            *v = x;
        }
        let lf = trim(f.get(cols.label));
        match label_of(lf, &opts.go_labels, &opts.nogo_labels) {
            Some(label) => Ok(Some(label)),
            None => Err(InputError::UnknownLabel {
                path: path.into(),
                line,
                column: cols.names[cols.label].clone(),
                value: cell_text(lf),
                go: opts.go_labels.join(", "),
                nogo: opts.nogo_labels.join(", "),
            }),
        }
    }

    /// Converts parsed readings to raw integers; refuses a reading outside its channel's range.
    fn to_raw(
        &self,
        scales: &[ChannelScale],
        vals: &[f64],
        out: &mut [i32],
        line: u64,
    ) -> Result<(), InputError> {
        for (k, ((o, &v), s)) in out.iter_mut().zip(vals).zip(scales).enumerate() {
            *o = s.to_raw(v).ok_or_else(|| InputError::OutOfRange {
                path: self.path.into(),
                line,
                column: self.cols.names[self.cols.channels[k]].clone(),
                value: v,
                min: s.min,
                max: s.max,
            })?;
        }
        Ok(())
    }

    /// Parses whole records `bytes` (ending at record ends) whose first byte is on `first_line`
    /// into `out` (cleared first).
    /// `plain` says the bytes are known to hold no quote.
    fn piece(&self, bytes: &[u8], first_line: u64, plain: bool, out: &mut Parsed) {
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
    fn general(&self, raw: &[u8], line: u64, out: &mut Parsed, scratch: &mut Scratch) {
        let Scratch {
            vals,
            raw_row,
            owned,
            ranges,
        } = scratch;
        let parsed = match fields(strip_line_end(raw), self.delimiter, owned, ranges) {
            Ok(src) => {
                let f = Fields { src, ranges };
                self.record(&f, raw.len(), line, vals).and_then(|label| {
                    if let (Some(_), Some(scales)) = (label, self.scales) {
                        self.to_raw(scales, vals, raw_row, line)?;
                    }
                    if let (Some(_), Some(u)) = (label, self.cols.unit) {
                        out.unit_bytes.extend_from_slice(trim(f.get(u)));
                        out.unit_ends.push(out.unit_bytes.len());
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
            Ok(None) => {}
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

/// Buffers the general path reuses from record to record.
struct Scratch {
    vals: Vec<f64>,
    raw_row: Vec<i32>,
    owned: csv::ByteRecord,
    ranges: Vec<(usize, usize)>,
}

/// Appends `d` zeros to `v` and returns them, for the fast path to fill.
fn grow<T: Copy + Default>(v: &mut Vec<T>, d: usize) -> &mut [T] {
    let n = v.len();
    v.resize(n + d, T::default());
    &mut v[n..]
}

/// Reads a file in blocks, advancing an optional progress bar.
struct BlockReader {
    file: File,
    bar: Option<indicatif::ProgressBar>,
    block: usize,
    eof: bool,
}

impl BlockReader {
    /// Appends up to one block to `buf`; sets `eof` at the end of the file.
    fn refill(&mut self, buf: &mut Vec<u8>) -> Result<(), std::io::Error> {
        // `read_to_end` fills spare capacity without zeroing it first; reserving the block
        // up front keeps it from doubling the buffer.
        buf.reserve(self.block);
        let n = (&mut self.file).take(self.block as u64).read_to_end(buf)?;
        if n < self.block {
            self.eof = true;
        }
        if let Some(b) = &self.bar {
            b.inc(n as u64);
        }
        Ok(())
    }
}

/// The header record as read into the buffer.
struct Header {
    names: Vec<String>,
    /// Offset of the header's first byte (after a byte-order mark).
    start: usize,
    /// Offset just past the header's line end.
    end: usize,
    delimiter: u8,
}

/// Reads the first record (the header) into `buf`, refilling until it is complete.
fn read_header(
    path: &Path,
    opts: &LogOptions,
    reader: &mut BlockReader,
    buf: &mut Vec<u8>,
) -> Result<Header, InputError> {
    let io = |e| InputError::io(path, e);
    reader.refill(buf).map_err(io)?;
    // A UTF-8 byte-order mark before the header is common in spreadsheet exports.
    let start = if buf.starts_with(b"\xEF\xBB\xBF") {
        3
    } else {
        0
    };
    let tsv = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("tsv") || e.eq_ignore_ascii_case("tab"));
    let delimiter = if tsv { b'\t' } else { b',' };
    let end = loop {
        let mut q = false;
        if let Some(&e) = record_ends(&buf[start..], &mut q).first() {
            break start + e;
        }
        if reader.eof {
            break buf.len();
        }
        if buf.len() > opts.max_line_len {
            return Err(InputError::LineTooLong {
                path: path.into(),
                line: 1,
                max: opts.max_line_len,
            });
        }
        reader.refill(buf).map_err(io)?;
    };
    let header = strip_line_end(&buf[start..end]);
    if header.is_empty() && end >= buf.len() {
        return Err(InputError::Empty { path: path.into() });
    }
    let mut owned = csv::ByteRecord::new();
    let mut ranges = Vec::new();
    let src = fields(header, delimiter, &mut owned, &mut ranges).map_err(|message| {
        InputError::Format {
            path: path.into(),
            message,
        }
    })?;
    let hf = Fields {
        src,
        ranges: &ranges,
    };
    let names = (0..hf.len())
        .map(|i| std::str::from_utf8(hf.get(i)).map(|s| s.trim().to_string()))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|_| InputError::HeaderNotUtf8 { path: path.into() })?;
    Ok(Header {
        names,
        start,
        end,
        delimiter,
    })
}

/// Streams the log once, calling `on_row` for each good row in file order. Returns the
/// file's SHA-256. The file is read in blocks; each block's complete records are split
/// into pieces parsed in parallel, then handed on in order.
fn scan(
    path: &Path,
    opts: &LogOptions,
    model: Option<&[ChannelScale]>,
    scales: Option<&[ChannelScale]>,
    skipped: &mut SkipReport,
    on_row: impl FnMut(&Columns, Row<'_>) -> Result<(), InputError> + Send,
) -> Result<(Columns, String), InputError> {
    scan_blocks(path, opts, model, scales, skipped, on_row, BLOCK)
}

/// [`scan`] with a given block size (small blocks exercise the block seams in tests).
fn scan_blocks(
    path: &Path,
    opts: &LogOptions,
    model: Option<&[ChannelScale]>,
    scales: Option<&[ChannelScale]>,
    skipped: &mut SkipReport,
    mut on_row: impl FnMut(&Columns, Row<'_>) -> Result<(), InputError> + Send,
    block: usize,
) -> Result<(Columns, String), InputError> {
    let io = |e| InputError::io(path, e);
    let file = File::open(path).map_err(io)?;
    let len = file.metadata().map(|m| m.len()).unwrap_or(0);
    let bar = (opts.progress && len > 16 << 20).then(|| {
        let b = indicatif::ProgressBar::new(len);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{msg} [{bar:30}] {bytes}/{total_bytes} ({eta})",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b.set_message(format!("reading {}", path.display()));
        b
    });
    let mut hasher = Sha256::new();
    let mut reader = BlockReader {
        file,
        bar: bar.clone(),
        block,
        eof: false,
    };
    let mut buf: Vec<u8> = Vec::new();
    // Bytes are hashed later, beside the parsing; `hashed` counts those already hashed.
    let mut hashed = 0usize;
    let Header {
        names,
        start: mut pos,
        end: header_end,
        delimiter,
    } = read_header(path, opts, &mut reader, &mut buf)?;
    let mut line = 1 + count_lf(&buf[pos..header_end]);
    pos = header_end;
    let cols = Columns::resolve(path, names, opts, model)?;
    let parser = Parser {
        path,
        opts,
        cols: &cols,
        delimiter,
        scales,
        fast: fast::FastPlan::new(&cols, scales, delimiter, opts),
    };
    // Hands on the rows of parsed runs in file order. A row's error is skipped and counted
    // under `skip_bad_rows`; any other error ends the scan.
    let mut feed = |runs: &mut [Parsed], skipped: &mut SkipReport| -> Result<(), InputError> {
        let d = cols.channels.len();
        let mut settle = |e: InputError| {
            if opts.skip_bad_rows && is_row_error(&e) {
                skipped.add(&e);
                Ok(())
            } else {
                Err(e)
            }
        };
        for parsed in runs {
            let mut errors = parsed.errors.drain(..).peekable();
            for k in 0..=parsed.labels.len() {
                while let Some((_, e)) = errors.next_if(|(at, _)| *at == k) {
                    settle(e)?;
                }
                let Some(&label) = parsed.labels.get(k) else {
                    break;
                };
                let row = Row {
                    line: parsed.lines[k],
                    values: parsed.values.get(k * d..(k + 1) * d).unwrap_or(&[]),
                    raw: parsed.raw.get(k * d..(k + 1) * d).unwrap_or(&[]),
                    label,
                    unit: parsed.unit_ends.get(k).map(|&e| {
                        let b = if k == 0 { 0 } else { parsed.unit_ends[k - 1] };
                        &parsed.unit_bytes[b..e]
                    }),
                };
                on_row(&cols, row).or_else(&mut settle)?;
            }
        }
        Ok(())
    };
    let pieces = rayon::current_num_threads() * 4;
    // Parsed runs are reused: fresh buffers for every block would cost page faults.
    let mut pool: Vec<Parsed> = Vec::new();
    // The previous block's parsed runs, handed on while the next block is parsed.
    let mut ready: Vec<Parsed> = Vec::new();
    let mut ready_len = 0usize;
    // The next block is read into `next` while this one is parsed and hashed.
    let mut next: Vec<u8> = Vec::new();
    let mut in_quote = false;
    let mut discarding = false; // inside an over-long line being skipped
    loop {
        let body = &buf[pos..];
        let mut q = in_quote;
        // Without a quote, record ends are line feeds, searched for only where needed;
        // with quotes, all record ends are listed.
        let plain = !in_quote && memchr::memchr(b'"', body).is_none();
        let mut ends = if plain {
            Vec::new()
        } else {
            record_ends(body, &mut q)
        };
        let (mut first_end, mut last_end) = if plain {
            let lf = |k: usize| k + 1;
            (
                memchr::memchr(b'\n', body).map(lf),
                memchr::memrchr(b'\n', body).map(lf),
            )
        } else {
            (ends.first().copied(), ends.last().copied())
        };
        if reader.eof && last_end != Some(body.len()) && !body.is_empty() {
            ends.push(body.len());
            last_end = Some(body.len());
            first_end = first_end.or(last_end);
        }
        // Complete records to parse now, as (start, end) of `buf`, split into pieces.
        let mut work: Vec<(usize, usize)> = Vec::new();
        let mut starts: Vec<u64> = Vec::new();
        if discarding {
            match first_end {
                Some(e) => {
                    line += count_lf(&body[..e]);
                    pos += e;
                    discarding = false;
                    in_quote = false;
                    continue;
                }
                None => {
                    pos = buf.len();
                    in_quote = q;
                }
            }
        } else if first_end.is_none() && body.len() > opts.max_line_len {
            // The rows before this line come first, errors included.
            feed(&mut ready[..ready_len], skipped)?;
            ready_len = 0;
            let e = InputError::LineTooLong {
                path: path.into(),
                line,
                max: opts.max_line_len,
            };
            if !opts.skip_bad_rows {
                return Err(e);
            }
            skipped.add(&e);
            discarding = true;
            line += count_lf(body);
            pos = buf.len();
            in_quote = q;
        } else if let Some(cut) = last_end {
            // Split the complete records into pieces of about equal size, at record ends.
            let step = cut / pieces + 1;
            let mut bounds = Vec::with_capacity(pieces + 1);
            if plain {
                let mut from = 0;
                while from < cut {
                    let e = memchr::memchr(b'\n', &body[(from + step).min(cut)..cut])
                        .map_or(cut, |k| (from + step).min(cut) + k + 1);
                    bounds.push(e);
                    from = e;
                }
            } else {
                let mut from = 0;
                for &e in &ends {
                    if e - from >= step || e == cut {
                        bounds.push(e);
                        from = e;
                    }
                }
            }
            // Line feeds per piece, counted in parallel, give each piece its first line.
            let mut from = 0;
            for e in bounds {
                work.push((pos + from, pos + e));
                from = e;
            }
            use rayon::prelude::*;
            let counts: Vec<u64> = work
                .par_iter()
                .map(|&(a, b)| count_lf(&buf[a..b]))
                .collect();
            for n in counts {
                starts.push(line);
                line += n;
            }
            pos += cut;
        }
        let done = reader.eof && pos >= buf.len();
        next.clear();
        next.extend_from_slice(&buf[pos..]);
        let carried = next.len();
        if pool.len() < work.len() {
            pool.resize_with(work.len(), Parsed::default);
        }
        let (unhashed, whole) = (&buf[hashed..], &buf[..]);
        // Four jobs at once: parse this block, hash it, read the next, and hand on the rows
        // of the previous one (in file order, so the first error is still the first).
        let ((), (read, fed)) = rayon::join(
            || {
                use rayon::prelude::*;
                rayon::join(
                    || {
                        pool.par_iter_mut()
                            .zip(work.par_iter().zip(&starts))
                            .for_each(|(out, (&(a, b), &first))| {
                                parser.piece(&whole[a..b], first, plain, out);
                            });
                    },
                    || hasher.update(unhashed),
                );
            },
            || {
                rayon::join(
                    || {
                        if done {
                            Ok(())
                        } else {
                            reader.refill(&mut next)
                        }
                    },
                    || feed(&mut ready[..ready_len], skipped),
                )
            },
        );
        fed?;
        read.map_err(io)?;
        std::mem::swap(&mut pool, &mut ready);
        ready_len = work.len();
        if done {
            feed(&mut ready[..ready_len], skipped)?;
            break;
        }
        std::mem::swap(&mut buf, &mut next);
        // The carried-over tail was hashed with the block it came from.
        hashed = carried;
        pos = 0;
    }
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let hash = hasher.finalize();
    Ok((cols, crate::float_model::lower_hex(&hash)))
}

/// The label `token` stands for, +1 GO or −1 NO-GO (lower-case `go` and `nogo` tokens,
/// compared case-insensitively), or `None`. ASCII tokens (the usual case) need no allocation.
fn label_of(token: &[u8], go: &[String], nogo: &[String]) -> Option<i8> {
    let is = |tokens: &[String]| {
        if token.is_ascii() {
            tokens
                .iter()
                .any(|t| t.as_bytes().eq_ignore_ascii_case(token))
        } else {
            let token = String::from_utf8_lossy(token).to_lowercase();
            tokens.contains(&token)
        }
    };
    if is(go) {
        Some(1)
    } else if is(nogo) {
        Some(-1)
    } else {
        None
    }
}

fn is_row_error(e: &InputError) -> bool {
    matches!(
        e,
        InputError::Ragged { .. }
            | InputError::Missing { .. }
            | InputError::NotNumeric { .. }
            | InputError::NotFinite { .. }
            | InputError::OutOfRange { .. }
            | InputError::UnknownLabel { .. }
            | InputError::LineTooLong { .. }
    )
}

fn trim(f: &[u8]) -> &[u8] {
    f.trim_ascii()
}

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
        scan(path, opts, model, None, &mut skipped, |_, row| {
            if ranges.is_empty() {
                ranges = row.values.iter().map(|&v| (v, v)).collect();
            }
            for (r, &v) in ranges.iter_mut().zip(row.values) {
                r.0 = r.0.min(v);
                r.1 = r.1.max(v);
            }
            rows += 1;
            Ok(())
        })?;
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
                Some(s) => Ok(s.clone()),
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
    if let Some(rows) = estimate_rows(path) {
        ds.raw.reserve_exact(rows * ds.scales.len());
        ds.labels.reserve_exact(rows);
        ds.lines.reserve_exact(rows);
    }
    let mut skipped = SkipReport::default();
    let scales = ds.scales.clone();
    let (cols2, sha) = scan(path, opts, model, Some(&scales), &mut skipped, |_, row| {
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
        Ok(())
    })?;
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
/// without holding the log in memory: for logs of any length. Returns the file's SHA-256.
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
    let (_, sha) = scan(path, opts, Some(scales), Some(scales), skipped, |_, row| {
        on_unit(StreamedUnit {
            line: row.line,
            raw: row.raw,
            label: row.label,
            unit: row.unit,
        })
    })?;
    Ok(sha)
}

/// Rows in the file, estimated from the first 256 KiB (2 % extra), or `None` for small files.
fn estimate_rows(path: &Path) -> Option<usize> {
    let len = std::fs::metadata(path).ok()?.len();
    if len < 1 << 20 {
        return None;
    }
    let mut head = vec![0u8; 256 << 10];
    let n = File::open(path).ok()?.read(&mut head).ok()?;
    let lines = head[..n].iter().filter(|&&b| b == b'\n').count().max(1);
    Some((len as f64 / (n as f64 / lines as f64) * 1.02) as usize + 16)
}

fn no_rows(path: &Path, skipped: &SkipReport) -> InputError {
    InputError::NoRows {
        path: path.into(),
        skipped: if skipped.total > 0 {
            format!(" ({} rows skipped as bad)", skipped.total)
        } else {
            String::new()
        },
    }
}

/// The channel names a log would use under `opts`, from its header alone.
///
/// # Errors
/// Header problems: empty file, duplicate or unknown names, no label.
pub fn header_channels(path: &Path, opts: &LogOptions) -> Result<Vec<String>, InputError> {
    let file = File::open(path).map_err(|e| InputError::io(path, e))?;
    let mut reader = BlockReader {
        file,
        bar: None,
        block: 64 << 10,
        eof: false,
    };
    let header = read_header(path, opts, &mut reader, &mut Vec::new())?;
    let cols = Columns::resolve(path, header.names, opts, None)?;
    Ok(cols
        .channels
        .iter()
        .map(|&c| cols.names[c].clone())
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// One row as seen by the callback: line, values, label, unit id.
    type Seen = (u64, Vec<f64>, i8, Option<Vec<u8>>);

    /// Every row seen by `scan_blocks` at a block size, the hash, and the rows skipped.
    fn rows(
        path: &Path,
        opts: &LogOptions,
        block: usize,
    ) -> Result<(Vec<Seen>, String, usize), String> {
        let mut out = Vec::new();
        let mut skipped = SkipReport::default();
        let (_, hash) = scan_blocks(
            path,
            opts,
            None,
            None,
            &mut skipped,
            |_, r| {
                out.push((
                    r.line,
                    r.values.to_vec(),
                    r.label,
                    r.unit.map(<[u8]>::to_vec),
                ));
                Ok(())
            },
            block,
        )
        .map_err(|e| e.to_string())?;
        Ok((out, hash, skipped.total))
    }

    #[test]
    fn block_seams_quotes_and_crlf_give_the_same_rows_as_one_block() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.csv");
        let mut text = String::from("\u{feff}unit_id,a,b,label\r\n");
        for i in 0..300 {
            let unit = if i == 200 {
                "\"U,200\"".to_string()
            } else {
                format!("U{i}")
            };
            let blank = if i % 97 == 0 { "\r\n" } else { "" };
            let bad = if i == 150 { "x" } else { "" };
            text.push_str(&format!(
                "{blank}{unit},{i}.5{bad},{},{}\r\n",
                -i,
                if i % 3 == 0 { "NO-GO" } else { "GO" }
            ));
        }
        std::fs::write(&path, &text).unwrap();
        let opts = LogOptions {
            skip_bad_rows: true,
            ..LogOptions::default()
        };
        let whole = rows(&path, &opts, 1 << 20).unwrap();
        assert_eq!(whole.0.len(), 299);
        assert_eq!(whole.0[0].0, 3, "U0 follows the header and a blank line");
        assert_eq!(
            whole.0[199].3.as_deref(),
            Some(&b"U,200"[..]),
            "quoted unit id (U150 was skipped)"
        );
        assert_eq!(whole.2, 1, "the bad row is skipped and counted");
        assert_eq!(whole.1, crate::workflow::sha256_hex(text.as_bytes()));
        for block in [7, 64, 100, 1000] {
            let got = rows(&path, &opts, block).unwrap();
            let first_diff = got.0.iter().zip(&whole.0).position(|(a, b)| a != b);
            assert!(
                got == whole,
                "block size {block}: {} vs {} rows, first difference at {first_diff:?}",
                got.0.len(),
                whole.0.len()
            );
        }
        // Without skipping, every block size reports the same first error, at the same line.
        let strict = LogOptions::default();
        let want = rows(&path, &strict, 1 << 20).unwrap_err();
        // U150 is on line 154: header, then blank lines before U0 and U97.
        assert!(want.contains("line 154, column 'a'"), "{want}");
        for block in [7, 64, 100, 1000] {
            assert_eq!(
                rows(&path, &strict, block).unwrap_err(),
                want,
                "block size {block}"
            );
        }
    }

    /// `bytes` as records of `unit_id,a,note,b,label` (note ignored) read with the fast path
    /// (told the bytes hold no quote if `plain`) and by the general path alone, as raw counts
    /// or, without `raw`, as physical values.
    fn both_paths(opts: &LogOptions, bytes: &[u8], plain: bool, raw: bool) -> (Parsed, Parsed) {
        let names: Vec<String> = ["unit_id", "a", "note", "b", "label"]
            .map(String::from)
            .to_vec();
        let path = Path::new("log.csv");
        let cols = Columns::resolve(path, names, opts, None).unwrap();
        let sheet = [
            ChannelScale::new("a", "", -100.0, 100.0, 0.01, 0.0).unwrap(),
            ChannelScale::new("b", "", 0.0, 5000.0, 1.0, 0.0).unwrap(),
        ];
        let scales = raw.then_some(&sheet[..]);
        let fast = fast::FastPlan::new(&cols, scales, b',', opts);
        assert!(fast.is_some(), "both channels are plain decimal shifts");
        let parser = |fast| Parser {
            path,
            opts,
            cols: &cols,
            delimiter: b',',
            scales,
            fast,
        };
        let (mut p, mut q) = (Parsed::default(), Parsed::default());
        parser(fast).piece(bytes, 2, plain, &mut p);
        parser(None).piece(bytes, 2, false, &mut q);
        (p, q)
    }

    /// What a run of records parses to: rows, unit ids and errors (as text).
    #[derive(Debug, PartialEq)]
    struct View {
        raw: Vec<i32>,
        /// Values by their bits: -0.0 and 0.0 must agree too.
        values: Vec<u64>,
        labels: Vec<i8>,
        lines: Vec<u64>,
        units: Vec<u8>,
        unit_ends: Vec<usize>,
        errors: Vec<(usize, String)>,
    }

    fn parsed_view(p: &Parsed) -> View {
        View {
            raw: p.raw.clone(),
            values: p.values.iter().map(|v| v.to_bits()).collect(),
            labels: p.labels.clone(),
            lines: p.lines.clone(),
            units: p.unit_bytes.clone(),
            unit_ends: p.unit_ends.clone(),
            errors: p.errors.iter().map(|(k, e)| (*k, e.to_string())).collect(),
        }
    }

    proptest::proptest! {
        /// On any bytes from the alphabet of bench logs, the fast path reads what the general
        /// path reads.
        #[test]
        fn fast_path_agrees_on_arbitrary_bytes(
            bytes in proptest::collection::vec(proptest::sample::select(
                b"0123456789012345678901234567890123456789.-,,,,,,,\n\n\r \"eEGOgoNU+x\xc3\xbc".to_vec()
            ), 0..400),
            plain in proptest::bool::ANY,
            raw in proptest::bool::ANY,
        ) {
            let opts = LogOptions {
                ignore: vec!["note".into()],
                max_line_len: 30,
                ..LogOptions::default()
            };
            // `plain` may only be claimed for bytes without quotes.
            let plain = plain && !bytes.contains(&b'"');
            let (p, q) = both_paths(&opts, &bytes, plain, raw);
            proptest::prop_assert_eq!(parsed_view(&p), parsed_view(&q));
        }

        /// Records built from cells of every kind, good and bad, read alike by both paths.
        #[test]
        fn fast_path_agrees_on_records_of_any_cells(
            records in proptest::collection::vec((
                proptest::collection::vec(proptest::sample::select(vec![
                    // Good cells often, so that many records are good rows.
                    "1", "12.34", "17", "GO", "no-go", "1", "12.34", "17", "GO", "no-go",
                    "1", "12.34", "17", "GO", "no-go", "-0.5", "100", "5000", "0", "-0",
                    "12.345", "1e1", " 5", "5 ", "", "x", ".5", "5.", "+5", " GO", "gö",
                    "maybe", "\"3,4\"", "99999999999999999999", "0.0000001",
                ]), 4..6),
                proptest::sample::select(vec!["\n", "\r\n", "\r", "\r\r\n", ""]),
            ), 0..40),
            raw in proptest::bool::ANY,
        ) {
            let opts = LogOptions {
                ignore: vec!["note".into()],
                max_line_len: 40,
                ..LogOptions::default()
            };
            let mut text = String::new();
            for (cells, end) in &records {
                text.push_str(&cells.join(","));
                text.push_str(if end.is_empty() { "\n" } else { end });
            }
            let plain = !text.contains('"');
            let (p, q) = both_paths(&opts, text.as_bytes(), plain, raw);
            proptest::prop_assert_eq!(parsed_view(&p), parsed_view(&q));
        }
    }

    #[test]
    fn fast_and_general_paths_read_the_same_rows_and_errors() {
        use rand::{Rng, SeedableRng};
        let opts = LogOptions {
            ignore: vec!["note".into()],
            max_line_len: 40,
            ..LogOptions::default()
        };
        // Every kind of cell the fast path must either read exactly or hand on.
        let a_cells = [
            "12.34", "-0.5", "100", "-100.00", "12.345", "12.355", "1e1", " 5", "5 ", "", "x",
            "100.01", ".5", "5.", "+5", "-0", "0.00", "99.99",
        ];
        let b_cells = ["0", "5000", "5001", "17", "17.0", "-1", "4999"];
        let labels = ["GO", "no-go", "Pass", " GO", "maybe", "gö", "NG", "0"];
        let units = ["U1", " U2", "U3 ", "", "ü4"];
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let mut text = String::new();
        for _ in 0..3000 {
            // Mostly plain cells, some of every other kind.
            let mut cell = |plain: &'static str, others: &[&'static str]| {
                if rng.gen_bool(0.6) {
                    plain
                } else {
                    others[rng.gen_range(0..others.len())]
                }
            };
            let (a, b) = (cell("12.34", &a_cells), cell("17", &b_cells));
            let (l, u) = (cell("GO", &labels), cell("U1", &units));
            match rng.gen_range(0..20) {
                0 => text.push('\n'),
                1 => text.push_str(&format!("{u},{a},n,{b}\n")),
                2 => text.push_str(&format!("{u},{a},n,{b},{l},extra\n")),
                3 => text.push_str(&format!("{u},{a},n,{b},{l}\r\n")),
                4 => text.push_str(&format!("{u},{a},n,{b},{l}\r\r\n")),
                5 => text.push_str(&format!("{u}\r,{a},n,{b},{l}\n")),
                6 => text.push_str(&format!("{u},{a},n,{b},{l}{}\n", " ".repeat(30))),
                _ => text.push_str(&format!("{u},{a},n,{b},{l}\n")),
            }
        }
        // The run may end without a line feed, even in a CR.
        text.push_str("U9,1.5,n,2,GO\r");
        let (p, q) = both_paths(&opts, text.as_bytes(), false, true);
        let (pv, qv) = both_paths(&opts, text.as_bytes(), false, false);
        assert_eq!(parsed_view(&pv), parsed_view(&qv), "as physical values");
        assert!(pv.values.len() > 2000, "most rows are good as values too");
        assert!(p.labels.len() > 1000, "most rows are good");
        assert!(q.errors.len() > 100, "the bad rows are there");
        assert_eq!(parsed_view(&p), parsed_view(&q));
        assert_eq!(p.labels.last(), Some(&1), "the last record is read");
        assert!(
            q.errors
                .iter()
                .any(|(_, e)| matches!(e, InputError::LineTooLong { .. }))
        );
    }

    #[test]
    fn an_over_long_line_comes_after_the_errors_before_it() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("log.csv");
        // The bad row right before the long line is parsed in the block before the one where
        // the long line is found.
        let mut text = String::from("a,label\n");
        for i in 0..200 {
            text.push_str(&format!("{i},NO-GO\n"));
        }
        text.push_str("x,GO\n");
        text.push_str(&"9".repeat(500));
        text.push_str(",GO\n7,GO\n");
        std::fs::write(&path, &text).unwrap();
        let strict = LogOptions {
            max_line_len: 100,
            ..LogOptions::default()
        };
        for block in [64, 256, 1 << 20] {
            let e = rows(&path, &strict, block).unwrap_err();
            assert!(e.contains("line 202"), "block {block}: {e}");
            let skip = LogOptions {
                skip_bad_rows: true,
                ..strict.clone()
            };
            let mut skipped = SkipReport::default();
            scan_blocks(&path, &skip, None, None, &mut skipped, |_, _| Ok(()), block).unwrap();
            assert_eq!(skipped.total, 2, "block {block}");
            assert!(
                skipped.examples[0].contains("line 202"),
                "{:?}",
                skipped.examples
            );
            assert!(
                skipped.examples[1].contains("line 203"),
                "{:?}",
                skipped.examples
            );
        }
    }
}
