//! `linegate generate` ends: a margin too few readings keep is refused with the largest
//! accepted one, which then generates; a margin that is not a finite number, 0 or more, is
//! refused as the flags are read.

use std::path::Path;
use std::process::{Command, Output, Stdio};

use crate::common::exits;

/// `linegate generate` with a short hang guard: a run that spins is killed (exit 124).
fn generate(args: &[&str], d: &Path) -> Output {
    Command::new("timeout")
        .arg("30")
        .arg(env!("CARGO_BIN_EXE_linegate"))
        .arg("generate")
        .args(args)
        .current_dir(d)
        .stdin(Stdio::null())
        .output()
        .expect("run linegate")
}

#[test]
fn margins_no_reading_keeps_are_refused_with_the_largest_accepted() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    for (channels, margin) in [
        ("16", "5"),
        ("16", "3"),
        ("16", "1e308"),
        ("1", "5"),
        ("2", "1.3"),
    ] {
        let o = generate(
            &[
                "--rows",
                "200",
                "--channels",
                channels,
                "--margin",
                margin,
                "-o",
                "g.csv",
            ],
            d,
        );
        let err = exits(&o, 2);
        assert!(!d.join("g.csv").exists() && !d.join("g.toml").exists());
        let largest: f64 = err
            .split("the largest margin accepted here is ")
            .nth(1)
            .and_then(|t| t.split_whitespace().next())
            .and_then(|t| t.parse().ok())
            .unwrap_or_else(|| panic!("{channels} channels, margin {margin}: {err}"));
        assert!(
            largest > 0.0 && largest < margin.parse::<f64>().unwrap(),
            "{err}"
        );
        // The largest accepted margin (as printed, rounded to 4 decimals) generates.
        let shown = format!("{largest}");
        let o = generate(
            &[
                "--rows",
                "200",
                "--channels",
                channels,
                "--margin",
                &shown,
                "-o",
                "g.csv",
            ],
            d,
        );
        exits(&o, 0);
        let log = std::fs::read_to_string(d.join("g.csv")).unwrap();
        assert_eq!(log.lines().count(), 201);
        std::fs::remove_file(d.join("g.csv")).unwrap();
        std::fs::remove_file(d.join("g.toml")).unwrap();
    }
    for margin in ["inf", "-inf", "NaN", "-0.5"] {
        let o = generate(&[&format!("--margin={margin}"), "-o", "g.csv"], d);
        let err = exits(&o, 2);
        assert!(err.contains("not a margin"), "{margin}: {err}");
    }
    // The default margin still generates.
    exits(&generate(&["--rows", "50", "-o", "g.csv"], d), 0);
}
