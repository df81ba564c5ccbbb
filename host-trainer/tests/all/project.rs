//! One release, one set of settings: a project file read by every command, logs of several
//! files, the split `train` records audited as held out, and `pack` writing exactly the
//! audited blob or refusing with what differs.

use std::path::Path;

use crate::common::{exits, linegate, write};

/// A seeded stream of numbers in [0, 1) (Knuth's MMIX linear congruential generator).
fn uniform(seed: u64) -> impl FnMut() -> f64 {
    let mut x = seed;
    move || {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((x >> 33) % 10_000) as f64 / 10_000.0
    }
}

/// An invented pump end-of-line station: three shift files of the same columns, units GO
/// when the motor current and vibration stay low (with some overlap near the boundary).
/// Returns the whole log's text (one header) and the GO and NO-GO counts.
fn shifts(d: &Path) -> (String, usize, usize) {
    let header = "serial,current_a,vibration_mg,case_temp_c,verdict\n";
    let mut all = String::from(header);
    let mut files = [
        String::from(header),
        String::from(header),
        String::from(header),
    ];
    let (mut go, mut nogo) = (0, 0);
    let mut next = uniform(12345);
    for i in 0..360 {
        let current = 1.0 + 2.0 * next();
        let vib = 10.0 + 40.0 * next();
        let temp = 30.0 + 20.0 * next();
        let score = 3.0 - current - vib / 25.0 + 0.4 * (next() - 0.5);
        let verdict = if score > 0.0 {
            go += 1;
            "pass"
        } else {
            nogo += 1;
            "fail"
        };
        let row = format!("P{i:04},{current:.4},{vib:.3},{temp:.2},{verdict}\n");
        all.push_str(&row);
        files[i / 120].push_str(&row);
    }
    for (k, f) in files.iter().enumerate() {
        write(d, &format!("shift-{}.csv", k + 1), f.as_bytes());
    }
    (all, go, nogo)
}

const PROJECT: &str = r#"# The pump station's release
[logs]
train = ["shift-*.csv"]

[columns]
label = "verdict"
go = ["pass"]
nogo = ["fail"]
unit_id = "serial"

[split]
holdout_fraction = 0.25

[train]
seed = 5
c = 1
folds = 3
cv_trainers = "chosen"

[gates]
max_false_go = "20%"
max_false_nogo = "20%"
max_recheck = "40%"

[outputs]
model = "out/model.json"
audit_dir = "out/audit"
blob = "out/model.lgmb"
"#;

fn json(d: &Path, f: &str) -> serde_json::Value {
    serde_json::from_slice(&std::fs::read(d.join(f)).unwrap()).unwrap()
}

#[test]
fn a_project_file_drives_train_audit_and_pack_and_pack_refuses_a_changed_gate() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    shifts(d);
    write(d, "linegate.toml", PROJECT.as_bytes());
    std::fs::create_dir(d.join("out")).unwrap();
    // The same few commands, no flag: every setting from the project file.
    let err = exits(&linegate(&["train"], d), 0);
    assert!(err.contains("from the project file linegate.toml"), "{err}");
    assert!(err.contains("no channel sheet"), "{err}");
    exits(&linegate(&["-q", "audit"], d), 0);
    exits(&linegate(&["-q", "pack"], d), 0);
    let blob = std::fs::read(d.join("out/model.lgmb")).unwrap();
    // Every output records each setting and its source.
    let m = json(d, "out/model.json");
    let settings = m["provenance"]["settings"].as_array().unwrap();
    let find = |s: &[serde_json::Value], flag: &str| {
        s.iter()
            .find(|v| v["flag"] == flag)
            .cloned()
            .unwrap_or_else(|| panic!("no {flag} in {s:?}"))
    };
    assert_eq!(
        find(settings, "--seed")["source"],
        "linegate.toml [train] seed"
    );
    assert_eq!(find(settings, "--epochs")["source"], "default");
    let a = json(d, "out/audit/audit.json");
    let audit_settings = a["settings"].as_array().unwrap();
    let gate = find(audit_settings, "--max-false-nogo");
    assert_eq!(gate["value"][0], "20%");
    assert_eq!(gate["source"], "linegate.toml [gates] max_false_nogo");
    // The label tokens come from the model, where the project file of audit says nothing.
    let stripped = PROJECT.replace("go = [\"pass\"]\nnogo = [\"fail\"]\n", "");
    write(d, "linegate.toml", stripped.as_bytes());
    exits(&linegate(&["-q", "audit", "--force"], d), 0);
    let a = json(d, "out/audit/audit.json");
    let go = find(a["settings"].as_array().unwrap(), "--go-labels");
    assert_eq!(go["value"][0], "pass");
    assert_eq!(go["source"], "model out/model.json");
    exits(&linegate(&["-q", "pack", "--force"], d), 0);
    assert_eq!(std::fs::read(d.join("out/model.lgmb")).unwrap(), blob);
    // A gate changed in the project file after the audit: pack refuses, naming it, and
    // writes nothing.
    write(
        d,
        "linegate.toml",
        stripped
            .replace("max_recheck = \"40%\"", "max_recheck = \"35%\"")
            .as_bytes(),
    );
    std::fs::remove_file(d.join("out/model.lgmb")).unwrap();
    let err = exits(&linegate(&["pack"], d), 1);
    assert!(
        err.contains("not the audited release")
            && err.contains("--max-recheck: the audit had 40% (linegate.toml [gates] max_recheck), pack has 35% (linegate.toml [gates] max_recheck)"),
        "{err}"
    );
    assert!(!d.join("out/model.lgmb").exists());
    // A flag on the command line overrides the key: the audited release again.
    exits(&linegate(&["-q", "pack", "--max-recheck", "40%"], d), 0);
    assert_eq!(std::fs::read(d.join("out/model.lgmb")).unwrap(), blob);
    // Another model under the same audit record is refused too.
    exits(
        &linegate(&["-q", "train", "--seed", "6", "-o", "out/other.json"], d),
        0,
    );
    let err = exits(
        &linegate(
            &[
                "pack",
                "--model",
                "out/other.json",
                "--max-recheck",
                "40%",
                "-o",
                "x.lgmb",
            ],
            d,
        ),
        1,
    );
    assert!(err.contains("model: the audit was of model"), "{err}");
}

#[test]
fn the_split_recorded_at_train_is_the_split_the_audit_reports() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (_, go, nogo) = shifts(d);
    write(d, "linegate.toml", PROJECT.as_bytes());
    std::fs::create_dir(d.join("out")).unwrap();
    exits(&linegate(&["-q", "train"], d), 0);
    exits(&linegate(&["-q", "audit"], d), 0);
    // Stratified: a quarter of each class, rounded (counted here from the generator).
    let held = ((go as f64 * 0.25).round() + (nogo as f64 * 0.25).round()) as u64;
    let m = json(d, "out/model.json");
    assert_eq!(m["provenance"]["holdout_split"]["held_out"], held);
    let a = json(d, "out/audit/audit.json");
    let sets = a["sets"].as_array().unwrap();
    let units = |name: &str| {
        sets.iter()
            .find(|s| s["name"] == name)
            .map(|s| s["units"].as_u64().unwrap())
    };
    assert_eq!(units("held-out"), Some(held));
    assert_eq!(units("train"), Some(360 - held));
    assert_eq!(a["split"]["held_out"], held);
    let md = std::fs::read_to_string(d.join("out/audit/audit.md")).unwrap();
    assert!(
        md.contains(&format!(
            "the {held} held-out units are audited as \"held-out\""
        )),
        "{md}"
    );
    assert!(md.contains("## Settings"), "{md}");
}

/// SHA-256 of a file by the system's `sha256sum` (GNU coreutils), or `None` (SKIPPED).
fn sha256sum(path: &Path) -> Option<String> {
    let o = std::process::Command::new("sha256sum")
        .arg(path)
        .output()
        .ok()?;
    let text = String::from_utf8(o.stdout).ok()?;
    text.split_whitespace().next().map(str::to_string)
}

#[test]
fn several_files_are_one_log_with_each_file_hashed() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (all, _, _) = shifts(d);
    write(d, "whole.csv", all.as_bytes());
    let common = [
        "--label",
        "verdict",
        "--go-labels",
        "pass",
        "--nogo-labels",
        "fail",
        "--unit-id",
        "serial",
        "--folds",
        "0",
        "--c",
        "1",
    ];
    let train = |logs: &[&str], out: &str| {
        let mut a = vec!["-q", "--no-project", "train"];
        a.extend_from_slice(logs);
        a.extend_from_slice(&common);
        a.extend(["-o", out]);
        exits(&linegate(&a, d), 0);
        json(d, out)
    };
    let parts = train(&["shift-1.csv", "shift-2.csv", "shift-3.csv"], "parts.json");
    let globbed = train(&["shift-*.csv"], "glob.json");
    let whole = train(&["whole.csv"], "whole.json");
    // The same units: the same channels, weights and threshold as the joined file.
    for k in ["channels", "weights", "bias", "threshold"] {
        assert_eq!(parts[k], whole[k], "{k}");
    }
    assert_eq!(parts["model_id"], globbed["model_id"]);
    // Each file's SHA-256 is recorded, as sha256sum (GNU coreutils) computes it.
    let files = parts["provenance"]["training_files"].as_array().unwrap();
    assert_eq!(files.len(), 3);
    for (k, f) in files.iter().enumerate() {
        let name = format!("shift-{}.csv", k + 1);
        assert_eq!(f["path"], name.as_str());
        assert_eq!(f["units"], 120);
        match sha256sum(&d.join(&name)) {
            Some(s) => assert_eq!(f["sha256"], s.as_str(), "{name}"),
            None => {
                eprintln!("SKIPPED: sha256sum not found; file digests not checked from outside")
            }
        }
    }
    // The audit reads the files the model names and lists them; a changed file is named.
    let audit = |extra: &[&str]| {
        let mut a = vec![
            "--no-project",
            "audit",
            "--model",
            "parts.json",
            "--max-false-go",
            "50%",
            "--max-false-nogo",
            "50%",
            "--max-recheck",
            "50%",
        ];
        a.extend_from_slice(extra);
        linegate(&a, d)
    };
    let o = audit(&[]);
    let out = String::from_utf8_lossy(&o.stdout).to_string();
    assert!(out.contains("train file `shift-2.csv`: 120 units"), "{out}");
    let changed = std::fs::read_to_string(d.join("shift-2.csv"))
        .unwrap()
        .replacen("P0120,", "P9120,", 1);
    write(d, "shift-2.csv", changed.as_bytes());
    let err = exits(&audit(&[]), 2);
    assert!(err.contains("first different file: shift-2.csv"), "{err}");
    // Files of one log need the same columns; both are named.
    write(
        d,
        "odd.csv",
        b"serial,current_a,vibration,case_temp_c,verdict\nQ1,1,2,3,pass\n",
    );
    let mut a = vec!["--no-project", "train", "shift-1.csv", "odd.csv"];
    a.extend_from_slice(&common);
    a.extend(["-o", "x.json"]);
    let err = exits(&linegate(&a, d), 2);
    assert!(
        err.contains("odd.csv")
            && err.contains("shift-1.csv")
            && err.contains("column 2 is 'vibration_mg' there and 'vibration' here"),
        "{err}"
    );
    // A file given twice (by another name, or a copy) would count its units twice.
    std::fs::copy(d.join("shift-1.csv"), d.join("copy.csv")).unwrap();
    for twice in [
        ["shift-1.csv", "./shift-1.csv"],
        ["shift-1.csv", "copy.csv"],
    ] {
        let mut a = vec!["--no-project", "train", twice[0], twice[1]];
        a.extend_from_slice(&common);
        a.extend(["-o", "x.json"]);
        let err = exits(&linegate(&a, d), 2);
        assert!(err.contains("would count twice"), "{err}");
    }
    // A file without the unit-id column the others have: its units would take their ids.
    let no_id: String = std::fs::read_to_string(d.join("shift-3.csv"))
        .unwrap()
        .lines()
        .map(|l| l.split_once(',').unwrap().1.to_string() + "\n")
        .collect();
    write(d, "no-id.csv", no_id.as_bytes());
    let mut a = vec!["--no-project", "train", "shift-1.csv", "no-id.csv"];
    a.extend_from_slice(&common[..6]);
    a.extend(["--folds", "0", "--c", "1", "-o", "x.json"]);
    let err = exits(&linegate(&a, d), 2);
    assert!(
        err.contains("no-id.csv") && err.contains("unit-id column"),
        "{err}"
    );
    // Files joined by hand: the second header is named as such, with its line.
    let joined = format!(
        "{}{}",
        std::fs::read_to_string(d.join("shift-1.csv")).unwrap(),
        std::fs::read_to_string(d.join("shift-3.csv")).unwrap()
    );
    write(d, "joined.csv", joined.as_bytes());
    let mut a = vec!["--no-project", "train", "joined.csv"];
    a.extend_from_slice(&common);
    a.extend(["-o", "x.json"]);
    let err = exits(&linegate(&a, d), 2);
    assert!(
        err.contains("joined.csv: line 122 repeats the header row"),
        "{err}"
    );
}

#[test]
fn a_project_file_with_an_unknown_key_or_value_is_refused_by_key() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    shifts(d);
    write(d, "p.toml", b"[gates]\nmax_false_gp = \"1%\"\n");
    let err = exits(&linegate(&["--project", "p.toml", "check"], d), 2);
    assert!(
        err.contains("p.toml: [gates] max_false_gp is not a key") && err.contains("max_false_go"),
        "{err}"
    );
    write(d, "p.toml", b"[logs]\ntrain = \"shift-*.csv\"\n[columns]\nlabel = \"verdict\"\ngo = [\"pass\"]\nnogo = [\"fail\"]\n[train]\nfolds = \"many\"\n");
    let err = exits(
        &linegate(&["--project", "p.toml", "train", "-o", "m.json"], d),
        2,
    );
    assert!(err.contains("p.toml [train] folds"), "{err}");
    // A pattern that matches nothing is an error, not a smaller log.
    write(d, "p.toml", b"[logs]\ntrain = \"night-*.csv\"\n");
    let err = exits(&linegate(&["--project", "p.toml", "check"], d), 2);
    assert!(
        err.contains("night-*.csv: the pattern matches no file"),
        "{err}"
    );
    // The project file's check: the log is the shifts' files.
    write(d, "p.toml", b"[logs]\ntrain = \"shift-*.csv\"\n[columns]\nlabel = \"verdict\"\ngo = [\"pass\"]\nnogo = [\"fail\"]\n");
    let o = linegate(&["--project", "p.toml", "check", "--json"], d);
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(j["units"], 360);
}

/// The README's project file, as printed there (the first ```toml block of "One release,
/// one project file").
fn readme_project() -> String {
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("../README.md"))
            .unwrap();
    let section = &readme[readme.find("## One release, one project file").unwrap()..];
    let start = section.find("```toml\n").unwrap() + 8;
    let end = start + section[start..].find("```").unwrap();
    section[start..end].to_string()
}

/// The README's flow, from a raw export of three shifts to a signed blob: one project file
/// (the README's, as printed) and the same few commands, no flag.
#[test]
fn the_readme_flow_runs_as_written() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "linegate.toml", readme_project().as_bytes());
    for sub in ["export", "site-b", "out"] {
        std::fs::create_dir(d.join(sub)).unwrap();
    }
    // The export's columns as the README's file names them; units kept clear of the
    // boundary so the README's gates can pass.
    let header = "serial,tested_at,operator,current_a,vibration_mg,case_temp_c,verdict\n";
    let mut next = uniform(99);
    let mut rows = Vec::new();
    while rows.len() < 5200 {
        let (c, v, t) = (
            1.0 + 2.0 * next(),
            10.0 + 40.0 * next(),
            30.0 + 20.0 * next(),
        );
        let score = 3.0 - c - v / 25.0;
        if score.abs() < 0.25 {
            continue;
        }
        let k = rows.len();
        rows.push(format!(
            "S{k:05},2026-11-{:02}T{:02}:00:00,op{},{c:.4},{v:.3},{t:.2},{}\n",
            1 + k / 200,
            k % 24,
            k % 3,
            if score > 0.0 { "pass" } else { "fail" }
        ));
    }
    let file = |name: &str, rows: &[String]| {
        let mut text = String::from(header);
        text.extend(rows.iter().cloned());
        write(d, name, text.as_bytes());
    };
    // A false-GO target of 1 % at 95 % needs at least 299 NO-GO units in every log.
    file("export/shift-1.csv", &rows[..1200]);
    file("export/shift-2.csv", &rows[1200..2400]);
    file("export/shift-3.csv", &rows[2400..3600]);
    file("export/holdout.csv", &rows[3600..4400]);
    file("site-b/line-1.csv", &rows[4400..5200]);
    write(
        d,
        "channels.toml",
        b"[[channel]]\nname = \"current_a\"\nunit = \"A\"\nmin = 0\nmax = 5\nlsb = 0.0001\n\n[[channel]]\nname = \"vibration_mg\"\nunit = \"mg\"\nmin = 0\nmax = 100\nlsb = 0.001\n\n[[channel]]\nname = \"case_temp_c\"\nunit = \"degC\"\nmin = -20\nmax = 120\nlsb = 0.01\n",
    );
    exits(&linegate(&["-q", "key", "new", "-o", "owner"], d), 0);
    for cmd in [&["check"][..], &["train"], &["audit", "--sweep"], &["pack"]] {
        let mut a = vec!["-q"];
        a.extend_from_slice(cmd);
        exits(&linegate(&a, d), 0);
    }
    // The signed blob and its HEX image, the audited ones.
    for f in ["out/model.lgmb", "out/model.hex", "out/audit/audit.html"] {
        assert!(d.join(f).is_file(), "{f}");
    }
    let a = json(d, "out/audit/audit.json");
    assert_eq!(a["passed"], true);
    let blob = std::fs::read(d.join("out/model.lgmb")).unwrap();
    assert_eq!(
        a["blob_sha256"].as_str().unwrap(),
        sha256sum(&d.join("out/model.lgmb"))
            .unwrap_or_else(|| a["blob_sha256"].as_str().unwrap().to_string())
    );
    assert!(a["key_id"].is_string(), "signed with the project's key");
    let names: Vec<&str> = a["sets"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["name"].as_str().unwrap())
        .collect();
    assert_eq!(names, ["train", "held-out", "holdout", "validation-1"]);
    exits(
        &linegate(
            &[
                "inspect",
                "out/model.lgmb",
                "--model",
                "out/model.json",
                "--report",
                "out/audit/audit.json",
                "--public-key",
                "owner.pub",
            ],
            d,
        ),
        0,
    );
    assert!(!blob.is_empty());
}
