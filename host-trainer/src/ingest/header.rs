//! The header row: its names, the delimiter, and which column is the label, the unit id,
//! the timestamp and each channel.

use std::path::Path;

use super::names::Lookup;
use super::options::{LABEL_NAMES, LogOptions, TIME_NAMES, UNIT_NAMES};
use super::records::{BlockReader, Fields, fields, record_ends, strip_line_end};
use crate::error::InputError;
use crate::ingest::scaling::ChannelScale;

pub(super) struct Columns {
    pub(super) names: Vec<String>,
    /// The label column; `None` only when the options allow a log without one.
    pub(super) label: Option<usize>,
    pub(super) unit: Option<usize>,
    /// The timestamp column, if any.
    pub(super) time: Option<usize>,
    pub(super) channels: Vec<usize>,
    /// Fields a record may have: the named columns and the header's trailing empty ones
    /// (spreadsheet exports), whose cells must then be empty.
    pub(super) width: usize,
}

impl Columns {
    pub(super) fn resolve(
        path: &Path,
        names: Vec<String>,
        opts: &LogOptions,
        model: Option<&[ChannelScale]>,
    ) -> Result<Self, InputError> {
        let look = Lookup::new(path, &names, &opts.ignore)?;
        // A log scored without verdicts (replay) may lack the label column a model records.
        let label_given = match &opts.label {
            Some(n) if opts.label_optional && look.find(n).is_none() => &None,
            given => given,
        };
        let label = match look.pick(label_given, LABEL_NAMES)? {
            Some(l) => Some(l),
            None if opts.label_optional => None,
            None => {
                return Err(InputError::NoLabel {
                    path: path.into(),
                    hint: header_hint(&names),
                });
            }
        };
        let unit = look.pick(&opts.unit_id, UNIT_NAMES)?;
        let time = look.pick(&opts.timestamp, TIME_NAMES)?;
        for n in &opts.ignore {
            look.find(n).ok_or_else(|| look.unknown(n))?;
        }
        let wanted: Option<Vec<String>> = match (model, &opts.channels) {
            (Some(m), _) => Some(m.iter().map(|c| c.log_column().to_string()).collect()),
            (None, Some(list)) => Some(list.clone()),
            (None, None) => None,
        };
        let channels = match wanted {
            Some(list) => look.columns(&list)?,
            None => (0..names.len())
                .filter(|&i| {
                    Some(i) != label
                        && Some(i) != unit
                        && Some(i) != time
                        && !look.ignored(&opts.ignore, i)
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
                detail: String::new(),
                max: shared_model::MAX_CHANNELS,
                hint: "choose with --channels",
            });
        }
        let width = names.len();
        Ok(Self {
            names,
            label,
            unit,
            time,
            channels,
            width,
        })
    }
}

/// The header record as read into the buffer.
pub(super) struct Header {
    pub(super) names: Vec<String>,
    /// Offset of the header's first byte (after a byte-order mark).
    pub(super) start: usize,
    /// Offset just past the header's line end.
    pub(super) end: usize,
    pub(super) delimiter: u8,
    /// Empty names at the header's end (a spreadsheet's unused columns), left out of `names`.
    pub(super) trailing_empty: usize,
}

/// Reads the first record (the header) into `buf`, refilling until it is complete.
pub(super) fn read_header(
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
    // Lines are counted by line feeds: a CR-only file would be one line of a header.
    if header.contains(&b'\r') {
        return Err(InputError::BareCr {
            path: path.into(),
            line: 1,
        });
    }
    let tsv = path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("tsv") || e.eq_ignore_ascii_case("tab"));
    let delimiter = match opts.delimiter {
        Some(d) => d,
        None if tsv => b'\t',
        None => detect_delimiter(header),
    };
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
    let mut names = (0..hf.len())
        .map(|i| std::str::from_utf8(hf.get(i)).map(|s| s.trim().to_string()))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|_| InputError::HeaderNotUtf8 { path: path.into() })?;
    let named = names
        .iter()
        .rposition(|n| !n.is_empty())
        .map_or(0, |k| k + 1);
    let trailing_empty = names.len() - named;
    names.truncate(named);
    Ok(Header {
        names,
        start,
        end,
        delimiter,
        trailing_empty,
    })
}

/// Delimiters a log may use, in the order that breaks a tie.
pub const DELIMITERS: [u8; 4] = [b',', b';', b'\t', b'|'];

/// The delimiter of a header row: the most frequent of [`DELIMITERS`] outside quotes; a
/// comma when none occurs (a one-column header).
pub(super) fn detect_delimiter(header: &[u8]) -> u8 {
    let mut counts = [0usize; DELIMITERS.len()];
    let mut quoted = false;
    for &b in header {
        if b == b'"' {
            quoted = !quoted;
        } else if !quoted && let Some(k) = DELIMITERS.iter().position(|&d| d == b) {
            counts[k] += 1;
        }
    }
    let mut best = 0;
    for k in 1..DELIMITERS.len() {
        if counts[k] > counts[best] {
            best = k;
        }
    }
    DELIMITERS[best]
}

/// Why a header may have no label column that a user would not guess: the file is
/// separated by something else, or its line ends are CR only.
fn header_hint(names: &[String]) -> String {
    let all = names.join(",");
    if all.contains('\r') {
        "; the header holds a carriage return inside it: the line ends look like CR only, and a log needs LF or CR LF line ends".into()
    } else if names.len() == 1 && all.contains(';') {
        "; the header is one column holding ';': the file looks semicolon-separated; leave --delimiter out to detect it, or pass --delimiter ';'".into()
    } else if names.len() == 1 && all.contains('\t') {
        "; the header is one column holding tabs: leave --delimiter out to detect it, or pass --delimiter tab".into()
    } else {
        String::new()
    }
}
