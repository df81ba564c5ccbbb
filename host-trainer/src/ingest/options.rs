//! How a log is read: the options, the default column names and label tokens.

use crate::ingest::classes::{Class, Classes};
use crate::ingest::scaling::ChannelScale;
use crate::ingest::sheet::ChannelSheet;
use crate::ingest::signal_scale::SignalScale;

/// Readings beyond this magnitude are refused as not finite: no sensor reports 1e15 of anything.
pub const MAX_READING: f64 = 1e15;

/// Whether `x` can be a reading: finite and at most [`MAX_READING`] in magnitude.
pub(super) fn is_reading(x: f64) -> bool {
    x.is_finite() && x.abs() <= MAX_READING
}

pub use crate::ingest::classes::{GO_TOKENS, NOGO_TOKENS};
/// Label column names looked for when none is given.
pub const LABEL_NAMES: &[&str] = &["label", "verdict", "result", "status"];
/// Unit-id column names looked for when none is given.
pub const UNIT_NAMES: &[&str] = &["unit_id", "unit", "serial"];
/// Timestamp column names looked for when none is given.
pub const TIME_NAMES: &[&str] = &["timestamp", "time", "date"];

/// How to read a bench log.
#[derive(Clone, Debug)]
pub struct LogOptions {
    /// Channel columns, in order; `None` means every remaining column.
    pub channels: Option<Vec<String>>,
    /// Label column; `None` looks for [`LABEL_NAMES`].
    pub label: Option<String>,
    /// Unit-id column; `None` looks for [`UNIT_NAMES`].
    pub unit_id: Option<String>,
    /// Timestamp column; `None` looks for [`TIME_NAMES`].
    pub timestamp: Option<String>,
    /// Columns to leave out.
    pub ignore: Vec<String>,
    /// GO tokens, lower case.
    pub go_labels: Vec<String>,
    /// NO-GO tokens, lower case.
    pub nogo_labels: Vec<String>,
    /// Declared classes (`--class`, `--go-class`); `None`: GO and NO-GO from the token
    /// lists above.
    pub classes: Option<Classes>,
    /// Skip and count bad rows instead of failing.
    pub skip_bad_rows: bool,
    /// Longest accepted line, in bytes.
    pub max_line_len: usize,
    /// Most units held in memory (4 bytes per reading each).
    pub max_rows: usize,
    /// Show a progress bar.
    pub progress: bool,
    /// Field delimiter; `None` takes tab for `.tsv`/`.tab` files and otherwise the most
    /// frequent of comma, semicolon, tab and pipe in the header row (comma if none).
    pub delimiter: Option<u8>,
    /// Whether a comma in a number is its decimal mark (`5,1`); `None` says yes exactly when
    /// the delimiter is not a comma (a semicolon file from a spreadsheet set to a decimal
    /// comma), where a comma inside a cell cannot be a delimiter.
    pub decimal_comma: Option<bool>,
    /// Keep each unit's timestamp cell (for a holdout split by time).
    pub keep_times: bool,
    /// A log may lack a label column (scoring new units, as `replay` does); its units then
    /// carry label 0. Training and audit always need labels.
    pub label_optional: bool,
    /// Hash the file (SHA-256) into [`Dataset::sha256`](super::dataset::Dataset::sha256) for
    /// provenance. Commands that record or compare no digest (`check`) turn it off: on a
    /// large log the hash costs about a tenth of the read.
    pub digest: bool,
}

impl Default for LogOptions {
    fn default() -> Self {
        Self {
            channels: None,
            label: None,
            unit_id: None,
            timestamp: None,
            ignore: Vec::new(),
            go_labels: GO_TOKENS.iter().map(|s| s.to_string()).collect(),
            nogo_labels: NOGO_TOKENS.iter().map(|s| s.to_string()).collect(),
            classes: None,
            skip_bad_rows: false,
            max_line_len: 1 << 20,
            max_rows: 50_000_000,
            progress: false,
            label_optional: false,
            delimiter: None,
            decimal_comma: None,
            keep_times: false,
            digest: true,
        }
    }
}

impl LogOptions {
    /// The classes the label column names, each with its tokens: the declared classes,
    /// else GO (`go_labels`) and NO-GO (`nogo_labels`). Readers map a label cell through
    /// this list only.
    pub fn classes(&self) -> Classes {
        self.classes
            .clone()
            .unwrap_or_else(|| Classes::go_nogo(&self.go_labels, &self.nogo_labels))
    }

    /// The accepted label tokens, as error messages list them.
    pub(super) fn tokens(&self) -> String {
        self.classes().tokens()
    }
}

/// How a log was read, as a float model records it: the choices a user makes about columns,
/// labels and bad rows, so the model's later readings (audit, pack, replay) make the same.
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RecordedOptions {
    /// The channel columns, if named.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub channels: Option<Vec<String>>,
    /// The label column, if named.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    /// The unit-id column, if named.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unit_id: Option<String>,
    /// The timestamp column, if named.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub timestamp: Option<String>,
    /// Columns left out.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub ignore: Vec<String>,
    /// GO tokens.
    pub go_labels: Vec<String>,
    /// NO-GO tokens.
    pub nogo_labels: Vec<String>,
    /// The declared classes with their tokens (`--class`), if declared.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub classes: Vec<Class>,
    /// The GO class's name, or `none` (`--go-class`), when classes were declared.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub go_class: Option<String>,
    /// Whether bad rows were skipped and counted.
    #[serde(default)]
    pub skip_bad_rows: bool,
    /// The field delimiter, if given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub delimiter: Option<char>,
    /// Whether a comma was the decimal mark, if given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub decimal_comma: Option<bool>,
}

impl From<&LogOptions> for RecordedOptions {
    fn from(o: &LogOptions) -> Self {
        Self {
            channels: o.channels.clone(),
            label: o.label.clone(),
            unit_id: o.unit_id.clone(),
            timestamp: o.timestamp.clone(),
            ignore: o.ignore.clone(),
            go_labels: o.go_labels.clone(),
            nogo_labels: o.nogo_labels.clone(),
            classes: o.classes.as_ref().map_or_else(Vec::new, |c| c.list.clone()),
            go_class: o.classes.as_ref().map(Classes::go_name),
            skip_bad_rows: o.skip_bad_rows,
            delimiter: o.delimiter.map(char::from),
            decimal_comma: o.decimal_comma,
        }
    }
}

/// Where a log's channels and their scaling come from, for bench logs and signal logs
/// alike: a sheet or a model that declares signals makes the log a signal log
/// ([`ScaleFrom::signals`]).
#[derive(Clone, Copy, Debug)]
pub enum ScaleFrom<'a> {
    /// Observed ranges with headroom for every channel.
    Observed,
    /// A channel sheet; channels it does not declare use observed ranges. With
    /// `[[signal]]` entries, its features and every other column as a reading channel.
    Sheet(&'a ChannelSheet),
    /// Exactly a trained model's channels and scalings (holdout, audit, replay).
    Model {
        /// The model's channels (readings and features), in model order.
        channels: &'a [ChannelScale],
        /// The model's signals; empty for a model of readings.
        signals: &'a [SignalScale],
    },
}

impl<'a> ScaleFrom<'a> {
    /// A model of readings only: exactly these channels.
    pub fn model(channels: &'a [ChannelScale]) -> Self {
        Self::Model {
            channels,
            signals: &[],
        }
    }

    /// The signals the sheet or model declares (none: a bench log of readings).
    pub fn signals(&self) -> &'a [SignalScale] {
        match *self {
            Self::Observed => &[],
            Self::Sheet(s) => &s.signals,
            Self::Model { signals, .. } => signals,
        }
    }
}

/// How to state a mapping for a label cell that is a number or a boolean (`1`, `0`, `true`,
/// `2.0`) no GO or NO-GO token covers, or `None` for any other cell. Which class such a value
/// is cannot be guessed: in some exports 1 is a good unit, in others a defect.
pub(crate) fn unmapped_label_hint(token: &[u8]) -> Option<String> {
    unmapped_label(token).map(crate::error::mapping_hint)
}

/// Whether `token` is a boolean (`Some(true)`) or a number (`Some(false)`) label, which
/// needs a stated mapping; `None` for a word.
pub(crate) fn unmapped_label(token: &[u8]) -> Option<bool> {
    let text = std::str::from_utf8(token).ok()?.trim();
    if text.eq_ignore_ascii_case("true") || text.eq_ignore_ascii_case("false") {
        Some(true)
    } else if text.parse::<f64>().is_ok_and(f64::is_finite) {
        Some(false)
    } else {
        None
    }
}
