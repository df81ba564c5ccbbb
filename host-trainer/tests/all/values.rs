//! `linegate values` from the command line: picking units by id, line and count, refusals
//! (an unknown id, a blob of another model), the CSV header, FAULT units of both kinds, and
//! every unit's line equal to `replay`'s. The numbers themselves are checked against numpy
//! in `tests/tests/all/values.rs`.

use crate::common::{demo, exits, linegate};

const BENCH: [&str; 5] = [
    "--model",
    "demo/model.json",
    "--blob",
    "demo/model.lgmb",
    "demo/holdout-synthetic.csv",
];

const SIGNAL: [&str; 5] = [
    "--model",
    "demo/signal-model.json",
    "--blob",
    "demo/signal-model.lgmb",
    "demo/signal-field-synthetic.csv",
];

fn with<'a>(cmd: &[&'a str], extra: &[&'a str]) -> Vec<&'a str> {
    let mut a = vec!["values"];
    a.extend_from_slice(cmd);
    a.extend_from_slice(extra);
    a
}

fn stdout(o: &std::process::Output) -> String {
    String::from_utf8(o.stdout.clone()).unwrap()
}

#[test]
fn units_are_picked_by_id_line_and_count_and_unknown_ones_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    // Line 2 is the first unit (index 0); FAN-C00003 is the fourth, on line 5.
    let o = linegate(&with(&BENCH, &["--unit", "FAN-C00003", "--line", "2"]), d);
    exits(&o, 0);
    let text = stdout(&o);
    let heads: Vec<&str> = text.lines().filter(|l| l.starts_with("unit ")).collect();
    assert_eq!(heads.len(), 2, "{text}");
    assert!(
        heads[0].starts_with("unit 0 (line 2, id FAN-C00000): score "),
        "{text}"
    );
    assert!(
        heads[1].starts_with("unit 3 (line 5, id FAN-C00003): score "),
        "{text}"
    );
    // The table's rows: one per channel, named.
    assert!(text.contains("supply_current_ma"), "{text}");
    assert_eq!(text.matches(" reading ").count(), 2 * 5, "{text}");

    let o = linegate(&with(&BENCH, &["--limit", "3", "--csv"]), d);
    exits(&o, 0);
    assert_eq!(stdout(&o).lines().count(), 1 + 3 * 5);

    // An id no unit has: exit 2, named, nothing printed.
    let o = linegate(
        &with(&BENCH, &["--unit", "FAN-C00003", "--unit", "FAN-X9"]),
        d,
    );
    let err = exits(&o, 2);
    assert!(err.contains("no unit has the id 'FAN-X9'"), "{err}");
    assert!(err.contains("holdout-synthetic.csv"), "{err}");
    assert!(o.stdout.is_empty());
    let o = linegate(&with(&BENCH, &["--line", "1"]), d);
    let err = exits(&o, 2);
    assert!(err.contains("no unit starts on line 1"), "{err}");

    // A log without a unit-id column cannot be picked from by id.
    let text = std::fs::read_to_string(d.join("demo/holdout-synthetic.csv")).unwrap();
    let no_ids: String = text
        .lines()
        .map(|l| l.split_once(',').unwrap().1.to_string() + "\n")
        .collect();
    std::fs::write(d.join("no-ids.csv"), no_ids).unwrap();
    let args = [
        "--model",
        "demo/model.json",
        "--blob",
        "demo/model.lgmb",
        "no-ids.csv",
    ];
    let err = exits(&linegate(&with(&args, &["--unit", "FAN-C00003"]), d), 2);
    assert!(err.contains("no unit-id column"), "{err}");
    let o = linegate(&with(&args, &["--line", "5"]), d);
    exits(&o, 0);
    assert!(stdout(&o).contains("unit 3 (line 5): score "));
}

#[test]
fn a_blob_of_another_model_is_refused_and_the_csv_header_is_stable() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let args = [
        "values",
        "--model",
        "demo/model.json",
        "--blob",
        "demo/signal-model.lgmb",
        "demo/holdout-synthetic.csv",
    ];
    let o = linegate(&args, d);
    let err = exits(&o, 1);
    assert!(err.contains("not a blob of the float model"), "{err}");
    assert!(o.stdout.is_empty());
    // --input-bits belongs to the blob-less mode.
    exits(&linegate(&with(&BENCH, &["--input-bits", "8"]), d), 2);

    let o = linegate(&with(&BENCH, &["--csv", "--limit", "1"]), d);
    exits(&o, 0);
    let text = stdout(&o);
    // README, "values": the CSV columns, in this order.
    let header = "index,line,unit_id,channel,name,source,unit,physical,raw,scaled,fault,score,verdict,device_line";
    assert_eq!(text.lines().next().unwrap(), header);
    let readme = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../README.md"),
    )
    .unwrap();
    assert!(
        readme.contains(&format!("`{header}`")),
        "README.md lacks the CSV header"
    );
    let first: Vec<&str> = text.lines().nth(1).unwrap().split(',').collect();
    assert_eq!(
        &first[..7],
        [
            "0",
            "2",
            "FAN-C00000",
            "0",
            "supply_current_ma",
            "reading",
            "mA"
        ]
    );
    // The log's 420.1 mA at the sheet's 0.1 mA per count.
    assert_eq!((first[7], first[8]), ("420.1", "4201"));

    // Without a blob: the model quantised plainly, said on the first line.
    let args = [
        "values",
        "--model",
        "demo/model.json",
        "demo/holdout-synthetic.csv",
    ];
    let o = linegate(&[&args[..], &["--limit", "1"]].concat(), d);
    exits(&o, 0);
    assert!(
        stdout(&o).lines().next().unwrap().contains("no blob"),
        "{}",
        stdout(&o)
    );
}

#[test]
fn fault_units_show_the_refused_channel_and_every_line_is_replays() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    // Unit 4 (line 6) with 1250 mA, past the sheet's 900: the device's FAULT ch0.
    let text = std::fs::read_to_string(d.join("demo/holdout-synthetic.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let mut cells: Vec<String> = lines[5].split(',').map(String::from).collect();
    cells[2] = "1250.0".into();
    lines[5] = cells.join(",");
    std::fs::write(d.join("fault.csv"), lines.join("\n") + "\n").unwrap();
    let args = [
        "--model",
        "demo/model.json",
        "--blob",
        "demo/model.lgmb",
        "fault.csv",
    ];
    let o = linegate(&with(&args, &["--line", "6", "--csv"]), d);
    exits(&o, 0);
    let text = stdout(&o);
    let row: Vec<&str> = text.lines().nth(1).unwrap().split(',').collect();
    // raw 12500 counts, no scaled input, the fault named; no score; replay's line.
    assert_eq!(
        &row[7..],
        ["1250", "12500", "", "ch0", "", "FAULT", "4 FAULT ch0"],
        "{text}"
    );
    let other: Vec<&str> = text.lines().nth(2).unwrap().split(',').collect();
    assert!(!other[9].is_empty() && other[10].is_empty(), "{text}");
    let o = linegate(&with(&args, &["--line", "6"]), d);
    exits(&o, 0);
    let text = stdout(&o);
    assert!(
        text.contains("no score, replay line \"4 FAULT ch0\""),
        "{text}"
    );
    assert!(text.contains("FAULT ch0"), "{text}");

    // A signal log's unit whose vibration window the device refuses: its features are
    // FAULT signal0, the other channels keep their numbers.
    let o = linegate(&with(&SIGNAL, &["--unit", "FM-F0012", "--json"]), d);
    exits(&o, 0);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let u = &v["units"][0];
    assert_eq!(u["device_line"], "12 FAULT signal0");
    assert_eq!(u["verdict"], "FAULT");
    assert!(u["score"].is_null());
    let chans = u["channels"].as_array().unwrap();
    let vib: Vec<&serde_json::Value> = chans
        .iter()
        .filter(|c| c["name"].as_str().unwrap().starts_with("vib_"))
        .collect();
    assert!(!vib.is_empty());
    for c in vib {
        assert_eq!(c["fault"], "signal0", "{c}");
        assert!(c["raw"].is_null() && c["scaled"].is_null(), "{c}");
    }
    let current = chans.iter().find(|c| c["name"] == "current_mean").unwrap();
    assert!(
        current["raw"].is_i64() && current["scaled"].is_i64(),
        "{current}"
    );

    // Every unit's line, in both kinds of log, is the line replay prints.
    for (cmd, log) in [(&args, "fault.csv"), (&SIGNAL, "signal")] {
        let o = linegate(&with(cmd, &["--json"]), d);
        exits(&o, 0);
        let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        let mine: Vec<String> = v["units"]
            .as_array()
            .unwrap()
            .iter()
            .map(|u| u["device_line"].as_str().unwrap().to_string())
            .collect();
        let mut r = vec!["replay", "--form", "device"];
        r.extend_from_slice(&cmd[..]);
        let o = linegate(&r, d);
        exits(&o, 0);
        let replay = stdout(&o);
        let theirs: Vec<&str> = replay.lines().skip(1).collect();
        assert_eq!(mine, theirs, "{log}");
        assert_eq!(
            v["model_line"].as_str().unwrap(),
            replay.lines().next().unwrap()
        );
    }
}

#[test]
fn help_teaches_with_examples_and_exit_codes() {
    let dir = tempfile::tempdir().unwrap();
    let o = linegate(&["values", "--help"], dir.path());
    exits(&o, 0);
    let text = stdout(&o);
    for part in [
        "Example",
        "--unit FAN-C00012",
        "--line 14",
        "Exit codes",
        "FAULT ch<n>",
    ] {
        assert!(text.contains(part), "values --help lacks {part}:\n{text}");
    }
    exits(&linegate(&["values"], dir.path()), 2);
}
