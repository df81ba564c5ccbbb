//! Blocks and records: a file read in blocks, records found at line feeds outside quotes,
//! and a record split into its fields (RFC 4180 quoting through the csv crate).

use std::fs::File;
use std::io::Read;

/// A record's fields as byte ranges of one buffer.
pub(super) struct Fields<'a> {
    pub(super) src: &'a [u8],
    pub(super) ranges: &'a [(usize, usize)],
}

impl Fields<'_> {
    pub(super) fn len(&self) -> usize {
        self.ranges.len()
    }

    pub(super) fn get(&self, i: usize) -> &[u8] {
        self.ranges
            .get(i)
            .map_or(&[][..], |&(a, b)| &self.src[a..b])
    }
}

/// Splits a record (without its line end) into fields: as ranges of `record` when it has no
/// quote, or of `owned` (filled by the csv crate, RFC 4180 quoting) when it has. Returns the
/// buffer the ranges index.
pub(super) fn fields<'b>(
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
pub(super) fn strip_line_end(r: &[u8]) -> &[u8] {
    let r = r.strip_suffix(b"\n").unwrap_or(r);
    r.strip_suffix(b"\r").unwrap_or(r)
}

/// Ends (exclusive offsets) of the complete records in `body`: a record ends at a line feed
/// outside quotes. `in_quote` carries the quote state in and out.
pub(super) fn record_ends(body: &[u8], in_quote: &mut bool) -> Vec<usize> {
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

pub(super) fn count_lf(b: &[u8]) -> u64 {
    memchr::memchr_iter(b'\n', b).count() as u64
}

/// Reads a file in blocks, advancing an optional progress bar.
pub(super) struct BlockReader {
    pub(super) file: File,
    pub(super) bar: Option<indicatif::ProgressBar>,
    pub(super) block: usize,
    pub(super) eof: bool,
}

impl BlockReader {
    /// Appends up to one block to `buf`; sets `eof` at the end of the file.
    pub(super) fn refill(&mut self, buf: &mut Vec<u8>) -> Result<(), std::io::Error> {
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
