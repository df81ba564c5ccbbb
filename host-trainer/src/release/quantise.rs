//! Quantiser: float model → fixed-point model.
//!
//! Per channel the blob's conversion gives `x_q = round(κᵢ·(raw − offsetᵢ))`
//! with κᵢ = multiplierᵢ / 2^shiftᵢ ≈ (2^(bits−1) − 1)/halfᵢ, while the float
//! model scores `wᵢ·(raw − offsetᵢ)/halfᵢ`. So the ideal integer weight is
//! `Wᵢ* = A·wᵢ/(halfᵢ·κᵢ)` for an accumulator scale A chosen so the largest
//! |Wᵢ*| is exactly the largest word value: the weights use the whole word. The
//! blob's Q-format reports ⌊log₂ A⌋ − (input_bits − 1) fractional bits. Weights
//! and bias are rounded to nearest, ties to even (the rule of the `fixed`
//! crate's `from_num`, see [`to_q`]); thresholds are exact: GO ⇔ acc > τ·A ⇔
//! acc ≥ ⌊τ·A⌋ + 1.
//!
//! Margin-preserving rounding then tries ±1 LSB moves of each weight and of
//! the bias (never more than 1 away from the plain rounding in all), keeping a move only if it raises the guarantee's slack: the
//! smallest fixed-point margin over the correctly classified training units
//! (computed by the shared kernel) minus the rounding-error bound of the audit.
//! Maximising the margin alone would favour moves that merely scale the weights
//! up, which widen the bound as fast as the margin.

use rayon::prelude::*;
use shared_model::features::SignalSection;
use shared_model::{AuditMark, CheckedModel, FixedModel, ModelError};

use crate::ingest::dataset::{Dataset, RawForm};
use crate::release::words::{WordError, channel_specs, conversions, word_scale};
use crate::train::float_model::FloatModel;

/// Quantiser settings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct QuantConfig {
    /// Scaled input word: 8 or 16 bits.
    pub input_bits: u8,
    /// Weight word: 2..=32 bits.
    pub weight_bits: u8,
    /// Search the integer neighbourhood for a larger minimum margin.
    pub optimise: bool,
    /// Force the accumulator width (32 or 64); `None` picks the narrowest that is proved safe.
    pub acc_bits: Option<u8>,
    /// Half-width of the RECHECK band, in float score units.
    pub recheck_band: f64,
}

impl Default for QuantConfig {
    fn default() -> Self {
        Self {
            input_bits: 16,
            weight_bits: 16,
            optimise: true,
            acc_bits: None,
            recheck_band: 0.0,
        }
    }
}

/// Why quantisation failed.
#[derive(Debug, thiserror::Error)]
pub enum QuantError {
    /// The word lengths are outside what the blob supports.
    #[error("unsupported format: {0} (inputs 8 or 16 bits, weights 2..=32 bits)")]
    Format(String),
    /// The model fails validation, e.g. the accumulator could overflow.
    #[error("the fixed-point model is refused: {0}")]
    Model(#[from] ModelError),
    /// A channel name is too long for the blob.
    #[error("channel name '{0}' is longer than {max} bytes", max = shared_model::NAME_CAPACITY)]
    Name(String),
    /// A step of the two-sided release was asked to take a model of several classes.
    #[error(
        "{0} takes a two-sided (GO / NO-GO) model; this model has several classes (audit it with `linegate audit`)"
    )]
    Classes(&'static str),
    /// A class name is too long for the blob.
    #[error("class name '{0}' is longer than {max} bytes; name the class shorter in the log's class list", max = shared_model::NAME_CAPACITY)]
    ClassName(String),
}

impl From<WordError> for QuantError {
    fn from(e: WordError) -> Self {
        match e {
            WordError::Format(f) => Self::Format(f),
            WordError::Name(n) => Self::Name(n),
        }
    }
}

/// A quantised model with what the audit needs to bound its rounding error.
#[derive(Clone, Debug)]
pub struct Quantised {
    /// The validated fixed-point model.
    pub model: CheckedModel,
    /// Accumulator units per float score unit (A).
    pub scale: f64,
    /// κᵢ = multiplierᵢ / 2^shiftᵢ.
    pub kappa: Vec<f64>,
    /// Ideal real weights Wᵢ*.
    pub ideal_weights: Vec<f64>,
    /// Ideal real bias b·A.
    pub ideal_bias: f64,
    /// Threshold τ·A, real.
    pub threshold_acc: f64,
    /// Integer weights from plain rounding, before the search.
    pub plain_weights: Vec<i32>,
    /// Integer bias from plain rounding.
    pub plain_bias: i64,
    /// Bits the worst-case score needs (sign included).
    pub needed_bits: u8,
    /// Smallest fixed margin (LSB) over correct training units: plain rounding.
    pub plain_min_margin: Option<f64>,
    /// The same after the search.
    pub optimised_min_margin: Option<f64>,
    /// Search moves kept.
    pub moves: usize,
    /// RECHECK half-band it was built with, in float score units.
    pub recheck_band: f64,
    /// The signals and channel sources the blob carries (empty for a model of readings),
    /// checked against the model by [`quantise`].
    pub signals: SignalSection,
}

/// Rounds `v · 2^frac` to the nearest integer, ties to even: the Q-format conversion used for weights.
pub fn to_q(v: f64, frac: i32) -> f64 {
    (v * 2f64.powi(frac)).round_ties_even()
}

/// The fixed margin of a unit, in LSB: positive when the fixed verdict matches its label.
///
/// GO units are measured from `go_min − ½`, NO-GO units from `nogo_max + ½`.
pub fn fixed_margin(m: &FixedModel, score: i64, label: i8) -> f64 {
    if label > 0 {
        score as f64 - (m.go_min as f64 - 0.5)
    } else {
        (m.nogo_max as f64 + 0.5) - score as f64
    }
}

/// Quantises `fm`; with `train` and `cfg.optimise`, searches for a larger minimum margin on it.
///
/// # Errors
/// [`QuantError`] if the format is unsupported or the model cannot be proved overflow-free.
pub fn quantise(
    fm: &FloatModel,
    train: Option<&Dataset>,
    cfg: QuantConfig,
) -> Result<Quantised, QuantError> {
    let (conv, kappa) = conversions(fm, cfg.input_bits, cfg.weight_bits)?;
    let ratio: Vec<f64> = fm
        .weights
        .iter()
        .zip(&fm.channels)
        .zip(&kappa)
        .map(|((w, c), k)| w / (c.half as f64 * k))
        .collect();
    let max_r = ratio.iter().fold(0.0f64, |m, r| m.max(r.abs()));
    let (scale, frac_bits, wmax) = word_scale(max_r, cfg.input_bits, cfg.weight_bits);
    let ideal_weights: Vec<f64> = ratio.iter().map(|r| r * scale).collect();
    let plain_weights: Vec<i32> = ideal_weights
        .iter()
        .map(|w| to_q(*w, 0).clamp(-wmax, wmax) as i32)
        .collect();
    let ideal_bias = fm.bias * scale;
    let plain_bias = to_q(ideal_bias, 0) as i64;
    let threshold_acc = fm.threshold * scale;
    let band = cfg.recheck_band.max(0.0) * scale;
    let channels = channel_specs(fm, &conv, &plain_weights)?;
    let mut model = FixedModel {
        model_id: fm.id_bytes(),
        audit: AuditMark::NotAudited,
        input_bits: cfg.input_bits,
        weight_bits: cfg.weight_bits,
        weight_frac_bits: frac_bits,
        acc_bits: 64,
        bias: plain_bias,
        nogo_max: (threshold_acc - band).floor() as i64,
        go_min: (threshold_acc + band).floor() as i64 + 1,
        channels,
    };
    let needed = |m: &FixedModel| (129 - m.score_bound().leading_zeros()) as u8;
    let fit_acc = |m: &mut FixedModel| {
        m.acc_bits = cfg
            .acc_bits
            .unwrap_or(if needed(m) <= 32 { 32 } else { 64 })
    };
    fit_acc(&mut model);
    let plain = CheckedModel::new(model.clone())?;
    let signals = fm.signal_section();
    if !signals.is_empty() {
        CheckedModel::with_inputs(model.clone(), signals.clone())?;
    }
    let mut q = Quantised {
        signals,
        needed_bits: needed(&model),
        model: plain,
        scale,
        kappa,
        ideal_weights,
        ideal_bias,
        threshold_acc,
        plain_weights,
        plain_bias,
        plain_min_margin: None,
        optimised_min_margin: None,
        moves: 0,
        recheck_band: cfg.recheck_band.max(0.0),
    };
    if let Some(ds) = train {
        let correct = Correct::new(fm, ds);
        if !cfg.optimise {
            q.plain_min_margin = min_margin(&q.model, ds, &correct);
            q.optimised_min_margin = q.plain_min_margin;
        } else {
            let xmax = input_extremes(&q);
            let bound = Bound {
                ideal_w: &q.ideal_weights,
                ideal_b: q.ideal_bias,
                xmax: &xmax,
            };
            // The search's pass over every unit yields the plain model's minimum margin too.
            let Searched {
                model: mut m,
                moves,
                plain,
                moved,
            } = search(&q.model, ds, &correct, wmax as i64, &bound);
            q.plain_min_margin = plain;
            q.optimised_min_margin = plain;
            fit_acc(&mut m);
            // No move: the model is the plain one, whose margin the search already has.
            if moves == 0 {
                return Ok(q);
            }
            if let Ok(better) = CheckedModel::new(m) {
                let opt = moved.or_else(|| min_margin(&better, ds, &correct));
                let slack = |mm: Option<f64>, m: &FixedModel| mm.map(|v| v - bound.of(m));
                if moves > 0
                    && slack(opt, better.model()) > slack(q.plain_min_margin, q.model.model())
                {
                    q.needed_bits = needed(better.model());
                    q.model = better;
                    q.optimised_min_margin = opt;
                    q.moves = moves;
                }
            }
        }
    }
    Ok(q)
}

/// Which units the float model classifies correctly, by the score the audit computes (over
/// raw readings, [`RawForm`]): the units whose fixed margins the quantiser maximises and the
/// audit reports. Asked per unit inside each pass over the log, so no list of them is kept.
pub struct Correct<'a> {
    ds: &'a Dataset,
    float: RawForm,
    threshold: f64,
}

impl<'a> Correct<'a> {
    /// For `fm` on the units of `ds`.
    pub fn new(fm: &FloatModel, ds: &'a Dataset) -> Self {
        Self {
            ds,
            float: RawForm::new(ds, &fm.weights, fm.bias),
            threshold: fm.threshold,
        }
    }

    /// Whether unit `i` is classified correctly.
    #[inline]
    pub fn holds(&self, i: usize) -> bool {
        (self.float.score(self.ds.raw_row(i)) > self.threshold) == (self.ds.labels[i] > 0)
    }
}

/// Smallest fixed margin over the units the float model gets right, by the shared kernel;
/// `None` if a reading is refused or no such unit has a decision.
pub fn min_margin(m: &CheckedModel, ds: &Dataset, correct: &Correct<'_>) -> Option<f64> {
    // A unit in the RECHECK band gets no decision, so it has no decision margin. Chunks in
    // parallel: the minimum does not depend on the order.
    (0..ds.len())
        .into_par_iter()
        .with_min_len(1 << 14)
        .filter(|&i| correct.holds(i))
        .map(|i| {
            m.classify(ds.raw_row(i)).ok().map(|d| {
                if d.verdict == shared_model::Verdict::Recheck {
                    f64::INFINITY
                } else {
                    fixed_margin(m.model(), d.score, ds.labels[i])
                }
            })
        })
        .try_reduce(|| f64::INFINITY, |a, b| Some(a.min(b)))
        .filter(|v| v.is_finite())
}

/// Xmaxᵢ, the largest |scaled input| of each channel over its valid range, before the
/// conversion's rounding: κᵢ·max|raw − offset|.
fn input_extremes(q: &Quantised) -> Vec<f64> {
    q.model
        .model()
        .channels
        .iter()
        .zip(&q.kappa)
        .map(|(c, k)| {
            k * f64::from(
                c.raw_max
                    .abs_diff(c.offset)
                    .max(c.offset.abs_diff(c.raw_min)),
            )
        })
        .collect()
}

/// The audit's rounding bound, as a function of the integer weights and bias.
struct Bound<'a> {
    ideal_w: &'a [f64],
    ideal_b: f64,
    xmax: &'a [f64],
}

impl Bound<'_> {
    /// ½·Σ|Wᵢ| + Σ|Wᵢ − Wᵢ*|·Xmaxᵢ + |B − B*| (see the audit module).
    fn of(&self, m: &FixedModel) -> f64 {
        m.channels
            .iter()
            .zip(self.ideal_w)
            .zip(self.xmax)
            .map(|((c, w), x)| {
                0.5 * f64::from(c.weight).abs() + (f64::from(c.weight) - w).abs() * x
            })
            .sum::<f64>()
            + (m.bias as f64 - self.ideal_b).abs()
    }
}

/// What [`search`] found.
struct Searched {
    /// The model after the moves.
    model: FixedModel,
    /// Moves made.
    moves: usize,
    /// [`min_margin`] of the model the search started from (from its pass over the units).
    plain: Option<f64>,
    /// [`min_margin`] of `model`, when the units the search kept settle it (see [`search`]);
    /// `None` asks for a pass over every unit.
    moved: Option<f64>,
}

/// Greedy ±1 LSB coordinate search on the units with the smallest margins, maximising
/// (smallest margin − rounding bound).
///
/// The moved model's minimum margin comes without a second pass over the units when the
/// kept units settle it. A unit's margin is affine in the weights: a move of the weights
/// by δ (bias by δ_b) changes it by y·(Σ δᵢ·xᵢ + δ_b), at most D = Σ|δᵢ|·(Xmaxᵢ + 1) + |δ_b|
/// in size (Xmaxᵢ bounds the scaled input, +1 for its rounding). Every unit left out had a
/// margin of at least T, the largest kept; so if the smallest kept margin after the moves is
/// at most T − D, no unit left out can be below it. That needs margins exact in f64 (score
/// bound and decision edges below 2^51) and no RECHECK band (whose units have no margin).
fn search(
    m: &CheckedModel,
    ds: &Dataset,
    correct: &Correct<'_>,
    wmax: i64,
    bound: &Bound<'_>,
) -> Searched {
    let d = ds.dim();
    // The search works on the units of smallest margin only. They are picked chunk by chunk
    // (a linear selection per chunk, bounded memory), not by scaling and sorting every unit:
    // the same units in the same order as a stable sort by margin would keep, since ties go
    // by index.
    const KEEP: usize = 4096;
    let order = |a: &(f64, usize), b: &(f64, usize)| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1));
    let smallest = |v: &mut Vec<(f64, usize)>| {
        if v.len() > KEEP {
            v.select_nth_unstable_by(KEEP, order);
            v.truncate(KEEP);
        }
    };
    // Each chunk: its tightest units, and its minimum margin as `min_margin` counts it (a
    // RECHECK unit has none; a unit the kernel refuses leaves the model without one).
    const CHUNK: usize = 1 << 16;
    let (mut picked, plain, scored) = (0..ds.len().div_ceil(CHUNK))
        .into_par_iter()
        .map(|c| {
            let mut least = Some(f64::INFINITY);
            let mut v: Vec<(f64, usize)> = (c * CHUNK..ds.len().min((c + 1) * CHUNK))
                .filter(|&i| correct.holds(i))
                .filter_map(|i| {
                    let Ok(dec) = m.classify(ds.raw_row(i)) else {
                        least = None;
                        return None;
                    };
                    let mg = fixed_margin(m.model(), dec.score, ds.labels[i]);
                    if dec.verdict != shared_model::Verdict::Recheck {
                        least = least.map(|l| l.min(mg));
                    }
                    Some((mg, i))
                })
                .collect();
            let scored = v.len();
            smallest(&mut v);
            (v, least, scored)
        })
        .reduce(
            || (Vec::new(), Some(f64::INFINITY), 0),
            |(mut a, la, na), (b, lb, nb)| {
                a.extend(b);
                smallest(&mut a);
                (a, la.and_then(|x| Some(x.min(lb?))), na + nb)
            },
        );
    let plain = plain.filter(|v| v.is_finite());
    picked.sort_by(order);
    let rows: Vec<KeptUnit> = picked
        .into_iter()
        .map(|(mg, i)| {
            let mut x = vec![0i32; d];
            // These units scaled above, so they scale again.
            let _ = m.scale(ds.raw_row(i), &mut x);
            (mg, ds.labels[i], x)
        })
        .collect();
    let mut model = m.model().clone();
    let mut margins: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let mut moves = 0;
    for _ in 0..256 {
        let current = margins.iter().copied().fold(f64::INFINITY, f64::min) - bound.of(&model);
        let mut best: Option<(f64, usize, i64)> = None;
        for coord in 0..=d {
            for delta in [1i64, -1] {
                if coord < d && (i64::from(model.channels[coord].weight) + delta).abs() > wmax {
                    continue;
                }
                // Each value stays within 1 of its plain rounding: what `matching` checks a
                // blob against without the training log.
                let moved = if coord < d {
                    i64::from(model.channels[coord].weight) + delta
                        - i64::from(m.model().channels[coord].weight)
                } else {
                    model.bias + delta - m.model().bias
                };
                if moved.abs() > 1 {
                    continue;
                }
                let mut trial = model.clone();
                if coord < d {
                    trial.channels[coord].weight += delta as i32;
                } else {
                    trial.bias += delta;
                }
                let step =
                    |x: &[i32]| delta as f64 * if coord < d { f64::from(x[coord]) } else { 1.0 };
                let slack = rows
                    .iter()
                    .zip(&margins)
                    .map(|((_, y, x), mg)| mg + f64::from(*y) * step(x))
                    .fold(f64::INFINITY, f64::min)
                    - bound.of(&trial);
                if slack > current && best.is_none_or(|b| slack > b.0) {
                    best = Some((slack, coord, delta));
                }
            }
        }
        let Some((_, coord, delta)) = best else { break };
        for ((_, y, x), mg) in rows.iter().zip(margins.iter_mut()) {
            *mg += f64::from(*y) * delta as f64 * if coord < d { f64::from(x[coord]) } else { 1.0 };
        }
        if coord < d {
            model.channels[coord].weight += delta as i32;
        } else {
            model.bias += delta;
        }
        moves += 1;
    }
    let moved = settled(m.model(), &model, bound, (&rows, &margins), scored, plain);
    Searched {
        model,
        moves,
        plain,
        moved,
    }
}

/// A unit [`search`] keeps: its plain margin, label and scaled inputs.
type KeptUnit = (f64, i8, Vec<i32>);

/// The moved model's minimum margin from the kept units alone, when they settle it (see
/// [`search`]): `kept` are the kept units (plain margin, label, scaled inputs; smallest
/// margin first) and their margins under `moved`; `scored` the units the pass scored.
fn settled(
    plain_model: &FixedModel,
    moved: &FixedModel,
    bound: &Bound<'_>,
    kept: (&[KeptUnit], &[f64]),
    scored: usize,
    plain: Option<f64>,
) -> Option<f64> {
    let (rows, margins) = kept;
    const EXACT: i128 = 1 << 51;
    let exact = |m: &FixedModel| {
        m.score_bound() < EXACT
            && i128::from(m.go_min).abs() < EXACT
            && i128::from(m.nogo_max).abs() < EXACT
    };
    // A refused reading (plain is None) or a RECHECK band: the full pass decides.
    plain?;
    if moved.go_min != moved.nogo_max + 1 || !exact(plain_model) || !exact(moved) {
        return None;
    }
    let least = margins.iter().copied().fold(f64::INFINITY, f64::min);
    if rows.len() == scored {
        return least.is_finite().then_some(least);
    }
    let largest_kept = rows.last()?.0;
    let reach = plain_model
        .channels
        .iter()
        .zip(&moved.channels)
        .zip(bound.xmax)
        .map(|((a, b), x)| f64::from(a.weight.abs_diff(b.weight)) * (x + 1.0))
        .sum::<f64>()
        + plain_model.bias.abs_diff(moved.bias) as f64;
    (least <= largest_kept - reach).then_some(least)
}

#[cfg(test)]
mod tests {
    use super::*;
    use fixed::types::extra::{U7, U15};
    use fixed::{FixedI8, FixedI16};

    /// The moved model's minimum margin over every unit the float model gets right,
    /// recomputed here unit by unit with the kernel (the definition, not the pass).
    fn brute_min_margin(m: &CheckedModel, fm: &FloatModel, ds: &Dataset) -> Option<f64> {
        let correct = Correct::new(fm, ds);
        let mut least = f64::INFINITY;
        for i in (0..ds.len()).filter(|&i| correct.holds(i)) {
            let d = m.classify(ds.raw_row(i)).ok()?;
            least = least.min(fixed_margin(m.model(), d.score, ds.labels[i]));
        }
        least.is_finite().then_some(least)
    }

    #[test]
    fn a_move_too_large_for_the_kept_units_asks_for_the_full_pass() {
        // Two kept units of margins 5.5 and 10.5 out of three scored; channel a's weight
        // moves by one, so a unit left out (margin ≥ 10.5) may lose up to Xmax + 1.
        let plain = FixedModel::example_two_channel();
        let mut moved = plain.clone();
        moved.channels[0].weight += 1;
        let rows = vec![(5.5, 1i8, vec![0, 0]), (10.5, -1, vec![0, 0])];
        let after = [4.5, 9.5];
        let settle = |xmax: f64, scored: usize, m: &FixedModel| {
            let xmax = [xmax, xmax];
            let bound = Bound {
                ideal_w: &[0.0, 0.0],
                ideal_b: 0.0,
                xmax: &xmax,
            };
            settled(&plain, m, &bound, (&rows, &after), scored, Some(5.5))
        };
        // Reach 1·(4 + 1) = 5: 4.5 ≤ 10.5 − 5, settled.
        assert_eq!(settle(4.0, 3, &moved), Some(4.5));
        // Reach 7: a unit left out could fall to 3.5, below 4.5.
        assert_eq!(settle(6.0, 3, &moved), None);
        // Every scored unit kept: nothing left out to fear.
        assert_eq!(settle(1e6, 2, &moved), Some(4.5));
        // A RECHECK band: its units have no margin, the full pass decides.
        let mut banded = moved.clone();
        banded.go_min += 2;
        assert_eq!(settle(4.0, 3, &banded), None);
        // A refused reading in the search's pass: no margin to report from the kept units.
        let bound = Bound {
            ideal_w: &[0.0, 0.0],
            ideal_b: 0.0,
            xmax: &[4.0, 4.0],
        };
        assert_eq!(
            settled(&plain, &moved, &bound, (&rows, &after), 3, None),
            None
        );
    }

    #[test]
    fn kept_units_settle_the_moved_margin_only_when_they_must() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let (mut used, mut moved_runs) = (0, 0);
        for trial in 0..12 {
            // More units than the search keeps (4,096), so the shortcut has something to prove.
            let n = 6_000 + 1_000 * trial;
            let w: Vec<f64> = (0..3).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let mut pts = Vec::new();
            let mut labels = Vec::new();
            while pts.len() < n {
                let p: Vec<f64> = (0..3).map(|_| rng.gen_range(-1.0..1.0)).collect();
                let s: f64 = p.iter().zip(&w).map(|(a, b)| a * b).sum();
                if s.abs() > 0.02 {
                    labels.push(if s > 0.0 { 1 } else { -1 });
                    pts.push(p);
                }
            }
            let ds = Dataset::from_scaled(&pts, &labels);
            let req = crate::workflow::TrainRequest {
                epochs: 3,
                seed: trial as u64,
                c: crate::train::c_choice::CPolicy::Fixed(10.0),
                max_false_go: None,
                folds: 0,
                cv_trainers: crate::workflow::CvTrainers::Auto,
                figures: crate::train::separability::Figures::VERDICT,
                target: None,
                ..crate::workflow::TrainRequest::new(crate::train::eval::TrainerKind::Averaged)
            };
            let fm = crate::workflow::train_model(&ds, None, &req).unwrap().model;
            for weight_bits in [5u8, 6, 8] {
                let cfg = QuantConfig {
                    weight_bits,
                    ..QuantConfig::default()
                };
                let q = quantise(&fm, Some(&ds), cfg).unwrap();
                // Whichever way it was found, the reported margin is the definition's.
                assert_eq!(
                    q.optimised_min_margin,
                    brute_min_margin(&q.model, &fm, &ds),
                    "trial {trial}, {weight_bits}-bit weights"
                );
                if q.moves > 0 {
                    moved_runs += 1;
                    // And the shortcut itself, where it answers, agrees with a full pass.
                    let plain = quantise(&fm, None, cfg).unwrap();
                    let xmax = input_extremes(&plain);
                    let bound = Bound {
                        ideal_w: &plain.ideal_weights,
                        ideal_b: plain.ideal_bias,
                        xmax: &xmax,
                    };
                    let wmax = (1i64 << (weight_bits - 1)) - 1;
                    let found = search(&plain.model, &ds, &Correct::new(&fm, &ds), wmax, &bound);
                    if let Some(v) = found.moved {
                        used += 1;
                        let m = CheckedModel::new(found.model).unwrap();
                        assert_eq!(Some(v), brute_min_margin(&m, &fm, &ds));
                    }
                }
            }
        }
        // The test means something only if both happened.
        assert!(
            moved_runs > 0 && used > 0,
            "moved {moved_runs}, shortcut used {used}"
        );
    }

    #[test]
    fn q_conversion_matches_the_fixed_crate_at_half_lsb_edges() {
        // Reference: the `fixed` crate's from_num (round to nearest, ties to even).
        for k in -300i32..300 {
            for off in [-1e-9, 0.0, 1e-9] {
                let v = (f64::from(k) + 0.5) / 128.0 + off; // exact half-LSB edges in Q7
                if let Some(f) = FixedI8::<U7>::checked_from_num(v) {
                    assert_eq!(to_q(v, 7), f64::from(f.to_bits()), "Q7 at {v}");
                }
                let v15 = (f64::from(k) + 0.5) / 32768.0 + off;
                if let Some(f) = FixedI16::<U15>::checked_from_num(v15) {
                    assert_eq!(to_q(v15, 15), f64::from(f.to_bits()), "Q15 at {v15}");
                }
            }
        }
    }
}
