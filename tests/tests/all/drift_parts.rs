//! Drift counted in parts (`host_trainer::field::run_part`) against an outside reference:
//! `tests/verify/drift_parts.py` recomputes, in one plain pass with Python's integers, every
//! count, score bin and both sides' tabular CUSUM (Page, 1954; Montgomery §9.1: final sums
//! and first-alarm units) of seeded field logs that Linegate counted in 1–8 parts and merged
//! (left to right and right to left, which must agree).

use host_trainer::field::run_part::RunPart;
use serde_json::{Value, json};
use shared_model::field::CusumPlan;
use shared_model::{FieldFault, FieldPlan, Thresholds};

const WHAT: &str =
    "drift counted in parts against a plain CUSUM pass (tests/verify/drift_parts.py)";

/// A small seeded generator (SplitMix64), so the cases are the same on every run.
struct Mix(u64);

impl Mix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// A whole number in `lo..hi`.
    fn range(&mut self, lo: i64, hi: i64) -> i64 {
        lo + (self.next() % (hi - lo) as u64) as i64
    }
}

fn side(r: &mut Mix) -> CusumPlan {
    CusumPlan {
        target: r.range(-40, 60),
        slack: r.range(0, 25),
        limit: r.range(1, 300),
    }
}

#[test]
fn merged_parts_against_a_plain_cusum_pass() {
    let mut r = Mix(34);
    let mut cases = Vec::new();
    for _ in 0..300 {
        let plan = FieldPlan {
            blob_id: 1,
            origin: r.range(-200, 0),
            shift: r.range(0, 5) as u8,
            go: side(&mut r),
            nogo: side(&mut r),
        };
        let t = Thresholds {
            nogo_max: r.range(-30, 0),
            go_min: r.range(1, 30),
        };
        // A drift now and then: the scores' centre moves at a random unit.
        let n = r.range(0, 300) as usize;
        let turn = r.range(0, 300) as usize;
        let lift = r.range(-60, 60);
        let units: Vec<Option<i64>> = (0..n)
            .map(|i| {
                (r.range(0, 10) != 0).then(|| r.range(-120, 120) + if i >= turn { lift } else { 0 })
            })
            .collect();
        let mut cuts: Vec<usize> = (0..r.range(0, 8))
            .map(|_| r.range(0, n as i64 + 1) as usize)
            .collect();
        cuts.sort_unstable();
        let mut parts = Vec::new();
        let mut from = 0;
        for &to in cuts.iter().chain(std::iter::once(&n)) {
            let mut p = RunPart::new(plan, t, 0, 0, false);
            for u in &units[from..to] {
                match u {
                    Some(s) => p.decided(&t.decide(*s), None),
                    None => p.faulted(FieldFault::Other),
                }
            }
            parts.push(p);
            from = to;
        }
        let left = parts[1..]
            .iter()
            .fold(parts[0].clone(), |a, p| RunPart::merge(&a, p).unwrap());
        let right = parts[..parts.len() - 1]
            .iter()
            .rev()
            .fold(parts[parts.len() - 1].clone(), |a, p| {
                RunPart::merge(p, &a).unwrap()
            });
        assert_eq!(left, right, "merge order changed the part");
        let s = left.stats().unwrap();
        let c = |c: shared_model::field::CusumState| json!({"up": c.up, "down": c.down, "alarm_up": c.alarm_up, "alarm_down": c.alarm_down});
        let p = |c: CusumPlan| json!({"target": c.target, "slack": c.slack, "limit": c.limit});
        let units: Vec<Value> = units
            .iter()
            .map(|u| match u {
                Some(s) => json!({ "score": s }),
                None => json!({ "fault": true }),
            })
            .collect();
        cases.push(json!({
            "plan": {"go": p(plan.go), "nogo": p(plan.nogo)},
            "thresholds": {"nogo_max": t.nogo_max, "go_min": t.go_min},
            "origin": plan.origin,
            "shift": plan.shift,
            "units": units,
            "cuts": cuts,
            "merged": {
                "units": s.units, "go": s.go, "nogo": s.nogo, "recheck": s.recheck,
                "faults": s.faults, "below": s.below, "above": s.above, "bins": s.bins.to_vec(),
                "cusum_go": c(s.cusum_go), "cusum_nogo": c(s.cusum_nogo),
            },
        }));
    }
    let tmp = tempfile::tempdir().unwrap();
    let path = tmp.path().join("cases.json");
    std::fs::write(&path, serde_json::to_string(&cases).unwrap()).unwrap();
    let Some((code, text)) =
        crate::python_check(WHAT, "drift_parts.py", &[path.as_os_str()], tmp.path())
    else {
        return;
    };
    eprintln!("{text}");
    assert_eq!(
        code,
        Some(0),
        "the merged parts disagree with the reference:\n{text}"
    );
    // The cases must exercise what they check: first alarms, some after a cut.
    let after_cut: u64 = text
        .split(" after a cut")
        .next()
        .and_then(|s| s.rsplit('(').next())
        .and_then(|s| s.trim().parse().ok())
        .unwrap_or(0);
    assert!(after_cut >= 20, "too few alarms after a cut: {text}");
}
