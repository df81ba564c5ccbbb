//! The demo's readings scenario: an invented end-of-line test station for a small brushless
//! cooling-fan module, one number per sensor. ALL DATA HERE IS SYNTHETIC, generated from a
//! seed.
//!
//! Five channels in different units, with three failure modes:
//! worn bearing (vibration and temperature up), winding short (current up,
//! speed down) and blade damage (noise and vibration up). A unit is NO-GO
//! when a hidden linear health index exceeds a limit; the training and
//! holdout logs leave a small gap around the limit (separable, small margin),
//! the second-shift log adds a temperature drift and label noise near the
//! limit (not separable). `signals.rs` is the same station recording sample windows.

use std::fmt::Write as _;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::flow::{Role, Scenario};
use crate::release::applying::Apply;
use crate::train::eval::TrainerKind;
use crate::workflow::TrainRequest;

struct Chan {
    name: &'static str,
    unit: &'static str,
    nominal: f64,
    sd: f64,
    min: f64,
    max: f64,
    lsb: f64,
    noise: f64,
    digits: usize,
    health: f64,
}

const CHANNELS: [Chan; 5] = [
    Chan {
        name: "supply_current_ma",
        unit: "mA",
        nominal: 420.0,
        sd: 18.0,
        min: 150.0,
        max: 900.0,
        lsb: 0.1,
        noise: 1.5,
        digits: 1,
        health: 0.45,
    },
    Chan {
        name: "vibration_mg",
        unit: "milli-g",
        nominal: 35.0,
        sd: 6.0,
        min: 0.0,
        max: 400.0,
        lsb: 0.1,
        noise: 2.0,
        digits: 1,
        health: 0.55,
    },
    Chan {
        name: "bearing_temp_rise_c",
        unit: "°C",
        nominal: 18.0,
        sd: 2.5,
        min: -10.0,
        max: 80.0,
        lsb: 0.01,
        noise: 0.3,
        digits: 2,
        health: 0.5,
    },
    Chan {
        name: "acoustic_dba",
        unit: "dBA",
        nominal: 38.0,
        sd: 1.5,
        min: 20.0,
        max: 80.0,
        lsb: 0.01,
        noise: 0.4,
        digits: 2,
        health: 0.45,
    },
    Chan {
        name: "speed_error_rpm",
        unit: "rpm",
        nominal: 0.0,
        sd: 25.0,
        min: -900.0,
        max: 900.0,
        lsb: 1.0,
        noise: 5.0,
        digits: 0,
        health: -0.4,
    },
];

const LIMIT: f64 = 2.5;

/// A standard normal draw (both scenarios' generators use it).
pub(super) fn normal(rng: &mut ChaCha8Rng) -> f64 {
    // Box–Muller.
    let u1: f64 = rng.gen_range(f64::EPSILON..1.0);
    let u2: f64 = rng.r#gen();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

fn health(v: &[f64; 5]) -> f64 {
    CHANNELS
        .iter()
        .zip(v)
        .map(|(c, x)| c.health * (x - c.nominal) / c.sd)
        .sum()
}

/// Generates one synthetic log as CSV text.
///
/// `gap`: units whose health index lies within `gap` of the limit are dropped.
/// `drift`: added to the temperature reading (second shift). `label_noise`: s.d. added to the index before labelling.
pub fn generate_log(
    seed: u64,
    units: usize,
    shift: char,
    gap: f64,
    drift: f64,
    label_noise: f64,
) -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut out = String::from(
        "unit_id,timestamp,supply_current_ma,vibration_mg,bearing_temp_rise_c,acoustic_dba,speed_error_rpm,verdict\n",
    );
    let mut n = 0usize;
    while n < units {
        let mut v = [0f64; 5];
        for (x, c) in v.iter_mut().zip(&CHANNELS) {
            *x = c.nominal + c.sd * normal(&mut rng);
        }
        match rng.gen_range(0..10) {
            0 => {
                v[1] += rng.gen_range(20.0..60.0);
                v[2] += rng.gen_range(5.0..12.0);
            }
            1 => {
                v[0] += rng.gen_range(60.0..200.0);
                v[4] -= rng.gen_range(60.0..300.0);
            }
            2 => {
                v[3] += rng.gen_range(4.0..10.0);
                v[1] += rng.gen_range(10.0..40.0);
            }
            _ => {}
        }
        let h = health(&v) + label_noise * normal(&mut rng);
        if (h - LIMIT).abs() < gap {
            continue;
        }
        // The hidden rule is on the true values; the second shift's temperature sensor reads high.
        v[2] += drift;
        if CHANNELS
            .iter()
            .zip(&v)
            .any(|(c, x)| *x < c.min || *x > c.max)
        {
            continue;
        }
        let secs = 6 * 3600 + n as u64 * 37;
        let _ = write!(
            out,
            "FAN-{shift}{n:05},2026-11-02T{:02}:{:02}:{:02}Z",
            secs / 3600 % 24,
            secs / 60 % 60,
            secs % 60
        );
        for (x, c) in v.iter().zip(&CHANNELS) {
            let _ = write!(out, ",{x:.prec$}", prec = c.digits);
        }
        let _ = writeln!(out, ",{}", if h > LIMIT { "NO-GO" } else { "GO" });
        n += 1;
    }
    out
}

/// The demo's channel sheet (TOML).
pub fn sheet() -> String {
    let mut s = String::from(
        "# Linegate channel sheet for the SYNTHETIC fan-module demo (invented scenario).\n",
    );
    for c in &CHANNELS {
        let _ = write!(
            s,
            "\n[[channel]]\nname = \"{}\"\nunit = \"{}\"\nmin = {:?}\nmax = {:?}\nlsb = {:?}\nnoise = {:?}\n",
            c.name, c.unit, c.min, c.max, c.lsb, c.noise
        );
    }
    s
}

/// The scenario: trained on the first shift's log with every figure and 5-fold
/// cross-validation of every trainer, the second shift's log checked, released with the
/// sweep's word lengths and the band the declared noise calls for, the holdout replayed.
pub(super) fn scenario() -> Scenario {
    Scenario {
        prefix: "",
        logs: vec![
            (
                "train-synthetic.csv",
                generate_log(11, 800, 'A', 0.25, 0.0, 0.0),
                Role::Train,
            ),
            (
                "drift-synthetic.csv",
                generate_log(22, 400, 'B', 0.0, 1.5, 0.35),
                Role::Checked,
            ),
            (
                "holdout-synthetic.csv",
                generate_log(33, 400, 'C', 0.25, 0.0, 0.0),
                Role::Holdout,
            ),
        ],
        sheet: ("channels.toml", sheet()),
        // The demo's logs are separable: its model is the exact hard margin, threshold 0.
        train: TrainRequest {
            folds: 5,
            cv_trainers: crate::workflow::CvTrainers::All,
            target: None,
            figures: crate::train::separability::Figures::ALL,
            ..TrainRequest::new(TrainerKind::HardMargin)
        },
        // What a release engineer would apply: the sweep's recommended word lengths and the
        // RECHECK band the declared noise calls for.
        apply: Apply {
            recommended_format: true,
            suggested_band: true,
            progress: false,
        },
        replay: Role::Holdout,
        full: true,
    }
}
