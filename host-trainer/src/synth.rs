//! Synthetic separable bench logs of any size, for benchmarks, footprint runs and
//! trying Linegate at scale. SYNTHETIC: a hidden random hyperplane labels uniform
//! readings, and units closer to it than the requested margin are redrawn.

use std::io::Write;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Writes `rows` units × `channels` readings in [0, 1000) with three decimals, labelled
/// GO/NO-GO, comma-separated.
///
/// `margin`: the gap (in the hidden hyperplane's units, readings scaled to [-1, 1]) kept
/// empty on each side, so the log is separable with at least that margin.
///
/// # Errors
/// Any write error.
pub fn write_log(
    out: &mut impl Write,
    rows: usize,
    channels: usize,
    margin: f64,
    seed: u64,
) -> std::io::Result<()> {
    write_log_delimited(out, rows, channels, margin, seed, b',')
}

/// The delimiter a log written to `path` should have: tab for `.tsv`, `.tab` and `.txt`
/// (tab-delimited text), comma otherwise.
pub fn delimiter_for(path: &std::path::Path) -> u8 {
    let tab = path.extension().is_some_and(|e| {
        ["tsv", "tab", "txt"]
            .iter()
            .any(|t| e.eq_ignore_ascii_case(t))
    });
    if tab { b'\t' } else { b',' }
}

/// [`write_log`] with another field delimiter.
///
/// # Errors
/// Any write error.
pub fn write_log_delimited(
    out: &mut impl Write,
    rows: usize,
    channels: usize,
    margin: f64,
    seed: u64,
    delimiter: u8,
) -> std::io::Result<()> {
    let sep = char::from(delimiter);
    write!(out, "unit_id")?;
    for j in 0..channels {
        write!(out, "{sep}ch{j:02}")?;
    }
    writeln!(out, "{sep}label")?;
    let mut line = String::with_capacity(16 * channels);
    units(rows, channels, margin, seed, |n, x, go| {
        line.clear();
        line.push_str(&format!("U{n}"));
        for v in x {
            line.push_str(&format!("{sep}{v:.3}"));
        }
        line.push(sep);
        line.push_str(if go { "GO\n" } else { "NO-GO\n" });
        out.write_all(line.as_bytes())
    })
}

/// Calls `unit` with each unit's number, readings and verdict (true for GO).
fn units<E>(
    rows: usize,
    channels: usize,
    margin: f64,
    seed: u64,
    mut unit: impl FnMut(usize, &[f64], bool) -> Result<(), E>,
) -> Result<(), E> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let w: Vec<f64> = (0..channels).map(|_| rng.gen_range(-1.0..1.0)).collect();
    let norm = w.iter().map(|v| v * v).sum::<f64>().sqrt();
    let b: f64 = rng.gen_range(-0.2..0.2) * norm;
    let mut x = vec![0.0f64; channels];
    let mut n = 0;
    while n < rows {
        for v in x.iter_mut() {
            *v = f64::from(rng.gen_range(0u32..1_000_000)) / 1000.0;
        }
        let s: f64 = w
            .iter()
            .zip(&x)
            .map(|(w, v)| w * (v / 500.0 - 1.0))
            .sum::<f64>()
            + b;
        if s.abs() < margin * norm {
            continue;
        }
        unit(n, &x, s > 0.0)?;
        n += 1;
    }
    Ok(())
}

/// [`write_log`] as a Parquet file (snappy-compressed, up to 1,048,576 rows per row group, as pyarrow writes by default): the
/// same units, `unit_id` and `label` as text and each channel as a 64-bit float holding
/// exactly what the CSV's three-decimal text parses to.
///
/// # Errors
/// Any write or encoding error.
pub fn write_log_parquet(
    out: &mut Vec<u8>,
    rows: usize,
    channels: usize,
    margin: f64,
    seed: u64,
) -> Result<(), parquet::errors::ParquetError> {
    use std::sync::Arc;

    use arrow_array::builder::{ArrayBuilder, Float64Builder, StringBuilder};
    use arrow_array::{ArrayRef, RecordBatch};
    use arrow_schema::{DataType, Field, Schema};
    use parquet::arrow::ArrowWriter;
    use parquet::basic::Compression;
    use parquet::file::properties::WriterProperties;

    const GROUP: usize = 1_048_576;
    let mut fields = vec![Field::new("unit_id", DataType::Utf8, false)];
    fields.extend((0..channels).map(|j| Field::new(format!("ch{j:02}"), DataType::Float64, false)));
    fields.push(Field::new("label", DataType::Utf8, false));
    let schema = Arc::new(Schema::new(fields));
    let props = WriterProperties::builder()
        .set_compression(Compression::SNAPPY)
        .set_max_row_group_row_count(Some(GROUP))
        .build();
    let mut writer = ArrowWriter::try_new(out, schema.clone(), Some(props))?;
    let mut ids = StringBuilder::new();
    let mut chans: Vec<Float64Builder> = (0..channels).map(|_| Float64Builder::new()).collect();
    let mut labels = StringBuilder::new();
    let mut flush = |ids: &mut StringBuilder,
                     chans: &mut [Float64Builder],
                     labels: &mut StringBuilder|
     -> Result<(), parquet::errors::ParquetError> {
        let mut cols: Vec<ArrayRef> = vec![Arc::new(ids.finish())];
        cols.extend(chans.iter_mut().map(|c| Arc::new(c.finish()) as ArrayRef));
        cols.push(Arc::new(labels.finish()));
        let batch = RecordBatch::try_new(schema.clone(), cols)?;
        writer.write(&batch)
    };
    units(rows, channels, margin, seed, |n, x, go| {
        ids.append_value(format!("U{n}"));
        for (c, &v) in chans.iter_mut().zip(x) {
            c.append_value(v);
        }
        labels.append_value(if go { "GO" } else { "NO-GO" });
        if ids.len() == GROUP {
            flush(&mut ids, &mut chans, &mut labels)?;
        }
        Ok::<(), parquet::errors::ParquetError>(())
    })?;
    if !ids.is_empty() {
        flush(&mut ids, &mut chans, &mut labels)?;
    }
    writer.close()?;
    Ok(())
}

/// Whether a log written to `path` should be Parquet (extension `.parquet` or `.pq`).
pub fn is_parquet_path(path: &std::path::Path) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("parquet") || e.eq_ignore_ascii_case("pq"))
}

/// A channel sheet for [`write_log`]'s channels: range [0, 1000] at lsb 0.001.
pub fn sheet(channels: usize) -> String {
    let mut s = String::from("# Channel sheet for a SYNTHETIC log from `linegate generate`.\n");
    for j in 0..channels {
        s.push_str(&format!(
            "\n[[channel]]\nname = \"ch{j:02}\"\nmin = 0.0\nmax = 1000.0\nlsb = 0.001\n"
        ));
    }
    s
}
