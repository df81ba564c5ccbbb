//! One test station: classifier + sensors + lines, fail-safe, for a model of readings or
//! of readings and sample windows.
//!
//! The input kind is the station's type parameter `I` (`shared_model::Inputs`), chosen by
//! the constructor and the source: [`Station::new`] / [`Station::with_key`] take a
//! [`SensorSource`] and hold a model of readings ([`Readings`]: nothing held for
//! signals, version-3 blobs refused); [`Station::with_windows`] takes a [`WindowSource`]
//! and a sample buffer the caller owns and holds a `SignalSection` model (every blob
//! version). Loading, stepping, fault reporting and the lines are one code path; only how
//! a unit is gathered differs ([`Gather`]).

use embedded_hal::digital::OutputPin;
use heapless::Vec;
use shared_model::{
    CheckedModel, Decision, DecodeError, Fault, Inputs, MAX_CHANNELS, Readings, SignalFault,
    SignalSection,
};

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
    /// A sample window was refused (a station with windows: too short a sample buffer for
    /// the model's windows, or a sample outside its signal's range).
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

/// A go/no-go station: holds NO-GO from reset until a valid model and valid readings (and
/// windows) say otherwise. `I` is the model's input kind (see the module docs).
pub struct Station<'w, S: SensorSource, G, N, R, I: Inputs = Readings> {
    classifier: Result<Classifier<I>, DecodeError>,
    /// Every signal's window end to end (empty for a model of readings).
    samples: &'w mut [i32],
    sensor: S,
    lines: GoNoGoLines<G, N, R>,
    last_fault: Option<StationFault<S::Error>>,
    /// With a key, only blobs signed with it load (at start-up and on every reload).
    key: Option<ReleaseKey>,
}

impl<S: SensorSource, G, N, R> Station<'static, S, G, N, R, Readings> {
    /// A station for a model of readings: validates the blob in `flash` (format version 1
    /// or 2); a bad blob, or one whose model needs windows, leaves the station holding NO-GO.
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
        Self::load(flash, key, &mut [], sensor, lines)
    }
}

impl<'w, S: WindowSource, G, N, R> Station<'w, S, G, N, R, SignalSection> {
    /// A station for a model with signal features: validates the blob in `flash` (any
    /// format version; one without signals has every channel a reading), its signature
    /// first when `key` is given. Each step reads the reading channels and fills one
    /// window per signal into `samples`, a buffer the caller owns (a static or a DMA
    /// target), which must hold every signal's window end to end.
    ///
    /// Always inlined, as [`Station::with_key`] is: the model is then built where it stays.
    #[inline(always)]
    pub fn with_windows(
        flash: &[u8],
        key: Option<ReleaseKey>,
        samples: &'w mut [i32],
        sensor: S,
        lines: GoNoGoLines<G, N, R>,
    ) -> Self {
        Self::load(flash, key, samples, sensor, lines)
    }
}

impl<'w, S: SensorSource, G, N, R, I: Inputs> Station<'w, S, G, N, R, I> {
    /// The one constructor behind the public ones.
    #[inline(always)]
    fn load(
        flash: &[u8],
        key: Option<ReleaseKey>,
        samples: &'w mut [i32],
        sensor: S,
        lines: GoNoGoLines<G, N, R>,
    ) -> Self {
        Self {
            classifier: Classifier::load(flash, key.as_ref()),
            samples,
            sensor,
            lines,
            last_fault: None,
            key,
        }
    }
}

impl<'w, S, G, N, R, E, I> Station<'w, S, G, N, R, I>
where
    S: SensorSource,
    S::Error: Copy + PartialEq,
    G: OutputPin<Error = E>,
    N: OutputPin<Error = E>,
    R: OutputPin<Error = E>,
    I: Gather<S>,
{
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
    pub fn classifier(&self) -> Result<&Classifier<I>, DecodeError> {
        self.classifier.as_ref().map_err(|e| *e)
    }

    /// Reads (and fills), classifies and shows one unit.
    ///
    /// # Errors
    /// A pin error. The lines have then been driven as far as they could towards NO-GO.
    pub fn step(&mut self) -> Result<Step<S::Error>, E> {
        let decided = match &self.classifier {
            Err(e) => Err(StationFault::Blob(*e)),
            Ok(c) => I::unit(c.model(), &mut self.sensor, self.samples),
        };
        show(&mut self.lines, &mut self.last_fault, decided)
    }

    /// Gives the source, the sample buffer and the lines back.
    pub fn release(self) -> (S, &'w mut [i32], GoNoGoLines<G, N, R>) {
        (self.sensor, self.samples, self.lines)
    }
}

/// How a station of input kind `Self` gathers one unit from a source `S` and classifies it:
/// the one place where readings and windows differ. Implemented for [`Readings`] (any
/// [`SensorSource`]) and `SignalSection` (a [`WindowSource`]); not for other types.
pub trait Gather<S: SensorSource>: Inputs {
    /// Reads the unit (filling `samples` with its windows, if any) and classifies it.
    ///
    /// # Errors
    /// The fault the station shows NO-GO for.
    fn unit(
        model: &CheckedModel<Self>,
        sensor: &mut S,
        samples: &mut [i32],
    ) -> Result<Decision, StationFault<S::Error>>;
}

impl<S: SensorSource> Gather<S> for Readings {
    #[inline]
    fn unit(
        model: &CheckedModel,
        sensor: &mut S,
        _samples: &mut [i32],
    ) -> Result<Decision, StationFault<S::Error>> {
        readings_unit(model, sensor)
    }
}

/// A unit of a model without signals: one reading per channel, then the kernel.
#[inline]
fn readings_unit<I: Inputs, S: SensorSource>(
    model: &CheckedModel<I>,
    sensor: &mut S,
) -> Result<Decision, StationFault<S::Error>> {
    let mut buf: Vec<i32, MAX_CHANNELS> = Vec::new();
    // channel_count <= MAX_CHANNELS by validation, so the resize cannot fail.
    let _ = buf.resize(model.channel_count(), 0);
    sensor.read(&mut buf).map_err(StationFault::Sensor)?;
    model.classify(&buf).map_err(StationFault::Reading)
}

impl<S: WindowSource> Gather<S> for SignalSection {
    /// The readings, then each window carved from `samples` in turn, then the kernel's
    /// [`CheckedModel::classify_windows`]; a model without signals (a version-1 or 2 blob)
    /// as a model of readings, which takes less stack for the same decision.
    fn unit(
        model: &CheckedModel<SignalSection>,
        sensor: &mut S,
        samples: &mut [i32],
    ) -> Result<Decision, StationFault<S::Error>> {
        if model.signal_count() == 0 {
            return readings_unit(model, sensor);
        }
        windows_unit(model, sensor, samples)
    }
}

/// A unit of a model with signals: the readings, then each window carved from `samples`
/// in turn, then the kernel. Out of line, so that its frame (the readings, the windows'
/// slices, the feature values) is not reserved when a model without signals steps.
#[inline(never)]
fn windows_unit<S: WindowSource>(
    model: &CheckedModel<SignalSection>,
    sensor: &mut S,
    samples: &mut [i32],
) -> Result<Decision, StationFault<S::Error>> {
    let mut readings: Vec<i32, MAX_CHANNELS> = Vec::new();
    // reading_count <= channel count <= MAX_CHANNELS by validation.
    let _ = readings.resize(model.reading_count(), 0);
    sensor.read(&mut readings).map_err(StationFault::Sensor)?;
    let signals = &model.signals().signals;
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
    model
        .classify_windows(&readings, &windows)
        .map_err(|f| match f {
            SignalFault::Reading(r) => StationFault::Reading(r),
            other => StationFault::Window(other),
        })
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
