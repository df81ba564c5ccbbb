//! The model's operating point and its choice of C as the release record keeps them: every
//! figure a number in `audit.json`, each held-out rate with its exact Clopper–Pearson bounds
//! (`Rate::new(count, of, 0.95)`), and the Markdown sections "Operating point" and "How C
//! was chosen" a reviewer reads.

use std::fmt::Write;

use super::numbers::{lsb, score};
use crate::confidence::{Rate, percent, rate_text};
use crate::release::point_record::OperatingPointRecord;
use crate::train::c_choice::CChoice;
use crate::train::operating_point::Target;

/// The rule in words.
fn rule_text(t: &Target) -> String {
    match *t {
        Target::RecheckBudget {
            share,
            false_go_weight,
        } => format!(
            "RECHECK budget {} % and false-GO weight {false_go_weight}: the least cost {false_go_weight} × false GO + false NO-GO with RECHECK at most {} % of the held-out units; of equal costs the fewest RECHECK",
            percent(share),
            percent(share)
        ),
        Target::FalseGo { rate, confidence } => format!(
            "false-GO target {} %@{} %: the exact one-sided {} % upper bound of the held-out false-GO rate at most {} %; of the points that meet it, the fewest GO units lost (false NO-GO or RECHECK), then the fewest RECHECK",
            percent(rate),
            confidence * 100.0,
            confidence * 100.0,
            percent(rate)
        ),
    }
}

/// The section "Operating point": the rule, the source of the held-out scores, threshold
/// and band in model score units and LSB, the held-out decisions with their bounds, the
/// trade-off table with the chosen row marked. `audit_band`: the band this audit uses.
pub(super) fn operating_point_markdown(s: &mut String, op: &OperatingPointRecord, audit_band: f64) {
    let _ = writeln!(
        s,
        "\n## Operating point\n\n`linegate train` chose the threshold and the RECHECK band on scores of units the model did not train on: {}.\n",
        op.source
    );
    let _ = writeln!(s, "- rule: {}", rule_text(&op.target));
    let _ = writeln!(
        s,
        "- threshold: {} model score units (A·t = {} LSB)",
        score(op.threshold),
        lsb(op.threshold_lsb)
    );
    let _ = writeln!(
        s,
        "- RECHECK half-band: ±{} model score units ({} LSB): GO above {}, NO-GO below {}, RECHECK between",
        score(op.band),
        lsb(op.band_lsb),
        score(op.threshold + op.band),
        score(op.threshold - op.band)
    );
    if audit_band != op.band {
        let _ = writeln!(
            s,
            "- this audit uses a RECHECK half-band of {} instead (see Provenance); the figures below are the operating point's",
            score(audit_band)
        );
    }
    let _ = writeln!(
        s,
        "- held-out units: {} ({} GO, {} NO-GO; {} FAULT)",
        op.units, op.go_units, op.nogo_units, op.faults
    );
    let _ = writeln!(
        s,
        "- false GO: {}",
        rate_text(&op.rates.false_go, "held-out NO-GO units")
    );
    let _ = writeln!(
        s,
        "- false NO-GO (a FAULT on a GO unit included): {}",
        rate_text(&op.rates.false_nogo, "held-out GO units")
    );
    let _ = writeln!(
        s,
        "- RECHECK: {}; {} GO and {} NO-GO units",
        rate_text(&op.rates.recheck, "held-out units"),
        op.counts.recheck_go,
        op.counts.recheck_nogo
    );
    let _ = writeln!(
        s,
        "\n### Trade-off on the held-out units\n\nEach row is the point of least cost {w} × false GO + false NO-GO with RECHECK at most the cap (of equal costs the fewest RECHECK): false GO among the {} held-out NO-GO units, false NO-GO among the {} GO units, RECHECK among all {}. Threshold and half-band in model score units.\n\n| RECHECK cap | threshold | half-band | false GO | false NO-GO | RECHECK |\n|---|---|---|---|---|---|",
        op.nogo_units,
        op.go_units,
        op.units,
        w = op.trade_off_false_go_weight
    );
    let share = |r: &Rate| format!("{} ({} %)", r.count, percent(r.rate));
    for t in &op.trade_off {
        let mark = if t.chosen { " **(chosen)**" } else { "" };
        let _ = writeln!(
            s,
            "| ≤ {} %{mark} | {} | {} | {} | {} | {} |",
            percent(t.recheck_cap),
            score(t.threshold),
            score(t.band),
            share(&t.rates.false_go),
            share(&t.rates.false_nogo),
            share(&t.rates.recheck)
        );
    }
    if !op.trade_off.iter().any(|t| t.chosen) {
        let _ = writeln!(
            s,
            "\nNo row is the chosen point: none has the model's threshold and half-band ({} ± {}); its rule is not one of these caps.",
            score(op.threshold),
            score(op.band)
        );
    }
}

/// The section "How C was chosen": each C of the grid with its pooled held-out decisions
/// and cost, the chosen one marked, and the reason.
pub(super) fn c_choice_markdown(s: &mut String, c: &CChoice) {
    let _ = writeln!(
        s,
        "\n## How C was chosen\n\n{}-fold cross-validation (seed {}; {}) on {} units: each C decided the units of each fold it did not train on, and its {} pooled held-out decisions are priced at {} × false GO + false NO-GO (a FAULT on a GO unit is a false NO-GO).\n\n| C | false GO | false NO-GO | cost |\n|---|---|---|---|",
        c.folds,
        c.seed,
        match c.repeats {
            1 => "one split into folds".to_string(),
            n => format!("{n} differently seeded splits, pooled"),
        },
        c.searched_units,
        c.searched_units * c.repeats,
        c.false_go_weight
    );
    for row in &c.rows {
        let mark = if row.c == c.chosen {
            " **(chosen)**"
        } else {
            ""
        };
        let _ = writeln!(
            s,
            "| {}{mark} | {} | {} | {} |",
            row.c, row.false_go, row.false_nogo, row.cost
        );
    }
    let reason = c.reason.trim_end();
    let stop = if reason.ends_with('.') { "" } else { "." };
    let _ = writeln!(s, "\n{reason}{stop}");
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ingest::dataset::Dataset;
    use crate::release::applying::release;
    use crate::release::audit_report::AuditReport;
    use crate::release::gates::AuditConfig;
    use crate::release::quantise::QuantConfig;
    use crate::train::c_choice::CRow;
    use crate::train::eval::{HeldOut, TrainerKind};
    use crate::train::float_model::FloatModel;
    use crate::train::operating_point::{PointCounts, choose};

    /// A separable two-channel log and a model trained on it without an operating point.
    fn model_and_log() -> (FloatModel, Dataset) {
        let (mut pts, mut labels) = (Vec::new(), Vec::new());
        for k in 0..240 {
            let x = f64::from(k % 24) / 12.0 - 1.0;
            let y = f64::from((k * 7) % 30) / 15.0 - 1.0;
            let s = x + 0.4 * y;
            if s.abs() > 0.1 {
                pts.push(vec![x * 0.8, y * 0.8]);
                labels.push(if s > 0.0 { 1 } else { -1 });
            }
        }
        let ds = Dataset::from_scaled(&pts, &labels);
        let req = crate::workflow::TrainRequest {
            c: crate::train::c_choice::CPolicy::Fixed(10.0),
            folds: 0,
            target: None,
            ..crate::workflow::TrainRequest::new(TrainerKind::Averaged)
        };
        let fm = crate::workflow::train_model(&ds, None, &req).unwrap().model;
        (fm, ds)
    }

    /// Held-out scores whose classes overlap near 0, four GO units FAULT.
    fn held() -> Vec<HeldOut> {
        (0..200)
            .map(|unit| {
                let go = unit % 2 == 0;
                let spread = (unit / 2) as f64 / 100.0;
                let distance = if go { spread - 0.12 } else { 0.12 - spread } * 1e-3;
                HeldOut {
                    unit,
                    distance,
                    go,
                    fault: go && unit % 50 == 0,
                }
            })
            .collect()
    }

    fn c_choice() -> CChoice {
        let row = |c: f64, false_go: usize, false_nogo: usize| CRow {
            c,
            false_go,
            false_nogo,
            cost: 2.0 * false_go as f64 + false_nogo as f64,
        };
        CChoice {
            folds: 5,
            seed: 1,
            false_go_weight: 2.0,
            searched_units: 200,
            repeats: 10,
            rows: vec![row(0.1, 30, 4), row(1.0, 12, 9), row(10.0, 14, 12)],
            chosen: 1.0,
            reason: "C = 1 had the lowest cost".into(),
        }
    }

    fn report(fm: &FloatModel, ds: &Dataset) -> AuditReport {
        release(
            fm,
            ds,
            &[],
            QuantConfig::default(),
            &[],
            AuditConfig::default(),
        )
        .unwrap()
        .1
    }

    #[test]
    fn a_model_with_an_operating_point_reports_it_in_numbers_and_words() {
        let (fm, ds) = model_and_log();
        let target = Target::RecheckBudget {
            share: 0.05,
            false_go_weight: 2.0,
        };
        let op = choose(&held(), target, 1.0, "test scores".into()).unwrap();
        let mut fm = fm.with_operating_point(op.clone());
        fm.provenance.c_choice = Some(c_choice());
        let r = report(&fm, &ds);
        let md = crate::report::markdown(&fm, &r, None);
        for part in [
            "\n## Operating point\n",
            "test scores",
            "- rule: RECHECK budget 5.00 % and false-GO weight 2",
            "### Trade-off on the held-out units",
            "| RECHECK cap | threshold | half-band | false GO | false NO-GO | RECHECK |",
            "\n## How C was chosen\n",
            "| 1 **(chosen)** | 12 | 9 | 33 |",
            "C = 1 had the lowest cost.",
        ] {
            assert!(md.contains(part), "{part:?} in\n{md}");
        }
        // After the provenance, before the decisions; C after the operating point.
        let at = |t: &str| md.find(t).unwrap();
        assert!(at("## Provenance") < at("## Operating point"));
        assert!(at("## Operating point") < at("## How C was chosen"));
        assert!(at("## How C was chosen") < at("## Decisions per log"));
        let rate = |k: usize, n: usize| Rate::new(k as u64, n as u64, 0.95);
        let c = &op.counts;
        let false_go = rate(c.false_go, op.nogo_units);
        assert!(md.contains(&rate_text(&false_go, "held-out NO-GO units")));
        // The chosen point is a row of the table, marked once.
        assert_eq!(md.matches("**(chosen)**").count(), 2, "one point, one C");

        let v: serde_json::Value = serde_json::from_str(&crate::report::json(&r, None)).unwrap();
        let j = &v["operating_point"];
        assert_eq!(j["threshold"].as_f64(), Some(op.threshold));
        assert_eq!(j["band"].as_f64(), Some(op.band));
        assert_eq!(j["band_lsb"].as_f64(), Some(op.band * r.scale));
        assert_eq!(j["threshold_lsb"].as_f64(), Some(op.threshold * r.scale));
        assert_eq!(j["target"]["rule"], "recheck-budget");
        assert_eq!(j["target"]["share"].as_f64(), Some(0.05));
        for (key, n) in [
            ("units", op.units),
            ("go_units", op.go_units),
            ("nogo_units", op.nogo_units),
            ("faults", 4),
        ] {
            assert_eq!(j[key].as_u64(), Some(n as u64), "{key}");
        }
        let check = |j: &serde_json::Value, c: &PointCounts| {
            for (key, k, n) in [
                ("false_go", c.false_go, op.nogo_units),
                ("false_nogo", c.false_nogo, op.go_units),
                ("recheck", c.recheck(), op.units),
            ] {
                let want = rate(k, n);
                assert_eq!(j["counts"][key].as_u64(), Some(k as u64), "{key}");
                for (field, x) in [
                    ("rate", want.rate),
                    ("low", want.low),
                    ("high", want.high),
                    ("upper", want.upper),
                ] {
                    assert_eq!(j["rates"][key][field].as_f64(), Some(x), "{key} {field}");
                }
                assert_eq!(j["rates"][key]["of"].as_u64(), Some(n as u64));
            }
        };
        check(j, &op.counts);
        let points = j["trade_off"].as_array().unwrap();
        assert_eq!(points.len(), op.trade_off.len());
        for (p, t) in points.iter().zip(&op.trade_off) {
            assert_eq!(p["recheck_cap"].as_f64(), Some(t.recheck_cap));
            assert_eq!(p["threshold"].as_f64(), Some(t.threshold));
            assert_eq!(p["band"].as_f64(), Some(t.band));
            assert_eq!(
                p["chosen"].as_bool(),
                Some(t.threshold == op.threshold && t.band == op.band)
            );
            check(p, &t.counts);
        }
        assert!(points.iter().any(|p| p["chosen"] == true));
        assert_eq!(v["c_choice"]["chosen"].as_f64(), Some(1.0));
        assert_eq!(v["c_choice"]["rows"][0]["false_go"].as_u64(), Some(30));
        // The same report serialises to the same bytes.
        assert_eq!(crate::report::json(&r, None), crate::report::json(&r, None));
        // The chart sits in the operating point's section of the page.
        let page = crate::report::html(&fm, &r, None, &crate::report::document(&fm, &r, None));
        let chart = page.find("id=\"trade-off-chart\"").unwrap();
        assert!(page.find("<h2>Operating point</h2>").unwrap() < chart);
        assert!(chart < page.find("<h2>How C was chosen</h2>").unwrap());
    }

    #[test]
    fn a_point_off_the_table_is_said_to_be_off_it() {
        let op = choose(
            &held(),
            Target::FalseGo {
                rate: 0.05,
                confidence: 0.95,
            },
            1.0,
            "test scores".into(),
        )
        .unwrap();
        let mut rec = OperatingPointRecord::new(&op, 1e6);
        for t in &mut rec.trade_off {
            t.chosen = false;
        }
        let mut s = String::new();
        operating_point_markdown(&mut s, &rec, op.band);
        assert!(s.contains("- rule: false-GO target 5.00 %@95 %"), "{s}");
        assert!(s.contains("No row is the chosen point"), "{s}");
        assert!(!s.contains("**(chosen)**"));
        assert!(!s.contains("this audit uses"), "same band");
        let mut t = String::new();
        operating_point_markdown(&mut t, &rec, op.band + 0.5);
        assert!(t.contains(&format!(
            "this audit uses a RECHECK half-band of {} instead",
            score(op.band + 0.5)
        )));
    }

    #[test]
    fn a_model_without_one_keeps_its_report() {
        let (fm, ds) = model_and_log();
        assert!(fm.operating_point.is_none() && fm.provenance.c_choice.is_none());
        let r = report(&fm, &ds);
        let md = crate::report::markdown(&fm, &r, None);
        for part in [
            "Operating point",
            "How C was chosen",
            "Trade-off",
            "(chosen)",
        ] {
            assert!(!md.contains(part), "{part}");
        }
        let json = crate::report::json(&r, None);
        assert!(!json.contains("operating_point") && !json.contains("c_choice"));
        let page = crate::report::html(&fm, &r, None, &crate::report::document(&fm, &r, None));
        assert!(!page.contains("trade-off"));
    }

    #[test]
    fn scores_keep_six_significant_digits() {
        assert_eq!(score(0.0), "0");
        assert_eq!(score(-0.0), "0");
        assert_eq!(score(0.097_108_151_65), "0.0971082");
        assert_eq!(score(-0.033_894_4), "-0.0338944");
        assert_eq!(score(1_234.567_89), "1234.57");
        assert_eq!(score(0.000_105), "0.000105");
        assert_eq!(score(2.5e-7), "2.5e-7");
        assert_eq!(score(-3.0e9), "-3e9");
        assert_eq!(score(40.0), "40");
    }
}
