//! The spread the training units really have, for the soft margin's regulariser.
//!
//! The device scales each channel over its declared or proved range. A feature channel of
//! real windows may fill only a few per cent of that range, and a penalty ½‖w‖² measured in
//! device units then starves it: its weight must be large to matter, and large weights are
//! what the regulariser fights. The soft margin therefore trains on each channel's
//! standard score (x − mean) / standard deviation over the training units and hands back
//! the same separator over device units, so the device's ranges stay the declared ones.

use serde::{Deserialize, Serialize};

use crate::ingest::dataset::Dataset;
use crate::train::linear::Linear;

/// Per-channel mean and standard deviation over the training units, in device-scaled units.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Spread {
    /// Mean of each channel.
    pub mean: Vec<f64>,
    /// Population standard deviation of each channel; 1 where the units do not vary (such a
    /// channel is left as it is rather than divided by zero).
    pub std: Vec<f64>,
}

impl Spread {
    /// The spread of the units `idx` of `ds`, summed in a fixed order (the same units give
    /// the same figures bit for bit).
    pub fn of(ds: &Dataset, idx: &[usize]) -> Self {
        let d = ds.dim();
        let mut sum = vec![0.0f64; d];
        let mut x = vec![0.0; d];
        for &i in idx {
            ds.scaled_row(i, &mut x);
            sum.iter_mut().zip(&x).for_each(|(s, v)| *s += v);
        }
        let n = idx.len().max(1) as f64;
        let mean: Vec<f64> = sum.iter().map(|s| s / n).collect();
        // Two passes: the centred sum of squares does not cancel as Σx² − n·mean² can.
        let mut sq = vec![0.0f64; d];
        for &i in idx {
            ds.scaled_row(i, &mut x);
            for ((s, v), m) in sq.iter_mut().zip(&x).zip(&mean) {
                *s += (v - m) * (v - m);
            }
        }
        let std = sq
            .iter()
            .map(|s| {
                let v = (s / n).sqrt();
                if v > 0.0 && v.is_finite() { v } else { 1.0 }
            })
            .collect();
        Self { mean, std }
    }

    /// Turns a device-scaled row into standard scores, in place.
    #[inline]
    pub fn apply(&self, row: &mut [f64]) {
        for ((v, m), s) in row.iter_mut().zip(&self.mean).zip(&self.std) {
            *v = (*v - m) / s;
        }
    }

    /// The separator `z` over standard scores as the same separator over device-scaled
    /// inputs: w·((x − m)/s) + b = (w/s)·x + (b − Σ wₖmₖ/sₖ).
    pub fn to_device(&self, z: &Linear) -> Linear {
        let w: Vec<f64> = z.w.iter().zip(&self.std).map(|(w, s)| w / s).collect();
        let shift: f64 = w.iter().zip(&self.mean).map(|(w, m)| w * m).sum();
        Linear { w, b: z.b - shift }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_device_form_scores_every_row_as_the_standard_form_does() {
        let pts = vec![
            vec![0.1, 0.5],
            vec![0.2, 0.45],
            vec![0.3, 0.52],
            vec![0.05, 0.5],
        ];
        let ds = Dataset::from_scaled(&pts, &[1, 1, -1, -1]);
        let sp = Spread::of(&ds, &ds.all());
        let z = Linear {
            w: vec![1.5, -2.0],
            b: 0.25,
        };
        let dev = sp.to_device(&z);
        for p in &pts {
            let mut s = p.clone();
            sp.apply(&mut s);
            assert!((z.score(&s) - dev.score(p)).abs() < 1e-6);
        }
        // A constant channel keeps a standard deviation of 1, not 0.
        let flat = Dataset::from_scaled(&[vec![0.3], vec![0.3]], &[1, -1]);
        assert_eq!(Spread::of(&flat, &flat.all()).std, vec![1.0]);
    }
}
