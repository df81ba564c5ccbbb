//! The bytes of a signal log on their way to the CSV reader: hashed as they pass (the log is
//! read once for both), and checked where the CSV reader would hold or count them wrongly:
//! a line longer than the reader accepts, and a carriage return that ends a line without a
//! line feed (the CSV reader would end a record there without counting a line, so every
//! row of a CR-only file would be named line 1).

use std::io::Read;
use std::path::Path;

use sha2::{Digest, Sha256};

use crate::error::InputError;
use crate::ingest::options::LogOptions;

/// Hashes what passes through, so the log is read once for both, and refuses a line longer
/// than `max_line`: the CSV reader holds a whole record in memory, so a file of one endless
/// line must stop here, as the log reader stops it. Refuses a carriage return not followed
/// by a line feed too: the CSV reader would end a record there without counting a line, so
/// every row of a CR-only file would be named line 1 (the log reader refuses such files).
pub(super) struct Hashing<R> {
    inner: R,
    hasher: Option<Sha256>,
    max_line: usize,
    /// Bytes since the last line feed, and line feeds seen.
    since_lf: usize,
    lines: u64,
    /// The last byte read was a carriage return.
    cr: bool,
}

/// The line holding a carriage return without a line feed (in the io error's payload).
#[derive(Debug)]
struct BareCr(u64);

impl std::fmt::Display for BareCr {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "line {} holds a carriage return without a line feed",
            self.0
        )
    }
}

impl std::error::Error for BareCr {}

impl<R> Hashing<R> {
    /// Reads `inner`, hashing when `hash`, refusing lines longer than `max_line`.
    pub(super) fn new(inner: R, hash: bool, max_line: usize) -> Self {
        Self {
            inner,
            hasher: hash.then(Sha256::new),
            max_line,
            since_lf: 0,
            lines: 0,
            cr: false,
        }
    }

    /// The SHA-256 of what was read, in lower-case hex (empty when not hashing).
    pub(super) fn sha256(self) -> String {
        self.hasher
            .map_or(String::new(), |h| crate::digest::lower_hex(&h.finalize()))
    }
}

/// The line number of a line refused as too long (in the io error's payload).
#[derive(Debug)]
struct LongLine(u64);

impl std::fmt::Display for LongLine {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "line {} is too long", self.0)
    }
}

impl std::error::Error for LongLine {}

impl<R: Read> Read for Hashing<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        let got = &buf[..n];
        if let Some(h) = self.hasher.as_mut() {
            h.update(got);
        }
        // A CR is followed by an LF, in this read or (the last byte) the next; at the end
        // of the file by nothing, which is a bare CR too.
        let bare = (self.cr && got.first() != Some(&b'\n'))
            .then_some(0)
            .or_else(|| {
                memchr::memchr_iter(b'\r', got).find(|&i| i + 1 < n && got[i + 1] != b'\n')
            });
        if let Some(i) = bare {
            let before = memchr::memchr_iter(b'\n', &got[..i]).count() as u64;
            return Err(std::io::Error::other(BareCr(self.lines + before + 1)));
        }
        self.cr = got.last() == Some(&b'\r');
        match memchr::memrchr(b'\n', got) {
            Some(k) => {
                self.lines += memchr::memchr_iter(b'\n', got).count() as u64;
                self.since_lf = n - k - 1;
            }
            None => self.since_lf += n,
        }
        if self.since_lf > self.max_line {
            return Err(std::io::Error::other(LongLine(self.lines + 1)));
        }
        Ok(n)
    }
}

/// A read error: a line refused as too long, or holding a bare carriage return, names its
/// line; any other I/O error stays one.
pub(super) fn read_error(path: &Path, opts: &LogOptions, io: std::io::Error) -> InputError {
    let inner = io.get_ref();
    if let Some(&LongLine(line)) = inner.and_then(|r| r.downcast_ref::<LongLine>()) {
        return InputError::LineTooLong {
            path: path.into(),
            line,
            max: opts.max_line_len,
        };
    }
    if let Some(&BareCr(line)) = inner.and_then(|r| r.downcast_ref::<BareCr>()) {
        return InputError::BareCr {
            path: path.into(),
            line,
        };
    }
    InputError::io(path, io)
}

/// A read error of the CSV reader: an I/O error as [`read_error`], anything else is a
/// malformed file.
pub(super) fn csv_error(path: &Path, opts: &LogOptions, e: csv::Error) -> InputError {
    match e.into_kind() {
        csv::ErrorKind::Io(io) => read_error(path, opts, io),
        other => InputError::Format {
            path: path.into(),
            message: format!("cannot read a row: {other:?}"),
        },
    }
}
