//! Bench-log ingestion: CSV or TSV with a header row, streamed with the csv crate.
//!
//! Columns are found by name. The label column holds GO / NO-GO tokens
//! (case-insensitive); optional unit-id and timestamp columns are kept out of
//! the channels. Every channel cell must be a finite number. Problems are
//! reported with file, line and column; `skip_bad_rows` counts and skips
//! them instead.

use std::collections::BTreeMap;
use std::fs::File;
use std::io::{BufRead, BufReader, Read};
use std::path::Path;

use sha2::{Digest, Sha256};

use crate::dataset::Dataset;
use crate::error::InputError;
use crate::scaling::{ChannelScale, ChannelSheet};

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

/// Counts bytes for the progress bar and hashes them for provenance.
struct Tap<R> {
    inner: R,
    hasher: Sha256,
    bar: Option<indicatif::ProgressBar>,
}

impl<R: Read> Read for Tap<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.hasher.update(&buf[..n]);
        if let Some(b) = &self.bar {
            b.inc(n as u64);
        }
        Ok(n)
    }
}

struct Row<'r> {
    line: u64,
    values: &'r [f64],
    label: i8,
    unit: Option<&'r [u8]>,
}

/// Streams the log once, calling `on_row` for each good row. Returns the file's SHA-256.
fn scan(
    path: &Path,
    opts: &LogOptions,
    model: Option<&[ChannelScale]>,
    skipped: &mut SkipReport,
    mut on_row: impl FnMut(&Columns, Row<'_>) -> Result<(), InputError>,
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
    let mut tap = BufReader::with_capacity(
        1 << 20,
        Tap {
            inner: file,
            hasher: Sha256::new(),
            bar: bar.clone(),
        },
    );
    // A UTF-8 byte-order mark before the header is common in spreadsheet exports.
    if tap.fill_buf().map_err(io)?.starts_with(b"\xEF\xBB\xBF") {
        tap.consume(3);
    }
    let tsv = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("tsv") || e.eq_ignore_ascii_case("tab"));
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(if tsv { b'\t' } else { b',' })
        .has_headers(false)
        .flexible(true)
        .from_reader(tap);
    let mut rec = csv::ByteRecord::new();
    let csv_err = |e: csv::Error| match e.into_kind() {
        csv::ErrorKind::Io(e) => io(e),
        other => InputError::Format {
            path: path.into(),
            message: format!("{other:?}"),
        },
    };
    if !rdr.read_byte_record(&mut rec).map_err(csv_err)? {
        return Err(InputError::Empty { path: path.into() });
    }
    let names = rec
        .iter()
        .map(|f| std::str::from_utf8(f).map(|s| s.trim().to_string()))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|_| InputError::HeaderNotUtf8 { path: path.into() })?;
    let cols = Columns::resolve(path, names, opts, model)?;
    let mut values = vec![0f64; cols.channels.len()];
    let cell_text = |f: &[u8]| String::from_utf8_lossy(&f[..f.len().min(40)]).into_owned();
    loop {
        match rdr.read_byte_record(&mut rec) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => return Err(csv_err(e)),
        }
        let line = rec.position().map_or(0, |p| p.line());
        let parsed = (|| {
            if rec.as_slice().len() > opts.max_line_len {
                return Err(InputError::LineTooLong {
                    path: path.into(),
                    line,
                    max: opts.max_line_len,
                });
            }
            if rec.len() == 1 && rec.get(0).is_some_and(|f| f.is_empty()) {
                return Ok(None); // blank line
            }
            if rec.len() != cols.names.len() {
                return Err(InputError::Ragged {
                    path: path.into(),
                    line,
                    expected: cols.names.len(),
                    found: rec.len(),
                });
            }
            for (v, &c) in values.iter_mut().zip(&cols.channels) {
                let f = trim(rec.get(c).unwrap_or_default());
                let column = || cols.names[c].clone();
                if f.is_empty() {
                    return Err(InputError::Missing {
                        path: path.into(),
                        line,
                        column: column(),
                    });
                }
                let x: f64 = std::str::from_utf8(f)
                    .ok()
                    .and_then(|s| s.parse().ok())
                    .ok_or_else(|| InputError::NotNumeric {
                        path: path.into(),
                        line,
                        column: column(),
                        value: cell_text(f),
                    })?;
                if !x.is_finite() || x.abs() > MAX_READING {
                    return Err(InputError::NotFinite {
                        path: path.into(),
                        line,
                        column: column(),
                        value: cell_text(f),
                    });
                }
                *v = x;
            }
            let lf = trim(rec.get(cols.label).unwrap_or_default());
            let token = String::from_utf8_lossy(lf).to_lowercase();
            let label = if opts.go_labels.contains(&token) {
                1
            } else if opts.nogo_labels.contains(&token) {
                -1
            } else {
                return Err(InputError::UnknownLabel {
                    path: path.into(),
                    line,
                    column: cols.names[cols.label].clone(),
                    value: cell_text(lf),
                    go: opts.go_labels.join(", "),
                    nogo: opts.nogo_labels.join(", "),
                });
            };
            Ok(Some(label))
        })();
        let result = match parsed {
            Ok(None) => Ok(()),
            Ok(Some(label)) => {
                let unit = cols.unit.and_then(|u| rec.get(u)).map(trim);
                on_row(
                    &cols,
                    Row {
                        line,
                        values: &values,
                        label,
                        unit,
                    },
                )
            }
            Err(e) => Err(e),
        };
        match result {
            Ok(()) => {}
            Err(e) if opts.skip_bad_rows && is_row_error(&e) => skipped.add(&e),
            Err(e) => return Err(e),
        }
    }
    let tap = rdr.into_inner().into_inner();
    if let Some(b) = &tap.bar {
        b.finish_and_clear();
    }
    let hash = tap.hasher.finalize();
    Ok((cols, hash.iter().map(|b| format!("{b:02x}")).collect()))
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
        scan(path, opts, model, &mut skipped, |_, row| {
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
    let mut skipped = SkipReport::default();
    let (cols2, sha) = scan(path, opts, model, &mut skipped, |cols, row| {
        let d = ds.scales.len();
        for (i, (&v, s)) in row.values.iter().zip(&ds.scales).enumerate() {
            match s.to_raw(v) {
                Some(r) => ds.raw.push(r),
                None => {
                    ds.raw.truncate(ds.raw.len() - i);
                    return Err(InputError::OutOfRange {
                        path: path.into(),
                        line: row.line,
                        column: cols.names[cols.channels[i]].clone(),
                        value: v,
                        min: s.min,
                        max: s.max,
                    });
                }
            }
        }
        debug_assert_eq!(ds.raw.len() % d, 0);
        ds.labels.push(row.label);
        ds.lines.push(row.line);
        if let Some(u) = row.unit {
            ds.unit_ids.push(String::from_utf8_lossy(u).into_owned());
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
    let mut r = BufReader::new(file);
    if r.fill_buf()
        .map_err(|e| InputError::io(path, e))?
        .starts_with(b"\xEF\xBB\xBF")
    {
        r.consume(3);
    }
    let tsv = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("tsv") || e.eq_ignore_ascii_case("tab"));
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(if tsv { b'\t' } else { b',' })
        .has_headers(false)
        .flexible(true)
        .from_reader(r);
    let mut rec = csv::ByteRecord::new();
    match rdr.read_byte_record(&mut rec) {
        Ok(true) => {}
        Ok(false) => return Err(InputError::Empty { path: path.into() }),
        Err(e) => {
            return Err(InputError::Format {
                path: path.into(),
                message: e.to_string(),
            });
        }
    }
    let names = rec
        .iter()
        .map(|f| std::str::from_utf8(f).map(|s| s.trim().to_string()))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|_| InputError::HeaderNotUtf8 { path: path.into() })?;
    let cols = Columns::resolve(path, names, opts, None)?;
    Ok(cols
        .channels
        .iter()
        .map(|&c| cols.names[c].clone())
        .collect())
}
