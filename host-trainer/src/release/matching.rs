//! Does this blob come from this float model? The check `inspect --model` and `replay` make.
//!
//! Without the training log the quantiser's margin search cannot be re-run, so the check
//! re-derives what the float model fixes exactly and bounds what the search may move:
//! - model id, channel names and order, valid ranges, offsets, multipliers, shifts, the
//!   weights' fractional bits and the signal section must equal the quantiser's, field by
//!   field, at the blob's word lengths;
//! - each weight and the bias must lie within 1 LSB of the quantiser's plain rounding of
//!   its ideal value (ideal = float value × scale), the reach of the ±1 LSB search;
//! - the thresholds must be those of the float model's threshold with some RECHECK band
//!   b ≥ 0: `nogo_max = ⌊τ·A − b⌋`, `go_min = ⌊τ·A + b⌋ + 1`.
//!
//! - a model of several classes: the class rows are rounded plainly (no search), so its
//!   blob's rows, names, GO class and gaps must equal the class quantiser's exactly.
//!
//! So a bit flipped in any field that decides a verdict, with its CRC recomputed, is caught
//! (the search never moves a value by more than one), and the first field that differs is
//! named.

use crate::release::pack::DeviceModel;

use shared_model::{ClassSection, FixedModel};

use crate::release::quantise::{QuantConfig, QuantError, quantise};
use crate::release::quantise_classes::quantise_classes;
use crate::train::float_model::FloatModel;

/// Why a blob is not one its float model produces.
#[derive(Debug, PartialEq, thiserror::Error)]
pub enum Mismatch {
    /// A blob of readings for a model with signals, or the other way round.
    #[error("{}", if *.blob_has_signals {
        "the blob's channels include features of sample windows, but the float model has no signals"
    } else {
        "the blob has no signals (a model of readings), but the float model has signal features"
    })]
    Signals {
        /// Whether the blob is the one with signals.
        blob_has_signals: bool,
    },
    /// A two-sided blob for a model of several classes, or the other way round.
    #[error("{}", if *.blob_has_classes {
        "the blob decides between several classes, but the float model is two-sided (GO / NO-GO)"
    } else {
        "the blob is two-sided (GO / NO-GO), but the float model decides between several classes"
    })]
    Classes {
        /// Whether the blob is the one with classes.
        blob_has_classes: bool,
    },
    /// Another model id: other training inputs.
    #[error("the blob's model id is {blob}, the float model's is {model}")]
    ModelId {
        /// The blob's model id, hex.
        blob: String,
        /// The float model's, hex.
        model: String,
    },
    /// The float model cannot be quantised at the blob's word lengths.
    #[error(
        "the float model cannot be quantised to the blob's format ({input_bits}-bit inputs, {weight_bits}-bit weights): {message}"
    )]
    Format {
        /// The blob's input word.
        input_bits: u8,
        /// The blob's weight word.
        weight_bits: u8,
        /// The quantiser's refusal.
        message: String,
    },
    /// A field the float model fixes exactly differs.
    #[error("{field}: the blob has {blob}, the float model gives {model}")]
    Field {
        /// The field, e.g. `channel 2 (vref) offset`.
        field: String,
        /// The blob's value.
        blob: String,
        /// The value the float model gives.
        model: String,
    },
    /// A weight or the bias is further from its ideal value than the margin search moves it.
    #[error(
        "{field}: the blob has {blob}, the float model gives {ideal:.3} (rounded {plain}); the quantiser moves it by at most 1"
    )]
    Rounding {
        /// `weight of channel <i> (<name>)` or `bias`.
        field: String,
        /// The blob's integer.
        blob: i64,
        /// The ideal real value at the blob's format.
        ideal: f64,
        /// Its plain rounding.
        plain: i64,
    },
    /// The thresholds are not the float model's threshold with any RECHECK band.
    #[error(
        "thresholds: the blob has NO-GO at score <= {nogo_max}, GO at score >= {go_min}; the float model's threshold is {threshold:.3} in accumulator units, which no RECHECK band turns into these"
    )]
    Thresholds {
        /// The blob's NO-GO bound.
        nogo_max: i64,
        /// The blob's GO bound.
        go_min: i64,
        /// τ·A.
        threshold: f64,
    },
}

/// Checks that `model` (with its signal section `signals`, empty for a model of readings)
/// is a blob `fm` produces: see the module's rule. Returns the first field that differs.
///
/// # Errors
/// [`Mismatch`] naming that field.
pub fn check(fm: &FloatModel, model: &DeviceModel) -> Result<(), Mismatch> {
    let signals = model.signals();
    if signals.is_empty() != fm.signals.is_empty() {
        return Err(Mismatch::Signals {
            blob_has_signals: !signals.is_empty(),
        });
    }
    let b = model.model();
    let blob_id = crate::digest::lower_hex(&b.model_id);
    if b.model_id != fm.id_bytes() {
        return Err(Mismatch::ModelId {
            blob: blob_id,
            model: fm.model_id.clone(),
        });
    }
    let field = |field: String, blob: &dyn std::fmt::Display, model: &dyn std::fmt::Display| {
        Err(Mismatch::Field {
            field,
            blob: blob.to_string(),
            model: model.to_string(),
        })
    };
    if b.channels.len() != fm.channels.len() {
        return field(
            "channel count".into(),
            &b.channels.len(),
            &fm.channels.len(),
        );
    }
    if model.classes().is_some() != fm.classes.is_some() {
        return Err(Mismatch::Classes {
            blob_has_classes: model.classes().is_some(),
        });
    }
    // The plain quantisation at the blob's words: no training log, no search. The
    // accumulator width is left to the blob (its overflow proof was checked on decode).
    let cfg = QuantConfig {
        input_bits: b.input_bits,
        weight_bits: b.weight_bits,
        optimise: false,
        acc_bits: None,
        recheck_band: 0.0,
    };
    let format = |e: QuantError| Mismatch::Format {
        input_bits: b.input_bits,
        weight_bits: b.weight_bits,
        message: e.to_string(),
    };
    if let Some(classes) = model.classes() {
        let q = quantise_classes(fm, cfg).map_err(format)?;
        same_channels(b, &q.fixed)?;
        // Rows are rounded plainly (no search), so a class blob of this model holds
        // exactly these rows, names, GO class and gaps.
        return match first_class_difference(classes, &q.section) {
            None => Ok(()),
            Some((what, blob, model)) => field(what, &blob, &model),
        };
    }
    let q = quantise(fm, None, cfg).map_err(format)?;
    let p = q.model.model();
    same_channels(b, p)?;
    let expected = fm.signal_section();
    if *signals != expected {
        return field(
            "signals and channel sources".into(),
            &format!(
                "{} signals, {} sources",
                signals.signals.len(),
                signals.sources.len()
            ),
            &format!(
                "{} signals, {} sources{}",
                expected.signals.len(),
                expected.sources.len(),
                if signals.signals.len() == expected.signals.len() {
                    " (their windows, ranges or features differ)"
                } else {
                    ""
                }
            ),
        );
    }
    for (i, ((c, ideal), plain)) in b
        .channels
        .iter()
        .zip(&q.ideal_weights)
        .zip(&q.plain_weights)
        .enumerate()
    {
        if (i64::from(c.weight) - i64::from(*plain)).abs() > 1 {
            return Err(Mismatch::Rounding {
                field: format!("weight of channel {i} ({})", c.name),
                blob: i64::from(c.weight),
                ideal: *ideal,
                plain: i64::from(*plain),
            });
        }
    }
    if b.bias.abs_diff(q.plain_bias) > 1 {
        return Err(Mismatch::Rounding {
            field: "bias".into(),
            blob: b.bias,
            ideal: q.ideal_bias,
            plain: q.plain_bias,
        });
    }
    if !thresholds_fit(q.threshold_acc, b.nogo_max, b.go_min) {
        return Err(Mismatch::Thresholds {
            nogo_max: b.nogo_max,
            go_min: b.go_min,
            threshold: q.threshold_acc,
        });
    }
    Ok(())
}

/// The channels (names, ranges, offsets, conversions) and the weights' fractional bits
/// of blob `b` against the quantiser's `p` at the blob's words.
fn same_channels(b: &FixedModel, p: &FixedModel) -> Result<(), Mismatch> {
    let field = |field: String, blob: &dyn std::fmt::Display, model: &dyn std::fmt::Display| {
        Err(Mismatch::Field {
            field,
            blob: blob.to_string(),
            model: model.to_string(),
        })
    };
    for (i, (c, e)) in b.channels.iter().zip(&p.channels).enumerate() {
        let at = |what: &str| format!("channel {i} ({}) {what}", e.name);
        if c.name != e.name {
            return field(format!("channel {i} name"), &c.name, &e.name);
        }
        if (c.raw_min, c.raw_max) != (e.raw_min, e.raw_max) {
            return field(
                at("valid range"),
                &format!("{}..={}", c.raw_min, c.raw_max),
                &format!("{}..={}", e.raw_min, e.raw_max),
            );
        }
        if c.offset != e.offset {
            return field(at("offset"), &c.offset, &e.offset);
        }
        if (c.multiplier, c.shift) != (e.multiplier, e.shift) {
            return field(
                at("conversion"),
                &format!("multiplier {} shift {}", c.multiplier, c.shift),
                &format!("multiplier {} shift {}", e.multiplier, e.shift),
            );
        }
    }
    if b.weight_frac_bits != p.weight_frac_bits {
        return field(
            "weight fractional bits".into(),
            &b.weight_frac_bits,
            &p.weight_frac_bits,
        );
    }
    Ok(())
}

/// The first field in which class section `blob` differs from `expected`: (field, blob's
/// value, the float model's).
fn first_class_difference(
    blob: &ClassSection,
    expected: &ClassSection,
) -> Option<(String, String, String)> {
    let go = |c: &ClassSection| {
        c.go_class()
            .map_or("none".to_string(), |k| c.name(k).to_string())
    };
    if blob.rows.len() != expected.rows.len() {
        return Some((
            "class count".into(),
            blob.rows.len().to_string(),
            expected.rows.len().to_string(),
        ));
    }
    if go(blob) != go(expected) {
        return Some(("GO class".into(), go(blob), go(expected)));
    }
    if (blob.go_gap, blob.class_gap) != (expected.go_gap, expected.class_gap) {
        return Some((
            "class gaps (GO, failure)".into(),
            format!("{}, {}", blob.go_gap, blob.class_gap),
            format!("{}, {}", expected.go_gap, expected.class_gap),
        ));
    }
    for (k, (r, e)) in blob.rows.iter().zip(&expected.rows).enumerate() {
        if r.name != e.name {
            return Some((
                format!("class {k} name"),
                r.name.to_string(),
                e.name.to_string(),
            ));
        }
        if r.bias != e.bias {
            return Some((
                format!("class {k} ({}) bias", e.name),
                r.bias.to_string(),
                e.bias.to_string(),
            ));
        }
        if let Some((j, (w, x))) = r
            .weights
            .iter()
            .zip(&e.weights)
            .enumerate()
            .find(|(_, (w, x))| w != x)
        {
            return Some((
                format!("class {k} ({}) weight of channel {j}", e.name),
                w.to_string(),
                x.to_string(),
            ));
        }
    }
    None
}

/// Decodes a blob of any format version and checks it comes from `fm` ([`check`]).
///
/// # Errors
/// The blob's [`shared_model::DecodeError`] as a string, or the [`Mismatch`].
pub fn decode_from(fm: &FloatModel, bytes: &[u8]) -> Result<DeviceModel, BlobMismatch> {
    let m = shared_model::blob::decode_classes(bytes).map_err(BlobMismatch::Decode)?;
    check(fm, &m)?;
    Ok(m)
}

/// Why a blob's bytes are not a blob of a given float model.
#[derive(Debug, PartialEq, thiserror::Error)]
pub enum BlobMismatch {
    /// The bytes are not a valid blob.
    #[error("{0}")]
    Decode(shared_model::DecodeError),
    /// A valid blob, from another model or changed.
    #[error("{0}")]
    Mismatch(#[from] Mismatch),
}

/// Whether some band b ≥ 0 gives `nogo_max = ⌊t − b⌋` and `go_min = ⌊t + b⌋ + 1`, as the
/// quantiser places them: b must lie in (t − nogo_max − 1, t − nogo_max] and in
/// [go_min − 1 − t, go_min − t).
fn thresholds_fit(t: f64, nogo_max: i64, go_min: i64) -> bool {
    let (n, g) = (nogo_max as f64, go_min as f64);
    let lo = (g - 1.0 - t).max(t - n - 1.0).max(0.0);
    let hi = (t - n).min(g - t);
    // Closed at both ends: a value exactly on an open end is a difference of one rounding
    // of τ·A, not a moved threshold.
    t.is_finite() && lo <= hi
}

#[cfg(test)]
mod tests {
    use super::thresholds_fit;

    #[test]
    fn thresholds_follow_the_band_rule() {
        // No band: NO-GO at ⌊t⌋, GO from ⌊t⌋ + 1.
        assert!(thresholds_fit(5.3, 5, 6));
        assert!(thresholds_fit(5.0, 5, 6));
        // A band of 2.
        assert!(thresholds_fit(5.3, 3, 8));
        // Moved: either bound shifted alone, or both.
        assert!(!thresholds_fit(5.3, 5, 9));
        assert!(!thresholds_fit(5.3, 2, 6));
        assert!(!thresholds_fit(5.3, 13, 14));
    }
}
