//! The rows of one signal-log file in the long form the unit reader takes (one row per
//! sample), whatever layout the file has:
//!
//! - **long**: one row per sample, a column per signal, as the reader has always taken;
//! - **wide**: one row per unit, a signal's samples in the columns its `columns` pattern
//!   names (`vib_*`: `vib_0`, `vib_1`, …), in the order of the number in the column name;
//! - **list** (Parquet): one row per unit, the signal's column a list of samples.
//!
//! A row of a wide or list file becomes as many long rows as its longest window, all on
//! the file row's line, each holding the unit's other cells; a cell past a window's end is
//! empty, as in a long log. A file without a unit-id column is one unit whose id is the
//! file's stem; without a label column its label is the name of the folder the file sits
//! in, read as a label token (`pass/…`, `fail/…`). The unit reader
//! ([`stream_signal_units`](super::signals::stream_signal_units)) then applies one set of
//! rules to every layout.

use std::path::{Path, PathBuf};

use crate::error::{InputError, shown};
use crate::ingest::header::detect_delimiter;
use crate::ingest::names::{find, same_name};
use crate::ingest::options::{LABEL_NAMES, LogOptions, UNIT_NAMES};
use crate::ingest::signal_parquet::{FileRow, ParquetRows};
use crate::ingest::signal_scale::SignalScale;
use crate::ingest::signal_source::{Hashing, csv_error, read_error};

/// Where a file's rows come from.
enum Physical {
    Text {
        rdr: csv::Reader<std::io::BufReader<Hashing<std::fs::File>>>,
        width: usize,
    },
    Parquet(ParquetRows),
}

/// What a column of the long form holds.
enum Source {
    /// The file's column.
    Cell(usize),
    /// A signal's samples in these columns, sample k in the k-th.
    Wide(Vec<usize>),
    /// A signal's samples as the list in list column k (of [`FileRow::lists`]).
    List(usize),
    /// The same text on every row (a file's stem as its unit id, its folder as its label).
    Const(Vec<u8>),
}

/// The rows of one file in the long form.
pub(super) struct LongRows {
    path: PathBuf,
    opts: LogOptions,
    physical: Physical,
    /// Whether a comma in a number is its decimal mark (see [`LogOptions::decimal_comma`]).
    pub decimal_comma: bool,
    /// The long form's header.
    pub names: Vec<String>,
    sources: Vec<Source>,
    /// Each row of the file is one unit (wide or list layout).
    pub row_per_unit: bool,
    /// The unit id the whole file has when it has no unit-id column.
    pub one_unit: Option<String>,
    /// Each signal's sample columns (wide layout), else empty: errors name the column.
    pub wide: Vec<Vec<String>>,
    row: FileRow,
    /// The long row next handed on of the file row in `row`, and how many it makes.
    next_k: usize,
    count: usize,
}

/// A long row handed on: its line, and whether it begins a row of the file.
pub(super) struct Next {
    pub line: u64,
    pub new_file_row: bool,
}

impl LongRows {
    /// Opens `path` (delimited text, or Parquet by its magic) and lays out its columns for
    /// `signals`.
    ///
    /// # Errors
    /// I/O, an unreadable header, a signal found nowhere or in two forms, a pattern's
    /// numbering with a gap or a number twice, signals in different layouts, a file without
    /// unit-id and label column whose folder is no label token.
    pub(super) fn open(
        path: &Path,
        opts: &LogOptions,
        signals: &[SignalScale],
    ) -> Result<Self, InputError> {
        crate::input::regular_file(path)?;
        let (physical, names, lists, delimiter) = if crate::ingest::parquet_file::is_parquet(path) {
            let p = ParquetRows::open(path)?;
            let (names, lists) = (p.names.clone(), p.list_columns.clone());
            // Parquet numbers have no decimal mark; a text cell takes a comma only if asked.
            (Physical::Parquet(p), names, lists, b',')
        } else {
            let (rdr, names, delimiter) = open_text(path, opts)?;
            let width = names.len();
            (Physical::Text { rdr, width }, names, Vec::new(), delimiter)
        };
        let mut out = Self {
            path: path.into(),
            opts: opts.clone(),
            physical,
            decimal_comma: opts.decimal_comma.unwrap_or(delimiter != b','),
            names: Vec::new(),
            sources: Vec::new(),
            row_per_unit: false,
            one_unit: None,
            wide: vec![Vec::new(); signals.len()],
            row: FileRow::default(),
            next_k: 0,
            count: 0,
        };
        out.lay_out(&names, &lists, opts, signals)?;
        Ok(out)
    }

    /// The long form's columns from the file's `names` (`lists`: the list columns).
    fn lay_out(
        &mut self,
        names: &[String],
        lists: &[usize],
        opts: &LogOptions,
        signals: &[SignalScale],
    ) -> Result<(), InputError> {
        let path = self.path.as_path();
        let format = |message: String| InputError::Format {
            path: path.into(),
            message,
        };
        // Per file column: the signal whose sample it holds, and the sample number.
        let mut wide_of: Vec<Option<(usize, u64)>> = vec![None; names.len()];
        let mut per_sample: Vec<&str> = Vec::new();
        let mut per_unit: Vec<&str> = Vec::new();
        for (j, s) in signals.iter().enumerate() {
            let direct = find(names, &s.name);
            let mut numbered: Vec<(u64, usize)> = names
                .iter()
                .enumerate()
                .filter_map(|(i, n)| s.sample_of_column(n).map(|k| (k, i)))
                .collect();
            match (direct, numbered.is_empty()) {
                (Some(d), false) => {
                    return Err(format(format!(
                        "signal '{}' is both in column '{}' and in columns '{}', … (its `columns` pattern): keep one of them",
                        s.name, names[d], names[numbered[0].1]
                    )));
                }
                (Some(d), true) => {
                    if lists.contains(&d) {
                        per_unit.push(&s.name);
                    } else {
                        per_sample.push(&s.name);
                    }
                }
                (None, false) => {
                    numbered.sort_unstable();
                    check_numbering(s, names, &numbered).map_err(format)?;
                    for &(k, i) in &numbered {
                        wide_of[i] = Some((j, k));
                    }
                    self.wide[j] = numbered.iter().map(|&(_, i)| names[i].clone()).collect();
                    per_unit.push(&s.name);
                }
                (None, true) => return Err(missing_signal(path, names, s)),
            }
        }
        if let (Some(a), Some(b)) = (per_sample.first(), per_unit.first()) {
            return Err(format(format!(
                "signal '{a}' has one row per sample (its own column) but signal '{b}' one row per unit (numbered columns or a list): write all signals of a log in one layout"
            )));
        }
        self.row_per_unit = !per_unit.is_empty();
        for (i, name) in names.iter().enumerate() {
            match wide_of[i] {
                // The signal's column stands where its first sample column stood.
                Some((j, _)) if self.wide[j].first() == Some(name) => {
                    let cols = self.wide[j].iter().filter_map(|c| find(names, c)).collect();
                    self.names.push(signals[j].name.clone());
                    self.sources.push(Source::Wide(cols));
                }
                Some(_) => {}
                None => {
                    self.names.push(name.clone());
                    self.sources.push(match lists.iter().position(|&l| l == i) {
                        Some(k) => Source::List(k),
                        None => Source::Cell(i),
                    });
                }
            }
        }
        // A file without a unit-id column is one unit.
        let has_unit = match &opts.unit_id {
            Some(_) => true,
            None => UNIT_NAMES.iter().any(|u| find(names, u).is_some()),
        };
        if !has_unit {
            let stem = path
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default();
            self.names.push(UNIT_NAMES[0].into());
            self.sources.push(Source::Const(stem.clone().into_bytes()));
            let has_label =
                opts.label.is_some() || LABEL_NAMES.iter().any(|l| find(names, l).is_some());
            if !has_label {
                let folder = folder_name(path);
                if opts.classes().label(folder.as_bytes()).is_some() {
                    self.names.push(LABEL_NAMES[0].into());
                    self.sources.push(Source::Const(folder.into_bytes()));
                } else if !opts.label_optional {
                    return Err(InputError::NoLabel {
                        path: path.into(),
                        hint: format!(
                            "; the file has no unit-id column either (looked for: {}), so it is one unit, '{}', whose label is its folder's name: the folder '{}' is no label token ({}); put the file in a folder named by its verdict (pass/, fail/, …) or name its unit-id column with --unit-id",
                            UNIT_NAMES.join(", "),
                            shown(&stem),
                            shown(&folder),
                            opts.tokens()
                        ),
                    });
                }
            }
            self.one_unit = Some(stem);
        }
        Ok(())
    }

    /// The next long row into `record`, or `None` after the file's last row.
    ///
    /// # Errors
    /// The file's read errors (ragged rows, I/O, a damaged Parquet page).
    pub(super) fn next(
        &mut self,
        record: &mut csv::ByteRecord,
    ) -> Result<Option<Next>, InputError> {
        let new_file_row = self.next_k >= self.count;
        if new_file_row {
            if !self.read_file_row()? {
                return Ok(None);
            }
            self.next_k = 0;
            self.count = if self.row_per_unit {
                self.sources
                    .iter()
                    .map(|s| match s {
                        Source::Wide(c) => c.len(),
                        Source::List(k) => self.row.lists.get(*k).map_or(0, csv::ByteRecord::len),
                        _ => 0,
                    })
                    .max()
                    .unwrap_or(0)
                    .max(1)
            } else {
                1
            };
        }
        let k = self.next_k;
        self.next_k += 1;
        record.clear();
        let cells = &self.row.cells;
        for s in &self.sources {
            match s {
                Source::Cell(c) => record.push_field(cells.get(*c).unwrap_or_default()),
                Source::Wide(cols) => {
                    record.push_field(cols.get(k).and_then(|&c| cells.get(c)).unwrap_or_default())
                }
                Source::List(l) => record.push_field(
                    self.row
                        .lists
                        .get(*l)
                        .and_then(|r| r.get(k))
                        .unwrap_or_default(),
                ),
                Source::Const(text) => record.push_field(text),
            }
        }
        Ok(Some(Next {
            line: self.row.line,
            new_file_row,
        }))
    }

    /// Reads the next row of the file that is not blank; `false` at the end.
    fn read_file_row(&mut self) -> Result<bool, InputError> {
        let path = self.path.as_path();
        loop {
            let more = match &mut self.physical {
                Physical::Text { rdr, width } => {
                    let more = rdr
                        .read_byte_record(&mut self.row.cells)
                        .map_err(|e| csv_error(path, &self.opts, e))?;
                    self.row.line = self.row.cells.position().map_or(0, |p| p.line());
                    if more && self.row.cells.len() != *width && !blank(&self.row.cells) {
                        return Err(InputError::Ragged {
                            hint: String::new(),
                            path: path.into(),
                            line: self.row.line,
                            expected: *width,
                            found: self.row.cells.len(),
                        });
                    }
                    more
                }
                Physical::Parquet(p) => p.next(&mut self.row)?,
            };
            // A blank row (a spreadsheet's trailing line) belongs to no unit.
            if !more || !blank(&self.row.cells) || self.row.lists.iter().any(|l| !l.is_empty()) {
                return Ok(more);
            }
        }
    }

    /// The file's SHA-256 (empty when the options ask for no digest).
    ///
    /// # Errors
    /// I/O while hashing a Parquet file.
    pub(super) fn sha256(self) -> Result<String, InputError> {
        match self.physical {
            Physical::Text { rdr, .. } => Ok(rdr.into_inner().into_inner().sha256()),
            Physical::Parquet(_) if self.opts.digest => {
                crate::digest::sha256_file(&self.path).map_err(|e| InputError::io(&self.path, e))
            }
            Physical::Parquet(_) => Ok(String::new()),
        }
    }
}

/// Opens a delimited text file and reads its header.
#[allow(clippy::type_complexity)]
fn open_text(
    path: &Path,
    opts: &LogOptions,
) -> Result<
    (
        csv::Reader<std::io::BufReader<Hashing<std::fs::File>>>,
        Vec<String>,
        u8,
    ),
    InputError,
> {
    let file = std::fs::File::open(path).map_err(|e| InputError::io(path, e))?;
    let mut source = std::io::BufReader::with_capacity(
        1 << 16,
        Hashing::new(file, opts.digest, opts.max_line_len),
    );
    let delimiter = match opts.delimiter {
        Some(d) => d,
        None => {
            let tsv = path
                .extension()
                .is_some_and(|e| e.eq_ignore_ascii_case("tsv") || e.eq_ignore_ascii_case("tab"));
            let head =
                std::io::BufRead::fill_buf(&mut source).map_err(|e| read_error(path, opts, e))?;
            let first = head.split(|&b| b == b'\n').next().unwrap_or_default();
            if tsv { b'\t' } else { detect_delimiter(first) }
        }
    };
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(true)
        .flexible(true)
        .from_reader(source);
    let names: Vec<String> = match rdr.byte_headers() {
        Ok(h) if h.iter().any(|n| !n.is_empty()) => h
            .iter()
            .map(|n| String::from_utf8_lossy(n).trim().to_string())
            .collect(),
        Ok(_) => return Err(InputError::Empty { path: path.into() }),
        Err(e) => return Err(csv_error(path, opts, e)),
    };
    Ok((rdr, names, delimiter))
}

fn blank(r: &csv::ByteRecord) -> bool {
    r.iter().all(|f| f.trim_ascii().is_empty())
}

/// The name of the folder `path` sits in ("" for none).
pub(super) fn folder_name(path: &Path) -> String {
    path.parent()
        .and_then(Path::file_name)
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// Refuses a pattern's columns whose numbers do not run 0 (or 1), 1, 2, … without a gap
/// or a number twice; `numbered` is sorted.
fn check_numbering(
    s: &SignalScale,
    names: &[String],
    numbered: &[(u64, usize)],
) -> Result<(), String> {
    let pattern = s.columns.as_deref().unwrap_or_default();
    let first = numbered[0].0;
    if first > 1 {
        return Err(format!(
            "signal '{}': its first sample column is '{}' (number {first}); number the columns of `columns = \"{pattern}\"` from 0 (or 1)",
            s.name, names[numbered[0].1]
        ));
    }
    for (w, want) in numbered.windows(2).zip(first + 1..) {
        let (a, b) = (w[0], w[1]);
        if b.0 == a.0 {
            return Err(format!(
                "signal '{}': columns '{}' and '{}' both hold sample {} (`columns = \"{pattern}\"`); keep one",
                s.name, names[a.1], names[b.1], a.0
            ));
        }
        if b.0 != want {
            return Err(format!(
                "signal '{}': a gap in its sample columns: no column for sample {want} between '{}' and '{}' (`columns = \"{pattern}\"`)",
                s.name, names[a.1], names[b.1]
            ));
        }
    }
    Ok(())
}

/// The error for a signal no column holds: with a hint when the header has numbered
/// columns that look like its samples and the sheet declares no pattern for them.
fn missing_signal(path: &Path, names: &[String], s: &SignalScale) -> InputError {
    let looks = |n: &str| {
        let tail = n
            .get(s.name.len()..)
            .filter(|_| n.len() > s.name.len() && same_name(&n[..s.name.len()], &s.name));
        tail.is_some_and(|t| {
            let digits = t
                .trim_start_matches(['_', '[', '-', '.'])
                .trim_end_matches(']');
            !digits.is_empty() && digits.bytes().all(|b| b.is_ascii_digit())
        })
    };
    if let Some(example) = names.iter().find(|n| looks(n)) {
        let digits_at = example[s.name.len()..]
            .find(|c: char| c.is_ascii_digit())
            .map_or(example.len(), |i| i + s.name.len());
        let digits_end = example[digits_at..]
            .find(|c: char| !c.is_ascii_digit())
            .map_or(example.len(), |e| digits_at + e);
        let pattern = format!("{}*{}", &example[..digits_at], &example[digits_end..]);
        return InputError::Format {
            path: path.into(),
            message: format!(
                "no column '{}', but columns like '{}': if the log holds one row per unit with the signal's samples in numbered columns, declare `columns = \"{}\"` in its [[signal]]",
                s.name,
                shown(example),
                pattern.escape_debug()
            ),
        };
    }
    InputError::UnknownColumn {
        path: path.into(),
        name: s.name.clone(),
        columns: names.join(", "),
    }
}
