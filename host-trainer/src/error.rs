//! Host errors: every message names the file, and where it applies the line and column.

use std::path::PathBuf;

/// A problem with a bench log or channel sheet. The CLI maps these to exit code 2.
#[derive(Debug, thiserror::Error)]
pub enum InputError {
    /// The file could not be opened or read.
    #[error("{path}: cannot read: {source}")]
    Io {
        /// File.
        path: PathBuf,
        /// Cause.
        source: std::io::Error,
    },
    /// The path is not a regular file (a FIFO, a device, a directory).
    #[error(
        "{path}: not a regular file; Linegate reads its inputs more than once (e.g. to hash and to parse), so a pipe, device or stdin cannot serve: save it to a file first"
    )]
    NotAFile {
        /// The path.
        path: PathBuf,
    },
    /// A file read whole is larger than any valid file of its kind.
    #[error("{path}: {size} bytes is more than a {kind} can be (at most {max} bytes)")]
    TooLarge {
        /// The path.
        path: PathBuf,
        /// What it should have been.
        kind: &'static str,
        /// Its size.
        size: u64,
        /// The limit.
        max: u64,
    },
    /// The file has no header row.
    #[error("{path}: the file is empty (a header row naming the columns is required)")]
    Empty {
        /// File.
        path: PathBuf,
    },
    /// The header has a name twice (names compare without regard to case).
    #[error(
        "{path}: line 1: columns '{first}' and '{second}' have the same name (column names compare without regard to case): columns {first_at} and {second_at} of the header; rename one, or leave both out with --ignore {ignore}"
    )]
    DuplicateHeader {
        /// File.
        path: PathBuf,
        /// The name's first column, as spelled there.
        first: String,
        /// The column repeating it, as spelled there.
        second: String,
        /// The first column's place in the header, from 1.
        first_at: usize,
        /// The repeating column's place, from 1.
        second_at: usize,
        /// The name as `--ignore` takes it (shell-quoted).
        ignore: String,
    },
    /// A channel sheet names a channel like another column of the log than the one it reads.
    #[error(
        "{path}: line 1: the channel sheet reads column '{column}' as channel '{name}', but column {position} of the log is named '{other}': the model's and the reports' channel '{name}' would be taken for that column; choose another `name` for it in the sheet",
        column = shown(.column),
        name = shown(.name),
        other = shown(.other)
    )]
    AliasClash {
        /// The log.
        path: PathBuf,
        /// The channel's name in the sheet.
        name: String,
        /// The column it reads, as the log spells it.
        column: String,
        /// The other column of that name, as the log spells it.
        other: String,
        /// That column's place in the header, from 1.
        position: usize,
    },
    /// A named column is not in the header.
    #[error(
        "{path}: no column '{name}' in the header (columns: {columns})",
        name = shown(.name),
        columns = shown(.columns)
    )]
    UnknownColumn {
        /// File.
        path: PathBuf,
        /// Missing name.
        name: String,
        /// What the header has.
        columns: String,
    },
    /// No label column given or found.
    #[error(
        "{path}: no label column; name it with --label (looked for: label, verdict, result, status){hint}"
    )]
    NoLabel {
        /// File.
        path: PathBuf,
        /// What the header suggests instead (separator, line ends), or empty.
        hint: String,
    },
    /// A row has the wrong number of fields.
    #[error("{path}: line {line}: expected {expected} fields, found {found} (ragged row){hint}")]
    Ragged {
        /// What the row suggests (an unclosed quote), or empty.
        hint: String,
        /// File.
        path: PathBuf,
        /// 1-based line.
        line: u64,
        /// Fields in the header.
        expected: usize,
        /// Fields in the row.
        found: usize,
    },
    /// A cell is empty.
    #[error("{path}: {at}, column '{column}': the cell is empty; {hint}", column = shown(.column))]
    Missing {
        /// File.
        path: PathBuf,
        /// The row: its line, or its Parquet row group and row.
        at: Place,
        /// Column name.
        column: String,
        /// What to do: fill it in, leave the column out, or skip the row.
        hint: String,
    },
    /// A row repeats the header's names: files joined by hand.
    #[error(
        "{path}: line {line} repeats the header row (were files joined into one?); give each file as its own log file (e.g. `linegate train day-1.csv day-2.csv`, or `[logs] train = [\"day-*.csv\"]` in the project file): each is read with its header and hashed on its own"
    )]
    RepeatedHeader {
        /// File.
        path: PathBuf,
        /// 1-based line.
        line: u64,
    },
    /// A cell is not a number.
    #[error(
        "{path}: {at}, column '{column}': '{value}' is not a number ({})",
        not_numeric_hint(.column),
        column = shown(.column)
    )]
    NotNumeric {
        /// File.
        path: PathBuf,
        /// The row: its line, or its Parquet row group and row.
        at: Place,
        /// Column name.
        column: String,
        /// The cell, lossily decoded.
        value: String,
    },
    /// A cell is NaN, infinite, or too large to be a reading.
    #[error("{path}: {at}, column '{column}': '{value}' is not a finite reading", column = shown(.column))]
    NotFinite {
        /// File.
        path: PathBuf,
        /// The row: its line, or its Parquet row group and row.
        at: Place,
        /// Column name.
        column: String,
        /// The cell.
        value: String,
    },
    /// A cell holds a finite number beyond the largest reading (a Parquet integer or decimal).
    #[error(
        "{path}: {at}, column '{column}': {value} is beyond the largest reading a channel takes (magnitude 1e15){}",
        if *inexact { "; an integer above 2^53 cannot even be represented exactly as a 64-bit float" } else { "" }, column = shown(.column))]
    BeyondReading {
        /// File.
        path: PathBuf,
        /// The row: its line, or its Parquet row group and row.
        at: Place,
        /// Column name.
        column: String,
        /// The cell, as stored.
        value: String,
        /// An integer above 2^53, which no 64-bit float holds exactly.
        inexact: bool,
    },
    /// A reading is outside the channel's declared valid range.
    #[error(
        "{path}: {at}, column '{column}': {value} is outside the channel's valid range [{min}, {max}] (from the channel sheet; for a channel the sheet does not declare, the range observed in a first pass over this log, so a log that changes while it is read also ends here)", column = shown(.column))]
    OutOfRange {
        /// File.
        path: PathBuf,
        /// The row: its line, or its Parquet row group and row.
        at: Place,
        /// Column name.
        column: String,
        /// The reading.
        value: f64,
        /// Range minimum.
        min: f64,
        /// Range maximum.
        max: f64,
    },
    /// The label cell is not a known GO or NO-GO token.
    #[error(
        "{path}: {at}, column '{column}': unknown label '{value}' ({tokens})", column = shown(.column))]
    UnknownLabel {
        /// File.
        path: PathBuf,
        /// The row: its line, or its Parquet row group and row.
        at: Place,
        /// Label column.
        column: String,
        /// The cell.
        value: String,
        /// The accepted tokens, as `GO: …; NO-GO: …`, and the flags that map more.
        tokens: String,
    },
    /// The label cell is a number or boolean that no stated mapping covers.
    #[error(
        "{path}: {at}, column '{column}': label '{value}': {}",
        mapping_hint(*boolean),
        column = shown(.column)
    )]
    UnmappedLabel {
        /// File.
        path: PathBuf,
        /// The row: its line, or its Parquet row group and row.
        at: Place,
        /// Label column.
        column: String,
        /// The cell.
        value: String,
        /// Whether the label is a boolean (else a number): the mapping suggested differs.
        boolean: bool,
    },
    /// The log holds more units than the reader keeps in memory.
    #[error("{path}: more than {max} units; split the log or raise --max-rows")]
    TooManyRows {
        /// File.
        path: PathBuf,
        /// The limit.
        max: usize,
    },
    /// A line is longer than the reader accepts.
    #[error("{path}: line {line}: longer than {max} bytes; is this a bench log?")]
    LineTooLong {
        /// File.
        path: PathBuf,
        /// 1-based line.
        line: u64,
        /// Limit in bytes.
        max: usize,
    },
    /// A carriage return ends a line without a line feed (CR-only line ends).
    #[error(
        "{path}: line {line}: a carriage return (CR) ends a line without a line feed; the line ends look like CR only (old Mac exports), which Linegate does not read (every row would seem to be on one line): convert the line ends to LF or CR LF (e.g. `tr '\\r' '\\n' < old.csv > new.csv`)"
    )]
    BareCr {
        /// File.
        path: PathBuf,
        /// 1-based line (counted by line feeds) holding the carriage return.
        line: u64,
    },
    /// The header is not UTF-8.
    #[error("{path}: line 1: the header is not valid UTF-8")]
    HeaderNotUtf8 {
        /// File.
        path: PathBuf,
    },
    /// The log has a header but no usable rows.
    #[error("{path}: no data rows{skipped}")]
    NoRows {
        /// File.
        path: PathBuf,
        /// Note on skipped rows, if any.
        skipped: String,
    },
    /// Only one class is present.
    #[error(
        "{path}: every one of the {rows} units is {class}; training needs both GO and NO-GO units"
    )]
    OneClass {
        /// File.
        path: PathBuf,
        /// Units read.
        rows: usize,
        /// The only class.
        class: &'static str,
    },
    /// The labels name more classes than GO and NO-GO, which today's trainers, audit and
    /// device decide between.
    #[error(
        "{path}: the labels name {classes} classes; Linegate decides GO or NO-GO: map every failure label to the NO-GO tokens (--nogo-labels)"
    )]
    MoreClasses {
        /// File.
        path: PathBuf,
        /// How many classes the list has.
        classes: usize,
    },
    /// A declared class has no unit in the training log.
    #[error(
        "{path}: the labels name no unit of the class(es) {missing} (units per class: {counts}); training needs units of every declared class: drop the class's --class or add its units"
    )]
    ClassWithoutUnits {
        /// File.
        path: PathBuf,
        /// The classes without units.
        missing: String,
        /// Units per class.
        counts: String,
    },
    /// Training ended without a direction to decide by (every weight zero, or not finite).
    #[error(
        "{path}: training found no separating direction ({detail}); no model written. The classes overlap too much for this trainer: run `linegate check` to see the units in conflict, or try --trainer pocket or a smaller --c"
    )]
    NoDirection {
        /// The training log.
        path: PathBuf,
        /// What the trainer produced.
        detail: String,
    },
    /// The hard margin was asked for on a log that no hyperplane separates.
    #[error(
        "{path}: --trainer hard-margin needs a log that a hyperplane separates, and this one is not ({detail}); use --trainer max-margin (the soft margin, C chosen by cross-validation), or run `linegate check` to see the units in conflict"
    )]
    NotSeparable {
        /// The training log.
        path: PathBuf,
        /// How the verdict was reached.
        detail: String,
    },
    /// The operating point's target cannot be met on the held-out units.
    #[error("{path}: no operating point: {detail}")]
    NoOperatingPoint {
        /// The training log.
        path: PathBuf,
        /// Why.
        detail: String,
    },
    /// A channel never changes.
    #[error(
        "{path}: channel '{column}' has zero spread (every unit reads {value}), so it cannot tell units apart; {hint}", column = shown(.column))]
    ZeroSpread {
        /// File.
        path: PathBuf,
        /// Column name.
        column: String,
        /// The constant value.
        value: f64,
        /// Why it may be constant and what to do.
        hint: String,
    },
    /// More channels than a model holds.
    #[error(
        "{path}: {count} channels selected{detail}; a model on the device holds at most {max} ({hint})"
    )]
    TooManyChannels {
        /// File.
        path: PathBuf,
        /// Channels selected.
        count: usize,
        /// Where they come from (a signal log's readings and features), or empty.
        detail: String,
        /// Capacity.
        max: usize,
        /// How to choose fewer.
        hint: &'static str,
    },
    /// No channel selected.
    #[error(
        "{path}: no channel columns left after removing label, unit id, timestamp and ignored columns"
    )]
    NoChannels {
        /// File.
        path: PathBuf,
    },
    /// A unit of a signal log is not whole: a short or over-long window, a gap, a sample
    /// that is not a valid number, a unit split in two places.
    #[error("{path}: line {line}, unit '{unit}': {message}")]
    Signal {
        /// File.
        path: PathBuf,
        /// 1-based line of the row at fault.
        line: u64,
        /// The unit id.
        unit: String,
        /// What is wrong, naming the column and sample.
        message: String,
    },
    /// Channel sheet problem.
    #[error("{path}: {message}")]
    Sheet {
        /// File.
        path: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// A column read as a channel holds values that are not numbers (a Parquet column's type).
    #[error(
        "{path}: column '{column}' holds {found}, not numbers; a channel column must hold integers, floating-point or decimal numbers, or text that reads as numbers (leave it out with --ignore {})", shell_word(.column), column = shown(.column))]
    ColumnType {
        /// File.
        path: PathBuf,
        /// Column name.
        column: String,
        /// The column's type, as the file declares it.
        found: String,
    },
    /// A Parquet file could not be decoded.
    #[error("{path}: {at}: cannot decode the Parquet file: {message}")]
    Parquet {
        /// File.
        path: PathBuf,
        /// Where decoding stopped (its footer, or a row group).
        at: String,
        /// The decoder's message.
        message: String,
    },
    /// A private key file that group or others may read or write.
    #[error(
        "{path}: the private key file has mode {mode:03o}, open to group or others; nothing is signed with a key others may have read. Make it private: chmod 600 {path}"
    )]
    KeyFileOpen {
        /// The key file.
        path: PathBuf,
        /// Its permission bits.
        mode: u32,
    },
    /// A file written by this tool could not be parsed.
    #[error("{path}: {message}")]
    Format {
        /// File.
        path: PathBuf,
        /// What is wrong.
        message: String,
    },
}

/// Where a row sits in a log, as error messages name it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Place {
    /// A line of a text log, counted from 1 as editors count.
    Line(u64),
    /// A row of a Parquet log, counted from 0 as Parquet tools count.
    Row {
        /// The row group.
        group: u32,
        /// The row within its group.
        row: u64,
        /// The row within the file.
        file_row: u64,
    },
}

impl From<u64> for Place {
    fn from(line: u64) -> Self {
        Self::Line(line)
    }
}

impl std::fmt::Display for Place {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Self::Line(n) => write!(f, "line {n}"),
            Self::Row {
                group,
                row,
                file_row,
            } => write!(
                f,
                "row group {group}, row {row} (row {file_row} of the file; counted from 0)"
            ),
        }
    }
}

/// Where an [`InputError`] points: its file, the row (when the error is about one) and
/// the column's name (when about one), for front ends that carry them as fields.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Location<'a> {
    /// The file.
    pub path: &'a std::path::Path,
    /// The row: a text log's line (from 1) or a Parquet log's row.
    pub place: Option<Place>,
    /// The column's (or channel's) name.
    pub column: Option<&'a str>,
}

impl InputError {
    /// The file, row and column this error names (each where it has one).
    pub fn location(&self) -> Location<'_> {
        use InputError as E;
        let (path, place, column) = match self {
            E::Missing {
                path, at, column, ..
            }
            | E::NotNumeric {
                path, at, column, ..
            }
            | E::NotFinite {
                path, at, column, ..
            }
            | E::BeyondReading {
                path, at, column, ..
            }
            | E::OutOfRange {
                path, at, column, ..
            }
            | E::UnknownLabel {
                path, at, column, ..
            }
            | E::UnmappedLabel {
                path, at, column, ..
            } => (path, Some(*at), Some(column)),
            E::Ragged { path, line, .. }
            | E::RepeatedHeader { path, line, .. }
            | E::LineTooLong { path, line, .. }
            | E::BareCr { path, line }
            | E::Signal { path, line, .. } => (path, Some(Place::Line(*line)), None),
            E::AliasClash { path, column, .. }
            | E::ZeroSpread { path, column, .. }
            | E::ColumnType { path, column, .. }
            | E::UnknownColumn {
                path, name: column, ..
            } => (path, None, Some(column)),
            E::Io { path, .. }
            | E::NotAFile { path, .. }
            | E::TooLarge { path, .. }
            | E::Empty { path, .. }
            | E::DuplicateHeader { path, .. }
            | E::NoLabel { path, .. }
            | E::TooManyRows { path, .. }
            | E::HeaderNotUtf8 { path }
            | E::NoRows { path, .. }
            | E::OneClass { path, .. }
            | E::MoreClasses { path, .. }
            | E::ClassWithoutUnits { path, .. }
            | E::NoDirection { path, .. }
            | E::NotSeparable { path, .. }
            | E::NoOperatingPoint { path, .. }
            | E::TooManyChannels { path, .. }
            | E::NoChannels { path, .. }
            | E::Sheet { path, .. }
            | E::Parquet { path, .. }
            | E::KeyFileOpen { path, .. }
            | E::Format { path, .. } => (path, None, None),
        };
        Location {
            path,
            place,
            column: column.map(String::as_str),
        }
    }

    /// Wraps an I/O error with its file.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Self::Io {
            path: path.into(),
            source,
        }
    }
}

/// A problem writing output. Nothing partial is left behind.
#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    /// The target exists and `--force` was not given.
    #[error("{0}: already exists; pass --force to overwrite")]
    Exists(PathBuf),
    /// The target exists and is not a regular file; nothing else is ever replaced.
    #[error(
        "{0}: exists and is not a regular file (a device, folder or link); Linegate replaces only regular files, even with --force"
    )]
    NotAFile(PathBuf),
    /// Two outputs of one command would be the same file.
    #[error(
        "{path}: both the {first} and the {second} would be written to this one file; give them different names (nothing was written)"
    )]
    SameFile {
        /// The file.
        path: PathBuf,
        /// The output queued first.
        first: String,
        /// The output queued second.
        second: String,
    },
    /// An output would replace one of the command's inputs.
    #[error(
        "{path}: the {output} would be written over the {input}, an input of this command; write it elsewhere (nothing was written)"
    )]
    OverInput {
        /// The file.
        path: PathBuf,
        /// The output's role.
        output: String,
        /// The input's role.
        input: String,
    },
    /// Another run is writing into the same folder.
    #[error(
        "{0}: another linegate run is writing into this folder; wait for it to finish, or write elsewhere"
    )]
    Busy(PathBuf),
    /// Writing failed.
    #[error("{path}: cannot write: {source}")]
    Io {
        /// File.
        path: PathBuf,
        /// Cause.
        source: std::io::Error,
    },
}

/// Characters of a name or cell echoed whole; longer ones are cut.
const SHOWN_CHARS: usize = 80;

/// `text` from a file as a message echoes it: whole up to 80 characters, else its first 80
/// followed by `… (N bytes)`.
pub(crate) fn shown(text: &str) -> String {
    match text.char_indices().nth(SHOWN_CHARS) {
        None => text.to_string(),
        Some((cut, _)) => format!("{}… ({} bytes)", &text[..cut], text.len()),
    }
}

/// [`shown`] for bytes, decoded lossily.
pub(crate) fn shown_bytes(bytes: &[u8]) -> String {
    // No more than 4 bytes a character: decode only what can be shown.
    let head = String::from_utf8_lossy(&bytes[..bytes.len().min(4 * SHOWN_CHARS + 4)]);
    match head.char_indices().nth(SHOWN_CHARS) {
        None if bytes.len() <= 4 * SHOWN_CHARS + 4 => head.into_owned(),
        None => format!("{head}… ({} bytes)", bytes.len()),
        Some((cut, _)) => format!("{}… ({} bytes)", &head[..cut], bytes.len()),
    }
}

/// `name` as a shell argument: as it is when it holds only characters no shell treats
/// specially, else in single quotes (a quote inside written `'\''`), so that a hint such as
/// `--ignore 'serial number'` pastes into a shell. A name too long to echo is cut as
/// [`shown`] cuts it: no one pastes 100 KB.
pub(crate) fn shell_word(name: &str) -> String {
    if name.chars().nth(SHOWN_CHARS).is_some() {
        return shown(name);
    }
    let plain = !name.is_empty()
        && name
            .bytes()
            .all(|b| b.is_ascii_alphanumeric() || b"_-.,:/+=@%".contains(&b));
    if plain {
        name.to_string()
    } else {
        format!("'{}'", name.replace('\'', r"'\''"))
    }
}

/// Whether a column name reads like a unit's id (`serial_number`, `unit`, `DUT id`), for
/// hints: such a column holding text is more likely the unit id than a channel.
fn looks_like_id(name: &str) -> bool {
    let key = name.to_ascii_lowercase();
    ["serial", "unit", "uuid", "barcode", "device"]
        .iter()
        .any(|w| key.contains(w))
        || key
            .split(|c: char| !c.is_ascii_alphanumeric())
            .any(|part| matches!(part, "id" | "sn" | "uid" | "dut"))
}

/// What to do about a cell of channel `column` that is not a number: leave the column out,
/// or skip the row; for an id-looking column, name it as the unit id.
pub(crate) fn not_numeric_hint(column: &str) -> String {
    let q = shell_word(column);
    if looks_like_id(column) {
        format!(
            "if '{}' identifies the units, name it with --unit-id {q}; else exclude the column with --ignore {q}, or the row with --skip-bad-rows",
            shown(column)
        )
    } else {
        format!("exclude the column with --ignore {q}, or the row with --skip-bad-rows")
    }
}

/// What to do about an empty cell of channel `column`.
pub(crate) fn empty_cell_hint(column: &str) -> String {
    format!(
        "fill in the reading, leave the column out with --ignore {}, or skip the row with --skip-bad-rows",
        shell_word(column)
    )
}

/// How to state the mapping for boolean (`true`) or numeric (`false`) labels.
pub(crate) fn mapping_hint(boolean: bool) -> String {
    let (one, zero) = if boolean {
        ("true", "false")
    } else {
        ("1", "0")
    };
    format!(
        "a numeric or boolean label needs a stated mapping: pass --go-labels {one} --nogo-labels {zero} where {one} means a good unit, or --go-labels {zero} --nogo-labels {one} where {one} means a defect (list every value the column holds)"
    )
}
