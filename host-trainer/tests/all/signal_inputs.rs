//! Odd inputs in signal logs. Units the device refuses (a sample outside its signal's
//! valid range, a window shorter or longer than declared): the device's kernel
//! (`classify_windows`) answers such a unit with a FAULT, so a log evaluated by a model
//! (`train --holdout`, `audit`, `replay`) must count it as one FAULT unit, the same unit in
//! every command; only a training log refuses it, saying why. Columns the sheet does not
//! declare: refused up front by name, never taken for a reading.

use std::path::Path;

use crate::common::{exits, linegate, write};

/// Signal `x`: 4 samples, raw 0..=100 (lsb 1), its mean and peak-to-peak as features.
const SHEET: &str = "[[signal]]\nname = \"x\"\nraw_min = 0\nraw_max = 100\nwindow = 4\n\n\
[[feature]]\nname = \"x_mean\"\nsignal = \"x\"\nkind = \"mean\"\n\n\
[[feature]]\nname = \"x_p2p\"\nsignal = \"x\"\nkind = \"peak_to_peak\"\n";

/// A unit's rows: id, samples (one row each), label on the first row.
fn unit(id: &str, samples: &[i32], label: &str) -> String {
    samples
        .iter()
        .enumerate()
        .map(|(k, s)| format!("{id},{k},{s},{}\n", if k == 0 { label } else { "" }))
        .collect()
}

/// Twenty units: GO units read low (10..=19), NO-GO units high (60..=69).
fn training_log() -> String {
    let mut log = String::from("unit_id,sample,x,verdict\n");
    for i in 0..10 {
        log += &unit(&format!("G{i}"), &[10 + i, 12, 11 + i, 10], "GO");
        log += &unit(&format!("N{i}"), &[60 + i, 65, 62, 61 + i], "NO-GO");
    }
    log
}

/// A holdout log: two good units, then one unit of each kind the device refuses.
fn holdout_log() -> String {
    let mut log = String::from("unit_id,sample,x,verdict\n");
    log += &unit("ok-go", &[11, 12, 13, 11], "GO");
    log += &unit("ok-nogo", &[61, 63, 62, 64], "NO-GO");
    // A sample of 101 > raw_max: refused by the kernel's range check of the window.
    log += &unit("out-of-range", &[11, 101, 12, 11], "GO");
    // Five samples where the window is four.
    log += &unit("long", &[61, 63, 62, 64, 60], "NO-GO");
    // Three samples where the window is four.
    log += &unit("short", &[11, 12, 13], "GO");
    log
}

/// Trains and packs the model of the training log in `d`.
fn model(d: &Path) {
    write(d, "s.toml", SHEET.as_bytes());
    write(d, "train.csv", training_log().as_bytes());
    write(d, "hold.csv", holdout_log().as_bytes());
    let run = |args: &[&str]| exits(&linegate(args, d), 0);
    run(&[
        "-q",
        "train",
        "train.csv",
        "--sheet",
        "s.toml",
        "--folds",
        "0",
        "-o",
        "m.json",
    ]);
    run(&[
        "-q",
        "pack",
        "--model",
        "m.json",
        "--train",
        "train.csv",
        "-o",
        "m.lgmb",
    ]);
}

/// Replay prints a FAULT line for each refused unit and goes on; the audit counts the same
/// three units as FAULTs (two on GO units: false NO-GO) and `train --holdout` evaluates the
/// log instead of stopping.
#[test]
fn refused_windows_are_fault_units_in_replay_audit_and_holdout() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    model(d);
    let o = linegate(
        &[
            "replay", "--form", "device", "hold.csv", "--blob", "m.lgmb", "--model", "m.json",
        ],
        d,
    );
    exits(&o, 0);
    let out = String::from_utf8_lossy(&o.stdout).into_owned();
    let lines: Vec<&str> = out.lines().filter(|l| !l.starts_with('#')).collect();
    assert_eq!(lines.len(), 5, "{out}");
    assert!(lines[0].starts_with("0 GO "), "{out}");
    assert!(lines[1].starts_with("1 NO-GO "), "{out}");
    for (i, l) in lines.iter().enumerate().skip(2) {
        assert_eq!(*l, format!("{i} FAULT signal0"), "{out}");
    }
    let o = linegate(
        &[
            "audit",
            "--model",
            "m.json",
            "--train",
            "train.csv",
            "--holdout",
            "hold.csv",
            "--json",
        ],
        d,
    );
    // Two GO units turned away fail the false NO-GO gate (1 %): a check that failed.
    exits(&o, 1);
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let sets = j["audit"]["sets"].as_array().expect("sets");
    let hold = sets
        .iter()
        .find(|s| s["name"] == "holdout")
        .unwrap_or_else(|| panic!("no holdout set: {j}"));
    assert_eq!(hold["units"], 5, "{hold}");
    assert_eq!(hold["faults"], 3, "{hold}");
    assert_eq!(hold["false_nogo"], 2, "{hold}");
    let o = linegate(
        &[
            "train",
            "train.csv",
            "--sheet",
            "s.toml",
            "--folds",
            "0",
            "--holdout",
            "hold.csv",
            "-o",
            "m2.json",
        ],
        d,
    );
    let err = exits(&o, 0);
    let all = String::from_utf8_lossy(&o.stdout).into_owned() + &err;
    assert!(
        all.contains("false NO-GO 2 of 3 GO units") && all.contains("FAULT 3"),
        "{all}"
    );
}

/// The training log still refuses each kind, saying that an evaluated log would keep it.
#[test]
fn a_training_log_refuses_refused_windows_and_says_why() {
    for (what, bad, needle) in [
        (
            "out of range",
            unit("u", &[11, 101, 12, 11], "GO"),
            "raw 101 is outside",
        ),
        (
            "long",
            unit("u", &[11, 12, 13, 11, 12], "GO"),
            "over-long window",
        ),
        ("short", unit("u", &[11, 12, 13], "GO"), "short window"),
    ] {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        write(d, "s.toml", SHEET.as_bytes());
        write(d, "train.csv", (training_log() + &bad).as_bytes());
        let err = exits(
            &linegate(
                &[
                    "train",
                    "train.csv",
                    "--sheet",
                    "s.toml",
                    "--folds",
                    "0",
                    "-o",
                    "m.json",
                ],
                d,
            ),
            2,
        );
        assert!(
            err.contains("train.csv") && err.contains(needle),
            "{what}: {err}"
        );
        assert!(
            err.contains("a log read to train refuses such a unit"),
            "{what}: {err}"
        );
    }
}

/// A column that is neither a signal, a declared reading, the unit id, label, sample number
/// nor a recognised timestamp is refused before any row is read, by name, with the ways out;
/// the columns recognised by their names are listed, so a `time` taken as the timestamp
/// (and a `time_s` that is not) is seen.
#[test]
fn undeclared_columns_of_a_signal_log_are_refused_by_name() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // A declared reading channel, `temp`, stays a reading.
    let sheet =
        format!("{SHEET}\n[[channel]]\nname = \"temp\"\nmin = 0.0\nmax = 100.0\nlsb = 0.1\n");
    write(d, "s.toml", sheet.as_bytes());
    let with = |time: &str| {
        let mut log = format!("unit_id,sample,x,{time},operator,temp,verdict\n");
        for (i, line) in training_log().lines().skip(1).enumerate() {
            let f: Vec<&str> = line.split(',').collect();
            let first = f[1] == "0";
            log += &format!(
                "{},{},{},{},{},{},{}\n",
                f[0],
                f[1],
                f[2],
                i as f64 * 0.01,
                if first { "ann" } else { "" },
                if first { "31.5" } else { "" },
                f[3]
            );
        }
        log
    };
    write(d, "log.csv", with("time_s").as_bytes());
    let err = exits(&linegate(&["check", "log.csv", "--sheet", "s.toml"], d), 2);
    for want in [
        "log.csv: line 1: columns 'time_s', 'operator' are neither a signal",
        "--ignore time_s,operator",
        "--timestamp time_s",
        "recognised: unit id 'unit_id', sample number 'sample', label 'verdict')",
    ] {
        assert!(err.contains(want), "wanted '{want}' in: {err}");
    }
    let o = linegate(
        &[
            "check",
            "log.csv",
            "--sheet",
            "s.toml",
            "--ignore",
            "time_s,operator",
        ],
        d,
    );
    exits(&o, 0);
    // Two features and the declared reading.
    assert!(
        String::from_utf8_lossy(&o.stdout).contains("20 units, 3 channels"),
        "{o:?}"
    );
    write(d, "log.csv", with("time").as_bytes());
    let err = exits(&linegate(&["check", "log.csv", "--sheet", "s.toml"], d), 2);
    assert!(
        err.contains("column 'operator' is neither")
            && err.contains("label 'verdict', timestamp 'time')"),
        "{err}"
    );
}

/// `--skip-bad-rows` on a signal log skips whole units and says so in units and their rows,
/// with plural forms and thousands separators; a log of one row per unit says rows.
#[test]
fn skipped_units_are_counted_as_units_and_rows() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "s.toml", SHEET.as_bytes());
    // A unit of 1,200 rows where the window is 4 (a unit id left out of the export).
    let long: Vec<i32> = (0..1200).map(|i| 10 + i % 5).collect();
    let log = training_log() + &unit("runaway", &long, "GO");
    write(d, "log.csv", log.as_bytes());
    let o = linegate(
        &["check", "log.csv", "--sheet", "s.toml", "--skip-bad-rows"],
        d,
    );
    let err = exits(&o, 0);
    let out = String::from_utf8_lossy(&o.stdout).into_owned() + &err;
    assert!(out.contains("skipped 1 unit (1,200 rows)"), "{out}");
    assert!(!out.contains("bad rows"), "{out}");
    // A plain log: rows, one of them.
    write(
        d,
        "plain.csv",
        b"a,b,label\n1,2,GO\n3,x,NO-GO\n-1,-2,NO-GO\n4,5,GO\n",
    );
    let o = linegate(&["check", "plain.csv", "--skip-bad-rows"], d);
    let err = exits(&o, 0);
    let out = String::from_utf8_lossy(&o.stdout).into_owned() + &err;
    assert!(out.contains("skipped 1 row that"), "{out}");
}

/// A reading channel out of its range in a signal log evaluated by a model is the FAULT the
/// device gives (`FAULT ch<k>`), counted by the audit, not an error that stops it.
#[test]
fn an_out_of_range_reading_in_an_evaluated_signal_log_is_a_fault_unit() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let sheet =
        format!("{SHEET}\n[[channel]]\nname = \"temp\"\nmin = 0.0\nmax = 100.0\nlsb = 0.1\n");
    write(d, "s.toml", sheet.as_bytes());
    // The reading on each unit's first row, after the sample column.
    let with_temp = |log: &str, hot: Option<&str>| -> String {
        let mut out = String::from("unit_id,sample,x,temp,verdict\n");
        for line in log.lines().skip(1) {
            let f: Vec<&str> = line.split(',').collect();
            let t = match (f[1], hot) {
                ("0", Some(id)) if f[0] == id => "150.0",
                ("0", _) => "31.5",
                _ => "",
            };
            out += &format!("{},{},{},{t},{}\n", f[0], f[1], f[2], f[3]);
        }
        out
    };
    write(d, "train.csv", with_temp(&training_log(), None).as_bytes());
    let mut hold = String::from("unit_id,sample,x,verdict\n");
    hold += &unit("cool", &[11, 12, 13, 11], "GO");
    hold += &unit("hot", &[12, 12, 13, 11], "GO");
    write(d, "hold.csv", with_temp(&hold, Some("hot")).as_bytes());
    let run = |args: &[&str], code: i32| {
        let o = linegate(args, d);
        exits(&o, code);
        o
    };
    run(
        &[
            "-q",
            "train",
            "train.csv",
            "--sheet",
            "s.toml",
            "--folds",
            "0",
            "-o",
            "m.json",
        ],
        0,
    );
    run(
        &[
            "-q",
            "pack",
            "--model",
            "m.json",
            "--train",
            "train.csv",
            "-o",
            "m.lgmb",
        ],
        0,
    );
    let o = run(
        &[
            "replay", "--form", "device", "hold.csv", "--blob", "m.lgmb", "--model", "m.json",
        ],
        0,
    );
    let out = String::from_utf8_lossy(&o.stdout).into_owned();
    let faults: Vec<&str> = out.lines().filter(|l| l.contains("FAULT")).collect();
    assert_eq!(faults.len(), 1, "{out}");
    assert!(faults[0].starts_with("1 FAULT ch"), "{out}");
    let o = run(
        &[
            "audit",
            "--model",
            "m.json",
            "--train",
            "train.csv",
            "--holdout",
            "hold.csv",
            "--json",
        ],
        1,
    );
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let hold = &j["audit"]["sets"][1];
    assert_eq!(hold["name"], "holdout", "{hold}");
    assert_eq!(
        (&hold["units"], &hold["faults"]),
        (&2.into(), &1.into()),
        "{hold}"
    );
}
