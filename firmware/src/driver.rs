//! GO / NO-GO / RECHECK output lines.

use embedded_hal::digital::OutputPin;
use shared_model::Verdict;

/// Drives the result lines; owns its pins (active high).
///
/// Line states per verdict, with the order of writes:
///
/// | shown    | writes, in order                     |
/// |----------|--------------------------------------|
/// | NO-GO    | GO low, RECHECK low, NO-GO high      |
/// | RECHECK  | GO low, NO-GO high, RECHECK high     |
/// | GO       | RECHECK low, NO-GO low, GO high      |
///
/// GO is asserted only by the last write of a GO, and dropped by the first
/// write of anything else, so a failed write never leaves GO up alongside a fault.
pub struct GoNoGoLines<G, N, R> {
    go: G,
    nogo: N,
    recheck: Option<R>,
}

impl<G, N, R, E> GoNoGoLines<G, N, R>
where
    G: OutputPin<Error = E>,
    N: OutputPin<Error = E>,
    R: OutputPin<Error = E>,
{
    /// Takes the pins and puts them in the safe state (NO-GO).
    ///
    /// # Errors
    /// The first pin error; the caller should retry or reset.
    pub fn new(go: G, nogo: N, recheck: Option<R>) -> Result<Self, E> {
        let mut lines = Self { go, nogo, recheck };
        lines.show(Verdict::NoGo)?;
        Ok(lines)
    }

    /// Shows a verdict.
    ///
    /// # Errors
    /// The first pin error. GO has been dropped before any error can occur
    /// unless the verdict is GO.
    pub fn show(&mut self, verdict: Verdict) -> Result<(), E> {
        match verdict {
            Verdict::NoGo => {
                self.go.set_low()?;
                self.set_recheck(false)?;
                self.nogo.set_high()
            }
            Verdict::Recheck => {
                self.go.set_low()?;
                self.nogo.set_high()?;
                self.set_recheck(true)
            }
            Verdict::Go => {
                self.set_recheck(false)?;
                self.nogo.set_low()?;
                self.go.set_high()
            }
        }
    }

    /// Shows NO-GO: the state for every fault.
    ///
    /// # Errors
    /// The first pin error.
    pub fn safe(&mut self) -> Result<(), E> {
        self.show(Verdict::NoGo)
    }

    /// Gives the pins back.
    pub fn release(self) -> (G, N, Option<R>) {
        (self.go, self.nogo, self.recheck)
    }

    fn set_recheck(&mut self, on: bool) -> Result<(), E> {
        match self.recheck.as_mut() {
            Some(p) if on => p.set_high(),
            Some(p) => p.set_low(),
            None => Ok(()),
        }
    }
}
