//! What the station tests share: output pins that record, in one log, every level they
//! are driven to, so that the order across the lines can be checked.

use std::cell::RefCell;
use std::convert::Infallible;
use std::rc::Rc;

use embedded_hal::digital::{ErrorType, OutputPin};
use firmware::GoNoGoLines;

/// (line, level) in the order the lines were driven: lines "GO", "NOGO" and "RECHECK".
pub type Log = Rc<RefCell<Vec<(&'static str, bool)>>>;

/// An output pin that appends (line, level) to a shared log.
pub struct Rec(pub &'static str, pub Log);

impl ErrorType for Rec {
    type Error = Infallible;
}

impl OutputPin for Rec {
    fn set_low(&mut self) -> Result<(), Infallible> {
        self.1.borrow_mut().push((self.0, false));
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Infallible> {
        self.1.borrow_mut().push((self.0, true));
        Ok(())
    }
}

/// GO, NO-GO and RECHECK lines recording into one new log, already in the safe state.
pub fn recorded_lines() -> (GoNoGoLines<Rec, Rec, Rec>, Log) {
    let log: Log = Rc::default();
    let lines = GoNoGoLines::new(
        Rec("GO", log.clone()),
        Rec("NOGO", log.clone()),
        Some(Rec("RECHECK", log.clone())),
    )
    .unwrap();
    (lines, log)
}
