//! Whole-process benchmark of the commands as a user runs them, on generated logs
//! (SYNTHETIC, seeded, kept out of git in `host-trainer/benches/data/`). Every figure is a
//! ratio against a reference measured in the same run, never a pass/fail:
//!
//! - `train` with default settings against `train --folds 0` (goal ≤ 3×), per log size;
//! - `check` without a channel sheet against `check` with one (goal ≤ 1.5×);
//! - the hard-margin solve on each fold of the default 5-fold cross-validation: major
//!   cycles against the median of its siblings (goal ≤ 5×);
//! - against the tools a user would pick instead, each a whole process started the same way
//!   and alternated with Linegate's run (`whole.py`): `check` against polars reading the CSV
//!   alone (goal ≥ 3× faster; `check --novikoff` beside it, for the figures it adds),
//!   `train --trainer perceptron` against pandas + scikit-learn's
//!   Perceptron (goal ≥ 6×), `train --trainer hard-margin` against liblinear's hinge-loss
//!   SVM at C = 1000 (goal ≥ 5×; both margins printed, Linegate's certified);
//! - `audit` as a whole command: units per second (goal ≥ 3 million on 5,000,000 × 16) and
//!   peak memory against the readings as f32 (goal ≤ 2×), from GNU time.
//!
//! `cargo bench -p host-trainer --bench commands [-- ROWS ...]` (default 1000000). The
//! release binary must be built first (`cargo build --release`). The references need
//! `pip install polars pandas scikit-learn liblinear-official`; without them their lines
//! say SKIPPED.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use host_trainer::ingest::LogOptions;
use host_trainer::train::maxmargin::max_margin;
use host_trainer::train::svm::SvmConfig;

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

/// A command to time: program and arguments.
struct Proc<'a> {
    program: &'a Path,
    args: Vec<&'a str>,
}

impl Proc<'_> {
    /// Runs once: seconds and stdout, or `None` if it failed (a reference without its
    /// library exits 3).
    fn run(&self) -> Option<(f64, String)> {
        let s = Instant::now();
        let o = Command::new(self.program).args(&self.args).output().ok()?;
        let secs = s.elapsed().as_secs_f64();
        o.status
            .success()
            .then(|| (secs, String::from_utf8_lossy(&o.stdout).into_owned()))
    }
}

fn median(mut t: Vec<f64>) -> f64 {
    t.sort_by(f64::total_cmp);
    t[t.len() / 2]
}

/// Medians of `runs` alternated runs of `ours` and `theirs`, and the reference's last
/// stdout; `None` when the reference cannot run.
fn pair(ours: &Proc<'_>, theirs: &Proc<'_>, runs: usize) -> Option<(f64, f64, String)> {
    let (mut a, mut b, mut out) = (Vec::new(), Vec::new(), String::new());
    for _ in 0..runs {
        a.push(ours.run().expect("linegate ran").0);
        let (t, o) = theirs.run()?;
        b.push(t);
        out = o;
    }
    Some((median(a), median(b), out))
}

/// Seconds and peak resident memory (KiB) of one run, from GNU time; `None` without it.
fn time_and_memory(bin: &Path, args: &[&str]) -> Option<(f64, f64)> {
    let s = Instant::now();
    let o = Command::new("/usr/bin/time")
        .args(["-f", "peak_kib=%M"])
        .arg(bin)
        .args(args)
        .output()
        .ok()?;
    let secs = s.elapsed().as_secs_f64();
    let err = String::from_utf8_lossy(&o.stderr);
    let kib = err
        .lines()
        .find_map(|l| l.strip_prefix("peak_kib="))?
        .trim()
        .parse()
        .ok()?;
    o.status.success().then_some((secs, kib))
}

/// The whole-process comparisons with the tools a user would pick instead, and the audit.
fn against_references(bin: &Path, root: &Path, log: &str, sheet: &str, rows: usize) {
    let scratch = root.join("benches/data/cmd-reference-model.json");
    let scratch = scratch.to_str().unwrap();
    let py = Path::new("python3");
    let script = root.join("benches/whole.py");
    let script = script.to_str().unwrap();
    let theirs = |mode| Proc {
        program: py,
        args: vec![script, mode, log],
    };
    // `linegate -q ARGS LOG --sheet SHEET`.
    fn linegate<'a>(bin: &'a Path, args: &[&'a str], log: &'a str, sheet: &'a str) -> Proc<'a> {
        let mut a = vec!["-q"];
        a.extend_from_slice(args);
        a.extend([log, "--sheet", sheet]);
        Proc {
            program: bin,
            args: a,
        }
    }
    let ours = |args: &[&'static str]| linegate(bin, args, log, sheet);
    // A scratch file, not /dev/null: the output is written beside and renamed into place.
    let train = |trainer| {
        let args = [
            "train",
            "--trainer",
            trainer,
            "--folds",
            "0",
            "--force",
            "-o",
            scratch,
        ];
        linegate(bin, &args, log, sheet)
    };
    let runs = if rows > 2_000_000 { 1 } else { 3 };
    let skipped = |what: &str| {
        println!(
            "SKIPPED: {what}: python3 with polars, pandas, scikit-learn and liblinear-official is needed (pip install polars pandas scikit-learn liblinear-official)"
        );
    };
    match pair(&ours(&["check"]), &theirs("polars-load"), runs) {
        Some((a, b, _)) => println!(
            "{rows} x 16: linegate check {a:.2} s, polars reading the CSV alone {b:.2} s: check {:.2}x faster (goal >= 3x)",
            b / a
        ),
        None => skipped("check against polars"),
    }
    // With the figures `check` leaves out by default: the second solve and a perceptron run.
    match pair(
        &ours(&["check", "--novikoff"]),
        &theirs("polars-load"),
        runs,
    ) {
        Some((a, b, _)) => println!(
            "{rows} x 16: linegate check --novikoff {a:.2} s, polars reading the CSV alone {b:.2} s: {:.2}x faster",
            b / a
        ),
        None => skipped("check --novikoff against polars"),
    }
    match pair(&train("perceptron"), &theirs("sklearn-perceptron"), runs) {
        Some((a, b, _)) => println!(
            "{rows} x 16: linegate train --trainer perceptron {a:.2} s, pandas + scikit-learn Perceptron {b:.2} s: {:.2}x faster (goal >= 6x)",
            b / a
        ),
        None => skipped("train perceptron against scikit-learn"),
    }
    match pair(&train("hard-margin"), &theirs("liblinear"), runs) {
        Some((a, b, out)) => {
            let check = Command::new(bin)
                .args(["-q", "check", log, "--sheet", sheet, "--json"])
                .output()
                .unwrap();
            let j: serde_json::Value = serde_json::from_slice(&check.stdout).unwrap();
            println!(
                "{rows} x 16: linegate train --trainer hard-margin {a:.2} s (certified margin {}), liblinear -s 3 -c 1000 {b:.2} s ({}): {:.2}x faster (goal >= 5x)",
                j["margin"],
                out.trim(),
                b / a
            );
        }
        None => skipped("train hard-margin against liblinear"),
    }
}

/// `audit` of `model` on `log` as a whole command: units per second and peak memory.
fn audit_rate(bin: &Path, model: &str, log: &str, rows: usize) {
    match time_and_memory(bin, &["-q", "audit", "--model", model, "--train", log]) {
        Some((secs, kib)) => {
            let readings_kib = (rows * 16 * 4) as f64 / 1024.0;
            println!(
                "{rows} x 16: audit {secs:.2} s = {:.2} million units/s (goal >= 3); peak memory {:.0} MiB = {:.2}x the readings as f32 (goal <= 2x)",
                rows as f64 / secs / 1e6,
                kib / 1024.0,
                kib / readings_kib
            );
        }
        None => println!("SKIPPED: audit memory: GNU time (/usr/bin/time) is not installed"),
    }
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
                // --force: a sheet left from an earlier run (its log removed) is rewritten.
                .args([
                    "-q",
                    "generate",
                    "--force",
                    "--rows",
                    &rows.to_string(),
                    "-o",
                ])
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
        // The model trained just above (hard-margin, no folds) is the one audited.
        audit_rate(&bin, o, l, rows);
        against_references(&bin, root, l, s, rows);
        let cs = time(&bin, &["-q", "check", l, "--sheet", s], runs);
        let cn = time(&bin, &["-q", "check", l], runs);
        println!(
            "{rows} x 16: check without sheet {cn:.2} s / with sheet {cs:.2} s = {:.2}x (goal <= 1.5x)",
            cn / cs
        );
        // The hard margin on each fold of the default cross-validation (seed 1, 5 folds).
        let (ds, _) = host_trainer::workflow::load(
            std::slice::from_ref(&log),
            &LogOptions::default(),
            Some(&sheet),
        )
        .unwrap();
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
