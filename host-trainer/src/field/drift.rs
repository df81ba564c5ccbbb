//! The drift test: a field log (or the device's field record) against the audit's baseline.
//! Four parts, each with its rule; any alarm makes the field out of control.
//!
//! - **Channels**: each channel's mean shift Δ (physical units), in units of its declared
//!   noise and of its allowed drift (the margin budget the audit left). Alarm when the shift
//!   is shown to use more than the budget: |Δ| − z·SE > allowed drift, SE the Welch standard
//!   error √(s_b²/n_b + s_f²/n_f), z the normal quantile 1 − α/(2c) over the c channels with
//!   a budget (Bonferroni). A device record keeps no spread: the baseline's is used. The
//!   budget figure is that shown shift (floored at 0) over the budget: above 1 alarms.
//! - **Scores**: the two-sample Kolmogorov–Smirnov test (`ks.rs`) of every scored unit's
//!   score (GO, NO-GO and RECHECK; the baseline's likewise); alarm at p < α. A record keeps
//!   the same units' scores by bin, so its D is a lower bound of the log's.
//! - **Rates**: RECHECK and FAULT among all units, shown with exact Clopper–Pearson
//!   intervals at 1 − α; alarm when Fisher's one-sided exact test (`fisher.rs`) of the
//!   field's rate being greater than the baseline's gives p < α.
//! - **CUSUM**: the tabular CUSUM of each side's margins (Page, 1954; Montgomery §9.1) as the
//!   device keeps it; alarm when a lower sum (margins shrinking: units walking towards the
//!   boundary) exceeds h. Upper sums (margins growing) are shown, and alarm only when asked
//!   (`two_sided`). A side whose baseline had fewer than two units has no limit and cannot
//!   alarm; the report says so.
//!
//! A field of no units is not tested: [`DriftReport::require_units`] is the error the
//! command line turns into exit 2.

use serde::Serialize;
use shared_model::FieldStats;
use shared_model::field::CusumState;
use statrs::distribution::{ContinuousCDF, Normal};

use crate::confidence::Rate;
use crate::field::fisher;
use crate::field::ks::{self, KsTest};
use crate::field::run::{ChartPoint, FieldRun};
use crate::release::audit_baseline::Baseline;

/// What the field was read from.
#[derive(Clone, Copy, Debug, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum Source {
    /// A log of readings, replayed through the blob's kernel.
    Log,
    /// The device's score lines.
    Lines,
    /// The device's field record.
    Record,
}

/// The p-value tests `alpha` is split over (Bonferroni): channels, scores, RECHECK rate,
/// FAULT rate. One drift check answers with one exit code, so its false-alarm rate is the
/// family's, not one test's.
pub const TESTS: u32 = 4;

/// The test's settings.
#[derive(Clone, Copy, Debug)]
pub struct DriftConfig {
    /// The family-wise level of the p-value tests: each of the [`TESTS`] (channels,
    /// scores, RECHECK rate, FAULT rate) runs at `alpha / TESTS` (Bonferroni), the channels
    /// further split over the channels, so that an in-control field alarms through any of
    /// them with probability at most `alpha`. The CUSUMs are judged by their own limits.
    pub alpha: f64,
    /// Alarm on the upper CUSUM sums too.
    pub two_sided: bool,
}

/// One channel's shift.
#[derive(Clone, Debug, Serialize)]
pub struct ChannelShift {
    /// Channel.
    pub channel: String,
    /// Physical unit.
    pub unit: String,
    /// Field values (decided units).
    pub field_units: u64,
    /// Baseline mean, physical units from raw (mean raw × lsb).
    pub baseline_mean: f64,
    /// Field mean, same units.
    pub field_mean: f64,
    /// Δ = field − baseline, physical units.
    pub shift: f64,
    /// Welch standard error of Δ, physical units.
    pub standard_error: f64,
    /// Δ in units of the declared noise (null without one).
    pub in_noise: Option<f64>,
    /// The shown shift over the allowed drift (the margin budget): above 1 alarms. Null
    /// without a budget, or with a zero one (`zero_budget`).
    pub of_budget: Option<f64>,
    /// max(0, |Δ| − z·SE): the least shift the field shows at the channel rule's level,
    /// physical units.
    pub shown_shift: f64,
    /// The allowed drift, physical units.
    pub budget: Option<f64>,
    /// The budget is zero: any shown shift alarms.
    pub zero_budget: bool,
    /// The shown shift exceeds the budget.
    pub alarm: bool,
}

/// A rate of the field against the baseline's.
#[derive(Clone, Debug, Serialize)]
pub struct RateShift {
    /// The field's rate with its interval.
    pub field: Rate,
    /// The baseline's.
    pub baseline: Rate,
    /// Fisher's one-sided exact p-value of the field's rate being greater than the
    /// baseline's (1 with no field units).
    pub p: f64,
    /// p < α.
    pub alarm: bool,
}

/// One side's CUSUM.
#[derive(Clone, Debug, Serialize)]
pub struct CusumSide {
    /// μ₀, k and h.
    pub target: i64,
    /// k.
    pub slack: i64,
    /// h.
    pub limit: i64,
    /// The final state (sums and first alarm units, 0 never).
    pub up: i64,
    /// Lower sum at the end.
    pub down: i64,
    /// Unit number of the upper sum's first alarm (0 none).
    pub alarm_up: u32,
    /// Unit number of the lower sum's first alarm (0 none).
    pub alarm_down: u32,
    /// This side raised an alarm under the rule.
    pub alarm: bool,
}

/// The whole test.
#[derive(Clone, Debug, Serialize)]
pub struct DriftReport {
    /// What the field was read from.
    pub source: Source,
    /// The field's files.
    pub files: Vec<String>,
    /// α, the family-wise level.
    pub alpha: f64,
    /// The level each p-value test runs at: α / [`TESTS`].
    pub test_alpha: f64,
    /// The upper CUSUM sums alarm too.
    pub two_sided: bool,
    /// The baseline's log and why.
    pub baseline_log: String,
    /// The rule that chose it.
    pub baseline_rule: String,
    /// Field units.
    pub units: u64,
    /// GO, NO-GO, RECHECK, FAULT counts.
    pub go: u64,
    /// NO-GO.
    pub nogo: u64,
    /// RECHECK.
    pub recheck: u64,
    /// FAULT.
    pub faults: u64,
    /// The record stopped counting at u32::MAX units.
    pub saturated: bool,
    /// Per channel (empty for device lines, which carry no values).
    pub channels: Vec<ChannelShift>,
    /// The Bonferroni z of the channel rule.
    pub channel_z: f64,
    /// The score distribution's test.
    pub ks: KsTest,
    /// The KS test's alarm.
    pub ks_alarm: bool,
    /// RECHECK among all units.
    pub recheck_rate: RateShift,
    /// FAULT among all units.
    pub fault_rate: RateShift,
    /// GO side.
    pub cusum_go: CusumSide,
    /// NO-GO side.
    pub cusum_nogo: CusumSide,
    /// Every alarm, one line each (empty: in control).
    pub alarms: Vec<String>,
    /// What the test could not do, and why.
    pub notes: Vec<String>,
    /// Each decided unit's CUSUM state (for the chart; not in the JSON).
    #[serde(skip)]
    pub chart: Vec<ChartPoint>,
    /// The field was counted in parts and merged (`field::run_part`): the same figures,
    /// but no per-unit CUSUM path, so no chart (not in the JSON, which is the single
    /// pass's byte for byte).
    #[serde(skip)]
    pub merged: bool,
}

/// Why a field could not be tested.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum DriftError {
    /// The field has no units (an empty log, every row skipped, lines with only the model
    /// line, or a record that counted none): nothing was tested.
    NoUnits,
}

impl std::fmt::Display for DriftError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Self::NoUnits => write!(
                f,
                "the field has no units: nothing to test (an empty log, every row skipped, device lines with only the model line, or a record that counted none); give a field with units"
            ),
        }
    }
}

impl std::error::Error for DriftError {}

impl DriftReport {
    /// No alarm (an empty field is never in control: it carries a "no units" alarm).
    pub fn in_control(&self) -> bool {
        self.alarms.is_empty()
    }

    /// The report is of a field with units.
    ///
    /// # Errors
    /// [`DriftError::NoUnits`]: the field has none, so no test ran (usage: exit 2).
    pub fn require_units(&self) -> Result<(), DriftError> {
        if self.units == 0 {
            Err(DriftError::NoUnits)
        } else {
            Ok(())
        }
    }
}

/// What the field gave.
pub enum Field<'a> {
    /// Units seen one by one (a log or device lines).
    Run(&'a FieldRun),
    /// The device's record.
    Record(&'a FieldStats),
}

/// Tests `field` against `base`.
pub fn drift(base: &Baseline, field: Field<'_>, source: Source, cfg: DriftConfig) -> DriftReport {
    let run_stats;
    let (stats, run) = match field {
        Field::Run(r) => {
            run_stats = r.stats();
            (&run_stats, Some(r))
        }
        Field::Record(s) => (s, None),
    };
    let mut notes = Vec::new();
    let mut alarms = Vec::new();
    let conf = 1.0 - cfg.alpha;
    let level = cfg.alpha / f64::from(TESTS);
    // Channels.
    let budgeted = base
        .channels
        .iter()
        .filter(|c| c.max_drift.is_some())
        .count();
    let z = Normal::new(0.0, 1.0).map_or(f64::NAN, |n| {
        n.inverse_cdf(1.0 - level / (2.0 * budgeted.max(1) as f64))
    });
    let mut channels = Vec::new();
    let values_known = run.is_none_or(FieldRun::has_values);
    if !values_known {
        notes.push("device lines carry no channel values: no channel shifts (give the log, or the device's field record)".into());
    } else if budgeted == 0 {
        notes.push("the audit declared no noise, so it left no drift budget: channel shifts are shown, none can alarm".into());
    }
    if run.is_none() && values_known {
        notes.push("a device record keeps each channel's sum, not its spread: the standard error uses the baseline's spread".into());
    }
    for (c, b) in base.channels.iter().enumerate() {
        let field = match run {
            Some(r) => r.channel(c),
            None => {
                let n = u64::from(stats.go) + u64::from(stats.nogo) + u64::from(stats.recheck);
                let sum = stats.sum.get(c).copied().unwrap_or(0);
                (n > 0).then(|| (n, sum as f64 / n as f64, b.sd))
            }
        };
        let Some((n, mean, sd)) = field else { continue };
        if n == 0 {
            continue;
        }
        let shift = (mean - b.mean) * b.lsb;
        let se = b.lsb * (b.sd * b.sd / b.count.max(1) as f64 + sd * sd / n as f64).sqrt();
        let shown = (shift.abs() - z * se).max(0.0);
        let alarm = b.max_drift.is_some_and(|d| shown > d);
        let zero_budget = b.max_drift == Some(0.0);
        if alarm {
            alarms.push(format!(
                "channel {}: mean shift {:+.4} {} (at least {:.4} at α/{TESTS} = {}, Bonferroni over {budgeted}) uses more than its allowed drift {:.4} {}",
                b.name,
                shift,
                b.unit,
                shown,
                level,
                b.max_drift.unwrap_or(0.0),
                b.unit
            ));
        }
        channels.push(ChannelShift {
            channel: b.name.clone(),
            unit: b.unit.clone(),
            field_units: n,
            baseline_mean: b.mean * b.lsb,
            field_mean: mean * b.lsb,
            shift,
            standard_error: se,
            in_noise: b.noise.filter(|n| *n > 0.0).map(|n| shift / n),
            of_budget: b.max_drift.filter(|d| *d > 0.0).map(|d| shown / d),
            shown_shift: shown,
            budget: b.max_drift,
            zero_budget,
            alarm,
        });
    }
    // Scores: every scored unit (GO, NO-GO, RECHECK) on every path, as the record bins them,
    // so that a record's binned D is a lower bound of the same log's exact D.
    let mut all = base.scores.clone();
    all.extend(&base.recheck_scores);
    all.sort_unstable();
    let ks = match run {
        Some(r) => ks::test(&all, &r.sorted_all_scores()),
        None => ks::binned_test(&ks::binned_counts(&all, stats), &ks::record_counts(stats)),
    };
    if ks.binned {
        notes.push("a device record keeps scores by bin: D is taken over the bin edges against the baseline's scored units binned alike, a lower bound of the D of the log it counted".into());
    }
    let ks_alarm = ks.m > 0 && ks.n > 0 && ks.p < level;
    if ks_alarm {
        alarms.push(format!(
            "scores: Kolmogorov–Smirnov D = {:.4}, p = {:.2e} < α/{TESTS} = {}",
            ks.d, ks.p, level
        ));
    }
    // Rates.
    let units = u64::from(stats.units);
    let rate = |what: &str, f: u64, b: u64, alarms: &mut Vec<String>| {
        let field = Rate::new(f, units, conf);
        let baseline = Rate::new(b, base.units, conf);
        let p = fisher::greater(f, units, b, base.units);
        let alarm = units > 0 && p < level;
        if alarm {
            alarms.push(format!(
                "{what} rate {f} of {units} = {:.2} % above the baseline's {b} of {} = {:.2} %: Fisher's exact test (one-sided) p = {p:.2e} < α/{TESTS} = {}",
                100.0 * field.rate,
                base.units,
                100.0 * baseline.rate,
                level
            ));
        }
        RateShift {
            field,
            baseline,
            p,
            alarm,
        }
    };
    let recheck_rate = rate("RECHECK", stats.recheck.into(), base.recheck, &mut alarms);
    let fault_rate = rate("FAULT", stats.faults.into(), base.faults, &mut alarms);
    // CUSUM.
    let side = |name: &str,
                s: &CusumState,
                p: &shared_model::field::CusumPlan,
                a: &mut Vec<String>| {
        let down = s.alarm_down != 0;
        let up = s.alarm_up != 0 && cfg.two_sided;
        if down {
            a.push(format!(
                "CUSUM of {name} margins: the lower sum passed h = {} at unit {} (margins shrinking towards the boundary)",
                p.limit, s.alarm_down
            ));
        }
        if up {
            a.push(format!(
                "CUSUM of {name} margins: the upper sum passed h = {} at unit {} (margins growing)",
                p.limit, s.alarm_up
            ));
        }
        CusumSide {
            target: p.target,
            slack: p.slack,
            limit: p.limit,
            up: s.up,
            down: s.down,
            alarm_up: s.alarm_up,
            alarm_down: s.alarm_down,
            alarm: down || up,
        }
    };
    let cusum_go = side("GO", &stats.cusum_go, &stats.plan.go, &mut alarms);
    let cusum_nogo = side("NO-GO", &stats.cusum_nogo, &stats.plan.nogo, &mut alarms);
    for (n, s) in [("GO", &cusum_go), ("NO-GO", &cusum_nogo)] {
        if !cfg.two_sided && s.alarm_up != 0 {
            notes.push(format!("CUSUM of {n} margins: the upper sum passed h at unit {} (margins grew away from the boundary): shown, not an alarm (--two-sided makes it one)", s.alarm_up));
        }
    }
    if stats.saturated {
        notes.push("the record stopped counting at 4,294,967,295 units".into());
    }
    for (n, p) in [("GO", &base.plan.go), ("NO-GO", &base.plan.nogo)] {
        if p.limit == i64::MAX {
            notes.push(format!(
                "CUSUM of {n} margins: no limit, the baseline had {} < 2 units on that side",
                p.units
            ));
        } else if p.units < crate::release::audit_baseline::ROUGH_SIGMA_UNITS {
            notes.push(format!("CUSUM of {n} margins: σ comes from {} baseline units (fewer than {}), so k and h are rough", p.units, crate::release::audit_baseline::ROUGH_SIGMA_UNITS));
        }
    }
    if units == 0 {
        // Never IN CONTROL: `require_units` is the error; this alarm keeps a caller that
        // does not ask from passing an empty field.
        alarms.push(DriftError::NoUnits.to_string());
    }
    DriftReport {
        source,
        files: Vec::new(),
        alpha: cfg.alpha,
        test_alpha: level,
        two_sided: cfg.two_sided,
        baseline_log: base.log.clone(),
        baseline_rule: base.rule.clone(),
        units,
        go: stats.go.into(),
        nogo: stats.nogo.into(),
        recheck: stats.recheck.into(),
        faults: stats.faults.into(),
        saturated: stats.saturated,
        channels,
        channel_z: z,
        ks,
        ks_alarm,
        recheck_rate,
        fault_rate,
        cusum_go,
        cusum_nogo,
        alarms,
        notes,
        chart: run.map(|r| r.chart.clone()).unwrap_or_default(),
        merged: run.is_some_and(|r| !r.charted()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::release::audit_baseline::{BaselineChannel, CusumRecord, PlanRecord};
    use shared_model::Thresholds;

    fn base() -> Baseline {
        let side = CusumRecord {
            units: 10,
            mean: 50.0,
            sd: 10.0,
            target: 50,
            slack: 5,
            limit: 50,
        };
        Baseline {
            log: "holdout".into(),
            rule: "test".into(),
            sha256: String::new(),
            nogo_max: -10,
            go_min: 10,
            units: 100,
            go: 50,
            nogo: 49,
            recheck: 1,
            faults: 0,
            scores: (0..99).map(|i| if i < 49 { -60 } else { 60 }).collect(),
            recheck_scores: vec![0],
            channels: vec![BaselineChannel {
                name: "a".into(),
                unit: "V".into(),
                lsb: 0.5,
                count: 100,
                mean: 100.0,
                sd: 10.0,
                min: 70,
                max: 130,
                noise: Some(1.0),
                max_drift: Some(2.0),
            }],
            plan: PlanRecord {
                blob_id: 1,
                origin: -100,
                shift: 3,
                go: side.clone(),
                nogo: side,
            },
        }
    }

    /// By hand: 100 units of value 120 (raw) against a mean of 100 (sd 10 over 100): the
    /// shift is 20 raw = 10 V, SE = 0.5·√(100/100 + 0) = 0.5 V, z = Φ⁻¹(1 − 0.01/4/2) ≈ 3.0233
    /// (the family-wise α over four tests, two-sided, one channel; scipy.stats.norm.ppf), so
    /// the shown shift 10 − 1.51 ≈ 8.49 V exceeds the 2 V budget (4.24 budgets); 10 noise units.
    /// The RECHECK rate 30 of 100 against 1 of 100 alarms too (Fisher p far below α); GO margins of 10 against μ₀ = 50, k = 5: C⁻ grows 35 a unit and passes
    /// h = 50 at the second GO unit (unit 5: units 1–3 are RECHECK).
    #[test]
    fn each_rule_worked_by_hand() {
        let b = base();
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        let mut run = FieldRun::new(b.plan.field_plan(), t, 1, 0, true);
        for i in 0..100 {
            let score = if i % 10 < 3 { 0 } else { 20 };
            run.decided(&t.decide(score), Some(&[120]));
        }
        let cfg = DriftConfig {
            alpha: 0.01,
            two_sided: false,
        };
        let r = drift(&b, Field::Run(&run), Source::Log, cfg);
        let c = &r.channels[0];
        assert!((c.shift - 10.0).abs() < 1e-12 && (c.standard_error - 0.5).abs() < 1e-12);
        assert_eq!(c.in_noise, Some(10.0));
        assert!((r.channel_z - 3.023341439739154).abs() < 1e-9);
        let shown = 10.0 - r.channel_z * 0.5;
        assert!((c.shown_shift - shown).abs() < 1e-12);
        assert!((c.of_budget.unwrap() - shown / 2.0).abs() < 1e-12);
        assert!(r.recheck_rate.p < 1e-6 && r.fault_rate.p == 1.0);
        // The report's row: shown shift, budget, shown ÷ budget.
        let md = crate::report::drift_markdown(&r, None);
        assert!(
            md.contains("| 10.00 | 8.4883 | 2.0000 | 4.24 | **ALARM** |"),
            "{md}"
        );
        assert!(c.alarm);
        assert!(r.recheck_rate.alarm && !r.fault_rate.alarm);
        assert_eq!(r.cusum_go.alarm_down, 5);
        assert!(r.cusum_go.alarm && !r.cusum_nogo.alarm);
        assert_eq!(r.alarms.len(), 3 + usize::from(r.ks_alarm));
        // The baseline's own scores and the baseline's mean: no KS and no channel alarm.
        let mut same = FieldRun::new(b.plan.field_plan(), t, 1, 0, true);
        for &s in b.scores.iter().chain(&b.recheck_scores) {
            same.decided(&t.decide(s), Some(&[100]));
        }
        let r = drift(&b, Field::Run(&same), Source::Log, cfg);
        assert!(!r.ks_alarm && r.ks.d == 0.0);
        assert!(!r.channels[0].alarm);
        assert_eq!(
            (r.channels[0].shown_shift, r.channels[0].of_budget),
            (0.0, Some(0.0))
        );
        assert!(r.in_control() && r.require_units().is_ok());
    }

    /// Every f64 of the JSON is a number (serde_json writes NaN and ∞ as null), for a field
    /// of no units, of one unit, and a record of one unit.
    fn numbers_only(r: &DriftReport) {
        let json = serde_json::to_string(r).unwrap();
        assert!(!json.contains("null"), "{json}");
    }

    /// An empty field is an error, never IN CONTROL; a field of one unit gives only numbers.
    #[test]
    fn empty_and_single_unit_fields() {
        let b = base();
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        let cfg = DriftConfig {
            alpha: 0.01,
            two_sided: false,
        };
        let empty = FieldRun::new(b.plan.field_plan(), t, 1, 0, true);
        let r = drift(&b, Field::Run(&empty), Source::Log, cfg);
        assert_eq!(r.require_units(), Err(DriftError::NoUnits));
        assert!(!r.in_control());
        numbers_only(&r);
        let r = drift(&b, Field::Record(&empty.stats()), Source::Record, cfg);
        assert_eq!(r.require_units(), Err(DriftError::NoUnits));
        numbers_only(&r);
        let mut one = FieldRun::new(b.plan.field_plan(), t, 1, 0, true);
        one.decided(&t.decide(60), Some(&[100]));
        for field in [Field::Run(&one), Field::Record(&one.stats())] {
            let r = drift(&b, field, Source::Log, cfg);
            assert!(r.require_units().is_ok());
            numbers_only(&r);
        }
    }

    /// A zero budget: no ratio, said as such, and any shown shift alarms.
    #[test]
    fn a_zero_budget_is_said_distinctly() {
        let mut b = base();
        b.channels[0].max_drift = Some(0.0);
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        let mut run = FieldRun::new(b.plan.field_plan(), t, 1, 0, true);
        for _ in 0..100 {
            run.decided(&t.decide(60), Some(&[120]));
        }
        let cfg = DriftConfig {
            alpha: 0.01,
            two_sided: false,
        };
        let r = drift(&b, Field::Run(&run), Source::Log, cfg);
        let c = &r.channels[0];
        assert!(c.zero_budget && c.of_budget.is_none() && c.alarm);
        let json = serde_json::to_value(c).unwrap();
        assert_eq!(json["zero_budget"], true);
        assert!(crate::report::drift_markdown(&r, None).contains("– (zero budget)"));
    }

    /// A side with fewer than two baseline units has no limit, and drift and the plan say
    /// so; a σ from fewer than 30 units is called rough.
    #[test]
    fn cusum_without_a_limit_is_said() {
        let mut b = base();
        b.plan.nogo.units = 1;
        b.plan.nogo.limit = i64::MAX;
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        let mut run = FieldRun::new(b.plan.field_plan(), t, 1, 0, true);
        run.decided(&t.decide(60), Some(&[100]));
        let cfg = DriftConfig {
            alpha: 0.01,
            two_sided: false,
        };
        let r = drift(&b, Field::Run(&run), Source::Log, cfg);
        let notes = r.notes.join("\n");
        assert!(
            notes.contains(
                "CUSUM of NO-GO margins: no limit, the baseline had 1 < 2 units on that side"
            ),
            "{notes}"
        );
        assert!(
            notes.contains("CUSUM of GO margins: σ comes from 10 baseline units"),
            "{notes}"
        );
        let a = crate::field::baseline::AuditBaseline {
            model_id: "m".into(),
            blob_id: "00000001".into(),
            baseline: b,
        };
        let plan = crate::field::baseline::plan_text(&a);
        assert!(
            plan.contains("CUSUM of NO-GO margins: no limit, the baseline had 1 < 2 units"),
            "{plan}"
        );
        assert!(
            plan.contains("CUSUM of GO margins: sd from 10 units (fewer than 30) is rough"),
            "{plan}"
        );
        assert!(plan.contains("at least 1 LSB"), "{plan}");
    }

    /// The Fisher rule where an interval rule misses: 19 of 400 against 5 of 400
    /// (p = 0.0029, scipy.stats.fisher_exact) alarms at the family-wise α = 0.02 (each test at
    /// α/4 = 0.005) though the 98 % intervals overlap, and not at α = 0.01 (α/4 = 0.0025).
    #[test]
    fn rates_alarm_by_fisher() {
        let mut b = base();
        (b.units, b.go, b.nogo, b.recheck) = (400, 200, 195, 5);
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        let mut run = FieldRun::new(b.plan.field_plan(), t, 1, 0, true);
        for i in 0..400 {
            run.decided(&t.decide(if i < 19 { 0 } else { 60 }), Some(&[100]));
        }
        let cfg = DriftConfig {
            alpha: 0.02,
            two_sided: false,
        };
        let r = drift(&b, Field::Run(&run), Source::Log, cfg);
        let x = &r.recheck_rate;
        assert!(x.field.low < x.baseline.high, "intervals overlap");
        assert!((x.p - 0.002926315735239587).abs() < 1e-12 && x.alarm);
        let r = drift(
            &b,
            Field::Run(&run),
            Source::Log,
            DriftConfig { alpha: 0.01, ..cfg },
        );
        assert!(!r.recheck_rate.alarm);
    }
}
