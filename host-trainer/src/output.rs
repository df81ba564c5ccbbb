//! Atomic output: write to a temporary file beside the target, then rename.
//! A failed run leaves no partial file, and an existing file survives unless `force`.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::OutputError;

/// Files to write together: checked for clobbering first, then each written atomically.
#[derive(Default)]
pub struct OutputSet {
    files: Vec<(PathBuf, Vec<u8>)>,
}

impl OutputSet {
    /// Queues a file.
    pub fn add(&mut self, path: impl Into<PathBuf>, bytes: impl Into<Vec<u8>>) {
        self.files.push((path.into(), bytes.into()));
    }

    /// Paths queued, in order.
    pub fn paths(&self) -> impl Iterator<Item = &Path> {
        self.files.iter().map(|(p, _)| p.as_path())
    }

    /// Writes every queued file; refuses before writing anything if one exists and `force` is off.
    ///
    /// # Errors
    /// [`OutputError::Exists`] or the first I/O failure.
    pub fn commit(self, force: bool) -> Result<Vec<PathBuf>, OutputError> {
        if let Some((p, _)) = self
            .files
            .iter()
            .find(|(p, _)| p.exists())
            .filter(|_| !force)
        {
            return Err(OutputError::Exists(p.clone()));
        }
        let mut written = Vec::new();
        for (path, bytes) in self.files {
            write_atomic(&path, &bytes)?;
            written.push(path);
        }
        Ok(written)
    }
}

/// Writes `bytes` to `path` through a temporary file in the same directory.
///
/// # Errors
/// Any I/O failure, naming `path`.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), OutputError> {
    let io = |source| OutputError::Io {
        path: path.to_path_buf(),
        source,
    };
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    std::fs::create_dir_all(&dir).map_err(io)?;
    let mut tmp = tempfile::NamedTempFile::new_in(&dir).map_err(io)?;
    tmp.write_all(bytes).map_err(io)?;
    tmp.as_file().sync_all().map_err(io)?;
    tmp.persist(path).map_err(|e| io(e.error))?;
    Ok(())
}
