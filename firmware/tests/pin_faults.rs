//! The result lines under pin faults, exhaustively: for every write of a run of showings
//! failing once (the level unchanged, as a transient bus or driver error leaves it), and for
//! every line stuck high or low (every write refused), GO is high only if the last verdict
//! was GO and every write of that showing succeeded; otherwise NO-GO is high after the
//! showing; and a showing reports an error exactly when one of its writes failed. Also
//! through the station: a sensor fault after a GO, a NO-GO unit whose GO write fails, and a
//! reload of an erased region with a pin error.

use std::cell::RefCell;
use std::rc::Rc;

use embedded_hal::digital::{ErrorType, OutputPin};
use firmware::{GoNoGoLines, SensorSource, Station, Step, Verdict};
use shared_model::{CheckedModel, FixedModel, blob};

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct PinError;

impl embedded_hal::digital::Error for PinError {
    fn kind(&self) -> embedded_hal::digital::ErrorKind {
        embedded_hal::digital::ErrorKind::Other
    }
}

/// The three lines' levels and the fault plan, shared by the pins.
#[derive(Default)]
struct Board {
    /// Levels: GO, NO-GO, RECHECK.
    level: [bool; 3],
    /// Writes attempted so far, over all lines.
    writes: usize,
    /// The write (by its number) that fails once, leaving the level as it was.
    fail_at: Option<usize>,
    /// A line stuck at a level: every write to it fails.
    stuck: Option<(usize, bool)>,
    /// Whether any write failed since the counter was last read.
    failed: bool,
}

struct Pin(usize, Rc<RefCell<Board>>);

impl ErrorType for Pin {
    type Error = PinError;
}

impl Pin {
    fn set(&mut self, high: bool) -> Result<(), PinError> {
        let mut b = self.1.borrow_mut();
        let n = b.writes;
        b.writes += 1;
        if let Some((line, level)) = b.stuck
            && line == self.0
        {
            b.level[line] = level;
            b.failed = true;
            return Err(PinError);
        }
        if b.fail_at == Some(n) {
            b.failed = true;
            return Err(PinError);
        }
        b.level[self.0] = high;
        Ok(())
    }
}

impl OutputPin for Pin {
    fn set_low(&mut self) -> Result<(), PinError> {
        self.set(false)
    }
    fn set_high(&mut self) -> Result<(), PinError> {
        self.set(true)
    }
}

type Lines = GoNoGoLines<Pin, Pin, Pin>;

fn board(
    fail_at: Option<usize>,
    stuck: Option<(usize, bool)>,
) -> (Rc<RefCell<Board>>, Option<Lines>) {
    let b = Rc::new(RefCell::new(Board {
        fail_at,
        stuck,
        ..Board::default()
    }));
    if let Some((line, level)) = stuck {
        b.borrow_mut().level[line] = level;
    }
    let lines = GoNoGoLines::new(
        Pin(0, b.clone()),
        Pin(1, b.clone()),
        Some(Pin(2, b.clone())),
    )
    .ok();
    (b, lines)
}

const RUN: [Verdict; 9] = [
    Verdict::Go,
    Verdict::NoGo,
    Verdict::Go,
    Verdict::Go,
    Verdict::Recheck,
    Verdict::Go,
    Verdict::NoGo,
    Verdict::Recheck,
    Verdict::NoGo,
];

/// Shows RUN on `lines`, checking the rules after each showing.
fn check_run(b: &Rc<RefCell<Board>>, lines: &mut Lines, what: &str) {
    for (k, &v) in RUN.iter().enumerate() {
        b.borrow_mut().failed = false;
        let r = lines.show(v);
        let st = b.borrow();
        let [go, nogo, _] = st.level;
        let stuck_go_high = st.stuck == Some((0, true));
        assert_eq!(
            r.is_err(),
            st.failed,
            "{what}, showing {k} ({v:?}): error reported iff a write failed"
        );
        if !stuck_go_high {
            assert!(
                !go || (v == Verdict::Go && r.is_ok()),
                "{what}, showing {k} ({v:?}): GO high without a whole GO showing"
            );
        }
        let nogo_stuck_low = st.stuck == Some((1, false));
        if (v != Verdict::Go || r.is_err()) && !nogo_stuck_low {
            assert!(nogo, "{what}, showing {k} ({v:?}): NO-GO not asserted");
        }
        if v == Verdict::Go && r.is_ok() {
            assert!(
                go && !nogo,
                "{what}, showing {k}: a whole GO showing shows GO"
            );
        }
    }
}

#[test]
fn every_single_failed_write_leaves_the_lines_fail_safe() {
    // Count the writes of a run without faults, then fail each one in turn.
    let (b, lines) = board(None, None);
    check_run(&b, &mut lines.unwrap(), "no fault");
    let total = b.borrow().writes;
    assert_eq!(total, 3 * (RUN.len() + 1), "three writes a showing");
    for k in 0..total {
        let (b, lines) = board(Some(k), None);
        let what = format!("write {k} fails");
        let Some(mut lines) = lines else {
            // The failure hit the start-up showing: it was reported, and the lines were
            // still driven to NO-GO.
            let st = b.borrow();
            assert!(
                !st.level[0] && st.level[1],
                "{what}: start-up left GO up or NO-GO down"
            );
            continue;
        };
        check_run(&b, &mut lines, &what);
    }
}

#[test]
fn a_stuck_line_never_lets_go_up_and_every_showing_reports_it() {
    for line in 0..3 {
        for level in [false, true] {
            let what = format!("line {line} stuck {}", if level { "high" } else { "low" });
            let (b, lines) = board(None, Some((line, level)));
            // Start-up writes every line, so it reports the stuck one.
            assert!(
                lines.is_none(),
                "{what}: start-up must report the stuck line"
            );
            {
                let st = b.borrow();
                if !(line == 0 && level) {
                    assert!(!st.level[0], "{what}: start-up left GO up");
                }
                if line != 1 || level {
                    assert!(st.level[1], "{what}: start-up left NO-GO down");
                }
            }
            let mut lines = rebuild(&b);
            check_run(&b, &mut lines, &what);
        }
    }
}

/// Lines over the same board without the start-up showing's result (the pins are moved in
/// again; what matters is the board's state).
fn rebuild(b: &Rc<RefCell<Board>>) -> Lines {
    // `new` shows NO-GO first; with a stuck line it returns the error, so build through a
    // board with the stuck line cleared and restore it after.
    let stuck = b.borrow_mut().stuck.take();
    let lines = GoNoGoLines::new(
        Pin(0, b.clone()),
        Pin(1, b.clone()),
        Some(Pin(2, b.clone())),
    )
    .unwrap_or_else(|_| unreachable!());
    let mut st = b.borrow_mut();
    st.stuck = stuck;
    if let Some((line, level)) = stuck {
        st.level[line] = level;
    }
    lines
}

/// The example model; GO for [900, 100], NO-GO for [100, 900].
fn blob_bytes() -> Vec<u8> {
    let m = FixedModel::example_two_channel();
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(&CheckedModel::new(m).unwrap(), &mut buf).unwrap();
    buf[..n].to_vec()
}

struct Script(Vec<Result<[i32; 2], ()>>);

impl SensorSource for Script {
    type Error = ();
    fn read(&mut self, readings: &mut [i32]) -> Result<(), ()> {
        let r = self.0.remove(0)?;
        readings.copy_from_slice(&r);
        Ok(())
    }
}

#[test]
fn the_station_drops_go_on_a_fault_and_on_a_reload_despite_pin_errors() {
    // A GO, then a sensor fault whose first pin write (GO low) fails once.
    let (b, lines) = board(None, None);
    let script = Script(vec![Ok([900, 100]), Err(()), Ok([100, 900])]);
    let mut st = Station::new(&blob_bytes(), script, lines.unwrap());
    assert!(matches!(st.step(), Ok(Step::Decided(d)) if d.verdict == Verdict::Go));
    assert!(b.borrow().level[0]);
    let next = b.borrow().writes;
    b.borrow_mut().fail_at = Some(next);
    assert!(st.step().is_err(), "the pin error is reported");
    assert_eq!(
        b.borrow().level[..2],
        [false, true],
        "GO down, NO-GO up after the fault"
    );
    // A NO-GO unit whose GO write fails once still shows NO-GO.
    let next = b.borrow().writes;
    b.borrow_mut().fail_at = Some(next);
    assert!(st.step().is_err());
    assert_eq!(b.borrow().level[..2], [false, true]);
    // A GO showing, then a reload of an erased region with one pin error: GO drops.
    let (b, lines) = board(None, None);
    let mut st = Station::new(&blob_bytes(), Script(vec![Ok([900, 100])]), lines.unwrap());
    assert!(st.step().is_ok());
    assert!(b.borrow().level[0]);
    let next = b.borrow().writes;
    b.borrow_mut().fail_at = Some(next);
    assert!(st.reload(&[0xFF; 256]).is_err());
    assert_eq!(
        b.borrow().level[..2],
        [false, true],
        "erased flash: GO down, NO-GO up"
    );
    assert!(st.classifier().is_err());
}
