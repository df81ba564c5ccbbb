//! The streamed units CSV (`audit --units`) against the CSV built whole in memory, as
//! `audit --units` built it before it streamed, on the demo's logs. Here, not in
//! `release::units`, because it runs the demo.

use crate::ingest::dataset::Dataset;
use crate::release::audit_part::unit_row;
use crate::release::quantise::Quantised;
use crate::release::units::write_units_csv;
use crate::train::float_model::FloatModel;

/// The units CSV built whole in memory, as `audit --units` built it before it streamed:
/// the reference the streamed bytes must equal.
pub(crate) fn units_csv_whole(q: &Quantised, fm: &FloatModel, sets: &[(&str, &Dataset)]) -> String {
    let mut out = String::from(
        "model_id,log,line,unit,label,float_score,float_verdict,fixed_score,fixed_verdict,margin_lsb",
    );
    for c in &fm.channels {
        out.push_str(&format!(",margin_{}", c.name));
    }
    out.push_str(",file\n");
    for (name, ds) in sets {
        for i in 0..ds.len() {
            let r = unit_row(name, q, fm, ds, i);
            let unit = if r.unit.contains([',', '"']) {
                format!("\"{}\"", r.unit.replace('"', "\"\""))
            } else {
                r.unit
            };
            out.push_str(&format!(
                "{},{},{},{},{},{},{},{},{},{}",
                fm.model_id,
                r.set,
                r.line,
                unit,
                r.label,
                r.float_score,
                r.float_verdict,
                r.fixed_score.map_or(String::new(), |v| v.to_string()),
                r.fixed_verdict,
                r.margin_lsb
            ));
            for m in &r.margin_physical {
                out.push_str(&format!(",{m}"));
            }
            out.push_str(&format!(",{}\n", ds.file_of(i).display()));
        }
    }
    out
}

#[test]
fn streamed_units_csv_has_the_bytes_of_the_whole_one_on_the_demo() {
    use crate::ingest::LogOptions;
    use crate::release::quantise::{QuantConfig, quantise};
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    crate::demo::run(&out, false).unwrap();
    let fm = FloatModel::read(&out.join("model.json")).unwrap();
    let opts = LogOptions::default();
    let load = |name: &str| crate::workflow::load_for_model(&[out.join(name)], &opts, &fm).unwrap();
    let (train, holdout) = (load("train-synthetic.csv"), load("holdout-synthetic.csv"));
    let q = quantise(&fm, Some(&train), QuantConfig::default()).unwrap();
    let sets = [("train", &train), ("holdout", &holdout)];
    let mut streamed = Vec::new();
    write_units_csv(&mut streamed, &q, &fm, &sets).unwrap();
    let whole = units_csv_whole(&q, &fm, &sets);
    assert_eq!(whole.lines().count(), 1 + train.len() + holdout.len());
    assert_eq!(String::from_utf8(streamed).unwrap(), whole);
}

#[test]
fn streamed_units_csv_has_the_bytes_of_the_whole_one_on_a_generated_log() {
    use crate::ingest::LogOptions;
    use crate::release::quantise::{QuantConfig, quantise};
    use crate::train::eval::TrainerKind;
    use crate::workflow::{self, CvTrainers, TrainRequest};
    let dir = tempfile::tempdir().unwrap();
    let (log, sheet) = (dir.path().join("g.csv"), dir.path().join("g.toml"));
    let mut text = Vec::new();
    crate::synth::write_log(&mut text, 20_000, 6, 0.02, 5).unwrap();
    std::fs::write(&log, text).unwrap();
    std::fs::write(&sheet, crate::synth::sheet(6)).unwrap();
    let (ds, sheet) = workflow::load(
        std::slice::from_ref(&log),
        &LogOptions::default(),
        Some(&sheet),
    )
    .unwrap();
    let req = TrainRequest {
        epochs: 1000,
        seed: 1,
        c: crate::train::c_choice::CPolicy::Fixed(10.0),
        max_false_go: None,
        folds: 0,
        cv_trainers: CvTrainers::Chosen,
        figures: crate::train::separability::Figures::VERDICT,
        target: None,
        ..TrainRequest::new(TrainerKind::Perceptron)
    };
    let fm = workflow::train_model(&ds, sheet.as_ref().map(|(_, f)| f), &req)
        .unwrap()
        .model;
    let q = quantise(&fm, Some(&ds), QuantConfig::default()).unwrap();
    let sets = [("train", &ds)];
    let mut streamed = Vec::new();
    write_units_csv(&mut streamed, &q, &fm, &sets).unwrap();
    let whole = units_csv_whole(&q, &fm, &sets);
    assert_eq!(whole.lines().count(), 1 + ds.len());
    assert_eq!(String::from_utf8(streamed).unwrap(), whole);
}
