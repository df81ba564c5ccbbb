//! `linegate replay --form`: the device form byte for byte as the library's replay, the
//! text form as the device line with the unit's id, timestamp, fault name and line, CSV and
//! JSON Lines with the same fields, several files as one log, unlabelled logs. The forms
//! are read back by Python's csv module, pandas and json in `tests/tests/all/field.rs`.

use crate::common::{demo, exits, linegate};

const RELEASE: [&str; 4] = ["--model", "demo/model.json", "--blob", "demo/model.lgmb"];

fn replay(d: &std::path::Path, form: Option<&str>, logs: &[&str]) -> String {
    let mut args = vec!["-q", "replay"];
    if let Some(f) = form {
        args.extend(["--form", f]);
    }
    args.extend(RELEASE);
    args.extend(logs);
    let o = linegate(&args, d);
    exits(&o, 0);
    String::from_utf8(o.stdout).unwrap()
}

/// The demo's holdout log with unit FAN-C00003's supply current past the sheet's 900 mA
/// (a FAULT ch0), as `fault.csv`; with `unlabelled`, without the verdict column.
fn fault_log(d: &std::path::Path, unlabelled: bool) -> &'static str {
    let text = std::fs::read_to_string(d.join("demo/holdout-synthetic.csv")).unwrap();
    let rows: Vec<String> = text
        .lines()
        .enumerate()
        .map(|(k, l)| {
            let mut cells: Vec<&str> = l.split(',').collect();
            if k == 4 {
                cells[2] = "1250.0";
            }
            if unlabelled {
                cells.pop();
            }
            cells.join(",")
        })
        .collect();
    let name = if unlabelled { "new.csv" } else { "fault.csv" };
    std::fs::write(d.join(name), rows.join("\n") + "\n").unwrap();
    name
}

#[test]
fn the_device_form_is_the_devices_lines_and_text_extends_each() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let log = "demo/holdout-synthetic.csv";
    let device = replay(d, Some("device"), &[log]);
    // The demo's replay-holdout.txt is written by the library's replay (the lines the
    // QEMU checks compare with the device's): the device form is it, byte for byte.
    let want = std::fs::read_to_string(d.join("demo/replay-holdout.txt")).unwrap();
    assert_eq!(device, want);
    // The default form is text: every line's part before " # " is the device's line.
    let text = replay(d, None, &[log]);
    assert_eq!(text, replay(d, Some("text"), &[log]));
    let (dl, tl): (Vec<&str>, Vec<&str>) = (device.lines().collect(), text.lines().collect());
    assert_eq!(dl.len(), tl.len());
    assert_eq!(dl[0], tl[0], "the model line");
    for (k, (dv, tx)) in dl.iter().zip(&tl).enumerate().skip(1) {
        let (head, rest) = tx.split_once(" # ").unwrap();
        assert_eq!(&head, dv);
        assert!(
            rest.starts_with(&format!("unit=FAN-C{:05} time=2026-11-", k - 1))
                && rest.ends_with(&format!(" line={}", k + 1)),
            "{tx}"
        );
    }
}

#[test]
fn fault_lines_name_the_channel_in_every_form_but_the_devices() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let log = fault_log(d, false);
    let device = replay(d, Some("device"), &[log]);
    assert!(device.contains("\n3 FAULT ch0\n"), "{device}");
    let text = replay(d, None, &[log]);
    assert!(
        text.contains(
            "\n3 FAULT ch0 # unit=FAN-C00003 time=2026-11-02T06:01:51Z channel=supply_current_ma line=5\n"
        ),
        "{text}"
    );
    let csv = replay(d, Some("csv"), &[log]);
    let mut lines = csv.lines();
    assert_eq!(
        lines.next().unwrap(),
        "file,line,index,unit_id,timestamp,label,agrees,verdict,score,fault,fault_name"
    );
    let row = lines.nth(3).unwrap();
    assert_eq!(
        row,
        "fault.csv,5,3,FAN-C00003,2026-11-02T06:01:51Z,GO,,FAULT,,ch0,supply_current_ma"
    );
    assert!(csv.ends_with("\r\n"), "RFC 4180 line ends");
    let json = replay(d, Some("json"), &[log]);
    let recs: Vec<serde_json::Value> = json
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(recs[0]["record"], "model");
    assert_eq!(recs[0]["model_line"], device.lines().next().unwrap());
    assert_eq!(recs.len(), 401);
    let u = &recs[4];
    assert_eq!(
        (
            &u["verdict"],
            &u["fault"],
            &u["fault_name"],
            &u["score"],
            &u["unit_id"]
        ),
        (
            &serde_json::json!("FAULT"),
            &serde_json::json!("ch0"),
            &serde_json::json!("supply_current_ma"),
            &serde_json::Value::Null,
            &serde_json::json!("FAN-C00003")
        )
    );
    assert_eq!(recs[1]["agrees"], true);
}

#[test]
fn several_files_are_one_log_numbered_on_and_each_unit_names_its_file() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let (a, b) = ("demo/holdout-synthetic.csv", "demo/drift-synthetic.csv");
    let both = replay(d, Some("device"), &[a, b]);
    let one = replay(d, Some("device"), &[a]);
    let two = replay(d, Some("device"), &[b]);
    let lines: Vec<&str> = both.lines().collect();
    assert_eq!(lines.len(), 801);
    assert_eq!(lines[..401], one.lines().collect::<Vec<_>>()[..]);
    // The second file's units keep their verdicts and scores, numbered on from 400.
    for (k, l) in two.lines().skip(1).enumerate() {
        let (_, rest) = l.split_once(' ').unwrap();
        assert_eq!(lines[401 + k], format!("{} {rest}", 400 + k));
    }
    let csv = replay(d, Some("csv"), &[a, b]);
    assert!(csv.contains(&format!("\r\n{b},2,400,FAN-B00000,")), "{csv}");
    let text = replay(d, None, &[a, b]);
    assert!(text.contains(&format!(" file={b} line=2\n")), "{text}");
    // A glob pattern names the same files.
    let glob = replay(d, Some("device"), &["demo/[dh]*-synthetic.csv"]);
    assert_eq!(glob.lines().count(), 801);
}

#[test]
fn an_unlabelled_log_scores_with_empty_label_cells() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let labelled = replay(d, Some("csv"), &[fault_log(d, false)]);
    let new = replay(d, Some("csv"), &[fault_log(d, true)]);
    for (l, n) in labelled.lines().zip(new.lines()).skip(1) {
        let l: Vec<&str> = l.split(',').collect();
        let n: Vec<&str> = n.split(',').collect();
        assert_eq!((n[5], n[6]), ("", ""), "no label, no agreement");
        assert_eq!(l[7..], n[7..], "same verdicts and scores");
    }
    let json = replay(d, Some("json"), &["new.csv"]);
    let u: serde_json::Value = serde_json::from_str(json.lines().nth(1).unwrap()).unwrap();
    assert_eq!(
        (&u["label"], &u["agrees"]),
        (&serde_json::Value::Null, &serde_json::Value::Null)
    );
}

#[test]
fn a_signal_logs_fault_names_the_signal() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let o = linegate(
        &[
            "-q",
            "replay",
            "--model",
            "demo/signal-model.json",
            "--blob",
            "demo/signal-model.lgmb",
            "demo/signal-field-synthetic.csv",
        ],
        d,
    );
    exits(&o, 0);
    let text = String::from_utf8(o.stdout).unwrap();
    let fault = text.lines().find(|l| l.contains("FAULT signal0")).unwrap();
    assert!(
        fault.contains(" # unit=FM-F") && fault.contains(" signal=vibration_g line="),
        "{fault}"
    );
}
