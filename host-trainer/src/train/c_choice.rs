//! Choosing the soft margin's penalty C: stratified, seeded k-fold cross-validation over a
//! grid, on a cost that weighs a false GO above a false NO-GO.
//!
//! Each C of the grid is trained on k − 1 folds and decides the fold it did not see; the
//! decisions of all folds are pooled and priced at `false_go_weight` per false GO and 1
//! per false NO-GO (a FAULT on a GO unit is a false NO-GO: the device shows NO-GO). The
//! cheapest C wins; of equal costs the largest C, which leaves the fewest training units
//! inside the margin. On a small log one split into folds is luck of the draw, so the
//! cross-validation is repeated on [`repeats`] differently seeded splits and the costs
//! pooled; each unit's held-out score is then its mean over the repeats. On a log above
//! [`SEARCH_LIMIT`] units the grid is searched on a stratified sample of that many (seeded),
//! and the chosen C is used on the whole log as it is.

use serde::{Deserialize, Serialize};

use crate::ingest::dataset::Dataset;
use crate::train::eval::{EvalRow, TrainConfig, TrainerKind, cross_validate};
use crate::train::task::AsBinary;

/// The grid searched by default: seven decades around C = 1, the penalty that suits
/// standard scores (each channel trained on its spread, see [`crate::train::spread`]).
pub const DEFAULT_GRID: [f64; 7] = [0.001, 0.01, 0.1, 1.0, 10.0, 100.0, 1000.0];

/// C where none is chosen (no folds to choose on).
pub const DEFAULT_C: f64 = 1.0;

/// A false GO costs this many false NO-GOs by default: a passed bad unit reaches a
/// customer, a failed good one costs a retest. Twice, not more, because C and the threshold
/// are chosen on held-out units that are few: a heavier weight moves the threshold by the
/// noise of a handful of NO-GO units and turns many GO units away (on overlapping real
/// signals, weight 5 tripled the false NO-GO for a third fewer false GO; README,
/// benchmarks). Set it with `--false-go-weight`; a hard requirement on false GO is
/// `--false-go-target`.
pub const DEFAULT_FALSE_GO_WEIGHT: f64 = 2.0;

/// Logs above this many units search the grid on a stratified sample of this size.
pub const SEARCH_LIMIT: usize = 20_000;

/// Cross-validation repeats on a log of `units` units: enough for about 2,000 held-out
/// decisions per C, from 1 (2,000 units or more) to 10.
pub fn repeats(units: usize) -> usize {
    2000usize.div_ceil(units.max(1)).clamp(1, 10)
}

/// How C is set.
#[derive(Clone, Debug, PartialEq)]
pub enum CPolicy {
    /// Chosen by cross-validation over this grid (ascending).
    Search(Vec<f64>),
    /// Given.
    Fixed(f64),
}

/// One C of the grid and its pooled out-of-fold decisions.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CRow {
    /// The penalty.
    pub c: f64,
    /// NO-GO units decided GO by the fold that did not train on them, over every repeat.
    pub false_go: usize,
    /// GO units decided NO-GO (or FAULT).
    pub false_nogo: usize,
    /// false_go_weight × false GO + false NO-GO.
    pub cost: f64,
}

/// What the search tried and why it chose its C; kept in the model's provenance.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CChoice {
    /// Folds.
    pub folds: usize,
    /// Seed of the folds (and of the sample).
    pub seed: u64,
    /// The weight of a false GO against a false NO-GO.
    pub false_go_weight: f64,
    /// Units the folds were drawn from: the log, or its stratified sample on a large log.
    pub searched_units: usize,
    /// Differently seeded splits into folds (seeds `seed`, `seed + 1`, …), costs pooled.
    pub repeats: usize,
    /// Every C tried, ascending.
    pub rows: Vec<CRow>,
    /// The chosen C.
    pub chosen: f64,
    /// One sentence a reviewer reads: why this C.
    pub reason: String,
}

/// The stratified sample a large log's grid is searched on: every unit of one of the log's
/// folds, so it keeps the class ratio and follows the seed. All units when the log is small.
pub fn search_sample(ds: &Dataset, seed: u64) -> Vec<usize> {
    if ds.len() <= SEARCH_LIMIT {
        return ds.all();
    }
    let parts = ds.len().div_ceil(SEARCH_LIMIT);
    ds.folds(parts, seed ^ 0x005e_edc5_a3c4).swap_remove(0)
}

/// Searches `grid` by `folds`-fold cross-validation of the maximum-margin trainer on `task`
/// (the caller passes the sample on a large log). Returns the choice and the chosen C's
/// pooled out-of-fold row, whose scores place the operating point.
pub fn choose_c(
    task: &impl AsBinary,
    folds: usize,
    grid: &[f64],
    false_go_weight: f64,
    cfg: TrainConfig,
    progress: Option<&indicatif::ProgressBar>,
) -> (CChoice, EvalRow) {
    let task = task.binary();
    let ds = task.ds;
    // Each C on the same folds: repeat r splits by seed + r.
    let reps = repeats(ds.len());
    let mut evaluated: Vec<(f64, Pooled)> = grid
        .iter()
        .map(|&c| {
            let runs: Vec<EvalRow> = (0..reps)
                .map(|r| {
                    let seed = cfg.seed.wrapping_add(r as u64);
                    cross_validate(
                        &task,
                        folds,
                        &[TrainerKind::MaxMargin],
                        TrainConfig { c, seed, ..cfg },
                        progress,
                    )
                    .swap_remove(0)
                })
                .collect();
            (c, pooled(runs, ds.len()))
        })
        .collect();
    let rows: Vec<CRow> = evaluated
        .iter()
        .map(|(c, r)| CRow {
            c: *c,
            false_go: r.pooled.false_go,
            false_nogo: r.pooled.false_nogo,
            cost: false_go_weight * r.pooled.false_go as f64 + r.pooled.false_nogo as f64,
        })
        .collect();
    // Cheapest; of equal costs the largest C (the grid ascends, so the last of the ties).
    let best = rows
        .iter()
        .enumerate()
        .fold(0, |b, (k, r)| if r.cost <= rows[b].cost { k } else { b });
    let chosen = rows[best].clone();
    let ties = rows.iter().filter(|r| r.cost == chosen.cost).count();
    let reason = format!(
        "C = {} had the lowest cross-validated cost of the {} tried ({} = {} × {} false GO + {} false NO-GO over {} held-out decisions: {} units in {} folds{}){}",
        chosen.c,
        rows.len(),
        chosen.cost,
        false_go_weight,
        chosen.false_go,
        chosen.false_nogo,
        ds.len() * reps,
        ds.len(),
        folds,
        if reps > 1 {
            format!(", {reps} differently seeded splits")
        } else {
            String::new()
        },
        if ties > 1 {
            format!("; {ties} values tied and the largest was taken")
        } else {
            String::new()
        }
    );
    let row = evaluated.swap_remove(best).1.first;
    (
        CChoice {
            folds,
            seed: cfg.seed,
            false_go_weight,
            searched_units: ds.len(),
            repeats: reps,
            rows,
            chosen: chosen.c,
            reason,
        },
        row,
    )
}

/// Several repeats of one trainer's cross-validation as one: the first repeat's counts (one
/// decision per unit, as a k-fold table states them), the counts of every repeat pooled
/// (for the cost), and each unit's held-out distance averaged over the repeats.
struct Pooled {
    first: EvalRow,
    pooled: crate::train::eval::Counts,
}

fn pooled(runs: Vec<EvalRow>, units: usize) -> Pooled {
    let mut total = crate::train::eval::Counts::default();
    let mut sum = vec![0.0f64; units];
    let mut seen = vec![0u32; units];
    for r in &runs {
        total.add(r.counts);
        for h in &r.held_out {
            if let (Some(s), Some(n)) = (sum.get_mut(h.unit), seen.get_mut(h.unit)) {
                *s += h.distance;
                *n += 1;
            }
        }
    }
    let mut runs = runs.into_iter();
    let mut first = runs.next().unwrap_or_else(|| EvalRow {
        trainer: TrainerKind::MaxMargin,
        counts: Default::default(),
        accuracy: 0.0,
        held_out: Vec::new(),
    });
    for h in &mut first.held_out {
        if let (Some(s), Some(&n)) = (sum.get(h.unit), seen.get(h.unit))
            && n > 0
        {
            h.distance = s / f64::from(n);
        }
    }
    Pooled {
        first,
        pooled: total,
    }
}

/// The folds the search used, as CSV (`repeat,fold,line,unit,label`; repeats and folds from
/// 1, the unit's line in the log and its id): so that anyone can train on the same folds
/// and check the choice.
pub fn fold_table(ds: &Dataset, choice: &CChoice) -> String {
    use std::fmt::Write as _;
    let sample = search_sample(ds, choice.seed);
    let sub = (sample.len() < ds.len()).then(|| ds.subset(&sample));
    let on = sub.as_ref().unwrap_or(ds);
    let mut out = String::from("repeat,fold,line,unit,label\n");
    for r in 0..choice.repeats {
        for (f, fold) in on
            .folds(choice.folds, choice.seed.wrapping_add(r as u64))
            .iter()
            .enumerate()
        {
            for &i in fold {
                let original = if sub.is_some() { sample[i] } else { i };
                let unit = match ds.unit_ids.get(original) {
                    Some(u) => u.to_string(),
                    None => String::new(),
                };
                let _ = writeln!(
                    out,
                    "{},{},{},{},{}",
                    r + 1,
                    f + 1,
                    ds.lines[original],
                    csv_field(&unit),
                    if ds.labels[original] > 0 {
                        "GO"
                    } else {
                        "NO-GO"
                    }
                );
            }
        }
    }
    out
}

/// A CSV field, quoted when it holds a comma, a quote or a line break.
fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// Parses `--c`: `auto` (search [`DEFAULT_GRID`]) or a positive number.
pub fn parse_policy(s: &str) -> Result<CPolicy, String> {
    if s.trim().eq_ignore_ascii_case("auto") {
        return Ok(CPolicy::Search(DEFAULT_GRID.to_vec()));
    }
    match s.trim().parse::<f64>() {
        Ok(c) if c.is_finite() && c > 0.0 => Ok(CPolicy::Fixed(c)),
        _ => Err(format!(
            "'{s}' is neither auto nor a positive number (e.g. --c auto, --c 1, --c 100)"
        )),
    }
}

/// Parses `--c-grid`: positive numbers separated by commas, at least two; sorted ascending.
pub fn parse_grid(s: &str) -> Result<Vec<f64>, String> {
    let mut grid = Vec::new();
    for part in s.split(',') {
        match part.trim().parse::<f64>() {
            Ok(c) if c.is_finite() && c > 0.0 => grid.push(c),
            _ => {
                return Err(format!(
                    "'{part}' in '{s}' is not a positive number (e.g. --c-grid 0.01,0.1,1,10,100)"
                ));
            }
        }
    }
    grid.sort_by(f64::total_cmp);
    grid.dedup();
    if grid.len() < 2 {
        return Err(format!("'{s}': a grid needs at least two values of C"));
    }
    Ok(grid)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn policies_and_grids_parse_or_say_why_not() {
        assert_eq!(
            parse_policy("auto").unwrap(),
            CPolicy::Search(DEFAULT_GRID.to_vec())
        );
        assert_eq!(parse_policy("10").unwrap(), CPolicy::Fixed(10.0));
        assert!(parse_policy("0").unwrap_err().contains("positive"));
        assert_eq!(parse_grid("10, 0.1,1,1").unwrap(), vec![0.1, 1.0, 10.0]);
        assert!(parse_grid("1").unwrap_err().contains("two"));
        assert!(parse_grid("1,x").unwrap_err().contains("'x'"));
    }
}
