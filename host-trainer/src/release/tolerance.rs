//! The noise tolerance: how far declared sensor noise can move a score (the noise radius),
//! how far each channel may drift alone before a decision can change, and the RECHECK band
//! that would catch every unit the noise puts at risk.
//!
//! A reading moved by Δraw moves the kernel's scaled input by at most κ·|Δraw| + 1 (the two
//! roundings to nearest differ by less than 1 LSB), so a channel with weight W and declared
//! noise n (physical units, lsb per raw count) moves the score by at most
//! |W|·(κ·n/lsb + 1) LSB; the radius is the sum over the channels with declared noise.

use crate::ingest::names::same_name;
use crate::release::audit_report::{ChannelTolerance, SetSummary, Tolerance, UnitRow};
use crate::release::quantise::Quantised;
use crate::train::float_model::FloatModel;

/// A `--noise CHANNEL=VALUE` entry that cannot be used.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum NoiseSpecError {
    /// No `=` in the entry.
    #[error("--noise '{0}': expected CHANNEL=VALUE")]
    Form(String),
    /// The name is no channel of the model.
    #[error("--noise: no channel '{0}' in the model")]
    Channel(String),
    /// The value is not a finite number ≥ 0.
    #[error("--noise '{0}': value must be a non-negative number")]
    Value(String),
}

/// Each channel's declared noise: the model's (from its sheet), with `--noise` entries
/// (`CHANNEL=VALUE`, physical units) put over them; channel names compare as everywhere,
/// without regard to case.
///
/// # Errors
/// The first entry that cannot be used ([`NoiseSpecError`]).
pub fn declared_noise(
    fm: &FloatModel,
    specs: &[String],
) -> Result<Vec<Option<f64>>, NoiseSpecError> {
    let mut noise: Vec<Option<f64>> = fm.channels.iter().map(|c| c.noise).collect();
    for spec in specs {
        let (name, value) = spec
            .split_once('=')
            .ok_or_else(|| NoiseSpecError::Form(spec.clone()))?;
        let i = fm
            .channels
            .iter()
            .position(|c| same_name(&c.name, name))
            .ok_or_else(|| NoiseSpecError::Channel(name.into()))?;
        let v: f64 = value
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite() && *v >= 0.0)
            .ok_or_else(|| NoiseSpecError::Value(spec.clone()))?;
        if let Some(n) = noise.get_mut(i) {
            *n = Some(v);
        }
    }
    Ok(noise)
}

/// The most the declared noise can move a score, in LSB; `None` if no noise is declared.
pub(crate) fn noise_radius(q: &Quantised, fm: &FloatModel, noise: &[Option<f64>]) -> Option<f64> {
    if noise.iter().all(Option::is_none) {
        return None;
    }
    Some(
        q.model
            .model()
            .channels
            .iter()
            .zip(&q.kappa)
            .zip(fm.channels.iter().zip(noise))
            .map(|((c, k), (s, n))| channel_radius(c.weight, *k, s.lsb, *n))
            .sum(),
    )
}

/// How far one channel's declared noise `noise` (physical units; `None`: none declared) can
/// move the score, in LSB: |W|·(κ·noise/lsb + 1).
fn channel_radius(weight: i32, kappa: f64, lsb: f64, noise: Option<f64>) -> f64 {
    f64::from(weight).abs() * noise.map_or(0.0, |n| kappa * n / lsb + 1.0)
}

/// The largest drift (physical units) one channel may take alone before a unit whose fixed
/// margin is `min_margin` LSB could flip: the margin less the 1 LSB a rounding may add,
/// over |W|·κ/lsb; unbounded for a channel of weight 0.
fn max_drift(min_margin: f64, weight: i32, kappa: f64, lsb: f64) -> f64 {
    if weight == 0 {
        f64::INFINITY
    } else {
        ((min_margin / f64::from(weight).abs() - 1.0).max(0.0) / kappa) * lsb
    }
}

/// The tolerance figures of an audit whose noise radius is `radius`: each channel's drift
/// allowed from the smallest margin over all `sets`, the units at risk (listed, and counted
/// in all) and the band that catches them.
pub(super) fn tolerance(
    q: &Quantised,
    fm: &FloatModel,
    noise: &[Option<f64>],
    sets: &[SetSummary],
    radius: f64,
    (units_at_risk, units_at_risk_count): (Vec<UnitRow>, usize),
) -> Tolerance {
    let min_margin = sets
        .iter()
        .filter_map(|s| s.min_margin_lsb)
        .fold(f64::INFINITY, f64::min);
    let channels = q
        .model
        .model()
        .channels
        .iter()
        .zip(&q.kappa)
        .zip(fm.channels.iter().zip(noise))
        .map(|((c, k), (s, n))| ChannelTolerance {
            channel: s.name.clone(),
            noise: n.unwrap_or(0.0),
            max_drift: max_drift(min_margin, c.weight, *k, s.lsb),
            unit: s.unit.clone(),
        })
        .collect();
    Tolerance {
        channels,
        noise_radius_lsb: radius,
        units_at_risk,
        units_at_risk_count,
        suggested_band: radius / q.scale,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: W = −40, κ = 0.5, noise 0.75 at 0.25 per count (3 counts):
    /// 40·(0.5·3 + 1) = 100 LSB; no declared noise moves nothing.
    #[test]
    fn one_channels_radius_worked_by_hand() {
        assert_eq!(channel_radius(-40, 0.5, 0.25, Some(0.75)), 100.0);
        assert_eq!(channel_radius(-40, 0.5, 0.25, None), 0.0);
        assert_eq!(channel_radius(0, 0.5, 0.25, Some(0.75)), 0.0);
    }

    /// Worked by hand: margin 90 LSB, W = 20, κ = 0.5, lsb 0.25: (90/20 − 1)/0.5·0.25 =
    /// 3.5/0.5·0.25 = 1.75 physical units; a margin under one weight allows no drift.
    #[test]
    fn drift_allowed_worked_by_hand() {
        assert_eq!(max_drift(90.0, 20, 0.5, 0.25), 1.75);
        assert_eq!(max_drift(90.0, -20, 0.5, 0.25), 1.75);
        assert_eq!(max_drift(10.0, 20, 0.5, 0.25), 0.0);
        assert_eq!(max_drift(10.0, 0, 0.5, 0.25), f64::INFINITY);
    }

    /// The drift allowed moves the score, by this module's rule, by exactly the margin less
    /// the rounding's 1 LSB per weight: |W|·(κ·drift/lsb + 1) = margin.
    #[test]
    fn the_drift_allowed_spends_the_whole_margin() {
        let (margin, w, k, lsb) = (90.0, 20, 0.5, 0.25);
        assert_eq!(
            channel_radius(w, k, lsb, Some(max_drift(margin, w, k, lsb))),
            margin
        );
    }
}
