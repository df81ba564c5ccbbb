//! Any bytes as a Parquet bench log, read as the CLI reads a log file: `ingest::read` (check,
//! train) and `stream_units` (a trained model's scaling over a log of any length). Input that
//! does not start with Parquet's magic gets it put in front, so every input reaches the
//! Parquet reader. Never a panic; an accepted file reads the same twice, and streaming it
//! with its own scaling gives the units `ingest::read` gave.
#![no_main]

use host_trainer::ingest::{LogOptions, ScaleFrom, SkipReport, read, stream_units};
use libfuzzer_sys::fuzz_target;

/// The reader catches a panic inside the parquet crate (a damaged page) and reports a
/// damaged file; libFuzzer's hook would abort on it before the catch, so such panics pass
/// through the hook that was there before, as the `linegate` binary does. Any other panic
/// still aborts the run.
fn quiet_parquet_crate_panics() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| {
        let fuzzer = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            if !info
                .location()
                .is_some_and(|l| l.file().contains("/parquet-"))
            {
                fuzzer(info);
            }
        }));
    });
}

fuzz_target!(|data: &[u8]| {
    quiet_parquet_crate_panics();
    let dir = std::env::temp_dir().join(format!("linegate-fuzz-parquet-{}", std::process::id()));
    let _ = std::fs::create_dir_all(&dir);
    let path = dir.join("log.parquet");
    let bytes = if data.starts_with(b"PAR1") {
        data.to_vec()
    } else {
        [b"PAR1", data].concat()
    };
    if std::fs::write(&path, &bytes).is_err() {
        return;
    }
    for skip in [false, true] {
        let opts = LogOptions {
            skip_bad_rows: skip,
            ..LogOptions::default()
        };
        let read_once = || {
            read(std::slice::from_ref(&path), &opts, ScaleFrom::Observed)
                .map(|ds| format!("{ds:?}"))
                .map_err(|e| e.to_string())
        };
        let first = read_once();
        assert_eq!(first, read_once(), "a second read differs");
        let Ok(ds) = read(std::slice::from_ref(&path), &opts, ScaleFrom::Observed) else {
            continue;
        };
        assert!(!ds.is_empty());
        assert_eq!(ds.raw.len(), ds.len() * ds.dim());
        // The model's view: the same file streamed with the scaling it was read with.
        let mut skipped = SkipReport::default();
        let mut units = Vec::new();
        let streamed = stream_units(&path, &opts, &ds.scales, &mut skipped, |u| {
            assert_eq!(u.raw.len(), ds.dim());
            units.push((u.line, u.label, u.raw.to_vec()));
            Ok(())
        });
        let streamed = streamed.expect("an accepted file streams with its own scaling");
        assert_eq!(streamed, ds.sha256);
        let read: Vec<_> = (0..ds.len())
            .map(|i| (ds.lines[i], ds.labels[i], ds.raw_row(i).to_vec()))
            .collect();
        assert_eq!(units, read);
    }
});
