//! The built-in demo: an invented end-of-line test station for a small brushless
//! cooling-fan module. ALL DATA HERE IS SYNTHETIC, generated from a seed.
//!
//! Five channels in different units, with three failure modes:
//! worn bearing (vibration and temperature up), winding short (current up,
//! speed down) and blade damage (noise and vibration up). A unit is NO-GO
//! when a hidden linear health index exceeds a limit; the training and
//! holdout logs leave a small gap around the limit (separable, small margin),
//! the second-shift log adds a temperature drift and label noise near the
//! limit (not separable). [`signals`] is the same station recording sample windows.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use crate::error::{InputError, OutputError};
use crate::ingest::LogOptions;
use crate::output::OutputSet;
use crate::release::applying::{self, Apply};
use crate::release::audit_report::AuditReport;
use crate::release::blob_release::{mark, release_mark};
use crate::release::gates::AuditConfig;
use crate::release::pack;
use crate::release::quantise::{QuantConfig, QuantError};
use crate::release::sweep::SweepRow;
use crate::train::eval::TrainerKind;
use crate::train::separability::SeparabilityReport;
use crate::workflow::{self, TrainOutcome, TrainRequest};

pub mod signals;
#[cfg(test)]
mod units_reference;

/// Where the demo places the model in flash: the last 4 KiB of the 256 KiB part the QEMU example uses.
pub const MODEL_REGION: u32 = 0x0003_F000;

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

fn normal(rng: &mut ChaCha8Rng) -> f64 {
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

/// Why the demo stopped.
#[derive(Debug, thiserror::Error)]
pub enum DemoError {
    /// Reading a generated file failed.
    #[error(transparent)]
    Input(#[from] InputError),
    /// Writing failed.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// Quantisation failed.
    #[error(transparent)]
    Quant(#[from] QuantError),
}

/// What the demo did, for the terminal summary.
pub struct DemoSummary {
    /// Training-log analysis.
    pub check_train: SeparabilityReport,
    /// Second-shift analysis.
    pub check_drift: SeparabilityReport,
    /// The max-margin training.
    pub train: TrainOutcome,
    /// Classic perceptron updates on the training log.
    pub perceptron_updates: u64,
    /// The audit of the packed format.
    pub audit: AuditReport,
    /// The sweep and its recommendation.
    pub sweep: (Vec<SweepRow>, Option<usize>),
    /// The signal scenario (features computed from sample windows).
    pub signals: signals::SignalDemo,
    /// Files written.
    pub files: Vec<PathBuf>,
}

/// Writes `text` to `dir/name` (the demo's scratch folder) and returns the path.
fn write_file(dir: &Path, name: &str, text: &str) -> Result<PathBuf, DemoError> {
    let p = dir.join(name);
    std::fs::write(&p, text).map_err(|e| OutputError::Io {
        path: p.clone(),
        source: e,
    })?;
    Ok(p)
}

/// Runs the whole job on synthetic data into `out`.
///
/// # Errors
/// [`DemoError`]; nothing is written unless every step succeeded.
pub fn run(out: &Path, force: bool) -> Result<DemoSummary, DemoError> {
    // The scratch folder lives in `out`, under the set's lock: removed when the set ends,
    // and by the next writer into `out` if this run is killed.
    let mut set = OutputSet::default();
    let tmp = set.scratch_dir(out)?;
    let write_in = |name: &str, text: &str| write_file(&tmp, name, text);
    let logs = [
        (
            "train-synthetic.csv",
            generate_log(11, 800, 'A', 0.25, 0.0, 0.0),
        ),
        (
            "drift-synthetic.csv",
            generate_log(22, 400, 'B', 0.0, 1.5, 0.35),
        ),
        (
            "holdout-synthetic.csv",
            generate_log(33, 400, 'C', 0.25, 0.0, 0.0),
        ),
    ];
    let sheet_text = sheet();
    let paths: Vec<PathBuf> = logs
        .iter()
        .map(|(n, t)| write_in(n, t))
        .collect::<Result<_, _>>()?;
    let sheet_path = write_in("channels.toml", &sheet_text)?;
    let opts = LogOptions::default();
    // Provenance and reports name the files as the user will find them in `out`.
    let (mut train_ds, sheet) =
        workflow::load(std::slice::from_ref(&paths[0]), &opts, Some(&sheet_path))?;
    train_ds.path = out.join(logs[0].0);
    let sheet = sheet.map(|(_, mut f)| {
        f.path = out.join("channels.toml");
        f
    });
    let (drift_ds, _) = workflow::load(std::slice::from_ref(&paths[1]), &opts, Some(&sheet_path))?;
    // The demo's logs are separable: its model is the exact hard margin, threshold 0.
    let req = TrainRequest {
        folds: 5,
        cv_trainers: crate::workflow::CvTrainers::All,
        target: None,
        figures: crate::train::separability::Figures::ALL,
        ..TrainRequest::new(TrainerKind::HardMargin)
    };
    let mut train = workflow::train_model(&train_ds, sheet.as_ref(), &req)?;
    let mut holdout_ds =
        workflow::load_for_model(std::slice::from_ref(&paths[2]), &opts, &train.model)?;
    holdout_ds.path = out.join(logs[2].0);
    train.evaluate_holdout(&holdout_ds);
    let check_drift = crate::train::separability::check(&drift_ds, &drift_ds.all(), 200, 1);
    let fm = &train.model;
    let noise: Vec<Option<f64>> = fm.channels.iter().map(|c| c.noise).collect();
    let acfg = AuditConfig::default();
    let base = QuantConfig::default();
    // The demo applies what a release engineer would: the sweep's recommended word lengths
    // and the RECHECK band the declared noise calls for.
    let apply = Apply {
        recommended_format: true,
        suggested_band: true,
        progress: false,
    };
    let done = applying::release_applying(
        fm,
        &train_ds,
        &[("holdout", &holdout_ds)],
        base,
        &noise,
        acfg,
        apply,
    )?;
    let (q, report) = (done.q, done.report);
    let sweep = done.sweep.unwrap_or_default();
    let model = mark(&q.model, release_mark(report.passed));
    let blob = pack::blob_bytes(&model);
    let doc = crate::report::document(fm, &report, Some(&sweep));
    let md = doc.markdown();
    for (name, text) in &logs {
        set.add(out.join(name), text.as_bytes());
    }
    set.add(out.join("channels.toml"), sheet_text.as_bytes());
    set.add(
        out.join("DATA-IS-SYNTHETIC.txt"),
        "Every log in this folder is SYNTHETIC: generated by `linegate demo` for an invented fan-module test station.\nDo not use it to judge real products.\n",
    );
    set.add(out.join("check-train.json"), json(&train.check));
    set.add(out.join("check-drift.json"), json(&check_drift));
    set.add(out.join("model.json"), fm.to_json());
    set.add(
        out.join("audit.json"),
        crate::report::json(&report, Some(&sweep)),
    );
    set.add(out.join("audit.md"), md.as_bytes());
    set.add(
        out.join("audit.html"),
        crate::report::html(fm, &report, Some(&sweep), &doc),
    );
    set.add(out.join("model.lgmb"), blob.clone());
    set.add(
        out.join("model.hex"),
        crate::release::hex::to_hex(MODEL_REGION, &blob),
    );
    set.add(
        out.join("replay-holdout.txt"),
        crate::release::replay::replay(&model, &holdout_ds),
    );
    set.add(
        out.join("vectors-holdout.txt"),
        crate::release::replay::vectors(&model, &holdout_ds),
    );
    let signals = signals::run(&tmp, out, &mut set)?;
    let files = set.commit(force)?;
    Ok(DemoSummary {
        signals,
        // The demo asks for every figure, so the run is there.
        perceptron_updates: train.check.perceptron_updates.unwrap_or(0),
        check_train: train.check.clone(),
        check_drift,
        train,
        audit: report,
        sweep,
        files,
    })
}

fn json<T: serde::Serialize>(v: &T) -> String {
    let mut s = serde_json::to_string_pretty(v).unwrap_or_default();
    s.push('\n');
    s
}
