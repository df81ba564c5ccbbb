//! One test station: classifier + sensors + lines, fail-safe.

use embedded_hal::digital::OutputPin;
use heapless::Vec;
use shared_model::{CheckedSignalModel, Decision, DecodeError, Fault, MAX_CHANNELS, SignalFault};

use crate::classifier::blob_in;
use crate::{Classifier, GoNoGoLines, ReleaseKey, SensorSource, WindowSource};

/// Why a step showed NO-GO without classifying.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum StationFault<SE> {
    /// The model blob failed validation (at start-up or on reload).
    Blob(DecodeError),
    /// The sensor source reported a read failure.
    Sensor(SE),
    /// A reading was refused by the kernel (out of range).
    Reading(Fault),
    /// A sample window was refused ([`SignalStation`]: too short a sample buffer for the
    /// model's windows, or a sample outside its signal's range).
    Window(SignalFault),
}

/// The outcome of one [`Station::step`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Step<SE> {
    /// Readings classified and the verdict shown.
    Decided(Decision),
    /// NO-GO shown because of a fault.
    Faulted {
        /// What went wrong.
        fault: StationFault<SE>,
        /// `true` the first time this fault is seen in a row; report it only then.
        first: bool,
    },
}

/// A go/no-go station: holds NO-GO from reset until a valid model and valid readings say otherwise.
pub struct Station<S: SensorSource, G, N, R> {
    classifier: Result<Classifier, DecodeError>,
    sensor: S,
    lines: GoNoGoLines<G, N, R>,
    last_fault: Option<StationFault<S::Error>>,
    /// With a key, only blobs signed with it load (at start-up and on every reload).
    key: Option<ReleaseKey>,
}

impl<S, G, N, R, E> Station<S, G, N, R>
where
    S: SensorSource,
    S::Error: Copy + PartialEq,
    G: OutputPin<Error = E>,
    N: OutputPin<Error = E>,
    R: OutputPin<Error = E>,
{
    /// Validates the blob in `flash`; a bad blob leaves the station holding NO-GO.
    ///
    /// `lines` are already in the safe state ([`GoNoGoLines::new`]).
    #[inline(always)]
    pub fn new(flash: &[u8], sensor: S, lines: GoNoGoLines<G, N, R>) -> Self {
        Self::with_key(flash, None, sensor, lines)
    }

    /// As [`new`](Self::new), but a blob must be signed with `key` (a signed-release
    /// build): an unsigned blob, another key's blob or a bad signature holds NO-GO like a
    /// bad CRC. `None` accepts unsigned and signed blobs alike, without checking.
    ///
    /// Always inlined, so that with a constant `None` the signature verifier drops out of
    /// the image (see `Classifier::load`).
    #[inline(always)]
    pub fn with_key(
        flash: &[u8],
        key: Option<ReleaseKey>,
        sensor: S,
        lines: GoNoGoLines<G, N, R>,
    ) -> Self {
        Self {
            classifier: Classifier::load(flash, key.as_ref()),
            sensor,
            lines,
            last_fault: None,
            key,
        }
    }

    /// Replaces the model (e.g. after the flash region was rewritten). A bad
    /// blob drops the old model too: the station must not keep running a model
    /// its flash no longer holds.
    ///
    /// # Errors
    /// A pin error while showing NO-GO for the new model.
    pub fn reload(&mut self, flash: &[u8]) -> Result<(), E> {
        self.classifier = Classifier::load(flash, self.key.as_ref());
        self.lines.safe()
    }

    /// The model in use, or why there is none.
    pub fn classifier(&self) -> Result<&Classifier, DecodeError> {
        self.classifier.as_ref().map_err(|e| *e)
    }

    /// Reads, classifies and shows one unit.
    ///
    /// # Errors
    /// A pin error. The lines have then been driven as far as they could towards NO-GO.
    pub fn step(&mut self) -> Result<Step<S::Error>, E> {
        let decided = match &self.classifier {
            Err(e) => Err(StationFault::Blob(*e)),
            Ok(c) => {
                let mut buf: Vec<i32, MAX_CHANNELS> = Vec::new();
                // channel_count <= MAX_CHANNELS by validation, so the resize cannot fail.
                let _ = buf.resize(c.channel_count(), 0);
                match self.sensor.read(&mut buf) {
                    Err(e) => Err(StationFault::Sensor(e)),
                    Ok(()) => c.classify(&buf).map_err(StationFault::Reading),
                }
            }
        };
        show(&mut self.lines, &mut self.last_fault, decided)
    }

    /// Gives the sensor source and the lines back.
    pub fn release(self) -> (S, GoNoGoLines<G, N, R>) {
        (self.sensor, self.lines)
    }
}

/// Shows a step's outcome: the verdict, or NO-GO for a fault, and whether the fault is new.
fn show<SE: Copy + PartialEq, G, N, R, E>(
    lines: &mut GoNoGoLines<G, N, R>,
    last_fault: &mut Option<StationFault<SE>>,
    decided: Result<Decision, StationFault<SE>>,
) -> Result<Step<SE>, E>
where
    G: OutputPin<Error = E>,
    N: OutputPin<Error = E>,
    R: OutputPin<Error = E>,
{
    match decided {
        Ok(d) => {
            *last_fault = None;
            lines.show(d.verdict)?;
            Ok(Step::Decided(d))
        }
        Err(fault) => {
            let first = *last_fault != Some(fault);
            *last_fault = Some(fault);
            lines.safe()?;
            Ok(Step::Faulted { fault, first })
        }
    }
}

/// A station for a model with signal features (blob format version 3): each step reads the
/// reading channels and fills one window per signal into `samples`, a buffer the caller
/// owns (a static or a DMA target), then classifies with
/// [`CheckedSignalModel::classify_windows`]. Faults and lines behave as [`Station`]'s.
pub struct SignalStation<'w, S: WindowSource, G, N, R> {
    model: Result<CheckedSignalModel, DecodeError>,
    samples: &'w mut [i32],
    sensor: S,
    lines: GoNoGoLines<G, N, R>,
    last_fault: Option<StationFault<S::Error>>,
}

impl<'w, S, G, N, R, E> SignalStation<'w, S, G, N, R>
where
    S: WindowSource,
    S::Error: Copy + PartialEq,
    G: OutputPin<Error = E>,
    N: OutputPin<Error = E>,
    R: OutputPin<Error = E>,
{
    /// Validates the blob in `flash` (any format version; one without signals has every
    /// channel a reading), its signature first when `key` is given. A bad blob leaves the
    /// station holding NO-GO. `samples` must hold every signal's window end to end.
    ///
    /// Always inlined, as [`Station::with_key`] is: the model is then built where it stays.
    #[inline(always)]
    pub fn new(
        flash: &[u8],
        key: Option<&ReleaseKey>,
        samples: &'w mut [i32],
        sensor: S,
        lines: GoNoGoLines<G, N, R>,
    ) -> Self {
        Self {
            model: blob_in(flash, key).and_then(shared_model::blob::decode_signals),
            samples,
            sensor,
            lines,
            last_fault: None,
        }
    }

    /// The model in use, or why there is none.
    pub fn model(&self) -> Result<&CheckedSignalModel, DecodeError> {
        self.model.as_ref().map_err(|e| *e)
    }

    /// Reads, fills, classifies and shows one unit.
    ///
    /// # Errors
    /// A pin error. The lines have then been driven as far as they could towards NO-GO.
    pub fn step(&mut self) -> Result<Step<S::Error>, E> {
        let decided = match &self.model {
            Err(e) => Err(StationFault::Blob(*e)),
            Ok(m) => unit(m, &mut self.sensor, self.samples),
        };
        show(&mut self.lines, &mut self.last_fault, decided)
    }

    /// Gives the source, the sample buffer and the lines back.
    pub fn release(self) -> (S, &'w mut [i32], GoNoGoLines<G, N, R>) {
        (self.sensor, self.samples, self.lines)
    }
}

/// One unit of a signal model: readings, then each window carved from `samples` in turn.
fn unit<S: WindowSource>(
    m: &CheckedSignalModel,
    sensor: &mut S,
    samples: &mut [i32],
) -> Result<Decision, StationFault<S::Error>> {
    let mut readings: Vec<i32, MAX_CHANNELS> = Vec::new();
    // reading_count <= channel count <= MAX_CHANNELS by validation.
    let _ = readings.resize(m.reading_count(), 0);
    sensor.read(&mut readings).map_err(StationFault::Sensor)?;
    let signals = &m.signals().signals;
    let mut windows: Vec<&[i32], { shared_model::limits::MAX_SIGNALS }> = Vec::new();
    let mut rest = samples;
    for (i, spec) in signals.iter().enumerate() {
        let Some((window, tail)) = rest.split_at_mut_checked(usize::from(spec.window)) else {
            return Err(StationFault::Window(SignalFault::Windows {
                expected: u8::try_from(signals.len()).unwrap_or(u8::MAX),
                got: i,
            }));
        };
        sensor.fill(i, window).map_err(StationFault::Sensor)?;
        // At most MAX_SIGNALS windows: the push cannot fail.
        let _ = windows.push(window);
        rest = tail;
    }
    m.classify_windows(&readings, &windows)
        .map_err(|f| match f {
            SignalFault::Reading(r) => StationFault::Reading(r),
            other => StationFault::Window(other),
        })
}
