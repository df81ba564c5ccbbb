//! The fixed-point side against outside references: exact rational arithmetic
//! (num-rational), brute force over readings for the rounding bound, and the gate.

use host_trainer::ingest::dataset::Dataset;
use host_trainer::release::audit::audit;
use host_trainer::release::bound::error_bound;
use host_trainer::release::gates::AuditConfig;
use host_trainer::release::quantise::{QuantConfig, Quantised, quantise};
use host_trainer::release::sweep::sweep;
use host_trainer::train::eval::TrainerKind;
use host_trainer::workflow::{TrainRequest, train_model};
use num_rational::Ratio;
use num_traits::ToPrimitive;
use proptest::prelude::*;
use shared_model::{AuditMark, ChannelSpec, CheckedModel, FixedModel, Verdict};

fn model_of(chans: Vec<ChannelSpec>, bias: i64) -> CheckedModel {
    let mut m = FixedModel::example_two_channel();
    m.channels.clear();
    for c in chans {
        m.channels.push(c).unwrap();
    }
    m.weight_bits = 32;
    m.acc_bits = 64;
    m.bias = bias;
    m.nogo_max = -1;
    m.go_min = 1;
    CheckedModel::new(m).unwrap()
}

proptest! {
    /// Kernel vs exact rational arithmetic: x = (raw − offset)·multiplier / 2^shift as a
    /// rational, rounded to nearest with ties towards +∞ (the documented rule), then the
    /// exact weighted sum. Scores must be identical, verdicts too.
    #[test]
    fn kernel_equals_exact_rational_arithmetic(
        spec in prop::collection::vec((-50_000i32..50_000, 1i32..100_000, 18u8..36, -(1i32 << 30)..(1i32 << 30), any::<u32>()), 1..=32),
        bias in -(1i64 << 50)..(1i64 << 50),
    ) {
        let mut chans = Vec::new();
        let mut raw = Vec::new();
        for &(lo, span, shift, w, pick) in &spec {
            let off = lo + span / 2;
            let half = i64::from((lo + span - off).max(off - lo).max(1));
            let mul = ((32767i64 << shift) / half).clamp(1, i64::from(i32::MAX)) as i32;
            chans.push(ChannelSpec { raw_min: lo, raw_max: lo + span, offset: off, multiplier: mul, shift, weight: w, ..Default::default() });
            raw.push(lo + (pick % (span as u32 + 1)) as i32);
        }
        let m = model_of(chans.clone(), bias);
        let mut exact = Ratio::from_integer(i128::from(bias));
        for (c, &r) in chans.iter().zip(&raw) {
            let x = Ratio::new((i128::from(r) - i128::from(c.offset)) * i128::from(c.multiplier), 1i128 << c.shift);
            let rounded = (x + Ratio::new(1, 2)).floor();
            exact += rounded * Ratio::from_integer(i128::from(c.weight));
        }
        let d = m.classify(&raw).unwrap();
        prop_assert_eq!(Ratio::from_integer(i128::from(d.score)), exact);
        let want = if d.score >= 1 { Verdict::Go } else if d.score <= -1 { Verdict::NoGo } else { Verdict::Recheck };
        prop_assert_eq!(d.verdict, want);
    }
}

/// A float model on `pts` trained by the hard margin (every caller's points are separable),
/// for the quantiser tests.
fn trained(
    pts: &[Vec<f64>],
    labels: &[i8],
) -> (host_trainer::train::float_model::FloatModel, Dataset) {
    let ds = Dataset::from_scaled(pts, labels);
    let req = TrainRequest {
        epochs: 100,
        seed: 1,
        c: host_trainer::train::c_choice::CPolicy::Fixed(10.0),
        max_false_go: None,
        folds: 0,
        cv_trainers: host_trainer::workflow::CvTrainers::Auto,
        figures: host_trainer::train::separability::Figures::ALL,
        target: None,
        ..TrainRequest::new(TrainerKind::HardMargin)
    };
    (train_model(&ds, None, &req).unwrap().model, ds)
}

#[test]
fn rounding_error_never_exceeds_the_bound() {
    // Brute force over every raw reading of small random models: the true error of the
    // integer score against the exact float score (times the scale A) stays within the bound.
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
    for trial in 0..30 {
        let d = rng.gen_range(1..4);
        let pts: Vec<Vec<f64>> = (0..40)
            .map(|_| (0..d).map(|_| rng.gen_range(-1.0..1.0)).collect())
            .collect();
        let w: Vec<f64> = (0..d).map(|_| rng.gen_range(-1.0..1.0)).collect();
        let labels: Vec<i8> = pts
            .iter()
            .map(|p| {
                if p.iter().zip(&w).map(|(a, b)| a * b).sum::<f64>() > 0.1 {
                    1
                } else {
                    -1
                }
            })
            .collect();
        if labels.iter().all(|&l| l == labels[0]) {
            continue;
        }
        let (mut fm, _) = trained(&pts, &labels);
        // Coarse raw ranges so every reading can be enumerated.
        for c in fm.channels.iter_mut() {
            *c = host_trainer::ingest::scaling::ChannelScale::new(
                &c.name,
                "",
                -1.0,
                1.0,
                1.0 / 150.0,
                0.0,
            )
            .unwrap();
        }
        for bits in [4u8, 8, 12] {
            let q = quantise(
                &fm,
                None,
                QuantConfig {
                    weight_bits: bits,
                    input_bits: 8,
                    optimise: false,
                    ..Default::default()
                },
            )
            .unwrap();
            let bound = error_bound(&q).total;
            let m = q.model.model();
            let mut raw = vec![0i32; d];
            let total: usize = m
                .channels
                .iter()
                .map(|c| (c.raw_max - c.raw_min + 1) as usize)
                .product();
            let mut worst: f64 = 0.0;
            for k in 0..total.min(200_000) {
                let mut r = k;
                for (j, c) in m.channels.iter().enumerate() {
                    let span = (c.raw_max - c.raw_min + 1) as usize;
                    raw[j] = c.raw_min + (r % span) as i32;
                    r /= span;
                }
                let acc = q.model.classify(&raw).unwrap().score as f64;
                let exact = fm
                    .channels
                    .iter()
                    .zip(&fm.weights)
                    .zip(&raw)
                    .map(|((s, w), &r)| w * s.scaled(r))
                    .sum::<f64>()
                    + fm.bias;
                worst = worst.max((acc - exact * q.scale).abs());
            }
            assert!(
                worst <= bound * (1.0 + 1e-12) + 1e-9,
                "trial {trial}, {bits} bits: error {worst} > bound {bound}"
            );
        }
    }
}

#[test]
fn bound_is_attained_on_a_constructed_worst_case() {
    // One channel with x = round((r + 1)/2 − ½) exact at ties: r = 9 gives X = 4.5 → x = 5 (δx = +½);
    // ideal weight 2.6 → 3 (δw = +0.4), ideal bias 0.6 → 1 (δb = +0.4). All three errors add:
    // acc = 3·5 + 1 = 16, exact = 2.6·4.5 + 0.6 = 12.3, error 3.7 = ½·3 + 0.4·4.5 + 0.4.
    let spec = ChannelSpec {
        raw_min: -9,
        raw_max: 9,
        offset: 0,
        multiplier: 1,
        shift: 1,
        weight: 3,
        ..Default::default()
    };
    let mut m = FixedModel::example_two_channel();
    m.channels.clear();
    m.channels.push(spec).unwrap();
    m.bias = 1;
    let model = CheckedModel::new(m).unwrap();
    let q = Quantised {
        model: model.clone(),
        scale: 1.0,
        kappa: vec![0.5],
        ideal_weights: vec![2.6],
        ideal_bias: 0.6,
        threshold_acc: 0.0,
        plain_weights: vec![3],
        plain_bias: 1,
        needed_bits: 8,
        plain_min_margin: None,
        optimised_min_margin: None,
        moves: 0,
        recheck_band: 0.0,
        signals: Default::default(),
    };
    let b = error_bound(&q);
    let acc = model.classify(&[9]).unwrap().score as f64;
    let err = acc - (2.6 * 4.5 + 0.6);
    assert!((b.total - 3.7).abs() < 1e-12, "bound {}", b.total);
    assert!(
        (err - b.total).abs() < 1e-12,
        "error {err} vs bound {}",
        b.total
    );
    assert!(b.textbook >= b.total);
}

#[test]
fn tiny_margin_fails_at_8_bits_passes_at_16_and_the_sweep_recommends_16() {
    // Two channels; support units on two parallel lines x₁ + c·x₂ = ±m·‖(1, c)‖ (and farther
    // units), so the max-margin model is w ∝ (1, c), b = 0, whatever m is. c puts the second
    // weight exactly between two integers at 12 bits, so the weight-rounding term is as large
    // as it gets there. The bound in score units at 12 and 16 bits is then fixed, and m is
    // placed between the two: 8 and 12 bits cannot guarantee, 16 can.
    let c = 651.5 / 2047.0;
    let norm = (1.0f64 + c * c).sqrt();
    let (n, t) = ([1.0 / norm, c / norm], [-c / norm, 1.0 / norm]);
    let data = |m: f64| -> (Vec<Vec<f64>>, Vec<i8>) {
        let mut pts = Vec::new();
        let mut labels = Vec::new();
        for (s, d) in [
            (-0.3, m),
            (0.3, m),
            (-0.25, -m),
            (0.35, -m),
            (0.1, 0.4),
            (-0.2, 0.6),
            (0.0, -0.5),
            (0.2, -0.7),
        ] {
            pts.push(vec![s * t[0] + d * n[0], s * t[1] + d * n[1]]);
            labels.push(if d > 0.0 { 1 } else { -1 });
        }
        (pts, labels)
    };
    let bound_at = |fm: &host_trainer::train::float_model::FloatModel, bits| {
        let q = quantise(
            fm,
            None,
            QuantConfig {
                weight_bits: bits,
                optimise: false,
                ..Default::default()
            },
        )
        .unwrap();
        error_bound(&q).total / q.scale
    };
    let (p, l) = data(0.01);
    let (probe, _) = trained(&p, &l);
    let (b12, b16) = (bound_at(&probe, 12), bound_at(&probe, 16));
    assert!(b12 > 4.0 * b16, "bounds {b12} vs {b16}");
    eprintln!("bounds in score units: 12-bit {b12:e}, 16-bit {b16:e}");
    let m = (b12 * b16).sqrt();
    let (p, l) = data(m);
    let (fm, ds) = trained(&p, &l);
    assert!(
        (fm.weights[1] / fm.weights[0] - c).abs() < 1e-6 && fm.bias.abs() < 1e-6,
        "model {:?} {}",
        fm.weights,
        fm.bias
    );
    let cfg = AuditConfig::default();
    let at = |bits| {
        let q = quantise(
            &fm,
            Some(&ds),
            QuantConfig {
                weight_bits: bits,
                ..Default::default()
            },
        )
        .unwrap();
        audit(&q, &fm, &ds, &[], &[], cfg)
    };
    assert!(!at(8).passed, "8-bit weights must fail");
    assert!(!at(12).passed, "12-bit weights must fail");
    let r16 = at(16);
    assert!(r16.passed, "16-bit weights must pass: {:?}", r16.reasons);
    let (rows, best) = sweep(&fm, &ds, &[], QuantConfig::default(), cfg, false).unwrap();
    let best = &rows[best.expect("some format passes")];
    assert_eq!((best.weight_bits, best.input_bits), (16, 16));
}

#[test]
fn audit_mark_survives_packing() {
    let pts: Vec<Vec<f64>> = [0.5, 0.9, -0.5, -0.9].iter().map(|&v| vec![v]).collect();
    let (fm, ds) = trained(&pts, &[1, 1, -1, -1]);
    let q = quantise(&fm, Some(&ds), QuantConfig::default()).unwrap();
    let marked = host_trainer::release::blob_release::mark(&q.model, AuditMark::Overridden);
    let bytes = host_trainer::release::pack::blob_bytes(&marked);
    assert_eq!(
        shared_model::blob::decode::<shared_model::Readings>(&bytes)
            .unwrap()
            .model()
            .audit,
        AuditMark::Overridden
    );
    let r = audit(&q, &fm, &ds, &[], &[], AuditConfig::default());
    assert!(r.passed && r.guaranteed);
    assert_eq!(r.flips.len(), 0);
    // Margins reported against the kernel's own scores.
    let d = q.model.classify(ds.raw_row(0)).unwrap();
    assert!(r.tightest.iter().any(|u| u.fixed_score == Some(d.score)) || r.tightest.len() == 4);
    let _ = Ratio::<i64>::from_integer(0).to_f64();
}
