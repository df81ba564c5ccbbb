//! Signal logs as stations hold them: a window longer than the model's (`take`), one row per
//! unit with numbered sample columns (`columns`), a folder of files with one unit each, and
//! Parquet in the long, numbered-column and list layouts. Each must train the model the
//! long CSV log trains (equal in every field but the provenance: the log's path and hash,
//! and the id and content hash that cover them) and replay to the same lines.
//!
//! Outside reference for the Parquet files: pyarrow writes them (Linegate writes no
//! Parquet); without pyarrow that test prints a loud SKIPPED line (and fails under CI=true).

use std::path::Path;
use std::process::Command;

use crate::common::{exits, linegate, write};

/// Signal `x`: 4 samples, raw 0..=100 (lsb 1), its mean and peak-to-peak as features; `extra`
/// goes into the [[signal]].
fn sheet(extra: &str) -> String {
    format!(
        "[[signal]]\nname = \"x\"\nraw_min = 0\nraw_max = 100\nwindow = 4\n{extra}\n\n\
         [[feature]]\nname = \"x_mean\"\nsignal = \"x\"\nkind = \"mean\"\n\n\
         [[feature]]\nname = \"x_p2p\"\nsignal = \"x\"\nkind = \"peak_to_peak\"\n"
    )
}

/// Twenty units of `n` samples each (a fixed pseudo-random walk): GO units read low, NO-GO
/// units high, the classes overlapping in their means.
fn units(n: usize) -> Vec<(String, Vec<i32>, &'static str)> {
    let mut state = 12_345u32;
    let mut next = move || {
        state = state.wrapping_mul(1_103_515_245).wrapping_add(12_345);
        (state >> 16) as i32 % 15
    };
    (0..20)
        .map(|i| {
            let go = i % 2 == 0;
            let base = if go { 20 } else { 45 };
            let w = (0..n).map(|_| base + next()).collect();
            (format!("U{i:02}"), w, if go { "GO" } else { "NO-GO" })
        })
        .collect()
}

/// The long CSV layout: one row per sample, the verdict on the unit's first row.
fn long_csv(units: &[(String, Vec<i32>, &str)]) -> String {
    let mut log = String::from("unit_id,x,verdict\n");
    for (id, w, label) in units {
        for (k, v) in w.iter().enumerate() {
            log += &format!("{id},{v},{}\n", if k == 0 { *label } else { "" });
        }
    }
    log
}

/// The model file without what names the log (provenance, and the id and content hash
/// that cover it): what the layout must not change.
fn model_core(path: &Path) -> serde_json::Value {
    let mut v: serde_json::Value = serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap();
    let m = v.as_object_mut().unwrap();
    for k in ["provenance", "model_id", "content_sha256"] {
        m.remove(k);
    }
    v
}

/// `train LOG --sheet SHEET -o OUT` (no cross-validation: the point is the reading).
fn train(d: &Path, log: &str, sheet: &str, out: &str) -> String {
    let o = linegate(
        &[
            "-q", "train", log, "--sheet", sheet, "--folds", "0", "-o", out, "--force",
        ],
        d,
    );
    String::from_utf8_lossy(&o.stderr).into_owned() + if o.status.success() { "" } else { "FAILED" }
}

/// Packs `model` (trained on `log`) and replays each of `logs`, returning their outputs.
fn replays(d: &Path, model: &str, log: &str, logs: &[&str]) -> Vec<String> {
    exits(
        &linegate(
            &[
                "-q", "pack", "--model", model, "--train", log, "-o", "r.lgmb", "--force",
            ],
            d,
        ),
        0,
    );
    logs.iter()
        .map(|l| {
            let o = linegate(
                &[
                    "replay", "--form", "device", l, "--blob", "r.lgmb", "--model", model,
                ],
                d,
            );
            exits(&o, 0);
            String::from_utf8(o.stdout).unwrap()
        })
        .collect()
}

#[test]
fn a_longer_window_takes_its_first_or_last_samples_by_the_sheet() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let six = units(6);
    write(d, "long6.csv", long_csv(&six).as_bytes());
    write(d, "plain.toml", sheet("").as_bytes());
    // Without `take` a longer window stays refused, and the error names the way out.
    let err = train(d, "long6.csv", "plain.toml", "m0.json");
    assert!(err.ends_with("FAILED"), "{err}");
    assert!(
        err.contains("over-long window") && err.contains("take = \"first\""),
        "{err}"
    );
    for (take, cut) in [("first", 0..4), ("last", 2..6)] {
        // The reference: the same units with their windows sliced beforehand.
        let sliced: Vec<_> = six
            .iter()
            .map(|(id, w, l)| (id.clone(), w[cut.clone()].to_vec(), *l))
            .collect();
        write(d, "sliced.csv", long_csv(&sliced).as_bytes());
        write(
            d,
            "take.toml",
            sheet(&format!("take = \"{take}\"")).as_bytes(),
        );
        let err = train(d, "long6.csv", "take.toml", "mt.json");
        assert!(!err.ends_with("FAILED"), "{err}");
        assert!(!train(d, "sliced.csv", "plain.toml", "ms.json").ends_with("FAILED"));
        // The rule is recorded with the signal; everything else is the sliced log's model.
        let mut with = model_core(&d.join("mt.json"));
        assert_eq!(with["signals"][0]["take"], take, "{with}");
        with["signals"][0].as_object_mut().unwrap().remove("take");
        assert_eq!(with, model_core(&d.join("ms.json")));
        // Replay of the long windows cuts them as training did.
        let r = replays(d, "mt.json", "long6.csv", &["long6.csv", "sliced.csv"]);
        assert_eq!(r[0], r[1]);
        assert_eq!(r[0].lines().count(), 21, "{}", r[0]);
    }
    // A shorter window stays refused, `take` or not.
    write(d, "short.csv", long_csv(&units(3)).as_bytes());
    let err = train(d, "short.csv", "take.toml", "m1.json");
    assert!(err.contains("short window"), "{err}");
    // A model without `take` answers a longer window with the device's FAULT.
    assert!(!train(d, "sliced.csv", "plain.toml", "mp.json").ends_with("FAILED"));
    let r = replays(d, "mp.json", "sliced.csv", &["long6.csv"]);
    assert!(
        r[0].lines().skip(1).all(|l| l.ends_with("FAULT signal0")),
        "{}",
        r[0]
    );
}

/// One row per unit, the samples in columns given by a pattern, in the header's order or
/// not: the same model and replay as the long log; gaps, numbers twice and a missing
/// pattern are refused naming the columns.
#[test]
fn one_row_per_unit_in_numbered_columns_reads_as_the_long_log() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let four = units(4);
    write(d, "long.csv", long_csv(&four).as_bytes());
    write(d, "s.toml", sheet("columns = \"x[*]\"").as_bytes());
    // Header order 2, 0, 3, 1: sample order comes from the number, not the position.
    let mut wide = String::from("verdict,x[2],unit_id,x[0],x[3],x[1]\n");
    for (id, w, l) in &four {
        wide += &format!("{l},{},{id},{},{},{}\n", w[2], w[0], w[3], w[1]);
    }
    write(d, "wide.csv", wide.as_bytes());
    assert!(!train(d, "long.csv", "s.toml", "ml.json").ends_with("FAILED"));
    let err = train(d, "wide.csv", "s.toml", "mw.json");
    assert!(!err.ends_with("FAILED"), "{err}");
    assert_eq!(
        model_core(&d.join("ml.json")),
        model_core(&d.join("mw.json"))
    );
    let r = replays(d, "ml.json", "long.csv", &["long.csv", "wide.csv"]);
    assert_eq!(r[0], r[1]);
    // A gap in the numbering, a number twice, no pattern declared.
    write(
        d,
        "gap.csv",
        b"unit_id,x[0],x[1],x[3],verdict\nA,1,2,3,GO\n",
    );
    let err = train(d, "gap.csv", "s.toml", "m.json");
    assert!(
        err.contains("gap") && err.contains("'x[1]' and 'x[3]'"),
        "{err}"
    );
    write(
        d,
        "twice.csv",
        b"unit_id,x[0],x[1],x[01],x[2],verdict\nA,1,2,3,4,GO\n",
    );
    let err = train(d, "twice.csv", "s.toml", "m.json");
    assert!(err.contains("'x[01]'") && err.contains("'x[1]'"), "{err}");
    write(d, "plain.toml", sheet("").as_bytes());
    let err = train(d, "wide.csv", "plain.toml", "m.json");
    assert!(err.contains("columns = \"x[*]\""), "{err}");
    // A unit's row twice is refused, not merged.
    let twice = wide.clone() + wide.lines().nth(1).unwrap() + "\n";
    write(d, "again.csv", twice.as_bytes());
    let err = train(d, "again.csv", "s.toml", "m.json");
    assert!(err.contains("appear again"), "{err}");
}

/// A folder of files, one unit each, without unit-id column: the stem is the id; the label
/// comes from the file's label column, else from its folder's name.
#[test]
fn a_folder_of_unit_files_reads_as_one_log() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let mut four = units(4);
    // Read in path order: fail/… before pass/…, names sorted within each.
    four.sort_by_key(|(id, _, l)| (*l == "GO", id.clone()));
    write(d, "long.csv", long_csv(&four).as_bytes());
    write(d, "s.toml", sheet("").as_bytes());
    for (id, w, l) in &four {
        let folder = d
            .join("units")
            .join(if *l == "GO" { "pass" } else { "fail" });
        std::fs::create_dir_all(&folder).unwrap();
        let rows: String = w.iter().map(|v| format!("{v}\n")).collect();
        write(
            &folder,
            &format!("{id}.csv"),
            format!("x\n{rows}").as_bytes(),
        );
    }
    assert!(!train(d, "long.csv", "s.toml", "ml.json").ends_with("FAILED"));
    let err = train(d, "units", "s.toml", "mf.json");
    assert!(!err.ends_with("FAILED"), "{err}");
    assert_eq!(
        model_core(&d.join("ml.json")),
        model_core(&d.join("mf.json"))
    );
    let r = replays(d, "mf.json", "units", &["long.csv", "units"]);
    assert_eq!(
        r[0].lines().skip(1).collect::<Vec<_>>(),
        r[1].lines().skip(1).collect::<Vec<_>>()
    );
    // The audit takes the folder as the training log (its digest is the model's record).
    let o = linegate(&["audit", "--model", "mf.json", "--train", "units"], d);
    assert!(
        o.status.code() == Some(0) || o.status.code() == Some(1),
        "{o:?}"
    );
    // The digest of a folder: SHA-256 of `<sha256>  <path>` lines (sha256sum's form),
    // recomputed here with Rust's sha2 as the outside rule.
    let j: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.join("mf.json")).unwrap()).unwrap();
    let mut list = String::new();
    let mut files: Vec<(String, String)> = four
        .iter()
        .map(|(id, _, l)| {
            let rel = format!("{}/{id}.csv", if *l == "GO" { "pass" } else { "fail" });
            (
                rel.clone(),
                sha256(&std::fs::read(d.join("units").join(&rel)).unwrap()),
            )
        })
        .collect();
    files.sort();
    for (rel, h) in &files {
        list += &format!("{h}  {rel}\n");
    }
    assert_eq!(
        j["provenance"]["training_log"]["sha256"],
        sha256(list.as_bytes())
    );
    // A label column that changes within a file is an error naming the line.
    let odd = d.join("odd");
    std::fs::create_dir_all(&odd).unwrap();
    write(&odd, "A.csv", b"x,verdict\n20,GO\n21,GO\n22,NO-GO\n23,GO\n");
    let err = train(d, "odd/A.csv", "s.toml", "m.json");
    assert!(
        err.contains("line 4") && err.contains("label changes"),
        "{err}"
    );
    // No label column, and a folder that is no label token.
    write(&odd, "B.csv", b"x\n20\n21\n22\n23\n");
    let err = train(d, "odd/B.csv", "s.toml", "m.json");
    assert!(
        err.contains("no label column") && err.contains("'odd'"),
        "{err}"
    );
    // The same stem in two folders is one unit twice.
    std::fs::copy(d.join("units/pass/U00.csv"), d.join("units/fail/U00.csv")).unwrap();
    let err = train(d, "units", "s.toml", "m.json");
    assert!(
        err.contains("appear again") && err.contains("fail/U00.csv"),
        "{err}"
    );
}

fn sha256(bytes: &[u8]) -> String {
    use sha2::Digest;
    sha2::Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// pyarrow writes the long log as Parquet, the wide layout, and list columns of float64,
/// float32, int32 and fixed-size lists.
const MAKE_PARQUET: &str = r#"
import sys, csv
import pyarrow as pa, pyarrow.parquet as pq
src, out = sys.argv[1], sys.argv[2]
rows = list(csv.DictReader(open(src)))
units = {}
for r in rows:
    u = units.setdefault(r["unit_id"], {"x": [], "verdict": r["verdict"]})
    u["x"].append(int(r["x"]))
ids = list(units)
pq.write_table(pa.table({
    "unit_id": [r["unit_id"] for r in rows],
    "x": pa.array([float(r["x"]) for r in rows], pa.float64()),
    "verdict": [r["verdict"] or None for r in rows]}), out + "/long.parquet", row_group_size=7)
n = len(units[ids[0]]["x"])
wide = {"unit_id": ids}
for k in range(n):
    wide[f"x_{k}"] = pa.array([units[i]["x"][k] for i in ids], pa.int32())
wide["verdict"] = [units[i]["verdict"] for i in ids]
pq.write_table(pa.table(wide), out + "/wide.parquet")
for name, t in [("f64", pa.list_(pa.float64())), ("f32", pa.list_(pa.float32())),
                ("i32", pa.list_(pa.int32())), ("fixed", pa.list_(pa.float64(), n)),
                ("large", pa.large_list(pa.int64()))]:
    pq.write_table(pa.table({"unit_id": ids,
        "x": pa.array([units[i]["x"] for i in ids], t),
        "verdict": [units[i]["verdict"] for i in ids]}), out + f"/list-{name}.parquet")
"#;

#[test]
fn parquet_signal_logs_in_every_layout_read_as_the_long_csv() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "long.csv", long_csv(&units(4)).as_bytes());
    write(d, "s.toml", sheet("columns = \"x_*\"").as_bytes());
    let ok = Command::new("python3")
        .arg("-c")
        .arg(MAKE_PARQUET)
        .arg(d.join("long.csv"))
        .arg(d)
        .output();
    match ok {
        Ok(o) if o.status.success() => {}
        Ok(o) if String::from_utf8_lossy(&o.stderr).contains("No module named 'pyarrow'") => {
            eprintln!(
                "\n======== SKIPPED: python3 with pyarrow is not installed (pip install pyarrow) ========\n"
            );
            assert!(
                std::env::var("CI").as_deref() != Ok("true"),
                "pyarrow is required under CI"
            );
            return;
        }
        o => panic!("the pyarrow script failed: {o:?}"),
    }
    assert!(!train(d, "long.csv", "s.toml", "ml.json").ends_with("FAILED"));
    let logs = [
        "long.parquet",
        "wide.parquet",
        "list-f64.parquet",
        "list-f32.parquet",
        "list-i32.parquet",
        "list-fixed.parquet",
        "list-large.parquet",
    ];
    for log in logs {
        let err = train(d, log, "s.toml", "mp.json");
        assert!(!err.ends_with("FAILED"), "{log}: {err}");
        assert_eq!(
            model_core(&d.join("ml.json")),
            model_core(&d.join("mp.json")),
            "{log}"
        );
    }
    let mut all = vec!["long.csv"];
    all.extend(logs);
    let r = replays(d, "ml.json", "long.csv", &all);
    for (log, out) in all.iter().zip(&r) {
        assert_eq!(out, &r[0], "{log}");
    }
}
