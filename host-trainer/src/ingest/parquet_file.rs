//! A Parquet file as a whole: told by its magic, its footer decoded once (column names,
//! row groups, row count). The scan (`parquet`) and the signal reader's Parquet rows both
//! start here.

use std::fs::File;
use std::path::Path;

use parquet::arrow::arrow_reader::ArrowReaderMetadata;

use crate::error::InputError;

/// Parquet's magic, at the start and the end of every Parquet file.
const MAGIC: &[u8; 4] = b"PAR1";

/// Whether the file at `path` is a Parquet file (by its magic, whatever its extension).
pub(super) fn is_parquet(path: &Path) -> bool {
    use std::io::Read;
    let mut head = [0u8; 4];
    File::open(path)
        .and_then(|mut f| f.read_exact(&mut head))
        .is_ok()
        && &head == MAGIC
}

/// A Parquet log's footer, decoded once and shared by every column reader.
pub(super) struct Opened {
    pub(super) meta: ArrowReaderMetadata,
    pub(super) names: Vec<String>,
}

pub(super) fn footer_error(path: &Path, e: impl std::fmt::Display) -> InputError {
    InputError::Parquet {
        path: path.into(),
        at: "footer".into(),
        message: e.to_string(),
    }
}

pub(super) fn open(path: &Path) -> Result<Opened, InputError> {
    crate::input::regular_file(path)?;
    let file = File::open(path).map_err(|e| InputError::io(path, e))?;
    let meta =
        ArrowReaderMetadata::load(&file, Default::default()).map_err(|e| footer_error(path, e))?;
    let names = meta
        .schema()
        .fields()
        .iter()
        .map(|f| f.name().clone())
        .collect();
    Ok(Opened { meta, names })
}

/// The names of a Parquet log's columns.
pub(super) fn column_names(path: &Path) -> Result<Vec<String>, InputError> {
    Ok(open(path)?.names)
}

/// Rows the file's footer declares, bounded by the file's size in bytes (a crafted footer
/// must not make the reader reserve memory for rows that are not there).
pub(super) fn row_count(path: &Path) -> Option<usize> {
    let len = std::fs::metadata(path).ok()?.len();
    let rows = open(path).ok()?.meta.metadata().file_metadata().num_rows();
    usize::try_from(rows.max(0).min(len as i64)).ok()
}
