//! The board's side: raw readings in, one per channel, and sample windows for signals.

/// A source of raw readings (ADC counts or sensor integer units), implemented by the board.
///
/// `read` fills `readings[i]` for channel `i` in model order; `readings.len()`
/// equals the model's channel count.
pub trait SensorSource {
    /// The board's read error (bus error, timeout, sensor not ready…).
    type Error: core::fmt::Debug;

    /// Takes one reading per channel.
    ///
    /// # Errors
    /// Any read failure; the station then shows NO-GO.
    fn read(&mut self, readings: &mut [i32]) -> Result<(), Self::Error>;
}

/// A source of readings and sample windows, for a model some of whose channels are features
/// of a signal (`shared_model::features`): the board fills each signal's window, e.g. from
/// a DMA buffer, and the readings of the other channels as a [`SensorSource`] does.
pub trait WindowSource: SensorSource {
    /// Fills one window of raw samples of signal `signal` (in the model's signal order);
    /// `window.len()` is the signal's declared window length.
    ///
    /// # Errors
    /// Any acquisition failure; the station then shows NO-GO.
    fn fill(&mut self, signal: usize, window: &mut [i32]) -> Result<(), Self::Error>;
}
