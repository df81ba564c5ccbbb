//! A channel sheet's TOML: the entries as written, and the one set of names they share.
//!
//! [`ChannelSheet`](super::scaling::ChannelSheet) turns the entries into scalings; this
//! module only reads the file and settles what each name stands for. A `[[channel]]` may
//! read its log column under another name (`column`): the device keeps at most
//! [`NAME_CAPACITY`](shared_model::NAME_CAPACITY) bytes of a name, and exports have
//! longer column names. A channel's name and its column, signals and features then share
//! one set of names, compared as log columns are (without ASCII case): each name stands
//! for one entry, so a report's channel can never be taken for another column of the log.
//!
//! ```toml
//! [[channel]]
//! name = "od280_od315"                     # the channel in the model, blob and reports
//! column = "od280/od315_of_diluted_wines"  # the log column it is read from
//! min = 0.6
//! max = 4.7
//! lsb = 0.001
//! confirmed = false                        # a range not yet checked (`linegate sheet`)
//! ```

use std::collections::HashMap;

use serde::Deserialize;

use crate::error::shown;
use crate::ingest::names::{name_key, same_name};

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SheetFile {
    #[serde(default)]
    pub(super) channel: Vec<SheetChannel>,
    #[serde(default)]
    pub(super) signal: Vec<SheetSignal>,
    #[serde(default)]
    pub(super) feature: Vec<SheetFeature>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SheetChannel {
    pub(super) name: String,
    /// The log column, when it is not `name`; [`read_file`] clears one equal to the name.
    pub(super) column: Option<String>,
    #[serde(default)]
    pub(super) unit: String,
    pub(super) min: f64,
    pub(super) max: f64,
    #[serde(default = "one")]
    pub(super) lsb: f64,
    #[serde(default)]
    pub(super) zero: f64,
    pub(super) noise: Option<f64>,
    /// `false` marks a range still to be checked (an observed one).
    #[serde(default = "yes")]
    pub(super) confirmed: bool,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SheetSignal {
    pub(super) name: String,
    #[serde(default)]
    pub(super) unit: String,
    #[serde(default = "one")]
    pub(super) lsb: f64,
    #[serde(default)]
    pub(super) zero: f64,
    pub(super) raw_min: i32,
    pub(super) raw_max: i32,
    pub(super) window: u16,
    pub(super) offset: Option<i32>,
    pub(super) noise: Option<f64>,
    pub(super) sample_rate: Option<f64>,
    pub(super) take: Option<crate::ingest::signal_scale::Take>,
    pub(super) columns: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SheetFeature {
    pub(super) name: String,
    pub(super) signal: String,
    pub(super) kind: String,
    pub(super) cycles: Option<f64>,
    pub(super) frequency: Option<f64>,
}

fn one() -> f64 {
    1.0
}

fn yes() -> bool {
    true
}

/// What a name in the sheet stands for, as a message names it.
struct Owner {
    what: &'static str,
    name: String,
    /// Whether the name is the entry's log column rather than its own name.
    column: bool,
}

impl Owner {
    fn described(&self, entry: &str) -> String {
        if self.column {
            format!(
                "channel '{}' reads column '{}'",
                self.name.escape_debug(),
                entry.escape_debug()
            )
        } else {
            format!("{} '{}'", self.what, entry.escape_debug())
        }
    }
}

/// Parses a sheet's TOML and checks its names: every channel's name and column, every
/// signal and every feature stand for one entry each.
///
/// # Errors
/// A message naming the line and column of a TOML error, or both entries of a clash.
pub(super) fn read_file(text: &str) -> Result<SheetFile, String> {
    let mut file: SheetFile =
        toml::from_str(text).map_err(|e: toml::de::Error| toml_error(text, &e))?;
    if file.channel.is_empty() && file.signal.is_empty() {
        return Err(
            "the sheet declares no [[channel]] and no [[signal]]; declare at least one".into(),
        );
    }
    // Through a map: a sheet of 100,000 channels must not take minutes.
    let mut seen: HashMap<String, (Owner, String)> = HashMap::new();
    let mut fresh = |spelled: &str, owner: Owner| -> Result<(), String> {
        let key = name_key(spelled);
        if let Some((first, first_spelled)) = seen.get(&key) {
            if !first.column && !owner.column && first.what == owner.what {
                return Err(format!(
                    "{} '{}' is declared twice (names compare without case, as log columns do; channels, signals and features share one set of names)",
                    owner.what,
                    spelled.escape_debug()
                ));
            }
            return Err(format!(
                "{} and {}: one name may stand for one entry only (names compare without case, as log columns do; channel names, their columns, signals and features share one set)",
                first.described(first_spelled),
                owner.described(spelled)
            ));
        }
        seen.insert(key, (owner, spelled.to_string()));
        Ok(())
    };
    for c in &mut file.channel {
        if c.column
            .as_deref()
            .is_some_and(|col| same_name(col, &c.name))
        {
            c.column = None;
        }
        fresh(
            &c.name,
            Owner {
                what: "channel",
                name: c.name.clone(),
                column: false,
            },
        )?;
        if let Some(col) = &c.column {
            if col.trim().is_empty() {
                return Err(format!(
                    "channel '{}': `column` is empty; give the log column's name, or leave the key out to read the column '{}'",
                    c.name.escape_debug(),
                    c.name.escape_debug()
                ));
            }
            fresh(
                col,
                Owner {
                    what: "channel",
                    name: c.name.clone(),
                    column: true,
                },
            )?;
        }
    }
    for g in &file.signal {
        fresh(
            &g.name,
            Owner {
                what: "signal",
                name: g.name.clone(),
                column: false,
            },
        )?;
    }
    for f in &file.feature {
        fresh(
            &f.name,
            Owner {
                what: "feature",
                name: f.name.clone(),
                column: false,
            },
        )?;
    }
    Ok(file)
}

/// A TOML error as a message: its line and column and the line itself cut to a readable
/// length (the parser's own text echoes the whole line, however long).
fn toml_error(text: &str, e: &toml::de::Error) -> String {
    let message = e.message().trim_end();
    let Some(span) = e.span() else {
        return message.to_string();
    };
    let at = span.start.min(text.len());
    let start = text[..at].rfind('\n').map_or(0, |k| k + 1);
    let end = text[at..].find('\n').map_or(text.len(), |k| at + k);
    let line = text[..start].matches('\n').count() + 1;
    let column = text[start..at].chars().count() + 1;
    format!(
        "TOML parse error at line {line}, column {column}: {message} (the line: {})",
        shown(text[start..end].trim_end())
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_column_clashing_with_a_name_is_refused_naming_both() {
        let head = "[[channel]]\nname='short'\ncolumn='a_long_column'\nmin=0\nmax=1\n";
        // Another channel named like the column.
        let e = read_file(&format!(
            "{head}[[channel]]\nname='A_Long_Column'\nmin=0\nmax=1\n"
        ))
        .err()
        .unwrap();
        assert!(
            e.contains("channel 'short' reads column 'a_long_column'")
                && e.contains("channel 'A_Long_Column'"),
            "{e}"
        );
        // Another channel reading a column of the alias's name.
        let e = read_file(&format!(
            "{head}[[channel]]\nname='b'\ncolumn='SHORT'\nmin=0\nmax=1\n"
        ))
        .err()
        .unwrap();
        assert!(
            e.contains("channel 'short'") && e.contains("channel 'b' reads column 'SHORT'"),
            "{e}"
        );
        // A column equal to the name is no alias.
        let f = read_file("[[channel]]\nname='a'\ncolumn='A'\nmin=0\nmax=1\n").unwrap();
        assert_eq!(f.channel[0].column, None);
        let e = read_file("[[channel]]\nname='a'\ncolumn=' '\nmin=0\nmax=1\n")
            .err()
            .unwrap();
        assert!(e.contains("`column` is empty"), "{e}");
    }

    #[test]
    fn entries_are_confirmed_unless_marked() {
        let f = read_file(
            "[[channel]]\nname='a'\nmin=0\nmax=1\n[[channel]]\nname='b'\nmin=0\nmax=1\nconfirmed=false\n",
        )
        .unwrap();
        assert!(f.channel[0].confirmed && !f.channel[1].confirmed);
    }
}
