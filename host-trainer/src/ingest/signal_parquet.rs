//! A Parquet signal log's rows as text cells, the form the signal reader parses, so that a
//! Parquet log and its CSV export give the same units sample for sample. Each value is
//! written as the text its CSV export holds (the rules of [`parquet`](super::parquet)):
//! 64-bit floats by their shortest round-trip decimal (read back to the same float),
//! 32-bit floats by theirs (as `f32`, not widened), integers, decimals, text, booleans and
//! timestamps by their text form; a null is an empty cell. A list column (`list<float>`,
//! `large_list`, `fixed_size_list` of numbers) holds one unit's window per row.
//!
//! A row's line is its row in the file plus 2, the line it has in the CSV export with a
//! header, as for Parquet logs of readings.

use std::fs::File;
use std::path::{Path, PathBuf};

use arrow_array::cast::AsArray;
use arrow_array::types::{ArrowPrimitiveType, Float32Type, Float64Type};
use arrow_array::{Array, ArrayRef};
use arrow_schema::DataType;
use parquet::arrow::arrow_reader::{ParquetRecordBatchReader, ParquetRecordBatchReaderBuilder};

use crate::error::InputError;

/// One row of the file: its line, its cells (a list column's cell empty), and the lists of
/// the list columns (Parquet), in column order of `lists`.
#[derive(Default)]
pub(super) struct FileRow {
    pub line: u64,
    pub cells: csv::ByteRecord,
    pub lists: Vec<csv::ByteRecord>,
}

/// Rows decoded at a time: bounded memory on large row groups.
const BATCH: usize = 4096;

/// A column of one batch as text.
enum Texts {
    Cells(Vec<String>),
    Lists(Vec<Vec<String>>),
}

/// The rows of a Parquet signal log.
pub(super) struct ParquetRows {
    path: PathBuf,
    /// The file's columns.
    pub names: Vec<String>,
    /// The columns that hold a list per row, in column order.
    pub list_columns: Vec<usize>,
    reader: ParquetRecordBatchReader,
    batch: Vec<Texts>,
    at: usize,
    len: usize,
    /// Rows of the file before the current batch.
    before: u64,
}

fn parquet_error(path: &Path, at: String, e: impl std::fmt::Display) -> InputError {
    InputError::Parquet {
        path: path.into(),
        at,
        message: e.to_string(),
    }
}

/// Whether cells of type `t` have a text form the reader can parse or pass on.
fn has_text(t: &DataType) -> bool {
    arrow_cast::can_cast_types(t, &DataType::Utf8)
}

impl ParquetRows {
    /// Opens the file and checks every column has a text form (or is a list of such).
    ///
    /// # Errors
    /// I/O, a damaged footer, a column of a type without a text form.
    pub(super) fn open(path: &Path) -> Result<Self, InputError> {
        let file = File::open(path).map_err(|e| InputError::io(path, e))?;
        let builder = ParquetRecordBatchReaderBuilder::try_new(file)
            .map_err(|e| parquet_error(path, "footer".into(), e))?;
        let fields = builder.schema().fields().clone();
        let mut list_columns = Vec::new();
        for (i, f) in fields.iter().enumerate() {
            let t = f.data_type();
            let inner = match t {
                DataType::List(e) | DataType::LargeList(e) | DataType::FixedSizeList(e, _) => {
                    Some(e.data_type())
                }
                _ => None,
            };
            let ok = match inner {
                Some(e) => {
                    list_columns.push(i);
                    has_text(e) && !matches!(e, DataType::List(_) | DataType::LargeList(_))
                }
                None => has_text(t),
            };
            if !ok {
                return Err(InputError::ColumnType {
                    path: path.into(),
                    column: f.name().clone(),
                    found: format!(
                        "{t}, which has no text form (a signal log's cells are numbers, text, or a list of numbers)"
                    ),
                });
            }
        }
        let reader = builder
            .with_batch_size(BATCH)
            .build()
            .map_err(|e| parquet_error(path, "footer".into(), e))?;
        Ok(Self {
            path: path.into(),
            names: fields.iter().map(|f| f.name().clone()).collect(),
            list_columns,
            reader,
            batch: Vec::new(),
            at: 0,
            len: 0,
            before: 0,
        })
    }

    /// The next row into `row`; `false` after the last.
    ///
    /// # Errors
    /// A page that cannot be decoded.
    pub(super) fn next(&mut self, row: &mut FileRow) -> Result<bool, InputError> {
        while self.at >= self.len {
            self.before += self.len as u64;
            let at = format!("rows from {}", self.before);
            // The parquet crate can panic on a damaged page: that is a damaged file.
            let next =
                std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| self.reader.next()))
                    .unwrap_or_else(|_| {
                        Some(Err(arrow_schema::ArrowError::ParquetError(
                            "a page the reader cannot decode (the file is damaged)".into(),
                        )))
                    });
            let Some(batch) = next else {
                return Ok(false);
            };
            let batch = batch.map_err(|e| parquet_error(&self.path, at.clone(), e))?;
            self.batch = batch
                .columns()
                .iter()
                .map(|a| texts(a).map_err(|e| parquet_error(&self.path, at.clone(), e)))
                .collect::<Result<_, _>>()?;
            self.at = 0;
            self.len = batch.num_rows();
        }
        let i = self.at;
        self.at += 1;
        row.line = self.before + i as u64 + 2;
        row.cells.clear();
        row.lists
            .resize_with(self.list_columns.len(), Default::default);
        let mut k = 0;
        for t in &self.batch {
            match t {
                Texts::Cells(c) => row.cells.push_field(c[i].as_bytes()),
                Texts::Lists(l) => {
                    row.cells.push_field(b"");
                    let r = &mut row.lists[k];
                    r.clear();
                    for v in &l[i] {
                        r.push_field(v.as_bytes());
                    }
                    k += 1;
                }
            }
        }
        Ok(true)
    }
}

/// A column's cells (or lists) as text.
fn texts(a: &ArrayRef) -> Result<Texts, arrow_schema::ArrowError> {
    let lists = |n: usize, value: &dyn Fn(usize) -> ArrayRef| {
        (0..n)
            .map(|i| {
                if a.is_null(i) {
                    Ok(Vec::new())
                } else {
                    cells(&value(i))
                }
            })
            .collect::<Result<Vec<_>, _>>()
            .map(Texts::Lists)
    };
    match a.data_type() {
        DataType::List(_) => {
            let l = a.as_list::<i32>();
            lists(l.len(), &|i| l.value(i))
        }
        DataType::LargeList(_) => {
            let l = a.as_list::<i64>();
            lists(l.len(), &|i| l.value(i))
        }
        DataType::FixedSizeList(..) => {
            let l = a.as_fixed_size_list();
            lists(l.len(), &|i| l.value(i))
        }
        _ => cells(a).map(Texts::Cells),
    }
}

/// Scalar cells as the text their CSV export holds; a null as "".
fn cells(a: &ArrayRef) -> Result<Vec<String>, arrow_schema::ArrowError> {
    /// A float column's cells: `{:?}` is the shortest decimal that reads back to the same
    /// float.
    fn floats<T: ArrowPrimitiveType>(a: &ArrayRef) -> Vec<String>
    where
        T::Native: std::fmt::Debug,
    {
        let v = a.as_primitive::<T>();
        (0..a.len())
            .map(|i| {
                if a.is_null(i) {
                    String::new()
                } else {
                    format!("{:?}", v.value(i))
                }
            })
            .collect()
    }
    Ok(match a.data_type() {
        DataType::Float64 => floats::<Float64Type>(a),
        DataType::Float32 => floats::<Float32Type>(a),
        _ => {
            let t = arrow_cast::cast(a, &DataType::Utf8)?;
            let s = t.as_string::<i32>();
            (0..s.len())
                .map(|i| {
                    if s.is_null(i) {
                        String::new()
                    } else {
                        s.value(i).to_string()
                    }
                })
                .collect()
        }
    })
}
