//! A channel sheet: its TOML (the entries as written, and the one set of names they
//! share) and [`ChannelSheet`], the entries turned into scalings (`scaling.rs` holds the
//! scale maths; this room parses and checks the file). A `[[channel]]` may
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

//!
//! A channel sheet declares ranges; a channel it leaves out takes its observed range with
//! 50 % of its span added on each side.
//!
//! ```toml
//! # Linegate channel sheet
//! [[channel]]
//! name = "supply_current"   # the channel's name; also its column in the bench log
//! # column = "Supply current (mA), station 3"  # optional: the log column, if not `name`
//! unit = "mA"
//! min = 150.0                # valid physical range; the device refuses readings outside
//! max = 900.0
//! lsb = 0.1                  # physical units per raw count (ADC gain); default 1
//! zero = 0.0                 # physical value at raw 0 (ADC offset); default 0
//! noise = 2.0                # optional: sensor noise, for the tolerance analysis
//! # confirmed = false         # optional: an observed range still to be checked
//! ```
//!
//! A sheet may also declare signals (a window of samples per unit, read from a signal log)
//! and feature channels computed from them by the device's own integer code (see
//! [`signal_scale`](super::signal_scale) and [`signals`](super::signals)):
//!
//! ```toml
//! [[signal]]
//! name = "vibration"         # column in the signal log (one row per sample)
//! unit = "g"
//! lsb = 0.001                # physical units per raw count; default 1
//! zero = -2.048              # physical value at raw 0; default 0
//! raw_min = 0                # valid raw samples (ADC counts)
//! raw_max = 4095
//! window = 256               # samples per unit
//! sample_rate = 2000.0       # optional, samples per second (for a band in Hz)
//! noise = 0.004              # optional: noise per sample, physical units
//! # offset = 2048            # optional: raw count features measure from; default physical zero
//! # take = "last"            # optional: a unit with more samples uses its first/last `window`
//! # columns = "vibration_*"  # optional: a log with one row per unit holds the samples in
//! #                          # columns vibration_0, vibration_1, … (the `*` is the number)
//!
//! [[feature]]
//! name = "vib_rms"           # the channel's name in the model and reports
//! signal = "vibration"
//! kind = "rms"               # mean, rms, min, max, peak_to_peak, abs_peak, std_dev,
//!                            # zero_crossings, band
//!
//! [[feature]]
//! name = "vib_120hz"
//! signal = "vibration"
//! kind = "band"
//! frequency = 120.0          # Hz (needs sample_rate), or cycles = 15.36 per window
//! ```

use std::collections::HashMap;

use serde::Deserialize;

use crate::error::InputError;
use crate::error::shown;
use crate::ingest::names::{name_key, same_name};
use crate::ingest::scaling::ChannelScale;
use crate::ingest::signal_scale::{FeatureSource, SignalScale};
use std::path::Path;

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

/// A channel sheet: declared ranges, raw conversion and noise per channel, and the signals
/// and feature channels of a signal log.
#[derive(Clone, Debug, Default)]
pub struct ChannelSheet {
    /// Declared reading channels, in file order.
    pub channels: Vec<ChannelScale>,
    /// Declared signals, in file order (the order the device passes their windows).
    pub signals: Vec<SignalScale>,
    /// Feature channels ([`ChannelScale::source`] set), in file order.
    pub features: Vec<ChannelScale>,
    /// Channels marked `confirmed = false`.
    unconfirmed: Vec<String>,
}

impl ChannelSheet {
    /// A sheet of these reading channels only (a log's scaling decided elsewhere, e.g. the
    /// observed ranges over several files).
    pub fn of_channels(channels: Vec<ChannelScale>) -> Self {
        Self {
            channels,
            ..Self::default()
        }
    }

    /// Reads a channel sheet.
    ///
    /// # Errors
    /// [`InputError::Io`] or [`InputError::Sheet`] naming the problem.
    pub fn read(path: &Path) -> Result<Self, InputError> {
        let text = crate::input::read_text(path, "channel sheet", crate::input::MAX_TEXT_FILE)?;
        Self::from_text(path, &text)
    }

    /// Parses the text of the sheet file `path` (named in errors).
    ///
    /// # Errors
    /// [`InputError::Sheet`] naming the problem.
    pub fn from_text(path: &Path, text: &str) -> Result<Self, InputError> {
        Self::parse(text).map_err(|message| InputError::Sheet {
            path: path.to_path_buf(),
            message,
        })
    }

    /// Parses a channel sheet's text.
    ///
    /// # Errors
    /// A message naming the line or channel at fault.
    pub fn parse(text: &str) -> Result<Self, String> {
        let file = read_file(text)?;
        let mut channels: Vec<ChannelScale> = Vec::new();
        let mut unconfirmed = Vec::new();
        for c in file.channel {
            let mut s = ChannelScale::new(&c.name, &c.unit, c.min, c.max, c.lsb, c.zero)?;
            if c.noise.is_some_and(|n| !(n.is_finite() && n >= 0.0)) {
                return Err(format!(
                    "channel '{}': noise must be a non-negative number",
                    c.name
                ));
            }
            s.noise = c.noise;
            s.column = c.column;
            if !c.confirmed {
                unconfirmed.push(c.name);
            }
            channels.push(s);
        }
        let mut signals: Vec<SignalScale> = Vec::new();
        for g in file.signal {
            let s = SignalScale::new(
                &g.name,
                &g.unit,
                g.lsb,
                g.zero,
                (g.raw_min, g.raw_max),
                g.window,
                g.offset,
                g.noise,
            )?
            .with_sample_rate(g.sample_rate)?
            .with_layout(g.take, g.columns)?;
            signals.push(s);
        }
        if signals.len() > shared_model::limits::MAX_SIGNALS {
            return Err(format!(
                "{} signals declared; a model holds at most {}",
                signals.len(),
                shared_model::limits::MAX_SIGNALS
            ));
        }
        let mut features = Vec::new();
        for f in file.feature {
            let at = |m: String| format!("feature '{}': {m}", f.name.escape_debug());
            let signal = signals
                .iter()
                .find(|s| same_name(&s.name, &f.signal))
                .ok_or_else(|| at(format!("no [[signal]] named '{}'", f.signal.escape_debug())))?;
            let cycles = match (f.cycles, f.frequency, signal.sample_rate) {
                (Some(_), Some(_), _) => {
                    return Err(at("give `cycles` or `frequency`, not both".into()));
                }
                (None, Some(hz), Some(rate)) => Some(hz * f64::from(signal.window) / rate),
                (None, Some(_), None) => {
                    return Err(at(format!(
                        "`frequency` needs the signal's `sample_rate` (or give `cycles` per window); signal '{}' has none",
                        signal.name.escape_debug()
                    )));
                }
                (c, None, _) => c,
            };
            let source = FeatureSource::parse(signal, &f.kind, cycles).map_err(at)?;
            features.push(ChannelScale::of_feature(&f.name, signal, source)?);
        }
        if let Some(s) = signals.iter().find(|s| {
            !features
                .iter()
                .any(|f| f.source.as_ref().is_some_and(|src| src.signal == s.name))
        }) {
            return Err(format!(
                "signal '{}' has no [[feature]]: declare one (e.g. kind = \"rms\") or remove the signal",
                s.name.escape_debug()
            ));
        }
        Ok(Self {
            channels,
            signals,
            features,
            unconfirmed,
        })
    }

    /// The declared scaling of the log column `column`, matched as log columns are (ASCII
    /// case-insensitively) against each channel's [`log_column`](ChannelScale::log_column).
    pub fn get(&self, column: &str) -> Option<&ChannelScale> {
        self.channels
            .iter()
            .find(|c| same_name(c.log_column(), column))
    }

    /// The names of the channels marked `confirmed = false` (ranges still to be checked, as
    /// `linegate sheet` writes every entry), in file order.
    pub fn unconfirmed(&self) -> &[String] {
        &self.unconfirmed
    }
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

    #[test]
    fn sheet_errors_name_the_channel() {
        let e = ChannelSheet::parse("[[channel]]\nname='a'\nmin=1\nmax=0\n").unwrap_err();
        assert!(e.contains("'a'") && e.contains("below"), "{e}");
        let e = ChannelSheet::parse("[[channel]]\nname='a'\nmin=0\nmax=1\nbogus=2\n").unwrap_err();
        assert!(e.contains("bogus"), "{e}");
        let e = ChannelSheet::parse(
            "[[channel]]\nname='a'\nmin=0\nmax=1\n[[channel]]\nname='a'\nmin=0\nmax=1\n",
        )
        .unwrap_err();
        assert!(e.contains("twice"), "{e}");
    }
}
