//! Signal logs through the command line: the whole path (check, train, pack, replay) on the
//! demo's SYNTHETIC signal scenario, checked against an independent replay
//! (`tests/verify/signal_replay.py`: Python's csv module, exact integers and the blob
//! layout of FORMAT.md, sharing no code with Linegate); and every way a signal log or sheet
//! can be wrong, each named by file, line, unit, column and sample.

use std::path::Path;
use std::process::Command;

use crate::common;
use crate::common::{exits, linegate, write};

/// The independent replay's verdict on `replay` (a file of `linegate replay` lines):
/// `Some(stdout)` when it agrees, `None` (and a loud SKIPPED, or a failure in CI) without
/// python3 and numpy; panics when it disagrees.
fn independent_replay(
    d: &Path,
    blob: &str,
    model: &str,
    log: &str,
    replay: &str,
) -> Option<String> {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/verify/signal_replay.py");
    let o = Command::new("python3")
        .arg(script)
        .args([blob, model, log, replay])
        .current_dir(d)
        .output();
    let skip = |why: &str| {
        assert!(
            std::env::var("CI").ok().as_deref() != Some("true"),
            "independent signal replay could not run in CI: {why}"
        );
        eprintln!("\n======== SKIPPED: independent signal replay: {why} ========\n");
        None
    };
    let o = match o {
        Ok(o) => o,
        Err(e) => return skip(&e.to_string()),
    };
    let text =
        String::from_utf8_lossy(&o.stdout).into_owned() + &String::from_utf8_lossy(&o.stderr);
    match o.status.code() {
        Some(0) => Some(text),
        Some(3) => skip(&text),
        _ => panic!("the independent replay disagrees:\n{text}"),
    }
}

/// The user's whole path on the demo's signal scenario, by the commands a user types: the
/// check, training with the sheet, pack (audit with the suggested RECHECK band), inspect,
/// and replay of the field and holdout logs. Every replay line equals the independent
/// replay's; a damaged replay file is caught (the reference can fail).
#[test]
fn signal_logs_train_pack_and_replay_as_an_independent_replay_computes() {
    let d = tempfile::tempdir().unwrap();
    let d = d.path();
    common::demo(d);
    let check = linegate(
        &[
            "check",
            "demo/signal-train-synthetic.csv",
            "--sheet",
            "demo/signal-channels.toml",
        ],
        d,
    );
    let out = String::from_utf8_lossy(&check.stdout).into_owned();
    assert!(out.contains("500 units, 7 channels"), "{out}");
    assert!(!String::from_utf8_lossy(&check.stderr).contains("not declared"));
    exits(
        &linegate(
            &[
                "train",
                "demo/signal-train-synthetic.csv",
                "--sheet",
                "demo/signal-channels.toml",
                "--output",
                "m.json",
            ],
            d,
        ),
        0,
    );
    let fm = std::fs::read_to_string(d.join("m.json")).unwrap();
    assert!(
        fm.contains("\"format_version\": 3"),
        "a signal model is version 3"
    );
    exits(
        &linegate(
            &[
                "pack",
                "--model",
                "m.json",
                "--train",
                "demo/signal-train-synthetic.csv",
                "--holdout",
                "demo/signal-holdout-synthetic.csv",
                "--apply-suggested-band",
                "--output",
                "m.lgmb",
            ],
            d,
        ),
        0,
    );
    let ins = linegate(&["inspect", "m.lgmb"], d);
    let ins = String::from_utf8_lossy(&ins.stdout).into_owned();
    assert!(
        ins.contains("format version 3") && ins.contains("status: ok"),
        "{ins}"
    );
    for (log, faults) in [
        ("demo/signal-field-synthetic.csv", true),
        ("demo/signal-holdout-synthetic.csv", false),
    ] {
        let o = linegate(
            &[
                "replay", "--form", "device", log, "--blob", "m.lgmb", "--model", "m.json",
            ],
            d,
        );
        exits(&o, 0);
        let lines = String::from_utf8_lossy(&o.stdout).into_owned();
        assert_eq!(lines.contains("FAULT signal0"), faults, "{lines}");
        write(d, "replay.txt", lines.as_bytes());
        if let Some(t) = independent_replay(d, "m.lgmb", "m.json", log, "replay.txt") {
            eprintln!("{log}: {}", t.trim());
            // One score off by one must be caught.
            let damaged = lines.replacen(" GO ", " GO 1", 1);
            write(d, "damaged.txt", damaged.as_bytes());
            let script =
                Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/verify/signal_replay.py");
            let o = Command::new("python3")
                .arg(script)
                .args(["m.lgmb", "m.json", log, "damaged.txt"])
                .current_dir(d)
                .output()
                .unwrap();
            assert_eq!(
                o.status.code(),
                Some(1),
                "the damaged replay went unnoticed"
            );
        }
    }
    // The audit report of a signal model shows each feature's range and overflow proof.
    let md = std::fs::read_to_string(d.join("demo/signal-audit.md")).unwrap();
    assert!(md.contains("## Signal features"), "{md}");
    assert!(
        md.contains("| vib_rms | vibration_g | rms | 256 | 1..=4094 | 2048 | 2047 | 0..=32752 |")
    );
    // ⌊√(256·2047²)⌋ = 16·2047 = 32752, and Σcᵢ² ≤ 256·2047² = 1,072,693,504 (by hand).
    assert!(md.contains("Σcᵢ² ≤ N·A² = 1,072,693,504 < 2^64"), "{md}");
    // A blob of readings with a signal model, or the other way round, is refused by name.
    let o = linegate(
        &[
            "replay",
            "--form",
            "device",
            "demo/holdout-synthetic.csv",
            "--blob",
            "m.lgmb",
            "--model",
            "demo/model.json",
        ],
        d,
    );
    // A blob its model does not produce is a failed check (exit 1), as for inspect.
    assert!(exits(&o, 1).contains("has no signals"));
    let o = linegate(
        &[
            "replay",
            "--form",
            "device",
            "demo/signal-field-synthetic.csv",
            "--blob",
            "demo/model.lgmb",
            "--model",
            "m.json",
        ],
        d,
    );
    assert!(
        exits(&o, 1).contains("the blob has no signals"),
        "a blob of readings is not a signal blob"
    );
}

const SHEET: &str = "[[signal]]\nname = \"x\"\nraw_min = 0\nraw_max = 100\nwindow = 4\n\n[[feature]]\nname = \"x_mean\"\nsignal = \"x\"\nkind = \"mean\"\n\n[[feature]]\nname = \"x_p2p\"\nsignal = \"x\"\nkind = \"peak_to_peak\"\n";

/// Runs `check` on `log` (with the small sheet above) and returns its stderr, asserting
/// exit 2 (bad input).
fn refused(log: &str) -> String {
    let d = tempfile::tempdir().unwrap();
    write(d.path(), "s.toml", SHEET.as_bytes());
    write(d.path(), "log.csv", log.as_bytes());
    exits(
        &linegate(&["check", "log.csv", "--sheet", "s.toml"], d.path()),
        2,
    )
}

/// Two whole units, one GO and one NO-GO, for the cases below to damage.
const GOOD: &str = "unit_id,sample,x,verdict\nA,0,10,GO\nA,1,12,\nA,2,11,\nA,3,10,\nB,0,50,NO-GO\nB,1,70,\nB,2,60,\nB,3,55,\n";

#[test]
fn a_whole_signal_log_is_read() {
    let d = tempfile::tempdir().unwrap();
    write(d.path(), "s.toml", SHEET.as_bytes());
    write(d.path(), "log.csv", GOOD.as_bytes());
    let o = linegate(&["check", "log.csv", "--sheet", "s.toml"], d.path());
    exits(&o, 0);
    assert!(String::from_utf8_lossy(&o.stdout).contains("2 units, 2 channels"));
}

#[test]
fn every_way_a_unit_can_be_broken_is_named() {
    let cases: [(&str, String, &[&str]); 9] = [
        (
            "short window",
            GOOD.replace("B,3,55,\n", ""),
            &[
                "line 8",
                "unit 'B'",
                "short window: the unit has 3 rows",
                "'x' needs 4",
            ],
        ),
        (
            "over-long window",
            format!("{GOOD}B,4,50,\n"),
            &["line 10", "unit 'B'", "over-long window"],
        ),
        (
            "gap in the sample numbers",
            GOOD.replace("A,2,11,\n", "")
                .replace("A,3,10,\n", "A,3,10,\nA,4,10,\n"),
            &[
                "line 4",
                "unit 'A'",
                "gap: sample 2 is missing",
                "column 'sample'",
            ],
        ),
        (
            "empty sample",
            GOOD.replace("A,1,12,", "A,1,,"),
            &["line 3", "unit 'A'", "gap: signal 'x' has no sample 1"],
        ),
        (
            "unit in two places",
            format!("{GOOD}A,0,10,GO\n"),
            &["line 10", "unit 'A'", "appear again", "began on line 2"],
        ),
        (
            "label changes",
            GOOD.replace("A,2,11,", "A,2,11,NO-GO"),
            &["line 4", "unit 'A'", "label changes within the unit"],
        ),
        (
            "not a number",
            GOOD.replace("B,2,60,", "B,2,6O,"),
            &[
                "line 8",
                "unit 'B'",
                "signal 'x', sample 2",
                "'6O' is not a finite number",
            ],
        ),
        (
            "sample out of range",
            GOOD.replace("B,1,70,", "B,1,101,"),
            &[
                "line 7",
                "unit 'B'",
                "sample 1 (0-based): raw 101 is outside",
                "[0, 100]",
            ],
        ),
        (
            "samples numbered from 5",
            GOOD.replace("A,0,10,GO", "A,5,10,GO"),
            &["line 2", "unit 'A'", "numbered 5"],
        ),
    ];
    for (what, log, needles) in cases {
        let err = refused(&log);
        assert!(err.contains("log.csv"), "{what}: {err}");
        for n in needles {
            assert!(err.contains(n), "{what}: no '{n}' in: {err}");
        }
    }
}

/// Under --skip-bad-rows a broken unit is skipped whole and counted, never silently.
#[test]
fn skip_bad_rows_skips_and_counts_whole_units() {
    let d = tempfile::tempdir().unwrap();
    write(d.path(), "s.toml", SHEET.as_bytes());
    let log = format!(
        "{GOOD}C,0,10,GO\nC,1,,\nC,2,10,\nC,3,10,\nE,0,40,NO-GO\nE,1,45,\nE,2,41,\nE,3,44,\n"
    );
    write(d.path(), "log.csv", log.as_bytes());
    let o = linegate(
        &["check", "log.csv", "--sheet", "s.toml", "--skip-bad-rows"],
        d.path(),
    );
    let err = exits(&o, 0);
    assert!(
        String::from_utf8_lossy(&o.stdout).contains("3 units"),
        "{err}"
    );
    assert!(
        err.contains("1") && err.to_lowercase().contains("skip"),
        "{err}"
    );
}

#[test]
fn sheet_errors_name_the_signal_or_feature() {
    let cases: [(&str, String, &str); 6] = [
        (
            "unknown signal",
            SHEET.replace(
                "signal = \"x\"\nkind = \"mean\"",
                "signal = \"y\"\nkind = \"mean\"",
            ),
            "feature 'x_mean': no [[signal]] named 'y'",
        ),
        (
            "band without a frequency",
            SHEET.replace("kind = \"mean\"", "kind = \"band\""),
            "a band needs its frequency",
        ),
        (
            "frequency without a sample rate",
            SHEET.replace("kind = \"mean\"", "kind = \"band\"\nfrequency = 50.0"),
            "needs the signal's `sample_rate`",
        ),
        (
            "unknown kind",
            SHEET.replace("kind = \"mean\"", "kind = \"kurtosis\""),
            "unknown feature kind 'kurtosis'",
        ),
        (
            "physical zero outside the samples",
            SHEET.replace("raw_min = 0", "raw_min = 10"),
            "declare `offset`",
        ),
        (
            "signal without a feature",
            format!("{SHEET}\n[[signal]]\nname = \"z\"\nraw_min = 0\nraw_max = 9\nwindow = 4\n"),
            "signal 'z' has no [[feature]]",
        ),
    ];
    for (what, sheet, needle) in cases {
        let d = tempfile::tempdir().unwrap();
        write(d.path(), "s.toml", sheet.as_bytes());
        write(d.path(), "log.csv", GOOD.as_bytes());
        let err = exits(
            &linegate(&["check", "log.csv", "--sheet", "s.toml"], d.path()),
            2,
        );
        assert!(
            err.contains("s.toml") && err.contains(needle),
            "{what}: {err}"
        );
    }
}

/// A line longer than any record (here 2 MiB of digits) stops the read at that line, before
/// the CSV reader would hold it whole: a file of one endless line cannot exhaust memory.
#[test]
fn an_endless_line_is_refused_by_its_number() {
    let d = tempfile::tempdir().unwrap();
    write(d.path(), "s.toml", SHEET.as_bytes());
    let log = format!(
        "unit_id,sample,x,verdict\nA,0,10,GO\nA,1,{}\n",
        "1".repeat(2 << 20)
    );
    write(d.path(), "log.csv", log.as_bytes());
    let err = exits(
        &linegate(&["check", "log.csv", "--sheet", "s.toml"], d.path()),
        2,
    );
    assert!(err.contains("log.csv: line 3: longer than"), "{err}");
}
