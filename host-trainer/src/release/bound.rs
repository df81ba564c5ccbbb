//! The rounding-error bound: how far the device's integer score can lie from A times the
//! float score, and the histogram bins the audit counts units in against that bound.
//!
//! Error bound, in accumulator LSB, for any in-range reading (Wᵢ the integer weights, Wᵢ*
//! the ideal real ones, Xᵢ = κᵢ·(raw − offsetᵢ) the exact scaled input, |Xᵢ| ≤ Xmaxᵢ):
//!
//! ```text
//! |acc − A·score_float| ≤ ½·Σ|Wᵢ|  +  Σ|Wᵢ − Wᵢ*|·Xmaxᵢ  +  |B − b·A|
//!                          inputs      weights              bias
//! ```
//!
//! It follows from acc − A·score = Σ Wᵢ·δxᵢ + Σ (Wᵢ − Wᵢ*)·Xᵢ + (B − bA) with
//! |δxᵢ| ≤ ½ (the kernel rounds to nearest). It is never looser than the
//! textbook Σ|Wᵢ*|·εx + Σ|Xᵢ|·εw + n·εx·εw (+ εb), which is reported beside it.
//! A unit whose fixed margin exceeds the bound cannot have had its decision
//! changed by rounding; the model is "guaranteed" when that holds for every
//! correctly classified unit.

use serde::Serialize;

use shared_model::FixedModel;

use crate::release::quantise::Quantised;

/// The rounding-error bound, in accumulator LSB.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize)]
pub struct ErrorBound {
    /// ½·Σ|Wᵢ|: input rounding.
    pub inputs: f64,
    /// Σ|Wᵢ − Wᵢ*|·Xmaxᵢ: weight rounding.
    pub weights: f64,
    /// |B − b·A|: bias rounding.
    pub bias: f64,
    /// The sum: the bound used for the guarantee.
    pub total: f64,
    /// The textbook form Σ|Wᵢ*|·εx + Σ Xmaxᵢ·εw + n·εx·εw + εb, for comparison.
    pub textbook: f64,
}

/// Computes the bound for a quantised model.
pub fn error_bound(q: &Quantised) -> ErrorBound {
    let m = q.model.model();
    let xmax = input_maxima(m, &q.kappa);
    let weights: Vec<f64> = m.channels.iter().map(|c| f64::from(c.weight)).collect();
    bound_of(
        &weights,
        &q.ideal_weights,
        &xmax,
        m.bias as f64,
        q.ideal_bias,
    )
}

/// Each channel's largest scaled input |Xᵢ| (Xmaxᵢ) over its valid raw range, before the
/// conversion's rounding: κᵢ·max|raw − offsetᵢ|.
pub(crate) fn input_maxima(m: &FixedModel, kappa: &[f64]) -> Vec<f64> {
    m.channels
        .iter()
        .zip(kappa)
        .map(|(c, k)| {
            k * (f64::from(c.raw_max) - f64::from(c.offset))
                .abs()
                .max((f64::from(c.offset) - f64::from(c.raw_min)).abs())
        })
        .collect()
}

/// The bound from its inputs: the integer weights and bias (as f64, exact below 2⁵³), their
/// ideal real values, and each channel's largest scaled input |Xᵢ| (Xmaxᵢ). Any linear map
/// the kernel computes on the rounded inputs is covered, the difference of two class rows
/// included (its integer and ideal weights are the rows' differences; the derivation above
/// uses nothing else).
pub(crate) fn bound_of(
    weights: &[f64],
    ideal_weights: &[f64],
    xmax: &[f64],
    bias: f64,
    ideal_bias: f64,
) -> ErrorBound {
    let inputs = 0.5 * weights.iter().map(|w| w.abs()).sum::<f64>();
    let dw: Vec<f64> = weights
        .iter()
        .zip(ideal_weights)
        .map(|(w, i)| (w - i).abs())
        .collect();
    let weight_part = dw.iter().zip(xmax).map(|(d, x)| d * x).sum::<f64>();
    let bias = (bias - ideal_bias).abs();
    let eps_w = dw.iter().copied().fold(0.0, f64::max);
    let n = weights.len() as f64;
    let textbook = 0.5 * ideal_weights.iter().map(|w| w.abs()).sum::<f64>()
        + eps_w * xmax.iter().sum::<f64>()
        + n * 0.5 * eps_w
        + bias;
    ErrorBound {
        inputs,
        weights: weight_part,
        bias,
        total: inputs + weight_part + bias,
        textbook,
    }
}

/// Bins of the rounding-error histogram: below −B, 20 bins of B/10 from −B to B, above B.
pub const ROUNDING_BINS: usize = 22;

/// The edges of the rounding-error histogram's bins, in LSB, for a rounding bound `bound`
/// (1 LSB when the bound is 0): −B, −0.9·B, …, 0.9·B, B.
pub fn rounding_bin_edges(bound: f64) -> [f64; ROUNDING_BINS - 1] {
    let u = if bound > 0.0 { bound } else { 1.0 };
    let mut e = [0.0; ROUNDING_BINS - 1];
    for (k, v) in e.iter_mut().enumerate() {
        *v = u * (k as f64 - 10.0) / 10.0;
    }
    e
}

/// Bins of the margin histogram: at most 0 LSB, then (0, u], (u, 2u], (2u, 4u], … doubling
/// up to 2¹⁵·u, then beyond; u is the rounding bound (1 LSB when the bound is 0).
pub const MARGIN_BINS: usize = 18;

/// The edges of the margin histogram's bins, in LSB, for a rounding bound `bound`.
pub fn margin_bin_edges(bound: f64) -> [f64; MARGIN_BINS - 1] {
    let u = if bound > 0.0 { bound } else { 1.0 };
    let mut e = [0.0; MARGIN_BINS - 1];
    for (k, v) in e.iter_mut().enumerate().skip(1) {
        *v = u * f64::from(1u32 << (k - 1));
    }
    e
}

/// How many of the ascending `edges` satisfy `below` (a predicate true up to some edge and
/// false after): a unit's bin. The same number as `partition_point`, counted over all 17–21
/// edges, which the compiler does without branches; a binary search's unpredictable branches
/// cost more than that on every unit of the audit pass.
#[inline]
pub(super) fn edges_below<const N: usize>(edges: &[f64; N], below: impl Fn(f64) -> bool) -> usize {
    edges.iter().map(|&e| usize::from(below(e))).sum()
}

/// The rounding-error bin of a unit whose score moved by `err` LSB: closed on the side away
/// from zero, so a unit exactly at ±bound counts inside.
#[inline]
pub(super) fn rounding_bin(edges: &[f64; ROUNDING_BINS - 1], err: f64) -> usize {
    if err > 0.0 {
        edges_below(edges, |e| e < err)
    } else {
        edges_below(edges, |e| e <= err)
    }
}

/// The margin bin of a unit `distance` LSB from the float threshold: closed on the right, as
/// `within_bound` counts a unit at the bound.
#[inline]
pub(super) fn margin_bin(edges: &[f64; MARGIN_BINS - 1], distance: f64) -> usize {
    edges_below(edges, |e| e < distance)
}

/// Counts one unit in bin `bin` of `histogram`, which starts counting (`bins` zeros) at
/// its first unit.
pub(super) fn count_in(histogram: &mut Vec<u64>, bins: usize, bin: usize) {
    if histogram.is_empty() {
        *histogram = vec![0; bins];
    }
    if let Some(c) = histogram.get_mut(bin) {
        *c += 1;
    }
}

/// Adds one chunk's bin counts to another's (either may not have started counting).
pub(super) fn add_counts(into: &mut Vec<u64>, from: Vec<u64>) {
    if into.is_empty() {
        *into = from;
    } else {
        for (x, y) in into.iter_mut().zip(&from) {
            *x += y;
        }
    }
}
#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand: W = (3, −2), W* = (2.75, −2.25), Xmax = (4, 10), B = 5, B* = 5.5.
    /// inputs ½·(3 + 2) = 2.5; weights 0.25·4 + 0.25·10 = 3.5; bias 0.5; total 6.5.
    /// Textbook: ½·(2.75 + 2.25) + εw·ΣXmax + n·½·εw + εb = 2.5 + 0.25·14 + 2·0.5·0.25 + 0.5
    /// = 6.75 (every figure a dyadic fraction, so exact in f64).
    #[test]
    fn the_bound_of_a_two_channel_model_worked_by_hand() {
        let b = bound_of(&[3.0, -2.0], &[2.75, -2.25], &[4.0, 10.0], 5.0, 5.5);
        assert_eq!(
            b,
            ErrorBound {
                inputs: 2.5,
                weights: 3.5,
                bias: 0.5,
                total: 6.5,
                textbook: 6.75,
            }
        );
    }

    /// Exact weights leave only the inputs' half LSB each: ½·(7 + 1) = 4, and the textbook
    /// form agrees (εw = 0).
    #[test]
    fn exact_weights_leave_only_the_input_rounding() {
        let b = bound_of(&[7.0, -1.0], &[7.0, -1.0], &[100.0, 100.0], -3.0, -3.0);
        assert_eq!((b.inputs, b.weights, b.bias, b.total), (4.0, 0.0, 0.0, 4.0));
        assert_eq!(b.textbook, 4.0);
    }

    /// Edges by hand for B = 2: −2, −1.8, …, 1.8, 2 (k·0.2 − 2); for B = 0, those of 1 LSB.
    #[test]
    fn rounding_edges_step_a_tenth_of_the_bound() {
        let e = rounding_bin_edges(2.0);
        assert_eq!((e[0], e[10], e[20]), (-2.0, 0.0, 2.0));
        assert!((e[1] + 1.8).abs() < 1e-12 && (e[19] - 1.8).abs() < 1e-12);
        assert_eq!(rounding_bin_edges(0.0)[20], 1.0);
    }

    /// Edges by hand for u = 1.5: 0, 1.5, 3, 6, …, 1.5·2¹⁵ = 49,152.
    #[test]
    fn margin_edges_double_from_the_bound() {
        let e = margin_bin_edges(1.5);
        assert_eq!((e[0], e[1], e[2], e[3]), (0.0, 1.5, 3.0, 6.0));
        assert_eq!(e[16], 49_152.0);
    }

    /// With B = 1 (edges −1, −0.9, …, 1): bin 0 holds errors below −1, bin 21 above +1, and
    /// ±1 themselves fall inside; a bin's index is the number of edges on its error's side
    /// (counted by hand: −0.05 passes 10 edges, 0 and 0.05 pass 11).
    #[test]
    fn rounding_bins_are_closed_away_from_zero() {
        let e = rounding_bin_edges(1.0);
        assert_eq!(rounding_bin(&e, -1.5), 0);
        assert_eq!(rounding_bin(&e, -1.0), 1);
        assert_eq!(rounding_bin(&e, -0.05), 10);
        assert_eq!(rounding_bin(&e, 0.0), 11);
        assert_eq!(rounding_bin(&e, 0.05), 11);
        assert_eq!(rounding_bin(&e, 1.0), 20);
        assert_eq!(rounding_bin(&e, 1.01), 21);
    }

    /// With u = 1: a margin ≤ 0 in bin 0, (0, 1] in bin 1 (1 itself: at the bound), (1, 2] in
    /// bin 2, beyond 2¹⁵ in the last bin.
    #[test]
    fn margin_bins_are_closed_on_the_right() {
        let e = margin_bin_edges(1.0);
        assert_eq!(margin_bin(&e, -3.0), 0);
        assert_eq!(margin_bin(&e, 0.0), 0);
        assert_eq!(margin_bin(&e, 1.0), 1);
        assert_eq!(margin_bin(&e, 1.5), 2);
        assert_eq!(margin_bin(&e, 40_000.0), MARGIN_BINS - 1);
    }

    #[test]
    fn counts_add_into_an_empty_or_started_histogram() {
        let mut a = Vec::new();
        add_counts(&mut a, vec![1, 2]);
        add_counts(&mut a, vec![3, 4]);
        assert_eq!(a, vec![4, 6]);
    }
}
