//! `linegate train --class …`: the refusals of a class list (unknown --go-class, no GO
//! class named, more than 8 classes, a name twice, a class without units, a token of no
//! class) and a model of classes end to end: `generate --classes 3` (separable by its
//! construction) trained by the joint rule decides every training unit right, and the
//! file reads back with its classes and the options a later reading takes.

use std::path::Path;

use crate::common::{exits, linegate, write};

const LOG: &str = "unit,a,b,label\n\
u1,0.1,0.9,go\nu2,0.2,0.8,pass\nu3,0.9,0.1,short\nu4,0.8,0.2,short\n\
u5,0.5,0.5,crack\nu6,0.55,0.45,crack\nu7,0.15,0.85,go\nu8,0.85,0.15,short\n";

fn train(d: &Path, extra: &[&str]) -> std::process::Output {
    let mut a = vec![
        "train", "log.csv", "-o", "m.json", "--force", "--folds", "0",
    ];
    a.extend_from_slice(extra);
    linegate(&a, d)
}

#[test]
fn class_lists_that_cannot_be_a_model_are_refused_naming_the_flag() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "log.csv", LOG.as_bytes());
    let three = [
        "--class",
        "GOOD=go,pass",
        "--class",
        "SHORT=short",
        "--class",
        "CRACK=crack",
    ];
    // No class is named GO and --go-class is missing: the classes and the flag named.
    let e = exits(&train(d, &three), 2);
    assert!(
        e.contains("--go-class") && e.contains("GOOD, SHORT, CRACK"),
        "{e}"
    );
    // An unknown --go-class.
    let mut a = three.to_vec();
    a.extend(["--go-class", "FINE"]);
    let e = exits(&train(d, &a), 2);
    assert!(
        e.contains("--go-class FINE") && e.contains("no class has that name"),
        "{e}"
    );
    // Nine classes: the device holds eight.
    let nine: Vec<String> = (0..9).map(|k| format!("C{k}=t{k}")).collect();
    let mut a = Vec::new();
    for c in &nine {
        a.extend(["--class", c.as_str()]);
    }
    a.extend(["--go-class", "none"]);
    let e = exits(&train(d, &a), 2);
    assert!(e.contains("2 to 8"), "{e}");
    // A name twice, a token of two classes, a name over 24 bytes.
    let e = exits(&train(d, &["--class", "GO=go", "--class", "go=pass"]), 2);
    assert!(e.contains("twice"), "{e}");
    let e = exits(&train(d, &["--class", "GO=go,x", "--class", "SHORT=x"]), 2);
    assert!(e.contains("'x'") && e.contains("both"), "{e}");
    let long = format!("{}=short", "S".repeat(25));
    let e = exits(&train(d, &["--class", "GO=go", "--class", &long]), 2);
    assert!(e.contains("1 to 24 bytes"), "{e}");
    // A declared class without units: which one, and each class's count.
    let e = exits(
        &train(
            d,
            &[
                "--class",
                "GO=go,pass",
                "--class",
                "SHORT=short",
                "--class",
                "CRACK=crack",
                "--class",
                "BEARING=bearing",
            ],
        ),
        2,
    );
    assert!(
        e.contains("BEARING") && e.contains("GO 3, SHORT 3, CRACK 2, BEARING 0"),
        "{e}"
    );
    // A label of no class: file, line, column and the accepted tokens.
    let e = exits(
        &train(d, &["--class", "GO=go,pass", "--class", "SHORT=short"]),
        2,
    );
    assert!(
        e.contains("log.csv") && e.contains("line 6") && e.contains("crack"),
        "{e}"
    );
    assert!(e.contains("GO: go, pass; SHORT: short"), "{e}");
    // --class-rule without classes.
    let e = exits(&train(d, &["--class-rule", "joint"]), 2);
    assert!(e.contains("--class"), "{e}");
    // Nothing was written by any refused run.
    assert!(!d.join("m.json").exists());
}

#[test]
fn a_separable_log_of_three_classes_trains_jointly_without_a_training_error() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    exits(
        &linegate(
            &[
                "-q",
                "generate",
                "--rows",
                "3000",
                "--channels",
                "4",
                "--classes",
                "3",
                "--margin",
                "0.05",
                "-o",
                "three.csv",
            ],
            d,
        ),
        0,
    );
    let o = linegate(
        &[
            "train",
            "three.csv",
            "--sheet",
            "three.toml",
            "--class",
            "GO=go",
            "--class",
            "F1=fault1",
            "--class",
            "F2=fault2",
            "--class-rule",
            "joint",
            "--c",
            "10",
            "--folds",
            "3",
            "-o",
            "m.json",
        ],
        d,
    );
    exits(&o, 0);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("trained 3 classes, joint"), "{out}");
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("m.json")).unwrap()).unwrap();
    assert_eq!(m["format_version"], 4);
    assert_eq!(m["summary"]["training_errors"], 0, "{out}");
    let classes = &m["classes"];
    assert_eq!(classes["rule"], "joint");
    assert_eq!(classes["go"], 0);
    assert_eq!(classes["rows"].as_array().unwrap().len(), 3);
    // Rows normalised: the largest |weight| over every row is 1.
    let largest = classes["rows"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|r| r["weights"].as_array().unwrap().iter())
        .map(|w| w.as_f64().unwrap().abs())
        .fold(0.0, f64::max);
    assert!((largest - 1.0).abs() < 1e-12, "{largest}");
    for f in m["summary"]["classes"]["classes"].as_array().unwrap() {
        assert_eq!(f["training_errors"], 0, "{f}");
        assert!(f["units"].as_u64().unwrap() > 100, "{f}");
    }
    // The options a later reading takes: the classes and the GO class.
    let rw = &m["provenance"]["read_with"];
    assert_eq!(rw["go_class"], "GO");
    assert_eq!(rw["classes"].as_array().unwrap().len(), 3);
    // The file reads back (its id and digest hold).
    let h = host_trainer::train::float_model::FloatModel::read(&d.join("m.json")).unwrap();
    assert_eq!(h.classes.unwrap().rows[2].name, "F2");
}

#[test]
fn a_log_of_go_and_nogo_trains_as_before_without_classes() {
    // Without --class nothing about classes reaches the file.
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
                "3",
                "-o",
                "two.csv",
            ],
            d,
        ),
        0,
    );
    exits(
        &linegate(
            &["-q", "train", "two.csv", "--folds", "0", "-o", "m.json"],
            d,
        ),
        0,
    );
    let text = std::fs::read_to_string(d.join("m.json")).unwrap();
    assert!(!text.contains("\"classes\""), "{text}");
    assert!(!text.contains("go_class"), "{text}");
}

/// After training, later commands read with the model's classes: `--class` naming another
/// order (or at all, for a two-sided model) is refused rather than recoding the labels;
/// `check --class` tests GO against every failure class together (±1, whatever the class
/// codes), on a log that is separable that way; a class name that would break the device's
/// line is refused; the joint model file is the same bytes whatever the thread count.
#[test]
fn later_commands_keep_the_models_classes_and_check_reads_go_against_the_rest() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // GO near the origin, CRACK far out, SHORT in the two other corners: GO against the
    // rest is separable by one line; no class is the −1 "NO-GO" of a two-sided log.
    let mut log = String::from("a,b,label\n");
    for i in 0..40 {
        let f = f64::from(i) / 40.0;
        log += &format!("{f:.3},{:.3},go\n", 1.0 - f);
        log += &format!("{:.3},{:.3},crack\n", 5.0 + f, 6.0 - f);
        log += &format!("{:.3},{f:.3},short\n", 5.0 + f);
        log += &format!("{f:.3},{:.3},short\n", 5.0 + f);
    }
    write(d, "log.csv", log.as_bytes());
    let classes = [
        "--class",
        "GO=go",
        "--class",
        "SHORT=short",
        "--class",
        "CRACK=crack",
    ];
    let mut args = vec!["check", "log.csv"];
    args.extend_from_slice(&classes);
    let o = linegate(&args, d);
    let out = exits(&o, 0);
    let printed = String::from_utf8_lossy(&o.stdout);
    assert!(
        printed.contains("GO (GO) against every failure class together")
            && printed.contains("LINEARLY SEPARABLE"),
        "{printed}{out}"
    );
    let mut args = vec![
        "-q",
        "train",
        "log.csv",
        "--class-rule",
        "joint",
        "--c",
        "1",
        "--folds",
        "0",
        "--no-operating-point",
        "-o",
        "m.json",
    ];
    args.extend_from_slice(&classes);
    exits(&linegate(&args, d), 0);
    // Another order of the same names: refused, naming both lists.
    let o = linegate(
        &[
            "-q",
            "audit",
            "--model",
            "m.json",
            "--class",
            "GO=go",
            "--class",
            "CRACK=crack",
            "--class",
            "SHORT=short",
        ],
        d,
    );
    let err = exits(&o, 2);
    assert!(
        err.contains("GO, CRACK, SHORT") && err.contains("GO, SHORT, CRACK"),
        "{err}"
    );
    // The model's own list (other tokens allowed) is taken.
    let o = linegate(
        &[
            "-q",
            "audit",
            "--model",
            "m.json",
            "--class",
            "GO=go,ok",
            "--class",
            "SHORT=short",
            "--class",
            "CRACK=crack",
        ],
        d,
    );
    assert!(o.status.code() == Some(0) || o.status.code() == Some(1));
    // A name the device's line could not carry.
    for bad in ["BAD NAME=x", "A#B=x", "recheck=x"] {
        let mut args = vec!["-q", "train", "log.csv", "--class", bad];
        args.extend_from_slice(&classes);
        let err = exits(&linegate(&args, d), 2);
        assert!(
            err.contains("class name") || err.contains("outcome"),
            "{bad}: {err}"
        );
    }
    // The joint model file does not depend on the thread count.
    let run = |threads: &str, out: &str| {
        let mut args = vec![
            "-q",
            "train",
            "log.csv",
            "--class-rule",
            "joint",
            "--c",
            "1",
            "--folds",
            "0",
            "--no-operating-point",
            "-o",
            out,
        ];
        args.extend_from_slice(&classes);
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_linegate"))
            .arg("--no-project")
            .args(&args)
            .env("RAYON_NUM_THREADS", threads)
            .current_dir(d)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        std::fs::read(d.join(out)).unwrap()
    };
    assert_eq!(run("1", "t1.json"), run("2", "t2.json"));
}
