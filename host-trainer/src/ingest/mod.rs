//! Ingest: bench logs and signal logs into a [`Dataset`] of raw readings, through one
//! entry, [`read`]: a role's files and where the channels come from ([`ScaleFrom`]); a
//! sheet or model that declares signals makes the files a signal log.
//!
//! Columns are found by name, by one rule for case (`names`, which also holds the column
//! resolution both kinds of log share). The label column's tokens name classes
//! ([`classes`]: GO and NO-GO today); optional unit-id and timestamp columns are kept out
//! of the channels. Every channel cell must be a finite number. Problems are reported with
//! file, line and column; `skip_bad_rows` counts and skips them instead.
//!
//! A bench log, in the order a byte crosses the reader:
//! `records` (blocks, record ends, fields) → `header` (names and columns) →
//! `parse` (one record to one row; `fast` for plain decimal records) → `scan`
//! (the pipelined pass, rows in file order; Parquet through `parquet`, `parquet_file`,
//! `parquet_cells`) → `read` (`read_log`, [`stream_units`]); after training [`stream`] streams a bench or signal log for a model.
//! `skip` says which errors are about one row and counts the rows skipped.
//! [`scaling`] maps each channel's valid range to the kernel's inputs; [`sheet`] reads
//! channel sheets and [`sheet_findings`] compares one with a log; [`dataset`] holds what
//! was read. A signal log (a window of samples per unit): `signal_units` streams its units
//! whole (`signal_columns` finds the columns, `signal_check` checks a unit's rows,
//! `signal_take` cuts a longer window, `signal_source` checks its bytes), [`signals`]
//! reduces each window to the feature channels [`signal_scale`] describes; `signal_rows`
//! lays out other files (numbered sample columns, Parquet through `signal_parquet`, a file
//! that is one unit) as long rows, and [`signal_log_files`] expands a folder.
//!
//! [`Dataset`]: dataset::Dataset

pub mod classes;
pub mod dataset;
pub mod draft;
mod fast;
mod files;
mod header;
pub(crate) mod names;
pub mod options;
mod parquet;
mod parquet_cells;
mod parquet_file;
mod parse;
mod read;
mod records;
pub mod scaling;
mod scan;
pub mod sheet;
pub mod sheet_findings;
mod signal_check;
mod signal_columns;
mod signal_files;
mod signal_parquet;
mod signal_rows;
pub mod signal_scale;
mod signal_source;
mod signal_take;
mod signal_units;
pub mod signals;
mod skip;
#[cfg(test)]
mod tests;

pub(crate) use files::same_columns;
pub use files::{ModelUnit, read, stream};
/// The column of a name and the name rule, as the reader finds a channel's column.
pub use names::{find as find_column, same_name};
pub use options::{
    GO_TOKENS, LABEL_NAMES, LogOptions, MAX_READING, NOGO_TOKENS, ScaleFrom, TIME_NAMES, UNIT_NAMES,
};
pub use read::{StreamedUnit, header_channels, stream_units};
pub use signal_files::{log_digest, signal_log_files};
pub use skip::SkipReport;
