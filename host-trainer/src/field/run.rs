//! A field log's units, one at a time, into what the drift test needs: the field statistics
//! the device keeps (`shared_model::FieldStats`: the same counts, bins and saturating CUSUM
//! steps, so the desk and the device agree), the decided units' exact scores, each channel's
//! mean and spread, and each decided unit's CUSUM state for the chart.
//!
//! The counting is a [`RunPart`] (one arithmetic for a single pass and for parts of a log
//! counted apart and merged); a run adds the per-unit chart and the record's stop at
//! `u32::MAX` units. A unit is fed either from a log replayed through the blob's kernel
//! ([`record::run_log`](crate::field::record::run_log), with the values the weights multiply) or from the device's own score
//! line ([`FieldRun::decided`] without values).

use serde::Serialize;
use shared_model::{Decision, FieldFault, FieldPlan, FieldStats, Thresholds, Verdict};

pub use crate::field::run_part::field_fault;
use crate::field::run_part::{RunPart, RunPartError};

/// One decided GO or NO-GO unit's CUSUM state, after the unit.
#[derive(Clone, Copy, Debug, Serialize, PartialEq, Eq)]
pub struct ChartPoint {
    /// 1-based unit number among all units (as the record's alarm units).
    pub unit: u32,
    /// Whether the unit was GO (else NO-GO).
    pub go: bool,
    /// The unit's margin (`score − go_min` or `nogo_max − score`).
    pub margin: i64,
    /// The side's upper sum after the unit.
    pub up: i64,
    /// The side's lower sum after the unit.
    pub down: i64,
}

/// The field units seen so far.
#[derive(Clone, Debug)]
pub struct FieldRun {
    /// The counting (at most `u32::MAX` units: the record's limit).
    part: RunPart,
    /// A unit arrived after `u32::MAX`: it and every later one went uncounted (the record's
    /// `saturated`).
    saturated: bool,
    /// Whether the chart was kept unit by unit (false for a run made from a merged part).
    charted: bool,
    /// Every decided GO or NO-GO unit's CUSUM state, in order (empty when not `charted`).
    pub chart: Vec<ChartPoint>,
}

impl FieldRun {
    /// Nothing seen yet, for a model of `channels` channels and `signals` signals.
    pub fn new(
        plan: FieldPlan,
        thresholds: Thresholds,
        channels: usize,
        signals: usize,
        has_values: bool,
    ) -> Self {
        Self {
            part: RunPart::new(plan, thresholds, channels, signals, has_values),
            saturated: false,
            charted: true,
            chart: Vec::new(),
        }
    }

    /// The run `drift` takes from a part that covers a whole log (usually merged from the
    /// log's parts, `RunPart::merge`), with no chart: a part keeps no per-unit path, and the
    /// drift report says so.
    ///
    /// # Errors
    /// [`RunPartError::TooManyUnits`] above `u32::MAX` units (the record's limit; a single
    /// pass would have stopped counting there); [`RunPartError::Unsound`].
    pub fn from_part(part: RunPart) -> Result<Self, RunPartError> {
        part.stats()?;
        Ok(Self {
            part,
            saturated: false,
            charted: false,
            chart: Vec::new(),
        })
    }

    /// Room for one more unit under the record's `u32::MAX`; else the run is saturated.
    fn room(&mut self) -> bool {
        if self.saturated || self.part.units >= u64::from(u32::MAX) {
            self.saturated = true;
            return false;
        }
        true
    }

    /// One decided unit (`values`: the values the weights multiplied, when known).
    pub fn decided(&mut self, d: &Decision, values: Option<&[i32]>) {
        if !self.room() {
            return;
        }
        self.part.decided(d, values);
        let t = self.thresholds();
        let (go, margin, side) = match d.verdict {
            Verdict::Go => (true, d.score.saturating_sub(t.go_min), &self.part.cusum_go),
            Verdict::NoGo => (
                false,
                t.nogo_max.saturating_sub(d.score),
                &self.part.cusum_nogo,
            ),
            Verdict::Recheck => return,
        };
        // The run starts from 0: each sum is its map's image of 0.
        self.chart.push(ChartPoint {
            unit: u32::try_from(self.part.units).unwrap_or(u32::MAX),
            go,
            margin,
            up: side.up.map.lo,
            down: side.down.map.lo,
        });
    }

    /// One unit that faulted.
    pub fn faulted(&mut self, fault: FieldFault) {
        if self.room() {
            self.part.faulted(fault);
        }
    }

    /// The field statistics the device's record holds after these units.
    pub fn stats(&self) -> FieldStats {
        // The run never counts past u32::MAX units (`room`), so the part always converts;
        // the empty statistics are never returned.
        self.part.stats_with(self.saturated).unwrap_or_else(|_| {
            let s = &self.part.settings;
            FieldStats::new(s.plan(), s.channels.into(), s.signals.into())
        })
    }

    /// The thresholds margins are measured from.
    pub fn thresholds(&self) -> Thresholds {
        self.part.settings.thresholds()
    }

    /// Whether the units came with their channel values (a log; not device lines).
    pub fn has_values(&self) -> bool {
        self.part.settings.has_values
    }

    /// Whether the chart was kept unit by unit (false for a run made from merged parts).
    pub fn charted(&self) -> bool {
        self.charted
    }

    /// The counting so far, as a part (the run's units from the start of its log).
    pub fn part(&self) -> &RunPart {
        &self.part
    }

    /// Every scored unit's score (GO, NO-GO and RECHECK), in unit order.
    pub fn all_scores(&self) -> &[i64] {
        &self.part.scores
    }

    /// Every scored unit's score (GO, NO-GO and RECHECK: the units the record's histogram
    /// counts), sorted.
    pub fn sorted_all_scores(&self) -> Vec<i64> {
        let mut s = self.part.scores.clone();
        s.sort_unstable();
        s
    }

    /// Channel `c`'s count, mean and sample standard deviation (raw units), when the units
    /// came with values.
    pub fn channel(&self, c: usize) -> Option<(u64, f64, f64)> {
        let m = &self.part.channel.get(c)?.moments;
        if !self.has_values() {
            return None;
        }
        Some((m.n, m.mean(), m.sd()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use shared_model::field::CusumPlan;

    /// The chart's states are the record's: after the last GO unit its state is the
    /// record's GO CUSUM.
    #[test]
    fn the_chart_follows_the_record() {
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        let plan = FieldPlan {
            go: CusumPlan {
                target: 50,
                slack: 5,
                limit: 40,
            },
            ..Default::default()
        };
        let mut r = FieldRun::new(plan, t, 1, 0, true);
        for s in [50, 40, -30, 35, 30, 0] {
            r.decided(&t.decide(s), Some(&[s as i32]));
        }
        r.faulted(FieldFault::Channel(0));
        let last_go = r.chart.iter().rev().find(|p| p.go).unwrap();
        assert_eq!((last_go.unit, last_go.down), (5, 65));
        assert_eq!(r.stats().cusum_go.down, 65);
        assert_eq!(r.stats().units, 7);
        assert_eq!(r.channel(0).unwrap().0, 6);
        assert_eq!(r.sorted_all_scores(), vec![-30, 0, 30, 35, 40, 50]);
    }
}
