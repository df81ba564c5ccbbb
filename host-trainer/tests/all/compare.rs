//! `linegate compare` from the command line: a release against itself changes nothing,
//! a plain quantisation equals its unoptimised 16/16 blob, outputs all or nothing, a blob
//! of another model is an error (exit 2, not the gate's 1). The change list against a
//! pandas join, the bounds against scipy and the gate both ways: `tests/tests/all/field.rs`.

use crate::common::{demo, exits, linegate};

const LOGS: [&str; 2] = ["demo/holdout-synthetic.csv", "demo/drift-synthetic.csv"];

fn compare(d: &std::path::Path, args: &[&str]) -> std::process::Output {
    let mut a = vec!["-q", "compare"];
    a.extend(LOGS);
    a.extend(args);
    linegate(&a, d)
}

#[test]
fn a_release_against_itself_changes_nothing_and_the_report_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let o = compare(
        d,
        &[
            "--model",
            "demo/model.json",
            "--blob",
            "demo/model.lgmb",
            "--against",
            "demo/model.json",
            "--against-blob",
            "demo/model.lgmb",
            "--report",
            "r.md",
            "--json",
            "c.json",
            "--changes",
            "ch.csv",
        ],
    );
    exits(&o, 0);
    let c: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("c.json")).unwrap()).unwrap();
    assert_eq!(c["units"], 800);
    assert_eq!(c["changed"]["count"], 0);
    assert_eq!(c["shift"]["max"], 0.0);
    assert_eq!(c["shift"]["min"], 0.0);
    assert_eq!(c["logs"].as_array().unwrap().len(), 2);
    let md = std::fs::read_to_string(d.join("r.md")).unwrap();
    for want in [
        "None: every unit has the same outcome",
        "PASSED: 0 NO-GO→GO changes (FAULT→GO included; 0 allowed)",
        "Reviewed by:",
        "Date:",
        "Decision",
        c["a"]["model_id"].as_str().unwrap(),
        c["a"]["blob_id"].as_str().unwrap(),
        c["logs"][1]["sha256"].as_str().unwrap(),
    ] {
        assert!(md.contains(want), "{want}: {md}");
    }
    let csv = std::fs::read_to_string(d.join("ch.csv")).unwrap();
    assert_eq!(csv.lines().count(), 1, "the header only: {csv}");
}

#[test]
fn a_plain_release_equals_its_unoptimised_blob_at_16_bits() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let pack = [
        "-q",
        "pack",
        "--model",
        "demo/model.json",
        "--train",
        "demo/train-synthetic.csv",
        "--no-optimise",
        "--weight-bits",
        "16",
        "--input-bits",
        "16",
        "--override-audit",
        "-o",
        "plain.lgmb",
    ];
    exits(&linegate(&pack, d), 0);
    let o = compare(
        d,
        &[
            "--model",
            "demo/model.json",
            "--against",
            "demo/model.json",
            "--against-blob",
            "plain.lgmb",
            "--json",
            "c.json",
        ],
    );
    exits(&o, 0);
    let c: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("c.json")).unwrap()).unwrap();
    assert_eq!(c["a"]["blob_id"], serde_json::Value::Null);
    assert_eq!(c["changed"]["count"], 0, "{c}");
    assert_eq!(c["shift"]["max"], 0.0, "same scores: {c}");
    assert_eq!(c["a"]["scale"], c["b"]["scale"]);
}

#[test]
fn outputs_are_all_or_nothing_and_a_foreign_blob_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    std::fs::write(d.join("r.md"), "kept").unwrap();
    let base = [
        "--model",
        "demo/model.json",
        "--blob",
        "demo/model.lgmb",
        "--against",
        "demo/signal-model.json",
    ];
    // An existing report without --force: nothing written, the CSV neither.
    let mut args = vec![
        "--model",
        "demo/model.json",
        "--against",
        "demo/model.json",
        "--changes",
        "ch.csv",
        "--report",
        "r.md",
    ];
    let err = exits(&compare(d, &args), 2);
    assert!(err.contains("r.md"), "{err}");
    assert!(!d.join("ch.csv").exists());
    assert_eq!(std::fs::read_to_string(d.join("r.md")).unwrap(), "kept");
    args.push("--force");
    exits(&compare(d, &args), 0);
    assert!(d.join("ch.csv").exists());
    // The signal model's blob given for the readings model: exit 2, not the gate's 1.
    let o = compare(
        d,
        &[
            "--model",
            "demo/model.json",
            "--blob",
            "demo/signal-model.lgmb",
            "--against",
            "demo/model.json",
        ],
    );
    let err = exits(&o, 2);
    assert!(err.contains("signal-model.lgmb"), "{err}");
    // A signal model cannot read a bench log: an input error, exit 2.
    exits(&compare(d, &base), 2);
    // --help teaches the flags and the exit codes.
    let o = linegate(&["compare", "--help"], d);
    let help = String::from_utf8(o.stdout).unwrap();
    for want in [
        "--against-blob",
        "--allow-nogo-to-go",
        "Clopper",
        "Reviewed by",
        "Exit codes",
    ] {
        assert!(help.contains(want), "{want}");
    }
}
