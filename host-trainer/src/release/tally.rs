//! One log's audit pass: every unit through the device kernel (`shared_model`), counted
//! against its label and against the float model, in named steps (fault, rounding error,
//! decision, flip, margin against the bound, noise risk, tightest units), in parallel
//! chunks merged in file order.

use rayon::prelude::*;
use shared_model::{FixedModel, Verdict};

use crate::ingest::dataset::{Dataset, RawForm};
use crate::release::audit_report::SetSummary;
use crate::release::bound::{
    MARGIN_BINS, ROUNDING_BINS, add_counts, count_in, margin_bin, margin_bin_edges, rounding_bin,
    rounding_bin_edges,
};
use crate::release::quantise::{Quantised, fixed_margin};
use crate::train::float_model::FloatModel;

/// Units closest to the boundary kept per log.
pub(super) const TIGHTEST: usize = 20;
/// Units at risk from declared noise listed per log.
pub(super) const AT_RISK: usize = 1000;
/// Units behind the decision gates listed per log.
pub(super) const WRONG: usize = 200;

/// Where a model's decisions change, in accumulator LSB: its edges (GO from `go_min`, NO-GO
/// up to `nogo_max`) and how far each lies beyond the float threshold.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Edges {
    /// How far the GO edge (`go_min` − ½) lies beyond ⌊A·t⌋ + ½, where it sits without a
    /// RECHECK band (0 without one).
    go_past: f64,
    /// How far the NO-GO edge (`nogo_max` + ½) lies below ⌊A·t⌋ + ½ (0 without a band).
    nogo_past: f64,
    /// NO-GO at or below.
    nogo_max: i64,
    /// GO at or above.
    go_min: i64,
}

impl Edges {
    /// The edges of a model with thresholds `nogo_max` and `go_min` whose float threshold is
    /// `threshold_acc` = A·t.
    fn new(threshold_acc: f64, nogo_max: i64, go_min: i64) -> Self {
        let t_floor = threshold_acc.floor();
        Self {
            go_past: (go_min as f64 - 1.0 - t_floor).max(0.0),
            nogo_past: (t_floor - nogo_max as f64).max(0.0),
            nogo_max,
            go_min,
        }
    }

    /// How far a unit's own decision edge lies beyond the float threshold: rounding swaps a
    /// decision only across the float threshold, so this adds to its margin.
    fn past(&self, go_unit: bool) -> f64 {
        if go_unit {
            self.go_past
        } else {
            self.nogo_past
        }
    }

    /// How far a score may move before the opposite decision: a GO from nogo_max + ½, a
    /// NO-GO from go_min − ½ (the edges the margins are measured from); a RECHECK has no
    /// decision to swap.
    fn room(&self, verdict: Verdict, score: i64) -> f64 {
        match verdict {
            Verdict::Go => score as f64 - (self.nogo_max as f64 + 0.5),
            Verdict::NoGo => (self.go_min as f64 - 0.5) - score as f64,
            Verdict::Recheck => f64::INFINITY,
        }
    }
}

/// One log's counts so far (of a chunk of its units, or of all once merged).
pub(super) struct Tally {
    /// The figures the report shows.
    pub(super) s: SetSummary,
    /// The margin histogram's bin edges.
    edges: [f64; MARGIN_BINS - 1],
    /// Smallest float margin over correctly classified units, in LSB.
    pub(super) float_min: f64,
    /// Units whose decision flipped, with their margin.
    pub(super) flips: Vec<(usize, f64)>,
    /// The units closest to the boundary, by margin then file order.
    pub(super) tight: Vec<(f64, usize)>,
    /// The rounding-error histogram's bin edges.
    rounding_edges: [f64; ROUNDING_BINS - 1],
    /// Units at risk from declared noise, in all of the log (`at_risk` keeps the first).
    pub(super) at_risk_count: usize,
    /// Smallest fixed margin over float-correct decided units.
    pub(super) min_fixed_abs: f64,
    /// Units whose verdict declared noise could change, in file order (at most `AT_RISK`).
    pub(super) at_risk: Vec<usize>,
    /// False GO, false NO-GO and noise-unsafe units, in file order (at most `WRONG`).
    pub(super) wrong: Vec<usize>,
}

impl Tally {
    /// Nothing counted yet, for the log `name` read as `ds`, against the rounding `bound`.
    fn new(name: &str, ds: &Dataset, bound: f64) -> Self {
        Self::with(
            SetSummary {
                name: name.into(),
                path: ds.name().display().to_string(),
                sha256: ds.sha256.clone(),
                files: ds.parts.clone(),
                skipped_rows: ds.skipped.total,
                ..Default::default()
            },
            bound,
        )
    }

    /// Nothing counted yet into `s`, against the rounding `bound`.
    fn with(s: SetSummary, bound: f64) -> Self {
        Self {
            s,
            float_min: f64::INFINITY,
            edges: margin_bin_edges(bound),
            flips: Vec::new(),
            tight: Vec::new(),
            rounding_edges: rounding_bin_edges(bound),
            at_risk_count: 0,
            min_fixed_abs: f64::INFINITY,
            at_risk: Vec::new(),
            wrong: Vec::new(),
        }
    }

    /// Adds the counts of the chunk after this one (chunks merge in file order, so the
    /// first units of the log are the ones listed).
    fn merge(mut self, b: Self) -> Self {
        let a = &mut self;
        Self::merge_summary(&mut a.s, &b.s);
        a.at_risk_count += b.at_risk_count;
        a.flips.extend(b.flips);
        a.tight.extend(b.tight);
        sort_tightest(&mut a.tight, |t| t.1);
        a.min_fixed_abs = a.min_fixed_abs.min(b.min_fixed_abs);
        a.float_min = a.float_min.min(b.float_min);
        a.at_risk.extend(b.at_risk);
        a.at_risk.truncate(AT_RISK);
        a.wrong.extend(b.wrong);
        a.wrong.truncate(WRONG);
        self
    }

    /// Adds the counts, histograms and extremes of `s` into `a` (the figures that are sums,
    /// minima or maxima over units; the log's name, files and skipped rows are the caller's).
    pub(super) fn merge_summary(a: &mut SetSummary, s: &SetSummary) {
        a.units += s.units;
        a.float_correct += s.float_correct;
        a.fixed_correct += s.fixed_correct;
        a.flips += s.flips;
        a.faults += s.faults;
        a.recheck += s.recheck;
        a.recheck_go += s.recheck_go;
        a.false_go += s.false_go;
        a.false_nogo += s.false_nogo;
        a.noise_unsafe += s.noise_unsafe;
        a.within_bound += s.within_bound;
        add_counts(&mut a.margin_histogram, s.margin_histogram.clone());
        add_counts(&mut a.rounding_histogram, s.rounding_histogram.clone());
        a.rounding_max_lsb = a.rounding_max_lsb.max(s.rounding_max_lsb);
        a.min_margin_lsb = match (a.min_margin_lsb, s.min_margin_lsb) {
            (Some(x), Some(y)) => Some(x.min(y)),
            (x, y) => x.or(y),
        };
    }

    /// Notes a unit behind a decision gate (the first `WRONG` of a log are kept, each once).
    fn note_wrong(&mut self, i: usize) {
        if self.wrong.len() < WRONG && self.wrong.last() != Some(&i) {
            self.wrong.push(i);
        }
    }

    /// A reading the kernel refused: the device shows NO-GO, wrong for a GO unit (a false
    /// NO-GO), safe for a NO-GO one.
    fn count_fault(&mut self, i: usize, go_unit: bool) {
        self.s.faults += 1;
        if go_unit {
            self.s.false_nogo += 1;
            self.note_wrong(i);
        }
    }

    /// The rounding error of a scored unit, fixed score − A·float score in LSB: the quantity
    /// the bound bounds.
    fn count_rounding(&mut self, err: f64) {
        let bin = rounding_bin(&self.rounding_edges, err);
        count_in(&mut self.s.rounding_histogram, ROUNDING_BINS, bin);
        self.s.rounding_max_lsb = self.s.rounding_max_lsb.max(err.abs());
    }

    /// A decided unit's distance from the float threshold (its margin plus its edge's
    /// distance beyond the threshold), the quantity the bound is compared with.
    fn count_margin_bin(&mut self, distance: f64) {
        let bin = margin_bin(&self.edges, distance);
        count_in(&mut self.s.margin_histogram, MARGIN_BINS, bin);
    }

    /// The device's verdict against the label. A RECHECK is a retest: no decision, so
    /// neither right nor wrong.
    fn count_verdict(&mut self, i: usize, verdict: Verdict, go_unit: bool, margin: f64) {
        let decided = verdict != Verdict::Recheck;
        self.s.fixed_correct += usize::from(decided && margin > 0.0);
        self.s.recheck += usize::from(!decided);
        self.s.recheck_go += usize::from(!decided && go_unit);
        match (verdict, go_unit) {
            (Verdict::Go, false) => {
                self.s.false_go += 1;
                self.note_wrong(i);
            }
            (Verdict::NoGo, true) => {
                self.s.false_nogo += 1;
                self.note_wrong(i);
            }
            _ => {}
        }
    }

    /// A float-correct decided unit's margin against the rounding `bound`; `past`: its
    /// edge's distance beyond the float threshold.
    fn count_against_bound(&mut self, margin: f64, past: f64, bound: f64) {
        self.s.min_margin_lsb = Some(self.s.min_margin_lsb.map_or(margin, |v| v.min(margin)));
        self.s.within_bound += usize::from(margin + past <= bound);
        self.min_fixed_abs = self.min_fixed_abs.min(margin);
    }

    /// Declared noise of radius `risk` LSB: a unit is at risk when its margin is within the
    /// radius, and noise-unsafe (a gate) when its GO/NO-GO could be swapped (`room`).
    fn count_noise(&mut self, i: usize, margin: f64, room: f64, risk: f64) {
        if margin.abs() <= risk {
            self.at_risk_count += 1;
            if self.at_risk.len() < AT_RISK {
                self.at_risk.push(i);
            }
        }
        if room <= risk {
            self.s.noise_unsafe += 1;
            self.note_wrong(i);
        }
    }

    /// Keeps unit `i` among the `TIGHTEST` closest to the boundary.
    fn keep_tightest(&mut self, i: usize, margin: f64) {
        if self.tight.len() < TIGHTEST || margin < self.tight.last().map_or(f64::INFINITY, |t| t.0)
        {
            self.tight.push((margin, i));
            sort_tightest(&mut self.tight, |t| t.1);
        }
    }
}

/// Orders the tightest units by margin, then place in the log (`place`), and keeps the first
/// `TIGHTEST`.
pub(super) fn sort_tightest<T, K: Ord>(tight: &mut Vec<(f64, T)>, place: impl Fn(&(f64, T)) -> K) {
    tight.sort_by(|x, y| x.0.total_cmp(&y.0).then_with(|| place(x).cmp(&place(y))));
    tight.truncate(TIGHTEST);
}

/// What every unit of one log is measured with.
struct Pass<'a> {
    q: &'a Quantised,
    fm: &'a FloatModel,
    ds: &'a Dataset,
    /// The float model on raw readings.
    float: RawForm,
    model: &'a FixedModel,
    edges: Edges,
    bound: f64,
    risk: Option<f64>,
}

impl Pass<'_> {
    /// Counts unit `i` into `a`, step by step.
    fn visit(&self, a: &mut Tally, i: usize) {
        let raw = self.ds.raw_row(i);
        let label = self.ds.labels[i];
        let go_unit = label > 0;
        a.s.units += 1;
        let Ok(d) = self.q.model.classify(raw) else {
            a.count_fault(i, go_unit);
            return;
        };
        let fs = self.float.score(raw);
        a.count_rounding(d.score as f64 - fs * self.q.scale);
        let float_go = fs > self.fm.threshold;
        let float_ok = float_go == go_unit;
        a.s.float_correct += usize::from(float_ok);
        if float_ok {
            a.float_min = a
                .float_min
                .min(f64::from(label) * (fs - self.fm.threshold) * self.q.scale);
        }
        let margin = fixed_margin(self.model, d.score, label);
        let decided = d.verdict != Verdict::Recheck;
        let past = self.edges.past(go_unit);
        if decided {
            a.count_margin_bin(margin + past);
        }
        a.count_verdict(i, d.verdict, go_unit, margin);
        let float_verdict = if float_go { Verdict::Go } else { Verdict::NoGo };
        // With a RECHECK band a RECHECK is not a flip; a GO/NO-GO swap is.
        if decided && d.verdict != float_verdict {
            a.s.flips += 1;
            a.flips.push((i, margin));
        }
        // The margin and guarantee figures are about decisions the float model got right.
        if float_ok && decided {
            a.count_against_bound(margin, past, self.bound);
        }
        if let Some(r) = self.risk {
            a.count_noise(i, margin, self.edges.room(d.verdict, d.score), r);
        }
        a.keep_tightest(i, margin);
    }
}

/// Audits one log with the shared kernel, in parallel over chunks of units.
/// `risk`: the score change declared noise can cause, if any noise is declared.
pub(super) fn tally(
    name: &str,
    q: &Quantised,
    fm: &FloatModel,
    ds: &Dataset,
    bound: f64,
    risk: Option<f64>,
) -> Tally {
    let model = q.model.model();
    let pass = Pass {
        q,
        fm,
        ds,
        float: RawForm::new(ds, &fm.weights, fm.bias),
        model,
        edges: Edges::new(fm.threshold * q.scale, model.nogo_max, model.go_min),
        bound,
        risk,
    };
    // Chunks of units, each folded into its own tally in place: a fold that passes the
    // tally by value copied its several hundred bytes once per unit.
    const CHUNK: usize = 1 << 16;
    (0..ds.len().div_ceil(CHUNK))
        .into_par_iter()
        .map(|c| {
            let mut a = Tally::new(name, ds, bound);
            for i in c * CHUNK..ds.len().min((c + 1) * CHUNK) {
                pass.visit(&mut a, i);
            }
            a
        })
        .reduce(|| Tally::new(name, ds, bound), Tally::merge)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn empty(bound: f64) -> Tally {
        Tally::with(SetSummary::default(), bound)
    }

    /// By hand: A·t = 10.3, so ⌊A·t⌋ + ½ = 10.5. Without a band (nogo_max 10, go_min 11) both
    /// edges sit there: 0 past. With nogo_max 7 and go_min 14 the GO edge 13.5 lies 3 beyond
    /// and the NO-GO edge 7.5 lies 3 below.
    #[test]
    fn edges_beyond_the_float_threshold_worked_by_hand() {
        let plain = Edges::new(10.3, 10, 11);
        assert_eq!((plain.go_past, plain.nogo_past), (0.0, 0.0));
        let banded = Edges::new(10.3, 7, 14);
        assert_eq!((banded.go_past, banded.nogo_past), (3.0, 3.0));
        assert_eq!((banded.past(true), banded.past(false)), (3.0, 3.0));
        // A negative threshold floors downwards: −2.5 → ⌊⌋ = −3, edge −2.5; go_min 0 lies 2
        // beyond (−0.5 against −2.5), nogo_max −6 lies 3 below (−5.5).
        let low = Edges::new(-2.5, -6, 0);
        assert_eq!((low.go_past, low.nogo_past), (2.0, 3.0));
    }

    /// By hand, with nogo_max 7 and go_min 14: a GO at 20 may fall 12.5 (to 7.5), a NO-GO at
    /// 5 may rise 8.5 (to 13.5); a RECHECK has nothing to swap.
    #[test]
    fn room_before_the_opposite_decision_worked_by_hand() {
        let e = Edges::new(10.3, 7, 14);
        assert_eq!(e.room(Verdict::Go, 20), 12.5);
        assert_eq!(e.room(Verdict::NoGo, 5), 8.5);
        assert_eq!(e.room(Verdict::Recheck, 10), f64::INFINITY);
    }

    /// A faulted GO unit is a false NO-GO listed once; a faulted NO-GO unit only a fault.
    #[test]
    fn faults_count_against_go_units_only() {
        let mut a = empty(1.0);
        a.count_fault(3, true);
        a.count_fault(4, false);
        assert_eq!((a.s.faults, a.s.false_nogo), (2, 1));
        assert_eq!(a.wrong, vec![3]);
    }

    /// Verdicts against labels: a GO on a NO-GO unit is a false GO, a NO-GO on a GO unit a
    /// false NO-GO, a RECHECK neither (but counted, and among GO units when it is one); a
    /// unit noted twice (false GO, then noise-unsafe) is listed once.
    #[test]
    fn verdicts_count_against_labels() {
        let mut a = empty(1.0);
        a.count_verdict(0, Verdict::Go, true, 4.0);
        a.count_verdict(1, Verdict::Go, false, -2.0);
        a.count_verdict(2, Verdict::NoGo, true, -1.0);
        a.count_verdict(3, Verdict::Recheck, true, 0.5);
        a.count_verdict(4, Verdict::Recheck, false, 0.5);
        assert_eq!((a.s.fixed_correct, a.s.false_go, a.s.false_nogo), (1, 1, 1));
        assert_eq!((a.s.recheck, a.s.recheck_go), (2, 1));
        a.count_noise(2, -1.0, 0.5, 1.0);
        assert_eq!(a.wrong, vec![1, 2]);
        assert_eq!((a.s.noise_unsafe, a.at_risk_count), (1, 1));
    }

    /// Against a bound of 2: margins 1 (+ 1 past: at the bound, inside) and 1.5 (+ 0) are
    /// within it, 3 is not; the smallest margin is 1.
    #[test]
    fn margins_within_the_bound_count_their_edge() {
        let mut a = empty(2.0);
        a.count_against_bound(1.0, 1.0, 2.0);
        a.count_against_bound(1.5, 0.0, 2.0);
        a.count_against_bound(3.0, 0.0, 2.0);
        assert_eq!(a.s.within_bound, 2);
        assert_eq!(a.s.min_margin_lsb, Some(1.0));
        assert_eq!(a.min_fixed_abs, 1.0);
    }

    /// Two chunks merged in file order: counts add, lists keep file order, the tightest
    /// units sort by margin then index.
    #[test]
    fn chunks_merge_in_file_order() {
        let mut a = empty(1.0);
        a.count_rounding(0.25);
        a.keep_tightest(0, 5.0);
        a.count_fault(1, true);
        let mut b = empty(1.0);
        b.count_rounding(-3.0);
        b.keep_tightest(7, 5.0);
        b.keep_tightest(8, -1.0);
        b.count_fault(9, true);
        let m = a.merge(b);
        assert_eq!(m.s.faults, 2);
        assert_eq!(m.wrong, vec![1, 9]);
        assert_eq!(m.tight, vec![(-1.0, 8), (5.0, 0), (5.0, 7)]);
        assert_eq!(m.s.rounding_max_lsb, 3.0);
        let h = &m.s.rounding_histogram;
        assert_eq!((h[0], h[13], h.iter().sum::<u64>()), (1, 1, 2));
    }
}
