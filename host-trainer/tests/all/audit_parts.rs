//! The audit by parts: a log cut into files (any cut), each file counted apart with the
//! release read back from its blob, the parts merged in any order and grouping, gives the
//! single-process audit's figures for that log bit for bit, and the same figures the
//! release audit itself reports. (The demo data is synthetic; these check the merge's
//! exactness, not any product.)

use std::path::PathBuf;

use host_trainer::ingest::LogOptions;
use host_trainer::ingest::dataset::Dataset;
use host_trainer::release::audit_part::{AuditPart, LogAudit, MergeError, Released};
use host_trainer::train::float_model::FloatModel;
use host_trainer::workflow;
use host_trainer::workflow::release::{ReleaseRequest, release};
use proptest::prelude::*;

/// The demo's model, logs and released blob (noise declared, so the at-risk listing runs).
struct Demo {
    fm: FloatModel,
    train: Dataset,
    holdout: Dataset,
    noise: Vec<Option<f64>>,
    blob: Vec<u8>,
    report: serde_json::Value,
}

fn demo() -> &'static Demo {
    static DEMO: std::sync::OnceLock<Demo> = std::sync::OnceLock::new();
    DEMO.get_or_init(|| {
        let dir = tempfile::tempdir().unwrap().keep();
        host_trainer::demo::run(&dir.join("d"), false).unwrap();
        let fm = FloatModel::read(&dir.join("d/model.json")).unwrap();
        let opts = LogOptions::default();
        let load =
            |f: &str| workflow::load_for_model(&[dir.join("d").join(f)], &opts, &fm).unwrap();
        let (train, holdout) = (load("train-synthetic.csv"), load("holdout-synthetic.csv"));
        let noise: Vec<Option<f64>> = fm.channels.iter().map(|c| c.noise).collect();
        let others = [("holdout", &holdout)];
        let out = release(&ReleaseRequest::new(&fm, &train, &others, &noise)).unwrap();
        let report = serde_json::to_value(&out.report).unwrap();
        Demo {
            fm: fm.clone(),
            train,
            holdout,
            noise,
            blob: out.blob,
            report,
        }
    })
}

/// `ds` cut at `cuts` (sorted unit indices) into files named `part-K.csv`, each with a
/// digest of its own, as a log of several files arrives.
fn cut(ds: &Dataset, cuts: &[usize]) -> Vec<Dataset> {
    let mut edges = vec![0];
    edges.extend(cuts.iter().copied().filter(|&c| c > 0 && c < ds.len()));
    edges.push(ds.len());
    edges.dedup();
    edges
        .windows(2)
        .enumerate()
        .map(|(k, w)| {
            let mut part = ds.subset(&(w[0]..w[1]).collect::<Vec<_>>());
            part.path = PathBuf::from(format!("part-{k}.csv"));
            part.sha256 = host_trainer::digest::sha256_hex(format!("part {k}").as_bytes());
            part
        })
        .collect()
}

/// The files as one log, read in order (what the CLI holds for several files).
fn whole(files: &[Dataset]) -> Dataset {
    let mut all = files[0].clone();
    for f in &files[1..] {
        all.append(f.clone()).unwrap();
    }
    all
}

/// Merges `parts` by the tree `order` picks: repeatedly the pair at `order[k] % len`.
fn merge_tree(mut parts: Vec<AuditPart>, order: &[usize]) -> Result<AuditPart, MergeError> {
    let mut k = 0;
    while parts.len() > 1 {
        let i = order.get(k).copied().unwrap_or(0) % (parts.len() - 1);
        k += 1;
        let b = parts.remove(i + 1);
        let a = parts.remove(i);
        // Either operand first: the merge is commutative as well as associative.
        let m = if k % 2 == 0 { a.merge(b)? } else { b.merge(a)? };
        parts.insert(i, m);
    }
    Ok(parts.pop().unwrap())
}

fn json(a: &LogAudit) -> String {
    serde_json::to_string(a).unwrap()
}

/// The release read back from its blob counts the holdout exactly as the release audit
/// did: same figures, same listed units.
#[test]
fn the_blob_counts_as_the_release_audit_did() {
    let d = demo();
    let rel = Released::new(d.fm.clone(), &d.blob, &d.noise).unwrap();
    let a = AuditPart::count(rel.counter(), "holdout", &d.holdout, None).into_audit();
    let set = serde_json::to_value(&a.set).unwrap();
    assert_eq!(set, d.report["sets"][1], "holdout figures");
    let listed = |key: &str| -> Vec<serde_json::Value> {
        d.report[key]
            .as_array()
            .unwrap()
            .iter()
            .filter(|u| u["set"] == "holdout")
            .cloned()
            .collect()
    };
    assert_eq!(
        serde_json::to_value(&a.flips).unwrap(),
        serde_json::Value::Array(listed("flips"))
    );
    assert_eq!(
        serde_json::to_value(&a.wrong).unwrap(),
        serde_json::Value::Array(listed("wrong"))
    );
    // The report's tightest units are over all logs: the holdout's among them lead ours.
    let ours = serde_json::to_value(&a.tightest).unwrap();
    let theirs = listed("tightest");
    assert_eq!(&ours.as_array().unwrap()[..theirs.len()], &theirs[..]);
    // The training log too, through the same counter.
    let t = AuditPart::count(rel.counter(), "train", &d.train, None).into_audit();
    assert_eq!(serde_json::to_value(&t.set).unwrap(), d.report["sets"][0]);
}

/// A part of another release is refused by name, never merged.
#[test]
fn parts_of_another_release_are_refused() {
    let d = demo();
    let rel = Released::new(d.fm.clone(), &d.blob, &d.noise).unwrap();
    let quiet = Released::new(d.fm.clone(), &d.blob, &[]).unwrap();
    let files = cut(&d.holdout, &[d.holdout.len() / 2]);
    let a = AuditPart::count(rel.counter(), "holdout", &files[0], Some(0));
    let b = AuditPart::count(quiet.counter(), "holdout", &files[1], Some(1));
    assert!(matches!(a.merge(b), Err(MergeError::Release { .. })));
    let mut tampered = d.blob.clone();
    let n = tampered.len();
    tampered[n / 2] ^= 1;
    assert!(Released::new(d.fm.clone(), &tampered, &[]).is_err());
}

/// A part merged twice, the same file at two places, or a file's part left out: refused,
/// never counted twice or silently short.
#[test]
fn parts_count_each_file_once_and_all_of_them() {
    let d = demo();
    let rel = Released::new(d.fm.clone(), &d.blob, &d.noise).unwrap();
    let files = cut(&d.holdout, &[100, 250]);
    let part = |k: usize| AuditPart::count(rel.counter(), "log", &files[k], Some(k as u32));
    let twice = part(0).merge(part(1)).unwrap().merge(part(1));
    assert!(matches!(twice, Err(MergeError::Twice(_))), "{twice:?}");
    let mut same_bytes = files[2].clone();
    same_bytes.path = "copy-of-part-0.csv".into();
    same_bytes.sha256 = files[0].sha256.clone();
    let copy = AuditPart::count(rel.counter(), "log", &same_bytes, Some(2));
    assert!(matches!(part(0).merge(copy), Err(MergeError::Twice(_))));
    let short = part(0).merge(part(2)).unwrap().finish(3);
    assert!(
        matches!(short, Err(MergeError::Incomplete { .. })),
        "{short:?}"
    );
    // The last file left out is seen too: the log has three files.
    let last = part(0).merge(part(1)).unwrap().finish(3);
    assert!(
        matches!(last, Err(MergeError::Incomplete { .. })),
        "{last:?}"
    );
    let all = part(0).merge(part(1)).unwrap().merge(part(2)).unwrap();
    assert!(all.finish(3).is_ok());
}

fn check_cut(train: bool, cuts: Vec<usize>, order: Vec<usize>) -> Result<(), TestCaseError> {
    let d = demo();
    let ds = if train { &d.train } else { &d.holdout };
    let rel = Released::new(d.fm.clone(), &d.blob, &d.noise).unwrap();
    let mut cuts: Vec<usize> = cuts.into_iter().map(|c| c % (ds.len() + 1)).collect();
    cuts.sort_unstable();
    let files = cut(ds, &cuts);
    let single = AuditPart::count(rel.counter(), "log", &whole(&files), None).into_audit();
    let parts: Vec<AuditPart> = (0u32..)
        .zip(&files)
        .map(|(k, f)| {
            let p = AuditPart::count(rel.counter(), "log", f, Some(k));
            // Through bytes, as an engine moves parts between processes.
            AuditPart::from_bytes(&p.to_bytes()).unwrap()
        })
        .collect();
    let merged = merge_tree(parts, &order)
        .unwrap()
        .finish(files.len())
        .unwrap();
    prop_assert_eq!(json(&merged), json(&single));
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    /// Any cut into up to 8 files, merged by any tree in any operand order, gives the
    /// single pass's figures and listings bit for bit.
    #[test]
    fn any_cut_and_any_merge_tree_give_the_single_pass(
        train in any::<bool>(),
        cuts in proptest::collection::vec(0usize..100_000, 0..8),
        order in proptest::collection::vec(0usize..16, 0..8),
    ) {
        check_cut(train, cuts, order)?;
    }
}

/// Worked cuts: one file, every unit its own file for the first 40, and a cut after unit 1.
#[test]
fn worked_cuts() {
    let d = demo();
    check_cut(false, vec![], vec![]).unwrap();
    check_cut(false, vec![1], vec![]).unwrap();
    check_cut(true, (1..40).collect(), vec![3, 1, 4, 1, 5, 9, 2, 6]).unwrap();
    assert!(d.holdout.len() > 40);
}
