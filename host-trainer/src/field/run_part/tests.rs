//! The parts' merge against the single pass. The reference is the device's own accumulator,
//! `shared_model::FieldStats` (the record the firmware keeps, stepped unit by unit with its
//! saturating CUSUM), with the scores and exact channel moments kept beside it in unit order.

use super::*;
use crate::field::drift::{DriftConfig, Field, Source, drift};
use crate::field::run::FieldRun;
use crate::release::audit_baseline::{Baseline, BaselineChannel, CusumRecord, PlanRecord};
use proptest::prelude::*;

/// One unit as a test feeds it.
#[derive(Clone, Debug)]
enum In {
    /// A decided unit's score, with values when the log has them.
    Decided(i64, Option<Vec<i32>>),
    /// A FAULT.
    Fault(FieldFault),
}

const T: Thresholds = Thresholds {
    nogo_max: -10,
    go_min: 10,
};

/// The single pass as the device and the pre-part desk counted it.
struct Reference {
    stats: FieldStats,
    scores: Vec<i64>,
    moments: Vec<Moments>,
}

fn reference(
    plan: FieldPlan,
    t: Thresholds,
    channels: usize,
    signals: usize,
    units: &[In],
) -> Reference {
    let mut r = Reference {
        stats: FieldStats::new(plan, channels, signals),
        scores: Vec::new(),
        moments: vec![Moments::default(); channels],
    };
    for u in units {
        match u {
            In::Decided(score, values) => {
                let d = t.decide(*score);
                r.stats.decided(&t, &d, values.as_deref().unwrap_or(&[]));
                r.scores.push(*score);
                for (m, &x) in r.moments.iter_mut().zip(values.iter().flatten()) {
                    m.push(x);
                }
            }
            In::Fault(f) => r.stats.faulted(*f),
        }
    }
    r
}

fn feed(part: &mut RunPart, t: Thresholds, units: &[In]) {
    for u in units {
        match u {
            In::Decided(score, values) => part.decided(&t.decide(*score), values.as_deref()),
            In::Fault(f) => part.faulted(*f),
        }
    }
}

fn feed_run(run: &mut FieldRun, t: Thresholds, units: &[In]) {
    for u in units {
        match u {
            In::Decided(score, values) => run.decided(&t.decide(*score), values.as_deref()),
            In::Fault(f) => run.faulted(*f),
        }
    }
}

/// Parts merged by a tree whose splits `choices` pick (cycled), the parts in order.
fn merge_tree(parts: &[RunPart], choices: &[usize], at: &mut usize) -> RunPart {
    if parts.len() == 1 {
        return parts[0].clone();
    }
    let c = choices
        .get(*at % choices.len().max(1))
        .copied()
        .unwrap_or(0);
    *at += 1;
    let split = 1 + c % (parts.len() - 1);
    let left = merge_tree(&parts[..split], choices, at);
    let right = merge_tree(&parts[split..], choices, at);
    RunPart::merge(&left, &right).unwrap()
}

/// Through postcard and back, as the parts travel between processes.
fn through_postcard(p: &RunPart) -> RunPart {
    let mut buf = vec![0u8; 1 << 20];
    let bytes = postcard::to_slice(p, &mut buf).unwrap();
    let back: RunPart = postcard::from_bytes(bytes).unwrap();
    back.check().unwrap();
    back
}

fn baseline(plan: FieldPlan, channels: usize) -> Baseline {
    let side = |p: CusumPlan| CusumRecord {
        units: 10,
        mean: p.target as f64,
        sd: 10.0,
        target: p.target,
        slack: p.slack,
        limit: p.limit,
    };
    Baseline {
        log: "holdout".into(),
        rule: "test".into(),
        sha256: String::new(),
        nogo_max: T.nogo_max,
        go_min: T.go_min,
        units: 100,
        go: 50,
        nogo: 45,
        recheck: 3,
        faults: 2,
        scores: (0..95)
            .map(|i| if i < 45 { -60 + i } else { i - 20 })
            .collect(),
        recheck_scores: vec![0, 3, -4],
        channels: (0..channels)
            .map(|c| BaselineChannel {
                name: format!("c{c}"),
                unit: "V".into(),
                lsb: 0.5,
                count: 98,
                mean: 10.0 * c as f64,
                sd: 7.0,
                min: -100,
                max: 100,
                noise: Some(1.0),
                max_drift: (c % 2 == 0).then_some(2.0),
            })
            .collect(),
        plan: PlanRecord {
            blob_id: plan.blob_id,
            origin: plan.origin,
            shift: plan.shift,
            go: side(plan.go),
            nogo: side(plan.nogo),
        },
    }
}

/// Every figure `drift` reads: the record's statistics, the scores, the channels' moments,
/// whether values were kept.
fn assert_same(run: &FieldRun, r: &Reference, what: &str) {
    assert_eq!(run.stats(), r.stats, "{what}: statistics");
    assert_eq!(run.all_scores(), r.scores.as_slice(), "{what}: scores");
    let mut sorted = r.scores.clone();
    sorted.sort_unstable();
    assert_eq!(run.sorted_all_scores(), sorted, "{what}: sorted scores");
    for (c, m) in r.moments.iter().enumerate() {
        assert_eq!(run.part().channel[c].moments, *m, "{what}: channel {c}");
        let want = run.has_values().then(|| (m.n, m.mean(), m.sd()));
        let got = run.channel(c);
        assert_eq!(
            got.map(|(n, a, b)| (n, a.to_bits(), b.to_bits())),
            want.map(|(n, a, b)| (n, a.to_bits(), b.to_bits())),
            "{what}: channel {c} figures"
        );
    }
}

fn cusum_plan() -> impl Strategy<Value = CusumPlan> {
    let limit = prop_oneof![-3i64..120, 120i64..4000];
    let small = (-60i64..60, -5i64..30, limit).prop_map(|(target, slack, limit)| CusumPlan {
        target,
        slack,
        limit,
    });
    let edge = (
        prop::sample::select(vec![i64::MIN, -1, 0, 1, i64::MAX]),
        prop::sample::select(vec![i64::MIN, -1, 0, 5, i64::MAX]),
        prop::sample::select(vec![i64::MIN, 0, 50, i64::MAX - 1, i64::MAX]),
    )
        .prop_map(|(target, slack, limit)| CusumPlan {
            target,
            slack,
            limit,
        });
    prop_oneof![6 => small, 1 => edge]
}

fn plan() -> impl Strategy<Value = FieldPlan> {
    (
        any::<u32>(),
        prop_oneof![4 => -300i64..300, 1 => Just(i64::MIN), 1 => Just(i64::MAX)],
        prop_oneof![4 => 0u8..8, 1 => 60u8..=255],
        cusum_plan(),
        cusum_plan(),
    )
        .prop_map(|(blob_id, origin, shift, go, nogo)| FieldPlan {
            blob_id,
            origin,
            shift,
            go,
            nogo,
        })
}

/// Scores near the thresholds; in a `wild` log, now and then the ends of i64 (the saturating
/// steps).
fn score(wild: bool) -> impl Strategy<Value = i64> {
    let w = u32::from(wild);
    prop_oneof![
        40 => -150i64..150,
        w => Just(i64::MIN),
        w => Just(i64::MAX),
        w => any::<i64>(),
    ]
}

fn units(
    channels: usize,
    signals: usize,
    values: bool,
    wild: bool,
) -> impl Strategy<Value = Vec<In>> {
    let w = u32::from(wild);
    let value = prop_oneof![40 => -1000i32..1000, w => Just(i32::MIN), w => Just(i32::MAX)];
    let decided = (score(wild), prop::collection::vec(value, channels))
        .prop_map(move |(s, v)| In::Decided(s, values.then_some(v)));
    let fault = prop_oneof![
        (0..=channels as u8).prop_map(FieldFault::Channel),
        (0..=signals as u8).prop_map(FieldFault::Signal),
        Just(FieldFault::Other),
    ]
    .prop_map(In::Fault);
    prop::collection::vec(prop_oneof![9 => decided, 1 => fault], 0..160)
}

/// A log, its plan, and cuts into 1..8 consecutive parts (empty parts allowed).
fn case() -> impl Strategy<
    Value = (
        FieldPlan,
        usize,
        usize,
        bool,
        Vec<In>,
        Vec<usize>,
        Vec<usize>,
    ),
> {
    let wild = prop::bool::weighted(0.25);
    (plan(), 0usize..4, 0usize..3, any::<bool>(), wild).prop_flat_map(
        |(plan, ch, sig, values, wild)| {
            (
                Just(plan),
                Just(ch),
                Just(sig),
                Just(values),
                units(ch, sig, values, wild),
                prop::collection::vec(any::<usize>(), 0..7),
                prop::collection::vec(any::<usize>(), 1..16),
            )
        },
    )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(1000))]

    /// Any cut into consecutive parts, any merge tree: the merged part gives the single
    /// pass's statistics (every count, bin, channel figure, FAULT kind, both sides' sums and
    /// first alarms), scores and moments, and the drift report's JSON byte for byte; the
    /// parts survive postcard; every tree gives the same part.
    #[test]
    fn any_cut_and_any_tree_gives_the_single_pass(
        (plan, channels, signals, values, log, cuts, choices) in case()
    ) {
        let want = reference(plan, T, channels, signals, &log);
        let mut single = FieldRun::new(plan, T, channels, signals, values);
        feed_run(&mut single, T, &log);
        assert_same(&single, &want, "single pass");
        // The chart's last point of each side is the record's state.
        for (go, state) in [(true, want.stats.cusum_go), (false, want.stats.cusum_nogo)] {
            if let Some(p) = single.chart.iter().rev().find(|p| p.go == go) {
                prop_assert_eq!((p.up, p.down), (state.up, state.down));
            }
        }
        let mut at: Vec<usize> = cuts.iter().map(|c| c % (log.len() + 1)).collect();
        at.sort_unstable();
        let mut parts = Vec::new();
        let mut from = 0;
        for &to in at.iter().chain(std::iter::once(&log.len())) {
            let mut p = RunPart::new(plan, T, channels, signals, values);
            feed(&mut p, T, &log[from..to]);
            parts.push(through_postcard(&p));
            from = to;
        }
        let left_fold = parts
            .iter()
            .skip(1)
            .fold(parts[0].clone(), |acc, p| RunPart::merge(&acc, p).unwrap());
        let tree = merge_tree(&parts, &choices, &mut 0);
        prop_assert_eq!(&tree, &left_fold);
        prop_assert_eq!(&tree, single.part());
        let merged = FieldRun::from_part(through_postcard(&tree)).unwrap();
        assert_same(&merged, &want, "merged");
        prop_assert!(merged.chart.is_empty() && !merged.charted());
        let base = baseline(plan, channels);
        for two_sided in [false, true] {
            let cfg = DriftConfig { alpha: 0.01, two_sided };
            let a = drift(&base, Field::Run(&single), Source::Log, cfg);
            let b = drift(&base, Field::Run(&merged), Source::Log, cfg);
            prop_assert_eq!(
                serde_json::to_string(&a).unwrap(),
                serde_json::to_string(&b).unwrap()
            );
            prop_assert!(b.merged && !a.merged);
        }
    }
}

fn plan_of(go: CusumPlan) -> FieldPlan {
    FieldPlan {
        blob_id: 7,
        origin: -100,
        shift: 3,
        go,
        nogo: go,
    }
}

/// By hand, one alarm across a part boundary: GO margins (score − 10) 50, 40, 20, 10 against
/// μ₀ = 50, k = 5, h = 40: C⁻ reads 0, 5, 30, 65 (> 40 at the fourth GO unit). With a
/// RECHECK (unit 3) and a FAULT (unit 5) between them the GO units are units 1, 2, 4, 6, and
/// the alarm is at unit 6. Cut after unit 4: the first part leaves C⁻ = 30 and no alarm; the
/// second (a FAULT, then margin 10: C⁻ + 50 − 10 − 5) alarms at its unit 2 from an entering
/// C⁻ of 6 (C + 35 > 40), so merged from 0 the alarm is unit 2 of the second part = unit 6.
#[test]
fn an_alarm_across_a_boundary_worked_by_hand() {
    let p = plan_of(CusumPlan {
        target: 50,
        slack: 5,
        limit: 40,
    });
    let log = [
        In::Decided(60, Some(vec![1])),
        In::Decided(50, Some(vec![2])),
        In::Decided(0, Some(vec![3])),
        In::Decided(30, Some(vec![4])),
        In::Fault(FieldFault::Channel(0)),
        In::Decided(20, Some(vec![5])),
    ];
    let mut a = RunPart::new(p, T, 1, 0, true);
    feed(&mut a, T, &log[..4]);
    let mut b = RunPart::new(p, T, 1, 0, true);
    feed(&mut b, T, &log[4..]);
    assert_eq!(a.stats().unwrap().cusum_go.down, 30);
    assert_eq!(a.stats().unwrap().cusum_go.alarm_down, 0);
    assert_eq!(
        b.cusum_go.down.records,
        vec![crate::field::cusum_part::AlarmRecord { from: 6, unit: 2 }]
    );
    let m = RunPart::merge(&a, &b).unwrap();
    let s = m.stats().unwrap();
    assert_eq!((s.cusum_go.down, s.cusum_go.alarm_down), (65, 6));
    assert_eq!(
        (s.units, s.go, s.recheck, s.faults, s.channel_faults[0]),
        (6, 4, 1, 1, 1)
    );
    assert_eq!(s.sum[0], 15);
    assert_eq!(s, reference(p, T, 1, 0, &log).stats);
    // The drift test over the merged run: the same alarm, no chart.
    let r = drift(
        &baseline(p, 1),
        Field::Run(&FieldRun::from_part(m).unwrap()),
        Source::Log,
        DriftConfig {
            alpha: 0.01,
            two_sided: false,
        },
    );
    assert_eq!(r.cusum_go.alarm_down, 6);
    assert!(r.merged && r.chart.is_empty());
}

/// Merging with an empty part changes nothing, either side.
#[test]
fn an_empty_part_is_the_identity() {
    let p = plan_of(CusumPlan {
        target: 0,
        slack: 1,
        limit: 3,
    });
    let mut a = RunPart::new(p, T, 2, 1, true);
    feed(
        &mut a,
        T,
        &[
            In::Decided(40, Some(vec![1, 2])),
            In::Fault(FieldFault::Other),
            In::Decided(-40, Some(vec![3, 4])),
        ],
    );
    let e = RunPart::new(p, T, 2, 1, true);
    assert_eq!(RunPart::merge(&e, &a).unwrap(), a);
    assert_eq!(RunPart::merge(&a, &e).unwrap(), a);
}

/// Parts of different settings are refused, naming what differs; a part whose counts were
/// changed is refused as unsound.
#[test]
fn parts_of_other_settings_or_changed_parts_are_refused() {
    let p = plan_of(CusumPlan {
        target: 0,
        slack: 1,
        limit: 3,
    });
    let a = RunPart::new(p, T, 2, 1, true);
    let other_plan = RunPart::new(FieldPlan { origin: 0, ..p }, T, 2, 1, true);
    let no_values = RunPart::new(p, T, 2, 1, false);
    let other_t = RunPart::new(
        p,
        Thresholds {
            nogo_max: -11,
            go_min: 10,
        },
        2,
        1,
        true,
    );
    assert_eq!(
        RunPart::merge(&a, &other_plan),
        Err(RunPartError::Settings("plans"))
    );
    assert_eq!(
        RunPart::merge(&a, &other_t),
        Err(RunPartError::Settings("thresholds"))
    );
    assert!(
        RunPart::merge(&a, &no_values)
            .unwrap_err()
            .to_string()
            .contains("channel values")
    );
    let mut changed = a.clone();
    changed.go = 1;
    assert!(matches!(
        RunPart::merge(&a, &changed),
        Err(RunPartError::Unsound(_))
    ));
    assert!(changed.stats().is_err());
    let mut c = a.clone();
    c.channel[0].moments.sum = 1;
    assert!(matches!(c.check(), Err(RunPartError::Unsound(_))));
    let mut b = a.clone();
    b.cusum_go.up.map.lo = -1;
    assert!(matches!(b.check(), Err(RunPartError::Unsound(_))));
}

/// The record's unit limit: a part of exactly u32::MAX units converts (not saturated); one
/// unit more is refused with the limit named, never turned into a different record.
#[test]
fn the_unit_limit_is_refused_not_crossed() {
    let p = plan_of(CusumPlan::default());
    let mut full = RunPart::new(p, T, 1, 0, true);
    (full.units, full.faults, full.other_faults) =
        (u32::MAX.into(), u32::MAX.into(), u32::MAX.into());
    let s = full.stats().unwrap();
    assert_eq!((s.units, s.saturated), (u32::MAX, false));
    let mut one = RunPart::new(p, T, 1, 0, true);
    one.faulted(FieldFault::Other);
    let over = RunPart::merge(&full, &one).unwrap();
    let e = over.stats().unwrap_err();
    assert_eq!(e, RunPartError::TooManyUnits { units: 1 << 32 });
    assert!(e.to_string().contains("4,294,967,295"));
    assert!(FieldRun::from_part(over).is_err());
}
