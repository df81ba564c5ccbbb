//! Signal logs: one row per sample, a window of samples per unit, reduced to feature channels
//! by the device's own integer code.
//!
//! The layout a test station exports with a loop over its buffers: a unit-id column, one
//! column per signal (physical values, converted to raw counts by the signal's `lsb` and
//! `zero`), and on the same rows the unit's label and any reading channels. The rows of a
//! unit are together and in sample order; a unit has as many rows as its longest window,
//! and a signal with a shorter window leaves its cells empty after its last sample. An
//! optional `sample` column numbers the rows of each unit from 0 (or 1) and catches gaps.
//! The label and reading cells repeat on every row of a unit, or are left empty after its
//! first row.
//!
//! ```text
//! unit_id,sample,vibration,current,temperature,label
//! FM-0001,0,0.012,1.204,31.5,GO
//! FM-0001,1,-0.034,1.198,,
//! …
//! FM-0001,255,0.021,1.207,,
//! FM-0002,0,0.140,1.420,33.0,NO-GO
//! …
//! ```
//!
//! Each unit is checked whole: a gap, an empty or non-numeric sample, a label or reading
//! that changes within the unit, and a unit whose rows appear in two places are errors
//! naming the line, unit, column and sample; under `--skip-bad-rows` a unit with such a
//! fault is skipped whole and counted (a unit split in two places still ends the read: its
//! rows cannot be told apart). A short or over-long window is such an error in a training
//! log; a log read for a model keeps it, as the device's kernel refuses it (see [`ReadFor`]).
//!
//! Other layouts reach this reader as the same long rows (`signal_rows`):
//! one row per unit with numbered sample columns or a list per unit (Parquet), a file without
//! unit-id column as one unit, a folder of files as one log. A signal declared with `take`
//! ([`Take`](super::signal_scale::Take)) keeps its first or last `window` samples of a longer window.
//!
//! Features are computed with [`CheckedFeature::compute`], the function the device runs,
//! so training, audit, replay and the device see the same integers.
//!
//! This room turns the streamed units into a [`Dataset`]; the units themselves come from
//! `signal_units` (grouping and streaming), `signal_check` (a unit's rows checked),
//! `signal_take` (a longer window cut) and `signal_columns` (which column is which).

use std::path::{Path, PathBuf};

use shared_model::features::CheckedFeature;

use crate::error::shell_word;
use crate::error::{InputError, Place};
use crate::ingest::dataset::{Dataset, LogPart};
use crate::ingest::options::{LogOptions, ScaleFrom};
use crate::ingest::read::{checked_classes, spread_checked};
use crate::ingest::scaling::ChannelScale;
use crate::ingest::signal_files::signal_log_files;
use crate::ingest::signal_scale::SignalScale;
use crate::ingest::signal_units::log_error;
use crate::ingest::skip::SkipReport;

pub use crate::ingest::signal_columns::{ReadFor, SAMPLE_NAMES};
pub use crate::ingest::signal_units::{
    SignalLogHeader, SignalUnit, stream_signal_files, stream_signal_units, window_error,
};

/// Reads a signal log into a [`Dataset`] whose channels are the readings and the features
/// (each unit's feature values computed by the shared integer code).
///
/// # Errors
/// As [`stream_signal_units`]; too few units. In a training log (a sheet's channels) a
/// window the device would refuse (a sample outside its signal's valid range, a window
/// shorter or longer than declared) or a reading outside its channel's range is an error;
/// in a log read for a model the unit is kept as the FAULT the device gives.
pub(crate) fn read_signal_log(
    path: &Path,
    opts: &LogOptions,
    from: ScaleFrom<'_>,
) -> Result<Dataset, InputError> {
    read_signal_files(path, &signal_log_files(path)?, opts, from, false)
}

/// [`read_signal_log`] of the files `files`, read one after the other as one log named
/// `path`; each unit remembers its file. With `listed` (files given one by one, not a
/// folder's) the log's digest is the one a log of several files has
/// ([`combined_digest`](crate::ingest::dataset::combined_digest)) and each file is kept
/// in [`Dataset::parts`].
///
/// # Errors
/// As [`read_signal_log`].
pub(crate) fn read_signal_files(
    path: &Path,
    files: &[PathBuf],
    opts: &LogOptions,
    from: ScaleFrom<'_>,
    listed: bool,
) -> Result<Dataset, InputError> {
    // Where the signals, the feature channels and the reading channels' scaling come from.
    let (signals, features, model, sheet) = match from {
        ScaleFrom::Observed => {
            return Err(log_error(
                path,
                "a signal log needs a sheet or model that declares its signals",
            ));
        }
        ScaleFrom::Sheet(s) => (&s.signals[..], s.features.clone(), None, Some(s)),
        ScaleFrom::Model { channels, signals } => (
            signals,
            channels
                .iter()
                .filter(|c| c.source.is_some())
                .cloned()
                .collect(),
            Some(channels),
            None,
        ),
    };
    // The feature channels, each with its signal's index and its proved computation.
    let computed = features
        .iter()
        .map(|c| {
            let src = c
                .source
                .as_ref()
                .ok_or_else(|| log_error(path, "a feature channel has no source"))?;
            let j = signals
                .iter()
                .position(|s| s.name == src.signal)
                .ok_or_else(|| log_error(path, &format!("no signal '{}'", src.signal)))?;
            let f = src.checked(&signals[j]).map_err(|m| log_error(path, &m))?;
            Ok((j, f))
        })
        .collect::<Result<Vec<(usize, CheckedFeature)>, InputError>>()?;
    let reading_names: Vec<String> = match (model, sheet) {
        (Some(ch), _) => reading_channels(ch)
            .map(|c| c.log_column().into())
            .collect(),
        (None, Some(s)) => s.channels.iter().map(|c| c.log_column().into()).collect(),
        (None, None) => Vec::new(),
    };
    let mut skipped = SkipReport::default();
    let (mut physical, mut values, mut labels, mut lines) =
        (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    let (mut ids, mut times) = (Vec::<String>::new(), Vec::<String>::new());
    let mut unit_rows = Vec::new();
    let mut row = Vec::with_capacity(computed.len());
    // Each signal's lowest and highest raw sample, to say why a feature may be constant.
    let mut sample_ranges = vec![(i32::MAX, i32::MIN); signals.len()];
    // A log read for a model keeps the units the device refuses, as FAULT units.
    let keep_faults = model.is_some();
    let mut unit_files: Vec<u32> = Vec::new();
    // Units come in file order: the file of each is found from the last one's on, once
    // per file rather than once per unit (a folder may hold one file per unit).
    let mut file_at = 0usize;
    let header = stream_signal_files(
        path,
        files,
        opts,
        signals,
        if keep_faults {
            ReadFor::Model {
                readings: &reading_names,
            }
        } else {
            ReadFor::Training {
                declared: &reading_names,
                features: computed.len(),
            }
        },
        &mut skipped,
        |u| {
            if ids.len() >= opts.max_rows {
                return Err(InputError::TooManyRows {
                    path: path.into(),
                    max: opts.max_rows,
                });
            }
            row.clear();
            for (&(j, f), c) in computed.iter().zip(&features) {
                let w = u.windows.get(j).map_or(&[][..], Vec::as_slice);
                row.push(match (f.compute(w), keep_faults) {
                    (Ok(v), _) => v,
                    // The device refuses the window: the unit is a FAULT, as one with a
                    // reading out of range is (a count the kernel refuses on that channel).
                    (Err(e), true) => {
                        refused_count(c).ok_or_else(|| window_error(u, signals, j, e))?
                    }
                    (Err(e), false) => return Err(window_error(u, signals, j, e)),
                });
            }
            for (r, w) in sample_ranges.iter_mut().zip(u.windows.iter()) {
                for &x in w {
                    *r = (r.0.min(x), r.1.max(x));
                }
            }
            values.extend_from_slice(&row);
            physical.extend_from_slice(u.readings);
            labels.push(u.label);
            lines.push(u.line);
            unit_rows.push(u.lines.len());
            ids.push(u.id.to_string());
            if let Some(t) = u.time {
                times.push(t.to_string());
            }
            if let Some(k) = files[file_at..].iter().position(|f| f == u.file) {
                file_at += k;
            }
            unit_files.push(u32::try_from(file_at).unwrap_or(u32::MAX));
            Ok(())
        },
    )?;
    let nr = header.readings.len();
    // Reading channels' scaling: the model's; else the sheet's, or the observed range.
    let reading_scales: Vec<ChannelScale> = match model {
        Some(ch) => reading_channels(ch).cloned().collect(),
        None => header
            .readings
            .iter()
            .enumerate()
            .map(|(r, name)| match sheet.and_then(|s| s.get(name)) {
                Some(s) => Ok(s.clone()),
                None => {
                    let (lo, hi) = physical
                        .iter()
                        .skip(r)
                        .step_by(nr.max(1))
                        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
                            (a.min(v), b.max(v))
                        });
                    spread_checked(path, name, lo, hi, || {
                        format!(
                            "drop it with --ignore {} or declare its range in the sheet",
                            shell_word(name)
                        )
                    })?;
                    ChannelScale::observed(name, lo, hi).map_err(|m| log_error(path, &m))
                }
            })
            .collect::<Result<_, _>>()?,
    };
    // Channel order: the model's; for a sheet, the readings then the features.
    let order: Vec<ChannelScale> = match model {
        Some(ch) => ch.to_vec(),
        None => reading_scales.iter().chain(&features).cloned().collect(),
    };
    let mut ds = Dataset::empty(path, order);
    ds.signals = signals.to_vec();
    ds.sha256 = header.sha256;
    let nf = computed.len();
    let mut raw_readings = vec![0i32; nr];
    'units: for i in 0..labels.len() {
        for (r, s) in reading_scales.iter().enumerate() {
            let v = physical[i * nr + r];
            match s.to_raw(v) {
                Some(x) => raw_readings[r] = x,
                // As the device reads it: the kernel FAULTs the unit.
                None if keep_faults => raw_readings[r] = s.raw_reading(v),
                None => {
                    let e = InputError::OutOfRange {
                        path: path.into(),
                        at: Place::Line(lines[i]),
                        column: s.name.clone(),
                        value: v,
                        min: s.min,
                        max: s.max,
                    };
                    if opts.skip_bad_rows {
                        skipped.add_unit(&e, unit_rows[i]);
                        continue 'units;
                    }
                    return Err(e);
                }
            }
        }
        let feats = &values[i * nf..(i + 1) * nf];
        let (mut next_r, mut next_f) = (raw_readings.iter(), feats.iter());
        for c in &ds.scales {
            let v = if c.source.is_some() {
                next_f.next()
            } else {
                next_r.next()
            };
            ds.raw.push(v.copied().unwrap_or(0));
        }
        ds.labels.push(labels[i]);
        ds.lines.push(lines[i]);
        ds.unit_ids.push(ids[i].as_bytes());
        if let Some(t) = times.get(i) {
            ds.times.push(t.as_bytes());
        }
        if files.len() > 1 {
            ds.part_of.push(unit_files.get(i).copied().unwrap_or(0));
        }
    }
    if files.len() > 1 {
        ds.parts = files
            .iter()
            .enumerate()
            .map(|(k, p)| LogPart {
                path: p.clone(),
                sha256: header
                    .files
                    .get(k)
                    .map_or(String::new(), |(_, sha)| sha.clone()),
                units: ds.part_of.iter().filter(|&&f| f as usize == k).count(),
            })
            .collect();
        if listed && opts.digest {
            ds.sha256 = crate::ingest::dataset::combined_digest(&ds.parts);
        }
    }
    ds.skipped = skipped;
    if !keep_faults && !ds.is_empty() {
        constant_features(path, &ds, &computed, signals, &sample_ranges)?;
    }
    // The rule a plain log follows: no units, or one class for training, is refused.
    checked_classes(path, ds, keep_faults, opts.classes())
}

/// Refuses a feature channel whose every unit of a training log has the same value, as a
/// constant plain channel is refused; the message says whether its signal's samples were
/// all one count (an lsb far too large, a stuck sensor) or the feature alone is constant.
fn constant_features(
    path: &Path,
    ds: &Dataset,
    computed: &[(usize, CheckedFeature)],
    signals: &[SignalScale],
    sample_ranges: &[(i32, i32)],
) -> Result<(), InputError> {
    let d = ds.dim();
    let mut features = computed.iter();
    for (k, c) in ds.scales.iter().enumerate() {
        let Some(src) = &c.source else { continue };
        let Some(&(j, _)) = features.next() else {
            break;
        };
        let (lo, hi) = ds
            .raw
            .iter()
            .skip(k)
            .step_by(d.max(1))
            .fold((i32::MAX, i32::MIN), |(a, b), &v| (a.min(v), b.max(v)));
        let s = &signals[j];
        spread_checked(path, &c.name, c.physical(lo), c.physical(hi), || {
            let (slo, shi) = sample_ranges.get(j).copied().unwrap_or((0, 0));
            if slo == shi {
                format!(
                    "it is computed from signal '{}', and every sample of that signal in this log is the raw count {slo} (lsb {:e}, zero {}): check the signal's lsb and zero in the sheet (an lsb far larger than the readings makes every sample one count), or remove the [[feature]]",
                    src.signal, s.lsb, s.zero
                )
            } else {
                format!(
                    "it is computed from signal '{}', whose samples vary, but this feature is the same for every unit: remove the [[feature]] from the sheet",
                    src.signal
                )
            }
        })?;
    }
    Ok(())
}

/// A count outside channel `c`'s valid range, which the kernel refuses (FAULT) on that
/// channel; `None` only for a channel whose range is every 32-bit count.
fn refused_count(c: &ChannelScale) -> Option<i32> {
    c.raw_max
        .checked_add(1)
        .or_else(|| c.raw_min.checked_sub(1))
}

/// A model's reading channels (those that are not features), in channel order: the
/// readings a station passes beside its windows.
pub fn reading_channels(channels: &[ChannelScale]) -> impl Iterator<Item = &ChannelScale> {
    channels.iter().filter(|c| c.source.is_none())
}

/// The raw readings of a unit's reading channels as the device reads them (in range or
/// not), in the order of `channels`' readings.
pub fn device_readings(channels: &[ChannelScale], unit: &SignalUnit<'_>) -> Vec<i32> {
    reading_channels(channels)
        .zip(unit.readings)
        .map(|(c, &v)| c.raw_reading(v))
        .collect()
}
