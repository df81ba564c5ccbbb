//! The decision step: from the score the kernel's arithmetic computed to what the device
//! shows. Kept apart from the arithmetic ([`crate::kernel`]) so that a rule over several
//! scores can stand beside [`Thresholds`] without touching the integer steps before it.
//!
//! Today's rule: `score >= go_min` → GO, `score <= nogo_max` → NO-GO, anything between →
//! RECHECK ([`Thresholds::decide`]); a refused reading or window is a fault, and the device
//! shows NO-GO for it (the station's part, not this module's).

/// The three outcomes a device shows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Verdict {
    /// The unit passes.
    Go,
    /// The unit fails.
    NoGo,
    /// The score lies in the RECHECK band: retest the unit.
    Recheck,
}

impl Verdict {
    /// Upper-case name as the device and `replay` print it.
    pub const fn as_str(self) -> &'static str {
        match self {
            Self::Go => "GO",
            Self::NoGo => "NO-GO",
            Self::Recheck => "RECHECK",
        }
    }
}

/// A classification: the exact integer score and the verdict it gives.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Decision {
    /// Two-sided model: `bias + Σ weight_i · x_i`, in accumulator units. Model of
    /// several classes: the leading class's lead over the runner-up (≥ 0), the same units.
    pub score: i64,
    /// The verdict for `score`.
    pub verdict: Verdict,
    /// Model of several classes: the leading class (an index into its class rows), decided
    /// or not (under RECHECK it is the class that led). `None` for a two-sided model.
    pub class: Option<u8>,
}

/// The two-outcome rule with a RECHECK band: the model's thresholds, in accumulator units.
/// Validation keeps `nogo_max < go_min`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Thresholds {
    /// Scores at or below this are NO-GO.
    pub nogo_max: i64,
    /// Scores at or above this are GO; between the two is RECHECK.
    pub go_min: i64,
}

impl Thresholds {
    /// The verdict for a score.
    #[inline]
    pub fn verdict(&self, score: i64) -> Verdict {
        if score >= self.go_min {
            Verdict::Go
        } else if score <= self.nogo_max {
            Verdict::NoGo
        } else {
            Verdict::Recheck
        }
    }

    /// The decision for a score: the score kept, its verdict beside it.
    #[inline]
    pub fn decide(&self, score: i64) -> Decision {
        Decision {
            score,
            verdict: self.verdict(score),
            class: None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thresholds_at_their_exact_edges() {
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        let cases = [
            (-11, Verdict::NoGo),
            (-10, Verdict::NoGo),
            (-9, Verdict::Recheck),
            (0, Verdict::Recheck),
            (9, Verdict::Recheck),
            (10, Verdict::Go),
            (11, Verdict::Go),
        ];
        for (score, want) in cases {
            assert_eq!(t.verdict(score), want, "score {score}");
            assert_eq!(
                t.decide(score),
                Decision {
                    score,
                    verdict: want,
                    class: None,
                }
            );
        }
    }
}
