//! Quantiser of a model of several classes: every class row in one Q-format, the gaps in
//! accumulator units, the class section the blob carries.
//!
//! The input word, the conversions and the weight word are chosen as for a two-sided model
//! (`words.rs`: [`conversions`], [`word_scale`], [`channel_specs`]): the largest
//! |wₖᵢ|/(halfᵢ·κᵢ) over every row and channel sets the accumulator scale A, so the largest
//! ideal weight of any row is the largest word value. Each row's weights and bias are
//! rounded to nearest, ties to even ([`to_q`]); no ±1 LSB search (the class proof is per
//! pair of rows, and a move that helps one pair can hurt another). The gaps become
//! accumulator units rounded up, at least 1: the device decides a class only where the
//! float rule's lead, scaled, reaches the gap. Each gap is then raised, where it is
//! smaller, to just above the widest rounding bound of the pairs of rows it decides
//! ([`PairBounds`]): a unit the float rule leaves tied (lead 0) can lead by up to that bound
//! on the device, and must stay RECHECK there too. The audit names every raise and holds
//! the device to the float rule at the device's own gaps ([`QuantisedClasses::float_rule`]). The fixed model's own weights and bias are
//! zero and its thresholds −1/0 (unused by a model of several classes). The model is
//! validated with its section (`CheckedModel::with_outcomes`): rows, names, gaps, and that
//! twice the widest row's bound fits the accumulator.

use serde::Serialize;
use shared_model::classes::{ClassRow, ClassSection, NO_GO_CLASS};
use shared_model::{AuditMark, CheckedModel, Decision, Fault, FixedModel, Readings};

use crate::release::bound::{bound_of, input_maxima};
use crate::release::quantise::{QuantConfig, QuantError, to_q};
use crate::release::words::{channel_specs, conversions, word_scale};
use crate::train::class_rows::FloatClasses;
use crate::train::float_model::FloatModel;

/// A quantised model of several classes, with what the audit needs to bound the rounding
/// of every pair of rows.
#[derive(Clone, Debug)]
pub struct QuantisedClasses {
    /// The validated model with its class section (the kernel's `classify` decides).
    pub model: CheckedModel<Readings, ClassSection>,
    /// The fixed model (its own weights and bias zero, thresholds −1/0).
    pub fixed: FixedModel,
    /// The class rows and gaps the blob carries.
    pub section: ClassSection,
    /// Accumulator units per float score unit (A).
    pub scale: f64,
    /// κᵢ = multiplierᵢ / 2^shiftᵢ per channel.
    pub kappa: Vec<f64>,
    /// Each row's ideal real weights Wₖᵢ* = A·wₖᵢ/(halfᵢ·κᵢ).
    pub ideal_weights: Vec<Vec<f64>>,
    /// Each row's ideal real bias A·bₖ.
    pub ideal_bias: Vec<f64>,
    /// The GO gap in accumulator units, real (A·go_gap) before rounding up.
    pub ideal_go_gap: f64,
    /// The class gap in accumulator units, real (A·class_gap) before rounding up.
    pub ideal_class_gap: f64,
    /// Bits the largest difference of two rows' scores needs (sign included).
    pub needed_bits: u8,
    /// The rounding bound of every pair of rows.
    pub pairs: PairBounds,
    /// Gaps the quantiser raised to the rounding floor (what, from, to; accumulator units).
    pub raised: Vec<(&'static str, i64, i64)>,
}

impl QuantisedClasses {
    /// The device's decision for one unit's raw readings: every row's exact score by the
    /// kernel, then the section's rule.
    ///
    /// # Errors
    /// The kernel's [`Fault`] for a refused reading (the device shows FAULT).
    pub fn classify(&self, raw: &[i32]) -> Result<Decision, Fault> {
        self.model.classify(raw)
    }

    /// Every row's exact score for `raw` into `out`; the number of rows.
    ///
    /// # Errors
    /// As [`classify`](Self::classify).
    pub fn scores(
        &self,
        raw: &[i32],
        out: &mut [i64; shared_model::limits::MAX_CLASSES],
    ) -> Result<usize, Fault> {
        self.model.class_scores(raw, out)
    }

    /// The number of classes.
    pub fn class_count(&self) -> usize {
        self.section.rows.len()
    }

    /// The float rule at the device's gaps (each gap in accumulator units over A): the rule
    /// the audit holds the device to, so that both decide at the same edges.
    pub fn float_rule(&self, fc: &FloatClasses) -> FloatClasses {
        FloatClasses {
            go_gap: self.section.go_gap as f64 / self.scale,
            class_gap: self.section.class_gap as f64 / self.scale,
            ..fc.clone()
        }
    }
}

/// The rounding bound of every pair of rows' score difference, in accumulator LSB.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PairBounds {
    /// Classes.
    pub classes: usize,
    /// `bounds[a][b]`: the bound of row a minus row b (symmetric, 0 on the diagonal).
    pub bounds: Vec<Vec<f64>>,
}

impl PairBounds {
    /// The bounds of a quantised model's pairs of rows (`bound.rs`'s bound of each
    /// difference row).
    pub fn of(q: &QuantisedClasses) -> Self {
        Self::of_rows(
            &q.fixed,
            &q.kappa,
            &q.section,
            &q.ideal_weights,
            &q.ideal_bias,
        )
    }

    /// The bounds of rows `section` (ideal values beside them) over `fixed`'s channels.
    fn of_rows(
        fixed: &FixedModel,
        kappa: &[f64],
        section: &ClassSection,
        ideal_weights: &[Vec<f64>],
        ideal_bias: &[f64],
    ) -> Self {
        let xmax = input_maxima(fixed, kappa);
        let k = section.rows.len();
        let bounds = (0..k)
            .map(|a| {
                (0..k)
                    .map(|b| pair_bound(section, ideal_weights, ideal_bias, &xmax, a, b))
                    .collect()
            })
            .collect();
        Self { classes: k, bounds }
    }

    /// The largest bound of a pair that holds class `a` (any pair for `None`).
    fn widest(&self, a: Option<usize>) -> f64 {
        self.bounds
            .iter()
            .enumerate()
            .filter(|&(k, _)| a.is_none_or(|a| a == k))
            .flat_map(|(_, row)| row.iter().copied())
            .fold(0.0, f64::max)
    }
}

/// The bound of row `a` minus row `b` (0 for a row against itself).
fn pair_bound(
    section: &ClassSection,
    ideal_weights: &[Vec<f64>],
    ideal_bias: &[f64],
    xmax: &[f64],
    a: usize,
    b: usize,
) -> f64 {
    let (Some(ra), Some(rb)) = (section.rows.get(a), section.rows.get(b)) else {
        return 0.0;
    };
    if a == b {
        return 0.0;
    }
    let w: Vec<f64> = ra
        .weights
        .iter()
        .zip(&rb.weights)
        .map(|(x, y)| f64::from(*x) - f64::from(*y))
        .collect();
    let ideal: Vec<f64> = ideal_weights[a]
        .iter()
        .zip(&ideal_weights[b])
        .map(|(x, y)| x - y)
        .collect();
    let bias = ra.bias as f64 - rb.bias as f64;
    let ideal_bias = ideal_bias[a] - ideal_bias[b];
    bound_of(&w, &ideal, xmax, bias, ideal_bias).total
}

/// Quantises the classes of `fm` (see the module docs).
///
/// # Errors
/// [`QuantError`]: no classes, unsupported word lengths, a class name over 24 bytes or
/// more than 8 classes, or a model the checks refuse (an accumulator that could overflow).
pub fn quantise_classes(fm: &FloatModel, cfg: QuantConfig) -> Result<QuantisedClasses, QuantError> {
    let Some(fc) = fm.classes.as_ref() else {
        return Err(QuantError::Format("the model has no classes".into()));
    };
    if !fm.signals.is_empty() {
        return Err(QuantError::Format(
            "a model of several classes over signal features is not released yet; train it on a bench log".into(),
        ));
    }
    let (conv, kappa) = conversions(fm, cfg.input_bits, cfg.weight_bits)?;
    let ratio = |w: &[f64]| -> Vec<f64> {
        w.iter()
            .zip(&fm.channels)
            .zip(&kappa)
            .map(|((w, c), k)| w / (c.half as f64 * k))
            .collect()
    };
    let ratios: Vec<Vec<f64>> = fc.rows.iter().map(|r| ratio(&r.weights)).collect();
    let max_r = ratios.iter().flatten().fold(0.0f64, |m, r| m.max(r.abs()));
    let (scale, frac_bits, wmax) = word_scale(max_r, cfg.input_bits, cfg.weight_bits);
    let ideal_weights: Vec<Vec<f64>> = ratios
        .iter()
        .map(|r| r.iter().map(|v| v * scale).collect())
        .collect();
    let ideal_bias: Vec<f64> = fc.rows.iter().map(|r| r.bias * scale).collect();
    let zero = vec![0i32; fm.channels.len()];
    let mut fixed = FixedModel {
        model_id: fm.id_bytes(),
        audit: AuditMark::NotAudited,
        input_bits: cfg.input_bits,
        weight_bits: cfg.weight_bits,
        weight_frac_bits: frac_bits,
        acc_bits: 64,
        bias: 0,
        nogo_max: -1,
        go_min: 0,
        channels: channel_specs(fm, &conv, &zero)?,
    };
    let section = section(fc, &ideal_weights, &ideal_bias, wmax, scale)?;
    // Each row as a two-sided model of its own, for its score bound R_k.
    let row_model = |base: &FixedModel, r: &ClassRow| {
        let mut m = base.clone();
        m.bias = r.bias;
        for (c, &w) in m.channels.iter_mut().zip(&r.weights) {
            c.weight = w;
        }
        m
    };
    // Every difference of two rows' scores is at most 2·max_k R_k in size.
    let worst = section
        .rows
        .iter()
        .map(|r| row_model(&fixed, r).score_bound())
        .max()
        .unwrap_or(0)
        .saturating_mul(2);
    let needed_bits = (129 - worst.leading_zeros()) as u8;
    fixed.acc_bits = cfg
        .acc_bits
        .unwrap_or(if needed_bits <= 32 { 32 } else { 64 });
    if i32::from(needed_bits) > i32::from(fixed.acc_bits) {
        return Err(QuantError::Format(format!(
            "the difference of two class rows' scores needs {needed_bits} bits, the accumulator has {}",
            fixed.acc_bits
        )));
    }
    let mut section = section;
    let pairs = PairBounds::of_rows(&fixed, &kappa, &section, &ideal_weights, &ideal_bias);
    // The rounding floor: a gap inside a pair's rounding bound would let the device decide
    // units the float rule leaves tied (a lead of 0 rounds to up to the bound). Each gap is
    // raised above the widest bound of the pairs it decides, and the audit says so.
    let mut raised = Vec::new();
    let go = fc.go;
    let mut floor = |what: &'static str, gap: &mut i64, widest: f64| {
        let least = widest.floor() as i64 + 1;
        if *gap < least {
            raised.push((what, *gap, least));
            *gap = least;
        }
    };
    if go.is_some() {
        floor("GO gap", &mut section.go_gap, pairs.widest(go));
    }
    floor("class gap", &mut section.class_gap, pairs.widest(None));
    let model = CheckedModel::with_outcomes(fixed.clone(), Readings, section.clone())?;
    Ok(QuantisedClasses {
        model,
        fixed,
        section,
        scale,
        kappa,
        ideal_weights,
        ideal_bias,
        ideal_go_gap: fc.go_gap * scale,
        ideal_class_gap: fc.class_gap * scale,
        needed_bits,
        pairs,
        raised,
    })
}

/// The class section: each row rounded, names checked, the gaps rounded up.
fn section(
    fc: &FloatClasses,
    ideal_weights: &[Vec<f64>],
    ideal_bias: &[f64],
    wmax: f64,
    scale: f64,
) -> Result<ClassSection, QuantError> {
    let mut rows = heapless::Vec::new();
    for ((r, w), &b) in fc.rows.iter().zip(ideal_weights).zip(ideal_bias) {
        let name = heapless::String::try_from(r.name.as_str())
            .map_err(|_| QuantError::ClassName(r.name.clone()))?;
        let weights = w
            .iter()
            .map(|v| to_q(*v, 0).clamp(-wmax, wmax) as i32)
            .collect();
        rows.push(ClassRow {
            name,
            bias: to_q(b, 0) as i64,
            weights,
        })
        .map_err(|_| {
            QuantError::Format(format!(
                "{} classes (at most {})",
                fc.rows.len(),
                shared_model::limits::MAX_CLASSES
            ))
        })?;
    }
    let go = match fc.go {
        Some(g) => u8::try_from(g)
            .ok()
            .filter(|&g| usize::from(g) < fc.rows.len())
            .ok_or_else(|| QuantError::Format(format!("GO class {g} of {}", fc.rows.len())))?,
        None => NO_GO_CLASS,
    };
    Ok(ClassSection {
        go,
        go_gap: gap_units(fc.go_gap, scale),
        class_gap: gap_units(fc.class_gap, scale),
        rows,
    })
}

/// A gap of `gap` float score units in accumulator units: rounded up, at least 1.
pub fn gap_units(gap: f64, scale: f64) -> i64 {
    let g = (gap * scale).ceil();
    if g.is_finite() && g >= 1.0 {
        g.min(i64::MAX as f64) as i64
    } else {
        1
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// By hand: 0.30 × 10 = 3 exactly; 0.31 × 10 = 3.1 → 4; a zero or negative gap → 1.
    #[test]
    fn gaps_round_up_to_at_least_one_unit() {
        assert_eq!(gap_units(0.5, 6.0), 3);
        assert_eq!(gap_units(0.31, 10.0), 4);
        assert_eq!(gap_units(0.0, 100.0), 1);
        assert_eq!(gap_units(1e-9, 100.0), 1);
        assert_eq!(gap_units(f64::NAN, 1.0), 1);
    }
}
