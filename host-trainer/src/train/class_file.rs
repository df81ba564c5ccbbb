//! What the float model file of a model of several classes keeps beside its rows (the
//! training figures, [`ClassSummary`]), what its id covers of the classes, and the checks
//! on reading them. Apart from the constructor (`class_model.rs`) so that
//! the float model file can name these without importing its own constructor back.

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::train::class_point::{ClassCChoice, ClassCounts, ClassGaps};
use crate::train::class_rows::{ClassRule, FloatClasses};
use crate::train::spread::Spread;

/// Layout version of a float model of several classes (with or without signals).
pub const CLASS_FORMAT_VERSION: u32 = 4;

/// One class's training figures.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClassFigures {
    /// The class.
    pub name: String,
    /// Training units of the class.
    pub units: usize,
    /// Of them, units whose leading class (every leader decided) is another.
    pub training_errors: usize,
}

/// What the joint trainer solved, for an outside solver to check.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct JointFigures {
    /// ½ Σ_k (‖w_k‖² + b_k²) + C Σ_i max(0, max_{k≠yᵢ}(1 + w_k·zᵢ + b_k − w_{yᵢ}·zᵢ − b_{yᵢ}))
    /// at the solution, over standard scores zᵢ.
    pub objective: f64,
    /// Each channel's mean and sd over the training units (device-scaled units).
    pub spread: Spread,
    /// The factor the device-scale rows were divided by (their largest |weight|): the
    /// solution is the file's rows times it, then w·sd and b + w·mean per row.
    pub scale: f64,
    /// Passes over the units.
    pub passes: usize,
    /// The largest optimality violation on the last full pass.
    pub violation: f64,
}

/// The training figures of a model of classes (`summary.classes`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClassSummary {
    /// Each class's units and training errors, in row order.
    pub classes: Vec<ClassFigures>,
    /// The gaps chosen, their reason and held-out counts.
    pub gaps: ClassGaps,
    /// Held-out decisions with every leader decided (no RECHECK), when there were held-out
    /// units: the float rule's accuracy and confusion.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub held_out: Option<ClassCounts>,
    /// How C was chosen, when the folds chose it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub c_choice: Option<ClassCChoice>,
    /// The joint trainer's objective (joint rule only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub joint: Option<JointFigures>,
}

/// Feeds what decides a class model's verdicts into the id: names, GO, rule, gaps, rows.
pub(crate) fn hash_classes(h: &mut Sha256, c: &FloatClasses) {
    h.update(b"classes");
    h.update(match c.rule {
        ClassRule::OneVsRest => b"one-vs-rest".as_slice(),
        ClassRule::Joint => b"joint".as_slice(),
    });
    h.update(c.go.map_or(u64::MAX, |g| g as u64).to_le_bytes());
    h.update(c.go_gap.to_le_bytes());
    h.update(c.class_gap.to_le_bytes());
    for r in &c.rows {
        h.update(r.name.as_bytes());
        h.update([0]);
        for v in r.weights.iter().chain([&r.bias]) {
            h.update(v.to_le_bytes());
        }
    }
}

/// The checks a class model's file must pass on reading: 2..=8 rows, one weight per
/// channel each, names 1..=24 bytes and unique, `go` a row, gaps positive and finite,
/// every number finite, some weight non-zero.
pub(crate) fn check_classes(
    c: &FloatClasses,
    channels: usize,
    format_version: u32,
) -> Result<(), String> {
    let max = shared_model::limits::MAX_CLASSES;
    if c.rows.len() < 2 || c.rows.len() > max {
        return Err(format!(
            "{} class rows; a model of classes has 2 to {max}",
            c.rows.len()
        ));
    }
    if format_version != CLASS_FORMAT_VERSION {
        return Err(format!(
            "format version {} with classes: a model of classes is version {CLASS_FORMAT_VERSION}",
            format_version
        ));
    }
    for (k, r) in c.rows.iter().enumerate() {
        if r.name.is_empty() || r.name.len() > crate::ingest::classes::MAX_CLASS_NAME {
            return Err(format!("class '{}': a name is 1 to 24 bytes", r.name));
        }
        if c.rows[..k]
            .iter()
            .any(|o| o.name.eq_ignore_ascii_case(&r.name))
        {
            return Err(format!("class '{}' is named twice", r.name));
        }
        if r.weights.len() != channels {
            return Err(format!(
                "class '{}': {} weights for {} channels",
                r.name,
                r.weights.len(),
                channels
            ));
        }
        if !(r.weights.iter().all(|w| w.is_finite()) && r.bias.is_finite()) {
            return Err(format!(
                "class '{}': weights and bias must be finite",
                r.name
            ));
        }
    }
    if c.go.is_some_and(|g| g >= c.rows.len()) {
        return Err("the GO class is not one of the rows".into());
    }
    if !(c.go_gap.is_finite() && c.go_gap > 0.0 && c.class_gap.is_finite() && c.class_gap > 0.0) {
        return Err("the gaps must be positive finite numbers".into());
    }
    if c.largest_weight() == 0.0 {
        return Err("every weight is zero: the model has no direction to decide by".into());
    }
    Ok(())
}
