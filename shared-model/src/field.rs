//! Field statistics: what a released model met on the line, kept with no heap in fixed
//! integer widths, and the field record that carries them off the device.
//!
//! One accumulator ([`FieldStats`]) for the device and the host: the firmware feeds it each
//! step's outcome, the host feeds it a replayed log, and the two records are equal byte for
//! byte. The record's layout is specified in `shared-model/FORMAT.md` ("Field record").
//!
//! What is kept: the unit count and counts per verdict; FAULT counts per channel, per signal
//! and for anything else; a histogram of scores over [`FIELD_BINS`] bins of `2^shift`
//! accumulator units from `origin` (with counts below and above); per channel the least,
//! greatest and summed value the weights multiplied; and two tabular CUSUMs (Page, 1954;
//! Montgomery, *Introduction to Statistical Quality Control*, §9.1) of the decided units'
//! margins, one over GO units (`score − go_min`) and one over NO-GO units
//! (`nogo_max − score`), each two-sided, with the unit number of its first alarm.
//!
//! A model of several classes is counted through its two-sided view ([`class_view`]): the
//! score is the signed lead (positive when the GO class leads, negative when a failure
//! class does), the thresholds `−class_gap` and `go_gap`; so the GO CUSUM follows GO units'
//! lead past the GO gap and the NO-GO CUSUM the lead past the class gap of units routed to
//! any failure class. Counts per verdict are the decisions' own; the class is not kept.
//!
//! Overflow, by design: every counter is a `u32` no greater than [`FieldStats::units`], and
//! `units` stops at `u32::MAX`: the unit that would pass it is not counted and
//! [`FieldStats::saturated`] is set, which freezes the whole record (a record that stopped
//! counting says so rather than wrapping). A channel sum adds at most `u32::MAX` values of
//! magnitude at most 2³¹, so `|sum| < 2³² · 2³¹ = 2⁶³` fits `i64`. CUSUM steps use
//! saturating `i64` arithmetic: a statistic that large has long raised its alarm.

use crate::classes::ClassSection;
use crate::decision::{Decision, Thresholds, Verdict};
use crate::limits::{MAX_CHANNELS, MAX_SIGNALS};

/// Bins of the score histogram.
pub const FIELD_BINS: usize = 32;
/// The four bytes a field record starts with.
pub const RECORD_MAGIC: [u8; 4] = *b"LGFR";
/// The field record's layout version.
pub const RECORD_VERSION: u16 = 1;
/// Largest record: header and plan, the fixed counters, every channel and signal.
pub const MAX_RECORD_LEN: usize = FIXED_LEN + MAX_CHANNELS * PER_CHANNEL + MAX_SIGNALS * 4 + 4;

/// Bytes before the per-channel part (see FORMAT.md).
const FIXED_LEN: usize = 4
    + 2
    + 1
    + 1
    + 4
    + 8
    + 1
    + 3
    + 6 * 8
    + 5 * 4
    + 1
    + 3
    + 4
    + 2 * 4
    + FIELD_BINS * 4
    + 2 * CUSUM_LEN;
/// Bytes per channel: faults, min, max, sum.
const PER_CHANNEL: usize = 4 + 4 + 4 + 8;
/// Bytes of one CUSUM's state: up, down, first alarm up, first alarm down.
const CUSUM_LEN: usize = 8 + 8 + 4 + 4;

/// One tabular CUSUM's settings, in accumulator units of the margin.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CusumPlan {
    /// The in-control mean margin (μ₀).
    pub target: i64,
    /// The allowance k: shifts smaller than this are not accumulated.
    pub slack: i64,
    /// The decision interval h: a sum above it is an alarm.
    pub limit: i64,
}

/// What the host derives from the release audit for the device's statistics: the histogram
/// bins and the two CUSUMs. Stored in the record, so the host reads a record with the plan
/// it was kept under.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FieldPlan {
    /// The blob id (CRC-32) of the release the statistics belong to.
    pub blob_id: u32,
    /// Lower edge of bin 0, in accumulator units of the score.
    pub origin: i64,
    /// Each bin is `2^shift` accumulator units wide (at most 62).
    pub shift: u8,
    /// CUSUM over GO units' margins, `score − go_min`.
    pub go: CusumPlan,
    /// CUSUM over NO-GO units' margins, `nogo_max − score`.
    pub nogo: CusumPlan,
}

/// A CUSUM's state.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CusumState {
    /// The upper sum `C⁺ = max(0, C⁺ + (m − μ₀) − k)`: margins growing.
    pub up: i64,
    /// The lower sum `C⁻ = max(0, C⁻ + (μ₀ − m) − k)`: margins shrinking (units walking
    /// towards the boundary).
    pub down: i64,
    /// 1-based unit number (of all units) at which `up` first exceeded the limit; 0 never.
    pub alarm_up: u32,
    /// 1-based unit number at which `down` first exceeded the limit; 0 never.
    pub alarm_down: u32,
}

impl CusumState {
    /// One margin into both sums; `unit` is the 1-based unit number.
    fn step(&mut self, plan: &CusumPlan, margin: i64, unit: u32) {
        let d = margin.saturating_sub(plan.target);
        self.up = self.up.saturating_add(d).saturating_sub(plan.slack).max(0);
        self.down = self
            .down
            .saturating_sub(d)
            .saturating_sub(plan.slack)
            .max(0);
        if self.alarm_up == 0 && self.up > plan.limit {
            self.alarm_up = unit;
        }
        if self.alarm_down == 0 && self.down > plan.limit {
            self.alarm_down = unit;
        }
    }

    /// Whether either sum has raised its alarm.
    pub const fn alarmed(&self) -> bool {
        self.alarm_up != 0 || self.alarm_down != 0
    }
}

/// Where a FAULT came from, as the field statistics count it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FieldFault {
    /// A channel's value was refused (its index in the model).
    Channel(u8),
    /// A signal's window was refused (its index in the model).
    Signal(u8),
    /// Anything else: a wrong count, a sensor failure, no valid model.
    Other,
}

/// The field statistics (see the module docs for what each part is and why none overflows).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct FieldStats {
    /// The plan the statistics are kept under.
    pub plan: FieldPlan,
    /// The model's channels (how many entries of the per-channel arrays are used).
    pub channels: u8,
    /// The model's signals.
    pub signals: u8,
    /// Units seen (decided or faulted).
    pub units: u32,
    /// Units decided GO.
    pub go: u32,
    /// Units decided NO-GO.
    pub nogo: u32,
    /// Units decided RECHECK.
    pub recheck: u32,
    /// Units that faulted.
    pub faults: u32,
    /// Set when a unit arrived after `units` reached `u32::MAX`: that unit and every later one
    /// went uncounted.
    pub saturated: bool,
    /// Faults of kind [`FieldFault::Other`].
    pub other_faults: u32,
    /// Decided units whose score lies below bin 0.
    pub below: u32,
    /// Decided units whose score lies above the last bin.
    pub above: u32,
    /// Decided units per score bin.
    pub bins: [u32; FIELD_BINS],
    /// The CUSUM over GO units' margins.
    pub cusum_go: CusumState,
    /// The CUSUM over NO-GO units' margins.
    pub cusum_nogo: CusumState,
    /// Faults per channel.
    pub channel_faults: [u32; MAX_CHANNELS],
    /// Faults per signal.
    pub signal_faults: [u32; MAX_SIGNALS],
    /// Least value per channel over decided units (`i32::MAX` before the first).
    pub min: [i32; MAX_CHANNELS],
    /// Greatest value per channel over decided units (`i32::MIN` before the first).
    pub max: [i32; MAX_CHANNELS],
    /// Sum of the values per channel over decided units.
    pub sum: [i64; MAX_CHANNELS],
}

/// Why bytes are not a field record.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RecordError {
    /// Fewer bytes than the record's header says.
    Truncated,
    /// The first four bytes are not `LGFR`.
    BadMagic,
    /// A layout version this build does not read.
    UnsupportedVersion(u16),
    /// More channels or signals than the capacities, a bin shift above 62, a reserved
    /// byte that is not zero, or a saturation flag other than 0 or 1.
    BadHeader,
    /// The trailing CRC-32 does not match the bytes before it.
    BadCrc,
    /// Bytes after the CRC.
    TrailingBytes,
    /// The output buffer is shorter than the record.
    BufferTooSmall,
    /// The counts do not add up (verdicts and faults to units, bins to decided units,
    /// fault kinds to faults), a CUSUM sum is negative, or an alarm names a unit past the
    /// last.
    Inconsistent,
}

impl core::fmt::Display for RecordError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match *self {
            Self::Truncated => f.write_str("field record is truncated"),
            Self::BadMagic => f.write_str("not a field record (magic is not LGFR)"),
            Self::UnsupportedVersion(v) => write!(f, "field record version {v} is not supported"),
            Self::BadHeader => f.write_str(
                "field record header is invalid (too many channels or signals, a bin shift above 62, a reserved byte not zero, or a saturation flag other than 0 or 1)",
            ),
            Self::BadCrc => f.write_str("field record CRC-32 does not match (damaged or changed)"),
            Self::TrailingBytes => f.write_str("bytes after the field record's CRC-32"),
            Self::BufferTooSmall => f.write_str("buffer too small for the field record"),
            Self::Inconsistent => {
                f.write_str("field record counts do not add up (units, verdicts, faults, bins)")
            }
        }
    }
}

impl FieldStats {
    /// Empty statistics for a model of `channels` channels and `signals` signals (clamped to
    /// the capacities).
    pub fn new(plan: FieldPlan, channels: usize, signals: usize) -> Self {
        Self {
            plan: FieldPlan {
                shift: plan.shift.min(62),
                ..plan
            },
            channels: clamp_u8(channels, MAX_CHANNELS),
            signals: clamp_u8(signals, MAX_SIGNALS),
            units: 0,
            go: 0,
            nogo: 0,
            recheck: 0,
            faults: 0,
            saturated: false,
            other_faults: 0,
            below: 0,
            above: 0,
            bins: [0; FIELD_BINS],
            cusum_go: CusumState::default(),
            cusum_nogo: CusumState::default(),
            channel_faults: [0; MAX_CHANNELS],
            signal_faults: [0; MAX_SIGNALS],
            min: [i32::MAX; MAX_CHANNELS],
            max: [i32::MIN; MAX_CHANNELS],
            sum: [0; MAX_CHANNELS],
        }
    }

    /// Clears every count, sum and CUSUM; keeps the plan, channels and signals. In place:
    /// no second copy of the statistics on the stack.
    pub fn reset(&mut self) {
        self.units = 0;
        self.go = 0;
        self.nogo = 0;
        self.recheck = 0;
        self.faults = 0;
        self.saturated = false;
        self.other_faults = 0;
        self.below = 0;
        self.above = 0;
        self.bins = [0; FIELD_BINS];
        self.cusum_go = CusumState::default();
        self.cusum_nogo = CusumState::default();
        self.channel_faults = [0; MAX_CHANNELS];
        self.signal_faults = [0; MAX_SIGNALS];
        self.min = [i32::MAX; MAX_CHANNELS];
        self.max = [i32::MIN; MAX_CHANNELS];
        self.sum = [0; MAX_CHANNELS];
    }

    /// Counts the next unit, or returns `None` (and marks the record saturated) when
    /// `units` is already at `u32::MAX`.
    fn next_unit(&mut self) -> Option<u32> {
        if self.saturated {
            return None;
        }
        match self.units.checked_add(1) {
            Some(n) => {
                self.units = n;
                Some(n)
            }
            None => {
                self.saturated = true;
                None
            }
        }
    }

    /// One decided unit: its decision under `thresholds` and the values the weights
    /// multiplied (one per channel in model order; extra values are ignored, missing ones
    /// leave their channel's figures alone).
    pub fn decided(&mut self, thresholds: &Thresholds, decision: &Decision, values: &[i32]) {
        let Some(unit) = self.next_unit() else { return };
        let score = decision.score;
        // Every counter here is at most `units` (see the module docs): `+ 1` cannot wrap.
        match decision.verdict {
            Verdict::Go => {
                self.go = self.go.saturating_add(1);
                let m = score.saturating_sub(thresholds.go_min);
                self.cusum_go.step(&self.plan.go, m, unit);
            }
            Verdict::NoGo => {
                self.nogo = self.nogo.saturating_add(1);
                let m = thresholds.nogo_max.saturating_sub(score);
                self.cusum_nogo.step(&self.plan.nogo, m, unit);
            }
            Verdict::Recheck => self.recheck = self.recheck.saturating_add(1),
        }
        match bin_of(score, self.plan.origin, self.plan.shift) {
            Bin::Below => self.below = self.below.saturating_add(1),
            Bin::Above => self.above = self.above.saturating_add(1),
            Bin::At(i) => {
                if let Some(b) = self.bins.get_mut(i) {
                    *b = b.saturating_add(1);
                }
            }
        }
        let n = usize::from(self.channels);
        for (((&v, lo), hi), s) in values
            .iter()
            .zip(self.min.iter_mut())
            .zip(self.max.iter_mut())
            .zip(self.sum.iter_mut())
            .take(n)
        {
            *lo = (*lo).min(v);
            *hi = (*hi).max(v);
            // |sum| < 2⁶³ is proved (module docs): no saturation check, one add with carry.
            *s = s.wrapping_add(i64::from(v));
        }
    }

    /// One decided unit of a model of several classes: counted as its two-sided view
    /// ([`class_view`]): the signed lead against the thresholds `−class_gap` / `go_gap`.
    pub fn decided_classes(&mut self, classes: &ClassSection, decision: &Decision, values: &[i32]) {
        let (thresholds, view) = class_view(classes, decision);
        self.decided(&thresholds, &view, values);
    }

    /// One unit that faulted (the device showed NO-GO without a score).
    pub fn faulted(&mut self, fault: FieldFault) {
        if self.next_unit().is_none() {
            return;
        }
        self.faults = self.faults.saturating_add(1);
        let slot = match fault {
            FieldFault::Channel(c) if c < self.channels => {
                self.channel_faults.get_mut(usize::from(c))
            }
            FieldFault::Signal(s) if s < self.signals => self.signal_faults.get_mut(usize::from(s)),
            _ => None,
        };
        match slot {
            Some(c) => *c = c.saturating_add(1),
            None => self.other_faults = self.other_faults.saturating_add(1),
        }
    }

    /// Bytes of this record when encoded.
    pub fn record_len(&self) -> usize {
        FIXED_LEN + usize::from(self.channels) * PER_CHANNEL + usize::from(self.signals) * 4 + 4
    }

    /// Writes the record (FORMAT.md, "Field record") into `out`; returns its length.
    ///
    /// # Errors
    /// [`RecordError::BufferTooSmall`] when `out` is shorter than [`Self::record_len`].
    pub fn encode(&self, out: &mut [u8]) -> Result<usize, RecordError> {
        let len = self.record_len();
        let buf = out.get_mut(..len).ok_or(RecordError::BufferTooSmall)?;
        let mut w = Writer { buf, at: 0 };
        w.put(&RECORD_MAGIC);
        w.put(&RECORD_VERSION.to_le_bytes());
        w.put(&[self.channels, self.signals]);
        let p = &self.plan;
        w.put(&p.blob_id.to_le_bytes());
        w.put(&p.origin.to_le_bytes());
        w.put(&[p.shift, 0, 0, 0]);
        for c in [&p.go, &p.nogo] {
            for v in [c.target, c.slack, c.limit] {
                w.put(&v.to_le_bytes());
            }
        }
        for v in [self.units, self.go, self.nogo, self.recheck, self.faults] {
            w.put(&v.to_le_bytes());
        }
        w.put(&[u8::from(self.saturated), 0, 0, 0]);
        w.put(&self.other_faults.to_le_bytes());
        w.put(&self.below.to_le_bytes());
        w.put(&self.above.to_le_bytes());
        for b in &self.bins {
            w.put(&b.to_le_bytes());
        }
        for c in [&self.cusum_go, &self.cusum_nogo] {
            w.put(&c.up.to_le_bytes());
            w.put(&c.down.to_le_bytes());
            w.put(&c.alarm_up.to_le_bytes());
            w.put(&c.alarm_down.to_le_bytes());
        }
        let n = usize::from(self.channels);
        for i in 0..n {
            let get = |a: &[u32]| a.get(i).copied().unwrap_or(0);
            w.put(&get(&self.channel_faults).to_le_bytes());
            w.put(&self.min.get(i).copied().unwrap_or(0).to_le_bytes());
            w.put(&self.max.get(i).copied().unwrap_or(0).to_le_bytes());
            w.put(&self.sum.get(i).copied().unwrap_or(0).to_le_bytes());
        }
        for s in self.signal_faults.iter().take(usize::from(self.signals)) {
            w.put(&s.to_le_bytes());
        }
        let body = len.saturating_sub(4);
        let crc = crate::blob::CRC32.checksum(w.buf.get(..body).unwrap_or(&[]));
        w.put(&crc.to_le_bytes());
        Ok(len)
    }

    /// Reads a record: magic, version, capacities, CRC-32, and that the counts add up.
    ///
    /// # Errors
    /// The first [`RecordError`] found.
    pub fn decode(bytes: &[u8]) -> Result<Self, RecordError> {
        let mut r = Reader { buf: bytes, at: 0 };
        if r.take::<4>()? != RECORD_MAGIC {
            return Err(RecordError::BadMagic);
        }
        let version = u16::from_le_bytes(r.take()?);
        if version != RECORD_VERSION {
            return Err(RecordError::UnsupportedVersion(version));
        }
        let [channels, signals] = r.take()?;
        if usize::from(channels) > MAX_CHANNELS || usize::from(signals) > MAX_SIGNALS {
            return Err(RecordError::BadHeader);
        }
        let mut s = Self::new(FieldPlan::default(), channels.into(), signals.into());
        let len = s.record_len();
        if bytes.len() < len {
            return Err(RecordError::Truncated);
        }
        if bytes.len() > len {
            return Err(RecordError::TrailingBytes);
        }
        let body = len.saturating_sub(4);
        let stored = bytes
            .get(body..)
            .and_then(|b| b.try_into().ok())
            .map(u32::from_le_bytes)
            .ok_or(RecordError::Truncated)?;
        if crate::blob::CRC32.checksum(bytes.get(..body).unwrap_or(&[])) != stored {
            return Err(RecordError::BadCrc);
        }
        s.plan.blob_id = r.u32()?;
        s.plan.origin = r.i64()?;
        // Reserved bytes are zero in version 1: one record, one byte string.
        let [shift, 0, 0, 0] = r.take()? else {
            return Err(RecordError::BadHeader);
        };
        if shift > 62 {
            return Err(RecordError::BadHeader);
        }
        s.plan.shift = shift;
        for c in [&mut s.plan.go, &mut s.plan.nogo] {
            c.target = r.i64()?;
            c.slack = r.i64()?;
            c.limit = r.i64()?;
        }
        s.units = r.u32()?;
        s.go = r.u32()?;
        s.nogo = r.u32()?;
        s.recheck = r.u32()?;
        s.faults = r.u32()?;
        let [sat @ (0 | 1), 0, 0, 0] = r.take()? else {
            return Err(RecordError::BadHeader);
        };
        s.saturated = sat == 1;
        s.other_faults = r.u32()?;
        s.below = r.u32()?;
        s.above = r.u32()?;
        for b in &mut s.bins {
            *b = r.u32()?;
        }
        for c in [&mut s.cusum_go, &mut s.cusum_nogo] {
            c.up = r.i64()?;
            c.down = r.i64()?;
            c.alarm_up = r.u32()?;
            c.alarm_down = r.u32()?;
        }
        for i in 0..usize::from(channels) {
            let f = r.u32()?;
            let lo = r.i32()?;
            let hi = r.i32()?;
            let sum = r.i64()?;
            if let (Some(a), Some(b), Some(c), Some(d)) = (
                s.channel_faults.get_mut(i),
                s.min.get_mut(i),
                s.max.get_mut(i),
                s.sum.get_mut(i),
            ) {
                (*a, *b, *c, *d) = (f, lo, hi, sum);
            }
        }
        for f in s.signal_faults.iter_mut().take(usize::from(signals)) {
            *f = r.u32()?;
        }
        if !s.adds_up() {
            return Err(RecordError::Inconsistent);
        }
        Ok(s)
    }

    /// The counts agree with each other: verdicts and faults make up the units, the bins
    /// the decided units, the fault kinds the faults; no CUSUM sum is negative and no
    /// alarm names a unit past the last.
    fn adds_up(&self) -> bool {
        let cusums_ok = [&self.cusum_go, &self.cusum_nogo].iter().all(|c| {
            c.up >= 0 && c.down >= 0 && c.alarm_up <= self.units && c.alarm_down <= self.units
        });
        let sum = |it: &mut dyn Iterator<Item = u32>| -> u64 { it.map(u64::from).sum() };
        let decided = u64::from(self.go) + u64::from(self.nogo) + u64::from(self.recheck);
        let binned =
            sum(&mut self.bins.iter().copied()) + u64::from(self.below) + u64::from(self.above);
        let faults = sum(&mut self.channel_faults.iter().copied())
            + sum(&mut self.signal_faults.iter().copied())
            + u64::from(self.other_faults);
        cusums_ok
            && decided + u64::from(self.faults) == u64::from(self.units)
            && binned == decided
            && faults == u64::from(self.faults)
    }
}

/// The two-sided view of a class model's decision that the field statistics keep: the
/// *signed lead* (the lead when the GO class leads, minus the lead when a failure class
/// leads) under the thresholds `nogo_max = −class_gap`, `go_min = go_gap`. The view's
/// verdict is the decision's own (GO leads by `go_gap` or more ⇔ signed lead ≥ `go_gap`; a
/// failure class leads by `class_gap` or more ⇔ signed lead ≤ `−class_gap`), so the
/// histogram holds GO-led units right of 0 and failure-led units left of it, the GO CUSUM
/// follows `lead − go_gap` of GO units and the NO-GO CUSUM `lead − class_gap` of units
/// routed to a failure class (whichever class): the margins past each decision's gap.
pub fn class_view(classes: &ClassSection, decision: &Decision) -> (Thresholds, Decision) {
    let go_led = decision.class.is_some() && decision.class == classes.go_class();
    let score = if go_led {
        decision.score
    } else {
        decision.score.saturating_neg()
    };
    let thresholds = Thresholds {
        nogo_max: classes.class_gap.saturating_neg(),
        go_min: classes.go_gap,
    };
    (
        thresholds,
        Decision {
            score,
            verdict: decision.verdict,
            class: decision.class,
        },
    )
}

/// Where a score falls among the record's bins.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Bin {
    /// Below the first bin's origin.
    Below,
    /// In bin `k` (0-based, below [`FIELD_BINS`]).
    At(usize),
    /// Past the last bin.
    Above,
}

/// The bin of `score`: `(score − origin) >> shift`, with no division (cheap on a core
/// without a divider) and no overflow (a difference that does not fit is out of range).
/// The host's parts of a field log bin by this same rule.
pub fn bin_of(score: i64, origin: i64, shift: u8) -> Bin {
    match score.checked_sub(origin) {
        Some(d) if d < 0 => Bin::Below,
        Some(d) => {
            let i = d >> u32::from(shift.min(62));
            match usize::try_from(i) {
                Ok(i) if i < FIELD_BINS => Bin::At(i),
                _ => Bin::Above,
            }
        }
        None if score < origin => Bin::Below,
        None => Bin::Above,
    }
}

/// `n` as `u8`, at most `cap`.
fn clamp_u8(n: usize, cap: usize) -> u8 {
    u8::try_from(n.min(cap)).unwrap_or(u8::MAX)
}

/// Little-endian writer into a buffer already checked to be long enough.
struct Writer<'a> {
    buf: &'a mut [u8],
    at: usize,
}

impl Writer<'_> {
    fn put(&mut self, bytes: &[u8]) {
        let end = self.at.saturating_add(bytes.len());
        if let Some(dst) = self.buf.get_mut(self.at..end) {
            // Byte by byte, not `copy_from_slice`: its length check is a panic path the
            // compiler keeps (a saturated `end` would make the lengths differ).
            for (d, s) in dst.iter_mut().zip(bytes) {
                *d = *s;
            }
        }
        self.at = end;
    }
}

/// Little-endian reader.
struct Reader<'a> {
    buf: &'a [u8],
    at: usize,
}

impl Reader<'_> {
    fn take<const N: usize>(&mut self) -> Result<[u8; N], RecordError> {
        let end = self.at.saturating_add(N);
        let b = self
            .buf
            .get(self.at..end)
            .and_then(|b| b.try_into().ok())
            .ok_or(RecordError::Truncated)?;
        self.at = end;
        Ok(b)
    }
    fn u32(&mut self) -> Result<u32, RecordError> {
        self.take().map(u32::from_le_bytes)
    }
    fn i32(&mut self) -> Result<i32, RecordError> {
        self.take().map(i32::from_le_bytes)
    }
    fn i64(&mut self) -> Result<i64, RecordError> {
        self.take().map(i64::from_le_bytes)
    }
}

#[cfg(test)]
mod tests;
