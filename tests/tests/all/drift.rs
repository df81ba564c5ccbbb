//! `linegate drift` end to end on the demo, and against outside references:
//! `tests/verify/drift.py` recomputes the Kolmogorov–Smirnov D with
//! `scipy.stats.ks_2samp` and its p-value with `scipy.special.kolmogorov` and
//! `scipy.stats.kstwobign.sf`, the CUSUM from Page's (1954) published recursion with
//! Montgomery's settings (§9.1), the rates' Clopper–Pearson intervals with
//! `scipy.stats.beta.ppf`, and their one-sided Fisher exact p-values with
//! `scipy.stats.fisher_exact(alternative="greater")` and `scipy.stats.hypergeom.sf`.

use std::path::Path;
use std::process::{Command, Output};

use serde_json::Value;

const WHAT: &str = "linegate drift against scipy and Page's CUSUM (tests/verify/drift.py)";

fn linegate(bin: &Path, dir: &Path, args: &[&str]) -> Output {
    Command::new(bin)
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap()
}

/// `drift --json` with `args`: its exit code and JSON.
fn drift_json(bin: &Path, dir: &Path, args: &[&str]) -> (Option<i32>, Value) {
    let o = linegate(bin, dir, &[&["-q", "drift", "--json"][..], args].concat());
    let v = serde_json::from_slice(&o.stdout).unwrap_or_else(|e| {
        panic!(
            "drift {args:?}: {e}: {}",
            String::from_utf8_lossy(&o.stderr)
        )
    });
    (o.status.code(), v)
}

/// The parts every way of reading the field computes alike.
fn shared(v: &Value) -> Vec<&Value> {
    [
        "units",
        "go",
        "nogo",
        "recheck",
        "faults",
        "cusum_go",
        "cusum_nogo",
        "recheck_rate",
        "fault_rate",
    ]
    .iter()
    .map(|k| &v[*k])
    .collect()
}

/// The demo's logs against its audit's held-out baseline. The drifted log alarms on every
/// path. The training log stays in control: its closest test is the score distribution
/// (D = 0.1025 over every scored unit, p = 0.0074: the model was fitted to those units, so
/// their scores do differ from held-out units'), above the per-test level α/4 = 0.0025 of
/// the family-wise α = 0.01; its record's binned D (0.0875) is a lower bound. The held-out
/// log itself is in control.
#[test]
fn drift_on_the_demo_logs() {
    let bin = crate::c_api::linegate_bin();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    assert!(
        linegate(&bin, d, &["-q", "demo", "--out-dir", "demo"])
            .status
            .success()
    );
    let d = &d.join("demo");
    let release = [
        "--audit",
        "audit.json",
        "--model",
        "model.json",
        "--blob",
        "model.lgmb",
    ];
    let mut pairs: Vec<String> = Vec::new();
    for (log, want, want_record) in [("drift", 1, 1), ("train", 0, 0), ("holdout", 0, 0)] {
        let csv = format!("{log}-synthetic.csv");
        let rec = format!("{log}.lgfr");
        // The log through the blob's kernel; the host's record of it.
        let (code, by_log) = drift_json(
            &bin,
            d,
            &[&[csv.as_str(), "--record-out", &rec][..], &release].concat(),
        );
        assert_eq!(code, Some(want), "{log}: {by_log:#}");
        // The device's lines (replay prints them) give the same verdict and figures.
        let o = linegate(
            &bin,
            d,
            &[
                &["-q", "replay", "--form", "device", csv.as_str()][..],
                &release[2..],
            ]
            .concat(),
        );
        assert!(o.status.success());
        let lines = format!("lines-{log}.txt");
        std::fs::write(d.join(&lines), &o.stdout).unwrap();
        let (code, by_lines) = drift_json(&bin, d, &["--lines", &lines, "--audit", "audit.json"]);
        assert_eq!(code, Some(want), "{log} lines: {by_lines:#}");
        assert_eq!(shared(&by_log), shared(&by_lines), "{log}");
        assert_eq!(by_log["ks"], by_lines["ks"], "{log}");
        // The record of the log gives the same alarms, the binned KS test aside.
        let (code, by_record) = drift_json(&bin, d, &["--record", &rec, "--audit", "audit.json"]);
        assert_eq!(code, Some(want_record), "{log} record: {by_record:#}");
        // Both over every scored unit: the record's D over bin edges is at most the log's.
        let d_of = |v: &Value| v["ks"]["d"].as_f64().unwrap();
        assert!(
            d_of(&by_record) <= d_of(&by_log) + 1e-12,
            "{log}: record D {} > log D {}",
            d_of(&by_record),
            d_of(&by_log)
        );
        assert_eq!(by_record["ks"]["m"], by_log["ks"]["m"], "{log}");
        assert_eq!(shared(&by_log), shared(&by_record), "{log}");
        assert_eq!(by_record["ks"]["binned"], true);
        let not_ks = |v: &Value| -> Vec<String> {
            v["alarms"]
                .as_array()
                .unwrap()
                .iter()
                .map(|a| a.as_str().unwrap().to_string())
                .filter(|a| !a.starts_with("scores:"))
                .map(|a| a.split(" (at least").next().unwrap().to_string())
                .collect()
        };
        assert_eq!(not_ks(&by_log), not_ks(&by_record), "{log}");
        if log == "train" {
            // In control, and how close: the KS p lies between the per-test level and α.
            let p = by_log["ks"]["p"].as_f64().unwrap();
            let level = by_log["test_alpha"].as_f64().unwrap();
            assert!(
                by_log["alarms"].as_array().unwrap().is_empty(),
                "{by_log:#}"
            );
            assert!(level < p && p < 0.01, "{by_log:#}");
        }
        for (a, b) in by_log["channels"]
            .as_array()
            .unwrap()
            .iter()
            .zip(by_record["channels"].as_array().unwrap())
        {
            let close = |k: &str| (a[k].as_f64().unwrap() - b[k].as_f64().unwrap()).abs() < 1e-9;
            assert!(close("shift") && close("field_mean"), "{a} {b}");
        }
        std::fs::write(d.join(format!("{log}.json")), by_lines.to_string()).unwrap();
        pairs.push(lines);
        pairs.push(format!("{log}.json"));
    }
    // The drifted log: the CUSUM of GO margins and the bearing temperature alarm; its
    // RECHECK rate (19 of 400 against 5 of 400: Fisher p = 0.0029) is shown, and alarms
    // exactly when p is below the per-test level α/4 = 0.0025.
    let (_, v) = drift_json(&bin, d, &[&["drift-synthetic.csv"][..], &release].concat());
    let alarms = v["alarms"].to_string();
    assert!(alarms.contains("CUSUM of GO margins"), "{alarms}");
    assert!(alarms.contains("bearing_temp_rise_c"), "{alarms}");
    let p = v["recheck_rate"]["p"].as_f64().unwrap();
    assert!(p < 0.01, "{v:#}");
    assert_eq!(
        v["recheck_rate"]["alarm"].as_bool().unwrap(),
        p < v["test_alpha"].as_f64().unwrap()
    );
    // An empty field is not tested: a header-only log, every row skipped, lines with only
    // the model line, a record of no units.
    let header = std::fs::read_to_string(d.join("train-synthetic.csv")).unwrap();
    let mut rows = header.lines();
    let head = rows.next().unwrap();
    std::fs::write(d.join("empty.csv"), format!("{head}\n")).unwrap();
    let bad: String = rows
        .take(3)
        .map(|r| {
            let mut f: Vec<&str> = r.split(',').collect();
            f[2] = "not-a-number";
            f.join(",") + "\n"
        })
        .collect();
    std::fs::write(d.join("bad.csv"), format!("{head}\n{bad}")).unwrap();
    let model_line = std::fs::read_to_string(d.join("lines-train.txt")).unwrap();
    let model_line = model_line.lines().next().unwrap();
    std::fs::write(d.join("empty-lines.txt"), format!("{model_line}\n")).unwrap();
    let audit_b = host_trainer::field::baseline::read(&d.join("audit.json")).unwrap();
    let plan = audit_b.baseline.plan.field_plan();
    let stats = shared_model::FieldStats::new(plan, audit_b.baseline.channels.len(), 0);
    std::fs::write(
        d.join("empty.lgfr"),
        host_trainer::field::record::record_bytes(&stats),
    )
    .unwrap();
    for args in [
        &[&["empty.csv"][..], &release].concat(),
        &[&["bad.csv", "--skip-bad-rows"][..], &release].concat(),
        &["--lines", "empty-lines.txt", "--audit", "audit.json"][..],
        &["--record", "empty.lgfr", "--audit", "audit.json"][..],
    ] {
        let o = linegate(&bin, d, &[&["-q", "drift"][..], args].concat());
        // No unit: an input error (exit 2), never in control, and not an alarm.
        assert_eq!(o.status.code(), Some(2), "{args:?}: {o:?}");
        assert!(
            String::from_utf8_lossy(&o.stderr).contains("the field has no units"),
            "{args:?}: {o:?}"
        );
    }
    // The report, its chart, and the device plan.
    let o = linegate(
        &bin,
        d,
        &[
            &["-q", "drift", "drift-synthetic.csv", "--report", "drift.md"][..],
            &release,
        ]
        .concat(),
    );
    assert_eq!(o.status.code(), Some(1));
    let md = std::fs::read_to_string(d.join("drift.md")).unwrap();
    assert!(md.contains("# Linegate drift test: ALARM") && md.contains("drift-cusum.svg"));
    assert!(
        std::fs::read_to_string(d.join("drift-cusum.svg"))
            .unwrap()
            .contains("<svg")
    );
    let plan = linegate(&bin, d, &["drift", "--audit", "audit.json", "--plan"]);
    let audit: Value =
        serde_json::from_slice(&std::fs::read(d.join("audit.json")).unwrap()).unwrap();
    let text = String::from_utf8_lossy(&plan.stdout);
    assert!(
        text.contains(&format!(
            "blob_id = 0x{}u",
            audit["blob_id"].as_str().unwrap()
        )),
        "{text}"
    );
    // An audit record from before baselines: a clear error, exit 2.
    let mut old = audit.clone();
    old.as_object_mut().unwrap().remove("baseline");
    std::fs::write(d.join("old-audit.json"), old.to_string()).unwrap();
    let o = linegate(
        &bin,
        d,
        &[
            "drift",
            "--lines",
            "lines-train.txt",
            "--audit",
            "old-audit.json",
        ],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("run `linegate audit` again"));
    // Outside references.
    let mut args: Vec<&std::ffi::OsStr> = vec!["audit.json".as_ref()];
    args.extend(pairs.iter().map(|p| std::ffi::OsStr::new(p.as_str())));
    if let Some((code, text)) = crate::python_check(WHAT, "drift.py", &args, d) {
        assert_eq!(
            code,
            Some(0),
            "drift disagrees with the references:\n{text}"
        );
        assert!(text.contains(": 0 disagreeing"), "{text}");
    }
}

/// The one-sided Fisher p-value of the rates' rule against scipy's `fisher_exact` and
/// `hypergeom.sf` (tests/verify/drift.py fisher) on tables with zeros and large counts.
#[test]
fn fisher_p_values_against_scipy() {
    let tmp = tempfile::tempdir().unwrap();
    let tables: Vec<Value> = [
        (19, 400, 5, 400),
        (30, 400, 5, 400),
        (0, 1000, 0, 50_000),
        (1, 1000, 0, 50_000),
        (3, 10, 0, 10),
        (0, 5, 3, 5),
        (7, 20, 2, 30),
        (400, 400, 0, 400),
        (5, 1_000_000, 2, 1_000_000),
        (1200, 1_000_000, 1000, 1_000_000),
        (60, 1_000_000, 20, 3_000_000),
        (40_000, 1_000_000, 30_000, 1_000_000),
    ]
    .iter()
    .map(|&(k1, n1, k2, n2)| {
        let p = host_trainer::field::fisher::greater(k1, n1, k2, n2);
        serde_json::json!([k1, n1, k2, n2, p])
    })
    .collect();
    let path = tmp.path().join("tables.json");
    std::fs::write(&path, serde_json::to_string(&tables).unwrap()).unwrap();
    let Some((code, text)) = crate::python_check(
        WHAT,
        "drift.py",
        &["fisher".as_ref(), path.as_os_str()],
        tmp.path(),
    ) else {
        return;
    };
    assert_eq!(code, Some(0), "{text}");
    assert!(text.contains("12 tables: 0 disagreeing"), "{text}");
}

/// Real data: scikit-learn's bundled breast-cancer set (`drift.py cancer`), trained on half
/// of it, audited on a quarter (the baseline); the last quarter as it is stays in control,
/// the same units with the "worst" channels read 8 % high alarm.
#[test]
fn drift_on_breast_cancer_alarms_on_a_shifted_part_only() {
    let bin = crate::c_api::linegate_bin();
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let dir = d.to_str().unwrap();
    let Some((code, text)) =
        crate::python_check(WHAT, "drift.py", &["cancer".as_ref(), dir.as_ref()], d)
    else {
        return;
    };
    assert_eq!(code, Some(0), "{text}");
    let ok = |args: &[&str]| {
        let o = linegate(&bin, d, args);
        assert!(
            o.status.success(),
            "{args:?}: {}",
            String::from_utf8_lossy(&o.stderr)
        );
    };
    ok(&["-q", "train", "bc-train.csv", "-o", "bc.json"]);
    ok(&[
        "-q",
        "audit",
        "--model",
        "bc.json",
        "--holdout",
        "bc-audit.csv",
        "--out-dir",
        "bca",
    ]);
    ok(&[
        "-q",
        "pack",
        "--model",
        "bc.json",
        "--holdout",
        "bc-audit.csv",
        "--audited",
        "bca/audit.json",
        "-o",
        "bc.lgmb",
        "--override-audit",
    ]);
    let release = [
        "--audit",
        "bca/audit.json",
        "--model",
        "bc.json",
        "--blob",
        "bc.lgmb",
    ];
    let (code, field) = drift_json(&bin, d, &[&["bc-field.csv"][..], &release].concat());
    assert_eq!(code, Some(0), "{field:#}");
    let (code, shifted) = drift_json(&bin, d, &[&["bc-shifted.csv"][..], &release].concat());
    assert_eq!(code, Some(1), "{shifted:#}");
    assert_eq!(shifted["ks_alarm"], true, "{shifted:#}");
}
