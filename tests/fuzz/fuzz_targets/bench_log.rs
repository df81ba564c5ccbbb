//! Any bytes as a bench log: reading returns a dataset or an error, never panics.
#![no_main]

use host_trainer::ingest::{LogOptions, ScaleFrom, read};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let dir = std::env::temp_dir().join(format!("linegate-fuzz-{}", std::process::id()));
    let _ = std::fs::create_dir_all(&dir);
    let path = dir.join("log.csv");
    if std::fs::write(&path, data).is_err() {
        return;
    }
    for skip in [false, true] {
        let opts = LogOptions {
            skip_bad_rows: skip,
            ..LogOptions::default()
        };
        if let Ok(ds) = read(std::slice::from_ref(&path), &opts, ScaleFrom::Observed) {
            assert_eq!(ds.raw.len(), ds.len() * ds.dim());
            assert!(ds.len() > 0);
        }
    }
});
