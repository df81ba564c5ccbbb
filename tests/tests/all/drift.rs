//! `linegate drift` end to end on the demo, and against outside references:
//! `tests/verify/drift.py` recomputes the Kolmogorov–Smirnov D with
//! `scipy.stats.ks_2samp` and its p-value with `scipy.special.kolmogorov` and
//! `scipy.stats.kstwobign.sf`, the CUSUM from Page's (1954) published recursion with
//! Montgomery's settings (§9.1), and the rates' Clopper–Pearson intervals with
//! `scipy.stats.beta.ppf`.

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

#[test]
fn drift_alarms_on_the_drifted_log_and_not_on_the_training_log() {
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
    for (log, want) in [("drift", 1), ("train", 0), ("holdout", 0)] {
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
        assert_eq!(code, Some(want), "{log} record: {by_record:#}");
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
    // The drifted log: the CUSUM of GO margins and the bearing temperature alarm.
    let (_, v) = drift_json(&bin, d, &[&["drift-synthetic.csv"][..], &release].concat());
    let alarms = v["alarms"].to_string();
    assert!(alarms.contains("CUSUM of GO margins"), "{alarms}");
    assert!(alarms.contains("bearing_temp_rise_c"), "{alarms}");
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
