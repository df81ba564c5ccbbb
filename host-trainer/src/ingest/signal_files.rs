//! A signal log held as several files: a folder of files (one unit each, or a few units
//! each), read one after the other in the order of their paths as one log.
//!
//! [`signal_log_files`] expands a folder: every regular file in it and in its sub-folders
//! (a station's `pass/` and `fail/`), sorted by path inside the folder, names compared
//! byte by byte; files and folders whose name begins with a dot (a desktop's `.DS_Store`,
//! an editor's swap file) are not logs and are left out. A plain file is itself.
//!
//! The log's SHA-256 ([`log_digest`]) is the file's own for a single file, and for several
//! the SHA-256 of a list with one line per file, `<sha256>  <path>\n`, the path relative
//! to the folder (the form `sha256sum` prints), so that renaming, adding or changing a file
//! changes the log's identity.

use std::path::{Path, PathBuf};

use crate::error::InputError;

/// The files of the signal log at `path`: the file itself, or a folder's files (see the
/// module documentation), in the order they are read.
///
/// # Errors
/// I/O; a folder holding no file.
pub fn signal_log_files(path: &Path) -> Result<Vec<PathBuf>, InputError> {
    let meta = std::fs::metadata(path).map_err(|e| InputError::io(path, e))?;
    if !meta.is_dir() {
        return Ok(vec![path.to_path_buf()]);
    }
    let mut files = Vec::new();
    walk(path, &mut files)?;
    if files.is_empty() {
        return Err(InputError::Format {
            path: path.into(),
            message: "the folder holds no log file (files and folders whose name begins with a dot are left out)".into(),
        });
    }
    // Sorted by the path inside the folder, component by component.
    files.sort_by(|a, b| a.components().cmp(b.components()));
    Ok(files)
}

fn walk(dir: &Path, out: &mut Vec<PathBuf>) -> Result<(), InputError> {
    let entries = std::fs::read_dir(dir).map_err(|e| InputError::io(dir, e))?;
    for e in entries {
        let e = e.map_err(|e| InputError::io(dir, e))?;
        let p = e.path();
        if e.file_name().as_encoded_bytes().first() == Some(&b'.') {
            continue;
        }
        let meta = std::fs::metadata(&p).map_err(|err| InputError::io(&p, err))?;
        if meta.is_dir() {
            walk(&p, out)?;
        } else {
            // Not a regular file (a FIFO, a device): refused when it is read.
            out.push(p);
        }
    }
    Ok(())
}

/// The SHA-256 of the log `name` made of `files` with the SHA-256s `digests` (see the
/// module documentation); empty when the digests are (no digest asked for).
pub fn log_digest(name: &Path, files: &[PathBuf], digests: &[String]) -> String {
    if digests.iter().any(String::is_empty) {
        return String::new();
    }
    match (files, digests) {
        ([one], [d]) if one == name => d.clone(),
        _ => {
            let mut list = String::new();
            for (f, d) in files.iter().zip(digests) {
                let shown = f.strip_prefix(name).unwrap_or(f);
                list.push_str(&format!("{d}  {}\n", shown.display()));
            }
            crate::digest::sha256_hex(list.as_bytes())
        }
    }
}
