//! Output sets, all or nothing: every file of a set is written to a temporary file beside
//! its target first, and only when all are written are they renamed into place; on any
//! failure (or when the set is dropped uncommitted) this run's temporary files (and
//! anything it had already renamed) are removed. A large file can be streamed into its
//! temporary file as it is produced ([`OutputSet::add_written`]) and is renamed with the
//! rest. A second writer into the same folder fails at once (an advisory lock on the
//! folder, held from the first temporary file there to the end), temporary files and
//! folders a killed run left behind are removed by the next writer into that folder, and
//! nothing but a regular file is ever replaced. Two outputs that are one file, or an output
//! that is one of the command's inputs, are refused before anything is written.
//!
//! Files are created as any tool creates them: mode 0666 less the umask.
//!
//! What is not covered: a kill between the first and the last rename (microseconds, after
//! every file is complete on disk) can leave part of a set.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::OutputError;

/// The prefix of this tool's temporary files and folders; any such entry in a folder this
/// run holds the lock of is stale (a writer holds the lock while its temporaries exist).
const TMP_PREFIX: &str = ".linegate-tmp-";

/// What a queued output holds.
enum Body {
    /// Bytes to write at commit.
    Bytes(Vec<u8>),
    /// A temporary file already written (streamed).
    Written(PathBuf),
}

/// One queued output.
struct Entry {
    path: PathBuf,
    /// What the file is, for messages ("the blob (-o)").
    role: String,
    body: Body,
    /// Only the owner may read it (private keys): created 0600.
    private: bool,
}

/// Files to write together.
#[derive(Default)]
pub struct OutputSet {
    files: Vec<Entry>,
    /// The command's inputs: no output may be one of them.
    inputs: Vec<(String, PathBuf)>,
    /// Folder locks held since a temporary file or folder was made there.
    held: Vec<(PathBuf, std::fs::File)>,
    /// Scratch folders of this run, removed when the set ends.
    scratch: Vec<PathBuf>,
    /// Temporary files and folders made so far (for unique names).
    made: usize,
}

impl OutputSet {
    /// Queues a file.
    pub fn add(&mut self, path: impl Into<PathBuf>, bytes: impl Into<Vec<u8>>) {
        self.add_as("output", path, bytes);
    }

    /// Queues a file; `role` names it in messages (e.g. "Intel HEX image (--hex)").
    pub fn add_as(
        &mut self,
        role: impl Into<String>,
        path: impl Into<PathBuf>,
        bytes: impl Into<Vec<u8>>,
    ) {
        self.push_bytes(role.into(), path.into(), bytes.into(), false);
    }

    /// Queues a file only its owner may read (mode 0600 whatever the umask, from its
    /// creation on): a private key.
    pub fn add_private(
        &mut self,
        role: impl Into<String>,
        path: impl Into<PathBuf>,
        bytes: impl Into<Vec<u8>>,
    ) {
        self.push_bytes(role.into(), path.into(), bytes.into(), true);
    }

    /// Queues bytes to write, readable by others or by the owner only.
    fn push_bytes(&mut self, role: String, path: PathBuf, bytes: Vec<u8>, private: bool) {
        self.files.push(Entry {
            path,
            role,
            body: Body::Bytes(bytes),
            private,
        });
    }

    /// Names an input of the command: no output of the set may be that file.
    pub fn input(&mut self, role: impl Into<String>, path: impl Into<PathBuf>) {
        self.inputs.push((role.into(), path.into()));
    }

    /// Writes a file as it is produced: `write` fills a new temporary file beside `path`
    /// (under the folder's lock, held until the set ends), which is renamed into place at
    /// [`commit`](Self::commit). Refuses first, writing nothing, what `commit` would refuse.
    ///
    /// # Errors
    /// As [`commit`](Self::commit), or the first write failure (the temporary file is
    /// removed).
    pub fn add_written(
        &mut self,
        role: impl Into<String>,
        path: impl Into<PathBuf>,
        force: bool,
        write: impl FnOnce(&mut dyn Write) -> std::io::Result<()>,
    ) -> Result<(), OutputError> {
        let entry = Entry {
            path: path.into(),
            role: role.into(),
            body: Body::Written(PathBuf::new()),
            private: false,
        };
        self.collisions(Some(&entry))?;
        let dir = folder(&entry.path);
        // An existing folder's stale temporaries go even if the file is refused.
        if dir.is_dir() {
            self.hold(&dir)?;
        }
        refuse_existing(&entry.path, force)?;
        create_dir(&dir)?;
        self.hold(&dir)?;
        let tmp = self.temp_name(&entry.path);
        let io = |source| OutputError::Io {
            path: entry.path.clone(),
            source,
        };
        let result = create(&tmp, false).and_then(|f| {
            let mut w = std::io::BufWriter::with_capacity(1 << 20, f);
            write(&mut w)?;
            w.into_inner().map_err(|e| e.into_error())?.sync_all()
        });
        if let Err(e) = result {
            let _ = std::fs::remove_file(&tmp);
            return Err(io(e));
        }
        self.files.push(Entry {
            body: Body::Written(tmp),
            ..entry
        });
        Ok(())
    }

    /// A new empty scratch folder inside `dir` (created if need be), for files a command
    /// needs while it runs; removed when the set ends, and by the next writer into `dir`
    /// if this run is killed.
    ///
    /// # Errors
    /// [`OutputError::Busy`] or an I/O failure.
    pub fn scratch_dir(&mut self, dir: &Path) -> Result<PathBuf, OutputError> {
        create_dir(dir)?;
        self.hold(dir)?;
        let path = self.temp_name(&dir.join("scratch"));
        std::fs::create_dir(&path).map_err(|source| OutputError::Io {
            path: path.clone(),
            source,
        })?;
        self.scratch.push(path.clone());
        Ok(path)
    }

    /// Paths queued, in order.
    pub fn paths(&self) -> impl Iterator<Item = &Path> {
        self.files.iter().map(|e| e.path.as_path())
    }

    /// Writes every queued file, all or nothing. Refuses before writing anything if two
    /// outputs are one file or one is an input, if one exists and `force` is off, if one
    /// exists and is not a regular file, or if another writer holds a target folder.
    /// Temporaries a killed run left in a target folder are removed even when the set is
    /// refused.
    ///
    /// # Errors
    /// [`OutputError::SameFile`], [`OutputError::OverInput`], [`OutputError::Exists`],
    /// [`OutputError::NotAFile`], [`OutputError::Busy`], or the first I/O failure (after
    /// removing what this run wrote).
    pub fn commit(mut self, force: bool) -> Result<Vec<PathBuf>, OutputError> {
        self.collisions(None)?;
        let mut dirs: Vec<PathBuf> = self.files.iter().map(|e| folder(&e.path)).collect();
        dirs.sort();
        dirs.dedup();
        // Existing folders first: their stale temporaries go even if the set is refused.
        for d in dirs.iter().filter(|d| d.is_dir()) {
            self.hold(d)?;
        }
        for e in &self.files {
            refuse_existing(&e.path, force)?;
        }
        for d in &dirs {
            create_dir(d)?;
            self.hold(d)?;
        }
        let mut temps: Vec<(PathBuf, PathBuf)> = Vec::new();
        let files = std::mem::take(&mut self.files);
        // Streamed files are already written; removing their temporaries is `undo`'s too.
        let undo = |temps: &[(PathBuf, PathBuf)], renamed: usize, rest: &[Entry]| {
            for (k, (tmp, target)) in temps.iter().enumerate() {
                let _ = std::fs::remove_file(if k < renamed { target } else { tmp });
            }
            for e in rest {
                if let Body::Written(tmp) = &e.body {
                    let _ = std::fs::remove_file(tmp);
                }
            }
        };
        for (k, e) in files.iter().enumerate() {
            let written = match &e.body {
                Body::Written(tmp) => Ok(tmp.clone()),
                Body::Bytes(bytes) => {
                    let tmp = self.temp_name(&e.path);
                    write_temp(&tmp, &e.path, bytes, e.private)
                }
            };
            match written {
                Ok(tmp) => temps.push((tmp, e.path.clone())),
                Err(err) => {
                    undo(&temps, 0, &files[k..]);
                    return Err(err);
                }
            }
        }
        for (k, (tmp, target)) in temps.iter().enumerate() {
            if let Err(source) = std::fs::rename(tmp, target) {
                undo(&temps, k, &[]);
                return Err(OutputError::Io {
                    path: target.clone(),
                    source,
                });
            }
        }
        Ok(files.into_iter().map(|e| e.path).collect())
    }

    /// Refuses two outputs that are one file, or an output that is an input (`extra`: an
    /// output about to be added).
    fn collisions(&self, extra: Option<&Entry>) -> Result<(), OutputError> {
        let outs: Vec<(&Entry, PathBuf)> = self
            .files
            .iter()
            .chain(extra)
            .map(|e| (e, identity(&e.path)))
            .collect();
        for (k, (a, ia)) in outs.iter().enumerate() {
            if let Some((b, _)) = outs[..k].iter().find(|(_, ib)| ib == ia) {
                return Err(OutputError::SameFile {
                    path: a.path.clone(),
                    first: b.role.clone(),
                    second: a.role.clone(),
                });
            }
            for (role, input) in &self.inputs {
                if same_file(input, ia) {
                    return Err(OutputError::OverInput {
                        path: a.path.clone(),
                        output: a.role.clone(),
                        input: role.clone(),
                    });
                }
            }
        }
        Ok(())
    }

    /// Takes `dir`'s lock unless this set holds it, then removes stale temporaries there.
    fn hold(&mut self, dir: &Path) -> Result<(), OutputError> {
        let key = std::fs::canonicalize(dir).unwrap_or_else(|_| dir.to_path_buf());
        if self.held.iter().any(|(d, _)| *d == key) {
            return Ok(());
        }
        let f = lock(dir)?;
        remove_stale(dir);
        self.held.push((key, f));
        Ok(())
    }

    /// A fresh temporary name beside `path`.
    fn temp_name(&mut self, path: &Path) -> PathBuf {
        let name = path
            .file_name()
            .map_or_else(|| "out".into(), |n| n.to_string_lossy().into_owned());
        self.made += 1;
        folder(path).join(format!(
            "{TMP_PREFIX}{}-{}-{name}",
            std::process::id(),
            self.made
        ))
    }
}

impl Drop for OutputSet {
    /// An uncommitted set leaves nothing: streamed temporaries and scratch folders go.
    fn drop(&mut self) {
        for e in &self.files {
            if let Body::Written(tmp) = &e.body {
                let _ = std::fs::remove_file(tmp);
            }
        }
        for d in &self.scratch {
            let _ = std::fs::remove_dir_all(d);
        }
        // The locks are released after the removals (fields drop after this body).
    }
}

/// Refuses an existing target that is not a regular file, or any existing target without
/// `force`.
fn refuse_existing(p: &Path, force: bool) -> Result<(), OutputError> {
    match std::fs::symlink_metadata(p) {
        Ok(m) if !m.is_file() => Err(OutputError::NotAFile(p.to_path_buf())),
        Ok(_) if !force => Err(OutputError::Exists(p.to_path_buf())),
        _ => Ok(()),
    }
}

fn create_dir(d: &Path) -> Result<(), OutputError> {
    std::fs::create_dir_all(d).map_err(|source| OutputError::Io {
        path: d.to_path_buf(),
        source,
    })
}

/// Which file an output path names: its folder resolved (links, `..`), then its name.
fn identity(path: &Path) -> PathBuf {
    let dir = folder(path);
    let dir = std::fs::canonicalize(&dir)
        .or_else(|_| std::path::absolute(&dir))
        .unwrap_or(dir);
    match path.file_name() {
        Some(n) => dir.join(n),
        None => dir,
    }
}

/// Whether `input` is the file an output of identity `out` would replace (by name, or as
/// another name of the same existing file).
fn same_file(input: &Path, out: &Path) -> bool {
    if std::fs::canonicalize(input).is_ok_and(|i| i == out) || identity(input) == out {
        return true;
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let (Ok(a), Ok(b)) = (std::fs::metadata(input), std::fs::metadata(out)) {
            return a.dev() == b.dev() && a.ino() == b.ino();
        }
    }
    false
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

/// Removes temporary files and scratch folders of ours a killed run left in `dir` (the
/// caller holds its lock).
fn remove_stale(dir: &Path) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    for e in entries.flatten() {
        if !e
            .file_name()
            .to_str()
            .is_some_and(|n| n.starts_with(TMP_PREFIX))
        {
            continue;
        }
        // A scratch folder is removed whole; a link is never followed.
        match e.file_type() {
            Ok(t) if t.is_file() => {
                let _ = std::fs::remove_file(e.path());
            }
            Ok(t) if t.is_dir() => {
                let _ = std::fs::remove_dir_all(e.path());
            }
            _ => {}
        }
    }
}

/// Creates a new file (0666 less the umask, or 0600 for a private one).
fn create(tmp: &Path, private: bool) -> std::io::Result<std::fs::File> {
    let mut opts = std::fs::OpenOptions::new();
    opts.write(true).create_new(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        // 0666 less the umask, as any tool creates files (tempfile's default is 0600).
        opts.mode(if private { 0o600 } else { 0o666 });
    }
    #[cfg(not(unix))]
    let _ = private;
    opts.open(tmp)
}

/// Writes `bytes` to the new temporary file `tmp` beside `path` and syncs it.
fn write_temp(
    tmp: &Path,
    path: &Path,
    bytes: &[u8],
    private: bool,
) -> Result<PathBuf, OutputError> {
    let result = create(tmp, private).and_then(|mut f| {
        f.write_all(bytes)?;
        f.sync_all()
    });
    match result {
        Ok(()) => Ok(tmp.to_path_buf()),
        Err(source) => {
            let _ = std::fs::remove_file(tmp);
            Err(OutputError::Io {
                path: path.to_path_buf(),
                source,
            })
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
