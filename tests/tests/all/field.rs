//! Scoring field logs and comparing releases, against outside references
//! (`tests/verify/field.py`): `replay`'s four forms read back by Python's csv module,
//! pandas and Python's json; `compare`'s change list against a pandas join of the two
//! releases' `replay --form csv` outputs on unit id, its Clopper–Pearson bounds against
//! scipy.stats.beta (and statsmodels' proportion_confint(method="beta")), its margin
//! shift against numpy, and score / scale against the float model's score recomputed
//! from the logs.

use std::path::Path;
use std::process::{Command, Output};

const WHAT: &str = "replay forms and compare against pandas/scipy (tests/verify/field.py)";

fn linegate(bin: &Path, dir: &Path, args: &[&str]) -> Output {
    Command::new(bin)
        .arg("--no-project")
        .arg("-q")
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap()
}

/// Runs `args`, expects exit `code`, returns stdout.
fn run(bin: &Path, dir: &Path, args: &[&str], code: i32) -> Vec<u8> {
    let o = linegate(bin, dir, args);
    assert_eq!(
        o.status.code(),
        Some(code),
        "linegate {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    o.stdout
}

fn python(dir: &Path, args: &[&str]) -> Option<(Option<i32>, String)> {
    let args: Vec<&std::ffi::OsStr> = args.iter().map(std::ffi::OsStr::new).collect();
    crate::python_check(WHAT, "field.py", &args, dir)
}

const LOGS: [&str; 3] = [
    "demo/train-synthetic.csv",
    "demo/holdout-synthetic.csv",
    "demo/drift-synthetic.csv",
];

#[test]
fn replay_forms_read_back_by_python_csv_pandas_and_json() {
    let bin = crate::c_api::linegate_bin();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    run(&bin, d, &["demo", "--out-dir", "demo"], 0);
    // A holdout copy with a FAULT row (supply current past the sheet's 900 mA) and a unit
    // id that needs quoting in CSV and in the text form.
    let text = std::fs::read_to_string(d.join("demo/holdout-synthetic.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let mut cells: Vec<String> = lines[5].split(',').map(String::from).collect();
    cells[2] = "1250.0".into();
    lines[5] = cells.join(",");
    lines[7] = lines[7].replacen("FAN-C00005", "\"FAN \"\"C\"\", 5\"", 1);
    std::fs::write(d.join("fault.csv"), lines.join("\n") + "\n").unwrap();
    let mut sets = vec![(
        vec!["--model", "demo/model.json", "--blob", "demo/model.lgmb"],
        vec!["fault.csv", "demo/drift-synthetic.csv"],
    )];
    sets.push((
        vec![
            "--model",
            "demo/signal-model.json",
            "--blob",
            "demo/signal-model.lgmb",
        ],
        vec!["demo/signal-field-synthetic.csv"],
    ));
    for (k, (release, logs)) in sets.iter().enumerate() {
        let mut names = Vec::new();
        for form in ["device", "text", "csv", "json"] {
            let args = [&["replay", "--form", form][..], release, logs].concat();
            let name = format!("forms-{k}.{form}");
            std::fs::write(d.join(&name), run(&bin, d, &args, 0)).unwrap();
            names.push(name);
        }
        let args: Vec<&str> = ["forms"]
            .into_iter()
            .chain(names.iter().map(String::as_str))
            .collect();
        let Some((code, out)) = python(d, &args) else {
            return;
        };
        assert_eq!(code, Some(0), "{out}");
        println!("{out}");
        if k == 0 {
            assert!(out.contains("(1 FAULT units, 800 with ids)"), "{out}");
        } else {
            assert!(!out.contains("(0 FAULT units"), "{out}");
        }
    }
}

#[test]
fn compare_lists_exactly_the_units_a_pandas_join_finds_and_gates_nogo_to_go() {
    let bin = crate::c_api::linegate_bin();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    run(&bin, d, &["demo", "--out-dir", "demo"], 0);
    // The retrained model: another trainer (averaged perceptron) on the same training
    // log, packed at the default word lengths with its trained RECHECK band (the audit's
    // noise gate overridden, as a candidate under review may be).
    run(
        &bin,
        d,
        &[
            "train",
            "demo/train-synthetic.csv",
            "--sheet",
            "demo/channels.toml",
            "--trainer",
            "averaged",
            "-o",
            "v2.json",
        ],
        0,
    );
    run(
        &bin,
        d,
        &[
            "pack",
            "--model",
            "v2.json",
            "--train",
            "demo/train-synthetic.csv",
            "--holdout",
            "demo/holdout-synthetic.csv",
            "--override-audit",
            "-o",
            "v2.lgmb",
        ],
        0,
    );
    let first = ["--model", "demo/model.json", "--blob", "demo/model.lgmb"];
    let second = ["--model", "v2.json", "--blob", "v2.lgmb"];
    for (release, out) in [(&first, "a.csv"), (&second, "b.csv")] {
        let args = [&["replay", "--form", "csv"][..], &release[..], &LOGS].concat();
        std::fs::write(d.join(out), run(&bin, d, &args, 0)).unwrap();
    }
    // compare's own names for the candidate: --against, --against-blob.
    let against = |r: &[&'static str; 4]| ["--against", r[1], "--against-blob", r[3]];
    let mut summaries = Vec::new();
    for (a, b, a_csv, b_csv, code, tag) in [
        (first, second, "a.csv", "b.csv", 0, "forward"),
        (second, first, "b.csv", "a.csv", 1, "back"),
    ] {
        let changes = format!("changes-{tag}.csv");
        let json = format!("compare-{tag}.json");
        let report = format!("report-{tag}.md");
        let b_flags = against(&b);
        let args = [
            &["compare"][..],
            &LOGS,
            &a,
            &b_flags,
            &[
                "--changes",
                changes.as_str(),
                "--json",
                json.as_str(),
                "--report",
                report.as_str(),
            ],
        ]
        .concat();
        run(&bin, d, &args, code);
        let md = std::fs::read_to_string(d.join(&report)).unwrap();
        assert!(
            md.contains("Reviewed by:") && md.contains("Decision"),
            "{md}"
        );
        assert!(
            md.contains(if code == 0 { "PASSED" } else { "FAILED" }),
            "{md}"
        );
        let mut py = vec!["compare", a_csv, b_csv, changes.as_str(), json.as_str()];
        py.extend([a[1], b[1]]);
        py.extend(LOGS);
        let Some((c, out)) = python(d, &py) else {
            return;
        };
        assert_eq!(c, Some(0), "{tag}: {out}");
        summaries.push(out);
    }
    println!("{summaries:?}");
    // The retrained model turns some GO units NO-GO, on the drift log among others; the
    // way back is a NO-GO→GO change, which the gate stops unless allowed.
    let forward = std::fs::read_to_string(d.join("changes-forward.csv")).unwrap();
    assert!(forward.contains("GO→NO-GO"), "{forward}");
    assert!(
        forward
            .lines()
            .any(|l| l.starts_with("demo/drift-synthetic.csv")),
        "{forward}"
    );
    let back_json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("compare-back.json")).unwrap())
            .unwrap();
    let n = back_json["gate"]["nogo_to_go"].as_u64().unwrap();
    assert!(n >= 1, "{back_json}");
    let back = [&["compare"][..], &LOGS, &second, &against(&first)].concat();
    let with = |extra: &[&str]| {
        let mut v: Vec<String> = back.iter().map(|s| s.to_string()).collect();
        v.extend(extra.iter().map(|s| s.to_string()));
        v
    };
    let allow = n.to_string();
    for (extra, code) in [
        (vec!["--allow-nogo-to-go", allow.as_str()], 0),
        (vec!["--allow-nogo-to-go", "all"], 0),
    ] {
        let args = with(&extra);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        run(&bin, d, &args, code);
    }
    if n > 1 {
        let fewer = (n - 1).to_string();
        let args = with(&["--allow-nogo-to-go", &fewer]);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        run(&bin, d, &args, 1);
    }
    // The change list checker catches a dropped change.
    let csv = std::fs::read_to_string(d.join("changes-forward.csv")).unwrap();
    let kept: Vec<&str> = csv.lines().take(csv.lines().count() - 1).collect();
    std::fs::write(d.join("dropped.csv"), kept.join("\n") + "\n").unwrap();
    let Some((code, out)) = python(
        d,
        &[
            "compare",
            "a.csv",
            "b.csv",
            "dropped.csv",
            "compare-forward.json",
        ],
    ) else {
        return;
    };
    assert_eq!(code, Some(1), "a dropped change must be found: {out}");
}
