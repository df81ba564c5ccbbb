//! The release gates of a model of several classes, per log and per class: a failure
//! class decided GO (false GO, the dangerous error, held to `--max-false-go`), a failure
//! class routed to another failure class (misrouting, `--max-misroute`), GO units turned
//! away (a failure class or FAULT: `--max-false-nogo`), RECHECK (`--max-recheck`), and over
//! all logs the flips of the decided class (`--max-flips`). Each rate is counted among the
//! units of the true class it can happen to, with its exact Clopper–Pearson bounds at the
//! limit's confidence (`gates.rs`'s [`Limit`]).

use crate::confidence::{Rate, rate_text};
use crate::release::class_tally::ClassLog;
use crate::release::gates::{AuditConfig, Gate, Limit};

/// The misrouting limit when `--max-misroute` is not given: at most 1 % of a failure
/// class's units decided another failure class (rework instead of scrap costs, it does not
/// ship a bad unit, which false GO gates).
pub const DEFAULT_MISROUTE: Limit = Limit::Rate(0.01);

/// A gate on `n` of `of` units of a class against `limit`.
fn rate_gate(gate: &'static str, log: &str, n: u64, of: u64, among: &str, limit: Limit) -> Gate {
    let rate = Rate::new(n, of, limit.confidence());
    Gate {
        gate,
        log: log.into(),
        value: rate_text(&rate, among),
        limit: match limit {
            Limit::Count(_) => limit.to_string(),
            _ => format!("{limit} of {among}"),
        },
        passed: limit.allows(n as usize, of as usize),
        measured: Some(n as f64),
        rate: Some(rate),
        rule: Some(limit),
        units_needed: limit.units_needed(),
    }
}

/// Every gate of a class audit: per log, per class, then the flips over all logs.
/// `names` are the classes in row order, `go` the GO class's row.
pub fn class_gates(
    logs: &[ClassLog],
    names: &[String],
    go: Option<usize>,
    cfg: AuditConfig,
    misroute: Limit,
) -> Vec<Gate> {
    let k = names.len();
    let mut out = Vec::new();
    for log in logs {
        for (t, row) in log.confusion.iter().enumerate() {
            let n_t = log.class_units[t];
            let among = format!("{} units", names[t]);
            if Some(t) == go {
                // Turned away: decided a failure class, or FAULT.
                let away: u64 =
                    (0..k).filter(|&c| c != t).map(|c| row[c]).sum::<u64>() + row[k + 1];
                out.push(rate_gate(
                    "false NO-GO",
                    &log.name,
                    away,
                    n_t,
                    &among,
                    cfg.max_false_nogo,
                ));
            } else {
                if let Some(g) = go {
                    out.push(rate_gate(
                        "false GO",
                        &log.name,
                        row[g],
                        n_t,
                        &among,
                        cfg.max_false_go,
                    ));
                }
                let wrong: u64 = (0..k)
                    .filter(|&c| c != t && Some(c) != go)
                    .map(|c| row[c])
                    .sum();
                out.push(rate_gate(
                    "misrouted",
                    &log.name,
                    wrong,
                    n_t,
                    &among,
                    misroute,
                ));
            }
        }
        let n = log.units as u64 - log.unlabelled as u64;
        let recheck: u64 = log.confusion.iter().map(|r| r[k]).sum();
        out.push(rate_gate(
            "RECHECK",
            &log.name,
            recheck,
            n,
            "units",
            cfg.max_recheck,
        ));
    }
    let flips: usize = logs.iter().map(|l| l.flips).sum();
    out.push(Gate {
        gate: "flips",
        log: "all".into(),
        value: flips.to_string(),
        limit: cfg.max_flips.to_string(),
        passed: flips <= cfg.max_flips,
        measured: Some(flips as f64),
        rate: None,
        rule: None,
        units_needed: None,
    });
    // The rounding proof as the two-sided audit's guarantee: required unless
    // --no-require-guarantee, every scored unit of every log proved.
    if cfg.require_guarantee {
        let unproved: usize = logs.iter().map(|l| l.unproved).sum();
        out.push(Gate {
            gate: "rounding proof",
            log: "all".into(),
            value: format!("{unproved} units not proved"),
            limit: "0".into(),
            passed: unproved == 0,
            measured: Some(unproved as f64),
            rate: None,
            rule: None,
            units_needed: None,
        });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn log(confusion: Vec<Vec<u64>>) -> ClassLog {
        let class_units = confusion
            .iter()
            .map(|r| r.iter().sum())
            .collect::<Vec<u64>>();
        ClassLog {
            name: "holdout".into(),
            units: class_units.iter().sum::<u64>() as usize,
            class_units,
            confusion,
            row_rates: Vec::new(),
            flips: 0,
            proved: 0,
            unproved: 0,
            faults: 0,
            unlabelled: 0,
            min_multiple: None,
            margin_histogram: Vec::new(),
            flip_units: Vec::new(),
            tight: Vec::new(),
        }
    }

    /// Counted by hand: GO (row 0) 20 units, 1 decided "short"; "short" 10 units, 1 GO,
    /// 2 "crack"; "crack" 10 units, none wrong. Columns: good, short, crack, RECHECK, FAULT.
    #[test]
    fn each_failure_class_is_gated_for_false_go_and_misrouting() {
        let l = log(vec![
            vec![18, 1, 0, 1, 0],
            vec![1, 7, 2, 0, 0],
            vec![0, 0, 10, 0, 0],
        ]);
        let names: Vec<String> = ["good", "short", "crack"].map(String::from).to_vec();
        let g = class_gates(
            &[l],
            &names,
            Some(0),
            AuditConfig::default(),
            DEFAULT_MISROUTE,
        );
        let find = |gate: &str, among: &str| {
            g.iter()
                .find(|x| x.gate == gate && x.value.contains(among))
                .unwrap()
        };
        assert_eq!(find("false NO-GO", "good").measured, Some(1.0));
        assert!(!find("false NO-GO", "good").passed, "1 of 20 is above 1 %");
        assert_eq!(find("false GO", "short").measured, Some(1.0));
        assert!(!find("false GO", "short").passed);
        assert_eq!(find("misrouted", "short").measured, Some(2.0));
        assert!(find("false GO", "crack").passed && find("misrouted", "crack").passed);
        assert_eq!(find("RECHECK", "units").measured, Some(1.0));
        // The flips, then the rounding proof (required by default): the log has no
        // unproved unit.
        assert_eq!(g[g.len() - 2].gate, "flips");
        let proof = g.last().unwrap();
        assert_eq!((proof.gate, proof.passed), ("rounding proof", true));
        // Without the guarantee required there is no proof gate.
        let lifted = AuditConfig {
            require_guarantee: false,
            ..AuditConfig::default()
        };
        let l = log(vec![
            vec![1, 0, 0, 0, 0],
            vec![0, 1, 0, 0, 0],
            vec![0, 0, 1, 0, 0],
        ]);
        let g = class_gates(&[l], &names, Some(0), lifted, DEFAULT_MISROUTE);
        assert_eq!(g.last().unwrap().gate, "flips");
    }
}
