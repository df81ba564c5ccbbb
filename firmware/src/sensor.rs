//! The board's side: raw readings in, one per channel.

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
