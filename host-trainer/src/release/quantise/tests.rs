//! The quantiser's tests: the search's settled margin, the Q conversion at half-LSB edges.

use super::*;
use fixed::types::extra::{U7, U15};
use fixed::{FixedI8, FixedI16};

/// The moved model's minimum margin over every unit the float model gets right,
/// recomputed here unit by unit with the kernel (the definition, not the pass).
fn brute_min_margin(m: &CheckedModel, fm: &FloatModel, ds: &Dataset) -> Option<f64> {
    let correct = Correct::new(fm, ds);
    let mut least = f64::INFINITY;
    for i in (0..ds.len()).filter(|&i| correct.holds(i)) {
        let d = m.classify(ds.raw_row(i)).ok()?;
        least = least.min(fixed_margin(m.model(), d.score, ds.labels[i]));
    }
    least.is_finite().then_some(least)
}

#[test]
fn a_move_too_large_for_the_kept_units_asks_for_the_full_pass() {
    // Two kept units of margins 5.5 and 10.5 out of three scored; channel a's weight
    // moves by one, so a unit left out (margin ≥ 10.5) may lose up to Xmax + 1.
    let plain = FixedModel::example_two_channel();
    let mut moved = plain.clone();
    moved.channels[0].weight += 1;
    let rows = vec![(5.5, 1i8, vec![0, 0]), (10.5, -1, vec![0, 0])];
    let after = [4.5, 9.5];
    let settle = |xmax: f64, scored: usize, m: &FixedModel| {
        let xmax = [xmax, xmax];
        let bound = Bound {
            ideal_w: &[0.0, 0.0],
            ideal_b: 0.0,
            xmax: &xmax,
        };
        settled(&plain, m, &bound, (&rows, &after), scored, Some(5.5))
    };
    // Reach 1·(4 + 1) = 5: 4.5 ≤ 10.5 − 5, settled.
    assert_eq!(settle(4.0, 3, &moved), Some(4.5));
    // Reach 7: a unit left out could fall to 3.5, below 4.5.
    assert_eq!(settle(6.0, 3, &moved), None);
    // Every scored unit kept: nothing left out to fear.
    assert_eq!(settle(1e6, 2, &moved), Some(4.5));
    // A RECHECK band: its units have no margin, the full pass decides.
    let mut banded = moved.clone();
    banded.go_min += 2;
    assert_eq!(settle(4.0, 3, &banded), None);
    // A refused reading in the search's pass: no margin to report from the kept units.
    let bound = Bound {
        ideal_w: &[0.0, 0.0],
        ideal_b: 0.0,
        xmax: &[4.0, 4.0],
    };
    assert_eq!(
        settled(&plain, &moved, &bound, (&rows, &after), 3, None),
        None
    );
}

#[test]
fn kept_units_settle_the_moved_margin_only_when_they_must() {
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
    let (mut used, mut moved_runs) = (0, 0);
    for trial in 0..12 {
        // More units than the search keeps (4,096), so the shortcut has something to prove.
        let n = 6_000 + 1_000 * trial;
        let w: Vec<f64> = (0..3).map(|_| rng.gen_range(-1.0..1.0)).collect();
        let mut pts = Vec::new();
        let mut labels = Vec::new();
        while pts.len() < n {
            let p: Vec<f64> = (0..3).map(|_| rng.gen_range(-1.0..1.0)).collect();
            let s: f64 = p.iter().zip(&w).map(|(a, b)| a * b).sum();
            if s.abs() > 0.02 {
                labels.push(if s > 0.0 { 1 } else { -1 });
                pts.push(p);
            }
        }
        let ds = Dataset::from_scaled(&pts, &labels);
        let req = crate::workflow::TrainRequest {
            epochs: 3,
            seed: trial as u64,
            c: crate::train::c_choice::CPolicy::Fixed(10.0),
            max_false_go: None,
            folds: 0,
            cv_trainers: crate::workflow::CvTrainers::Auto,
            figures: crate::train::separability::Figures::VERDICT,
            target: None,
            ..crate::workflow::TrainRequest::new(crate::train::eval::TrainerKind::Averaged)
        };
        let fm = crate::workflow::train_model(&ds, None, &req).unwrap().model;
        for weight_bits in [5u8, 6, 8] {
            let cfg = QuantConfig {
                weight_bits,
                ..QuantConfig::default()
            };
            let q = quantise(&fm, Some(&ds), cfg).unwrap();
            // Whichever way it was found, the reported margin is the definition's.
            assert_eq!(
                q.optimised_min_margin,
                brute_min_margin(&q.model, &fm, &ds),
                "trial {trial}, {weight_bits}-bit weights"
            );
            if q.moves > 0 {
                moved_runs += 1;
                // And the shortcut itself, where it answers, agrees with a full pass.
                let plain = quantise(&fm, None, cfg).unwrap();
                let xmax = input_extremes(&plain);
                let bound = Bound {
                    ideal_w: &plain.ideal_weights,
                    ideal_b: plain.ideal_bias,
                    xmax: &xmax,
                };
                let wmax = (1i64 << (weight_bits - 1)) - 1;
                let found = search(&plain.model, &ds, &Correct::new(&fm, &ds), wmax, &bound);
                if let Some(v) = found.moved {
                    used += 1;
                    let m = CheckedModel::new(found.model).unwrap();
                    assert_eq!(Some(v), brute_min_margin(&m, &fm, &ds));
                }
            }
        }
    }
    // The test means something only if both happened.
    assert!(
        moved_runs > 0 && used > 0,
        "moved {moved_runs}, shortcut used {used}"
    );
}

#[test]
fn q_conversion_matches_the_fixed_crate_at_half_lsb_edges() {
    // Reference: the `fixed` crate's from_num (round to nearest, ties to even).
    for k in -300i32..300 {
        for off in [-1e-9, 0.0, 1e-9] {
            let v = (f64::from(k) + 0.5) / 128.0 + off; // exact half-LSB edges in Q7
            if let Some(f) = FixedI8::<U7>::checked_from_num(v) {
                assert_eq!(to_q(v, 7), f64::from(f.to_bits()), "Q7 at {v}");
            }
            let v15 = (f64::from(k) + 0.5) / 32768.0 + off;
            if let Some(f) = FixedI16::<U15>::checked_from_num(v15) {
                assert_eq!(to_q(v15, 15), f64::from(f.to_bits()), "Q15 at {v15}");
            }
        }
    }
}
