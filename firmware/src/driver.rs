//! GO / NO-GO / RECHECK output lines.

use embedded_hal::digital::OutputPin;
use shared_model::Verdict;

/// Drives the result lines; owns its pins (active high).
///
/// What [`show`](Self::show) writes, in order:
///
/// | shown    | writes, in order                     | on a failed write                        |
/// |----------|--------------------------------------|------------------------------------------|
/// | NO-GO    | GO low, RECHECK low, NO-GO high      | tried once more, then the next write     |
/// | RECHECK  | GO low, NO-GO high, RECHECK high     | tried once more, then the next write     |
/// | GO       | RECHECK low, NO-GO low, GO high      | stop, and show NO-GO as above instead    |
///
/// So GO goes up only as the last write of a GO showing whose every write succeeded, and
/// GO is the first line dropped by anything else. A write towards the safe state is never
/// skipped because an earlier one failed: after a single failed write NO-GO is still
/// asserted whenever GO is not. The first pin error is returned, even when a second try
/// succeeded, so the station can report it. A pin stuck high on GO cannot be pulled down by
/// any driver; then every showing returns an error and NO-GO is asserted beside it.
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
    /// The first pin error, after every write towards NO-GO was tried; the caller should
    /// retry or reset.
    pub fn new(go: G, nogo: N, recheck: Option<R>) -> Result<Self, E> {
        let mut lines = Self { go, nogo, recheck };
        lines.show(Verdict::NoGo)?;
        Ok(lines)
    }

    /// Shows a verdict (see the table on [`GoNoGoLines`]).
    ///
    /// # Errors
    /// The first pin error. GO is then low (unless its pin is stuck high) and NO-GO has
    /// been driven high, whatever the verdict was.
    pub fn show(&mut self, verdict: Verdict) -> Result<(), E> {
        match verdict {
            Verdict::NoGo => self.towards_safe(false),
            Verdict::Recheck => self.towards_safe(true),
            Verdict::Go => {
                let written = self
                    .set_recheck(false)
                    .and_then(|()| self.nogo.set_low())
                    .and_then(|()| self.go.set_high());
                // A GO that could not be shown whole is shown as NO-GO; its own error is
                // the one to report.
                written.inspect_err(|_| {
                    let _ = self.towards_safe(false);
                })
            }
        }
    }

    /// Shows NO-GO: the state for every fault.
    ///
    /// # Errors
    /// The first pin error, after every write towards NO-GO was tried.
    pub fn safe(&mut self) -> Result<(), E> {
        self.show(Verdict::NoGo)
    }

    /// Gives the pins back.
    pub fn release(self) -> (G, N, Option<R>) {
        (self.go, self.nogo, self.recheck)
    }

    /// GO low, NO-GO high, RECHECK as asked: each write tried twice, none skipped.
    fn towards_safe(&mut self, recheck: bool) -> Result<(), E> {
        let go = twice(&mut self.go, false);
        let (nogo, rc) = if recheck {
            let n = twice(&mut self.nogo, true);
            (n, self.recheck.as_mut().map_or(Ok(()), |p| twice(p, true)))
        } else {
            let r = self.recheck.as_mut().map_or(Ok(()), |p| twice(p, false));
            (twice(&mut self.nogo, true), r)
        };
        go.and(if recheck { nogo.and(rc) } else { rc.and(nogo) })
    }

    fn set_recheck(&mut self, on: bool) -> Result<(), E> {
        match self.recheck.as_mut() {
            Some(p) if on => p.set_high(),
            Some(p) => p.set_low(),
            None => Ok(()),
        }
    }
}

/// Sets `pin`, trying a second time if the first write fails (a transient bus or driver
/// error); returns the first error even if the second try succeeded.
fn twice<P: OutputPin>(pin: &mut P, high: bool) -> Result<(), P::Error> {
    let set = |p: &mut P| if high { p.set_high() } else { p.set_low() };
    match set(pin) {
        Ok(()) => Ok(()),
        Err(e) => {
            let _ = set(pin);
            Err(e)
        }
    }
}
