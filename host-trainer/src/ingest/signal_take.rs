//! A window longer than its signal's, cut under the signal's `take`: the first or the last
//! `window` samples, the ones the device is handed. Kept apart from the unit reader so the
//! rule is one function with its own tests.

use crate::ingest::signal_scale::{SignalScale, Take};

/// Cuts each window to its signal's `window` samples under its `take` (a window without
/// `take`, or not longer, is left whole) and sets `firsts[j]` to the unit's row of window
/// `j`'s first kept sample (0, or the samples dropped from the front under `"last"`).
pub(super) fn cut_windows(signals: &[SignalScale], windows: &mut [Vec<i32>], firsts: &mut [usize]) {
    for ((w, s), first) in windows.iter_mut().zip(signals).zip(firsts) {
        let n = usize::from(s.window);
        *first = 0;
        match s.take {
            Some(Take::First) => w.truncate(n),
            Some(Take::Last) if w.len() > n => {
                *first = w.len() - n;
                w.drain(..w.len() - n);
            }
            _ => {}
        }
    }
}
