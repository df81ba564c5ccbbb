//! Where a channel sheet and a log read with it disagree, as typed findings: entries still
//! to be confirmed, log channels the sheet does not declare (their observed range becomes
//! the device's valid range), sheet channels the log does not have (not used). The CLI
//! words and prints them; the library decides what they are.

use crate::ingest::dataset::Dataset;
use crate::ingest::names::same_name;
use crate::ingest::sheet::ChannelSheet;

/// One disagreement between a channel sheet and a log read with it.
#[derive(Clone, Debug, PartialEq)]
pub enum SheetFinding {
    /// Channel entries marked `confirmed = false` (observed ranges, not the sensors').
    Unconfirmed {
        /// How many entries are unconfirmed.
        count: usize,
        /// How many channel entries the sheet has.
        of: usize,
        /// The first unconfirmed entry's name.
        first: String,
    },
    /// A reading channel of the log the sheet does not declare: its observed range is the
    /// device's valid range.
    Undeclared {
        /// The channel's name.
        channel: String,
        /// Its range's low end.
        min: f64,
        /// Its range's high end.
        max: f64,
    },
    /// A sheet channel that is no channel of the log: it is not used.
    Unused {
        /// The log column the sheet names.
        column: String,
    },
}

/// The findings for `ds` read with `sheet`, in the order they are told: unconfirmed
/// entries, then the log's undeclared channels in channel order, then the sheet's unused
/// channels in sheet order. Feature channels are declared by their `[[feature]]` (their
/// range proved from the signal), so they are never undeclared.
pub fn sheet_findings(sheet: &ChannelSheet, ds: &Dataset) -> Vec<SheetFinding> {
    let mut out = Vec::new();
    let unconfirmed = sheet.unconfirmed();
    if let Some(first) = unconfirmed.first() {
        out.push(SheetFinding::Unconfirmed {
            count: unconfirmed.len(),
            of: sheet.channels.len(),
            first: first.clone(),
        });
    }
    for c in ds.scales.iter().filter(|c| c.source.is_none()) {
        if sheet.get(c.log_column()).is_none() {
            out.push(SheetFinding::Undeclared {
                channel: c.name.clone(),
                min: c.min,
                max: c.max,
            });
        }
    }
    for c in &sheet.channels {
        if !ds
            .scales
            .iter()
            .any(|d| same_name(d.log_column(), c.log_column()))
        {
            out.push(SheetFinding::Unused {
                column: c.log_column().to_string(),
            });
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ingest::scaling::ChannelScale;

    #[test]
    fn findings_name_unconfirmed_undeclared_and_unused_channels() {
        let sheet = ChannelSheet::parse(
            "[[channel]]\nname='A'\nmin=0\nmax=1\nconfirmed=false\n[[channel]]\nname='gone'\nmin=0\nmax=1\n",
        )
        .unwrap();
        let a = ChannelScale::new("a", "", 0.0, 1.0, 1e-3, 0.0).unwrap();
        let b = ChannelScale::new("b", "", -2.0, 3.0, 1e-3, 0.0).unwrap();
        let ds = Dataset::empty(std::path::Path::new("log.csv"), vec![a, b]);
        assert_eq!(
            sheet_findings(&sheet, &ds),
            vec![
                SheetFinding::Unconfirmed {
                    count: 1,
                    of: 2,
                    first: "A".into()
                },
                SheetFinding::Undeclared {
                    channel: "b".into(),
                    min: -2.0,
                    max: 3.0
                },
                SheetFinding::Unused {
                    column: "gone".into()
                },
            ]
        );
    }
}
