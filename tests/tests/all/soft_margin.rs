//! The soft-margin trainer (`train --trainer max-margin`) and its cross-validated choice of
//! C against scikit-learn's `SVC(kernel="linear")`, i.e. libsvm (`tests/verify/soft_margin.py`,
//! no shared code), on the data sets bundled with scikit-learn: breast cancer, wine
//! (class 0 against 1 and 2) and iris (versicolor against virginica). For C = 0.01 … 10 on
//! a stratified 70 % split: the standard scores' spread against `StandardScaler`, the
//! primal objective against libsvm's solution (relative 1e-4, and never above it), the
//! direction (cosine ≥ 0.9999) and the held-out 30 %'s decisions; for `--c auto`, on the
//! folds `--cv-output` wrote: libsvm's pooled false GO / false NO-GO per C of the grid
//! (at most 1 apart per repeat) and the chosen C.

#[test]
fn soft_margin_agrees_with_libsvm() {
    let what = "soft margin and choice of C against scikit-learn's SVC (libsvm)";
    let bin = crate::c_api::linegate_bin();
    let dir = tempfile::tempdir().unwrap();
    let Some((code, text)) = crate::python_check(
        what,
        "soft_margin.py",
        &[bin.as_os_str(), dir.path().as_os_str()],
        dir.path(),
    ) else {
        return;
    };
    match code {
        Some(0) => {
            // 3 sets × 4 values of C × 8 checks, and per set the folds file, the choice
            // among the product's own rows, the chosen C and 3 checks per C of the grid.
            let summary = text
                .lines()
                .find(|l| l.ends_with(" checks, 0 disagreeing"))
                .unwrap_or_else(|| panic!("no summary line:\n{text}"));
            let checks: usize = summary.split(' ').next().unwrap().parse().unwrap();
            assert!(checks >= 3 * (4 * 8 + 3 + 3 * 7), "{text}");
            println!("{}", text.trim());
        }
        _ => panic!("the soft margin disagrees with scikit-learn's SVC:\n{text}"),
    }
}
