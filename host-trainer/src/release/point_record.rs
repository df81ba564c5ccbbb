//! The model's operating point as the release record keeps it: every figure a number, each
//! held-out rate with its exact Clopper–Pearson bounds (`Rate::new(count, of, 0.95)`), the
//! threshold and band also in LSB of the accumulator.

use serde::Serialize;

use crate::confidence::{DEFAULT_CONFIDENCE, Rate};
use crate::train::operating_point::{OperatingPoint, PointCounts, Target};

/// What one point decides on the held-out units, RECHECK split by class and summed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub struct HeldOutCounts {
    /// NO-GO units decided GO.
    pub false_go: usize,
    /// GO units decided NO-GO, a FAULT on a GO unit included (as the model counts them).
    pub false_nogo: usize,
    /// GO units sent to RECHECK.
    pub recheck_go: usize,
    /// NO-GO units sent to RECHECK.
    pub recheck_nogo: usize,
    /// Units sent to RECHECK (`recheck_go + recheck_nogo`).
    pub recheck: usize,
}

impl From<&PointCounts> for HeldOutCounts {
    fn from(c: &PointCounts) -> Self {
        Self {
            false_go: c.false_go,
            false_nogo: c.false_nogo,
            recheck_go: c.recheck_go,
            recheck_nogo: c.recheck_nogo,
            recheck: c.recheck(),
        }
    }
}

/// A point's held-out rates, each among the units it can happen to, at 95 % confidence.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct HeldOutRates {
    /// False GO among the held-out NO-GO units.
    pub false_go: Rate,
    /// False NO-GO (FAULTs on GO units included) among the held-out GO units.
    pub false_nogo: Rate,
    /// RECHECK among all held-out units.
    pub recheck: Rate,
}

impl HeldOutRates {
    /// The rates of `c` among the held-out units of `op`.
    pub fn new(c: &PointCounts, op: &OperatingPoint) -> Self {
        let rate = |k: usize, n: usize| Rate::new(k as u64, n as u64, DEFAULT_CONFIDENCE);
        Self {
            false_go: rate(c.false_go, op.nogo_units),
            false_nogo: rate(c.false_nogo, op.go_units),
            recheck: rate(c.recheck(), op.units),
        }
    }
}

/// One point of the trade-off: the best point with RECHECK at most `recheck_cap`.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TradeRecord {
    /// The RECHECK share allowed (0.05 is 5 %).
    pub recheck_cap: f64,
    /// Threshold, in model score units.
    pub threshold: f64,
    /// RECHECK half-band, in model score units.
    pub band: f64,
    /// The threshold times the report's scale A, in LSB of the accumulator.
    pub threshold_lsb: f64,
    /// The half-band times A, in LSB.
    pub band_lsb: f64,
    /// What it decides on the held-out units.
    pub counts: HeldOutCounts,
    /// Its rates with their exact bounds.
    pub rates: HeldOutRates,
    /// Its threshold and band are the model's (the chosen point).
    pub chosen: bool,
}

/// The model's operating point as `audit.json` records it.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct OperatingPointRecord {
    /// The rule the point meets, as the model file states it.
    pub target: Target,
    /// Where the held-out scores came from.
    pub source: String,
    /// GO above `threshold + band`, NO-GO below `threshold − band`; model score units.
    pub threshold: f64,
    /// RECHECK half-band, model score units.
    pub band: f64,
    /// The threshold times the report's scale A (A·t), in LSB of the accumulator.
    pub threshold_lsb: f64,
    /// The half-band times A, in LSB (as the report shows the RECHECK band).
    pub band_lsb: f64,
    /// Held-out units.
    pub units: usize,
    /// GO units among them.
    pub go_units: usize,
    /// NO-GO units among them.
    pub nogo_units: usize,
    /// Held-out units the device shows FAULT for.
    pub faults: usize,
    /// The chosen point's decisions on them.
    pub counts: HeldOutCounts,
    /// Its rates with their exact bounds.
    pub rates: HeldOutRates,
    /// The weight of a false GO the trade-off points are priced at (the rule's, or the
    /// default for a false-GO target).
    pub trade_off_false_go_weight: f64,
    /// The best point at each RECHECK cap, in the model's order.
    pub trade_off: Vec<TradeRecord>,
}

impl OperatingPointRecord {
    /// The record of `op`, with LSB figures at `scale` (the report's A).
    pub fn new(op: &OperatingPoint, scale: f64) -> Self {
        let trade_off = op
            .trade_off
            .iter()
            .map(|t| TradeRecord {
                recheck_cap: t.recheck_cap,
                threshold: t.threshold,
                band: t.band,
                threshold_lsb: t.threshold * scale,
                band_lsb: t.band * scale,
                counts: HeldOutCounts::from(&t.counts),
                rates: HeldOutRates::new(&t.counts, op),
                chosen: t.threshold == op.threshold && t.band == op.band,
            })
            .collect();
        Self {
            target: op.target,
            source: op.source.clone(),
            threshold: op.threshold,
            band: op.band,
            threshold_lsb: op.threshold * scale,
            band_lsb: op.band * scale,
            units: op.units,
            go_units: op.go_units,
            nogo_units: op.nogo_units,
            faults: op.faults,
            counts: HeldOutCounts::from(&op.counts),
            rates: HeldOutRates::new(&op.counts, op),
            trade_off_false_go_weight: op.target.trade_off_weight(),
            trade_off,
        }
    }
}
