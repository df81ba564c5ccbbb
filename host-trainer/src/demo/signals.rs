//! The demo's signal scenario: the same invented fan-module station, recording a window of
//! samples per unit instead of one number per sensor. ALL DATA HERE IS SYNTHETIC.
//!
//! Per unit, during a spin test at 7,500 rpm (125 Hz): a 256-sample vibration trace from a
//! 12-bit accelerometer at 2,000 samples per second, and a 128-sample supply-current
//! window; the case temperature as one reading. Imbalance raises the 125 Hz tone, a worn
//! bearing adds a tone at 437.5 Hz and warms the case, a winding short raises the current
//! and its ripple. Linegate computes the features (RMS, the two band amplitudes,
//! peak-to-peak, mean current and its standard deviation) with the device's integer code.
//! A sample at an ADC rail is a clipped accelerometer: the sheet declares the rails
//! invalid, so the device refuses such a unit (FAULT, NO-GO); the field log has a few.

use std::fmt::Write as _;
use std::path::Path;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::{DemoError, normal, write_file};
use crate::error::OutputError;
use crate::ingest::LogOptions;
use crate::output::OutputSet;
use crate::release::audit::{self, AuditConfig, AuditReport};
use crate::release::quantise::QuantConfig;
use crate::train::eval::TrainerKind;
use crate::workflow::{self, TrainOutcome, TrainRequest};

/// Samples per vibration window and per current window.
const VIB_WINDOW: usize = 256;
const CUR_WINDOW: usize = 128;
/// Samples per second.
const RATE: f64 = 2000.0;

/// The signal scenario's channel sheet (TOML).
pub fn sheet() -> String {
    "# Linegate channel sheet for the SYNTHETIC fan-module signal demo (invented scenario).
# One row per sample in the log; the device computes every feature below itself.

[[signal]]
name = \"vibration_g\"
unit = \"g\"
lsb = 0.001
zero = -2.048
# The ADC rails (0 and 4095) mean a clipped accelerometer: refused.
raw_min = 1
raw_max = 4094
window = 256
sample_rate = 2000.0
noise = 0.002

[[signal]]
name = \"supply_current_ma\"
unit = \"mA\"
lsb = 1.0
raw_min = 0
raw_max = 4095
window = 128
sample_rate = 2000.0
noise = 2.0

[[feature]]
name = \"vib_rms\"
signal = \"vibration_g\"
kind = \"rms\"

[[feature]]
name = \"vib_125hz\"
signal = \"vibration_g\"
kind = \"band\"
frequency = 125.0

[[feature]]
name = \"vib_437hz\"
signal = \"vibration_g\"
kind = \"band\"
frequency = 437.5

[[feature]]
name = \"vib_p2p\"
signal = \"vibration_g\"
kind = \"peak_to_peak\"

[[feature]]
name = \"current_mean\"
signal = \"supply_current_ma\"
kind = \"mean\"

[[feature]]
name = \"current_ripple\"
signal = \"supply_current_ma\"
kind = \"std_dev\"

[[channel]]
name = \"case_temp_c\"
unit = \"degC\"
min = 0.0
max = 100.0
lsb = 0.1
noise = 0.3
"
    .to_string()
}

/// One synthetic signal log as CSV text: `units` units, those whose hidden health index lies
/// within `gap` of the limit left out; with `labels`, a verdict column (on each unit's first
/// row); every `clip_every`-th unit has a clipped vibration burst.
pub fn generate_log(
    seed: u64,
    units: usize,
    shift: char,
    gap: f64,
    labels: bool,
    clip_every: Option<usize>,
) -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut out = String::from("unit_id,sample,vibration_g,supply_current_ma,case_temp_c");
    out.push_str(if labels { ",verdict\n" } else { "\n" });
    let tau = 2.0 * std::f64::consts::PI;
    let mut n = 0usize;
    while n < units {
        let (mut imb, mut bear, mut short) = (0.0, 0.0, 0.0);
        match rng.gen_range(0..10) {
            0 | 1 => imb = rng.gen_range(0.0..1.0),
            2 | 3 => bear = rng.gen_range(0.0..1.0),
            4 => short = rng.gen_range(0.0..1.0),
            _ => {}
        }
        let temp: f64 = 32.0 + 1.5 * normal(&mut rng) + 8.0 * bear;
        let h = 2.0 * imb + 3.0 * bear + 2.5 * short + 0.1 * (temp - 32.0);
        if (h - 1.0).abs() < gap {
            continue;
        }
        let a1 = 0.25 + 0.02 * normal(&mut rng) + 0.5 * imb;
        let a2 = 0.01 + 0.3 * bear;
        let (p1, p2): (f64, f64) = (rng.gen_range(0.0..tau), rng.gen_range(0.0..tau));
        let i0 = 420.0 + 12.0 * normal(&mut rng) + 150.0 * short;
        let ripple = 15.0 + 60.0 * short;
        let clipped = clip_every.is_some_and(|k| n % k == k - 1);
        let id = format!("FM-{shift}{n:04}");
        for k in 0..VIB_WINDOW {
            let t = k as f64 / RATE;
            let mut v = a1 * (tau * 125.0 * t + p1).sin()
                + a2 * (tau * 437.5 * t + p2).sin()
                + 0.03 * normal(&mut rng);
            if clipped && (100..104).contains(&k) {
                v = 2.047;
            }
            let _ = write!(out, "{id},{k},{:.3}", v.clamp(-2.048, 2.047));
            if k < CUR_WINDOW {
                let c = i0 + ripple * (tau * 250.0 * t).sin() + 3.0 * normal(&mut rng);
                let _ = write!(out, ",{:.0}", c.max(0.0));
            } else {
                out.push(',');
            }
            if k == 0 {
                let _ = write!(out, ",{temp:.1}");
                if labels {
                    out.push_str(if h > 1.0 { ",NO-GO" } else { ",GO" });
                }
            } else {
                out.push(',');
                if labels {
                    out.push(',');
                }
            }
            out.push('\n');
        }
        n += 1;
    }
    out
}

/// What the signal scenario did.
pub struct SignalDemo {
    /// The training.
    pub train: TrainOutcome,
    /// The audit of the released model.
    pub audit: AuditReport,
    /// Field units the device refuses (a clipped window).
    pub field_faults: usize,
    /// Field units replayed.
    pub field_units: usize,
}

/// Runs the signal scenario: logs and sheet written in `tmp`, results added to `set` as
/// files of `out`.
///
/// # Errors
/// [`DemoError`] of any step.
pub fn run(tmp: &Path, out: &Path, set: &mut OutputSet) -> Result<SignalDemo, DemoError> {
    let write_in = |name: &str, text: &str| write_file(tmp, name, text);
    let logs = [
        (
            "signal-train-synthetic.csv",
            generate_log(44, 500, 'T', 0.5, true, None),
        ),
        (
            "signal-holdout-synthetic.csv",
            generate_log(55, 250, 'H', 0.5, true, None),
        ),
        (
            "signal-field-synthetic.csv",
            generate_log(66, 40, 'F', 0.0, false, Some(13)),
        ),
    ];
    let paths = logs
        .iter()
        .map(|(n, t)| write_in(n, t))
        .collect::<Result<Vec<_>, _>>()?;
    let sheet_text = sheet();
    let sheet_path = write_in("signal-channels.toml", &sheet_text)?;
    let opts = LogOptions::default();
    let (mut train_ds, sheet) =
        workflow::load(std::slice::from_ref(&paths[0]), &opts, Some(&sheet_path))?;
    train_ds.path = out.join(logs[0].0);
    let sheet = sheet.map(|(_, mut f)| {
        f.path = out.join("signal-channels.toml");
        f
    });
    // The demo's logs are separable: its model is the exact hard margin, threshold 0.
    let req = TrainRequest {
        folds: 0,
        cv_trainers: crate::workflow::CvTrainers::All,
        target: None,
        figures: crate::train::separability::Figures::VERDICT,
        ..TrainRequest::new(TrainerKind::HardMargin)
    };
    let mut train = workflow::train_model(&train_ds, sheet.as_ref(), &req)?;
    let mut holdout_ds =
        workflow::load_for_model(std::slice::from_ref(&paths[1]), &opts, &train.model)?;
    holdout_ds.path = out.join(logs[1].0);
    train.evaluate_holdout(&holdout_ds);
    let fm = &train.model;
    let noise: Vec<Option<f64>> = fm.channels.iter().map(|c| c.noise).collect();
    let done = audit::release_applying(
        fm,
        &train_ds,
        &[("holdout", &holdout_ds)],
        QuantConfig::default(),
        &noise,
        AuditConfig::default(),
        audit::Apply {
            recommended_format: false,
            suggested_band: true,
            progress: false,
        },
    )?;
    let blob = audit::released_blob(&done.q, done.report.passed, None);
    let model: shared_model::CheckedModel<shared_model::SignalSection> =
        shared_model::blob::decode(&blob).map_err(|e| OutputError::Io {
            path: out.join("signal-model.lgmb"),
            source: std::io::Error::other(e.to_string()),
        })?;
    // The field log replayed as `linegate replay` does: the device's lines, and its vectors.
    let mut replay = crate::release::replay::model_line(&model, &blob);
    let mut vectors = replay.clone();
    let (mut units, mut faults) = (0usize, 0usize);
    crate::release::replay::replay_log(
        &paths[2],
        &LogOptions {
            label_optional: true,
            ..LogOptions::default()
        },
        fm,
        &model,
        &mut Default::default(),
        |line, raw, windows| {
            faults += usize::from(line.contains("FAULT"));
            units += 1;
            let _ = writeln!(replay, "{line}");
            let _ = writeln!(vectors, "{}", crate::release::replay::vector(raw, windows));
        },
    )?;
    let md = crate::report::markdown(fm, &done.report, None);
    for (name, text) in &logs {
        set.add(out.join(name), text.as_bytes());
    }
    set.add(out.join("signal-channels.toml"), sheet_text.as_bytes());
    set.add(out.join("signal-model.json"), fm.to_json());
    set.add(out.join("signal-audit.md"), md.as_bytes());
    set.add(out.join("signal-model.lgmb"), blob);
    set.add(out.join("signal-replay-field.txt"), replay);
    set.add(out.join("signal-vectors-field.txt"), vectors);
    Ok(SignalDemo {
        train,
        audit: done.report,
        field_faults: faults,
        field_units: units,
    })
}
