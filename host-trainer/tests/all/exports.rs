//! Logs as test stations and spreadsheets export them: other delimiters, decimal commas,
//! byte-order marks, CR LF, trailing empty columns and rows. Each export of the same units
//! must read as the plain comma file does, unit for unit.
//!
//! Outside reference: the exports are written by Python's standard `csv` module (its
//! `excel` dialect ends lines with CR LF, and the `utf-8-sig` codec writes the byte-order
//! mark, as a spreadsheet's "CSV UTF-8" export does), not by Linegate.

use std::path::Path;
use std::process::Command;

use crate::common::{exits, linegate, write};

/// `check --json` of `log` in `d` with `extra` flags: the verdict, margin and units.
fn check_json(d: &Path, log: &str, extra: &[&str]) -> (serde_json::Value, String) {
    let mut args = vec!["check", log, "--json"];
    args.extend_from_slice(extra);
    let o = linegate(&args, d);
    let err = exits(&o, 0);
    (serde_json::from_slice(&o.stdout).unwrap(), err)
}

/// The fields of a check that depend only on the units read.
fn same_units(a: &serde_json::Value, b: &serde_json::Value, what: &str) {
    for k in [
        "units",
        "channels",
        "separable",
        "margin",
        "radius",
        "support",
    ] {
        assert_eq!(a[k], b[k], "{what}: {k} differs");
    }
}

/// Rewrites `src` (a comma log) with Python's csv module: `delimiter`, decimal comma or
/// not, `extra_cols` empty columns at the end of every row, and `blank_rows` rows of
/// delimiters only at the end. `None` (and a loud SKIPPED) without python3.
fn python_export(
    src: &Path,
    dst: &Path,
    delimiter: &str,
    decimal_comma: bool,
    extra_cols: usize,
    blank_rows: usize,
) -> Option<()> {
    let script = r#"
import csv, sys
src, dst, delim, comma, extra, blank = sys.argv[1:7]
extra, blank = int(extra), int(blank)
with open(src, newline="") as f:
    rows = list(csv.reader(f))
with open(dst, "w", newline="", encoding="utf-8-sig") as f:
    w = csv.writer(f, dialect="excel", delimiter=delim)
    for i, r in enumerate(rows):
        if i > 0 and comma == "1":
            r = [c.replace(".", ",") for c in r]
        w.writerow(r + [""] * extra)
    for _ in range(blank):
        w.writerow([""] * (len(rows[0]) + extra))
"#;
    let status = Command::new("python3")
        .arg("-c")
        .arg(script)
        .arg(src)
        .arg(dst)
        .arg(delimiter)
        .arg(if decimal_comma { "1" } else { "0" })
        .arg(extra_cols.to_string())
        .arg(blank_rows.to_string())
        .status();
    match status {
        Ok(s) if s.success() => Some(()),
        _ => {
            eprintln!("\n======== SKIPPED: python3 not available to write the exports ========\n");
            assert!(
                std::env::var("CI").as_deref() != Ok("true"),
                "python3 is required under CI"
            );
            None
        }
    }
}

#[test]
fn spreadsheet_exports_read_as_the_plain_comma_log() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    exits(
        &linegate(
            &[
                "-q",
                "generate",
                "--rows",
                "400",
                "--channels",
                "4",
                "-o",
                "plain.csv",
            ],
            d,
        ),
        0,
    );
    let (plain, _) = check_json(d, "plain.csv", &["--sheet", "plain.toml"]);
    let cases: [(&str, &str, bool, usize, usize); 5] = [
        // German or French spreadsheet: semicolons, decimal commas, CR LF, BOM, two unused
        // columns and a row of delimiters at the end.
        ("semicolon.csv", ";", true, 2, 1),
        // The same with a decimal point (a script writing sep=';').
        ("semicolon-point.csv", ";", false, 0, 0),
        // One trailing empty column and a blank row, comma-separated.
        ("comma-trailing.csv", ",", false, 1, 1),
        // Tab-delimited text.
        ("tabs.txt", "\t", false, 0, 0),
        // Pipe-separated, with a decimal comma.
        ("pipes.csv", "|", true, 0, 2),
    ];
    for (name, delim, comma, extra, blank) in cases {
        if python_export(
            &d.join("plain.csv"),
            &d.join(name),
            delim,
            comma,
            extra,
            blank,
        )
        .is_none()
        {
            return;
        }
        let (got, err) = check_json(d, name, &["--sheet", "plain.toml"]);
        same_units(&plain, &got, name);
        if extra + blank > 0 {
            assert!(
                err.contains(&format!(
                    "left out {blank} empty rows and {extra} unnamed empty columns"
                )),
                "{name}: {err}"
            );
        }
        // Observed scaling reads the same units too.
        let (a, _) = check_json(d, "plain.csv", &[]);
        let (b, _) = check_json(d, name, &[]);
        same_units(&a, &b, name);
    }
    // A forced delimiter wins over detection: forcing a comma on the semicolon file finds
    // one column and says why.
    let o = linegate(&["check", "semicolon.csv", "--delimiter", "comma"], d);
    let err = exits(&o, 2);
    assert!(err.contains("pass --delimiter ';'"), "{err}");
}

#[test]
fn a_cell_with_both_decimal_marks_is_refused_with_its_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(
        d,
        "both.csv",
        b"unit;a;b;label\nU1;1,5;2;GO\nU2;1.234,5;0;NO-GO\nU3;3;1;GO\n",
    );
    let err = exits(&linegate(&["check", "both.csv"], d), 2);
    assert!(err.contains("both.csv") && err.contains("line 3"), "{err}");
    assert!(err.contains("1.234,5"), "{err}");
    // A decimal comma in a comma-separated file can only be quoted; --decimal-comma reads it.
    write(
        d,
        "quoted.csv",
        b"unit,a,b,label\nU1,\"1,5\",2,GO\nU2,\"-1,5\",0,NO-GO\nU3,3,1,GO\n",
    );
    exits(&linegate(&["check", "quoted.csv"], d), 2);
    exits(
        &linegate(&["-q", "check", "quoted.csv", "--decimal-comma"], d),
        0,
    );
    // A named cell under a trailing unnamed column is not empty: a ragged row, not dropped.
    write(d, "filled.csv", b"a,b,label,\n1,2,GO,\n3,4,NO-GO,x\n");
    let err = exits(&linegate(&["check", "filled.csv"], d), 2);
    assert!(err.contains("line 3"), "{err}");
}

#[test]
fn generate_writes_what_its_extension_says() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    for (name, sep) in [("t.tsv", b'\t'), ("x.txt", b'\t'), ("c.csv", b',')] {
        exits(
            &linegate(
                &[
                    "-q",
                    "generate",
                    "--rows",
                    "50",
                    "--channels",
                    "3",
                    "-o",
                    name,
                ],
                d,
            ),
            0,
        );
        let text = std::fs::read(d.join(name)).unwrap();
        let header = text.split(|&b| b == b'\n').next().unwrap();
        assert_eq!(
            header.iter().filter(|&&b| b == sep).count(),
            4,
            "{name}: {}",
            String::from_utf8_lossy(header)
        );
        let sheet = d.join(name).with_extension("toml");
        exits(
            &linegate(
                &["-q", "check", name, "--sheet", sheet.to_str().unwrap()],
                d,
            ),
            0,
        );
    }
}
