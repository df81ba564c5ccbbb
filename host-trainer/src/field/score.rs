//! Scoring field logs: the device's kernel over one log of one or several files, each unit
//! printed in one of four forms.
//!
//! - `device`: exactly the device's lines (`release::replay`): the model line
//!   `# model <id> blob <blob id>[ key <key id>]`, then `<index> GO|NO-GO|RECHECK <score>`
//!   or `<index> FAULT ch<k>|signal<k>|count|other` per unit, 0-based index over the whole
//!   log (files one after the other).
//! - `text`: the same model line; each unit's device line, then ` # ` and `key=value`
//!   fields: `unit=<id>` and `time=<timestamp>` when the log has those columns,
//!   `channel=<name>` (a `FAULT ch<k>`) or `signal=<name>` (a `FAULT signal<k>`), `file=<path>`
//!   when the log has several files, and `line=<n>` (the unit's first row, 1-based, header
//!   = line 1). A value holding a space, a quote, `#` or a control character, or an empty
//!   one, is written as a JSON string. The device's line is everything before ` # `
//!   (`sed 's/ # .*//'` gives the device form back); device lines hold no `#`.
//! - `csv`: a header row, then one row per unit (RFC 4180: a field holding a comma, a
//!   quote, CR or LF is quoted, quotes doubled; lines end in CR LF as the RFC says):
//!   [`CSV_HEADER`].
//! - `json`: JSON Lines (one JSON object per line): the first object is the release
//!   (`"record": "model"`, model id, blob id, key id, the model line and the files), then
//!   one object per unit (`"record": "unit"`, the CSV's fields, `null` where the CSV
//!   leaves a cell empty, numbers as numbers). JSON Lines rather than one document: a
//!   log of any length streams through in constant memory, every line is valid on its
//!   own (a log that fails part-way, or `head`, leaves whole records), and a unit is one
//!   line as on the device.
//!
//! Columns and fields of one unit: `file` (the path as given), `line`, `index`,
//! `unit_id`, `timestamp` (empty without such a column), `label` (`GO`/`NO-GO`, empty
//! for an unlabelled log), `agrees` (`true` when the verdict is the label, `false` when it
//! is the other side; empty for RECHECK, FAULT or no label), `verdict`
//! (`GO`/`NO-GO`/`RECHECK`/`FAULT`), `score` (accumulator units; empty for a FAULT),
//! `fault` (the device's word after FAULT: `ch3`, `signal0`, `count`, `other`) and
//! `fault_name` (the channel's or signal's name).

use crate::release::pack::DeviceModel;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use shared_model::{ClassSection, Decision, Fault, SignalFault, Verdict};

use crate::error::InputError;
use crate::ingest::{LogOptions, SkipReport};
use crate::release::replay;
use crate::train::class_rows::FloatClasses;
use crate::train::float_model::FloatModel;

/// The CSV form's columns, in order.
pub const CSV_HEADER: [&str; 11] = [
    "file",
    "line",
    "index",
    "unit_id",
    "timestamp",
    "label",
    "agrees",
    "verdict",
    "score",
    "fault",
    "fault_name",
];

/// How `replay` prints each unit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Form {
    /// Exactly the device's lines.
    Device,
    /// The device's line, then ` # ` and the unit's id, timestamp, fault name, line.
    Text,
    /// RFC 4180 CSV with a header row.
    Csv,
    /// JSON Lines: the release, then one object per unit.
    Json,
}

/// A unit's outcome, as a change list counts it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Outcome {
    /// Scored at or above `go_min`.
    Go,
    /// Scored at or below `nogo_max`.
    NoGo,
    /// Scored between the two.
    Recheck,
    /// A refused reading or window: no score.
    Fault,
}

impl Outcome {
    /// The outcome of a classification.
    pub fn of(result: &Result<Decision, SignalFault>) -> Self {
        match result {
            Ok(d) => match d.verdict {
                Verdict::Go => Self::Go,
                Verdict::NoGo => Self::NoGo,
                Verdict::Recheck => Self::Recheck,
            },
            Err(_) => Self::Fault,
        }
    }

    /// The word the device prints: `GO`, `NO-GO`, `RECHECK`, `FAULT`.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Go => "GO",
            Self::NoGo => "NO-GO",
            Self::Recheck => "RECHECK",
            Self::Fault => "FAULT",
        }
    }
}

impl serde::Serialize for Outcome {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.as_str())
    }
}

impl serde::Serialize for Refused {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&self.word())
    }
}

/// One scored unit of a field log.
pub struct Scored<'a> {
    /// Which file of the log (index into the files given).
    pub file: usize,
    /// 1-based line of the unit's first row in its file.
    pub line: u64,
    /// 0-based index over the whole log (the device's index).
    pub index: usize,
    /// The unit-id cell, if the log has a unit-id column.
    pub id: Option<&'a [u8]>,
    /// The timestamp cell, if the log has a timestamp column (and it was kept).
    pub time: Option<&'a [u8]>,
    /// The unit's class code (+1 GO, −1 NO-GO), 0 for an unlabelled log.
    pub label: i8,
    /// The kernel's decision, or the fault that refused the unit.
    pub result: Result<Decision, SignalFault>,
    /// The reading channels' raw readings (for the device's test vectors).
    pub raw: &'a [i32],
    /// Each signal's window (none for a model of readings).
    pub windows: &'a [Vec<i32>],
}

impl Scored<'_> {
    /// The score, for a decided unit.
    pub fn score(&self) -> Option<i64> {
        self.result.as_ref().ok().map(|d| d.score)
    }

    /// `Some(true)` when the verdict is the label, `Some(false)` when it is the other side
    /// of GO/NO-GO, `None` for RECHECK, FAULT or no label.
    pub fn agrees(&self) -> Option<bool> {
        match (Outcome::of(&self.result), self.label) {
            (_, 0) | (Outcome::Recheck | Outcome::Fault, _) => None,
            (o, l) => Some((o == Outcome::Go) == (l > 0)),
        }
    }
}

/// What a FAULT refused: a channel (model order), a signal, the reading count, other.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Refused {
    /// A reading out of its channel's range: `FAULT ch<k>`.
    Channel(usize),
    /// A signal's window: `FAULT signal<k>`.
    Signal(usize),
    /// The wrong number of readings: `FAULT count`.
    Count,
    /// Anything else: `FAULT other`.
    Other,
}

impl Refused {
    /// What refused the unit, for a FAULT.
    pub fn of(result: &Result<Decision, SignalFault>) -> Option<Self> {
        match result {
            Ok(_) => None,
            Err(SignalFault::Reading(Fault::OutOfRange { channel, .. })) => {
                Some(Self::Channel(usize::from(*channel)))
            }
            Err(SignalFault::Reading(Fault::ReadingCount { .. })) => Some(Self::Count),
            Err(SignalFault::Window { signal, .. }) => Some(Self::Signal(usize::from(*signal))),
            Err(_) => Some(Self::Other),
        }
    }

    /// The device's word after `FAULT`: `ch3`, `signal0`, `count`, `other`.
    pub fn word(self) -> String {
        match self {
            Self::Channel(k) => format!("ch{k}"),
            Self::Signal(k) => format!("signal{k}"),
            Self::Count => "count".into(),
            Self::Other => "other".into(),
        }
    }

    /// The name of the channel or signal it names, from `fm`.
    pub fn name(self, fm: &FloatModel) -> Option<&str> {
        match self {
            Self::Channel(k) => fm.channels.get(k).map(|c| c.name.as_str()),
            Self::Signal(k) => fm.signals.get(k).map(|s| s.name.as_str()),
            Self::Count | Self::Other => None,
        }
    }
}

/// The label's word: `GO`, `NO-GO`, or `None` for an unlabelled unit.
pub fn label_word(label: i8) -> Option<&'static str> {
    match label {
        0 => None,
        l if l > 0 => Some("GO"),
        _ => Some("NO-GO"),
    }
}

/// Streams every unit of the log made of `files` (in the order given; each a bench log or,
/// for a model with signals, a signal log's file or folder) through `model` (a blob of
/// `fm`, or `fm` quantised), calling `each` per unit in log order.
///
/// # Errors
/// The first [`InputError`] of any file (rows skipped into `skipped` under
/// `skip_bad_rows`).
pub fn score_logs(
    files: &[PathBuf],
    opts: &LogOptions,
    fm: &FloatModel,
    model: &DeviceModel,
    skipped: &mut SkipReport,
    mut each: impl FnMut(&Scored<'_>) + Send,
) -> Result<(), InputError> {
    let mut index = 0usize;
    for (file, path) in files.iter().enumerate() {
        crate::ingest::stream(path, opts, &fm.channels, &fm.signals, skipped, |u| {
            let windows: Vec<&[i32]> = u.windows.iter().map(Vec::as_slice).collect();
            each(&Scored {
                file,
                line: u.line,
                index,
                id: u.id,
                time: u.time,
                label: u.label,
                result: model.classify_windows(u.raw, &windows),
                raw: u.raw,
                windows: u.windows,
            });
            index += 1;
            Ok(())
        })?;
    }
    Ok(())
}

/// The release a field log is scored with, as the forms name it.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ReleaseIds {
    /// The model id (32 hex digits).
    pub model_id: String,
    /// The blob's id (its CRC-32, 8 hex digits); `None` for a model quantised plainly.
    pub blob_id: Option<String>,
    /// The signing key's id, for a signed blob.
    pub key_id: Option<String>,
    /// The device's first line (`# model … blob …`), without its line feed.
    pub model_line: String,
}

impl ReleaseIds {
    /// The ids of `model`, decoded from `blob`.
    pub fn of_blob(model: &DeviceModel, blob: &[u8]) -> Self {
        Self {
            model_id: crate::digest::lower_hex(&model.model().model_id),
            blob_id: Some(format!(
                "{:08x}",
                shared_model::blob::blob_id(blob).unwrap_or(0)
            )),
            key_id: shared_model::blob::signature(blob)
                .map(|s| crate::digest::lower_hex(&s.key_id)),
            model_line: replay::model_line(model, blob).trim_end().to_string(),
        }
    }
}

/// Writes units in one [`Form`]: the head once, then each unit.
pub struct Printer {
    form: Form,
    files: Vec<String>,
    channels: Vec<String>,
    signals: Vec<String>,
    /// The blob's classes (a model of several classes): names on every line, a `class`
    /// column (csv) and key (json); `None` keeps the two-sided forms as they were.
    classes: Option<ClassSection>,
    /// Each class's name in the float model's row order, for the labels.
    label_names: Option<Vec<String>>,
    /// The float model's classes, to map a label code to its row.
    float_classes: Option<FloatClasses>,
}

impl Printer {
    /// A printer for the log of `files` scored with `model`, a blob of `fm`.
    pub fn new(form: Form, files: &[PathBuf], fm: &FloatModel, model: &DeviceModel) -> Self {
        Self {
            form,
            files: files.iter().map(|p| p.display().to_string()).collect(),
            channels: fm.channels.iter().map(|c| c.name.clone()).collect(),
            signals: fm.signals.iter().map(|s| s.name.clone()).collect(),
            classes: model.classes().cloned(),
            label_names: fm
                .classes
                .as_ref()
                .map(|c| c.rows.iter().map(|r| r.name.clone()).collect()),
            float_classes: fm.classes.clone(),
        }
    }

    /// The label's word: the class's name for a model of several classes, else GO/NO-GO.
    fn label<'s>(&'s self, u: &Scored<'_>) -> Option<&'s str> {
        match (&self.float_classes, &self.label_names) {
            (Some(c), Some(names)) => c
                .row_of_code(u.label)
                .and_then(|k| names.get(k))
                .map(String::as_str),
            _ => label_word(u.label),
        }
    }

    /// Whether the decision is the label: for a model of several classes, a decided unit
    /// whose class is the label's row (`None` under RECHECK, FAULT or without a label).
    fn agrees(&self, u: &Scored<'_>) -> Option<bool> {
        let Some(c) = &self.float_classes else {
            return u.agrees();
        };
        let d = u.result.as_ref().ok()?;
        if u.label == 0 || d.verdict == Verdict::Recheck {
            return None;
        }
        let row = c.row_of_code(u.label)?;
        Some(d.class.map(usize::from) == Some(row))
    }

    /// The leading class's name of a decided unit, for a model of several classes.
    fn class_name(&self, u: &Scored<'_>) -> Option<&str> {
        let classes = self.classes.as_ref()?;
        let k = u.result.as_ref().ok()?.class?;
        Some(classes.name(k))
    }

    /// What comes before the first unit (with its line end): the model line (device,
    /// text), the header row (csv), the release record (json).
    pub fn head(&self, ids: &ReleaseIds) -> String {
        match self.form {
            Form::Device | Form::Text => format!("{}\n", ids.model_line),
            Form::Csv => {
                let mut out = String::new();
                for (k, h) in CSV_HEADER.iter().enumerate() {
                    if k > 0 {
                        out.push(',');
                    }
                    out.push_str(h);
                }
                if self.classes.is_some() {
                    out.push_str(",class");
                }
                out.push_str("\r\n");
                out
            }
            Form::Json => {
                let v = serde_json::json!({
                    "record": "model",
                    "model_id": ids.model_id,
                    "blob_id": ids.blob_id,
                    "key_id": ids.key_id,
                    "model_line": ids.model_line,
                    "files": self.files,
                });
                format!("{v}\n")
            }
        }
    }

    /// Appends one unit (with its line end).
    pub fn unit(&self, out: &mut String, u: &Scored<'_>) {
        match self.form {
            Form::Device => {
                replay::write_line(out, u.index, &u.result, self.classes.as_ref());
                out.push('\n');
            }
            Form::Text => self.text(out, u),
            Form::Csv => self.csv(out, u),
            Form::Json => self.json(out, u),
        }
    }

    /// The fault's word and the name of what it names.
    fn fault(&self, u: &Scored<'_>) -> Option<(String, Option<&str>)> {
        Refused::of(&u.result).map(|r| {
            let named = match r {
                Refused::Channel(k) => self.channels.get(k).map(String::as_str),
                Refused::Signal(k) => self.signals.get(k).map(String::as_str),
                Refused::Count | Refused::Other => None,
            };
            (r.word(), named)
        })
    }

    fn text(&self, out: &mut String, u: &Scored<'_>) {
        replay::write_line(out, u.index, &u.result, self.classes.as_ref());
        out.push_str(" #");
        if let Some(id) = u.id {
            text_field(out, "unit", &bytes_text(id));
        }
        if let Some(t) = u.time {
            text_field(out, "time", &bytes_text(t));
        }
        if let Some((word, Some(name))) = self.fault(u) {
            let key = if word.starts_with("ch") {
                "channel"
            } else {
                "signal"
            };
            text_field(out, key, name);
        }
        if self.files.len() > 1 {
            text_field(out, "file", &self.files[u.file]);
        }
        let _ = write!(out, " line={}", u.line);
        out.push('\n');
    }

    fn csv(&self, out: &mut String, u: &Scored<'_>) {
        let fault = self.fault(u);
        csv_field(out, &self.files[u.file]);
        let _ = write!(out, ",{},{},", u.line, u.index);
        csv_field(out, &bytes_text(u.id.unwrap_or_default()));
        out.push(',');
        csv_field(out, &bytes_text(u.time.unwrap_or_default()));
        let _ = write!(
            out,
            ",{},{},{},",
            self.label(u).unwrap_or(""),
            self.agrees(u)
                .map_or("", |a| if a { "true" } else { "false" }),
            Outcome::of(&u.result).as_str(),
        );
        if let Some(s) = u.score() {
            let _ = write!(out, "{s}");
        }
        out.push(',');
        if let Some((word, name)) = fault {
            out.push_str(&word);
            out.push(',');
            csv_field(out, name.unwrap_or(""));
        } else {
            out.push(',');
        }
        if self.classes.is_some() {
            out.push(',');
            csv_field(out, self.class_name(u).unwrap_or(""));
        }
        out.push_str("\r\n");
    }

    fn json(&self, out: &mut String, u: &Scored<'_>) {
        let text = |b: Option<&[u8]>| b.map(|b| bytes_text(b).into_owned());
        let fault = self.fault(u);
        let mut v = serde_json::json!({
            "record": "unit",
            "file": self.files[u.file],
            "line": u.line,
            "index": u.index,
            "unit_id": text(u.id),
            "timestamp": text(u.time),
            "label": self.label(u),
            "agrees": self.agrees(u),
            "verdict": Outcome::of(&u.result).as_str(),
            "score": u.score(),
            "fault": fault.as_ref().map(|f| f.0.clone()),
            "fault_name": fault.as_ref().and_then(|f| f.1),
        });
        if self.classes.is_some() {
            v["class"] = serde_json::Value::from(self.class_name(u));
        }
        let _ = writeln!(out, "{v}");
    }
}

/// ` key=value`, the value as a JSON string when it is empty or holds a space, a quote,
/// `#` or a control character (so the line splits on spaces and ` # ` stays the
/// separator).
fn text_field(out: &mut String, key: &str, value: &str) {
    let bare = !value.is_empty()
        && !value
            .chars()
            .any(|c| c.is_whitespace() || c.is_control() || c == '"' || c == '#');
    out.push(' ');
    out.push_str(key);
    out.push('=');
    if bare {
        out.push_str(value);
    } else {
        out.push_str(&serde_json::Value::from(value).to_string());
    }
}

/// One CSV field by RFC 4180: quoted when it holds a comma, a quote, CR or LF, with its
/// quotes doubled.
fn csv_field(out: &mut String, value: &str) {
    if value.contains([',', '"', '\r', '\n']) {
        out.push('"');
        out.push_str(&value.replace('"', "\"\""));
        out.push('"');
    } else {
        out.push_str(value);
    }
}

/// The SHA-256 of one given log path: a file's, or for a signal log's folder the digest
/// of its files' list (`ingest::log_digest`).
///
/// # Errors
/// The path cannot be read.
pub fn path_digest(path: &Path) -> Result<String, InputError> {
    if path.is_dir() {
        let files = crate::ingest::signal_log_files(path)?;
        let digests = files
            .iter()
            .map(|f| crate::digest::sha256_file(f).map_err(|e| InputError::io(f, e)))
            .collect::<Result<Vec<_>, _>>()?;
        return Ok(crate::ingest::log_digest(path, &files, &digests));
    }
    crate::digest::sha256_file(path).map_err(|e| InputError::io(path, e))
}

/// A cell's bytes as text: valid UTF-8 as it is, each invalid byte as `\xNN`, so two ids
/// that differ in an invalid byte stay two ids (a lossy decoding would make both `\u{FFFD}`).
pub fn bytes_text(b: &[u8]) -> std::borrow::Cow<'_, str> {
    match std::str::from_utf8(b) {
        Ok(s) => s.into(),
        Err(_) => {
            let mut out = String::with_capacity(b.len() + 8);
            for chunk in b.utf8_chunks() {
                out.push_str(chunk.valid());
                for byte in chunk.invalid() {
                    out.push_str(&format!("\\x{byte:02x}"));
                }
            }
            out.into()
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_invalid_byte_in_an_id_is_written_as_its_hex_not_lost() {
        assert_eq!(bytes_text(b"FAN-1"), "FAN-1");
        assert_eq!(bytes_text(b"F\xffN-1"), "F\\xffN-1");
        assert_ne!(bytes_text(b"F\xfeN"), bytes_text(b"F\xffN"));
    }

    #[test]
    fn csv_fields_are_quoted_as_rfc_4180_says() {
        let mut s = String::new();
        for v in ["plain", "a,b", "say \"hi\"", "two\nlines", ""] {
            csv_field(&mut s, v);
            s.push('|');
        }
        assert_eq!(s, "plain|\"a,b\"|\"say \"\"hi\"\"\"|\"two\nlines\"||");
    }

    #[test]
    fn text_values_with_spaces_or_hashes_are_json_strings() {
        let mut s = String::new();
        text_field(&mut s, "unit", "FAN-1");
        text_field(&mut s, "unit", "FAN 1");
        text_field(&mut s, "unit", "a#b");
        text_field(&mut s, "unit", "");
        assert_eq!(s, " unit=FAN-1 unit=\"FAN 1\" unit=\"a#b\" unit=\"\"");
    }
}
