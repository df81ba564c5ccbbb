//! Channel sheets end to end: a channel read from a column of another name (`column`)
//! through train, audit, pack, inspect and replay; clashes and names the device cannot keep
//! refused with the way out; `linegate sheet` writing a sheet that trains as the log does
//! without one, and refusing to overwrite.

use std::path::Path;

use crate::common::{exits, linegate, write};

/// The long column of the test station's log: more than the 24 bytes a device keeps.
const LONG: &str = "Supply current at full load (mA)";

/// An invented pump test station's log: GO units draw 300–400 mA at full load, NO-GO ones
/// 450–550 mA; the vibration channel alone does not decide.
fn station_log(units: usize, seed: usize) -> String {
    let mut t = format!("unit_id,vibration_rms_mg,\"{LONG}\",label\n");
    for i in 0..units {
        let k = i * 7 + seed;
        let go = i % 3 != 0;
        let vibration = 10.0 + (k * 13 % 23) as f64 * 0.5;
        let current = if go { 300.0 } else { 450.0 } + (k * 11 % 41) as f64 * 2.5;
        let label = if go { "GO" } else { "NO-GO" };
        t.push_str(&format!("P-{i:04},{vibration},{current},{label}\n"));
    }
    t
}

/// A sheet reading the long column as `supply_ma` (or as `name`).
fn alias_sheet(name: &str) -> String {
    format!(
        "[[channel]]\nname = \"{name}\"\ncolumn = \"{LONG}\"\nunit = \"mA\"\nmin = 0.0\nmax = 1000.0\nlsb = 0.5\n\n\
         [[channel]]\nname = \"vibration_rms_mg\"\nunit = \"mg\"\nmin = 0.0\nmax = 50.0\nlsb = 0.01\n"
    )
}

#[test]
fn a_channel_named_apart_from_its_column_goes_through_every_command() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "train.csv", station_log(90, 0).as_bytes());
    write(d, "holdout.csv", station_log(30, 5).as_bytes());
    write(d, "channels.toml", alias_sheet("supply_ma").as_bytes());
    let err = exits(
        &linegate(
            &[
                "train",
                "train.csv",
                "--sheet",
                "channels.toml",
                "--holdout",
                "holdout.csv",
                "-o",
                "model.json",
            ],
            d,
        ),
        0,
    );
    assert!(!err.contains("confirmed"), "no entry is unconfirmed: {err}");
    let model: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("model.json")).unwrap()).unwrap();
    let channels = model["channels"].as_array().unwrap();
    // The log's column order; the device name in the model, the column beside it.
    assert_eq!(channels[0]["name"], "vibration_rms_mg");
    assert!(channels[0].get("column").is_none(), "no alias, no key");
    assert_eq!(channels[1]["name"], "supply_ma");
    assert_eq!(channels[1]["column"], LONG);
    let release = [
        "--model",
        "model.json",
        "--train",
        "train.csv",
        "--holdout",
        "holdout.csv",
    ];
    let mut audit = vec!["audit"];
    audit.extend_from_slice(&release);
    audit.extend_from_slice(&["--out-dir", "audit"]);
    exits(&linegate(&audit, d), 0);
    let report = std::fs::read_to_string(d.join("audit/audit.md")).unwrap();
    assert!(report.contains("supply_ma"), "reports name the channel");
    let mut pack = vec!["pack"];
    pack.extend_from_slice(&release);
    pack.extend_from_slice(&["-o", "model.lgmb"]);
    exits(&linegate(&pack, d), 0);
    let o = linegate(&["inspect", "model.lgmb", "--model", "model.json"], d);
    exits(&o, 0);
    let shown = String::from_utf8_lossy(&o.stdout);
    assert!(
        shown.lines().any(|l| l.starts_with("supply_ma ")) && !shown.contains(LONG),
        "inspect lists the channel by its name:\n{shown}"
    );
    // Replay reads the log by its column, whatever it is named in the model.
    let o = linegate(
        &[
            "replay",
            "--form",
            "device",
            "--blob",
            "model.lgmb",
            "--model",
            "model.json",
            "holdout.csv",
        ],
        d,
    );
    exits(&o, 0);
    let lines = String::from_utf8_lossy(&o.stdout);
    assert_eq!(
        lines.lines().filter(|l| l.contains(" GO ")).count(),
        20,
        "{lines}"
    );
    assert_eq!(
        lines.lines().filter(|l| l.contains(" NO-GO ")).count(),
        10,
        "{lines}"
    );
    // A log without the column is refused naming the column, not the channel.
    let other = station_log(30, 5).replace(LONG, "supply");
    write(d, "renamed.csv", other.as_bytes());
    let o = linegate(
        &[
            "replay",
            "--form",
            "device",
            "--blob",
            "model.lgmb",
            "--model",
            "model.json",
            "renamed.csv",
        ],
        d,
    );
    let err = exits(&o, 2);
    assert!(err.contains(&format!("no column '{LONG}'")), "{err}");
}

#[test]
fn a_name_clashing_with_another_column_is_refused_naming_both() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "train.csv", station_log(60, 0).as_bytes());
    // The alias is another column's name in the log (here the unit id, in another case).
    write(d, "clash.toml", alias_sheet("UNIT_ID").as_bytes());
    let o = linegate(
        &[
            "train",
            "train.csv",
            "--sheet",
            "clash.toml",
            "-o",
            "m.json",
        ],
        d,
    );
    let err = exits(&o, 2);
    assert!(
        err.contains(&format!("reads column '{LONG}' as channel 'UNIT_ID'"))
            && err.contains("column 1 of the log is named 'unit_id'"),
        "{err}"
    );
    assert!(!d.join("m.json").exists());
    // Within the sheet: a channel named like the column another entry reads.
    let sheet = format!(
        "{}\n[[channel]]\nname = \"{LONG}\"\nmin = 0.0\nmax = 1.0\n",
        alias_sheet("supply_ma")
    );
    write(d, "twice.toml", sheet.as_bytes());
    let o = linegate(
        &[
            "train",
            "train.csv",
            "--sheet",
            "twice.toml",
            "-o",
            "m.json",
        ],
        d,
    );
    let err = exits(&o, 2);
    assert!(
        err.contains(&format!("channel 'supply_ma' reads column '{LONG}'"))
            && err.contains(&format!("and channel '{LONG}'")),
        "{err}"
    );
}

#[test]
fn a_name_the_device_cannot_keep_says_how_to_alias_it() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "train.csv", station_log(60, 0).as_bytes());
    let o = linegate(&["train", "train.csv", "-o", "m.json"], d);
    let err = exits(&o, 2);
    assert!(
        err.contains("the name is 32 bytes; the device keeps at most 24")
            && err.contains(&format!(
                "[[channel]] name = \"Supply_current_at_full\", column = \"{LONG}\""
            ))
            && err.contains("linegate sheet"),
        "{err}"
    );
    // A sheet entry of that name without `column` says the same.
    let sheet = format!("[[channel]]\nname = \"{LONG}\"\nmin = 0.0\nmax = 1000.0\n");
    write(d, "long.toml", sheet.as_bytes());
    let o = linegate(
        &["train", "train.csv", "--sheet", "long.toml", "-o", "m.json"],
        d,
    );
    let err = exits(&o, 2);
    assert!(
        err.contains("long.toml") && err.contains("`column`"),
        "{err}"
    );
}

/// The `channels` array of a model file.
fn channels(path: &Path) -> serde_json::Value {
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    v["channels"].clone()
}

#[test]
fn a_drawn_sheet_trains_as_the_log_does_without_one_and_is_not_overwritten() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Short names: the log trains without a sheet too.
    let log = station_log(90, 3).replace(LONG, "supply_ma");
    write(d, "train.csv", log.as_bytes());
    let o = linegate(&["sheet", "train.csv", "-o", "channels.toml"], d);
    exits(&o, 0);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("2 channels from 90 rows"), "{out}");
    let text = std::fs::read_to_string(d.join("channels.toml")).unwrap();
    assert_eq!(text.matches("confirmed = false").count(), 2, "{text}");
    assert!(!text.contains("column ="), "{text}");
    for args in [
        vec!["train", "train.csv", "-o", "plain.json"],
        vec![
            "train",
            "train.csv",
            "--sheet",
            "channels.toml",
            "-o",
            "sheet.json",
        ],
    ] {
        let err = exits(&linegate(&args, d), 0);
        if args.contains(&"--sheet") {
            assert!(
                err.contains("channels.toml: 2 of 2 channel entries are still to be confirmed"),
                "{err}"
            );
        }
    }
    // Every channel's range, lsb, raw range and conversion as without the sheet.
    assert_eq!(
        channels(&d.join("sheet.json")),
        channels(&d.join("plain.json"))
    );
    // Not overwritten without --force, and the file is untouched.
    let o = linegate(&["sheet", "train.csv", "-o", "channels.toml"], d);
    let err = exits(&o, 2);
    assert!(err.contains("--force"), "{err}");
    assert_eq!(
        std::fs::read_to_string(d.join("channels.toml")).unwrap(),
        text
    );
    exits(
        &linegate(&["sheet", "train.csv", "-o", "channels.toml", "--force"], d),
        0,
    );
    // The long column gets a suggested name, read by `column`, which trains.
    write(d, "long.csv", station_log(90, 3).as_bytes());
    exits(&linegate(&["sheet", "long.csv", "-o", "long.toml"], d), 0);
    let text = std::fs::read_to_string(d.join("long.toml")).unwrap();
    assert!(
        text.contains(&format!(
            "name = \"Supply_current_at_full\"\ncolumn = \"{LONG}\""
        )),
        "{text}"
    );
    exits(
        &linegate(
            &[
                "train",
                "long.csv",
                "--sheet",
                "long.toml",
                "-o",
                "long.json",
            ],
            d,
        ),
        0,
    );
    let mut aliased = channels(&d.join("long.json"));
    assert_eq!(aliased[1]["column"], LONG);
    // Apart from the names, the same channels as the short log's.
    aliased[1]["name"] = "supply_ma".into();
    aliased[1].as_object_mut().unwrap().remove("column");
    assert_eq!(aliased, channels(&d.join("plain.json")));
    // A usage error for a log that is not there; nothing written.
    let err = exits(&linegate(&["sheet", "missing.csv", "-o", "x.toml"], d), 2);
    assert!(
        err.contains("missing.csv") && !d.join("x.toml").exists(),
        "{err}"
    );
}
