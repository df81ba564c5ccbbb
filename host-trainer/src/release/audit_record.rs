//! An audit's record read back (`audit.json`): what `pack` must match to write exactly the
//! blob the audit passed — the same model, the same logs, the same settings, the same bytes.

use std::path::Path;

use serde::Deserialize;

use crate::error::InputError;
use crate::project::Setting;

/// The parts of an audit report a later `pack` is compared with.
#[derive(Clone, Debug, Deserialize)]
pub struct AuditRecord {
    /// `classes` for the audit of a model of several classes; absent for a two-sided one.
    #[serde(default)]
    pub kind: Option<String>,
    /// The audited model's id.
    pub model_id: String,
    /// SHA-256 of the blob the audit named (as `pack` writes it).
    pub blob_sha256: String,
    /// The release key's id, when the blob is signed.
    #[serde(default)]
    pub key_id: Option<String>,
    /// Whether every gate passed.
    pub passed: bool,
    /// Why it failed, if it did.
    #[serde(default)]
    pub reasons: Vec<String>,
    /// The audit's settings with their sources.
    #[serde(default)]
    pub settings: Vec<Setting>,
    /// The logs audited.
    pub sets: Vec<RecordedSet>,
}

/// What a release about to be packed is, as a record is compared with it.
pub struct Release<'a> {
    /// Every setting with its source.
    pub settings: &'a [Setting],
    /// The model's id.
    pub model_id: &'a str,
    /// Each log's report name and SHA-256, in report order.
    pub sets: &'a [(String, String)],
    /// The release key's id, for a signed blob.
    pub key_id: Option<&'a str>,
    /// The blob's SHA-256.
    pub blob_sha256: &'a str,
}

/// One audited log, as the record names it.
#[derive(Clone, Debug, Deserialize)]
pub struct RecordedSet {
    /// Its name in the report (`train`, `held-out`, `holdout`, `validation-1`, …).
    pub name: String,
    /// Its SHA-256.
    pub sha256: String,
}

impl AuditRecord {
    /// Reads an audit's `audit.json`.
    ///
    /// # Errors
    /// The file cannot be read or is not an audit record.
    pub fn read(path: &Path) -> Result<Self, InputError> {
        let text = crate::input::read_text(
            path,
            "audit record",
            crate::release::audit_baseline::MAX_AUDIT_FILE,
        )?;
        serde_json::from_str(&text).map_err(|e| InputError::Format {
            path: path.into(),
            message: format!("not an audit record (audit.json of `linegate audit --out-dir`): {e}"),
        })
    }

    /// What differs between this record and the release `now` about to be packed, one
    /// line each: the settings among `compared` flags (those that decide the blob and the
    /// verdict), the model, the logs and the blob's bytes. Empty: `now` is the audited
    /// release. The two-sided audit's report and a class audit's give their facts alike.
    pub fn differences_of(&self, now: &Release<'_>, compared: &[String]) -> Vec<String> {
        let mut out = Vec::new();
        for flag in compared {
            let was = self.settings.iter().find(|s| &s.flag == flag);
            let is = now.settings.iter().find(|s| &s.flag == flag);
            if was.map(|s| canonical(&s.value)) != is.map(|s| canonical(&s.value)) {
                let say = |s: Option<&Setting>| {
                    s.map_or("not set".to_string(), |s| {
                        format!("{} ({})", s.value_text(), s.source)
                    })
                };
                out.push(format!(
                    "{flag}: the audit had {}, pack has {}",
                    say(was),
                    say(is)
                ));
            }
        }
        if self.model_id != now.model_id {
            out.push(format!(
                "model: the audit was of model {}, pack has model {}",
                self.model_id, now.model_id
            ));
        }
        let logs = |names: Vec<(&str, &str)>| -> String {
            names
                .iter()
                .map(|(n, s)| format!("{n} {}", &s[..s.len().min(12)]))
                .collect::<Vec<_>>()
                .join(", ")
        };
        let was: Vec<(&str, &str)> = self
            .sets
            .iter()
            .map(|s| (s.name.as_str(), s.sha256.as_str()))
            .collect();
        let is: Vec<(&str, &str)> = now
            .sets
            .iter()
            .map(|(n, h)| (n.as_str(), h.as_str()))
            .collect();
        if was != is {
            out.push(format!(
                "logs (name and SHA-256): the audit read {}, pack read {}",
                logs(was),
                logs(is)
            ));
        }
        if out.is_empty() && self.key_id.as_deref() != now.key_id {
            let key = |k: &Option<String>| {
                k.as_ref()
                    .map_or("unsigned".to_string(), |k| format!("signed with key {k}"))
            };
            out.push(format!(
                "signature: the audit's blob was {}, pack's would be {} (the key is `--sign`, or [release] key)",
                key(&self.key_id),
                key(&now.key_id.map(String::from))
            ));
        }
        if out.is_empty() && self.blob_sha256 != now.blob_sha256 {
            out.push(format!(
                "blob: the audit passed the blob with SHA-256 {}, pack would write {}",
                self.blob_sha256, now.blob_sha256
            ));
        }
        out
    }
}

/// A setting's values as they compare: comma-separated pieces in order of their text, each
/// number written one way (`10.0%` and `10%`, `016` and `16`, `1.0` and `1` are the same),
/// words in lower case.
fn canonical(values: &[String]) -> Vec<String> {
    let number = |t: &str| -> String {
        let (body, pct) = match t.strip_suffix('%') {
            Some(b) => (b, "%"),
            None => (t, ""),
        };
        match body.trim().parse::<f64>() {
            Ok(v) if v.is_finite() => format!("{v}{pct}"),
            _ => t.to_string(),
        }
    };
    let mut out: Vec<String> = values
        .iter()
        .flat_map(|v| v.split(','))
        .map(|piece| {
            let piece = piece.trim().to_lowercase();
            let mut text = String::new();
            let mut token = String::new();
            for c in piece.chars() {
                if c == '=' || c == '@' {
                    text.push_str(&number(&token));
                    text.push(c);
                    token.clear();
                } else {
                    token.push(c);
                }
            }
            text.push_str(&number(&token));
            text
        })
        .collect();
    out.sort();
    out
}

#[cfg(test)]
mod tests {
    use super::canonical;

    fn same(a: &[&str], b: &[&str]) -> bool {
        let v = |x: &[&str]| x.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        canonical(&v(a)) == canonical(&v(b))
    }

    #[test]
    fn values_compare_as_numbers_and_sets() {
        assert!(same(&["10.0%"], &["10%"]));
        assert!(same(&["016"], &["16"]));
        assert!(same(&["1%@95.0%"], &["1%@95%"]));
        assert!(same(&["ch01=2,ch00=1"], &["ch00=1.0", "ch01=2"]));
        assert!(!same(&["10%"], &["0.1"]));
        assert!(!same(&["10%"], &["11%"]));
        assert!(!same(&["Fail"], &["pass"]));
    }
}
