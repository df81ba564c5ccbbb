//! The release gates: what each audited log's counts are held to, and how a count becomes
//! a rate with its exact bounds.
//!
//! Each decision rate is counted among the units it can happen to: a false GO among the
//! log's NO-GO units, a false NO-GO among its GO units, a RECHECK and a FAULT among all of
//! them. Every rate carries its two-sided Clopper–Pearson interval and one-sided upper
//! bound ([`Rate`]); a limit can be a count, a rate, or an upper bound at a confidence
//! level ([`Limit::Upper`]), which is what "a rate at 95 % confidence" means.

use serde::Serialize;

use crate::confidence::{DEFAULT_CONFIDENCE, Rate, rate_text, units_needed};

/// A cap on a count of units in one log: at most `N` units, at most a share of the units
/// the count is taken among, or a share that the log must show at a confidence level.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub enum Limit {
    /// At most this many units.
    Count(usize),
    /// At most this fraction of the units the rate is counted among (0.01 is 1 %).
    Rate(f64),
    /// The one-sided Clopper–Pearson upper bound at `confidence` at most `rate`: the log
    /// must show, at that confidence, that the true rate is below the limit.
    Upper {
        /// The largest acceptable rate (0.01 is 1 %).
        rate: f64,
        /// The confidence of the bound (0.95 is 95 %).
        confidence: f64,
    },
}

impl Limit {
    /// Whether `n` of `units` is within the cap.
    ///
    /// ```
    /// use host_trainer::release::gates::Limit;
    /// assert!(Limit::Rate(0.01).allows(1, 100) && !Limit::Rate(0.01).allows(2, 100));
    /// assert!(Limit::Count(0).allows(0, 5) && !Limit::Count(0).allows(1, 5));
    /// // No failure in 299 units shows a rate below 1 % at 95 %; in 298 it does not.
    /// let upper = Limit::Upper { rate: 0.01, confidence: 0.95 };
    /// assert!(upper.allows(0, 299) && !upper.allows(0, 298));
    /// ```
    pub fn allows(self, n: usize, units: usize) -> bool {
        match self {
            Self::Count(c) => n <= c,
            // Compared in integers where possible: n / units <= r exactly as n <= r * units.
            Self::Rate(r) => n as f64 <= r * units as f64,
            Self::Upper { rate, confidence } => {
                Rate::new(n as u64, units as u64, confidence).upper <= rate
            }
        }
    }

    /// The confidence a gate with this limit states its bounds at.
    pub fn confidence(self) -> f64 {
        match self {
            Self::Upper { confidence, .. } => confidence,
            _ => DEFAULT_CONFIDENCE,
        }
    }

    /// The fewest units a log needs before this limit can hold at all (none wrong), when it
    /// is an upper bound; `None` for counts and plain rates, which any log can meet.
    pub fn units_needed(self) -> Option<u64> {
        match self {
            Self::Upper { rate, confidence } => units_needed(rate, confidence),
            _ => None,
        }
    }
}

impl std::fmt::Display for Limit {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        // A share as a person writes it: 0.1003 is "10.03", not 10.030000000000001.
        let pct = |v: f64| {
            let t = format!("{:.6}", v * 100.0);
            t.trim_end_matches('0').trim_end_matches('.').to_string()
        };
        match self {
            Self::Count(c) => write!(f, "{c}"),
            Self::Rate(r) => write!(f, "{}%", pct(*r)),
            Self::Upper { rate, confidence } => {
                write!(f, "{}% at {}% confidence", pct(*rate), pct(*confidence))
            }
        }
    }
}

impl std::str::FromStr for Limit {
    type Err = String;

    /// `"3"` is a count, `"1%"` or `"0.5%"` a rate, `"1%@95%"` a rate that the log's
    /// one-sided upper bound at 95 % confidence must not exceed.
    fn from_str(s: &str) -> Result<Self, String> {
        let t = s.trim();
        let percent = |p: &str| {
            p.trim()
                .strip_suffix('%')?
                .trim()
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite() && (0.0..=100.0).contains(v))
                .map(|v| v / 100.0)
        };
        if let Some((r, c)) = t.split_once('@') {
            let rate = percent(r).ok_or_else(|| {
                format!(
                    "'{s}': '{r}' is not a rate (use e.g. 1%@95%: at most 1 % at 95 % confidence)"
                )
            })?;
            let confidence = percent(c).filter(|c| *c > 0.0 && *c < 1.0).ok_or_else(|| {
                format!(
                    "'{s}': '{c}' is not a confidence level between 0% and 100% (use e.g. 1%@95%)"
                )
            })?;
            return Ok(Self::Upper { rate, confidence });
        }
        if t.ends_with('%') {
            return percent(t)
                .map(Self::Rate)
                .ok_or_else(|| format!("'{s}' is not a rate (use e.g. 1% or 0.5%)"));
        }
        t.parse::<usize>().map(Self::Count).map_err(|_| {
            format!("'{s}' is not a count, a rate or a bound (use e.g. 0, 3, 1% or 1%@95%)")
        })
    }
}

/// Gate thresholds. Every gate applies to every audited log on its own.
#[derive(Clone, Copy, Debug)]
pub struct AuditConfig {
    /// Smallest acceptable fixed margin over correctly decided units, in LSB.
    pub min_margin_lsb: f64,
    /// Largest acceptable number of decision flips versus the float model.
    pub max_flips: usize,
    /// Require the analytic guarantee.
    pub require_guarantee: bool,
    /// NO-GO units the device would pass (GO): the dangerous error. A rate is among the
    /// log's NO-GO units.
    pub max_false_go: Limit,
    /// GO units the device would turn away (NO-GO, or FAULT on a GO unit): lost yield. A
    /// rate is among the log's GO units.
    pub max_false_nogo: Limit,
    /// Units sent to retest (RECHECK): neither right nor wrong, but they cost a retest. A
    /// rate is among all the log's units.
    pub max_recheck: Limit,
    /// Where noise is declared, a unit whose GO/NO-GO verdict the noise could swap must be
    /// in the RECHECK band.
    pub noise_gate: bool,
}

impl Default for AuditConfig {
    /// The cautious defaults: no false GO at all, at most 1 % false NO-GO (of GO units) and
    /// 5 % RECHECK per log, margin at least 1 LSB, no flips, the rounding guarantee and the
    /// noise gate.
    fn default() -> Self {
        Self {
            min_margin_lsb: 1.0,
            max_flips: 0,
            require_guarantee: true,
            max_false_go: Limit::Count(0),
            max_false_nogo: Limit::Rate(0.01),
            max_recheck: Limit::Rate(0.05),
            noise_gate: true,
        }
    }
}

/// One gate on one log (or on all logs, for the model-wide gates).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Gate {
    /// What is gated: "false GO", "false NO-GO", "RECHECK", "flips", "min margin",
    /// "guarantee", "noise".
    pub gate: &'static str,
    /// The log it applies to, or "all".
    pub log: String,
    /// The measured value, as the report shows it.
    pub value: String,
    /// The limit it was held to, as the report shows it.
    pub limit: String,
    /// Whether it held.
    pub passed: bool,
    /// The measured number: a count of units, or a margin in LSB for "min margin" (`None`
    /// when no unit was decided).
    pub measured: Option<f64>,
    /// For the decision gates: the count as a rate among the units it can happen to, with
    /// its exact bounds at the gate's confidence.
    pub rate: Option<Rate>,
    /// For the decision gates: the limit as given (a count, a rate or an upper bound).
    pub rule: Option<Limit>,
    /// For a limit on an upper bound: the fewest units the log needs before it can hold at
    /// all; above the rate's `of`, the gate cannot pass on this log.
    pub units_needed: Option<u64>,
}

impl Gate {
    /// A gate on a plain count of `n`: no rate, no rule.
    fn plain(gate: &'static str, log: &str, n: usize, limit: String, passed: bool) -> Self {
        Self {
            gate,
            log: log.into(),
            value: n.to_string(),
            limit,
            passed,
            measured: Some(n as f64),
            rate: None,
            rule: None,
            units_needed: None,
        }
    }
}

/// What the gates read of one log's figures.
#[derive(Clone, Copy, Debug, Default)]
pub struct LogCounts<'a> {
    /// The log's name in the report ("train", "holdout", …).
    pub name: &'a str,
    /// Units.
    pub units: usize,
    /// Units labelled GO.
    pub go_units: usize,
    /// Units labelled NO-GO.
    pub nogo_units: usize,
    /// NO-GO units the device passes.
    pub false_go: usize,
    /// GO units the device turns away, FAULTs on GO units included.
    pub false_nogo: usize,
    /// RECHECK verdicts.
    pub recheck: usize,
    /// FAULTs.
    pub faults: usize,
    /// Units the declared noise could swap, outside the RECHECK band.
    pub noise_unsafe: usize,
    /// GO/NO-GO decisions that differ from the float model's.
    pub flips: usize,
    /// Correctly decided units within the rounding bound of the float threshold.
    pub within_bound: usize,
}

/// A log's decision rates, each among the units it can happen to, with exact bounds at
/// [`DEFAULT_CONFIDENCE`].
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, serde::Deserialize)]
pub struct SetRates {
    /// False GO among the log's NO-GO units.
    pub false_go: Rate,
    /// False NO-GO (FAULT on a GO unit included) among its GO units.
    pub false_nogo: Rate,
    /// RECHECK among all its units.
    pub recheck: Rate,
    /// FAULT among all its units.
    pub fault: Rate,
}

impl SetRates {
    /// The rates of a log's counts.
    pub fn of(s: &LogCounts<'_>) -> Self {
        let r = |k: usize, n: usize| Rate::new(k as u64, n as u64, DEFAULT_CONFIDENCE);
        Self {
            false_go: r(s.false_go, s.nogo_units),
            false_nogo: r(s.false_nogo, s.go_units),
            recheck: r(s.recheck, s.units),
            fault: r(s.faults, s.units),
        }
    }
}

/// Every gate: the decision gates on each log, then the model-wide ones.
pub(super) fn gates(
    sets: &[LogCounts<'_>],
    cfg: AuditConfig,
    noise_declared: bool,
    min_margin: f64,
    guaranteed: bool,
    bound: f64,
) -> Vec<Gate> {
    let mut out = Vec::new();
    for s in sets {
        for (gate, n, of, among, limit) in [
            (
                "false GO",
                s.false_go,
                s.nogo_units,
                "NO-GO units",
                cfg.max_false_go,
            ),
            (
                "false NO-GO",
                s.false_nogo,
                s.go_units,
                "GO units",
                cfg.max_false_nogo,
            ),
            ("RECHECK", s.recheck, s.units, "units", cfg.max_recheck),
        ] {
            let rate = Rate::new(n as u64, of as u64, limit.confidence());
            out.push(Gate {
                gate,
                log: s.name.into(),
                value: rate_text(&rate, among),
                limit: match limit {
                    Limit::Count(_) => limit.to_string(),
                    _ => format!("{limit} of {among}"),
                },
                passed: limit.allows(n, of),
                measured: Some(n as f64),
                rate: Some(rate),
                rule: Some(limit),
                units_needed: limit.units_needed(),
            });
        }
        if noise_declared && cfg.noise_gate {
            out.push(Gate {
                value: format!("{} of {}", s.noise_unsafe, s.units),
                ..Gate::plain(
                    "noise",
                    s.name,
                    s.noise_unsafe,
                    "0 outside the RECHECK band".into(),
                    s.noise_unsafe == 0,
                )
            });
        }
    }
    let flips: usize = sets.iter().map(|s| s.flips).sum();
    out.push(Gate::plain(
        "flips",
        "all",
        flips,
        cfg.max_flips.to_string(),
        flips <= cfg.max_flips,
    ));
    out.push(Gate {
        gate: "min margin",
        log: "all".into(),
        value: if min_margin.is_finite() {
            format!("{min_margin:.1} LSB")
        } else {
            "no decided unit".into()
        },
        limit: format!("{} LSB", cfg.min_margin_lsb),
        passed: !(min_margin.is_finite() && min_margin < cfg.min_margin_lsb),
        measured: min_margin.is_finite().then_some(min_margin),
        rate: None,
        rule: None,
        units_needed: None,
    });
    if cfg.require_guarantee {
        let n: usize = sets.iter().map(|s| s.within_bound).sum();
        out.push(Gate {
            value: format!("{n} decided units within the bound ({bound:.1} LSB)"),
            ..Gate::plain("guarantee", "all", n, "0".into(), guaranteed)
        });
    }
    out
}

/// The line a failed gate adds to the audit's reasons.
pub(super) fn reason(g: &Gate) -> String {
    match g.gate {
        "flips" => format!(
            "{} decision flips versus the float model (allowed: {})",
            g.value, g.limit
        ),
        "min margin" => format!(
            "smallest fixed margin {} is below the required {}",
            g.value, g.limit
        ),
        "guarantee" => format!("not guaranteed: {}", g.value),
        "noise" => format!(
            "{}: {} units could swap GO/NO-GO within the declared noise (widen --recheck-band, e.g. --apply-suggested-band)",
            g.log, g.value
        ),
        _ => {
            let mut t = format!("{}: {} {} (allowed: {})", g.log, g.gate, g.value, g.limit);
            if let (Some(need), Some(r)) = (g.units_needed, g.rate)
                && need > r.of
            {
                t.push_str(&format!(
                    "; the log has {} such units, and a log needs at least {need} before this bound can hold even with none wrong",
                    r.of
                ));
            }
            t
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn limits_parse_as_counts_rates_and_bounds() {
        assert_eq!("3".parse::<Limit>(), Ok(Limit::Count(3)));
        assert_eq!("0.5%".parse::<Limit>(), Ok(Limit::Rate(0.005)));
        assert_eq!(
            "1%@95%".parse::<Limit>(),
            Ok(Limit::Upper {
                rate: 0.01,
                confidence: 0.95
            })
        );
        for bad in ["1@95%", "1%@95", "1%@100%", "1%@0%", "x%@95%", "-1%", "1%@"] {
            assert!(bad.parse::<Limit>().is_err(), "{bad}");
        }
    }

    #[test]
    fn a_log_too_small_for_its_bound_says_how_many_units_it_needs() {
        let s = LogCounts {
            name: "holdout",
            units: 300,
            go_units: 129,
            nogo_units: 171,
            ..Default::default()
        };
        let cfg = AuditConfig {
            max_false_go: "1%@95%".parse().unwrap(),
            ..AuditConfig::default()
        };
        let g = gates(&[s], cfg, false, 10.0, true, 1.0);
        let fg = &g[0];
        assert_eq!(fg.gate, "false GO");
        // No false GO in 171 NO-GO units: the bound is 1.74 %, above 1 %: the gate fails.
        assert!(!fg.passed);
        assert_eq!(fg.units_needed, Some(299));
        assert!(reason(fg).contains("at least 299"), "{}", reason(fg));
    }
}
