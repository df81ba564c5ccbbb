//! Output sets on the command line: two outputs that are one file, or an output over an
//! input, are refused before anything is written; temporary files and folders a killed run
//! left are removed by the next command writing into that folder, even one that is refused.

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use crate::common::{demo, exits, linegate, on_demo};

/// The entries of `dir`, sorted.
fn names(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .map(|r| {
            r.flatten()
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

fn temporaries(dir: &Path) -> Vec<String> {
    names(dir)
        .into_iter()
        .filter(|n| n.starts_with(".linegate-tmp-"))
        .collect()
}

#[test]
fn outputs_that_are_one_file_or_an_input_are_refused_before_writing() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    std::fs::create_dir(d.join("w")).unwrap();
    let release = ["--apply-suggested-band", "--apply-recommended-format"];
    // The blob named like its HEX image: the HEX text would replace the blob.
    let mut a = on_demo("pack", &release);
    a.extend(["-o", "w/model.hex", "--hex", "0x3F000", "--bin"]);
    let err = exits(&linegate(&a, d), 2);
    assert!(
        err.contains("w/model.hex") && err.contains("blob (-o)") && err.contains("Intel HEX image"),
        "{err}"
    );
    assert_eq!(names(&d.join("w")), Vec::<String>::new());
    // The units CSV named like the report's JSON, also through another spelling of the folder.
    for units in ["w/audit.json", "w/../w/./audit.json"] {
        let mut a = on_demo("audit", &release);
        a.extend(["--out-dir", "w", "--units", units]);
        let err = exits(&linegate(&a, d), 2);
        assert!(
            err.contains("units CSV (--units)") && err.contains("audit.json (--out-dir)"),
            "{err}"
        );
        assert_eq!(names(&d.join("w")), Vec::<String>::new());
    }
    // An output over one of the command's inputs, even with --force.
    let model = std::fs::read(d.join("demo/model.json")).unwrap();
    let mut a = on_demo("pack", &release);
    a.extend(["-o", "demo/model.json", "--force"]);
    let err = exits(&linegate(&a, d), 2);
    assert!(
        err.contains("blob (-o)") && err.contains("float model (--model)"),
        "{err}"
    );
    assert_eq!(std::fs::read(d.join("demo/model.json")).unwrap(), model);
    let log = std::fs::read(d.join("demo/train-synthetic.csv")).unwrap();
    let err = exits(
        &linegate(
            &[
                "train",
                "demo/train-synthetic.csv",
                "--sheet",
                "demo/channels.toml",
                "--folds",
                "0",
                "-o",
                "./demo/train-synthetic.csv",
                "--force",
            ],
            d,
        ),
        2,
    );
    assert!(
        err.contains("float model (-o)") && err.contains("bench log"),
        "{err}"
    );
    assert_eq!(
        std::fs::read(d.join("demo/train-synthetic.csv")).unwrap(),
        log
    );
    // Distinct names still work.
    let mut a = on_demo("pack", &release);
    a.extend(["-o", "w/model.lgmb", "--hex", "0x3F000", "--bin"]);
    exits(&linegate(&a, d), 0);
    assert_eq!(
        names(&d.join("w")),
        ["model.bin", "model.hex", "model.lgmb"]
    );
}

#[test]
fn stale_temporaries_of_every_kind_are_removed_by_the_next_writer() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let w = d.join("w");
    // What killed runs leave: a file of a set, a half-streamed units CSV, a scratch folder.
    let plant = || {
        std::fs::create_dir_all(w.join(".linegate-tmp-4000000-0-scratch")).unwrap();
        std::fs::write(
            w.join(".linegate-tmp-4000000-0-scratch/train-synthetic.csv"),
            "x",
        )
        .unwrap();
        std::fs::write(
            w.join(".linegate-tmp-4000001-1-units.csv"),
            "model_id,log\n",
        )
        .unwrap();
        std::fs::write(w.join(".linegate-tmp-4000002-3-audit.json"), "{").unwrap();
        assert_eq!(temporaries(&w).len(), 3);
    };
    plant();
    let mut a = on_demo(
        "audit",
        &["--apply-suggested-band", "--apply-recommended-format"],
    );
    a.extend(["--out-dir", "w", "--units", "w/units.csv"]);
    exits(&linegate(&a, d), 0);
    assert_eq!(temporaries(&w), Vec::<String>::new());
    assert!(w.join("units.csv").exists() && w.join("audit.json").exists());
    // A run refused because its files exist (no --force) still clears the folder.
    plant();
    let err = exits(&linegate(&a, d), 2);
    assert!(err.contains("already exists"), "{err}");
    assert_eq!(temporaries(&w), Vec::<String>::new());
    // The demo's scratch folder is its own output folder's, and goes when it ends.
    plant();
    exits(
        &linegate(&["-q", "demo", "--out-dir", "w", "--force"], d),
        0,
    );
    assert_eq!(temporaries(&w), Vec::<String>::new());
}

#[test]
fn a_units_csv_killed_while_streaming_leaves_nothing_after_the_next_audit() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let big = [
        "generate",
        "--rows",
        "300000",
        "--channels",
        "16",
        "-o",
        "big.csv",
    ];
    exits(&linegate(&big, d), 0);
    let train = [
        "train",
        "big.csv",
        "--sheet",
        "big.toml",
        "--trainer",
        "perceptron",
        "--folds",
        "0",
        "-o",
        "big.json",
    ];
    exits(&linegate(&train, d), 0);
    let audit = [
        "audit",
        "--model",
        "big.json",
        "--train",
        "big.csv",
        "--units",
        "w/units.csv",
        "--no-require-guarantee",
        "--max-false-nogo",
        "100%",
        "--max-recheck",
        "100%",
        "--max-false-go",
        "100%",
        "--max-flips",
        "1000000",
        "--min-margin-lsb",
        "0",
    ];
    let w = d.join("w");
    let mut child = Command::new(env!("CARGO_BIN_EXE_linegate"))
        .args(audit)
        .current_dir(d)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    // Wait for the units CSV's temporary file to grow, then kill -9 the run.
    let start = Instant::now();
    let seen = loop {
        let growing = temporaries(&w)
            .iter()
            .any(|n| std::fs::metadata(w.join(n)).is_ok_and(|m| m.len() > 1 << 20));
        if growing {
            break true;
        }
        if child.try_wait().unwrap().is_some() || start.elapsed() > Duration::from_secs(300) {
            break false;
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    child.kill().unwrap();
    child.wait().unwrap();
    assert!(
        seen,
        "the units CSV was never seen streaming into its temporary file"
    );
    assert!(
        !temporaries(&w).is_empty(),
        "the kill left the temporary file"
    );
    assert!(!w.join("units.csv").exists());
    let o = linegate(&audit, d);
    assert!(
        o.status.code() == Some(0) || o.status.code() == Some(1),
        "{o:?}"
    );
    assert_eq!(temporaries(&w), Vec::<String>::new());
    let csv = std::fs::read_to_string(w.join("units.csv")).unwrap();
    assert_eq!(csv.lines().count(), 300_001);
}
