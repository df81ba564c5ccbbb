//! Which column of a signal log is which: the unit id (required), label, sample number,
//! timestamp, each signal, and the reading channels (a model's, `--channels`, or the ones
//! a training sheet declares: any other column is refused, as it would be taken for a
//! reading). Names are matched by `names`' one rule.

use std::path::Path;

use crate::error::{InputError, shell_word, shown};
use crate::ingest::names::{Lookup, same_name};
use crate::ingest::options::{LABEL_NAMES, LogOptions, TIME_NAMES, UNIT_NAMES};
use crate::ingest::signal_scale::SignalScale;

/// Names of the optional column that numbers a unit's samples.
pub const SAMPLE_NAMES: &[&str] = &["sample", "sample_index"];

/// What a signal log is read for: its reading channels, and what becomes of a unit whose
/// window the device would refuse.
pub enum ReadFor<'a> {
    /// Training or a check, with a sheet: the reading channels are `--channels` when given,
    /// else the columns the sheet declares (`[[channel]]`); any other column that is not the
    /// unit id, label, sample number, timestamp or a signal is refused (unless left out with
    /// `--ignore`), since it would be taken for a reading. A window the device would refuse
    /// is an error.
    Training {
        /// The reading channels the sheet declares.
        declared: &'a [String],
        /// The feature channels the sheet declares, counted with the readings against the
        /// device's capacity as soon as the header is read.
        features: usize,
    },
    /// Evaluation by a model (holdout, audit, replay): its reading channels, every other
    /// column passed over. A window shorter or longer than its signal's is handed on as it
    /// is, so that the kernel refuses it (a FAULT unit), as it refuses a sample out of range.
    Model {
        /// The model's reading channels, in model order.
        readings: &'a [String],
    },
}

/// Where each kind of column is.
pub(super) struct Columns {
    pub(super) names: Vec<String>,
    pub(super) unit: usize,
    pub(super) label: Option<usize>,
    pub(super) sample: Option<usize>,
    pub(super) time: Option<usize>,
    pub(super) signals: Vec<usize>,
    pub(super) readings: Vec<usize>,
    /// Each signal's sample columns in a wide file (else empty), for messages.
    pub(super) wide: Vec<Vec<String>>,
    /// Each row of the file is a unit (wide or list layout).
    pub(super) row_per_unit: bool,
    /// The file has no unit-id column: it is one unit.
    pub(super) one_unit: bool,
}

impl Columns {
    pub(super) fn resolve(
        path: &Path,
        names: &[String],
        opts: &LogOptions,
        signals: &[SignalScale],
        read_for: &ReadFor<'_>,
    ) -> Result<Self, InputError> {
        let look = Lookup::new(path, names, &opts.ignore)?;
        let unit = look.pick(&opts.unit_id, UNIT_NAMES)?.ok_or_else(|| InputError::Format {
            path: path.into(),
            message: format!(
                "a signal log needs a unit-id column to tell one unit's rows from the next (looked for: {}; name it with --unit-id)",
                UNIT_NAMES.join(", ")
            ),
        })?;
        let label = look.pick(&opts.label, LABEL_NAMES)?;
        if label.is_none() && !opts.label_optional {
            return Err(InputError::NoLabel {
                path: path.into(),
                hint: String::new(),
            });
        }
        let time = look.pick(&opts.timestamp, TIME_NAMES)?;
        let signals = signals
            .iter()
            .map(|s| look.find(&s.name).ok_or_else(|| look.unknown(&s.name)))
            .collect::<Result<Vec<_>, _>>()?;
        // A signal named like the sample-number column is a signal.
        let sample = look
            .pick(&None, SAMPLE_NAMES)?
            .filter(|i| !signals.contains(i));
        let taken = |i: usize| {
            i == unit
                || Some(i) == label
                || Some(i) == sample
                || Some(i) == time
                || signals.contains(&i)
        };
        let (wanted, declared, features) = match *read_for {
            ReadFor::Model { readings } => (Some(readings.to_vec()), &[][..], 0),
            ReadFor::Training { declared, features } => (opts.channels.clone(), declared, features),
        };
        let readings = match wanted {
            Some(list) => look.columns(&list)?,
            None => {
                let (readings, other): (Vec<usize>, Vec<usize>) = (0..names.len())
                    .filter(|&i| {
                        !taken(i) && !names[i].is_empty() && !look.ignored(&opts.ignore, i)
                    })
                    .partition(|&i| declared.iter().any(|d| same_name(d, &names[i])));
                if !other.is_empty() {
                    let role = |what: &str, c: Option<usize>| {
                        c.map(|c| format!(", {what} '{}'", names[c]))
                            .unwrap_or_default()
                    };
                    return Err(undeclared_columns(
                        path,
                        other.iter().map(|&i| names[i].as_str()).collect(),
                        format!(
                            "unit id '{}'{}{}{}",
                            names[unit],
                            role("sample number", sample),
                            role("label", label),
                            role("timestamp", time),
                        ),
                    ));
                }
                readings
            }
        };
        if let Some(&i) = readings.iter().find(|&&i| taken(i)) {
            return Err(InputError::Format {
                path: path.into(),
                message: format!(
                    "column '{}' is asked for as a reading channel but is the unit id, label, sample number, timestamp or a signal",
                    names[i]
                ),
            });
        }
        let count = readings.len() + features;
        if count > shared_model::MAX_CHANNELS {
            return Err(InputError::TooManyChannels {
                path: path.into(),
                count,
                detail: format!(
                    " ({} reading columns and {features} features of the sheet)",
                    readings.len()
                ),
                max: shared_model::MAX_CHANNELS,
                hint: "declare fewer [[feature]] entries, or choose the readings with --channels",
            });
        }
        Ok(Self {
            names: names.to_vec(),
            unit,
            label,
            sample,
            time,
            signals,
            readings,
            wide: Vec::new(),
            row_per_unit: false,
            one_unit: false,
        })
    }

    /// " (column 'vib_5')" for sample `k` of signal `j` in a wide file, else "".
    pub(super) fn sample_column(&self, j: usize, k: usize) -> String {
        self.wide
            .get(j)
            .and_then(|w| w.get(k))
            .map(|c| format!(" (column '{c}')"))
            .unwrap_or_default()
    }

    /// What a unit's rows are called in messages: rows of the file, or samples of the
    /// unit's one row.
    pub(super) fn rows_word(&self) -> &'static str {
        if self.row_per_unit { "samples" } else { "rows" }
    }

    /// Said of an over-long unit in a file without unit-id column.
    pub(super) fn one_unit_note(&self) -> &'static str {
        if self.one_unit {
            "; the file has no unit-id column (looked for: unit_id, unit, serial), so it is read as one unit: name its unit-id column with --unit-id if it holds several"
        } else {
            ""
        }
    }
}

/// The refusal of columns a training signal log would take for readings although the sheet
/// declares none of them: a signal log's reading is one number per unit, so such a column
/// (a time in seconds, an operator's note) would otherwise fail as a reading that changes
/// within the unit, or enter the model unannounced. `recognised` lists the columns taken by
/// role, so that a timestamp taken (or not taken) by its name is seen.
fn undeclared_columns(path: &Path, columns: Vec<&str>, recognised: String) -> InputError {
    let quoted: Vec<String> = columns.iter().map(|c| format!("'{}'", shown(c))).collect();
    let like_time: Vec<&str> = columns
        .iter()
        .copied()
        .filter(|c| {
            let c = c.to_ascii_lowercase();
            TIME_NAMES.iter().any(|t| c.starts_with(t))
        })
        .collect();
    let time_hint = match like_time.first() {
        Some(t) => format!(
            "; if '{}' is the timestamp, name it with --timestamp {} (by name only {} are taken)",
            shown(t),
            shell_word(t),
            TIME_NAMES.join(", ")
        ),
        None => String::new(),
    };
    InputError::Format {
        path: path.into(),
        message: format!(
            "line 1: column{} {} {} neither a signal, a reading channel the sheet declares ([[channel]]), the unit id, label, sample number nor timestamp (recognised: {recognised}); leave {} out with --ignore {}, declare {} in the sheet, or choose the reading channels with --channels{time_hint}",
            if columns.len() == 1 { "" } else { "s" },
            quoted.join(", "),
            if columns.len() == 1 { "is" } else { "are" },
            if columns.len() == 1 { "it" } else { "them" },
            shell_word(&columns.join(",")),
            if columns.len() == 1 { "it" } else { "them" },
        ),
    }
}
