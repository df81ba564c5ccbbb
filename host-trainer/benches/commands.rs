//! Whole-process benchmark of the commands as a user runs them, on generated logs
//! (SYNTHETIC, seeded, kept out of git in `host-trainer/benches/data/`). Every figure is a
//! ratio against a reference measured in the same run, never a pass/fail:
//!
//! - `train` with default settings against `train --folds 0` (goal ≤ 3×), per log size;
//! - `check` without a channel sheet against `check` with one (goal ≤ 1.5×);
//! - the hard-margin solve on each fold of the default 5-fold cross-validation: major
//!   cycles against the median of its siblings (goal ≤ 5×).
//!
//! `cargo bench -p host-trainer --bench commands [-- ROWS ...]` (default 1000000). The
//! release binary must be built first (`cargo build --release`).

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use host_trainer::ingest::LogOptions;
use host_trainer::train::maxmargin::{SvmConfig, max_margin};

/// Median wall time of `runs` runs of `linegate args`, in seconds.
fn time(bin: &Path, args: &[&str], runs: usize) -> f64 {
    let mut t: Vec<f64> = (0..runs)
        .map(|_| {
            let s = Instant::now();
            let st = Command::new(bin).args(args).status().unwrap();
            assert!(st.success(), "linegate {args:?} failed");
            s.elapsed().as_secs_f64()
        })
        .collect();
    t.sort_by(f64::total_cmp);
    t[t.len() / 2]
}

fn main() {
    let sizes: Vec<usize> = std::env::args()
        .skip(1)
        .filter_map(|a| a.parse().ok())
        .collect();
    let sizes = if sizes.is_empty() {
        vec![1_000_000]
    } else {
        sizes
    };
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let bin = root.join("../target/release/linegate");
    assert!(
        bin.exists(),
        "build the release binary first: cargo build --release"
    );
    let dir = root.join("benches/data");
    std::fs::create_dir_all(&dir).unwrap();
    for rows in sizes {
        let log = dir.join(format!("cmd-{rows}x16.csv"));
        let sheet = log.with_extension("toml");
        if !log.exists() {
            let st = Command::new(&bin)
                .args(["-q", "generate", "--rows", &rows.to_string(), "-o"])
                .arg(&log)
                .status()
                .unwrap();
            assert!(st.success());
        }
        let l = log.to_str().unwrap();
        let s = sheet.to_str().unwrap();
        let out: PathBuf = dir.join("cmd-model.json");
        let o = out.to_str().unwrap();
        let runs = if rows > 2_000_000 { 1 } else { 3 };
        let t0 = time(
            &bin,
            &[
                "-q", "train", l, "--sheet", s, "--folds", "0", "-o", o, "--force",
            ],
            runs,
        );
        let td = time(
            &bin,
            &["-q", "train", l, "--sheet", s, "-o", o, "--force"],
            runs,
        );
        println!(
            "{rows} x 16: train default {td:.2} s / train --folds 0 {t0:.2} s = {:.2}x (goal <= 3x)",
            td / t0
        );
        let cs = time(&bin, &["-q", "check", l, "--sheet", s], runs);
        let cn = time(&bin, &["-q", "check", l], runs);
        println!(
            "{rows} x 16: check without sheet {cn:.2} s / with sheet {cs:.2} s = {:.2}x (goal <= 1.5x)",
            cn / cs
        );
        // The hard margin on each fold of the default cross-validation (seed 1, 5 folds).
        let (ds, _) =
            host_trainer::workflow::load(&log, &LogOptions::default(), Some(&sheet)).unwrap();
        let folds = ds.folds(5, 1);
        let mut cycles = Vec::new();
        for f in 0..folds.len() {
            let idx = host_trainer::ingest::dataset::Dataset::training_of_fold(&folds, f);
            let t = Instant::now();
            let run = max_margin(&ds, &idx, SvmConfig::hard());
            let secs = t.elapsed().as_secs_f64();
            println!(
                "{rows} x 16: fold {f}: {} major cycles, {secs:.2} s, certified {}",
                run.iterations, run.converged
            );
            cycles.push(run.iterations);
        }
        let mut sorted = cycles.clone();
        sorted.sort_unstable();
        let median = sorted[sorted.len() / 2] as f64;
        let worst = *sorted.last().unwrap() as f64;
        println!(
            "{rows} x 16: worst fold {:.2}x the median fold's major cycles (goal <= 5x)",
            worst / median
        );
    }
}
