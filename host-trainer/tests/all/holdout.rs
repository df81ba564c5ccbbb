//! The holdout split built into `train`: a seeded stratified fraction, or the units after
//! a time; recorded in the model's provenance, deterministic, and refused where it cannot
//! be made.

use std::path::Path;

use crate::common::{exits, linegate, write};

/// A log of `n` units (GO when a + b > 10) with a timestamp per unit, day by day.
fn timed_log(d: &Path, n: usize) -> (usize, usize) {
    let mut text = String::from("unit_id,a,b,timestamp,label\n");
    let mut go = 0;
    for i in 0..n {
        let (a, b) = ((i * 7 % 13) as f64, (i * 5 % 11) as f64);
        let label = if a + b > 10.5 {
            go += 1;
            "GO"
        } else {
            "NO-GO"
        };
        text.push_str(&format!(
            "U{i},{a},{b},2026-{:02}-{:02}T08:00:00,{label}\n",
            1 + i / 28,
            1 + i % 28
        ));
    }
    write(d, "timed.csv", text.as_bytes());
    (go, n - go)
}

fn split_of(d: &Path, model: &str) -> serde_json::Value {
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join(model)).unwrap()).unwrap();
    m["provenance"]["holdout_split"].clone()
}

#[test]
fn a_fraction_of_each_class_is_held_out_and_recorded() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (go, nogo) = timed_log(d, 200);
    let train = |out: &str, seed: &str| {
        exits(
            &linegate(
                &[
                    "-q",
                    "train",
                    "timed.csv",
                    "--holdout-fraction",
                    "0.3",
                    "--seed",
                    seed,
                    "--folds",
                    "0",
                    "-o",
                    out,
                ],
                d,
            ),
            0,
        );
    };
    train("m1.json", "7");
    train("m2.json", "7");
    train("m3.json", "8");
    let s = split_of(d, "m1.json");
    // Stratified: 30 % of each class, rounded.
    let held = ((go as f64 * 0.3).round() + (nogo as f64 * 0.3).round()) as u64;
    assert_eq!(s["method"], "fraction");
    assert_eq!(s["held_out"].as_u64(), Some(held));
    assert_eq!(s["trained_on"].as_u64(), Some(200 - held));
    assert_eq!(s["seed"].as_u64(), Some(7));
    let m: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("m1.json")).unwrap()).unwrap();
    assert_eq!(m["summary"]["units"].as_u64(), Some(200 - held));
    // Same seed, same bytes; another seed, another split (hence another model file).
    let bytes = |f: &str| std::fs::read(d.join(f)).unwrap();
    assert_eq!(bytes("m1.json"), bytes("m2.json"));
    assert_ne!(bytes("m1.json"), bytes("m3.json"));
    // Only one holdout at a time; fractions outside (0, 1) are refused.
    let err = exits(
        &linegate(
            &[
                "train",
                "timed.csv",
                "--holdout-fraction",
                "1.5",
                "-o",
                "x.json",
            ],
            d,
        ),
        2,
    );
    assert!(err.contains("between 0 and 1"), "{err}");
    write(d, "other.csv", b"a,b,label\n1,1,NO-GO\n9,9,GO\n");
    exits(
        &linegate(
            &[
                "train",
                "timed.csv",
                "--holdout-fraction",
                "0.2",
                "--holdout",
                "other.csv",
                "-o",
                "x.json",
            ],
            d,
        ),
        2,
    );
    assert!(!d.join("x.json").exists());
}

#[test]
fn the_units_after_a_time_are_held_out() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    timed_log(d, 200);
    let o = linegate(
        &[
            "train",
            "timed.csv",
            "--holdout-after",
            "2026-06-15",
            "--folds",
            "0",
            "-o",
            "m.json",
        ],
        d,
    );
    exits(&o, 0);
    // Counted from the file itself: rows whose timestamp is later than the 15th of June.
    let text = std::fs::read_to_string(d.join("timed.csv")).unwrap();
    let later = text
        .lines()
        .skip(1)
        .filter(|l| l.split(',').nth(3).unwrap() > "2026-06-15")
        .count() as u64;
    let s = split_of(d, "m.json");
    assert_eq!(s["method"], "after");
    assert_eq!(s["after"], "2026-06-15");
    assert_eq!(s["held_out"].as_u64(), Some(later));
    assert_eq!(s["trained_on"].as_u64(), Some(200 - later));
    assert!(String::from_utf8_lossy(&o.stdout).contains("holdout: accuracy"));
    // A log without a timestamp column cannot be split by time.
    write(
        d,
        "plain.csv",
        b"a,b,label\n1,1,NO-GO\n9,9,GO\n2,1,NO-GO\n8,9,GO\n",
    );
    let err = exits(
        &linegate(
            &["train", "plain.csv", "--holdout-after", "5", "-o", "p.json"],
            d,
        ),
        2,
    );
    assert!(
        err.contains("plain.csv") && err.contains("no timestamp column"),
        "{err}"
    );
    // A time after every unit leaves nothing to hold out: said, and nothing written.
    let err = exits(
        &linegate(
            &[
                "train",
                "timed.csv",
                "--holdout-after",
                "2027",
                "-o",
                "q.json",
            ],
            d,
        ),
        2,
    );
    assert!(err.contains("0 to hold out"), "{err}");
    assert!(!d.join("q.json").exists());
}
