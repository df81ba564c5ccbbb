//! Does a blob belong with the files around it: signed by a release key, made from a float
//! model, the very blob an audit record names. The checks `inspect --public-key`, `--model`
//! and `--report` run, each one call; the command line only prints their outcome.

use std::path::{Path, PathBuf};

use serde::Deserialize;

use crate::error::InputError;
use crate::release::matching::{self, BlobMismatch};
use crate::release::sign::{self, SignatureError};
use crate::train::float_model::FloatModel;

/// Why a blob does not belong with a file, or the file could not be read.
#[derive(Debug, thiserror::Error)]
pub enum BlobCheck {
    /// The key, model or report cannot be read (a usage error, not a failed check).
    #[error(transparent)]
    Input(#[from] InputError),
    /// The report is not JSON.
    #[error("{0}: not JSON")]
    NotJson(PathBuf, #[source] serde_json::Error),
    /// The signature is missing, another key's, or does not verify.
    #[error("{blob}: {error} ({key})")]
    Signature {
        /// The blob's file.
        blob: PathBuf,
        /// The public key file.
        key: PathBuf,
        /// What is wrong with the signature.
        error: SignatureError,
    },
    /// The blob is not a quantisation of the model.
    #[error("{blob}: does not match the float model {model}: {error}")]
    Model {
        /// The blob's file.
        blob: PathBuf,
        /// The model file.
        model: PathBuf,
        /// The first field that differs.
        error: BlobMismatch,
    },
    /// The report names other bytes.
    #[error(
        "blob does not match audit report {}: the blob's SHA-256 is {sha256}, the report records {} (a blob is released only as audited, byte for byte)",
        report.display(),
        recorded.as_deref().unwrap_or("none")
    )]
    Report {
        /// The report file.
        report: PathBuf,
        /// The blob's SHA-256.
        sha256: String,
        /// The SHA-256 the report records, if it records one.
        recorded: Option<String>,
    },
}

impl BlobCheck {
    /// Whether a file could not be read at all (an input error, not a failed check).
    pub fn is_input(&self) -> bool {
        matches!(self, Self::Input(_) | Self::NotJson(..))
    }
}

/// Checks that `bytes` (read from `blob`) carry a valid signature by the public key in `key`.
///
/// # Errors
/// [`BlobCheck::Input`] for an unreadable key file, [`BlobCheck::Signature`] otherwise.
pub fn signed_by(blob: &Path, bytes: &[u8], key: &Path) -> Result<(), BlobCheck> {
    let public = sign::read_public(key)?;
    sign::verify(bytes, &public).map_err(|error| BlobCheck::Signature {
        blob: blob.into(),
        key: key.into(),
        error,
    })
}

/// Checks that `bytes` (read from `blob`) were made from the float model in `model`
/// (`matching::decode_from`: its plain quantisation at the blob's word lengths).
///
/// # Errors
/// [`BlobCheck::Input`] for an unreadable model, [`BlobCheck::Model`] otherwise.
pub fn made_from(blob: &Path, bytes: &[u8], model: &Path) -> Result<(), BlobCheck> {
    let fm = FloatModel::read(model)?;
    matching::decode_from(&fm, bytes).map_err(|error| BlobCheck::Model {
        blob: blob.into(),
        model: model.into(),
        error,
    })?;
    Ok(())
}

/// Checks that the audit report in `report` (`audit.json`, or a document holding it under
/// `audit`) names the blob whose SHA-256 is `sha256`.
///
/// # Errors
/// [`BlobCheck::Input`] or [`BlobCheck::NotJson`] for a report that cannot be read,
/// [`BlobCheck::Report`] when it records another SHA-256 or none.
pub fn audited_as(sha256: &str, report: &Path) -> Result<(), BlobCheck> {
    let text = crate::input::read_text(
        report,
        "audit report",
        crate::release::audit_baseline::MAX_AUDIT_FILE,
    )?;
    // JSON that is no record (an array, a number, a repeated key) names no blob: the
    // check fails (exit 1) rather than calling the file unreadable.
    let named = match serde_json::from_str::<NamedBlob>(&text) {
        Ok(named) => Some(named),
        Err(e) => {
            serde_json::from_str::<serde::de::IgnoredAny>(&text)
                .map_err(|_| BlobCheck::NotJson(report.into(), e))?;
            None
        }
    };
    let recorded = named.as_ref().and_then(NamedBlob::blob_sha256);
    if recorded != Some(sha256) {
        return Err(BlobCheck::Report {
            report: report.into(),
            sha256: sha256.into(),
            recorded: recorded.map(str::to_string),
        });
    }
    Ok(())
}

/// The part of an audit report that names its blob; the report itself, or the record under
/// `audit` of a document that holds one.
#[derive(Deserialize)]
struct NamedBlob {
    /// The record this document holds, if it holds one.
    #[serde(default)]
    audit: Recorded,
    /// The SHA-256 a record names.
    #[serde(default)]
    blob_sha256: Option<Text>,
}

/// A document's `audit` entry: a record naming its blob, anything else (`null` included,
/// which names none), or no entry.
#[derive(Default, Deserialize)]
#[serde(untagged)]
enum Recorded {
    /// No `audit` entry: the document is the record.
    #[default]
    #[serde(skip)]
    Absent,
    /// An object, perhaps with `blob_sha256`.
    Record {
        /// The SHA-256 it names.
        #[serde(default)]
        blob_sha256: Option<Text>,
    },
    /// Not an object: names no blob.
    Other(serde::de::IgnoredAny),
}

/// A `blob_sha256` entry: text, or anything else (which names no blob).
#[derive(Deserialize)]
#[serde(untagged)]
enum Text {
    /// The digest as text.
    Hex(String),
    /// Not text.
    Other(serde::de::IgnoredAny),
}

impl NamedBlob {
    /// The SHA-256 the report names: its `audit` record's if it holds one, else its own.
    fn blob_sha256(&self) -> Option<&str> {
        let named = match &self.audit {
            Recorded::Absent => self.blob_sha256.as_ref(),
            Recorded::Record { blob_sha256 } => blob_sha256.as_ref(),
            Recorded::Other(_) => None,
        };
        match named {
            Some(Text::Hex(h)) => Some(h),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn named(json: &str) -> Option<String> {
        serde_json::from_str::<NamedBlob>(json)
            .unwrap()
            .blob_sha256()
            .map(str::to_string)
    }

    #[test]
    fn the_report_names_its_blob_at_the_top_or_under_audit() {
        assert_eq!(
            named(r#"{"blob_sha256": "ab", "passed": true}"#).as_deref(),
            Some("ab")
        );
        assert_eq!(
            named(r#"{"audit": {"blob_sha256": "cd"}, "blob_sha256": "ab"}"#).as_deref(),
            Some("cd")
        );
        assert_eq!(named(r#"{"audit": 3, "blob_sha256": "ab"}"#), None);
        assert_eq!(named(r#"{"blob_sha256": 7}"#), None);
        assert_eq!(named(r#"{"audit": null, "blob_sha256": "ab"}"#), None);
        assert_eq!(named(r#"{}"#), None);
    }
}
