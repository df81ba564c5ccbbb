//! Replay by parts: the device's lines for one file (or partition) of a log, numbered
//! from 0 within it, with the part's outcome counts; parts merge in log order into the
//! lines `linegate replay --form device` prints for the whole log (after its model line),
//! numbered over the whole log, byte for byte. The merge is associative (any grouping of
//! parts kept in order gives the same text), so an engine can reduce parts as a tree.

use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::error::InputError;
use crate::field::score::{Form, Printer, score_logs};
use crate::ingest::{LogOptions, SkipReport};
use crate::release::pack::DeviceModel;
use crate::train::float_model::FloatModel;

/// The device's lines and outcome counts over consecutive units of a log.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ReplayPart {
    /// Units.
    pub units: u64,
    /// Units the device decided GO.
    pub go: u64,
    /// Units it decided NO-GO.
    pub nogo: u64,
    /// Units it sent to a retest (RECHECK).
    pub recheck: u64,
    /// Units it refused (FAULT).
    pub faults: u64,
    /// Rows skipped under `skip_bad_rows`.
    pub skipped: SkipReport,
    /// The device's line per unit (line feed included), numbered from 0 at the part's
    /// first unit.
    pub lines: String,
}

/// Why parts cannot merge.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum ReplayPartError {
    /// A line of a part does not start with its unit number.
    #[error("replay part line {line}: does not start with a unit number: {text}")]
    Line {
        /// 1-based line within the part.
        line: usize,
        /// The line.
        text: String,
    },
    /// A part's bytes are not a part.
    #[error("not a replay part: {0}")]
    Bytes(String),
}

impl ReplayPart {
    /// The device's lines for every unit of `file`, read with `opts` for the float model
    /// `fm`, through its blob's kernel `model` (as `replay` reads and scores a log).
    ///
    /// # Errors
    /// The file's [`InputError`].
    pub fn count(
        file: &Path,
        opts: &LogOptions,
        fm: &FloatModel,
        model: &DeviceModel,
    ) -> Result<Self, InputError> {
        let files = [file.to_path_buf()];
        let printer = Printer::new(Form::Device, &files, fm, model);
        let mut p = Self::default();
        let mut skipped = SkipReport::default();
        score_logs(&files, opts, fm, model, &mut skipped, |u| {
            printer.unit(&mut p.lines, u);
            p.units += 1;
            match &u.result {
                Ok(d) => match d.verdict {
                    shared_model::Verdict::Go => p.go += 1,
                    shared_model::Verdict::NoGo => p.nogo += 1,
                    shared_model::Verdict::Recheck => p.recheck += 1,
                },
                Err(_) => p.faults += 1,
            }
        })?;
        p.skipped = skipped;
        Ok(p)
    }

    /// This part followed by `later` (its units numbered on after this part's).
    ///
    /// # Errors
    /// [`ReplayPartError::Line`] when a line of `later` does not start with a unit number
    /// (a part not made by [`count`](Self::count)).
    pub fn merge(mut self, later: Self) -> Result<Self, ReplayPartError> {
        for (k, line) in later.lines.lines().enumerate() {
            let (n, rest) = line
                .split_once(' ')
                .and_then(|(n, rest)| Some((n.parse::<u64>().ok()?, rest)))
                .ok_or_else(|| ReplayPartError::Line {
                    line: k + 1,
                    text: line.to_string(),
                })?;
            self.lines.push_str(&(n + self.units).to_string());
            self.lines.push(' ');
            self.lines.push_str(rest);
            self.lines.push('\n');
        }
        self.units += later.units;
        self.go += later.go;
        self.nogo += later.nogo;
        self.recheck += later.recheck;
        self.faults += later.faults;
        self.skipped.merge(&later.skipped);
        Ok(self)
    }

    /// The part's bytes, to move it between processes.
    pub fn to_bytes(&self) -> Vec<u8> {
        serde_json::to_vec(self).unwrap_or_default()
    }

    /// A part from [`to_bytes`](Self::to_bytes).
    ///
    /// # Errors
    /// [`ReplayPartError::Bytes`] when the bytes are not a part.
    pub fn from_bytes(bytes: &[u8]) -> Result<Self, ReplayPartError> {
        serde_json::from_slice(bytes).map_err(|e| ReplayPartError::Bytes(e.to_string()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn part(lines: &str, go: u64, faults: u64) -> ReplayPart {
        ReplayPart {
            units: lines.lines().count() as u64,
            go,
            faults,
            lines: lines.into(),
            ..ReplayPart::default()
        }
    }

    /// By hand: parts of 2, 1 and 2 units renumber 0..5, and either grouping gives the
    /// same text and counts.
    #[test]
    fn parts_renumber_in_order_and_group_either_way() {
        let a = part("0 GO 12\n1 FAULT ch0\n", 1, 1);
        let b = part("0 NO-GO -3\n", 0, 0);
        let c = part("0 GO 7\n1 RECHECK 1 FAULT1\n", 1, 0);
        let left = a
            .clone()
            .merge(b.clone())
            .unwrap()
            .merge(c.clone())
            .unwrap();
        let right = a.merge(b.merge(c).unwrap()).unwrap();
        assert_eq!(
            left.lines,
            "0 GO 12\n1 FAULT ch0\n2 NO-GO -3\n3 GO 7\n4 RECHECK 1 FAULT1\n"
        );
        assert_eq!(left, right);
        assert_eq!((left.units, left.go, left.faults), (5, 2, 1));
        let bytes = left.to_bytes();
        assert_eq!(ReplayPart::from_bytes(&bytes).unwrap(), left);
        assert!(part("x GO 1\n", 1, 0).merge(part("y", 0, 0)).is_err());
    }
}
