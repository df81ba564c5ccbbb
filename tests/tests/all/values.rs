//! `linegate values` against an outside reference: `tests/verify/values.py` recomputes every
//! listed raw integer and scaled input with numpy from the logs' physical readings, the
//! model file's scaling and the blob decoded from FORMAT.md, every feature as
//! `features.py` does (exact integers, math.isqrt, numpy), every score and verdict, and
//! compares each unit's line with `linegate replay`'s. Run on the demo's bench and signal
//! logs (FAULT units of both kinds included) and on scikit-learn's bundled breast-cancer
//! set trained with `linegate train`.

use std::path::Path;
use std::process::Command;

const WHAT: &str = "linegate values against numpy (tests/verify/values.py)";

fn run(bin: &Path, dir: &Path, args: &[&str]) -> Vec<u8> {
    let o = Command::new(bin)
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "linegate {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    o.stdout
}

/// `values --csv` and `replay` of `log` with `model` and `blob` into `dir`, then the check;
/// `None` when Python or numpy is missing (reported), else the check's summary line.
fn checked(bin: &Path, dir: &Path, model: &str, blob: &str, log: &str) -> Option<String> {
    let stem = log.replace(['/', '.'], "-");
    let csv = format!("values-{stem}.csv");
    let txt = format!("replay-{stem}.txt");
    let args = ["--model", model, "--blob", blob, log];
    let values = run(bin, dir, &[&["values", "-q", "--csv"][..], &args].concat());
    std::fs::write(dir.join(&csv), values).unwrap();
    let replay = run(
        bin,
        dir,
        &[&["replay", "-q", "--form", "device"][..], &args].concat(),
    );
    std::fs::write(dir.join(&txt), replay).unwrap();
    let (code, text) = python(dir, &["check", blob, model, log, &csv, &txt])?;
    assert_eq!(code, Some(0), "{log}: values disagree with numpy:\n{text}");
    assert!(text.contains(": 0 disagreeing"), "{text}");
    Some(text.trim().to_string())
}

/// Runs values.py in `dir`: its exit code and output, or `None` (SKIPPED) without
/// Python, numpy or scikit-learn.
fn python(dir: &Path, args: &[&str]) -> Option<(Option<i32>, String)> {
    let args: Vec<&std::ffi::OsStr> = args.iter().map(std::ffi::OsStr::new).collect();
    crate::python_check(WHAT, "values.py", &args, dir)
}

#[test]
fn values_agree_with_numpy_on_the_demo_and_breast_cancer() {
    let bin = crate::c_api::linegate_bin();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    run(&bin, d, &["-q", "demo", "--out-dir", "demo"]);
    // A holdout unit with a supply current past the sheet's 900 mA: a FAULT ch0 unit.
    let holdout = std::fs::read_to_string(d.join("demo/holdout-synthetic.csv")).unwrap();
    let mut lines: Vec<String> = holdout.lines().map(String::from).collect();
    let cells: Vec<&str> = lines[5].split(',').collect();
    let mut cells: Vec<String> = cells.iter().map(|c| c.to_string()).collect();
    cells[2] = "1250.0".into();
    lines[5] = cells.join(",");
    std::fs::write(d.join("demo/holdout-fault.csv"), lines.join("\n") + "\n").unwrap();

    let mut summaries = Vec::new();
    for (model, blob, log) in [
        (
            "demo/model.json",
            "demo/model.lgmb",
            "demo/holdout-synthetic.csv",
        ),
        (
            "demo/model.json",
            "demo/model.lgmb",
            "demo/holdout-fault.csv",
        ),
        (
            "demo/model.json",
            "demo/model.lgmb",
            "demo/drift-synthetic.csv",
        ),
        (
            "demo/signal-model.json",
            "demo/signal-model.lgmb",
            "demo/signal-field-synthetic.csv",
        ),
        (
            "demo/signal-model.json",
            "demo/signal-model.lgmb",
            "demo/signal-holdout-synthetic.csv",
        ),
    ] {
        let Some(s) = checked(&bin, d, model, blob, log) else {
            return;
        };
        summaries.push(format!("{log}: {s}"));
    }
    assert!(summaries[1].contains("(1 FAULT units)"), "{summaries:?}");
    assert!(!summaries[3].contains("(0 FAULT units)"), "{summaries:?}");

    // The check catches a changed number: one scaled input off by one.
    let csv = std::fs::read_to_string(d.join("values-demo-holdout-synthetic-csv.csv")).unwrap();
    let mut rows: Vec<String> = csv.lines().map(String::from).collect();
    let mut cells: Vec<String> = rows[3].split(',').map(String::from).collect();
    cells[9] = (cells[9].parse::<i64>().unwrap() + 1).to_string();
    rows[3] = cells.join(",");
    std::fs::write(d.join("damaged.csv"), rows.join("\n") + "\n").unwrap();
    let Some((code, text)) = python(
        d,
        &[
            "check",
            "demo/model.lgmb",
            "demo/model.json",
            "demo/holdout-synthetic.csv",
            "damaged.csv",
            "replay-demo-holdout-synthetic-csv.txt",
        ],
    ) else {
        return;
    };
    assert_eq!(code, Some(1), "a changed scaled input went unseen:\n{text}");
    assert!(text.contains("scaled"), "{text}");

    // scikit-learn's bundled breast-cancer set (load_breast_cancer), written to CSV by the
    // check, trained and packed by linegate; its copy with one reading ten times too large.
    let Some((code, text)) = python(d, &["cancer", "bc.csv"]) else {
        return;
    };
    assert_eq!(code, Some(0), "{text}");
    run(&bin, d, &["-q", "train", "bc.csv", "-o", "bc.json"]);
    run(
        &bin,
        d,
        &[
            "-q",
            "pack",
            "--model",
            "bc.json",
            "--train",
            "bc.csv",
            "-o",
            "bc.lgmb",
            "--override-audit",
        ],
    );
    for log in ["bc.csv", "bc-fault.csv"] {
        let Some(s) = checked(&bin, d, "bc.json", "bc.lgmb", log) else {
            return;
        };
        summaries.push(format!("{log}: {s}"));
    }
    assert!(
        summaries[5].starts_with("bc.csv: 569 units x 30 channels"),
        "{summaries:?}"
    );
    assert!(summaries[6].contains("(1 FAULT units)"), "{summaries:?}");
    println!("{}", summaries.join("\n"));
}
