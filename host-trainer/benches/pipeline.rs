//! Pipeline benchmark on a generated 1,000,000 × 16 log (SYNTHETIC, seeded, kept out of git in
//! `host-trainer/benches/data/`): ingest, classic perceptron (50-epoch cap), maximum margin, and
//! the release audit single-threaded and parallel. The same job is timed with scikit-learn
//! (`reference.py`, pandas CSV load + Perceptron + LinearSVC) in the same run, and everything is
//! printed as ratios, never as pass/fail.
//!
//! `cargo bench -p host-trainer --bench pipeline [-- ROWS]`

use std::path::Path;
use std::process::Command;
use std::time::Instant;

use host_trainer::ingest::sheet::ChannelSheet;
use host_trainer::ingest::{LogOptions, ScaleFrom, read};
use host_trainer::release::audit::audit;
use host_trainer::release::gates::AuditConfig;
use host_trainer::release::quantise::{QuantConfig, quantise};
use host_trainer::train::maxmargin::max_margin;
use host_trainer::train::perceptron::{PerceptronConfig, PerceptronKind, perceptron};
use host_trainer::train::svm::SvmConfig;

fn peak_rss_mib() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse::<f64>().ok())
        })
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

fn main() {
    let rows: usize = std::env::args()
        .skip(1)
        .find_map(|a| a.parse().ok())
        .unwrap_or(1_000_000);
    let channels = 16;
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/data");
    std::fs::create_dir_all(&dir).unwrap();
    let log = dir.join(format!("bench-{rows}x{channels}.csv"));
    let sheet_path = dir.join(format!("bench-{rows}x{channels}.toml"));
    if !log.exists() {
        eprintln!("generating {} (synthetic, seed 2026)…", log.display());
        let mut f = std::io::BufWriter::new(std::fs::File::create(&log).unwrap());
        host_trainer::synth::write_log(&mut f, rows, channels, 0.02, 2026).unwrap();
        drop(f);
        std::fs::write(&sheet_path, host_trainer::synth::sheet(channels)).unwrap();
    }
    let sheet = ChannelSheet::read(&sheet_path).unwrap();
    let data_f32_mib = (rows * channels * 4) as f64 / (1024.0 * 1024.0);

    let t = Instant::now();
    let ds = read(
        &[log.to_path_buf()],
        &LogOptions::default(),
        ScaleFrom::Sheet(&sheet),
    )
    .unwrap();
    let t_ingest = t.elapsed().as_secs_f64();
    let idx = ds.all();
    let t = Instant::now();
    let p = perceptron(
        &ds,
        &idx,
        PerceptronKind::Classic,
        PerceptronConfig {
            epochs: 50,
            seed: 1,
        },
    );
    let t_perc = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let svm = max_margin(&ds, &idx, SvmConfig::hard());
    let t_svm = t.elapsed().as_secs_f64();
    let margin = svm.model.geometric_margin(&ds, &idx);
    let rss = peak_rss_mib();

    // Audit: quantise once, then audit every unit with the device kernel.
    let prov = host_trainer::train::float_model::Provenance {
        training_log: host_trainer::train::float_model::InputFile {
            path: log.clone(),
            sha256: ds.sha256.clone(),
        },
        channel_sheet: None,
        trainer: "hard-margin".into(),
        seed: 1,
        epochs: 50,
        c: None,
        c_choice: None,
        class_weight: None,
        max_false_go: None,
        holdout_split: None,
        training_files: Vec::new(),
        read_with: None,
        settings: Vec::new(),
    };
    let summary = host_trainer::train::float_model::TrainingSummary {
        units: ds.len(),
        go: 0,
        nogo: 0,
        separable: true,
        geometric_margin: margin,
        training_errors: 0,
        updates: None,
        threshold_shift: None,
        skipped: Default::default(),
        soft_margin: None,
        classes: None,
    };
    let fm = host_trainer::train::float_model::FloatModel::new(
        prov,
        ds.scales.clone(),
        Vec::new(),
        &svm.model,
        0.0,
        summary,
    );
    let q = quantise(&fm, None, QuantConfig::default()).unwrap();
    let single = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let t = Instant::now();
    let r1 = single.install(|| audit(&q, &fm, &ds, &[], &[], AuditConfig::default()));
    let t_audit1 = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let r2 = audit(&q, &fm, &ds, &[], &[], AuditConfig::default());
    let t_audit_par = t.elapsed().as_secs_f64();
    assert_eq!(r1.sets[0].flips, r2.sets[0].flips);
    // The release step as audit and pack run it: quantise with the ±1 LSB margin search
    // over the training log, then the audit; peak memory read after it. The peak is reset
    // first (Linux: writing 5 to clear_refs resets VmHWM), so the figure is the release
    // step's with the log loaded, as in an `audit` process, not the training's before it.
    let _ = std::fs::write("/proc/self/clear_refs", "5");
    let t = Instant::now();
    let qs = quantise(&fm, Some(&ds), QuantConfig::default()).unwrap();
    let t_quant = t.elapsed().as_secs_f64();
    let _ = audit(&qs, &fm, &ds, &[], &[], AuditConfig::default());
    let rss_release = peak_rss_mib();

    println!(
        "Linegate pipeline benchmark: {rows} units × {channels} channels ({:.0} MiB of CSV)",
        std::fs::metadata(&log).unwrap().len() as f64 / 1048576.0
    );
    println!("  ingest (CSV → raw, SHA-256)      {t_ingest:8.3} s");
    println!(
        "  perceptron (50-epoch cap)        {t_perc:8.3} s   ({} updates, {} epochs, converged {})",
        p.updates, p.epochs, p.converged
    );
    println!(
        "  max margin (hard, exact)         {t_svm:8.3} s   (margin {margin:.6}, {} iterations)",
        svm.iterations
    );
    println!(
        "  peak memory                      {rss:8.1} MiB  (data as f32: {data_f32_mib:.1} MiB; ratio {:.2})",
        rss / data_f32_mib
    );
    println!(
        "  quantise + margin search         {t_quant:8.3} s   ({} moves kept)",
        qs.moves
    );
    println!(
        "  peak memory after the release    {rss_release:8.1} MiB  (ratio {:.2} to the data as f32)",
        rss_release / data_f32_mib
    );
    println!(
        "  audit, 1 thread                  {t_audit1:8.3} s   ({:.1} M units/s)",
        rows as f64 / t_audit1 / 1e6
    );
    println!(
        "  audit, {} threads                {t_audit_par:8.3} s   ({:.1} M units/s)",
        rayon::current_num_threads(),
        rows as f64 / t_audit_par / 1e6
    );

    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/reference.py");
    let out = Command::new("python3").arg(&script).arg(&log).output();
    match out {
        Ok(o) if o.status.success() => {
            let text = String::from_utf8_lossy(&o.stdout);
            let get = |k: &str| {
                text.lines()
                    .find_map(|l| l.strip_prefix(k)?.trim().parse::<f64>().ok())
            };
            let (Some(load), Some(pfit), Some(sfit), Some(smargin)) = (
                get("load_s="),
                get("perceptron_s="),
                get("svm_s="),
                get("svm_margin="),
            ) else {
                println!("======== SKIPPED: reference output unreadable:\n{text}");
                return;
            };
            println!("scikit-learn reference, same machine, same run:");
            println!(
                "  pandas load {load:.3} s, Perceptron fit {pfit:.3} s, LinearSVC fit {sfit:.3} s (margin {smargin:.6})"
            );
            println!(
                "  ratio ingest+perceptron: {:.2}× faster (target ≥ 5×)",
                (load + pfit) / (t_ingest + t_perc)
            );
            println!(
                "  ratio max margin vs LinearSVC fit: {:.2}× faster (target ≥ 3×); margin {} ({margin:.6} vs {smargin:.6})",
                sfit / t_svm,
                if margin >= smargin {
                    "at least as large"
                } else {
                    "SMALLER"
                }
            );
        }
        Ok(o) => println!(
            "\n======== SKIPPED: scikit-learn reference failed (pip install scikit-learn pandas):\n{}",
            String::from_utf8_lossy(&o.stderr)
        ),
        Err(e) => println!("\n======== SKIPPED: python3 not runnable: {e}"),
    }
}
