//! A field run over a contiguous part of a log's units, with an exact merge: parts of one log
//! counted apart (other threads, other processes, other machines) merge into exactly the
//! figures a single pass over the whole log gives, for any cut into consecutive parts and
//! any tree of merges that keeps the parts in order.
//!
//! What a part keeps is what the drift test reads from a `FieldRun` (`field::run`): the counts per
//! verdict and FAULT kind, the score bins, each channel's exact moments (count, Σx, Σx²) with
//! its least and greatest value, every scored unit's score in unit order, and each side's
//! two CUSUM sums as the part's effect on the state it is entered with ([`CusumPart`]:
//! a composed map and the units that can be the first alarm). Counts are `u64` and sums
//! `i128` within a part, so nothing in a part or a merge saturates or wraps; the record's
//! limits are applied once, where the merged part becomes statistics ([`RunPart::stats`]).
//!
//! Not kept: the per-unit CUSUM chart (`FieldRun::chart`), one point per decided unit and
//! only for display; a run made from a merged part has none, and the drift report says that
//! no chart was drawn because the field was counted in parts.
//!
//! Limits, exactly:
//! - The field record counts at most `u32::MAX` units; a single pass stops there and marks
//!   itself saturated. A merged part of more units cannot tell which units the single pass
//!   would have kept, so [`RunPart::stats`] and `FieldRun::from_part` refuse it
//!   ([`RunPartError::TooManyUnits`]); up to `u32::MAX` units every figure is the single
//!   pass's, saturated flag (false) included.
//! - The CUSUM sums use the device's saturating `i64` steps, reproduced exactly by the
//!   composition (see [`crate::field::cusum_part`]), at any magnitude.
//! - Channel sums: `i128` in a part; at most `u32::MAX` values of at most 2³¹ in magnitude
//!   fit the record's `i64`, as on the device.
//!
//! Merging checks that both parts were counted under the same settings (plan, thresholds,
//! channels, signals, values kept) and that each part is sound (counts that add up, canonical
//! CUSUM maps), so a part read back from bytes that were changed is refused, not merged.
//! Parts serialise with serde (integers only: no floating point to lose or to be infinite).

use serde::{Deserialize, Serialize};
use shared_model::field::{Bin, CusumPlan, FIELD_BINS, bin_of};
use shared_model::limits::MAX_SIGNALS;
use shared_model::{
    CheckedModel, Decision, Fault, FieldFault, FieldPlan, FieldStats, Inputs, MAX_CHANNELS,
    Outcomes, SignalFault, Thresholds, Verdict,
};

use crate::field::cusum_part::CusumPart;
use crate::release::audit_baseline::Moments;

/// Why parts cannot be merged or turned into statistics.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub enum RunPartError {
    /// The parts were counted under different settings.
    #[error(
        "the field parts were counted under different {0}: merge only parts of one field run, counted against one audit's plan"
    )]
    Settings(&'static str),
    /// More units than the field record counts.
    #[error(
        "the merged field has {units} units, more than the field record counts (4,294,967,295): a single pass stops counting there and marks the record saturated, which a merge cannot reproduce; test the field in runs of at most 4,294,967,295 units"
    )]
    TooManyUnits {
        /// The merged part's units.
        units: u64,
    },
    /// A part whose figures contradict each other (changed after it was written).
    #[error(
        "a field part is not sound ({0}): it was not written by linegate's field counting, or was changed after"
    )]
    Unsound(&'static str),
}

/// One CUSUM side's settings (μ₀, k, h), as a part keeps them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct SidePlan {
    /// μ₀.
    pub target: i64,
    /// k.
    pub slack: i64,
    /// h.
    pub limit: i64,
}

impl From<CusumPlan> for SidePlan {
    fn from(p: CusumPlan) -> Self {
        Self {
            target: p.target,
            slack: p.slack,
            limit: p.limit,
        }
    }
}

impl From<SidePlan> for CusumPlan {
    fn from(p: SidePlan) -> Self {
        Self {
            target: p.target,
            slack: p.slack,
            limit: p.limit,
        }
    }
}

/// What a part is counted under; parts merge only under equal settings.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct PartSettings {
    /// The release's blob id.
    pub blob_id: u32,
    /// Lower edge of score bin 0.
    pub origin: i64,
    /// Bin width `2^shift` (at most 62, as the record).
    pub shift: u8,
    /// GO side's CUSUM.
    pub go: SidePlan,
    /// NO-GO side's CUSUM.
    pub nogo: SidePlan,
    /// The thresholds margins are measured from: greatest NO-GO score.
    pub nogo_max: i64,
    /// Least GO score.
    pub go_min: i64,
    /// The model's channels (at most the device's capacity).
    pub channels: u8,
    /// The model's signals (at most the device's capacity).
    pub signals: u8,
    /// Whether units come with their channel values (a log; not device lines).
    pub has_values: bool,
}

impl PartSettings {
    /// The plan, as the record keeps it.
    pub fn plan(&self) -> FieldPlan {
        FieldPlan {
            blob_id: self.blob_id,
            origin: self.origin,
            shift: self.shift,
            go: self.go.into(),
            nogo: self.nogo.into(),
        }
    }

    /// The thresholds.
    pub fn thresholds(&self) -> Thresholds {
        Thresholds {
            nogo_max: self.nogo_max,
            go_min: self.go_min,
        }
    }
}

/// One channel's figures over a part's decided units.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct ChannelPart {
    /// Count, Σx, Σx² of the values.
    pub moments: Moments,
    /// Least value (`i32::MAX` before the first).
    pub min: i32,
    /// Greatest value (`i32::MIN` before the first).
    pub max: i32,
}

impl Default for ChannelPart {
    fn default() -> Self {
        Self {
            moments: Moments::default(),
            min: i32::MAX,
            max: i32::MIN,
        }
    }
}

/// A field run over a contiguous part of a log's units (see the module docs).
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct RunPart {
    /// What the part was counted under.
    pub settings: PartSettings,
    /// Units (decided or faulted).
    pub units: u64,
    /// Units decided GO.
    pub go: u64,
    /// Units decided NO-GO.
    pub nogo: u64,
    /// Units decided RECHECK.
    pub recheck: u64,
    /// Units that faulted.
    pub faults: u64,
    /// FAULTs of no channel or signal of the model.
    pub other_faults: u64,
    /// Decided units scored below bin 0.
    pub below: u64,
    /// Decided units scored above the last bin.
    pub above: u64,
    /// Decided units per score bin.
    pub bins: [u64; FIELD_BINS],
    /// FAULTs per channel.
    pub channel_faults: Vec<u64>,
    /// FAULTs per signal.
    pub signal_faults: Vec<u64>,
    /// Per channel: the decided units' values.
    pub channel: Vec<ChannelPart>,
    /// Every decided unit's score, in unit order.
    pub scores: Vec<i64>,
    /// The GO side's CUSUM over the part.
    pub cusum_go: CusumPart,
    /// The NO-GO side's CUSUM over the part.
    pub cusum_nogo: CusumPart,
}

/// What the blob's kernel made of one unit.
pub enum Outcome {
    /// Decided, with the values the weights multiplied (the first `n` of the array).
    Decided(Decision, [i32; MAX_CHANNELS], usize),
    /// Faulted.
    Faulted(FieldFault),
}

/// One unit's readings and windows through `model`'s kernel, as the device takes it.
pub fn outcome<I: Inputs, K: Outcomes>(
    model: &CheckedModel<I, K>,
    readings: &[i32],
    windows: &[&[i32]],
) -> Outcome {
    let mut values = [0i32; MAX_CHANNELS];
    let decided = model
        .channel_values(readings, windows, &mut values)
        .and_then(|n| {
            let v = values.get(..n).unwrap_or(&[]);
            model
                .classify(v)
                .map(|d| (d, n))
                .map_err(SignalFault::Reading)
        });
    match decided {
        Ok((d, n)) => Outcome::Decided(d, values, n),
        Err(e) => Outcome::Faulted(field_fault(&e)),
    }
}

/// The FAULT mapping every part of the project uses: a reading out of range is its
/// channel's, a refused window its signal's, anything else (counts, sensor failure) other.
pub fn field_fault(e: &SignalFault) -> FieldFault {
    match e {
        SignalFault::Reading(Fault::OutOfRange { channel, .. }) => FieldFault::Channel(*channel),
        SignalFault::Window { signal, .. } => FieldFault::Signal(*signal),
        _ => FieldFault::Other,
    }
}

impl RunPart {
    /// An empty part for a model of `channels` channels and `signals` signals (clamped to
    /// the device's capacities, as the record).
    pub fn new(
        plan: FieldPlan,
        thresholds: Thresholds,
        channels: usize,
        signals: usize,
        has_values: bool,
    ) -> Self {
        let channels = channels.min(MAX_CHANNELS);
        let signals = signals.min(MAX_SIGNALS);
        Self {
            settings: PartSettings {
                blob_id: plan.blob_id,
                origin: plan.origin,
                shift: plan.shift.min(62),
                go: plan.go.into(),
                nogo: plan.nogo.into(),
                nogo_max: thresholds.nogo_max,
                go_min: thresholds.go_min,
                channels: u8::try_from(channels).unwrap_or(u8::MAX),
                signals: u8::try_from(signals).unwrap_or(u8::MAX),
                has_values,
            },
            units: 0,
            go: 0,
            nogo: 0,
            recheck: 0,
            faults: 0,
            other_faults: 0,
            below: 0,
            above: 0,
            bins: [0; FIELD_BINS],
            channel_faults: vec![0; channels],
            signal_faults: vec![0; signals],
            channel: vec![ChannelPart::default(); channels],
            scores: Vec::new(),
            cusum_go: CusumPart::default(),
            cusum_nogo: CusumPart::default(),
        }
    }

    /// One decided unit (`values`: the values the weights multiplied, when known; extra
    /// values are ignored, missing ones leave their channel alone, as the record).
    pub fn decided(&mut self, d: &Decision, values: Option<&[i32]>) {
        self.units = self.units.saturating_add(1);
        let unit = self.units;
        let (s, score) = (self.settings, d.score);
        match d.verdict {
            Verdict::Go => {
                self.go += 1;
                let m = score.saturating_sub(s.go_min);
                self.cusum_go.step(&s.go.into(), m, unit);
            }
            Verdict::NoGo => {
                self.nogo += 1;
                let m = s.nogo_max.saturating_sub(score);
                self.cusum_nogo.step(&s.nogo.into(), m, unit);
            }
            Verdict::Recheck => self.recheck += 1,
        }
        match bin_of(score, s.origin, s.shift) {
            Bin::Below => self.below += 1,
            Bin::Above => self.above += 1,
            Bin::At(i) => {
                if let Some(b) = self.bins.get_mut(i) {
                    *b += 1;
                }
            }
        }
        self.scores.push(score);
        for (c, &x) in self.channel.iter_mut().zip(values.unwrap_or(&[])) {
            c.moments.push(x);
            c.min = c.min.min(x);
            c.max = c.max.max(x);
        }
    }

    /// One unit that faulted.
    pub fn faulted(&mut self, fault: FieldFault) {
        self.units = self.units.saturating_add(1);
        self.faults += 1;
        let slot = match fault {
            FieldFault::Channel(c) => self.channel_faults.get_mut(usize::from(c)),
            FieldFault::Signal(s) => self.signal_faults.get_mut(usize::from(s)),
            FieldFault::Other => None,
        };
        match slot {
            Some(n) => *n += 1,
            None => self.other_faults += 1,
        }
    }

    /// `earlier`'s units, then `later`'s: exact and associative (any tree of merges over
    /// parts kept in order gives the same part, field for field).
    ///
    /// # Errors
    /// [`RunPartError::Settings`] when the parts were counted under different settings,
    /// [`RunPartError::Unsound`] when either part's figures contradict each other.
    pub fn merge(earlier: &Self, later: &Self) -> Result<Self, RunPartError> {
        earlier.check()?;
        later.check()?;
        // Every count is at most its part's units (`check`), so no sum below can overflow.
        if earlier.units.checked_add(later.units).is_none() {
            return Err(RunPartError::TooManyUnits { units: u64::MAX });
        }
        let (a, b) = (&earlier.settings, &later.settings);
        if a.plan() != b.plan() {
            return Err(RunPartError::Settings("plans"));
        }
        if a.thresholds() != b.thresholds() {
            return Err(RunPartError::Settings("thresholds"));
        }
        if (a.channels, a.signals) != (b.channels, b.signals) {
            return Err(RunPartError::Settings("model sizes (channels, signals)"));
        }
        if a.has_values != b.has_values {
            return Err(RunPartError::Settings(
                "sources (channel values kept in one, not in the other)",
            ));
        }
        let add = |x: u64, y: u64| x.saturating_add(y);
        let sum = |x: &[u64], y: &[u64]| x.iter().zip(y).map(|(p, q)| add(*p, *q)).collect();
        let mut bins = earlier.bins;
        for (b, l) in bins.iter_mut().zip(&later.bins) {
            *b = add(*b, *l);
        }
        let channel = earlier
            .channel
            .iter()
            .zip(&later.channel)
            .map(|(e, l)| {
                let mut moments = e.moments;
                moments.merge(&l.moments);
                ChannelPart {
                    moments,
                    min: e.min.min(l.min),
                    max: e.max.max(l.max),
                }
            })
            .collect();
        let offset = earlier.units;
        Ok(Self {
            settings: earlier.settings,
            units: add(earlier.units, later.units),
            go: add(earlier.go, later.go),
            nogo: add(earlier.nogo, later.nogo),
            recheck: add(earlier.recheck, later.recheck),
            faults: add(earlier.faults, later.faults),
            other_faults: add(earlier.other_faults, later.other_faults),
            below: add(earlier.below, later.below),
            above: add(earlier.above, later.above),
            bins,
            channel_faults: sum(&earlier.channel_faults, &later.channel_faults),
            signal_faults: sum(&earlier.signal_faults, &later.signal_faults),
            channel,
            scores: [earlier.scores.as_slice(), &later.scores].concat(),
            cusum_go: CusumPart::merge(&earlier.cusum_go, &later.cusum_go, offset),
            cusum_nogo: CusumPart::merge(&earlier.cusum_nogo, &later.cusum_nogo, offset),
        })
    }

    /// The part's figures agree with each other and with its settings (what a part read
    /// back from bytes must show before it is merged or used).
    ///
    /// # Errors
    /// [`RunPartError::Unsound`] naming the first disagreement.
    pub fn check(&self) -> Result<(), RunPartError> {
        let s = &self.settings;
        let bad = |ok: bool, what| {
            if ok {
                Ok(())
            } else {
                Err(RunPartError::Unsound(what))
            }
        };
        bad(
            usize::from(s.channels) <= MAX_CHANNELS && usize::from(s.signals) <= MAX_SIGNALS,
            "more channels or signals than the device holds",
        )?;
        bad(s.shift <= 62, "a bin shift above 62")?;
        bad(
            self.channel.len() == usize::from(s.channels)
                && self.channel_faults.len() == usize::from(s.channels)
                && self.signal_faults.len() == usize::from(s.signals),
            "per-channel or per-signal figures of the wrong length",
        )?;
        let total = |it: &mut dyn Iterator<Item = u64>| -> u128 { it.map(u128::from).sum() };
        let decided = total(&mut [self.go, self.nogo, self.recheck].into_iter());
        bad(
            decided + u128::from(self.faults) == u128::from(self.units),
            "verdicts and faults do not add up to the units",
        )?;
        let binned = total(&mut self.bins.iter().copied())
            + total(&mut [self.below, self.above].into_iter());
        bad(
            binned == decided,
            "the score bins do not add up to the decided units",
        )?;
        bad(
            u128::try_from(self.scores.len()).is_ok_and(|n| n == decided),
            "the scores kept are not one per decided unit",
        )?;
        let kinds = total(&mut self.channel_faults.iter().copied())
            + total(&mut self.signal_faults.iter().copied())
            + u128::from(self.other_faults);
        bad(
            kinds == u128::from(self.faults),
            "the fault kinds do not add up to the faults",
        )?;
        bad(
            self.channel.iter().all(|c| {
                let n = c.moments.n;
                u128::from(n) <= decided
                    && (n == 0) == (c.min > c.max)
                    && c.moments.sum.unsigned_abs() <= u128::from(n) << 31
                    && (0..=i128::from(n) << 62).contains(&c.moments.sum_sq)
            }),
            "a channel's count does not fit its decided units, its least and greatest value, or its sums",
        )?;
        bad(
            self.cusum_go.is_sound(self.units) && self.cusum_nogo.is_sound(self.units),
            "a CUSUM map that is not canonical, or alarm records out of order",
        )
    }

    /// The statistics the device's record would hold after this part's units from the start
    /// of a log (the part entered with both sums 0), with `saturated` as given.
    ///
    /// # Errors
    /// [`RunPartError::TooManyUnits`] above `u32::MAX` units (the limits in the module docs).
    pub fn stats_with(&self, saturated: bool) -> Result<FieldStats, RunPartError> {
        let too_many = RunPartError::TooManyUnits { units: self.units };
        let n = |v: u64| u32::try_from(v).map_err(|_| too_many.clone());
        let s = &self.settings;
        let mut st = FieldStats::new(s.plan(), s.channels.into(), s.signals.into());
        st.units = n(self.units)?;
        st.go = n(self.go)?;
        st.nogo = n(self.nogo)?;
        st.recheck = n(self.recheck)?;
        st.faults = n(self.faults)?;
        st.saturated = saturated;
        st.other_faults = n(self.other_faults)?;
        st.below = n(self.below)?;
        st.above = n(self.above)?;
        for (d, &b) in st.bins.iter_mut().zip(&self.bins) {
            *d = n(b)?;
        }
        for (d, &f) in st.channel_faults.iter_mut().zip(&self.channel_faults) {
            *d = n(f)?;
        }
        for (d, &f) in st.signal_faults.iter_mut().zip(&self.signal_faults) {
            *d = n(f)?;
        }
        for (i, c) in self.channel.iter().enumerate() {
            if let (Some(lo), Some(hi), Some(sum)) =
                (st.min.get_mut(i), st.max.get_mut(i), st.sum.get_mut(i))
            {
                (*lo, *hi) = (c.min, c.max);
                // At most u32::MAX values of magnitude ≤ 2³¹: fits i64 (module docs).
                *sum = i64::try_from(c.moments.sum).map_err(|_| too_many.clone())?;
            }
        }
        st.cusum_go = self.cusum_go.state().ok_or(too_many.clone())?;
        st.cusum_nogo = self.cusum_nogo.state().ok_or(too_many)?;
        Ok(st)
    }

    /// The statistics after this part's units from the start of a log; a part never counts
    /// as saturated (see [`RunPartError::TooManyUnits`]).
    ///
    /// # Errors
    /// [`RunPartError::TooManyUnits`] above `u32::MAX` units.
    pub fn stats(&self) -> Result<FieldStats, RunPartError> {
        self.check()?;
        self.stats_with(false)
    }
}

#[cfg(test)]
mod tests;
