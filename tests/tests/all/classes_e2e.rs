//! Models of several classes end to end on real data (`tests/verify/classes_e2e.py`):
//! scikit-learn's bundled wine and iris sets, stratified 70/30 over five seeds, trained,
//! audited, packed and replayed by the CLI against scikit-learn's LinearSVC on the same
//! splits (accuracy, confusion, the audit's flips); then one wine blob and one iris blob the
//! CLI packed run on the five QEMU cores, whose lines must equal `replay --form device`.

use std::path::Path;
use std::process::Command;

fn replay(bin: &Path, dir: &Path, rule: &str) -> (Vec<u8>, Vec<String>, Vec<Vec<i32>>) {
    let vectors = dir.join(format!("{rule}.vectors"));
    let o = Command::new(bin)
        .args(["--no-project", "-q", "replay", "test.csv", "--model"])
        .arg(format!("{rule}.json"))
        .arg("--blob")
        .arg(format!("{rule}.lgmb"))
        .args(["--form", "device", "--force", "--vectors"])
        .arg(&vectors)
        .current_dir(dir)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let lines: Vec<String> = String::from_utf8(o.stdout)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(String::from)
        .collect();
    let rows: Vec<Vec<i32>> = std::fs::read_to_string(&vectors)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(|l| l.split(' ').map(|v| v.parse().unwrap()).collect())
        .collect();
    let blob = std::fs::read(dir.join(format!("{rule}.lgmb"))).unwrap();
    (blob, lines, rows)
}

#[test]
fn class_models_on_wine_and_iris_against_linear_svc_and_on_five_cores() {
    let what = "models of several classes against scikit-learn's LinearSVC (classes_e2e.py)";
    let bin = crate::c_api::linegate_bin();
    let tmp = tempfile::tempdir().unwrap();
    let Some((code, text)) = crate::python_check(
        what,
        "classes_e2e.py",
        &[bin.as_os_str(), tmp.path().as_os_str()],
        tmp.path(),
    ) else {
        return;
    };
    println!("{}", text.trim());
    assert_eq!(code, Some(0), "{text}");
    let summary = text
        .lines()
        .find(|l| l.ends_with(" disagreeing"))
        .unwrap_or_else(|| panic!("no summary line:\n{text}"));
    let checks: usize = summary.split(' ').next().unwrap().parse().unwrap();
    // 2 sets × 5 seeds × 2 rules × (2 logs' flips + labels + confusion), and the means
    // (joint on both sets, both rules on wine).
    assert!(checks >= 2 * 5 * 2 * 4 + 4, "{text}");
    // The device: a blob the CLI packed from real data, on five cores, line for line with
    // replay (the host kernel's lines are checked against replay's first).
    for (set, rule) in [("wine-0", "joint"), ("iris-0", "one-vs-rest")] {
        let dir = tmp.path().join(set);
        let (blob, lines, rows) = replay(&bin, &dir, rule);
        assert_eq!(blob[4], 5, "{set} {rule}: a version-5 blob");
        assert_eq!(
            crate::device_classes::expected_lines(&blob, &rows),
            lines,
            "{set} {rule}: the host kernel's lines are replay's"
        );
        for run in crate::device_classes::on_five_cores(&blob, &rows) {
            eprintln!(
                "{}: {set} {rule}: {} units as replay prints them",
                run.core,
                rows.len()
            );
        }
    }
}
