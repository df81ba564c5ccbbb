//! Any bytes as a signal log (one row per sample), read as the CLI reads one: for training
//! and `check` (`workflow::load` with a sheet of signals), for a model (`load_for_model`:
//! holdout, audit) and for `replay` (`replay_log`). The first byte picks the mode:
//! bit 0 clear, the rest is the log against a fixed sheet (signal `x`, its mean and
//! peak-to-peak, reading channel `t`) and a model trained on it; bit 0 set, the rest is the
//! sheet's text, a NUL byte, then the log. Bit 1 reads under `--skip-bad-rows`.
//!
//! Never a panic; an accepted log's units each have one value per channel (its readings and
//! one per feature); reading the same bytes twice gives the same dataset or the same error.
#![no_main]

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use host_trainer::ingest::LogOptions;
use host_trainer::ingest::SkipReport;
use host_trainer::ingest::dataset::Dataset;
use host_trainer::ingest::scaling::ChannelScale;
use host_trainer::ingest::sheet::ChannelSheet;
use host_trainer::ingest::{ScaleFrom, read};
use host_trainer::release::quantise::{QuantConfig, quantise};
use host_trainer::release::{blob_release, replay};
use host_trainer::train::eval::TrainerKind;
use host_trainer::train::float_model::FloatModel;
use host_trainer::workflow::{self, CvTrainers, TrainRequest};
use libfuzzer_sys::fuzz_target;
use shared_model::SignalSection;

/// Signal `x`: 4 samples, raw 0..=100; its mean and peak-to-peak; reading channel `t`.
const SHEET: &str = "[[channel]]\nname = \"t\"\nmin = 0\nmax = 50\nlsb = 0.1\n\n\
[[signal]]\nname = \"x\"\nraw_min = 0\nraw_max = 100\nwindow = 4\n\n\
[[feature]]\nname = \"x_mean\"\nsignal = \"x\"\nkind = \"mean\"\n\n\
[[feature]]\nname = \"x_p2p\"\nsignal = \"x\"\nkind = \"peak_to_peak\"\n";

/// This process's scratch directory.
fn dir() -> PathBuf {
    let d = std::env::temp_dir().join(format!("linegate-fuzz-signal-{}", std::process::id()));
    let _ = std::fs::create_dir_all(&d);
    d
}

/// The fixed sheet's file, and a model trained on it with its blob decoded for replay.
struct Fixed {
    sheet: PathBuf,
    model: FloatModel,
    device: host_trainer::release::pack::DeviceModel,
}

fn fixed() -> &'static Fixed {
    static FIXED: OnceLock<Fixed> = OnceLock::new();
    FIXED.get_or_init(|| {
        let d = dir();
        let sheet = d.join("fixed.toml");
        std::fs::write(&sheet, SHEET).unwrap();
        // GO units read low, NO-GO units high.
        let mut log = String::from("unit_id,sample,x,t,verdict\n");
        for i in 0..10 {
            for (id, base, label) in [("G", 10, "GO"), ("N", 60, "NO-GO")] {
                for k in 0..4 {
                    let first = k == 0;
                    log += &format!(
                        "{id}{i},{k},{},{},{}\n",
                        base + i + k * (i % 3),
                        if first {
                            format!("{}", 20 + i)
                        } else {
                            String::new()
                        },
                        if first { label } else { "" }
                    );
                }
            }
        }
        let train_log = d.join("train.csv");
        std::fs::write(&train_log, log).unwrap();
        let (ds, sheet_file) = workflow::load(
            std::slice::from_ref(&train_log),
            &LogOptions::default(),
            Some(&sheet),
        )
        .unwrap();
        let req = TrainRequest {
            epochs: 100,
            seed: 1,
            c: host_trainer::train::c_choice::CPolicy::Fixed(10.0),
            max_false_go: None,
            folds: 0,
            cv_trainers: CvTrainers::All,
            figures: host_trainer::train::separability::Figures::VERDICT,
            ..TrainRequest::new(TrainerKind::MaxMargin)
        };
        let model = workflow::train_model(&ds, sheet_file.as_ref().map(|(_, f)| f), &req)
            .unwrap()
            .model;
        let q = quantise(&model, Some(&ds), QuantConfig::default()).unwrap();
        let blob = blob_release::released_blob(&q, true, None);
        let device = shared_model::blob::decode_classes::<SignalSection>(&blob).unwrap();
        Fixed {
            sheet,
            model,
            device,
        }
    })
}

/// The dataset as text, to compare two reads (its path is the same file both times).
fn seen(r: &Result<Dataset, host_trainer::error::InputError>) -> String {
    match r {
        Ok(ds) => format!("{ds:?}"),
        Err(e) => format!("error: {e}"),
    }
}

/// One value per channel per unit; the feature channels are those of the sheet or model.
fn check_shape(ds: &Dataset, features: usize) {
    assert!(!ds.is_empty());
    assert_eq!(ds.raw.len(), ds.len() * ds.dim());
    assert_eq!(ds.labels.len(), ds.len());
    assert_eq!(ds.lines.len(), ds.len());
    assert_eq!(
        ds.scales.iter().filter(|c| c.source.is_some()).count(),
        features
    );
}

/// Reads `log` twice with `read`, checks both agree and the shape of an accepted dataset.
fn twice(features: usize, read: impl Fn() -> Result<Dataset, host_trainer::error::InputError>) {
    let first = read();
    assert_eq!(seen(&first), seen(&read()), "a second read differs");
    if let Ok(ds) = &first {
        check_shape(ds, features);
    }
}

fuzz_target!(|data: &[u8]| {
    let Some((&mode, rest)) = data.split_first() else {
        return;
    };
    let opts = LogOptions {
        skip_bad_rows: mode & 2 != 0,
        ..LogOptions::default()
    };
    let d = dir();
    let log = d.join("log.csv");
    if mode & 1 == 0 {
        let f = fixed();
        if std::fs::write(&log, rest).is_err() {
            return;
        }
        twice(2, || {
            workflow::load(std::slice::from_ref(&log), &opts, Some(&f.sheet)).map(|(ds, _)| ds)
        });
        twice(2, || {
            workflow::load_for_model(std::slice::from_ref(&log), &opts, &f.model)
        });
        replay_twice(&log, &opts, &f.model, &f.device);
        return;
    }
    // The sheet's text, a NUL, the log.
    let Some(nul) = rest.iter().position(|&b| b == 0) else {
        return;
    };
    let Ok(text) = std::str::from_utf8(&rest[..nul]) else {
        return;
    };
    let Ok(sheet) = ChannelSheet::parse(text) else {
        return;
    };
    if sheet.signals.is_empty() || std::fs::write(&log, &rest[nul + 1..]).is_err() {
        return;
    }
    let sheet_path = d.join("sheet.toml");
    if std::fs::write(&sheet_path, text).is_err() {
        return;
    }
    let nf = sheet.features.len();
    twice(nf, || {
        workflow::load(std::slice::from_ref(&log), &opts, Some(&sheet_path)).map(|(ds, _)| ds)
    });
    // A model's channels as training orders them: the readings, then the features.
    let channels: Vec<ChannelScale> = sheet
        .channels
        .iter()
        .chain(&sheet.features)
        .cloned()
        .collect();
    twice(nf, || {
        read(
            std::slice::from_ref(&log),
            &opts,
            ScaleFrom::Model {
                channels: &channels,
                signals: &sheet.signals,
            },
        )
    });
});

/// Replays the log twice through the fixed model: the same lines (or error) both times, and
/// each unit handed on with one raw reading per reading channel and one window per signal.
fn replay_twice(
    log: &Path,
    opts: &LogOptions,
    fm: &FloatModel,
    device: &host_trainer::release::pack::DeviceModel,
) {
    let readings = fm.channels.iter().filter(|c| c.source.is_none()).count();
    // As `replay` reads a log: labels optional, no digest.
    let opts = LogOptions {
        label_optional: true,
        digest: false,
        ..opts.clone()
    };
    let run = || {
        let mut lines = String::new();
        let mut skipped = SkipReport::default();
        let r = replay::replay_log(log, &opts, fm, device, &mut skipped, |line, raw, w| {
            assert_eq!(raw.len(), readings);
            assert_eq!(w.len(), fm.signals.len());
            lines.push_str(line);
            lines.push('\n');
        });
        (r.map_err(|e| e.to_string()), lines, skipped)
    };
    let (a, b) = (run(), run());
    assert_eq!(a.0, b.0);
    assert_eq!(a.1, b.1);
    assert_eq!(a.2, b.2);
}
