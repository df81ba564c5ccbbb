//! The release audit's gates, on the demo's logs: decisions are held against the labels,
//! declared noise gates, and the suggested RECHECK band passes the gate it was made for.
//! (The demo data is synthetic; these check the gates' rules, not any product.)

use std::path::Path;

use host_trainer::ingest::LogOptions;
use host_trainer::ingest::dataset::Dataset;
use host_trainer::release::applying::{self, Apply};
use host_trainer::release::audit_report::AuditReport;
use host_trainer::release::gates::{self, AuditConfig, Limit};
use host_trainer::release::quantise::QuantConfig;
use host_trainer::train::float_model::FloatModel;
use host_trainer::workflow;

/// The demo's model and logs, written into `dir`.
fn demo(dir: &Path) -> (FloatModel, Dataset, Dataset) {
    host_trainer::demo::run(&dir.join("d"), false).unwrap();
    let fm = FloatModel::read(&dir.join("d/model.json")).unwrap();
    let opts = LogOptions::default();
    let train = workflow::load_for_model(&[dir.join("d/train-synthetic.csv")], &opts, &fm).unwrap();
    let holdout =
        workflow::load_for_model(&[dir.join("d/holdout-synthetic.csv")], &opts, &fm).unwrap();
    (fm, train, holdout)
}

fn noise(fm: &FloatModel) -> Vec<Option<f64>> {
    fm.channels.iter().map(|c| c.noise).collect()
}

fn gate<'a>(r: &'a AuditReport, gate: &str, log: &str) -> &'a gates::Gate {
    r.gates
        .iter()
        .find(|g| g.gate == gate && g.log == log)
        .unwrap_or_else(|| panic!("no gate {gate} on {log}: {:?}", r.gates))
}

#[test]
fn a_threshold_that_passes_nogo_units_fails_the_false_go_gate() {
    let dir = tempfile::tempdir().unwrap();
    let (mut fm, train, holdout) = demo(dir.path());
    // Every unit scores above this threshold: the fixed model says GO to all of them, which
    // agrees with the float model (no flip) but not with the labels.
    fm.threshold = -1e308;
    let others = [("holdout", &holdout)];
    let (_, r) = applying::release(
        &fm,
        &train,
        &others,
        QuantConfig::default(),
        &[],
        AuditConfig::default(),
    )
    .unwrap();
    assert!(!r.passed);
    let nogo = train.labels.iter().filter(|&&l| l < 0).count();
    let g = gate(&r, "false GO", "train");
    assert!(!g.passed);
    // A false GO is counted among the NO-GO units, the only units it can happen to.
    let rate = g.rate.unwrap();
    assert_eq!((rate.count, rate.of), (nogo as u64, nogo as u64));
    assert!(
        g.value
            .starts_with(&format!("{nogo} of {nogo} NO-GO units")),
        "{}",
        g.value
    );
    assert_eq!(r.sets[0].false_go, nogo);
    assert!(
        r.reasons.iter().any(|x| x.contains("false GO")),
        "{:?}",
        r.reasons
    );
    // The units behind it are listed, in log order, each a NO-GO the device passes.
    assert!(!r.wrong.is_empty());
    assert!(
        r.wrong
            .iter()
            .all(|u| u.label == "NO-GO" && u.fixed_verdict == "GO")
    );
    assert!(
        r.wrong
            .windows(2)
            .all(|w| w[0].set != w[1].set || w[0].line < w[1].line)
    );
    // A cap that allows them lets that gate pass (and only that one changes).
    let lax = AuditConfig {
        max_false_go: Limit::Rate(1.0),
        ..AuditConfig::default()
    };
    let (_, r2) =
        applying::release(&fm, &train, &others, QuantConfig::default(), &[], lax).unwrap();
    assert!(gate(&r2, "false GO", "train").passed);
}

#[test]
fn declared_noise_gates_and_the_suggested_band_passes_its_own_gate() {
    let dir = tempfile::tempdir().unwrap();
    let (fm, train, holdout) = demo(dir.path());
    let others = [("holdout", &holdout)];
    let n = noise(&fm);
    let cfg = AuditConfig::default();
    let qc = QuantConfig::default();
    // Without a band: units whose GO/NO-GO the noise could swap fail the noise gate.
    let (_, r0) = applying::release(&fm, &train, &others, qc, &n, cfg).unwrap();
    let t = r0.tolerance.as_ref().expect("the demo declares noise");
    let unsafe0: usize = r0.sets.iter().map(|s| s.noise_unsafe).sum();
    assert!(unsafe0 > 0);
    assert!(!gate(&r0, "noise", "train").passed);
    assert!(!r0.passed);
    // Without the noise gate the same audit passes: the gate is what failed it.
    let off = AuditConfig {
        noise_gate: false,
        ..cfg
    };
    assert!(
        applying::release(&fm, &train, &others, qc, &n, off)
            .unwrap()
            .1
            .passed
    );
    // The suggested band, applied once by hand, passes the noise gate on the same data, and
    // the units it catches are RECHECKs, not errors.
    let banded = QuantConfig {
        recheck_band: t.suggested_band,
        ..qc
    };
    let (_, r1) = applying::release(&fm, &train, &others, banded, &n, cfg).unwrap();
    for log in ["train", "holdout"] {
        assert!(gate(&r1, "noise", log).passed, "{:?}", r1.gates);
        assert!(gate(&r1, "false GO", log).passed && gate(&r1, "false NO-GO", log).passed);
    }
    let rechecks: usize = r1.sets.iter().map(|s| s.recheck).sum();
    assert!(
        rechecks >= unsafe0,
        "{rechecks} RECHECKs for {unsafe0} units at risk"
    );
    assert!(r1.passed, "{:?}", r1.reasons);
    // `--apply-suggested-band` does the same and says so.
    let done = applying::release_applying(
        &fm,
        &train,
        &others,
        qc,
        &n,
        cfg,
        Apply {
            suggested_band: true,
            recommended_format: false,
            progress: false,
        },
    )
    .unwrap();
    assert!(done.report.passed, "{:?}", done.report.reasons);
    assert!(done.qc.recheck_band >= t.suggested_band);
    assert!(done.report.applied.iter().any(|a| a.contains("RECHECK")));
}

#[test]
fn a_recheck_is_neither_right_nor_wrong_but_is_capped() {
    let dir = tempfile::tempdir().unwrap();
    let (fm, train, _) = demo(dir.path());
    // A band as wide as the scores: every unit is sent to retest.
    let wide = QuantConfig {
        recheck_band: 1e3,
        ..QuantConfig::default()
    };
    let (_, r) = applying::release(&fm, &train, &[], wide, &[], AuditConfig::default()).unwrap();
    let s = &r.sets[0];
    assert_eq!(s.recheck, train.len());
    assert_eq!((s.false_go, s.false_nogo, s.flips), (0, 0, 0));
    assert!(!gate(&r, "RECHECK", "train").passed);
    let lax = AuditConfig {
        max_recheck: Limit::Rate(1.0),
        ..AuditConfig::default()
    };
    let (_, r) = applying::release(&fm, &train, &[], wide, &[], lax).unwrap();
    assert!(gate(&r, "RECHECK", "train").passed);
}

#[test]
fn every_rate_carries_its_exact_bounds_and_a_bound_gate_says_how_many_units_it_needs() {
    let dir = tempfile::tempdir().unwrap();
    let (fm, train, holdout) = demo(dir.path());
    let others = [("holdout", &holdout)];
    let run = |cfg| {
        applying::release(&fm, &train, &others, QuantConfig::default(), &[], cfg)
            .unwrap()
            .1
    };
    let r = run(AuditConfig::default());
    for (s, ds) in r.sets.iter().zip([&train, &holdout]) {
        let go = ds.labels.iter().filter(|&&l| l > 0).count();
        assert_eq!((s.go_units, s.nogo_units), (go, ds.len() - go));
        // Each rate among the units it can happen to; 0 of n NO-GO units is a rate below
        // the rule of three's bound, not a rate of 0 (1 − 0.05^(1/n), the k = 0 closed form).
        assert_eq!(s.rates.false_go.of, s.nogo_units as u64);
        assert_eq!(s.rates.false_nogo.of, s.go_units as u64);
        assert_eq!(s.rates.recheck.of, s.units as u64);
        assert_eq!(s.rates.fault.count, s.faults as u64);
        if s.false_go == 0 {
            let n = s.nogo_units as f64;
            let rule_of_three = -(0.05f64.ln() / n).exp_m1();
            assert!((s.rates.false_go.upper - rule_of_three).abs() < 1e-9);
        }
    }
    // The holdout's NO-GO units are too few to show a false-GO rate below 1 % at 95 %
    // even with none wrong (299 are needed): the gate fails and says so.
    let cfg = AuditConfig {
        max_false_go: "1%@95%".parse().unwrap(),
        ..AuditConfig::default()
    };
    let r = run(cfg);
    let g = gate(&r, "false GO", "holdout");
    assert!(r.sets[1].nogo_units < 299 && r.sets[1].false_go == 0);
    assert!(!g.passed && g.units_needed == Some(299));
    assert!(
        r.reasons.iter().any(|x| x.contains("at least 299")),
        "{:?}",
        r.reasons
    );
    // A bound the logs can show passes: 5 % at 90 % needs 45 units.
    let cfg = AuditConfig {
        max_false_go: "5%@90%".parse().unwrap(),
        ..AuditConfig::default()
    };
    assert!(gate(&run(cfg), "false GO", "holdout").passed);
}

#[test]
fn limits_parse_counts_and_rates() {
    assert_eq!("0".parse::<Limit>(), Ok(Limit::Count(0)));
    assert_eq!("12".parse::<Limit>(), Ok(Limit::Count(12)));
    assert_eq!("0.5%".parse::<Limit>(), Ok(Limit::Rate(0.005)));
    assert_eq!(
        "1%@95%".parse::<Limit>(),
        Ok(Limit::Upper {
            rate: 0.01,
            confidence: 0.95
        })
    );
    for bad in ["-1", "x", "150%", "1.5", "%", "1%@", "1%@100%", "1@95%"] {
        assert!(bad.parse::<Limit>().is_err(), "{bad}");
    }
    // 1 % of 200 units is 2.
    assert!(Limit::Rate(0.01).allows(2, 200) && !Limit::Rate(0.01).allows(3, 200));
}

/// `--noise` names a channel as every other name does, without regard to case; the sheet's
/// noise stays for the channels it does not name, and unusable entries are named.
#[test]
fn noise_entries_name_channels_without_regard_to_case() {
    use host_trainer::release::tolerance::{NoiseSpecError, declared_noise};
    let dir = tempfile::tempdir().unwrap();
    let (fm, _, _) = demo(dir.path());
    let k = fm
        .channels
        .iter()
        .position(|c| c.name == "vibration_mg")
        .unwrap();
    let n = declared_noise(&fm, &["VIBRATION_MG=7.5".into()]).unwrap();
    assert_eq!(n[k], Some(7.5));
    for (j, c) in fm.channels.iter().enumerate() {
        if j != k {
            assert_eq!(n[j], c.noise, "{}", c.name);
        }
    }
    assert_eq!(
        declared_noise(&fm, &["vibration_mg".into()]),
        Err(NoiseSpecError::Form("vibration_mg".into()))
    );
    assert_eq!(
        declared_noise(&fm, &["humidity=1".into()]),
        Err(NoiseSpecError::Channel("humidity".into()))
    );
    assert_eq!(
        declared_noise(&fm, &["vibration_mg=-1".into()]),
        Err(NoiseSpecError::Value("vibration_mg=-1".into()))
    );
}
