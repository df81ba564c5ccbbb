//! A starting channel sheet drawn from a log (`linegate sheet`): one `[[channel]]` per
//! channel column, with the range and lsb `train` would observe without a sheet, each
//! marked `confirmed = false` until someone puts the sensor's real range in.
//!
//! The sheet must train as the log does without one: its ranges come from
//! `read.rs`'s `observed_ranges` (the rows `train`'s first pass reads) through
//! [`ChannelScale::observed`], and its numbers are written in the shortest form that reads
//! back to the same double. A column whose name the device cannot keep (over
//! [`NAME_CAPACITY`] bytes, or holding control characters) gets a suggested `name` and is
//! read by `column`.

use std::collections::HashSet;
use std::fmt::Write as _;
use std::path::PathBuf;

use shared_model::NAME_CAPACITY;

use super::read::{ObservedColumn, header_columns, spread_checked};
use crate::error::{InputError, shell_word};
use crate::ingest::names::{name_key, short_name};
use crate::ingest::options::LogOptions;
use crate::ingest::scaling::ChannelScale;
use crate::ingest::skip::SkipReport;

/// One channel of a drawn sheet.
#[derive(Clone, Debug)]
pub struct DraftChannel {
    /// The scaling `train` would observe; [`ChannelScale::column`] set where the column's
    /// name cannot be the channel's.
    pub scale: ChannelScale,
    /// The smallest reading in the log.
    pub lo: f64,
    /// The largest reading in the log.
    pub hi: f64,
}

/// A channel sheet drawn from a log, every entry still to be confirmed.
#[derive(Clone, Debug)]
pub struct SheetDraft {
    /// The log it was drawn from.
    pub log: PathBuf,
    /// Rows read.
    pub rows: usize,
    /// The channels, in the log's column order.
    pub channels: Vec<DraftChannel>,
    /// Rows skipped as unreadable (`skip_bad_rows`).
    pub skipped: SkipReport,
}

/// Draws a channel sheet from the log of `files` (one or several files of the same
/// columns), read with `opts` (the column selection
/// `train` makes with the same options).
///
/// # Errors
/// The log's [`InputError`]s; a constant channel ([`InputError::ZeroSpread`]), as `train`
/// refuses it.
pub fn draft_sheet(files: &[PathBuf], opts: &LogOptions) -> Result<SheetDraft, InputError> {
    let Some(path) = files.first() else {
        return Err(InputError::Format {
            path: PathBuf::new(),
            message: "no log file given".into(),
        });
    };
    let path = path.as_path();
    let cols = header_columns(path, opts)?;
    // Several files of one log: the same columns, the ranges over all of them.
    let (ranges, rows, skipped) = super::files::observed_over(files, opts)?;
    // Every column of the header is taken: a suggested name must not be another column's.
    let mut taken: HashSet<String> = cols.names.iter().map(|n| name_key(n)).collect();
    let mut channels = Vec::with_capacity(ranges.len());
    for ObservedColumn { column, lo, hi } in ranges {
        spread_checked(path, &column, lo, hi, || {
            format!(
                "drop it with --ignore {} or declare its range in the sheet by hand",
                shell_word(&column)
            )
        })?;
        let aliased = column.len() > NAME_CAPACITY || column.chars().any(char::is_control);
        let name = if aliased {
            let name = fresh_name(&column, &taken);
            taken.insert(name_key(&name));
            name
        } else {
            column.clone()
        };
        let mut scale =
            ChannelScale::observed(&name, lo, hi).map_err(|message| InputError::Sheet {
                path: path.into(),
                message,
            })?;
        scale.column = aliased.then_some(column);
        channels.push(DraftChannel { scale, lo, hi });
    }
    Ok(SheetDraft {
        log: path.into(),
        rows,
        channels,
        skipped,
    })
}

/// [`short_name`] of `column`, with `_2`, `_3`, … in place of its end while the name is taken.
fn fresh_name(column: &str, taken: &HashSet<String>) -> String {
    let base = short_name(column, NAME_CAPACITY);
    if !taken.contains(&name_key(&base)) {
        return base;
    }
    (2..)
        .map(|k| {
            let suffix = format!("_{k}");
            let mut stem = base.clone();
            while stem.len() + suffix.len() > NAME_CAPACITY {
                stem.pop();
            }
            stem + &suffix
        })
        .find(|n| !taken.contains(&name_key(n)))
        .unwrap_or(base)
}

impl SheetDraft {
    /// How many entries read their column under another name.
    pub fn aliased(&self) -> usize {
        self.channels
            .iter()
            .filter(|c| c.scale.column.is_some())
            .count()
    }

    /// The sheet as TOML: a header saying how it was drawn, then one `[[channel]]` per
    /// channel, each with a comment and `confirmed = false`.
    pub fn to_toml(&self) -> String {
        let log = self.log.display().to_string();
        let log = log.escape_debug();
        let mut t = format!(
            "# Linegate channel sheet, drawn by `linegate sheet` from {log} ({} rows).\n\
             #\n\
             # Every range below is the one the log showed, widened by half its span on each side,\n\
             # and every lsb the power of ten giving at least 20,000 counts over it: the ranges\n\
             # `train` observes without a sheet, not the sensors' real ones. For each channel,\n\
             # put in the sensor's valid range, unit, lsb and zero, then set `confirmed = true`.\n\
             # `train` and `check` warn while entries are unconfirmed.\n",
            self.rows
        );
        for c in &self.channels {
            let s = &c.scale;
            let _ = write!(
                t,
                "\n[[channel]]\n# observed in the log: {} to {}; to be confirmed\n",
                c.lo, c.hi
            );
            if let Some(col) = &s.column {
                let _ = writeln!(
                    t,
                    "# the column's name cannot be a channel's (at most {NAME_CAPACITY} bytes, no control\n\
                     # characters): the channel is named by `name`, a suggestion, and read by `column`"
                );
                let _ = writeln!(t, "name = {}", toml_string(&s.name));
                let _ = writeln!(t, "column = {}", toml_string(col));
            } else {
                let _ = writeln!(t, "name = {}", toml_string(&s.name));
            }
            let _ = writeln!(t, "unit = \"\"  # the channel's unit, for reports");
            for (key, v) in [
                ("min", s.min),
                ("max", s.max),
                ("lsb", s.lsb),
                ("zero", s.zero),
            ] {
                let _ = writeln!(t, "{key} = {}", toml_float(v));
            }
            t.push_str("confirmed = false\n");
        }
        t
    }
}

/// A TOML basic string holding `s`.
fn toml_string(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 2);
    out.push('"');
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            c if c.is_control() => {
                let _ = write!(out, "\\u{:04X}", u32::from(c));
            }
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// A finite double as a TOML float that reads back to it: Rust's shortest round-trip form,
/// which always has a `.` or an exponent (`150.0`, `0.001`, `1e-7`).
fn toml_float(v: f64) -> String {
    format!("{v:?}")
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ingest::sheet::ChannelSheet;

    #[test]
    fn strings_and_floats_read_back() {
        let names = [
            "plain",
            "quote\"d",
            "back\\slash",
            "tab\tand\u{1b}esc",
            "ünï",
        ];
        let floats = [150.0, 0.001, 1e-7, -2.5e-300, 1.0e16, 123_456_789.125, -0.0];
        for n in names {
            for v in floats {
                let text = format!("s = {}\nv = {}\n", toml_string(n), toml_float(v));
                let parsed: toml::Table = toml::from_str(&text).unwrap();
                assert_eq!(parsed["s"].as_str(), Some(n), "{text}");
                let back = parsed["v"].as_float().unwrap();
                assert_eq!(back.to_bits(), v.to_bits(), "{text}");
            }
        }
    }

    #[test]
    fn suggested_names_avoid_taken_ones() {
        let long = "od280/od315_of_diluted_wines";
        let taken: HashSet<String> = ["OD280_od315_of_diluted", "od280_od315_of_diluted_2"]
            .iter()
            .map(|s| name_key(s))
            .collect();
        let n = fresh_name(long, &taken);
        assert_eq!(n, "od280_od315_of_diluted_3");
        // A suggestion of the full 24 bytes gives up its end for the number.
        let x = "x".repeat(30);
        let taken: HashSet<String> = [name_key(&"x".repeat(24))].into();
        assert_eq!(fresh_name(&x, &taken), format!("{}_2", "x".repeat(22)));
        assert!(n.len() <= NAME_CAPACITY);
    }

    #[test]
    fn a_drawn_sheet_parses_back() {
        let dir = tempfile::tempdir().unwrap();
        let log = dir.path().join("log.csv");
        let long = "a column name longer than the device keeps";
        std::fs::write(
            &log,
            format!("unit_id,x,\"{long}\",label\nu1,1.5,10,go\nu2,2.25,-3,nogo\nu3,1.75,4,go\n"),
        )
        .unwrap();
        let d = draft_sheet(std::slice::from_ref(&log), &LogOptions::default()).unwrap();
        assert_eq!((d.rows, d.channels.len(), d.aliased()), (3, 2, 1));
        let sheet = ChannelSheet::parse(&d.to_toml()).unwrap();
        assert_eq!(sheet.unconfirmed(), ["x", "a_column_name_longer"]);
        for (got, want) in sheet.channels.iter().zip(&d.channels) {
            assert_eq!(got, &want.scale);
        }
        assert_eq!(sheet.channels[1].log_column(), long);
    }
}
