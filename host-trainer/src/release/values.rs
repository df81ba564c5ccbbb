//! A unit's channel values as the device computes them: for each channel the physical
//! value, the raw integer, the kernel's scaled input word, and the unit's score and line.
//!
//! The log is read as `replay` reads it (bench logs streamed with the float model's
//! scaling, out-of-range readings kept as the count the device reads; signal logs the same
//! way, [`ingest::stream`](crate::ingest::stream), refused windows kept), and every number comes from
//! the code the device runs: features from [`CheckedFeature::compute`], scaled inputs from
//! [`CheckedModel::scale`](shared_model::CheckedModel::scale), the score from the kernel's
//! classification, the line from [`replay::line()`]. So what this
//! shows is what the device computed, channel by channel, including which channel it refused.

use crate::release::pack::DeviceModel;
use std::collections::BTreeSet;
use std::path::Path;

use serde::Serialize;
use shared_model::features::{CheckedFeature, Source};
use shared_model::{CheckedModel, SignalFault, WindowFault};

use crate::error::InputError;
use crate::ingest::scaling::ChannelScale;
use crate::ingest::{LogOptions, SkipReport};
use crate::release::quantise::{QuantConfig, QuantError, quantise};
use crate::release::replay;
use crate::train::float_model::FloatModel;

/// Which units to show: those whose unit id is in `units` or whose first row is on a line
/// in `lines` (every unit when both are empty), at most `limit` of them.
#[derive(Clone, Debug, Default)]
pub struct Selection {
    /// Unit ids (the log's unit-id column), matched exactly.
    pub units: Vec<String>,
    /// 1-based lines of units' first rows.
    pub lines: Vec<u64>,
    /// Most units to show, in log order.
    pub limit: Option<usize>,
}

/// Why the values could not be listed.
#[derive(Debug, thiserror::Error)]
pub enum ValuesError {
    /// The log could not be read.
    #[error(transparent)]
    Input(#[from] InputError),
    /// A unit id asked for is in no row of the log.
    #[error("{path}: no unit has the id '{id}' (--unit); the ids are in the log's unit-id column")]
    UnknownUnit {
        /// The log.
        path: std::path::PathBuf,
        /// The id asked for, escaped for a terminal.
        id: String,
    },
    /// No unit starts on a line asked for.
    #[error("{path}: no unit starts on line {line} (--line takes the line of a unit's first row)")]
    UnknownLine {
        /// The log.
        path: std::path::PathBuf,
        /// The line asked for.
        line: u64,
    },
    /// Units were asked for by id, but the log has no unit-id column.
    #[error(
        "{path}: the log has no unit-id column, so --unit cannot pick a unit; name the column with --unit-id, or pick units with --line"
    )]
    NoUnitIds {
        /// The log.
        path: std::path::PathBuf,
    },
}

/// Why the device computes no number for a channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ChannelFault {
    /// The raw reading (or feature) lies outside the channel's valid range: the device's
    /// `FAULT ch<channel>`.
    OutOfRange,
    /// The window of the feature's signal was refused (a sample out of range, or a window
    /// of the wrong length): the device's `FAULT signal<k>`.
    Window {
        /// The signal's index.
        signal: u8,
    },
}

/// One channel of one unit.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelValue {
    /// The physical value of the raw integer, zero + lsb·raw in the channel's unit: for a
    /// reading, the log's reading at the channel's resolution; for a feature, the feature's
    /// physical value. `None` when there is no raw integer, or it is the 32-bit word's end
    /// (a reading beyond the word, saturated).
    pub physical: Option<f64>,
    /// The raw integer: the reading converted to counts, or the feature's integer. `None`
    /// when the feature's window was refused.
    pub raw: Option<i32>,
    /// The kernel's scaled input word (Q(input_bits − 1)) for the raw integer; `None` when
    /// the device refuses it.
    pub scaled: Option<i32>,
    /// Why the device refuses the channel, if it does.
    pub fault: Option<ChannelFault>,
}

impl ChannelValue {
    /// The device's name for the fault, as replay prints it after `FAULT` (`ch3`, `signal0`).
    pub fn fault_name(&self, channel: usize) -> Option<String> {
        self.fault.map(|f| match f {
            ChannelFault::OutOfRange => format!("ch{channel}"),
            ChannelFault::Window { signal } => format!("signal{signal}"),
        })
    }
}

/// One unit's values.
#[derive(Clone, Debug, PartialEq)]
pub struct UnitValues {
    /// The unit's index in the log, counting from 0 (replay's index).
    pub index: usize,
    /// The 1-based line of the unit's first row.
    pub line: u64,
    /// The unit-id cell, if the log has a unit-id column.
    pub unit_id: Option<String>,
    /// One value per channel, in model order.
    pub channels: Vec<ChannelValue>,
    /// The integer score (accumulator units); `None` for a FAULT unit.
    pub score: Option<i64>,
    /// `GO`, `NO-GO`, `RECHECK` or `FAULT`.
    pub verdict: String,
    /// The unit's line exactly as `replay` prints it (and the device).
    pub device_line: String,
}

/// What describes a channel's conversion, for the header of a listing.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ChannelInfo {
    /// The channel's name.
    pub name: String,
    /// `reading`, or `<feature> of <signal>` (e.g. `rms of vibration_g`).
    pub source: String,
    /// Physical unit.
    pub unit: String,
    /// Physical units per raw count.
    pub lsb: f64,
    /// Physical value at raw 0.
    pub zero: f64,
    /// Valid raw range.
    pub raw_min: i32,
    /// Valid raw range.
    pub raw_max: i32,
    /// Raw count that scales to 0.
    pub offset: i32,
    /// Conversion multiplier.
    pub multiplier: i32,
    /// Conversion shift.
    pub shift: u8,
    /// The channel's integer weight.
    pub weight: i32,
}

/// The channels of `model` (conversions from the blob) with the names, units and physical
/// conversions of the float model `fm` they match.
pub fn channel_info(fm: &FloatModel, model: &DeviceModel) -> Vec<ChannelInfo> {
    fm.channels
        .iter()
        .zip(&model.model().channels)
        .map(|(c, b)| ChannelInfo {
            name: c.name.clone(),
            source: source_name(c),
            unit: c.unit.clone(),
            lsb: c.lsb,
            zero: c.zero,
            raw_min: b.raw_min,
            raw_max: b.raw_max,
            offset: b.offset,
            multiplier: b.multiplier,
            shift: b.shift,
            weight: b.weight,
        })
        .collect()
}

/// The model the device would run without a blob at hand: `fm` quantised plainly (no
/// training log, so no margin search: a packed blob's weights and bias may each differ by
/// one LSB) at the given words, with the RECHECK band of its operating point (0 without
/// one), as `audit` and `pack` take it by default.
///
/// # Errors
/// The quantiser's refusal (unsupported words, an accumulator that cannot be proved).
pub fn plain_model(
    fm: &FloatModel,
    input_bits: u8,
    weight_bits: u8,
) -> Result<DeviceModel, QuantError> {
    let cfg = QuantConfig {
        input_bits,
        weight_bits,
        optimise: false,
        acc_bits: None,
        recheck_band: fm.operating_point.as_ref().map_or(0.0, |op| op.band),
    };
    if fm.classes.is_some() {
        // The class quantiser rounds plainly: these are the rows a blob would hold.
        let q = crate::release::quantise_classes::quantise_classes(fm, cfg)?;
        return Ok(CheckedModel::with_outcomes(
            q.fixed,
            shared_model::SignalSection::default(),
            q.section,
        )?);
    }
    let q = quantise(fm, None, cfg)?;
    // `quantise` validated the section against these channels, so the pair is accepted.
    Ok(CheckedModel::with_outcomes(
        q.model.into_inner(),
        q.signals,
        shared_model::ClassSection::default(),
    )?)
}

/// `reading`, or `<feature> of <signal>`.
fn source_name(c: &ChannelScale) -> String {
    match &c.source {
        None => "reading".into(),
        Some(s) => format!("{} of {}", s.kind(), s.signal),
    }
}

/// Lists the values of the units of `log` that `sel` picks, in log order, computed by
/// `model` (a blob of `fm`, checked to match it, or `fm` quantised) with `fm`'s physical
/// conversions. Rows skipped as bad (`opts.skip_bad_rows`) are counted into `skipped`.
///
/// # Errors
/// The log's [`InputError`]; a unit id or line in `sel` that no unit has, or unit ids asked
/// of a log without a unit-id column ([`ValuesError`]).
pub fn unit_values(
    log: &Path,
    opts: &LogOptions,
    fm: &FloatModel,
    model: &DeviceModel,
    sel: &Selection,
    skipped: &mut SkipReport,
) -> Result<Vec<UnitValues>, ValuesError> {
    let mut pick = Picker::new(sel);
    let mut out = Vec::new();
    let mut index = 0usize;
    let mut any_ids = false;
    crate::ingest::stream(log, opts, &fm.channels, &fm.signals, skipped, |u| {
        let id = u.id.map(|b| String::from_utf8_lossy(b).into_owned());
        any_ids |= id.is_some();
        if pick.wants(u.line, id.as_deref()) {
            out.push(if fm.signals.is_empty() {
                reading_unit(index, u.line, id, fm, model, u.raw)
            } else {
                let id = id.unwrap_or_default();
                signal_unit(index, u.line, &id, fm, model, u.raw, u.windows)
            });
        }
        index += 1;
        Ok(())
    })?;
    pick.finish(log, any_ids)?;
    Ok(out)
}

/// Which units a [`Selection`] picks, and which of its ids and lines were found.
struct Picker<'s> {
    sel: &'s Selection,
    taken: usize,
    ids_seen: BTreeSet<&'s str>,
    lines_seen: BTreeSet<u64>,
}

impl<'s> Picker<'s> {
    fn new(sel: &'s Selection) -> Self {
        Self {
            sel,
            taken: 0,
            ids_seen: BTreeSet::new(),
            lines_seen: BTreeSet::new(),
        }
    }

    fn wants(&mut self, line: u64, id: Option<&str>) -> bool {
        let all = self.sel.units.is_empty() && self.sel.lines.is_empty();
        let by_id = id.and_then(|id| self.sel.units.iter().find(|u| *u == id));
        if let Some(u) = by_id {
            self.ids_seen.insert(u.as_str());
        }
        let by_line = self.sel.lines.contains(&line);
        if by_line {
            self.lines_seen.insert(line);
        }
        let picked = all || by_id.is_some() || by_line;
        if picked && self.sel.limit.is_none_or(|n| self.taken < n) {
            self.taken += 1;
            return true;
        }
        false
    }

    /// Every id and line asked for must have been found, even past the limit.
    fn finish(&self, log: &Path, any_ids: bool) -> Result<(), ValuesError> {
        if !self.sel.units.is_empty() && !any_ids {
            return Err(ValuesError::NoUnitIds { path: log.into() });
        }
        if let Some(id) = self
            .sel
            .units
            .iter()
            .find(|u| !self.ids_seen.contains(u.as_str()))
        {
            return Err(ValuesError::UnknownUnit {
                path: log.into(),
                id: crate::error::shown(id),
            });
        }
        if let Some(&line) = self.sel.lines.iter().find(|l| !self.lines_seen.contains(l)) {
            return Err(ValuesError::UnknownLine {
                path: log.into(),
                line,
            });
        }
        Ok(())
    }
}

/// A unit of a bench log: `raw` holds one reading per channel, as the device reads them.
fn reading_unit(
    index: usize,
    line: u64,
    unit_id: Option<String>,
    fm: &FloatModel,
    model: &DeviceModel,
    raw: &[i32],
) -> UnitValues {
    let raws: Vec<Result<i32, ChannelFault>> = raw.iter().map(|&r| Ok(r)).collect();
    let channels = channel_values(fm, model, &raws);
    let decision = model.classify(raw).ok();
    finish(
        index,
        line,
        unit_id,
        channels,
        decision.map(|d| d.score),
        replay::line(index, model, raw, &[]),
    )
}

/// A unit of a signal log: its reading channels' raw readings and one window per signal.
fn signal_unit(
    index: usize,
    line: u64,
    unit_id: &str,
    fm: &FloatModel,
    model: &DeviceModel,
    readings: &[i32],
    windows: &[Vec<i32>],
) -> UnitValues {
    let section = model.signals();
    let mut next = readings.iter();
    let raws: Vec<Result<i32, ChannelFault>> = (0..model.channel_count())
        .map(|i| match section.source(i) {
            Source::Reading => Ok(next.next().copied().unwrap_or(0)),
            Source::Feature { signal, feature } => {
                let refused = ChannelFault::Window { signal };
                let window = windows.get(usize::from(signal)).ok_or(refused)?;
                let spec = section.signals.get(usize::from(signal)).ok_or(refused)?;
                // The blob's section was validated: every feature is proved, so `new`
                // cannot refuse here; only the window can be refused.
                let f = CheckedFeature::new(*spec, feature).map_err(|_| refused)?;
                f.compute(window).map_err(|_: WindowFault| refused)
            }
        })
        .collect();
    let channels = channel_values(fm, model, &raws);
    let slices: Vec<&[i32]> = windows.iter().map(Vec::as_slice).collect();
    let decision = model.classify_windows(readings, &slices);
    debug_assert!(!matches!(decision, Err(SignalFault::Windows { .. })));
    finish(
        index,
        line,
        Some(unit_id.to_string()),
        channels,
        decision.ok().map(|d| d.score),
        replay::line(index, model, readings, &slices),
    )
}

/// Each channel's physical value and scaled input for its raw integer (or window fault).
/// The scaled inputs come from the kernel's own [`scale`](shared_model::CheckedModel::scale),
/// run on the raw integers with each refused one replaced by its channel's offset (inside
/// the valid range by validation), so a refused channel does not hide the others' inputs.
fn channel_values(
    fm: &FloatModel,
    model: &DeviceModel,
    raws: &[Result<i32, ChannelFault>],
) -> Vec<ChannelValue> {
    let specs = &model.model().channels;
    let mut probe = Vec::with_capacity(raws.len());
    let mut faults = Vec::with_capacity(raws.len());
    for (r, c) in raws.iter().zip(specs) {
        let fault = match *r {
            Err(f) => Some(f),
            Ok(v) if v < c.raw_min || v > c.raw_max => Some(ChannelFault::OutOfRange),
            Ok(_) => None,
        };
        probe.push(match (r, fault) {
            (Ok(v), None) => *v,
            _ => c.offset,
        });
        faults.push(fault);
    }
    let mut scaled = vec![0i32; probe.len()];
    // `probe` holds one in-range value per channel, so `scale` cannot refuse it.
    let ok = model.scale(&probe, &mut scaled).is_ok();
    raws.iter()
        .zip(&fm.channels)
        .zip(faults.into_iter().zip(scaled))
        .map(|((r, c), (fault, x))| {
            let raw = r.ok();
            ChannelValue {
                physical: raw
                    .filter(|&v| v != i32::MIN && v != i32::MAX)
                    .map(|v| c.physical(v)),
                raw,
                scaled: (fault.is_none() && ok).then_some(x),
                fault,
            }
        })
        .collect()
}

fn finish(
    index: usize,
    line: u64,
    unit_id: Option<String>,
    channels: Vec<ChannelValue>,
    score: Option<i64>,
    device_line: String,
) -> UnitValues {
    // The verdict is the line's second word: the device's own wording.
    let verdict = device_line.split(' ').nth(1).unwrap_or("FAULT").to_string();
    UnitValues {
        index,
        line,
        unit_id,
        channels,
        score: if verdict == "FAULT" { None } else { score },
        verdict,
        device_line,
    }
}
