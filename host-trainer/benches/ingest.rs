//! Ingest benchmark: the same generated log (SYNTHETIC, seeded, kept out of git in
//! `host-trainer/benches/data/`) read into a dataset from each form a plant exports, timed
//! in the same run and printed as ratios against the comma-separated CSV, never as
//! pass/fail:
//!
//! - CSV with commas (the reference), and with semicolons and decimal commas (a spreadsheet
//!   set to a European locale): the reader should keep its speed on both;
//! - Parquet as `linegate generate` writes it (snappy, 1,048,576-row groups), and, when
//!   pyarrow is installed, as pyarrow writes it by default (snappy, one large group) and
//!   with zstd: the goal is Parquet faster than CSV.
//!
//! Every form must give the same units, reading for reading; the benchmark checks that
//! before it times anything.
//!
//! `cargo bench -p host-trainer --bench ingest [-- ROWS] [WORD]` (default 1000000 rows; a
//! word times only the forms whose name holds it, e.g. `pyarrow`, for profiling).

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use host_trainer::ingest::dataset::Dataset;
use host_trainer::ingest::sheet::ChannelSheet;
use host_trainer::ingest::{self, LogOptions, ScaleFrom};

/// Seconds of one read of `log`.
fn time_one(log: &Path, sheet: &ChannelSheet) -> f64 {
    let s = Instant::now();
    let ds = ingest::read(
        &[log.to_path_buf()],
        &LogOptions::default(),
        ScaleFrom::Sheet(sheet),
    )
    .unwrap();
    std::hint::black_box(&ds);
    s.elapsed().as_secs_f64()
}

fn median(mut t: Vec<f64>) -> f64 {
    t.sort_by(f64::total_cmp);
    t[t.len() / 2]
}

fn read(log: &Path, sheet: &ChannelSheet) -> Dataset {
    ingest::read(
        &[log.to_path_buf()],
        &LogOptions::default(),
        ScaleFrom::Sheet(sheet),
    )
    .unwrap()
}

fn main() {
    let rows: usize = std::env::args()
        .skip(1)
        .find_map(|a| a.parse().ok())
        .unwrap_or(1_000_000);
    let channels = 16;
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/data");
    std::fs::create_dir_all(&dir).unwrap();
    let stem = dir.join(format!("ingest-{rows}x{channels}"));
    let csv = stem.with_extension("csv");
    let sheet_path = stem.with_extension("toml");
    if !csv.exists() {
        eprintln!("generating {} (synthetic, seed 2026)…", csv.display());
        let mut f = std::io::BufWriter::new(std::fs::File::create(&csv).unwrap());
        host_trainer::synth::write_log(&mut f, rows, channels, 0.02, 2026).unwrap();
        drop(f);
        std::fs::write(&sheet_path, host_trainer::synth::sheet(channels)).unwrap();
    }
    let sheet = ChannelSheet::read(&sheet_path).unwrap();
    let mut forms: Vec<(&str, PathBuf)> = vec![("CSV, comma", csv.clone())];
    let semi = dir.join(format!("ingest-{rows}x{channels}-semicolon.csv"));
    if !semi.exists() {
        // The same text with ';' between fields and ',' as the decimal mark.
        let text = std::fs::read(&csv).unwrap();
        let swapped: Vec<u8> = text
            .iter()
            .map(|&b| match b {
                b',' => b';',
                b'.' => b',',
                b => b,
            })
            .collect();
        std::fs::write(&semi, swapped).unwrap();
    }
    forms.push(("CSV, semicolon + decimal comma", semi));
    let pq = stem.with_extension("parquet");
    if !pq.exists() {
        let mut bytes = Vec::new();
        host_trainer::synth::write_log_parquet(&mut bytes, rows, channels, 0.02, 2026).unwrap();
        std::fs::write(&pq, bytes).unwrap();
    }
    forms.push((
        "Parquet (linegate generate: snappy, 1,048,576-row groups)",
        pq,
    ));
    // pyarrow, a general-purpose writer from the registries, with its defaults and with zstd.
    for (name, codec) in [("snappy", "snappy"), ("zstd", "zstd")] {
        let out = dir.join(format!("ingest-{rows}x{channels}-pyarrow-{name}.parquet"));
        if !out.exists() {
            let script = format!(
                "import pyarrow.csv as c, pyarrow.parquet as p, sys\n\
                 t = c.read_csv(sys.argv[1])\n\
                 p.write_table(t, sys.argv[2], compression='{codec}')\n"
            );
            let ok = Command::new("python3")
                .args(["-c", &script])
                .arg(&csv)
                .arg(&out)
                .status()
                .is_ok_and(|s| s.success());
            if !ok {
                println!(
                    "SKIPPED: pyarrow-written Parquet ({name}): python3 with pyarrow is not installed (pip install pyarrow)"
                );
                continue;
            }
        }
        forms.push(if name == "snappy" {
            ("Parquet (pyarrow defaults: snappy)", out)
        } else {
            ("Parquet (pyarrow, zstd)", out)
        });
    }

    let only: Option<String> = std::env::args()
        .skip(1)
        .find(|a| a.parse::<usize>().is_err() && !a.starts_with('-'));
    if let Some(word) = &only {
        forms.retain(|(name, _)| name.contains(word.as_str()));
    }
    // Same units from every form before any timing.
    let reference = read(&csv, &sheet);
    for (name, path) in forms.iter().filter(|(_, p)| only.is_none() && p != &csv) {
        let ds = read(path, &sheet);
        assert_eq!(
            ds.raw, reference.raw,
            "{name}: readings differ from the CSV"
        );
        assert_eq!(ds.labels, reference.labels, "{name}: labels differ");
        assert_eq!(ds.lines, reference.lines, "{name}: lines differ");
    }

    let runs = 5;
    println!(
        "ingest, {rows} × {channels} (medians of {runs} reads, each alternated with a read of the comma CSV; ratio = CSV time / this form's time, > 1 is faster than CSV):"
    );
    for (name, path) in &forms {
        let (mut t_csv, mut t_form) = (Vec::new(), Vec::new());
        for _ in 0..runs {
            t_csv.push(time_one(&csv, &sheet));
            if path != &csv {
                t_form.push(time_one(path, &sheet));
            }
        }
        let t_ref = median(t_csv);
        let t = if path == &csv { t_ref } else { median(t_form) };
        let mib = std::fs::metadata(path).unwrap().len() as f64 / (1 << 20) as f64;
        println!(
            "  {name:<58} {t:>7.3} s  {mib:>7.1} MiB  {:>6.0} MiB/s  {:.2}×",
            mib / t,
            t_ref / t
        );
    }
}
