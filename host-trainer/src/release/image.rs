//! Reading a blob back from any file `pack` writes (`.lgmb`, Intel HEX `.hex`, raw `.bin`),
//! and checking that the files of one pack hold one blob.
//!
//! `pack -o NAME` writes NAME and, on request, NAME with the extension `hex` and `bin`, as
//! one output set. A set mixed by a pack that stopped part-way (or by hand) would flash one
//! blob and audit another; [`check_set`] finds it wherever a file of the set is inspected.

use std::path::{Path, PathBuf};

use crate::error::InputError;
use crate::release::hex::{self, HexError};
use crate::release::pack::blob_of_image;

/// A blob read from a file, with where a HEX image loads it.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Image {
    /// The load address of a `.hex` image.
    pub load_address: Option<u32>,
    /// The blob's bytes (erased flash after a blob in an image left out).
    pub blob: Vec<u8>,
}

/// Why a file does not give a blob, or a set of files does not hold one.
#[derive(Debug, thiserror::Error)]
pub enum ImageError {
    /// The file cannot be read.
    #[error(transparent)]
    Input(#[from] InputError),
    /// A `.hex` file that is not text.
    #[error("{0}: not an Intel HEX file (not text)")]
    NotText(PathBuf),
    /// A `.hex` file with a bad record.
    #[error("{path}: {error}")]
    Hex {
        /// The file.
        path: PathBuf,
        /// The record's problem.
        error: HexError,
    },
    /// A file of the same pack holds another blob.
    #[error(
        "{other} holds another blob than {path} (SHA-256 {other_sha256}, not {sha256}): the files of one pack differ, as a pack stopped part-way leaves them; pack again with --force"
    )]
    MixedSet {
        /// The file inspected.
        path: PathBuf,
        /// The sibling that differs.
        other: PathBuf,
        /// SHA-256 of the inspected blob.
        sha256: String,
        /// SHA-256 of the sibling's blob (or "unreadable: …").
        other_sha256: String,
    },
}

impl ImageError {
    /// Whether the file could not be read at all (an input error, not a failed check).
    pub fn is_input(&self) -> bool {
        matches!(self, Self::Input(_))
    }
}

fn has_ext(path: &Path, ext: &str) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case(ext))
}

/// Reads the blob in `path`: a `.hex` image is decoded, erased flash after the blob in a
/// `.hex` or `.bin` image is left out (FORMAT.md, "Flash images"), any other file is the
/// blob as it is.
///
/// # Errors
/// [`ImageError::Input`] if unreadable, [`ImageError::NotText`] or [`ImageError::Hex`] for
/// a corrupt HEX image.
pub fn read(path: &Path) -> Result<Image, ImageError> {
    let raw = crate::input::read_bounded(
        path,
        "model blob or flash image",
        crate::input::MAX_IMAGE_FILE,
    )?;
    if has_ext(path, "hex") {
        let text = String::from_utf8(raw).map_err(|_| ImageError::NotText(path.into()))?;
        let (a, b) = hex::from_hex(&text).map_err(|error| ImageError::Hex {
            path: path.into(),
            error,
        })?;
        return Ok(Image {
            load_address: Some(a),
            blob: blob_of_image(&b).to_vec(),
        });
    }
    let blob = if has_ext(path, "bin") {
        blob_of_image(&raw).to_vec()
    } else {
        raw
    };
    Ok(Image {
        load_address: None,
        blob,
    })
}

/// Checks the other files of `path`'s pack set that exist beside it (the same name with
/// the extension `lgmb`, `hex` or `bin`) hold `blob` too; returns those checked.
///
/// # Errors
/// [`ImageError::MixedSet`] naming the first that holds another blob or none.
pub fn check_set(path: &Path, blob: &[u8]) -> Result<Vec<PathBuf>, ImageError> {
    let mut checked = Vec::new();
    for ext in ["lgmb", "hex", "bin"] {
        let other = path.with_extension(ext);
        if other == path || !other.is_file() {
            continue;
        }
        let sha = |b: &[u8]| crate::digest::sha256_hex(b);
        let found = match read(&other) {
            Ok(i) if i.blob == blob => {
                checked.push(other);
                continue;
            }
            Ok(i) => sha(&i.blob),
            Err(e) => format!("unreadable: {e}"),
        };
        return Err(ImageError::MixedSet {
            path: path.into(),
            other,
            sha256: sha(blob),
            other_sha256: found,
        });
    }
    Ok(checked)
}
