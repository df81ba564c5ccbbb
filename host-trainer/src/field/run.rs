//! A field log's units, one at a time, into what the drift test needs: the field statistics
//! themselves (`shared_model::FieldStats`, the accumulator the device runs, so the desk and
//! the device step the CUSUMs alike), the decided units' exact scores, each channel's mean
//! and spread, and each decided unit's CUSUM state for the chart.
//!
//! A unit is fed either from a log replayed through the blob's kernel ([`FieldRun::unit`],
//! with the values the weights multiply) or from the device's own score line
//! ([`FieldRun::decided`] without values).

use serde::Serialize;
use shared_model::{
    CheckedModel, Decision, Fault, FieldFault, FieldPlan, FieldStats, Inputs, MAX_CHANNELS,
    Outcomes, SignalFault, Thresholds, Verdict,
};

use crate::release::audit_baseline::Moments;

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
    /// The field statistics, kept under the baseline's plan.
    pub stats: FieldStats,
    /// The thresholds margins are measured from.
    pub thresholds: Thresholds,
    /// Every scored unit's score (GO, NO-GO and RECHECK), in unit order.
    pub all_scores: Vec<i64>,
    /// Per channel: the running moments of each decided unit's value.
    channel: Vec<Moments>,
    /// Whether the units came with their channel values (a log; not device lines).
    pub has_values: bool,
    /// Every decided GO or NO-GO unit's CUSUM state, in order.
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
            stats: FieldStats::new(plan, channels, signals),
            thresholds,
            all_scores: Vec::new(),
            channel: vec![Moments::default(); channels],
            has_values,
            chart: Vec::new(),
        }
    }

    /// One unit of a log: its readings and windows through `model`'s kernel (the values the
    /// weights multiply, then the decision), counted as the device counts it.
    pub fn unit<I: Inputs, K: Outcomes>(
        &mut self,
        model: &CheckedModel<I, K>,
        readings: &[i32],
        windows: &[&[i32]],
    ) {
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
            Ok((d, n)) => self.decided(&d, Some(values.get(..n).unwrap_or(&[]))),
            Err(e) => self.faulted(field_fault(&e)),
        }
    }

    /// One decided unit (`values`: the values the weights multiplied, when known).
    pub fn decided(&mut self, d: &Decision, values: Option<&[i32]>) {
        if self.stats.saturated {
            return;
        }
        self.stats
            .decided(&self.thresholds, d, values.unwrap_or(&[]));
        if self.stats.saturated {
            return;
        }
        self.all_scores.push(d.score);
        if let Some(v) = values {
            for (m, &x) in self.channel.iter_mut().zip(v) {
                m.push(x);
            }
        }
        let t = &self.thresholds;
        let (go, margin, state) = match d.verdict {
            Verdict::Go => (true, d.score.saturating_sub(t.go_min), self.stats.cusum_go),
            Verdict::NoGo => (
                false,
                t.nogo_max.saturating_sub(d.score),
                self.stats.cusum_nogo,
            ),
            Verdict::Recheck => return,
        };
        self.chart.push(ChartPoint {
            unit: self.stats.units,
            go,
            margin,
            up: state.up,
            down: state.down,
        });
    }

    /// One unit that faulted.
    pub fn faulted(&mut self, fault: FieldFault) {
        self.stats.faulted(fault);
    }

    /// Every scored unit's score (GO, NO-GO and RECHECK: the units the record's histogram
    /// counts), sorted.
    pub fn sorted_all_scores(&self) -> Vec<i64> {
        let mut s = self.all_scores.clone();
        s.sort_unstable();
        s
    }

    /// Channel `c`'s count, mean and sample standard deviation (raw units), when the units
    /// came with values.
    pub fn channel(&self, c: usize) -> Option<(u64, f64, f64)> {
        let m = self.channel.get(c)?;
        if !self.has_values {
            return None;
        }
        Some((m.n, m.mean(), m.sd()))
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
        assert_eq!(r.stats.cusum_go.down, 65);
        assert_eq!(r.stats.units, 7);
        assert_eq!(r.channel(0).unwrap().0, 6);
        assert_eq!(r.sorted_all_scores(), vec![-30, 0, 30, 35, 40, 50]);
    }
}
