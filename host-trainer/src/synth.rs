//! Synthetic separable bench logs of any size, for benchmarks, footprint runs and
//! trying Linegate at scale. SYNTHETIC: a hidden random hyperplane labels uniform
//! readings, and units closer to it than the requested margin are redrawn.
//!
//! A margin is refused before anything is drawn when redrawing could not end in practice
//! ([`check_margin`]): readings lie in a box, so no unit is farther from the hyperplane than
//! the box's farthest corner, and units near that corner are rare.

use std::io::Write;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Of the trial readings drawn to judge a margin, at least this share must keep it: a
/// margin kept by fewer would cost more than [`MIN_KEPT`]⁻¹ draws per unit.
const MIN_KEPT: f64 = 0.01;

/// Trial readings drawn to judge a margin (a few milliseconds).
const TRIALS: usize = 100_000;

/// A margin no log can be generated with.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum MarginError {
    /// Not a finite, non-negative number.
    #[error("--margin {margin}: the margin must be a finite number, 0 or more")]
    NotFinite {
        /// The margin asked for.
        margin: f64,
    },
    /// Too few readings keep the margin: drawing units until enough do would not end.
    #[error(
        "--margin {margin}: cannot be met with {channels} channels and seed {seed}: no reading in [0, 1000) is farther than {reach:.4} (scaled units) from this seed's hidden boundary, and fewer than 1 in {per} random readings is farther than {margin}; the largest margin accepted here is {largest}"
    )]
    Unattainable {
        /// The margin asked for, as written in the message.
        margin: String,
        /// Channels.
        channels: usize,
        /// Seed.
        seed: u64,
        /// The farthest any reading can be from the boundary.
        reach: f64,
        /// The largest margin accepted (kept by at least 1 in `per` trial readings), rounded
        /// down to 4 decimals so that the number shown is accepted.
        largest: f64,
        /// 1 / the smallest share of readings that must keep the margin.
        per: u32,
    },
    /// A class count the device cannot hold.
    #[error("--classes {classes}: a log of classes has 2 to 8 (the device's limit)")]
    Classes {
        /// The count asked for.
        classes: usize,
    },
}

/// The hidden hyperplane of `seed` (weights, their norm, bias) and the generator after it.
fn boundary(channels: usize, seed: u64) -> (Vec<f64>, f64, f64, ChaCha8Rng) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let w: Vec<f64> = (0..channels).map(|_| rng.gen_range(-1.0..1.0)).collect();
    let norm = w.iter().map(|v| v * v).sum::<f64>().sqrt();
    let b: f64 = rng.gen_range(-0.2..0.2) * norm;
    (w, norm, b, rng)
}

/// One random reading (as [`write_log`] draws it) and its signed distance score.
fn draw(rng: &mut ChaCha8Rng, w: &[f64], b: f64, x: &mut [f64]) -> f64 {
    for v in x.iter_mut() {
        *v = f64::from(rng.gen_range(0u32..1_000_000)) / 1000.0;
    }
    w.iter()
        .zip(x.iter())
        .map(|(w, v)| w * (v / 500.0 - 1.0))
        .sum::<f64>()
        + b
}

/// The largest margin [`write_log`] accepts for `channels` and `seed`: the one that at
/// least 1 in 100 random readings keeps (judged on 100,000 trial readings from a stream of
/// their own, so the log itself does not change), and never beyond the farthest reading.
pub fn largest_margin(channels: usize, seed: u64) -> f64 {
    let (w, norm, b, _) = boundary(channels, seed);
    largest_with_reach(&w, norm, b, seed).0
}

/// (largest accepted margin, farthest any reading can be) for this hyperplane.
fn largest_with_reach(w: &[f64], norm: f64, b: f64, seed: u64) -> (f64, f64) {
    if norm == 0.0 || w.is_empty() {
        return (0.0, 0.0);
    }
    // Scaled readings run from -1 (reading 0) to 0.999998 (reading 999.999).
    let top = 999.999 / 500.0 - 1.0;
    let hi: f64 = w.iter().map(|&w| (-w).max(w * top)).sum::<f64>() + b;
    let lo: f64 = w.iter().map(|&w| (-w).min(w * top)).sum::<f64>() + b;
    let reach = hi.max(-lo) / norm;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(1);
    let mut x = vec![0.0; w.len()];
    let mut d: Vec<f64> = (0..TRIALS)
        .map(|_| draw(&mut rng, w, b, &mut x).abs() / norm)
        .collect();
    let k = (TRIALS as f64 * MIN_KEPT) as usize;
    // The k-th farthest trial: a margin up to it is kept by at least k of the trials.
    let (_, kth, _) = d.select_nth_unstable_by(k - 1, |a, b| b.total_cmp(a));
    (kth.min(reach), reach)
}

/// Refuses a margin the generator could not meet in practice (see [`largest_margin`]).
///
/// # Errors
/// [`MarginError`], with the largest margin accepted.
pub fn check_margin(channels: usize, margin: f64, seed: u64) -> Result<(), MarginError> {
    if !margin.is_finite() || margin < 0.0 {
        return Err(MarginError::NotFinite { margin });
    }
    let (w, norm, b, _) = boundary(channels, seed);
    let (largest, reach) = largest_with_reach(&w, norm, b, seed);
    if margin > largest {
        return Err(MarginError::Unattainable {
            margin: if margin < 1e6 {
                margin.to_string()
            } else {
                format!("{margin:e}")
            },
            channels,
            seed,
            reach,
            largest: (largest * 1e4).floor() / 1e4,
            per: (1.0 / MIN_KEPT) as u32,
        });
    }
    Ok(())
}

/// Writes `rows` units × `channels` readings in [0, 1000) with three decimals, labelled
/// GO/NO-GO, comma-separated.
///
/// `margin`: the gap (in the hidden hyperplane's units, readings scaled to [-1, 1]) kept
/// empty on each side, so the log is separable with at least that margin.
///
/// # Errors
/// Any write error; a margin [`check_margin`] refuses, as [`std::io::ErrorKind::InvalidInput`].
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
/// As [`write_log`].
pub fn write_log_delimited(
    out: &mut impl Write,
    rows: usize,
    channels: usize,
    margin: f64,
    seed: u64,
    delimiter: u8,
) -> std::io::Result<()> {
    write_class_log_delimited(out, rows, channels, 2, margin, seed, delimiter)
}

/// [`write_log_delimited`] with `classes` classes (2: GO and NO-GO, exactly as
/// [`write_log`]; more: GO, fault1, fault2…, see [`class_margin`]).
///
/// # Errors
/// As [`write_log`]; a margin [`check_margin`] or [`class_margin`] refuses.
pub fn write_class_log_delimited(
    out: &mut impl Write,
    rows: usize,
    channels: usize,
    classes: usize,
    margin: f64,
    seed: u64,
    delimiter: u8,
) -> std::io::Result<()> {
    check_classes_margin(channels, classes, margin, seed)
        .map_err(|e| std::io::Error::new(std::io::ErrorKind::InvalidInput, e))?;
    let sep = char::from(delimiter);
    write!(out, "unit_id")?;
    for j in 0..channels {
        write!(out, "{sep}ch{j:02}")?;
    }
    writeln!(out, "{sep}label")?;
    let mut line = String::with_capacity(16 * channels);
    any_units(rows, channels, classes, margin, seed, |n, x, label| {
        line.clear();
        line.push_str(&format!("U{n}"));
        for v in x {
            line.push_str(&format!("{sep}{v:.3}"));
        }
        line.push(sep);
        line.push_str(label);
        line.push('\n');
        out.write_all(line.as_bytes())
    })
}

/// Refuses a margin for `classes` classes ([`check_margin`] for two, [`class_margin`]
/// above), and fewer than two or more than the device's classes.
fn check_classes_margin(
    channels: usize,
    classes: usize,
    margin: f64,
    seed: u64,
) -> Result<(), MarginError> {
    if classes <= 2 {
        check_margin(channels, margin, seed)
    } else {
        class_margin(channels, classes, margin, seed)
    }
}

/// The label of class `k` of a log of several classes: GO, then fault1, fault2…
pub fn class_label(k: usize) -> String {
    if k == 0 {
        "GO".into()
    } else {
        format!("fault{k}")
    }
}

/// The hidden class rows of `seed` (one weight vector per class, no bias) and the
/// generator after them: a unit's class is the row of highest score.
fn class_rows(channels: usize, classes: usize, seed: u64) -> (Vec<Vec<f64>>, ChaCha8Rng) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x0c1a_55e5);
    let rows = (0..classes)
        .map(|_| (0..channels).map(|_| rng.gen_range(-1.0..1.0)).collect())
        .collect();
    (rows, rng)
}

/// One random reading (as [`draw`]) and its class and distance from the nearest boundary
/// between its class and another (scaled units).
fn draw_class(rng: &mut ChaCha8Rng, rows: &[Vec<f64>], x: &mut [f64]) -> (usize, f64) {
    for v in x.iter_mut() {
        *v = f64::from(rng.gen_range(0u32..1_000_000)) / 1000.0;
    }
    let s: Vec<f64> = rows
        .iter()
        .map(|w| {
            w.iter()
                .zip(x.iter())
                .map(|(w, v)| w * (v / 500.0 - 1.0))
                .sum()
        })
        .collect();
    let best = (0..s.len()).fold(0, |b, k| if s[k] > s[b] { k } else { b });
    let dist = (0..s.len())
        .filter(|&k| k != best)
        .map(|k| {
            let norm = rows[best]
                .iter()
                .zip(&rows[k])
                .map(|(a, b)| (a - b) * (a - b))
                .sum::<f64>()
                .sqrt();
            (s[best] - s[k]) / norm.max(f64::MIN_POSITIVE)
        })
        .fold(f64::INFINITY, f64::min);
    (best, dist)
}

/// Refuses a margin of a log of `classes` (3 to 8) classes that fewer than 1 in 100
/// random readings keep (judged on 100,000 trial readings of their own stream), or a
/// class count outside 2..=8.
///
/// # Errors
/// [`MarginError`].
pub fn class_margin(
    channels: usize,
    classes: usize,
    margin: f64,
    seed: u64,
) -> Result<(), MarginError> {
    if !margin.is_finite() || margin < 0.0 {
        return Err(MarginError::NotFinite { margin });
    }
    if !(2..=shared_model::limits::MAX_CLASSES).contains(&classes) {
        return Err(MarginError::Classes { classes });
    }
    let (rows, _) = class_rows(channels, classes, seed);
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(2);
    let mut x = vec![0.0; channels];
    let mut d: Vec<f64> = (0..TRIALS)
        .map(|_| draw_class(&mut rng, &rows, &mut x).1)
        .collect();
    let k = (TRIALS as f64 * MIN_KEPT) as usize;
    let (_, kth, _) = d.select_nth_unstable_by(k - 1, |a, b| b.total_cmp(a));
    let largest = *kth;
    if margin > largest {
        return Err(MarginError::Unattainable {
            margin: margin.to_string(),
            channels,
            seed,
            reach: largest,
            largest: (largest * 1e4).floor() / 1e4,
            per: (1.0 / MIN_KEPT) as u32,
        });
    }
    Ok(())
}

/// Calls `unit` with each unit's number, readings and label: GO/NO-GO by the hidden
/// hyperplane for two classes, else GO, fault1… by the hidden class rows, units nearer a
/// boundary than `margin` redrawn.
fn any_units<E>(
    rows: usize,
    channels: usize,
    classes: usize,
    margin: f64,
    seed: u64,
    mut unit: impl FnMut(usize, &[f64], &str) -> Result<(), E>,
) -> Result<(), E> {
    if classes <= 2 {
        return units(rows, channels, margin, seed, |n, x, go| {
            unit(n, x, if go { "GO" } else { "NO-GO" })
        });
    }
    let labels: Vec<String> = (0..classes).map(class_label).collect();
    let (w, mut rng) = class_rows(channels, classes, seed);
    let mut x = vec![0.0f64; channels];
    let mut n = 0;
    while n < rows {
        let (k, dist) = draw_class(&mut rng, &w, &mut x);
        if dist < margin {
            continue;
        }
        unit(n, &x, &labels[k])?;
        n += 1;
    }
    Ok(())
}

/// Calls `unit` with each unit's number, readings and verdict (true for GO).
fn units<E>(
    rows: usize,
    channels: usize,
    margin: f64,
    seed: u64,
    mut unit: impl FnMut(usize, &[f64], bool) -> Result<(), E>,
) -> Result<(), E> {
    // The callers checked the margin (check_margin), so the loop ends.
    let (w, norm, b, mut rng) = boundary(channels, seed);
    let mut x = vec![0.0f64; channels];
    let mut n = 0;
    while n < rows {
        let s = draw(&mut rng, &w, b, &mut x);
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
/// Any write or encoding error; a margin [`check_margin`] refuses, as
/// [`parquet::errors::ParquetError::External`].
pub fn write_log_parquet(
    out: &mut Vec<u8>,
    rows: usize,
    channels: usize,
    margin: f64,
    seed: u64,
) -> Result<(), parquet::errors::ParquetError> {
    write_class_log_parquet(out, rows, channels, 2, margin, seed)
}

/// [`write_log_parquet`] with `classes` classes (as [`write_class_log_delimited`]).
///
/// # Errors
/// As [`write_log_parquet`].
pub fn write_class_log_parquet(
    out: &mut Vec<u8>,
    rows: usize,
    channels: usize,
    classes: usize,
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

    check_classes_margin(channels, classes, margin, seed)
        .map_err(|e| parquet::errors::ParquetError::External(Box::new(e)))?;
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
    any_units(rows, channels, classes, margin, seed, |n, x, label| {
        ids.append_value(format!("U{n}"));
        for (c, &v) in chans.iter_mut().zip(x) {
            c.append_value(v);
        }
        labels.append_value(label);
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
