//! First contact: the demo runs end to end, its outputs decode and pass audit, it is
//! deterministic, and the README's commands are the ones CI runs.

use host_trainer::train::float_model::FloatModel;

#[test]
fn demo_outputs_decode_pass_audit_and_are_byte_identical_across_runs() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("a");
    let s = host_trainer::demo::run(&a, false).unwrap();
    let first: Vec<Vec<u8>> = s.files.iter().map(|f| std::fs::read(f).unwrap()).collect();
    // A second run into the same folder (provenance names the folder, and the model file's
    // content digest covers it) must give the same bytes.
    host_trainer::demo::run(&a, true).unwrap();
    let (check_train, drift) = (
        &s.readings.train.check,
        s.readings.checked.as_ref().unwrap(),
    );
    assert!(check_train.separable, "training log must be separable");
    assert!(!drift.separable, "second-shift log must not be separable");
    assert!(!drift.conflict.is_empty());
    assert!(
        s.readings.audit.passed && s.readings.audit.guaranteed,
        "{:?}",
        s.readings.audit.reasons
    );
    let bound = check_train.novikoff_bound.unwrap();
    assert!(check_train.perceptron_updates.unwrap() as f64 <= bound);
    let blob = std::fs::read(a.join("model.lgmb")).unwrap();
    let m = shared_model::blob::decode::<shared_model::Readings>(&blob).unwrap();
    assert_eq!(m.model().audit, shared_model::AuditMark::Passed);
    let fm = FloatModel::read(&a.join("model.json")).unwrap();
    assert_eq!(
        m.model().model_id,
        fm.id_bytes(),
        "blob carries the float model's id"
    );
    let audit: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(a.join("audit.json")).unwrap()).unwrap();
    assert_eq!(audit["model_id"], fm.model_id);
    assert_eq!(audit["passed"], true);
    let (addr, img) = host_trainer::release::hex::from_hex(
        &std::fs::read_to_string(a.join("model.hex")).unwrap(),
    )
    .unwrap();
    assert_eq!((addr, img), (host_trainer::demo::MODEL_REGION, blob));
    assert!(
        std::fs::read_to_string(a.join("audit.html"))
            .unwrap()
            .contains("<svg")
    );
    for (f, x) in s.files.iter().zip(first) {
        assert!(
            std::fs::read(f).unwrap() == x,
            "{} differs between runs",
            f.display()
        );
    }
}

#[test]
fn demo_refuses_to_overwrite_without_force_and_writes_nothing_partial() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("d");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(out.join("model.lgmb"), b"keep me").unwrap();
    assert!(host_trainer::demo::run(&out, false).is_err());
    assert_eq!(std::fs::read(out.join("model.lgmb")).unwrap(), b"keep me");
    assert_eq!(
        std::fs::read_dir(&out).unwrap().count(),
        1,
        "nothing else written"
    );
    host_trainer::demo::run(&out, true).unwrap();
}

/// The two set-up commands the README gives.
const DEMO_COMMAND: &str = "cargo run --release -p host-trainer -- demo";
const TEST_COMMAND: &str = "bash .ci/run";

#[test]
fn readme_commands_are_the_ones_ci_runs() {
    let root = crate::root();
    let readme = std::fs::read_to_string(root.join("README.md")).unwrap();
    let ci = std::fs::read_to_string(root.join(".ci/run")).unwrap();
    assert!(
        readme.contains(DEMO_COMMAND),
        "README must give the demo command `{DEMO_COMMAND}`"
    );
    assert!(
        readme.contains(TEST_COMMAND),
        "README must give the test command `{TEST_COMMAND}`"
    );
    assert!(
        ci.contains("cargo test --workspace"),
        ".ci/run must run the workspace tests"
    );
    assert!(
        readme.contains("not by itself a safety function"),
        "README must carry the caution"
    );
}

/// The margin histogram counts every decided unit of each log once, and its bins up to the
/// rounding bound hold exactly the units the audit counts within the bound (the demo's
/// float model decides every unit correctly, so no wrong unit adds to them).
#[test]
fn the_margin_histogram_counts_every_decided_unit() {
    let dir = tempfile::tempdir().unwrap();
    let s = host_trainer::demo::run(&dir.path().join("d"), false).unwrap();
    for set in &s.readings.audit.sets {
        assert_eq!(
            set.margin_histogram.len(),
            host_trainer::release::bound::MARGIN_BINS
        );
        let counted: u64 = set.margin_histogram.iter().sum();
        assert_eq!(
            counted as usize,
            set.units - set.recheck - set.faults,
            "{}: every decided unit once",
            set.name
        );
        assert_eq!(set.float_correct, set.units - set.faults, "{}", set.name);
        assert_eq!(
            (set.margin_histogram[0] + set.margin_histogram[1]) as usize,
            set.within_bound,
            "{}: the bins up to B are the units within the bound",
            set.name
        );
    }
}
