//! The release path of a model of several classes: quantise, the audit (confusion matrix,
//! gates per class, the per-pair rounding proof, flips) and its reports.

use host_trainer::ingest::classes::{Class, Classes};
use host_trainer::ingest::dataset::Dataset;
use host_trainer::release::class_audit::{ClassAudit, audit_classes, write_class_units_csv};
use host_trainer::release::class_gates::DEFAULT_MISROUTE;
use host_trainer::release::gates::{AuditConfig, Limit};
use host_trainer::release::quantise::{QuantConfig, QuantError};
use host_trainer::release::quantise_classes::PairBounds;
use host_trainer::release::quantise_classes::{QuantisedClasses, quantise_classes};
use host_trainer::report;
use host_trainer::train::class_rows::{ClassRowF, ClassRule, FloatClasses};
use host_trainer::train::float_model::FloatModel;
use rand::{Rng, SeedableRng};

const NAMES: [&str; 3] = ["good", "short", "crack"];
/// Each class's centre (scaled inputs).
const CENTRES: [[f64; 2]; 3] = [[0.5, 0.5], [-0.5, 0.4], [0.0, -0.6]];

/// Units scattered around the three centres, with class codes (+1 good, −1 short,
/// −2 crack) and the class list; `spread` sets how far they stray.
fn clusters(n: usize, spread: f64, seed: u64) -> Dataset {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut pts = Vec::new();
    let mut signs = Vec::new();
    let mut codes = Vec::new();
    for i in 0..n {
        let k = i % 3;
        let p: Vec<f64> = CENTRES[k]
            .iter()
            .map(|c| (c + rng.gen_range(-spread..spread)).clamp(-1.0, 1.0))
            .collect();
        pts.push(p);
        signs.push(if k == 0 { 1 } else { -1 });
        codes.push([1i8, -1, -2][k]);
    }
    let mut ds = Dataset::from_scaled(&pts, &signs);
    ds.labels = codes;
    ds.classes = Classes {
        list: NAMES
            .iter()
            .map(|n| Class {
                name: (*n).into(),
                tokens: vec![(*n).into()],
            })
            .collect(),
        go: Some(0),
        declared: true,
    };
    ds
}

/// A float model whose rows are the nearest-centre rule as linear rows: row k scores
/// c_k·x − |c_k|²/2, so the highest score is the nearest centre.
fn model(ds: &Dataset, go_gap: f64, class_gap: f64) -> FloatModel {
    let mut two_sided = ds.clone();
    two_sided.labels = ds.labels.iter().map(|&l| l.signum()).collect();
    two_sided.classes = Classes::default();
    let req = host_trainer::workflow::TrainRequest {
        epochs: 2,
        folds: 0,
        target: None,
        max_false_go: None,
        c: host_trainer::train::c_choice::CPolicy::Fixed(1.0),
        ..host_trainer::workflow::TrainRequest::new(
            host_trainer::train::eval::TrainerKind::Averaged,
        )
    };
    let mut fm = host_trainer::workflow::train_model(&two_sided, None, &req)
        .unwrap()
        .model;
    fm.classes = Some(FloatClasses {
        rule: ClassRule::OneVsRest,
        go: Some(0),
        go_gap,
        class_gap,
        rows: NAMES
            .iter()
            .zip(CENTRES)
            .map(|(n, c)| ClassRowF {
                name: (*n).into(),
                weights: c.to_vec(),
                bias: -(c[0] * c[0] + c[1] * c[1]) / 2.0,
            })
            .collect(),
    });
    fm
}

fn audit(fm: &FloatModel, ds: &Dataset, qc: QuantConfig) -> (QuantisedClasses, ClassAudit) {
    let q = quantise_classes(fm, qc).unwrap();
    let fc = fm.classes.as_ref().unwrap();
    let r = audit_classes(
        &q,
        fm,
        fc,
        ds,
        &[],
        AuditConfig::default(),
        DEFAULT_MISROUTE,
    );
    (q, r)
}

#[test]
fn well_separated_classes_pass_with_every_unit_proved_and_no_flip() {
    let ds = clusters(300, 0.2, 1);
    let fm = model(&ds, 0.05, 0.05);
    let (q, r) = audit(&fm, &ds, QuantConfig::default());
    let l = &r.logs[0];
    // Rows: true class; columns: good, short, crack, RECHECK, FAULT.
    assert_eq!(l.confusion.len(), 3);
    assert!(l.confusion.iter().all(|row| row.len() == 5));
    assert_eq!(l.class_units, vec![100, 100, 100]);
    for (t, row) in l.confusion.iter().enumerate() {
        assert_eq!(row[t], 100, "every unit of {} decided its class", NAMES[t]);
    }
    assert_eq!((l.flips, l.faults, l.unproved, l.proved), (0, 0, 0, 300));
    assert!(r.passed, "{:?}", r.reasons);
    // Gates: false NO-GO of good; false GO and misrouted of short and crack; RECHECK; flips;
    // the rounding proof (required by default).
    let names: Vec<&str> = r.gates.iter().map(|g| g.gate).collect();
    assert_eq!(
        names,
        [
            "false NO-GO",
            "false GO",
            "misrouted",
            "false GO",
            "misrouted",
            "RECHECK",
            "flips",
            "rounding proof"
        ]
    );
    // The gaps in accumulator units: rounded up from A·gap, at least 1.
    assert_eq!(q.section.go_gap, (0.05 * q.scale).ceil() as i64);
    assert!(q.fixed.channels.iter().all(|c| c.weight == 0));
    assert_eq!((q.fixed.bias, q.fixed.nogo_max, q.fixed.go_min), (0, -1, 0));
    // The largest weight of any row fills the 16-bit word.
    let largest = q
        .section
        .rows
        .iter()
        .flat_map(|r| r.weights.iter())
        .map(|w| w.abs())
        .max();
    assert_eq!(largest, Some(32767));
}

/// Each pair's bound is the two-sided bound of the difference row, recomputed here from its
/// definition (bound.rs): ½·Σ|ΔWᵢ| + Σ|ΔWᵢ − ΔWᵢ*|·Xmaxᵢ + |ΔB − ΔB*|.
#[test]
fn pair_bounds_are_the_bound_of_each_difference_row() {
    let ds = clusters(30, 0.2, 2);
    let fm = model(&ds, 0.05, 0.05);
    let q = quantise_classes(&fm, QuantConfig::default()).unwrap();
    let p = PairBounds::of(&q);
    let xmax: Vec<f64> = q
        .fixed
        .channels
        .iter()
        .zip(&q.kappa)
        .map(|(c, k)| {
            k * f64::from(
                c.raw_max
                    .abs_diff(c.offset)
                    .max(c.offset.abs_diff(c.raw_min)),
            )
        })
        .collect();
    for a in 0..3 {
        for b in 0..3 {
            let (ra, rb) = (&q.section.rows[a], &q.section.rows[b]);
            let mut want = 0.0;
            for (i, x) in xmax.iter().enumerate() {
                let dw = f64::from(ra.weights[i]) - f64::from(rb.weights[i]);
                let ideal = q.ideal_weights[a][i] - q.ideal_weights[b][i];
                want += 0.5 * dw.abs() + (dw - ideal).abs() * x;
            }
            want += ((ra.bias - rb.bias) as f64 - (q.ideal_bias[a] - q.ideal_bias[b])).abs();
            if a == b {
                want = 0.0;
            }
            assert!(
                (p.bounds[a][b] - want).abs() < 1e-6 * want.max(1.0),
                "{a}{b}"
            );
            assert_eq!(p.bounds[a][b], p.bounds[b][a]);
        }
    }
}

/// Coarse weights: some units come within a pair's bound of an edge and are not proved,
/// but every unit the audit proves decides on the device as the float rule does, and every
/// flip is counted and fails the audit.
#[test]
fn coarse_weights_leave_units_unproved_and_flips_fail_the_audit() {
    let ds = clusters(600, 0.6, 3);
    let fm = model(&ds, 0.02, 0.02);
    let qc = QuantConfig {
        weight_bits: 3,
        input_bits: 8,
        ..QuantConfig::default()
    };
    let (_, r) = audit(&fm, &ds, qc);
    let l = &r.logs[0];
    assert!(l.unproved > 0, "3-bit weights cannot prove every unit");
    assert_eq!(l.proved + l.unproved + l.faults, 600);
    let mut units = Vec::new();
    let q = quantise_classes(&fm, qc).unwrap();
    write_class_units_csv(
        &mut units,
        &q,
        fm.classes.as_ref().unwrap(),
        &[("train", &ds)],
    )
    .unwrap();
    let text = String::from_utf8(units).unwrap();
    let mut flips = 0;
    for line in text.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        let (float, device, class, proved) = (f[4], f[6], f[7], f[10]);
        let device_decision = if device == "RECHECK" {
            "RECHECK"
        } else {
            class
        };
        if float != device_decision {
            flips += 1;
            assert_eq!(proved, "false", "a proved unit flipped: {line}");
        }
    }
    assert_eq!(flips, l.flips);
    let g = r.gates.iter().find(|g| g.gate == "flips").unwrap();
    assert_eq!(g.passed, flips == 0);
}

#[test]
fn a_failure_class_decided_go_fails_its_false_go_gate() {
    // Wide clusters overlap: some short and crack units lie nearer good's centre.
    let ds = clusters(600, 0.9, 4);
    let fm = model(&ds, 0.0, 0.0);
    let (_, r) = audit(&fm, &ds, QuantConfig::default());
    let l = &r.logs[0];
    let short_go = l.confusion[1][0];
    assert!(short_go > 0);
    let g = r
        .gates
        .iter()
        .find(|g| g.gate == "false GO" && g.value.contains("short units"))
        .unwrap();
    assert_eq!(g.measured, Some(short_go as f64));
    assert!(!g.passed);
    assert!(!r.passed);
    assert!(
        r.reasons
            .iter()
            .any(|x| x.contains("false GO") && x.contains("short"))
    );
    // A looser misrouting limit changes only the misrouting gates.
    let q = quantise_classes(&fm, QuantConfig::default()).unwrap();
    let loose = audit_classes(
        &q,
        &fm,
        fm.classes.as_ref().unwrap(),
        &ds,
        &[],
        AuditConfig::default(),
        Limit::Rate(1.0),
    );
    assert!(
        loose
            .gates
            .iter()
            .filter(|g| g.gate == "misrouted")
            .all(|g| g.passed)
    );
}

#[test]
fn a_class_name_over_24_bytes_is_refused_by_name() {
    let ds = clusters(30, 0.2, 5);
    let mut fm = model(&ds, 0.05, 0.05);
    let long = "winding-short-on-phase-b-x";
    fm.classes.as_mut().unwrap().rows[1].name = long.into();
    let e = quantise_classes(&fm, QuantConfig::default()).unwrap_err();
    assert!(matches!(e, QuantError::ClassName(ref n) if n == long));
    assert!(e.to_string().contains(long) && e.to_string().contains("24 bytes"));
}

#[test]
fn a_reading_out_of_range_is_a_fault_in_the_matrix() {
    let mut ds = clusters(30, 0.2, 6);
    // Channel 0 of unit 4 (class short) beyond its range.
    let d = ds.dim();
    ds.raw[4 * d] = i32::MAX;
    let fm = model(&clusters(30, 0.2, 6), 0.05, 0.05);
    let (_, r) = audit(&fm, &ds, QuantConfig::default());
    let l = &r.logs[0];
    assert_eq!(l.faults, 1);
    assert_eq!(l.confusion[1][4], 1, "short unit 4 in the FAULT column");
}

#[test]
fn the_reports_show_the_matrix_the_proof_and_no_baseline() {
    let ds = clusters(90, 0.3, 7);
    let fm = model(&ds, 0.05, 0.05);
    let (_, r) = audit(&fm, &ds, QuantConfig::default());
    let doc = report::class_document(&r);
    let md = doc.markdown();
    assert!(
        md.starts_with("# Linegate release audit (classes): PASSED"),
        "{md}"
    );
    assert!(md.contains("| true \\ decided | good | short | crack | RECHECK | FAULT |"));
    assert!(md.contains("| good (30) | **30**"));
    assert!(md.contains("Flips (device decision ≠ float decision, class or verdict): **0**"));
    let html = report::class_html(&r, &doc);
    assert!(html.contains("<svg") && html.contains("per true class"));
    let json: serde_json::Value = serde_json::from_str(&report::class_json(&r)).unwrap();
    assert_eq!(json["kind"], "classes");
    assert!(json["baseline"].is_null());
    assert!(json["baseline_note"].as_str().unwrap().contains("drift"));
    assert_eq!(json["logs"][0]["confusion"][0][0], 30);
}

/// `linegate audit` on a model of several classes, from the command line: the demo's
/// two-sided model turned into rows GO (its row), NO-GO (the row negated) and "crack" (no
/// unit of the demo's logs is a crack: a class without units is reported, not hidden).
#[test]
fn audit_on_a_class_model_writes_its_reports_and_drift_refuses_it() {
    use crate::common::{demo, exits, linegate};
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let two = FloatModel::read(&d.join("demo/model.json")).unwrap();
    let (w, b) = (two.weights.clone(), two.bias - two.threshold);
    let names: Vec<String> = ["GO", "NO-GO", "crack"].map(String::from).to_vec();
    let row = |w: Vec<f64>, b: f64| host_trainer::train::linear::Linear { w, b };
    let fm = FloatModel::with_classes(
        two.provenance.clone(),
        two.channels.clone(),
        two.signals.clone(),
        ClassRule::OneVsRest,
        Some(0),
        &names,
        &[
            row(w.clone(), b),
            row(w.iter().map(|v| -v).collect(), -b),
            row(vec![0.0; w.len()], -10.0),
        ],
        0.01,
        0.01,
        two.summary.clone(),
    );
    std::fs::write(d.join("classes.json"), fm.to_json()).unwrap();
    let o = linegate(
        &[
            "-q",
            "audit",
            "--model",
            "classes.json",
            "--out-dir",
            "out",
            "--units",
            "units.csv",
            "--max-misroute",
            "0",
            "--holdout",
            "demo/holdout-synthetic.csv",
        ],
        d,
    );
    let text = std::fs::read_to_string(d.join("out/audit.json"))
        .unwrap_or_else(|e| panic!("{e}: {}", String::from_utf8_lossy(&o.stderr)));
    let json: serde_json::Value = serde_json::from_str(&text).unwrap();
    exits(&o, if json["passed"] == true { 0 } else { 1 });
    assert_eq!(json["kind"], "classes");
    assert_eq!(json["classes"], serde_json::json!(["GO", "NO-GO", "crack"]));
    assert_eq!(json["max_misroute"], serde_json::json!({ "Count": 0 }));
    assert_eq!(json["blob_sha256"].as_str().unwrap().len(), 64);
    let logs = json["logs"].as_array().unwrap();
    assert_eq!(logs.len(), 2, "train and holdout");
    for l in logs {
        // No unit is a crack; every other unit is in its row.
        assert_eq!(l["class_units"][2], 0);
        let units: u64 = l["class_units"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_u64().unwrap())
            .sum();
        assert_eq!(units, l["units"].as_u64().unwrap());
    }
    let md = std::fs::read_to_string(d.join("out/audit.md")).unwrap();
    assert!(
        md.contains("| true \\ decided | GO | NO-GO | crack | RECHECK | FAULT |"),
        "{md}"
    );
    let html = std::fs::read_to_string(d.join("out/audit.html")).unwrap();
    assert!(html.contains("<svg"));
    let units = std::fs::read_to_string(d.join("units.csv")).unwrap();
    let total: u64 = logs.iter().map(|l| l["units"].as_u64().unwrap()).sum();
    assert_eq!(units.lines().count() as u64, total + 1);
    // drift has no baseline to compare a class model's field with, and says so.
    let o = linegate(
        &[
            "-q",
            "drift",
            "--audit",
            "out/audit.json",
            "demo/holdout-synthetic.csv",
        ],
        d,
    );
    let err = exits(&o, 2);
    assert!(err.contains("several classes"), "{err}");
    // The project file's [gates] max_misroute, as the flag.
    std::fs::write(
        d.join("linegate.toml"),
        "[gates]\nmax_misroute = \"2%@90%\"\n",
    )
    .unwrap();
    let o = linegate(
        &[
            "-q",
            "audit",
            "--model",
            "classes.json",
            "--holdout",
            "demo/holdout-synthetic.csv",
            "--json",
        ],
        d,
    );
    let printed: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(
        printed["audit"]["max_misroute"],
        serde_json::json!({ "Upper": { "rate": 0.02, "confidence": 0.9 } })
    );
    std::fs::remove_file(d.join("linegate.toml")).unwrap();
    // pack writes the class model's blob (version 5), the one the audit record names; a
    // release with other words is refused against that record, nothing written.
    let pack = |extra: &[&str], out: &str| {
        let mut args = vec![
            "-q",
            "pack",
            "--model",
            "classes.json",
            "--holdout",
            "demo/holdout-synthetic.csv",
            "--override-audit",
            "--max-misroute",
            "0",
            "--audited",
            "out",
            "-o",
            out,
        ];
        args.extend_from_slice(extra);
        linegate(&args, d)
    };
    exits(&pack(&[], "c.lgmb"), 0);
    let blob = std::fs::read(d.join("c.lgmb")).unwrap();
    assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 5, "version 5");
    assert_eq!(
        shared_model::blob::blob_id(&blob).map(|id| format!("{id:08x}")),
        Some(json["blob_id"].as_str().unwrap().to_string()),
        "the blob the audit named"
    );
    exits(
        &linegate(&["-q", "inspect", "c.lgmb", "--model", "classes.json"], d),
        0,
    );
    let err = exits(&pack(&["--weight-bits", "8"], "c8.lgmb"), 1);
    assert!(err.contains("not the audited release"), "{err}");
    assert!(!d.join("c8.lgmb").exists());
    // --max-misroute on a two-sided model is refused, not ignored.
    let o = linegate(
        &[
            "-q",
            "audit",
            "--model",
            "demo/model.json",
            "--max-misroute",
            "1%",
        ],
        d,
    );
    let err = exits(&o, 2);
    assert!(err.contains("--max-misroute"), "{err}");
}
