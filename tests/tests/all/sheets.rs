//! Drawn channel sheets and channels named apart from their columns, against outside
//! references: `tests/verify/sheet.py` writes scikit-learn's bundled wine and breast-cancer
//! sets as logs, then parses the sheets `linegate sheet` draws from them with Python's
//! tomllib and recomputes every range and lsb from pandas/numpy's minimum and maximum and
//! the README's rule; the wine model, trained with its drawn sheet (whose 28-byte column
//! `od280/od315_of_diluted_wines` gets a name the device keeps), is released and checked by
//! the independent verifier (`tests/verify/verify_release.py`, which reads each log column
//! the model file names and decodes the blob's channel names from shared-model/FORMAT.md).

use std::path::Path;

use host_trainer::ingest::LogOptions;
use host_trainer::ingest::draft::draft_sheet;

/// Runs `tests/verify/sheet.py MODE DIR`: its exit code and what it printed, or `None`
/// (after a SKIPPED line) when Python or a package is missing.
fn sheet_py(mode: &str, dir: &Path) -> Option<(i32, String)> {
    let (code, text) = crate::python_check(
        "drawn sheets against pandas and tomllib",
        "sheet.py",
        &[std::ffi::OsStr::new(mode), dir.as_os_str()],
        dir,
    )?;
    Some((code.unwrap_or(-1), text))
}

#[test]
fn drawn_sheets_agree_with_pandas_and_the_wine_alias_reaches_the_blob() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let Some((code, text)) = sheet_py("write", d) else {
        return;
    };
    assert_eq!(code, 0, "{text}");
    let opts = LogOptions::default();
    for set in ["wine", "breast_cancer"] {
        let draft = draft_sheet(&[d.join(format!("{set}.csv"))], &opts).unwrap();
        std::fs::write(d.join(format!("{set}.toml")), draft.to_toml()).unwrap();
    }
    let (code, text) = sheet_py("check", d).expect("ran once already");
    // 13 wine and 30 breast-cancer channels.
    assert!(
        text.contains("43 entries in 2 sheets, 0 disagreeing"),
        "{text}"
    );
    assert_eq!(code, 0, "{text}");
    println!("{}", text.trim());

    // Wine with its drawn sheet: the alias is the channel's name in model and blob.
    let rel = d.join("wine-release");
    std::fs::create_dir_all(&rel).unwrap();
    let wine = d.join("wine.csv");
    crate::verifier::release(&rel, &wine, Some(&d.join("wine.toml")), &[], 1.0);
    let model = std::fs::read_to_string(rel.join("model.json")).unwrap();
    assert!(
        model.contains("\"name\": \"od280_od315_of_diluted\",\n      \"column\": \"od280/od315_of_diluted_wines\""),
        "{model}"
    );
    let blob = std::fs::read(rel.join("model.lgmb")).unwrap();
    let (ins, decoded) = host_trainer::release::pack::inspect(&blob);
    decoded.unwrap();
    let names: Vec<&str> = ins.channels.iter().map(|c| c.name.as_str()).collect();
    assert_eq!(names[11], "od280_od315_of_diluted", "{names:?}");
    assert!(!names.iter().any(|n| n.contains('/')), "{names:?}");
    // Outside check: the verifier decodes the blob, reads wine.csv by the model's columns
    // and recomputes every verdict and figure of the report.
    let (code, out) = crate::verifier::verify(
        &rel.join("model.lgmb"),
        &rel.join("model.json"),
        &rel.join("audit.json"),
        std::slice::from_ref(&wine),
    );
    assert_eq!(code, 0, "{out}");
    assert!(out.starts_with("agree: 178 units in 1 logs"), "{out}");
}
