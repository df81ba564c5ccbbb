//! The audit of a model of several classes against outside references
//! (`tests/verify/classes_audit.py`, no shared code): scikit-learn's bundled wine (GO class
//! and two failure classes) and iris (three failure classes, no GO) sets, stratified 70/30
//! over three seeds, float rows from scikit-learn's LinearSVC (one-vs-rest). Each model is
//! quantised and audited here; Python recomputes every unit's device decision with its
//! integers from audit.json's rows (0 mismatches with the audit's units), each confusion
//! matrix with scikit-learn's `confusion_matrix`, each cell's Clopper–Pearson interval with
//! `scipy.stats.beta.ppf` and statsmodels' `proportion_confint(method="beta")`, and checks
//! the rounding proof by brute force (every PROVED unit keeps its decision at every corner
//! of its differences moved by ± the pair's bound).

use std::path::Path;

use host_trainer::ingest::classes::{Class, Classes};
use host_trainer::ingest::dataset::Dataset;
use host_trainer::release::class_audit::{audit_classes, write_class_units_csv};
use host_trainer::release::class_gates::DEFAULT_MISROUTE;
use host_trainer::release::gates::AuditConfig;
use host_trainer::release::quantise::QuantConfig;
use host_trainer::release::quantise_classes::quantise_classes;
use host_trainer::train::class_rows::{ClassRowF, ClassRule, FloatClasses};
use serde_json::Value;

/// A split's units as a Dataset of the case's classes (codes: +1 the GO class, −1, −2… the
/// others in list order).
fn dataset(part: &Value, classes: &Classes) -> Dataset {
    let pts: Vec<Vec<f64>> = part["points"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| {
            p.as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap())
                .collect()
        })
        .collect();
    let ids: Vec<u8> = part["classes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap() as u8)
        .collect();
    let signs: Vec<i8> = ids.iter().map(|&k| if k == 0 { 1 } else { -1 }).collect();
    let mut ds = Dataset::from_scaled(&pts, &signs);
    ds.labels = ids.iter().map(|&k| classes.code(k)).collect();
    ds.classes = classes.clone();
    ds
}

/// Releases and audits one case written by `classes_audit.py make`.
fn audit_case(dir: &Path) {
    let case: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("case.json")).unwrap()).unwrap();
    let names: Vec<String> = case["classes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap().to_string())
        .collect();
    let go = case["go"].as_u64().map(|g| g as usize);
    let classes = Classes {
        list: names
            .iter()
            .map(|n| Class {
                name: n.clone(),
                tokens: vec![n.to_lowercase()],
            })
            .collect(),
        go: go.map(|g| g as u8),
        declared: true,
    };
    let train = dataset(&case["train"], &classes);
    let holdout = dataset(&case["holdout"], &classes);
    // A model file around the rows: the channels and provenance of a two-sided training.
    let mut shell = train.clone();
    shell.labels = shell
        .labels
        .iter()
        .map(|&l| if l > 0 { 1 } else { -1 })
        .collect();
    shell.classes = Classes::default();
    if !shell.labels.contains(&1) {
        shell.labels[0] = 1;
    }
    let req = host_trainer::workflow::TrainRequest {
        epochs: 1,
        folds: 0,
        target: None,
        max_false_go: None,
        c: host_trainer::train::c_choice::CPolicy::Fixed(1.0),
        ..host_trainer::workflow::TrainRequest::new(
            host_trainer::train::eval::TrainerKind::Averaged,
        )
    };
    let mut fm = host_trainer::workflow::train_model(&shell, None, &req)
        .unwrap()
        .model;
    fm.classes = Some(FloatClasses {
        rule: ClassRule::OneVsRest,
        go,
        go_gap: case["go_gap"].as_f64().unwrap(),
        class_gap: case["class_gap"].as_f64().unwrap(),
        rows: case["rows"]
            .as_array()
            .unwrap()
            .iter()
            .map(|r| ClassRowF {
                name: r["name"].as_str().unwrap().into(),
                weights: r["weights"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|v| v.as_f64().unwrap())
                    .collect(),
                bias: r["bias"].as_f64().unwrap(),
            })
            .collect(),
    });
    let q = quantise_classes(&fm, QuantConfig::default()).unwrap();
    let fc = fm.classes.as_ref().unwrap();
    let others = [("holdout", &holdout)];
    let r = audit_classes(
        &q,
        &fm,
        fc,
        &train,
        &others,
        AuditConfig::default(),
        DEFAULT_MISROUTE,
    );
    let write = |name: &str, text: &str| std::fs::write(dir.join(name), text).unwrap();
    write("audit.json", &host_trainer::report::class_json(&r));
    write(
        "audit.md",
        &host_trainer::report::class_document(&r).markdown(),
    );
    write("model.json", &fm.to_json());
    let raw =
        |ds: &Dataset| -> Vec<Vec<i32>> { (0..ds.len()).map(|i| ds.raw_row(i).to_vec()).collect() };
    write(
        "raw.json",
        &serde_json::json!({ "train": raw(&train), "holdout": raw(&holdout) }).to_string(),
    );
    let mut units = Vec::new();
    write_class_units_csv(
        &mut units,
        &q,
        fc,
        &[("train", &train), ("holdout", &holdout)],
    )
    .unwrap();
    std::fs::write(dir.join("units.csv"), units).unwrap();
}

#[test]
fn class_audit_agrees_with_scikit_learn_scipy_and_statsmodels() {
    let what = "class audit against scikit-learn, scipy and statsmodels";
    let dir = tempfile::tempdir().unwrap();
    let make = [std::ffi::OsStr::new("make"), dir.path().as_os_str()];
    let Some((code, text)) = crate::python_check(what, "classes_audit.py", &make, dir.path())
    else {
        return;
    };
    assert_eq!(code, Some(0), "{text}");
    let mut cases: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.join("case.json").exists())
        .collect();
    cases.sort();
    assert_eq!(cases.len(), 6, "wine and iris, three seeds each");
    for c in &cases {
        audit_case(c);
    }
    let check = [std::ffi::OsStr::new("check"), dir.path().as_os_str()];
    let Some((code, text)) = crate::python_check(what, "classes_audit.py", &check, dir.path())
    else {
        return;
    };
    match code {
        Some(0) => {
            let summary = text
                .lines()
                .find(|l| l.ends_with(" checks, 0 disagreeing"))
                .unwrap_or_else(|| panic!("no summary line:\n{text}"));
            let checks: usize = summary.split(' ').next().unwrap().parse().unwrap();
            // Per unit at least 3 checks (decision, float rule, flip), wine 178 + iris 150
            // units per seed.
            assert!(checks >= 3 * 3 * (178 + 150), "{text}");
            println!("{}", text.trim());
        }
        _ => panic!("the class audit disagrees with the outside references:\n{text}"),
    }
}
