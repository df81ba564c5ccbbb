//! The gates a release uses when its flags leave them out: the model's operating point
//! (chosen by `train` on held-out units) sets the RECHECK band and the decision gates, each
//! stated in a sentence the audit prints; without one, the fixed defaults.

use crate::confidence::Rate;
use crate::release::gates::Limit;
use crate::release::point_record::HeldOutRates;
use crate::train::float_model::FloatModel;
use crate::train::operating_point::Target;

/// The gates and band a release flag gave: `None` where the flag was left out.
#[derive(Clone, Copy, Debug, Default)]
pub struct GivenGates {
    /// `--max-false-go`.
    pub max_false_go: Option<Limit>,
    /// `--max-false-nogo`.
    pub max_false_nogo: Option<Limit>,
    /// `--max-recheck`.
    pub max_recheck: Option<Limit>,
    /// `--recheck-band`.
    pub recheck_band: Option<f64>,
}

/// The RECHECK band a release uses: the flag's, else the model's operating point's, else 0.
pub fn recheck_band(given: &GivenGates, fm: &FloatModel) -> f64 {
    match (given.recheck_band, &fm.operating_point) {
        (Some(b), _) => b,
        (None, Some(op)) => op.band,
        (None, None) => 0.0,
    }
}

/// The false-GO, false-NO-GO and RECHECK gates (in that order): the flags', else what the
/// model's operating point sets, else 0 false GO, 1 % and 5 %; with a sentence for each
/// setting taken from the model (`band` is the band in use, stated when it is the model's).
pub fn model_gates(
    given: &GivenGates,
    fm: &FloatModel,
    band: f64,
) -> ((Limit, Limit, Limit), Vec<String>) {
    let mut said = Vec::new();
    let op = fm.operating_point.as_ref();
    // The held-out rates the model's point was chosen on, as the report states them.
    let rates = op.map(|op| HeldOutRates::new(&op.counts, op));
    // Rounded up to 0.01 %: a gate that reads cleanly and is never below the bound.
    let up = |r: f64| (r * 1e4).ceil() / 1e4;
    if let (None, Some(op)) = (given.recheck_band, op) {
        said.push(format!(
            "RECHECK band ±{band} (model score units), chosen on {}",
            op.source
        ));
    }
    let fg = match (given.max_false_go, op.zip(rates.as_ref())) {
        (Some(l), _) => l,
        (None, None) => Limit::Count(0),
        (None, Some((op, rates))) => {
            let l = match op.target {
                Target::FalseGo { rate, confidence } => Limit::Upper { rate, confidence },
                Target::RecheckBudget { .. } => Limit::Rate(up(rates.false_go.upper)),
            };
            said.push(format!(
                "false-GO gate {l} of each log's NO-GO units ({}: {} false GO among {} held-out NO-GO units); --max-false-go sets another",
                match op.target {
                    Target::FalseGo { .. } => "the target train met",
                    Target::RecheckBudget { .. } => "the 95 % upper bound of the rate train measured",
                },
                op.counts.false_go,
                op.nogo_units
            ));
            l
        }
    };
    // At least the fixed default, or what train measured on held-out units if higher.
    let mut measured = |given: Option<Limit>, floor: f64, rate: Option<&Rate>, what: &str| match (
        given, rate,
    ) {
        (Some(l), _) => l,
        (None, Some(r)) if r.of > 0 => {
            let upper = up(r.upper);
            if upper > floor {
                said.push(format!(
                    "{what} gate {:.2}% (the 95 % upper bound of the share train measured: {} of {} held-out units); a flag sets another",
                    upper * 100.0,
                    r.count,
                    r.of
                ));
                Limit::Rate(upper)
            } else {
                Limit::Rate(floor)
            }
        }
        _ => Limit::Rate(floor),
    };
    let fng = measured(
        given.max_false_nogo,
        0.01,
        rates.as_ref().map(|r| &r.false_nogo),
        "false-NO-GO (of each log's GO units)",
    );
    let recheck = measured(
        given.max_recheck,
        0.05,
        rates.as_ref().map(|r| &r.recheck),
        "RECHECK (of each log's units)",
    );
    ((fg, fng, recheck), said)
}
