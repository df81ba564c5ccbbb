//! The audit's exact binomial bounds against general-purpose libraries: scipy's beta
//! quantiles and binomial CDF, statsmodels' `proportion_confint(method="beta")`
//! (`tests/verify/confidence.py`, no shared code), over counts from k = 0 to k = n, logs
//! from 1 to 2,000,000 units and three confidence levels.

use std::io::Write as _;
use std::process::Command;

use host_trainer::confidence::{Rate, units_needed};

#[test]
fn clopper_pearson_bounds_agree_with_scipy_and_statsmodels() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("rates.jsonl");
    let mut out = std::io::BufWriter::new(std::fs::File::create(&path).unwrap());
    let mut cases = 0;
    let needed_rates = [0.1, 0.01, 0.001, 0.0001];
    for conf in [0.9, 0.95, 0.99] {
        for n in [1u64, 2, 3, 10, 30, 54, 171, 1000, 65_537, 2_000_000] {
            // Every count of small logs; the ends, the small counts and a spread of the
            // large ones elsewhere (a false GO count is small, a RECHECK count is not).
            let ks: Vec<u64> = if n <= 54 {
                (0..=n).collect()
            } else {
                [0, 1, 2, 3, 7, n / 100, n / 10, n / 3, n / 2, n - 1, n].to_vec()
            };
            for k in ks {
                let r = Rate::new(k, n, conf);
                let nr = needed_rates[cases % needed_rates.len()];
                let case = serde_json::json!({
                    "k": k, "n": n, "confidence": conf,
                    "low": r.low, "high": r.high, "upper": r.upper,
                    "needed_rate": nr, "needed": units_needed(nr, conf),
                });
                writeln!(out, "{case}").unwrap();
                cases += 1;
            }
        }
    }
    out.flush().unwrap();
    drop(out);
    let script = crate::root().join("tests/verify/confidence.py");
    let o = match Command::new("python3").arg(&script).arg(&path).output() {
        Ok(o) => o,
        Err(e) => {
            return crate::skip_or_fail("exact binomial bounds against scipy", &e.to_string());
        }
    };
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    match o.status.code() {
        Some(3) => crate::skip_or_fail("exact binomial bounds against scipy", &text),
        Some(0) => {
            assert!(
                text.contains(&format!("{cases} cases, 0 disagreeing")),
                "{text}"
            );
            println!("{}", text.trim());
        }
        _ => panic!("the bounds disagree with scipy/statsmodels:\n{text}"),
    }
}
