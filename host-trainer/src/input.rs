//! Opening inputs: regular files only, and files read whole only up to a size their kind
//! can have, so a FIFO, a device or `/dev/zero` is refused at once instead of hanging or
//! filling memory.

use std::io::Read;
use std::path::Path;

use crate::error::InputError;

/// Largest model file, channel sheet or report read whole (a 32-channel model is a few KiB).
pub const MAX_TEXT_FILE: u64 = 16 << 20;

/// Largest blob or flash image read whole (a blob is at most a few KiB; HEX doubles it).
pub const MAX_IMAGE_FILE: u64 = 1 << 20;

/// Refuses anything but a regular file (a log is read more than once).
///
/// # Errors
/// [`InputError::Io`] if it cannot be examined, [`InputError::NotAFile`] if it is not a
/// regular file.
pub fn regular_file(path: &Path) -> Result<std::fs::Metadata, InputError> {
    let meta = std::fs::metadata(path).map_err(|e| InputError::io(path, e))?;
    if !meta.is_file() {
        return Err(InputError::NotAFile { path: path.into() });
    }
    Ok(meta)
}

/// Reads a regular file whole, refusing one larger than `max` bytes (`kind` names it in
/// the message).
///
/// # Errors
/// As [`regular_file`], [`InputError::TooLarge`], or an I/O error.
pub fn read_bounded(path: &Path, kind: &'static str, max: u64) -> Result<Vec<u8>, InputError> {
    let meta = regular_file(path)?;
    let too_large = |size| InputError::TooLarge {
        path: path.into(),
        kind,
        size,
        max,
    };
    if meta.len() > max {
        return Err(too_large(meta.len()));
    }
    let mut out = Vec::new();
    // The file may grow between the check and the read: read one byte past the limit.
    std::fs::File::open(path)
        .and_then(|f| f.take(max + 1).read_to_end(&mut out))
        .map_err(|e| InputError::io(path, e))?;
    if out.len() as u64 > max {
        return Err(too_large(out.len() as u64));
    }
    Ok(out)
}

/// [`read_bounded`] as UTF-8 text.
///
/// # Errors
/// As [`read_bounded`], or [`InputError::Format`] if the text is not UTF-8.
pub fn read_text(path: &Path, kind: &'static str, max: u64) -> Result<String, InputError> {
    String::from_utf8(read_bounded(path, kind, max)?).map_err(|_| InputError::Format {
        path: path.into(),
        message: format!("not a {kind}: the file is not UTF-8 text"),
    })
}
