//! Working sets of the maximum-margin solvers: on a large log they solve on a few thousand
//! units, then one scan of every unit adds those the solution fails to account for.
//!
//! Here: the first set (`initial`, `working_set`) and the bounded keep of the scan
//! (`push_bounded`, `merge_bounded`), which picks the same units whatever the chunking of
//! the parallel scan.

use crate::train::task::Binary;

/// Initial working set: up to `per_class` units of each class, evenly spread through the log.
pub(crate) fn initial(task: Binary<'_>, idx: &[usize], per_class: usize) -> Vec<usize> {
    // Every `step`-th member of each class, in `idx` order, GO first: counted in one pass
    // and picked in another, without a list of each class's members (half a million
    // entries each on a large log).
    let go = idx.iter().filter(|&&i| task.signs[i] == 1).count();
    let nogo = idx.iter().filter(|&&i| task.signs[i] == -1).count();
    let mut out = Vec::with_capacity(2 * per_class);
    for (class, members) in [(1i8, go), (-1, nogo)] {
        let step = (members / per_class.max(1)).max(1);
        out.extend(
            idx.iter()
                .copied()
                .filter(|&i| task.signs[i] == class)
                .step_by(step)
                .take(per_class),
        );
    }
    out
}

/// Units per chunk of the solvers' parallel scans of every unit.
pub(crate) const SCAN_CHUNK: usize = 1 << 14;

/// `a` and `b` (each holding the smallest of their units, as [`push_bounded`] keeps them)
/// merged, keeping at least the `keep` smallest of both. How many more it keeps depends on
/// the merge order: callers sort and truncate to `keep`.
pub(crate) fn merge_bounded(
    mut a: Vec<(f64, usize)>,
    b: Vec<(f64, usize)>,
    keep: usize,
) -> Vec<(f64, usize)> {
    for item in b {
        push_bounded(&mut a, item, keep);
    }
    a
}

/// Pushes `item`, keeping only about the `keep` smallest once the vector doubles.
pub(crate) fn push_bounded(v: &mut Vec<(f64, usize)>, item: (f64, usize), keep: usize) {
    v.push(item);
    if v.len() >= 2 * keep {
        v.select_nth_unstable_by(keep, |a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        v.truncate(keep);
    }
}

/// Units in the hard-margin solver's first working set on large logs.
pub(crate) const WORKING_SET: usize = 16_000;

/// The first working set of the Wolfe solvers: every unit of a small log, else a few per
/// class from `initial`; and which units of `ds` are in it.
pub(crate) fn working_set(task: Binary<'_>, idx: &[usize]) -> (Vec<usize>, Vec<bool>) {
    let set: Vec<usize> = if idx.len() <= WORKING_SET {
        idx.to_vec()
    } else {
        initial(task, idx, WORKING_SET / 8)
    };
    let mut in_set = vec![false; task.ds.len()];
    set.iter().for_each(|&i| in_set[i] = true);
    (set, in_set)
}
