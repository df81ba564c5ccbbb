//! The float model file of a model of several classes: its constructor, what its id
//! covers, the checks on reading it, and the training figures it keeps.
//!
//! In the JSON, `classes` holds the rule (`one-vs-rest` or `joint`), `go` (the GO row's
//! index, or null), `go_gap`, `class_gap` and `rows` (`name`, `weights`, `bias`), all over
//! the same scaled inputs as a two-sided model's weights, normalised so the largest
//! |weight| over every row is 1 (the gaps divided alike); `weights`, `bias` and
//! `threshold` are zeros. `summary.classes` keeps each class's units and training
//! errors, the gaps' reason and held-out counts, how C was chosen, and for the joint rule
//! the objective solved and the spread it was solved over (with the factor the rows were
//! divided by), so an outside solver can check it. The file is format version
//! [`CLASS_FORMAT_VERSION`].

use crate::ingest::scaling::ChannelScale;
use crate::ingest::signal_scale::SignalScale;
use crate::train::class_file::CLASS_FORMAT_VERSION;
use crate::train::class_rows::{ClassRowF, ClassRule, FloatClasses};
use crate::train::float_model::{FloatModel, Provenance, TrainingSummary};
use crate::train::linear::Linear;
use crate::train::one_vs_rest::largest_weight;

impl FloatModel {
    /// A model of several classes: `rows` (device-scaled inputs, in class order, named by
    /// `names`) normalised so the largest |weight| is 1, the gaps (in the normalised units
    /// the held-out leads were taken in) kept as they are, and the id derived.
    #[allow(clippy::too_many_arguments)]
    pub fn with_classes(
        provenance: Provenance,
        channels: Vec<ChannelScale>,
        signals: Vec<SignalScale>,
        rule: ClassRule,
        go: Option<usize>,
        names: &[String],
        rows: &[Linear],
        go_gap: f64,
        class_gap: f64,
        summary: TrainingSummary,
    ) -> Self {
        let mut m = Self::new(
            provenance,
            channels,
            signals,
            &Linear {
                w: vec![0.0; rows.first().map_or(0, |r| r.w.len())],
                b: 0.0,
            },
            0.0,
            summary,
        );
        let s = largest_weight(rows);
        m.format_version = CLASS_FORMAT_VERSION;
        m.classes = Some(FloatClasses {
            rule,
            go,
            go_gap,
            class_gap,
            rows: names
                .iter()
                .zip(rows)
                .map(|(n, r)| ClassRowF {
                    name: n.clone(),
                    weights: r.w.iter().map(|w| w / s).collect(),
                    bias: r.b / s,
                })
                .collect(),
        });
        m.model_id = m.derive_id();
        m
    }
}
