//! Output sets, all or nothing: every file of a set is written to a temporary file beside
//! its target first, and only when all are written are they renamed into place; on any
//! failure this run's temporary files (and anything it had already renamed) are removed.
//! A second writer into the same folder fails at once (an advisory lock on the folder),
//! temporary files a killed run left behind are removed, and nothing but a regular file
//! is ever replaced.
//!
//! Files are created as any tool creates them: mode 0666 less the umask.
//!
//! What is not covered: a kill between the first and the last rename (microseconds, after
//! every file is complete on disk) can leave part of a set.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::OutputError;

/// The prefix of this tool's temporary files; any such file in a folder this run holds
/// the lock of is stale (a writer holds the lock while its files exist).
const TMP_PREFIX: &str = ".linegate-tmp-";

/// Files to write together.
#[derive(Default)]
pub struct OutputSet {
    files: Vec<(PathBuf, Vec<u8>)>,
    /// Files only the owner may read (private keys): created 0600.
    private: Vec<PathBuf>,
}

impl OutputSet {
    /// Queues a file.
    pub fn add(&mut self, path: impl Into<PathBuf>, bytes: impl Into<Vec<u8>>) {
        self.files.push((path.into(), bytes.into()));
    }

    /// Queues a file only its owner may read (mode 0600 whatever the umask): a private key.
    pub fn add_private(&mut self, path: impl Into<PathBuf>, bytes: impl Into<Vec<u8>>) {
        let path = path.into();
        self.private.push(path.clone());
        self.files.push((path, bytes.into()));
    }

    /// Paths queued, in order.
    pub fn paths(&self) -> impl Iterator<Item = &Path> {
        self.files.iter().map(|(p, _)| p.as_path())
    }

    /// Writes every queued file, all or nothing. Refuses before writing anything if one
    /// exists and `force` is off, if one exists and is not a regular file, or if another
    /// writer holds a target folder.
    ///
    /// # Errors
    /// [`OutputError::Exists`], [`OutputError::NotAFile`], [`OutputError::Busy`], or the
    /// first I/O failure (after removing what this run wrote).
    pub fn commit(self, force: bool) -> Result<Vec<PathBuf>, OutputError> {
        for (p, _) in &self.files {
            match std::fs::symlink_metadata(p) {
                Ok(m) if !m.is_file() => return Err(OutputError::NotAFile(p.clone())),
                Ok(_) if !force => return Err(OutputError::Exists(p.clone())),
                _ => {}
            }
        }
        let mut dirs: Vec<PathBuf> = self.files.iter().map(|(p, _)| folder(p)).collect();
        dirs.sort();
        dirs.dedup();
        let mut locks = Vec::new();
        for d in &dirs {
            std::fs::create_dir_all(d).map_err(|source| OutputError::Io {
                path: d.clone(),
                source,
            })?;
            locks.push(lock(d)?);
            remove_stale(d);
        }
        let mut temps: Vec<(PathBuf, &Path)> = Vec::new();
        let undo = |temps: &[(PathBuf, &Path)], renamed: usize| {
            for (k, (tmp, target)) in temps.iter().enumerate() {
                let _ = std::fs::remove_file(if k < renamed { target } else { tmp.as_path() });
            }
        };
        for (k, (path, bytes)) in self.files.iter().enumerate() {
            match write_temp(path, k, bytes, self.private.contains(path)) {
                Ok(tmp) => temps.push((tmp, path)),
                Err(e) => {
                    undo(&temps, 0);
                    return Err(e);
                }
            }
        }
        for (k, (tmp, target)) in temps.iter().enumerate() {
            if let Err(source) = std::fs::rename(tmp, target) {
                undo(&temps, k);
                return Err(OutputError::Io {
                    path: target.to_path_buf(),
                    source,
                });
            }
        }
        drop(locks);
        Ok(self.files.into_iter().map(|(p, _)| p).collect())
    }
}

/// The folder a path is written in.
fn folder(path: &Path) -> PathBuf {
    match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// Takes the folder's advisory lock (released when the returned file is dropped, or when
/// the process dies, so a killed run leaves no stale lock).
fn lock(dir: &Path) -> Result<std::fs::File, OutputError> {
    let f = std::fs::File::open(dir).map_err(|source| OutputError::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    match f.try_lock() {
        Ok(()) => Ok(f),
        Err(std::fs::TryLockError::WouldBlock) => Err(OutputError::Busy(dir.to_path_buf())),
        Err(std::fs::TryLockError::Error(source)) => Err(OutputError::Io {
            path: dir.to_path_buf(),
            source,
        }),
    }
}

/// Removes temporary files of ours a killed run left in `dir` (the caller holds its lock).
fn remove_stale(dir: &Path) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    for e in entries.flatten() {
        let stale = e
            .file_name()
            .to_str()
            .is_some_and(|n| n.starts_with(TMP_PREFIX))
            && e.file_type().is_ok_and(|t| t.is_file());
        if stale {
            let _ = std::fs::remove_file(e.path());
        }
    }
}

/// Writes `bytes` to a new temporary file beside `path` and syncs it.
fn write_temp(path: &Path, k: usize, bytes: &[u8], private: bool) -> Result<PathBuf, OutputError> {
    let name = path
        .file_name()
        .map_or_else(|| "out".into(), |n| n.to_string_lossy().into_owned());
    let tmp = folder(path).join(format!("{TMP_PREFIX}{}-{k}-{name}", std::process::id()));
    let io = |source| OutputError::Io {
        path: path.to_path_buf(),
        source,
    };
    let mut opts = std::fs::OpenOptions::new();
    opts.write(true).create_new(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        // 0666 less the umask, as any tool creates files (tempfile's default is 0600).
        opts.mode(if private { 0o600 } else { 0o666 });
    }
    let result = opts.open(&tmp).and_then(|mut f| {
        f.write_all(bytes)?;
        f.sync_all()
    });
    match result {
        Ok(()) => Ok(tmp),
        Err(e) => {
            let _ = std::fs::remove_file(&tmp);
            Err(io(e))
        }
    }
}

/// Writes one file through the same all-or-nothing path (no clobbering check).
///
/// # Errors
/// As [`OutputSet::commit`] with `force`.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), OutputError> {
    let mut set = OutputSet::default();
    set.add(path, bytes);
    set.commit(true).map(|_| ())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_set_is_written_whole_or_not_at_all() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        // The second file's folder is a file: its temporary file cannot be created, so the
        // first file must not appear either.
        std::fs::write(d.join("blocker"), b"x").unwrap();
        let mut set = OutputSet::default();
        set.add(d.join("a.lgmb"), b"blob".to_vec());
        set.add(d.join("blocker/a.hex"), b"hex".to_vec());
        assert!(set.commit(false).is_err());
        assert!(!d.join("a.lgmb").exists());
        let left: Vec<_> = std::fs::read_dir(d)
            .unwrap()
            .flatten()
            .map(|e| e.file_name())
            .collect();
        assert_eq!(left, ["blocker"], "no temporary file left: {left:?}");
    }

    #[test]
    fn stale_temporary_files_are_removed_and_a_second_writer_fails() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::write(d.join(format!("{TMP_PREFIX}999-0-old.lgmb")), b"half").unwrap();
        write_atomic(&d.join("m.lgmb"), b"new").unwrap();
        let names: Vec<_> = std::fs::read_dir(d)
            .unwrap()
            .flatten()
            .map(|e| e.file_name())
            .collect();
        assert_eq!(names, ["m.lgmb"]);
        // Hold the folder's lock as another run would.
        let held = lock(d).unwrap();
        let mut set = OutputSet::default();
        set.add(d.join("n.lgmb"), b"n".to_vec());
        assert!(matches!(set.commit(false), Err(OutputError::Busy(_))));
        drop(held);
        assert!(write_atomic(&d.join("n.lgmb"), b"n").is_ok());
    }

    #[cfg(unix)]
    #[test]
    fn only_regular_files_are_replaced_and_modes_follow_the_umask() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::create_dir(d.join("sub")).unwrap();
        let mut set = OutputSet::default();
        set.add(d.join("sub"), b"x".to_vec());
        assert!(matches!(set.commit(true), Err(OutputError::NotAFile(_))));
        let mut set = OutputSet::default();
        set.add("/dev/null", b"x".to_vec());
        assert!(matches!(set.commit(true), Err(OutputError::NotAFile(_))));
        write_atomic(&d.join("f"), b"x").unwrap();
        let mode = std::fs::metadata(d.join("f")).unwrap().permissions().mode() & 0o777;
        // Whatever the umask, group or others can read unless it masks them, and the file
        // is never more open than 0666. The common umask 022 gives 0644.
        assert_eq!(mode & !0o666, 0);
        assert!(mode & 0o044 != 0 || mode == 0o600, "mode {mode:o}");
    }
}
