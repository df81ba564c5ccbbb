//! One log of a model of several classes through the kernel: each unit's device decision
//! against the float rule's, the proof that rounding cannot change it, and the confusion
//! matrix (true class × decided: each class, RECHECK, FAULT).
//!
//! The proof, per unit. Let L be the float rule's leader and, for every other row k,
//! dₖ = A·(sₗ − sₖ) the float lead over k in accumulator units. The device's difference
//! Dₖ is the kernel's score difference, a linear map of the rounded inputs whose integer
//! weights are the two rows' differences: `bound.rs`'s derivation bounds |Dₖ − dₖ| by the
//! pair's bound bₗₖ. The decision depends on the differences against L only (L leads while
//! every Dₖ > 0; it is decided when every Dₖ reaches L's gap G), so the unit is PROVED when
//! every k keeps its side of 0 and of G by more than bₗₖ: dₖ > bₗₖ, and dₖ − G > bₗₖ
//! where the float rule has the lead reach the gap (dₖ ≥ A·gap), G − dₖ > bₗₖ where it
//! does not. Then the device decides exactly as the float rule: a PROVED unit cannot
//! flip. A unit's margin is the smallest of those distances in
//! multiples of its pair's bound (in LSB when the bound is 0).

use rayon::prelude::*;
use serde::Serialize;
use shared_model::Verdict;
use shared_model::limits::MAX_CLASSES;

use crate::confidence::{DEFAULT_CONFIDENCE, Rate};
use crate::ingest::dataset::{Dataset, RawForm};
use crate::release::bound::{MARGIN_BINS, margin_bin, margin_bin_edges};
use crate::release::quantise_classes::{PairBounds, QuantisedClasses};
use crate::train::class_rows::FloatClasses;

/// Units listed as the tightest of each log.
pub const TIGHTEST_CLASSES: usize = 20;
/// Units listed at most as flips (every flip is counted).
const FLIPS_LISTED: usize = 100;

/// What one unit came to.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct UnitCheck {
    /// Its true class (row index), `None` without a label of the model's classes.
    pub class: Option<usize>,
    /// The float rule's leader and whether it is decided.
    pub float_leader: usize,
    /// Whether the float rule decides the leader (else RECHECK).
    pub float_decided: bool,
    /// The float lead in accumulator units (A × the float lead).
    pub float_lead: f64,
    /// The device's decision; `None` for a FAULT.
    pub device: Option<(Verdict, usize, i64)>,
    /// The smallest distance to a decision edge over the leader's pairs, in multiples of
    /// the pair's bound; `NaN` for a FAULT.
    pub multiple: f64,
    /// Whether rounding provably cannot change the decision.
    pub proved: bool,
    /// Whether the device's decided class or verdict differs from the float rule's.
    pub flip: bool,
}

impl UnitCheck {
    /// The confusion matrix column: the decided class, RECHECK (`classes`) or FAULT
    /// (`classes + 1`).
    pub fn column(&self, classes: usize) -> usize {
        match self.device {
            None => classes + 1,
            Some((Verdict::Recheck, _, _)) => classes,
            Some((_, c, _)) => c,
        }
    }
}

/// Checks unit `i` of `ds`.
pub fn check_unit(
    q: &QuantisedClasses,
    fc: &FloatClasses,
    forms: &[RawForm],
    pairs: &PairBounds,
    ds: &Dataset,
    i: usize,
) -> UnitCheck {
    let raw = ds.raw_row(i);
    // On the stack: this runs once per unit of every log.
    let mut scores = [0.0f64; MAX_CLASSES];
    for (s, f) in scores.iter_mut().zip(forms) {
        *s = f.score(raw);
    }
    let fs = &scores[..forms.len().min(MAX_CLASSES)];
    let fd = fc.decide(fs);
    // The unit's label code names its row as every command reads it (+1 GO, −1 − k the
    // k-th other class in row order).
    let class = ds.labels.get(i).and_then(|&code| fc.row_of_code(code));
    let a = q.scale;
    let l = fd.leader;
    let (gap_float, gap) = if Some(l) == fc.go {
        (fc.go_gap, q.section.go_gap as f64)
    } else {
        (fc.class_gap, q.section.class_gap as f64)
    };
    let mut multiple = f64::INFINITY;
    let mut proved = true;
    for (k, &s) in fs.iter().enumerate().filter(|&(k, _)| k != l) {
        let lead = fs[l] - s;
        let d = a * lead;
        let above = lead >= gap_float;
        let edge = d.min(if above { d - gap } else { gap - d });
        let b = pairs.bounds[l][k];
        proved &= edge > b;
        multiple = multiple.min(if b > 0.0 { edge / b } else { edge });
    }
    let device = q
        .classify(raw)
        .ok()
        .map(|d| (d.verdict, usize::from(d.class.unwrap_or(u8::MAX)), d.score));
    let flip = match device {
        None => false,
        Some((Verdict::Recheck, _, _)) => fd.decided,
        Some((_, c, _)) => !fd.decided || c != l,
    };
    UnitCheck {
        class,
        float_leader: l,
        float_decided: fd.decided,
        float_lead: a * fd.lead,
        multiple: if device.is_some() { multiple } else { f64::NAN },
        device,
        proved: device.is_some() && proved,
        flip,
    }
}

/// One log's tally.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ClassLog {
    /// The log's name in the report ("train", "holdout", …).
    pub name: String,
    /// Units.
    pub units: usize,
    /// Units per true class (row order).
    pub class_units: Vec<u64>,
    /// `confusion[t][c]`: units of true class t decided c (each class, then RECHECK, then
    /// FAULT).
    pub confusion: Vec<Vec<u64>>,
    /// Each cell as a rate among its row's units, with exact Clopper–Pearson bounds at
    /// [`DEFAULT_CONFIDENCE`].
    pub row_rates: Vec<Vec<Rate>>,
    /// Units whose decided class or verdict differs from the float rule's.
    pub flips: usize,
    /// Scored units whose decision is proved.
    pub proved: usize,
    /// Scored units whose decision is not proved (within a pair's bound of an edge).
    pub unproved: usize,
    /// FAULTs.
    pub faults: usize,
    /// Units whose label is none of the model's classes (not in the matrix).
    pub unlabelled: usize,
    /// Smallest margin multiple over the scored units.
    pub min_multiple: Option<f64>,
    /// Scored units per true class, binned by margin multiple (`bound.rs`'s margin bins at
    /// a bound of 1).
    pub margin_histogram: Vec<Vec<u64>>,
    /// Flipped units (at most 100), by index.
    #[serde(skip)]
    pub flip_units: Vec<usize>,
    /// The tightest units (smallest margin multiple), by multiple and index.
    #[serde(skip)]
    pub tight: Vec<(f64, usize)>,
}

/// A chunk's counts, merged in file order.
#[derive(Clone, Debug, Default)]
struct Part {
    confusion: Vec<Vec<u64>>,
    hist: Vec<Vec<u64>>,
    flips: usize,
    proved: usize,
    unproved: usize,
    faults: usize,
    unlabelled: usize,
    min: f64,
    flip_units: Vec<usize>,
    tight: Vec<(f64, usize)>,
}

impl Part {
    fn new(k: usize) -> Self {
        Self {
            confusion: vec![vec![0; k + 2]; k],
            hist: vec![vec![0; MARGIN_BINS]; k],
            min: f64::INFINITY,
            ..Self::default()
        }
    }

    fn add(mut self, o: Self) -> Self {
        for (a, b) in self.confusion.iter_mut().zip(&o.confusion) {
            a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
        }
        for (a, b) in self.hist.iter_mut().zip(&o.hist) {
            a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
        }
        self.flips += o.flips;
        self.proved += o.proved;
        self.unproved += o.unproved;
        self.faults += o.faults;
        self.unlabelled += o.unlabelled;
        self.min = self.min.min(o.min);
        self.flip_units.extend(o.flip_units);
        self.flip_units.truncate(FLIPS_LISTED);
        self.tight.extend(o.tight);
        keep_tightest(&mut self.tight);
        self
    }
}

fn keep_tightest(v: &mut Vec<(f64, usize)>) {
    v.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    v.truncate(TIGHTEST_CLASSES);
}

/// Tallies log `name` (see the module docs).
pub fn tally_classes(
    name: &str,
    q: &QuantisedClasses,
    fc: &FloatClasses,
    pairs: &PairBounds,
    ds: &Dataset,
) -> ClassLog {
    let k = q.class_count().min(MAX_CLASSES);
    let forms: Vec<RawForm> = fc
        .rows
        .iter()
        .map(|r| RawForm::new(ds, &r.weights, r.bias))
        .collect();
    let edges = margin_bin_edges(1.0);
    const CHUNK: usize = 1 << 14;
    let total = (0..ds.len().div_ceil(CHUNK))
        .into_par_iter()
        .map(|c| {
            let mut p = Part::new(k);
            for i in c * CHUNK..ds.len().min((c + 1) * CHUNK) {
                let u = check_unit(q, fc, &forms, pairs, ds, i);
                if u.device.is_none() {
                    p.faults += 1;
                } else {
                    if u.proved {
                        p.proved += 1;
                    } else {
                        p.unproved += 1;
                    }
                    p.min = p.min.min(u.multiple);
                    p.tight.push((u.multiple, i));
                    if p.tight.len() > 4 * TIGHTEST_CLASSES {
                        keep_tightest(&mut p.tight);
                    }
                }
                if u.flip {
                    p.flips += 1;
                    if p.flip_units.len() < FLIPS_LISTED {
                        p.flip_units.push(i);
                    }
                }
                match u.class {
                    Some(t) => {
                        p.confusion[t][u.column(k)] += 1;
                        if u.device.is_some() {
                            p.hist[t][margin_bin(&edges, u.multiple)] += 1;
                        }
                    }
                    None => p.unlabelled += 1,
                }
            }
            keep_tightest(&mut p.tight);
            p
        })
        .reduce(|| Part::new(k), Part::add);
    let class_units: Vec<u64> = total.confusion.iter().map(|r| r.iter().sum()).collect();
    let row_rates = total
        .confusion
        .iter()
        .zip(&class_units)
        .map(|(r, &n)| {
            r.iter()
                .map(|&c| Rate::new(c, n, DEFAULT_CONFIDENCE))
                .collect()
        })
        .collect();
    ClassLog {
        name: name.into(),
        units: ds.len(),
        class_units,
        confusion: total.confusion,
        row_rates,
        flips: total.flips,
        proved: total.proved,
        unproved: total.unproved,
        faults: total.faults,
        unlabelled: total.unlabelled,
        min_multiple: total.min.is_finite().then_some(total.min),
        margin_histogram: total.hist,
        flip_units: total.flip_units,
        tight: total.tight,
    }
}
