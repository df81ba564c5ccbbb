//! The audit report against an independent verifier: `tests/verify/verify_release.py`,
//! written from shared-model/FORMAT.md and the report's stated definitions (README
//! "Release gates", audit.md "Method") with Python's standard library only (zlib's CRC-32,
//! hashlib's SHA-256, csv), sharing no code with the audit. It recomputes every unit's
//! device verdict, the per-log counts, the smallest margins, the rounding bound and the
//! guarantee, and must agree with the report: on the demo, on a log with FAULT units, and
//! on Fisher's iris data (linfa-datasets), separable and not.

use std::path::{Path, PathBuf};
use std::process::Command;

use host_trainer::ingest::LogOptions;
use host_trainer::release::applying::{self, Apply};
use host_trainer::release::blob_release;
use host_trainer::release::gates::AuditConfig;
use host_trainer::release::quantise::QuantConfig;
use host_trainer::train::eval::TrainerKind;
use host_trainer::workflow::{self, TrainRequest};

fn python() -> Option<&'static str> {
    Command::new("python3")
        .arg("--version")
        .output()
        .ok()
        .filter(|o| o.status.success())
        .map(|_| "python3")
}

/// Runs the verifier; its exit code and what it printed.
pub(crate) fn verify(blob: &Path, model: &Path, report: &Path, logs: &[PathBuf]) -> (i32, String) {
    let o = Command::new("python3")
        .arg(crate::root().join("tests/verify/verify_release.py"))
        .args([blob, model, report])
        .args(logs)
        .output()
        .expect("run python3");
    (
        o.status.code().unwrap_or(-1),
        format!(
            "{}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        ),
    )
}

/// Trains, audits and packs as `linegate train` / `audit --out-dir` / `pack` do, writing
/// model.json, audit.json and model.lgmb (the blob the report names) into `dir`.
pub(crate) fn release(dir: &Path, train: &Path, sheet: Option<&Path>, others: &[PathBuf], c: f64) {
    let opts = LogOptions::default();
    let (ds, sheet) = workflow::load(&[train.to_path_buf()], &opts, sheet).unwrap();
    let req = TrainRequest {
        epochs: 100,
        seed: 1,
        c: host_trainer::train::c_choice::CPolicy::Fixed(c),
        max_false_go: None,
        folds: 0,
        cv_trainers: host_trainer::workflow::CvTrainers::Auto,
        figures: host_trainer::train::separability::Figures::ALL,
        target: None,
        ..TrainRequest::new(TrainerKind::MaxMargin)
    };
    let fm = workflow::train_model(&ds, sheet.as_ref().map(|(_, f)| f), &req)
        .unwrap()
        .model;
    std::fs::write(dir.join("model.json"), fm.to_json()).unwrap();
    let fm = host_trainer::train::float_model::FloatModel::read(&dir.join("model.json")).unwrap();
    let loaded: Vec<_> = others
        .iter()
        .map(|p| workflow::load_for_model(std::slice::from_ref(p), &opts, &fm).unwrap())
        .collect();
    let named: Vec<(&str, &host_trainer::ingest::dataset::Dataset)> =
        loaded.iter().map(|d| ("holdout", d)).collect();
    let noise: Vec<Option<f64>> = fm.channels.iter().map(|c| c.noise).collect();
    let done = applying::release_applying(
        &fm,
        &ds,
        &named,
        QuantConfig::default(),
        &noise,
        AuditConfig::default(),
        Apply {
            suggested_band: true,
            recommended_format: false,
            progress: false,
        },
    )
    .unwrap();
    let r = &done.report;
    std::fs::write(
        dir.join("audit.json"),
        serde_json::to_string_pretty(r).unwrap(),
    )
    .unwrap();
    let blob = blob_release::released_blob(&done.q, r.passed, None);
    std::fs::write(dir.join("model.lgmb"), blob).unwrap();
}

#[test]
fn the_independent_verifier_agrees_with_the_report() {
    if python().is_none() {
        return crate::skip_or_fail("independent verifier", "python3 not found");
    }
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();

    // 1. The demo as it is written.
    let demo = d.join("demo");
    host_trainer::demo::run(&demo, false).unwrap();
    let logs = [
        demo.join("train-synthetic.csv"),
        demo.join("holdout-synthetic.csv"),
    ];
    let (code, out) = verify(
        &demo.join("model.lgmb"),
        &demo.join("model.json"),
        &demo.join("audit.json"),
        &logs,
    );
    assert_eq!(code, 0, "{out}");
    assert!(out.starts_with("agree: 1200 units in 2 logs"), "{out}");

    // 2. The demo's holdout with readings outside their range (FAULT units).
    let text = std::fs::read_to_string(&logs[1]).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    for (row, col) in [(1, 4), (3, 2), (10, 6)] {
        let mut cells: Vec<&str> = lines[row].split(',').collect();
        cells[col] = "99999";
        lines[row] = cells.join(",");
    }
    let faulty = d.join("holdout-faults.csv");
    std::fs::write(&faulty, lines.join("\n") + "\n").unwrap();
    let rel = d.join("faults");
    std::fs::create_dir_all(&rel).unwrap();
    release(
        &rel,
        &logs[0],
        Some(&demo.join("channels.toml")),
        std::slice::from_ref(&faulty),
        10.0,
    );
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(rel.join("audit.json")).unwrap()).unwrap();
    assert_eq!(report["sets"][1]["faults"], 3);
    let (code, out) = verify(
        &rel.join("model.lgmb"),
        &rel.join("model.json"),
        &rel.join("audit.json"),
        &[logs[0].clone(), faulty],
    );
    assert_eq!(code, 0, "{out}");

    // 3. Fisher's iris data (linfa-datasets): setosa vs versicolor (separable) and
    //    versicolor vs virginica (not: the soft margin leaves errors the gates count).
    let iris = linfa_datasets::iris();
    let (records, targets) = (iris.records(), iris.targets());
    for (go, nogo) in [(0usize, 1usize), (1, 2)] {
        let mut csv = String::from("sepal_length,sepal_width,petal_length,petal_width,label\n");
        for (row, &t) in records.outer_iter().zip(targets.iter()) {
            if t == go || t == nogo {
                let v: Vec<String> = row.iter().map(|x| format!("{x}")).collect();
                let label = if t == go { "GO" } else { "NO-GO" };
                csv.push_str(&format!("{},{label}\n", v.join(",")));
            }
        }
        let sub = d.join(format!("iris-{go}-{nogo}"));
        std::fs::create_dir_all(&sub).unwrap();
        let log = sub.join("iris.csv");
        std::fs::write(&log, csv).unwrap();
        release(&sub, &log, None, &[], 1.0);
        let (code, out) = verify(
            &sub.join("model.lgmb"),
            &sub.join("model.json"),
            &sub.join("audit.json"),
            std::slice::from_ref(&log),
        );
        assert_eq!(code, 0, "iris {go} vs {nogo}: {out}");
        assert!(out.starts_with("agree: 100 units in 1 logs"), "{out}");
    }

    // 4. The verifier is not a rubber stamp: a report with one count changed disagrees.
    let mut r: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(demo.join("audit.json")).unwrap()).unwrap();
    r["sets"][1]["false_nogo"] = serde_json::json!(1);
    let bad = d.join("audit-bad.json");
    std::fs::write(&bad, serde_json::to_string(&r).unwrap()).unwrap();
    let (code, out) = verify(
        &demo.join("model.lgmb"),
        &demo.join("model.json"),
        &bad,
        &logs,
    );
    assert_eq!(code, 1, "{out}");
    assert!(out.contains("DISAGREE holdout: false_nogo"), "{out}");
}
