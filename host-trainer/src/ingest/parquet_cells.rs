//! A Parquet column's cells as the values its CSV export gives: numbers the way a text
//! log's cell parses (64-bit floats as stored, 32-bit floats through their shortest
//! decimal, integers and decimals cast once, text parsed), nulls as empty cells.

use arrow_array::cast::AsArray;
use arrow_array::types::{Float32Type, Float64Type};
use arrow_array::{Array, ArrayRef};
use arrow_buffer::ScalarBuffer;
use arrow_schema::DataType;

use super::parse::{parse_number, trim};

/// How a channel column's cells become numbers.
#[derive(Clone, Copy)]
pub(super) enum Numbers {
    /// 64-bit floats, as stored.
    F64,
    /// 32-bit floats, through their shortest decimal.
    F32,
    /// Integers and decimals, cast to `f64` by `arrow-cast` (exact, or rounded once).
    Cast,
    /// Text, parsed as a text log's cells are.
    Text,
}

impl Numbers {
    pub(super) fn of(t: &DataType) -> Option<Self> {
        use DataType as T;
        match t {
            T::Float64 => Some(Self::F64),
            T::Float32 => Some(Self::F32),
            T::Int8
            | T::Int16
            | T::Int32
            | T::Int64
            | T::UInt8
            | T::UInt16
            | T::UInt32
            | T::UInt64
            | T::Decimal32(..)
            | T::Decimal64(..)
            | T::Decimal128(..)
            | T::Decimal256(..) => Some(Self::Cast),
            T::Utf8 | T::LargeUtf8 | T::Utf8View => Some(Self::Text),
            T::Dictionary(_, v) => Self::of(v).map(|_| Self::Text),
            _ => None,
        }
    }
}

/// A batch column's cells as numbers; a null cell, or text that is not a number, as NaN
/// (told apart by the scan's `bad_cell` when the row is refused). A float64 column without nulls
/// is its own buffer, shared, not copied.
pub(super) fn numbers(a: &ArrayRef, kind: Numbers, decimal_comma: bool) -> ScalarBuffer<f64> {
    use std::fmt::Write;
    if matches!(kind, Numbers::F64) && a.logical_nulls().is_none() {
        return a.as_primitive::<Float64Type>().values().clone();
    }
    let mut out = Vec::with_capacity(a.len());
    match kind {
        Numbers::F64 => out.extend_from_slice(a.as_primitive::<Float64Type>().values()),
        Numbers::F32 => {
            let mut text = String::new();
            out.extend(a.as_primitive::<Float32Type>().values().iter().map(|&x| {
                // Whole numbers need no decimal; others are printed shortest and parsed.
                let wide = f64::from(x);
                if wide.fract() == 0.0 || !x.is_finite() {
                    return wide;
                }
                text.clear();
                let _ = write!(text, "{x}");
                text.parse().unwrap_or(wide)
            }));
        }
        Numbers::Cast => match arrow_cast::cast(a, &DataType::Float64) {
            Ok(c) => out.extend_from_slice(c.as_primitive::<Float64Type>().values()),
            Err(_) => out.extend(std::iter::repeat_n(f64::NAN, a.len())),
        },
        Numbers::Text => match arrow_cast::cast(a, &DataType::Utf8) {
            Ok(c) => {
                let s = c.as_string::<i32>();
                out.extend((0..s.len()).map(|i| {
                    parse_number(trim(s.value(i).as_bytes()), decimal_comma).unwrap_or(f64::NAN)
                }));
            }
            Err(_) => out.extend(std::iter::repeat_n(f64::NAN, a.len())),
        },
    }
    // Null cells hold arbitrary values underneath; they become NaN after the fact, so the
    // common case (no nulls) is a plain copy.
    if let Some(nulls) = a.logical_nulls() {
        for i in nulls
            .iter()
            .enumerate()
            .filter_map(|(i, valid)| (!valid).then_some(i))
        {
            if let Some(v) = out.get_mut(i) {
                *v = f64::NAN;
            }
        }
    }
    ScalarBuffer::from(out)
}

/// Cell `i` of a text column, trimmed; empty if null.
pub(super) fn cell(a: &arrow_array::StringArray, i: usize) -> &[u8] {
    if a.is_null(i) {
        &[]
    } else {
        trim(a.value(i).as_bytes())
    }
}

/// Whether cell `i` is empty: null, or blank text.
pub(super) fn blank(a: &ArrayRef, i: usize, kind: Numbers) -> bool {
    if a.is_null(i) {
        return true;
    }
    matches!(kind, Numbers::Text)
        && arrow_cast::cast(&a.slice(i, 1), &DataType::Utf8)
            .is_ok_and(|s| s.as_string::<i32>().value(0).trim().is_empty())
}
