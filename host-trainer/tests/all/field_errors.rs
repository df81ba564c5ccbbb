//! What `compare` and `drift` refuse, and with which exit code: a CI job reads 1 as a
//! failed gate or a drift alarm, so a wrong blob, an empty field or unreadable device lines
//! must exit 2 and say where the problem is.

use crate::common::{demo, exits, linegate, write};

const RELEASE: [&str; 4] = ["--model", "demo/model.json", "--blob", "demo/model.lgmb"];

fn drift(d: &std::path::Path, args: &[&str]) -> std::process::Output {
    let mut a = vec!["-q", "drift", "--audit", "demo/audit.json"];
    a.extend(args);
    linegate(&a, d)
}

#[test]
fn drift_and_compare_refuse_what_they_cannot_judge_with_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    // Another model's blob is an input error, not an alarm.
    let o = linegate(
        &[
            "-q",
            "train",
            "demo/train-synthetic.csv",
            "--trainer",
            "averaged",
            "-o",
            "v2.json",
        ],
        d,
    );
    exits(&o, 0);
    let o = linegate(
        &[
            "-q",
            "pack",
            "--model",
            "v2.json",
            "--train",
            "demo/train-synthetic.csv",
            "--holdout",
            "demo/holdout-synthetic.csv",
            "--override-audit",
            "-o",
            "v2.lgmb",
        ],
        d,
    );
    exits(&o, 0);
    let o = drift(
        d,
        &[
            "demo/holdout-synthetic.csv",
            "--model",
            "v2.json",
            "--blob",
            "v2.lgmb",
        ],
    );
    let err = exits(&o, 2);
    assert!(err.contains("not the blob the audit named"), "{err}");
    // A field with no unit is not "in control".
    let header = std::fs::read_to_string(d.join("demo/holdout-synthetic.csv")).unwrap();
    let header = header.lines().next().unwrap();
    write(d, "empty.csv", format!("{header}\n").as_bytes());
    let mut a = vec!["empty.csv"];
    a.extend(RELEASE);
    let err = exits(&drift(d, &a), 2);
    assert!(err.contains("no unit"), "{err}");
    let mut a = vec!["-q", "compare", "empty.csv"];
    a.extend(RELEASE);
    a.extend(["--against", "demo/model.json"]);
    let err = exits(&linegate(&a, d), 2);
    assert!(err.contains("no unit"), "{err}");
    // The gate's allowance needs a value: a bare flag does not open the gate.
    let mut a = vec!["-q", "compare", "demo/holdout-synthetic.csv"];
    a.extend(RELEASE);
    a.extend(["--against", "v2.json", "--allow-nogo-to-go"]);
    exits(&linegate(&a, d), 2);
    // Device lines the device does not print are refused with their line and column.
    let o = linegate(
        &[
            "-q",
            "replay",
            "--form",
            "device",
            "demo/holdout-synthetic.csv",
            "--model",
            "demo/model.json",
            "--blob",
            "demo/model.lgmb",
            "-o",
            "lines.txt",
        ],
        d,
    );
    exits(&o, 0);
    let lines = std::fs::read_to_string(d.join("lines.txt")).unwrap();
    let mut bad: Vec<String> = lines.lines().take(3).map(String::from).collect();
    bad.push("2 FAULT bogus".into());
    write(d, "bad.txt", (bad.join("\n") + "\n").as_bytes());
    let err = exits(&drift(d, &["--lines", "bad.txt"]), 2);
    assert!(
        err.contains("bad.txt") && err.contains("line 4, column 9"),
        "{err}"
    );
    // The device's `# field <hex>` line saved as it is printed is text, not the record:
    // said, with the way to its bytes.
    let mut a = vec!["demo/holdout-synthetic.csv", "--record-out", "r.lgfr"];
    a.extend(RELEASE);
    exits(&drift(d, &a), 0);
    let hex: String = std::fs::read(d.join("r.lgfr"))
        .unwrap()
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    write(d, "r.txt", format!("# field {}\n", &hex[..400]).as_bytes());
    let err = exits(&drift(d, &["--record", "r.txt"]), 2);
    assert!(err.contains("r.txt") && err.contains("hex text"), "{err}");
    // Only the model line: no unit.
    write(
        d,
        "none.txt",
        format!("{}\n", lines.lines().next().unwrap()).as_bytes(),
    );
    let err = exits(&drift(d, &["--lines", "none.txt"]), 2);
    assert!(err.contains("no unit"), "{err}");
}
