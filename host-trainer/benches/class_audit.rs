//! The release audit of a model of several classes on synthetic units (default 1,000,000
//! × 16 channels): quantise + audit with 4 classes against 2, the ratio measured in the
//! same run (best of three each). `cargo bench -p host-trainer --bench class_audit [-- N]`.

use std::time::Instant;

use host_trainer::ingest::classes::{Class, Classes};
use host_trainer::ingest::dataset::Dataset;
use host_trainer::release::class_audit::audit_classes;
use host_trainer::release::class_gates::DEFAULT_MISROUTE;
use host_trainer::release::gates::AuditConfig;
use host_trainer::release::quantise::QuantConfig;
use host_trainer::release::quantise_classes::quantise_classes;
use host_trainer::train::class_rows::{ClassRowF, ClassRule, FloatClasses};
use host_trainer::train::float_model::FloatModel;
use rand::{Rng, SeedableRng};

const DIM: usize = 16;

/// `n` units around `k` random centres (class i % k), with the class list and codes.
fn units(n: usize, k: usize, centres: &[Vec<f64>], seed: u64) -> Dataset {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut ds = Dataset::from_scaled(&[vec![0.0; DIM]], &[1]);
    ds.raw.clear();
    ds.labels.clear();
    ds.lines.clear();
    ds.classes = classes(k);
    for i in 0..n {
        let c = i % k;
        for (j, s) in ds.scales.iter().enumerate() {
            let v = (centres[c][j] + rng.gen_range(-0.4..0.4)).clamp(-1.0, 1.0);
            ds.raw.push(s.to_raw(v).expect("inside the range"));
        }
        ds.labels.push(ds.classes.code(c as u8));
        ds.lines.push(i as u64 + 2);
    }
    ds
}

fn classes(k: usize) -> Classes {
    Classes {
        list: (0..k)
            .map(|c| Class {
                name: format!("c{c}"),
                tokens: vec![format!("c{c}")],
            })
            .collect(),
        go: Some(0),
        declared: true,
    }
}

/// A float model around nearest-centre rows (row c: centre·x − |centre|²/2).
fn model(shell: &FloatModel, centres: &[Vec<f64>]) -> FloatModel {
    let mut fm = shell.clone();
    fm.classes = Some(FloatClasses {
        rule: ClassRule::OneVsRest,
        go: Some(0),
        go_gap: 0.01,
        class_gap: 0.01,
        rows: centres
            .iter()
            .enumerate()
            .map(|(c, w)| ClassRowF {
                name: format!("c{c}"),
                weights: w.clone(),
                bias: -w.iter().map(|v| v * v).sum::<f64>() / 2.0,
            })
            .collect(),
    });
    fm
}

fn main() {
    let n: usize = std::env::args()
        .skip(1)
        .find_map(|a| a.parse().ok())
        .unwrap_or(1_000_000);
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
    let centres: Vec<Vec<f64>> = (0..4)
        .map(|_| (0..DIM).map(|_| rng.gen_range(-0.5..0.5)).collect())
        .collect();
    // The model file around the rows: channels and provenance from a small two-sided run.
    let small = units(1000, 2, &centres, 1);
    let mut two = small.clone();
    two.classes = Classes::default();
    two.labels = two.labels.iter().map(|&l| l.signum()).collect();
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
    let shell = host_trainer::workflow::train_model(&two, None, &req)
        .expect("shell model")
        .model;
    let mut best = [f64::INFINITY; 2];
    for (slot, k) in [2usize, 4].into_iter().enumerate() {
        let ds = units(n, k, &centres, 2);
        let fm = model(&shell, &centres[..k]);
        let fc = fm.classes.clone().expect("classes");
        for _ in 0..3 {
            let t = Instant::now();
            let q = quantise_classes(&fm, QuantConfig::default()).expect("quantise");
            let r = audit_classes(
                &q,
                &fm,
                &fc,
                &ds,
                &[],
                AuditConfig::default(),
                DEFAULT_MISROUTE,
            );
            let s = t.elapsed().as_secs_f64();
            best[slot] = best[slot].min(s);
            assert_eq!(r.logs[0].units, n);
        }
        println!(
            "{k} classes: quantise + audit of {n} × {DIM} in {:.3} s (best of 3)",
            best[slot]
        );
    }
    println!("ratio 4 classes / 2 classes: {:.2}", best[1] / best[0]);
}
