//! Training and separability against outside references: Fisher's iris data as shipped
//! by the linfa-datasets crate, the Clarabel interior-point convex solver (crates.io) as
//! reference optimiser, XOR, a constructed known margin, and Novikoff's theorem.

use clarabel::algebra::CscMatrix;
use clarabel::solver::{
    DefaultSettingsBuilder, DefaultSolver, IPSolver, NonnegativeConeT, SolverStatus,
};
use host_trainer::ingest::dataset::Dataset;
use host_trainer::ingest::scaling::ChannelScale;
use host_trainer::train::extent::radius;
use host_trainer::train::maxmargin::max_margin;
use host_trainer::train::novikoff::homogeneous_margin;
use host_trainer::train::perceptron::{PerceptronConfig, PerceptronKind, perceptron};
use host_trainer::train::separability::check;
use host_trainer::train::svm::SvmConfig;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Hard-margin SVM by Clarabel: min ½‖w‖² s.t. yᵢ(w·xᵢ + b) ≥ 1 (free bias) or yᵢ w·zᵢ ≥ 1 (no bias).
/// Returns the margin 1/‖w‖, or None if Clarabel reports infeasibility.
fn clarabel_margin(points: &[Vec<f64>], labels: &[f64], free_bias: bool) -> Option<f64> {
    let d = points[0].len();
    let nv = d + usize::from(free_bias);
    let mut p = vec![vec![0.0; nv]; nv];
    for (j, row) in p.iter_mut().enumerate().take(d) {
        row[j] = 1.0;
    }
    let pm = CscMatrix::from(&p);
    let q = vec![0.0; nv];
    // -y·(w·x + b) ≤ -1  ⇔  A v + s = b with s ≥ 0.
    let a: Vec<Vec<f64>> = points
        .iter()
        .zip(labels)
        .map(|(x, y)| {
            let mut r: Vec<f64> = x.iter().map(|v| -y * v).collect();
            if free_bias {
                r.push(-y);
            }
            r
        })
        .collect();
    let am = CscMatrix::from(&a);
    let b = vec![-1.0; points.len()];
    let cones = [NonnegativeConeT(points.len())];
    let settings = DefaultSettingsBuilder::default()
        .verbose(false)
        .tol_gap_abs(1e-12)
        .tol_gap_rel(1e-12)
        .tol_feas(1e-12)
        .max_iter(500)
        .build()
        .unwrap();
    let mut solver = DefaultSolver::new(&pm, &q, &am, &b, &cones, settings).unwrap();
    solver.solve();
    match solver.solution.status {
        SolverStatus::Solved | SolverStatus::AlmostSolved => {
            let w = &solver.solution.x[..d];
            Some(1.0 / w.iter().map(|v| v * v).sum::<f64>().sqrt())
        }
        _ => None,
    }
}

/// Iris features as a dataset: channels in cm, range [0, 10] cm at 1e-8 cm per count.
fn iris_pair(a: usize, b: usize) -> Dataset {
    let iris = linfa_datasets::iris();
    let (records, targets) = (iris.records(), iris.targets());
    let names = ["sepal_length", "sepal_width", "petal_length", "petal_width"];
    let scales: Vec<ChannelScale> = names
        .iter()
        .map(|n| ChannelScale::new(n, "cm", 0.0, 10.0, 1e-8, 0.0).unwrap())
        .collect();
    let mut ds = Dataset::empty(std::path::Path::new("iris"), scales);
    for (i, (row, &t)) in records.outer_iter().zip(targets.iter()).enumerate() {
        if t != a && t != b {
            continue;
        }
        for (v, s) in row.iter().zip(&ds.scales) {
            ds.raw.push(s.to_raw(*v).unwrap());
        }
        ds.labels.push(if t == a { 1 } else { -1 });
        ds.lines.push(i as u64 + 2);
    }
    ds
}

fn scaled_points(ds: &Dataset) -> (Vec<Vec<f64>>, Vec<f64>) {
    let mut pts = Vec::new();
    for i in 0..ds.len() {
        let mut x = vec![0.0; ds.dim()];
        ds.scaled_row(i, &mut x);
        pts.push(x);
    }
    (pts, ds.labels.iter().map(|&l| f64::from(l)).collect())
}

#[test]
fn iris_setosa_vs_versicolor_is_separable_and_margin_matches_clarabel() {
    // Fisher's iris data (linfa-datasets): setosa (0) vs versicolor (1) is linearly separable.
    let ds = iris_pair(0, 1);
    assert_eq!(ds.len(), 100);
    let r = check(&ds, &ds.all(), 1000, 1);
    assert!(r.separable, "setosa vs versicolor must be separable");
    let ours = r.margin.unwrap();
    let (pts, ys) = scaled_points(&ds);
    let reference = clarabel_margin(&pts, &ys, true).expect("Clarabel solves the hard-margin QP");
    let rel = (ours - reference).abs() / reference;
    assert!(
        rel <= 1e-6,
        "γ* {ours} vs Clarabel {reference}: relative error {rel:e}"
    );
}

#[test]
fn iris_versicolor_vs_virginica_is_not_separable() {
    // Fisher's iris data (linfa-datasets): versicolor (1) vs virginica (2) overlap.
    let ds = iris_pair(1, 2);
    let r = check(&ds, &ds.all(), 200, 1);
    assert!(!r.separable);
    // The LP certificate: a basic solution names at most d + 2 units, from both classes.
    assert!(
        !r.conflict.is_empty() && r.conflict.len() <= ds.dim() + 2,
        "{} units",
        r.conflict.len()
    );
    assert!(
        r.conflict.iter().any(|u| u.label == "GO") && r.conflict.iter().any(|u| u.label == "NO-GO")
    );
    // Clarabel agrees: the hard-margin QP is infeasible.
    let (pts, ys) = scaled_points(&ds);
    assert_eq!(clarabel_margin(&pts, &ys, true), None);
}

#[test]
fn xor_is_not_separable() {
    // XOR, the classic set no hyperplane separates.
    let ds = Dataset::from_scaled(
        &[
            vec![0.0, 0.0],
            vec![1.0, 1.0],
            vec![0.0, 1.0],
            vec![1.0, 0.0],
        ],
        &[-1, -1, 1, 1],
    );
    let r = check(&ds, &ds.all(), 100, 1);
    assert!(!r.separable && r.perceptron_converged == Some(false));
    assert_eq!(r.conflict.len(), 4);
}

#[test]
fn constructed_margin_is_recovered() {
    // Two parallel rows of points at signed distance ±γ from the line 0.6·x + 0.8·y + 0.1 = 0
    // (unit normal), overlapping along the line, plus points farther out: the maximum margin
    // is γ by construction (the midline between two parallel supporting lines).
    let gamma = 0.0375;
    let n = [0.6, 0.8];
    let t = [-0.8, 0.6];
    let mut pts = Vec::new();
    let mut labels = Vec::new();
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    for (s, dist) in [(-0.3, gamma), (0.3, gamma), (-0.25, -gamma), (0.35, -gamma)] {
        pts.push(vec![
            s * t[0] + (dist - 0.1) * n[0],
            s * t[1] + (dist - 0.1) * n[1],
        ]);
        labels.push(if dist > 0.0 { 1 } else { -1 });
    }
    while pts.len() < 60 {
        let (s, dist): (f64, f64) = (rng.gen_range(-0.5..0.5), rng.gen_range(0.1..0.4));
        let sign = if pts.len() % 2 == 0 { 1.0 } else { -1.0 };
        pts.push(vec![
            s * t[0] + (sign * dist - 0.1) * n[0],
            s * t[1] + (sign * dist - 0.1) * n[1],
        ]);
        labels.push(sign as i8);
    }
    let ds = Dataset::from_scaled(&pts, &labels);
    let r = check(&ds, &ds.all(), 10_000, 1);
    assert!(r.separable);
    assert!(
        (r.margin.unwrap() - gamma).abs() < 1e-7,
        "γ* = {} vs constructed {gamma}",
        r.margin.unwrap()
    );
    // The four constructed units lie exactly on the margin; the support set names units of both classes.
    let sep = r.separator.as_ref().unwrap();
    for (i, x) in pts.iter().enumerate().take(4) {
        let f = f64::from(labels[i]) * sep.score(x);
        assert!(
            (f - 1.0).abs() < 1e-6,
            "unit {i} should sit on the margin: y·f = {f}"
        );
    }
    assert!(
        r.support.iter().all(|u| u.index < 4),
        "only constructed units support the margin"
    );
    assert!(
        r.support.iter().any(|u| u.label == "GO") && r.support.iter().any(|u| u.label == "NO-GO")
    );
}

#[test]
fn perceptron_updates_never_exceed_the_novikoff_bound() {
    // Novikoff (1962): on data in the unit ball separable with margin γ by a unit-norm
    // separator through the origin, the perceptron makes at most 1/γ² updates. γ is taken
    // from Clarabel (the reference solver), not from our own solver.
    let mut rng = ChaCha8Rng::seed_from_u64(2026);
    let mut checked = 0;
    for trial in 0..40 {
        let d = rng.gen_range(2..6);
        let w: Vec<f64> = (0..d).map(|_| rng.gen_range(-1.0..1.0)).collect();
        let b: f64 = rng.gen_range(-0.3..0.3);
        let mut pts = Vec::new();
        let mut labels = Vec::new();
        while pts.len() < 80 {
            let x: Vec<f64> = (0..d).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let s: f64 = w.iter().zip(&x).map(|(a, b)| a * b).sum::<f64>() + b;
            if s.abs() < 0.05 {
                continue;
            }
            labels.push(if s > 0.0 { 1 } else { -1 });
            pts.push(x);
        }
        let ds = Dataset::from_scaled(&pts, &labels);
        let idx = ds.all();
        let r = radius(&ds, &idx);
        let z: Vec<Vec<f64>> = (0..ds.len())
            .map(|i| {
                let mut x = vec![0.0; d];
                ds.scaled_row(i, &mut x);
                x.push(1.0);
                x.iter().map(|v| v / r).collect()
            })
            .collect();
        let ys: Vec<f64> = labels.iter().map(|&l| f64::from(l)).collect();
        let gamma = clarabel_margin(&z, &ys, false)
            .expect("separable through the origin after augmentation");
        let run = perceptron(
            &ds,
            &idx,
            PerceptronKind::Classic,
            PerceptronConfig {
                epochs: 100_000,
                seed: trial,
            },
        );
        assert!(run.converged, "trial {trial}");
        let bound = 1.0 / (gamma * gamma);
        assert!(
            run.updates as f64 <= bound,
            "trial {trial}: {} updates > bound {bound}",
            run.updates
        );
        // Our own solver for the same γ agrees with the reference.
        let (ours, _) = homogeneous_margin(&ds, &idx, r).unwrap();
        assert!(
            (ours - gamma).abs() / gamma < 1e-6,
            "trial {trial}: γ {ours} vs {gamma}"
        );
        checked += 1;
    }
    assert_eq!(checked, 40);
}

#[test]
fn soft_margin_on_overlapping_data_converges() {
    let ds = iris_pair(1, 2);
    let run = max_margin(&ds, &ds.all(), SvmConfig::soft(10.0));
    assert!(run.converged);
    let acc = host_trainer::train::eval::evaluate(&run.model, 0.0, &ds, &ds.all()).accuracy();
    // Versicolor vs virginica: a linear classifier gets about 95–98 % (common practice; from memory).
    assert!(acc > 0.93, "accuracy {acc}");
}

#[test]
fn logs_above_the_lp_limit_are_decided_and_certified() {
    // Regression: on a 25 000-unit log the full LP is skipped; the verdict must still be
    // certified (a separator checked on every unit, or a verified common point of both hulls).
    use host_trainer::ingest::{LogOptions, ScaleFrom, read};
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("big.csv");
    let mut buf = Vec::new();
    host_trainer::synth::write_log(&mut buf, 25_000, 8, 0.01, 3).unwrap();
    std::fs::write(&path, &buf).unwrap();
    let sheet =
        host_trainer::ingest::sheet::ChannelSheet::parse(&host_trainer::synth::sheet(8)).unwrap();
    let ds = read(
        std::slice::from_ref(&path),
        &LogOptions::default(),
        ScaleFrom::Sheet(&sheet),
    )
    .unwrap();
    assert!(ds.len() > host_trainer::train::separability::LP_FULL_LIMIT);
    let r = check(&ds, &ds.all(), 5, 1);
    assert!(r.separable, "{}", r.decided_by);
    assert!(r.decided_by.contains("verified"), "{}", r.decided_by);
    // The same readings once more with the other label: now the hulls share a point.
    let mut flipped = ds.clone();
    let copy = flipped.raw_row(17).to_vec();
    flipped.raw.extend_from_slice(&copy);
    flipped.labels.push(-flipped.labels[17]);
    flipped.lines.push(99_999);
    let r = check(&flipped, &flipped.all(), 5, 1);
    assert!(!r.separable);
    assert!(
        !r.conflict.is_empty() && r.conflict.len() <= flipped.dim() + 2,
        "{} units: {}",
        r.conflict.len(),
        r.decided_by
    );
}

#[test]
fn a_false_go_cap_of_zero_keeps_every_nogo_unit_strictly_nogo_in_float_and_fixed() {
    // Fisher's iris data (linfa-datasets): versicolor (GO) vs virginica (NO-GO) overlap, so
    // the soft margin (C = 1) leaves NO-GO units on the GO side; --max-false-go 0 must move
    // the threshold past every one of them, with room for rounding.
    let ds = iris_pair(1, 2);
    let req = host_trainer::workflow::TrainRequest {
        epochs: 100,
        seed: 1,
        c: host_trainer::train::c_choice::CPolicy::Fixed(1.0),
        max_false_go: Some(0),
        folds: 0,
        cv_trainers: host_trainer::workflow::CvTrainers::Auto,
        figures: host_trainer::train::separability::Figures::ALL,
        target: None,
        ..host_trainer::workflow::TrainRequest::new(
            host_trainer::train::eval::TrainerKind::MaxMargin,
        )
    };
    let fm = host_trainer::workflow::train_model(&ds, None, &req)
        .unwrap()
        .model;
    let shift = fm.summary.threshold_shift.as_ref().unwrap();
    assert_eq!(shift.false_go, 0);
    // Float: by the trainer's scores and by the audit's (raw-reading) scores.
    let lin = fm.linear();
    let raw_form = host_trainer::ingest::dataset::RawForm::new(&ds, &fm.weights, fm.bias);
    for (i, s) in lin.scores(&ds, &ds.all()).iter().enumerate() {
        if ds.labels[i] < 0 {
            assert!(*s < fm.threshold, "unit {i}: {s} vs {}", fm.threshold);
            assert!(raw_form.score(ds.raw_row(i)) < fm.threshold);
        }
    }
    // Fixed: the device kernel says NO-GO to every NO-GO unit.
    let q = host_trainer::release::quantise::quantise(
        &fm,
        Some(&ds),
        host_trainer::release::quantise::QuantConfig::default(),
    )
    .unwrap();
    for i in (0..ds.len()).filter(|&i| ds.labels[i] < 0) {
        let d = q.model.classify(ds.raw_row(i)).unwrap();
        assert_eq!(d.verdict, shared_model::Verdict::NoGo, "unit {i}");
    }
}
