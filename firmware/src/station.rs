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
//!
//! Every step also feeds the station's field statistics ([`FieldStats`], about 1 KiB, no
//! heap): a decided unit with the values its weights multiplied, a faulted one with where
//! the fault came from. [`Station::set_field_plan`] sets the histogram's bins and the
//! CUSUMs, [`Station::field`] reads the statistics, [`Station::field_record`] writes them
//! as a field record (`shared-model/FORMAT.md`) into a buffer the caller owns, and
//! [`Station::reset_field`] starts them afresh.
//!
//! The outcome kind is the type parameter `K` (`shared_model::Outcomes`): `TwoSided` (the
//! default, zero-sized: GO / NO-GO / RECHECK by thresholds) or `ClassSection`
//! ([`Station::with_classes`], [`Station::with_windows_and_classes`]: GO or which failure
//! class, blob versions 1 to 6). The lines are driven alike: a failure class shows NO-GO,
//! RECHECK as RECHECK, a fault NO-GO; the class is in each step's `Decision::class`, its
//! name from [`Classifier::class_name`]. A class model's units go into the field statistics
//! through `FieldStats::decided_classes` (the signed lead against the two gaps).

use embedded_hal::digital::OutputPin;
use heapless::Vec;
use shared_model::field::RecordError;
use shared_model::{
    CheckedModel, ClassSection, Decision, DecodeError, Fault, FieldFault, FieldPlan, FieldStats,
    Inputs, MAX_CHANNELS, Outcomes, Readings, SignalFault, SignalSection, TwoSided,
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
/// windows) say otherwise. `I` is the model's input kind, `K` its outcome kind (see the
/// module docs).
pub struct Station<'w, S: SensorSource, G, N, R, I: Inputs = Readings, K: Outcomes = TwoSided> {
    classifier: Result<Classifier<I, K>, DecodeError>,
    /// Every signal's window end to end (empty for a model of readings).
    samples: &'w mut [i32],
    sensor: S,
    lines: GoNoGoLines<G, N, R>,
    last_fault: Option<StationFault<S::Error>>,
    /// With a key, only blobs signed with it load (at start-up and on every reload).
    key: Option<ReleaseKey>,
    /// What the station met since the statistics were last started (see [`Station::field`]).
    field: FieldStats,
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

impl<S: SensorSource, G, N, R> Station<'static, S, G, N, R, Readings, ClassSection> {
    /// A station for a model of readings that may decide between several classes: loads
    /// blob versions 1 and 2 (two-sided, decided as by [`Station::with_key`]) and 5 and 6
    /// (classes; a model that needs windows is refused), the signature checked first
    /// against `key` when one is given.
    ///
    /// Always inlined, as [`Station::with_key`] is.
    #[inline(always)]
    pub fn with_classes(
        flash: &[u8],
        key: Option<ReleaseKey>,
        sensor: S,
        lines: GoNoGoLines<G, N, R>,
    ) -> Self {
        Self::load(flash, key, &mut [], sensor, lines)
    }
}

impl<'w, S: WindowSource, G, N, R> Station<'w, S, G, N, R, SignalSection, ClassSection> {
    /// As [`Station::with_windows`], for a model that may decide between several classes:
    /// loads every blob version (1 to 6).
    ///
    /// Always inlined, as [`Station::with_windows`] is.
    #[inline(always)]
    pub fn with_windows_and_classes(
        flash: &[u8],
        key: Option<ReleaseKey>,
        samples: &'w mut [i32],
        sensor: S,
        lines: GoNoGoLines<G, N, R>,
    ) -> Self {
        Self::load(flash, key, samples, sensor, lines)
    }
}

impl<'w, S: SensorSource, G, N, R, I: Inputs, K: Outcomes> Station<'w, S, G, N, R, I, K> {
    /// The one constructor behind the public ones.
    #[inline(always)]
    fn load(
        flash: &[u8],
        key: Option<ReleaseKey>,
        samples: &'w mut [i32],
        sensor: S,
        lines: GoNoGoLines<G, N, R>,
    ) -> Self {
        let classifier = Classifier::load(flash, key.as_ref());
        let field = field_for(&classifier, FieldPlan::default());
        Self {
            classifier,
            samples,
            sensor,
            lines,
            last_fault: None,
            key,
            field,
        }
    }

    /// Keeps the field statistics under `plan` from now on: the histogram's bins and the
    /// two CUSUMs' settings (in accumulator units, as `FieldPlan` says). The statistics start
    /// afresh (counts kept under two plans would not add up). The plan's `blob_id` is not
    /// taken: the record always names the blob the station loaded (0 when none is valid).
    ///
    /// Until a plan is set the station keeps its statistics under the zero plan: counts,
    /// faults and channel figures as under any plan; bins of 1 unit from score 0; CUSUMs
    /// with target, slack and limit 0.
    pub fn set_field_plan(&mut self, plan: FieldPlan) {
        self.field.plan = FieldPlan {
            blob_id: self.field.plan.blob_id,
            shift: plan.shift.min(62),
            ..plan
        };
        self.field.reset();
    }

    /// The field statistics since start-up, the last reload, plan or reset: counts per
    /// verdict and per fault source, the score histogram, each channel's least, greatest and
    /// summed value, the two CUSUMs with the units of their first alarms.
    pub fn field(&self) -> &FieldStats {
        &self.field
    }

    /// Writes the field record (`shared-model/FORMAT.md`, "Field record") into `out`, a
    /// buffer the caller owns, and returns its length: `288 + 20·channels + 4·signals` bytes,
    /// at most `shared_model::field::MAX_RECORD_LEN` (960).
    ///
    /// # Errors
    /// [`RecordError::BufferTooSmall`] when `out` is shorter than the record; nothing is
    /// written then.
    pub fn field_record(&self, out: &mut [u8]) -> Result<usize, RecordError> {
        self.field.encode(out)
    }

    /// Starts the field statistics afresh under the same plan.
    pub fn reset_field(&mut self) {
        self.field.reset();
    }
}

/// Empty statistics under `plan` for the model `classifier` holds (its blob id, channels
/// and signals), or for no model (blob id 0, no channels).
#[inline(always)]
fn field_for<I: Inputs, K: Outcomes>(
    classifier: &Result<Classifier<I, K>, DecodeError>,
    plan: FieldPlan,
) -> FieldStats {
    let (blob_id, channels, signals) = classifier.as_ref().map_or((0, 0, 0), |c| {
        let m = c.model();
        (c.blob_id(), m.channel_count(), m.signal_count())
    });
    FieldStats::new(FieldPlan { blob_id, ..plan }, channels, signals)
}

impl<'w, S, G, N, R, E, I, K> Station<'w, S, G, N, R, I, K>
where
    S: SensorSource,
    S::Error: Copy + PartialEq,
    G: OutputPin<Error = E>,
    N: OutputPin<Error = E>,
    R: OutputPin<Error = E>,
    I: Gather<S>,
    K: Outcomes,
{
    /// Replaces the model (e.g. after the flash region was rewritten). A bad
    /// blob drops the old model too: the station must not keep running a model
    /// its flash no longer holds. The field statistics start afresh for the new blob
    /// (its id, channels and signals), under the same plan.
    ///
    /// # Errors
    /// A pin error while showing NO-GO for the new model.
    pub fn reload(&mut self, flash: &[u8]) -> Result<(), E> {
        self.classifier = Classifier::load(flash, self.key.as_ref());
        self.field = field_for(&self.classifier, self.field.plan);
        self.lines.safe()
    }

    /// The model in use, or why there is none.
    pub fn classifier(&self) -> Result<&Classifier<I, K>, DecodeError> {
        self.classifier.as_ref().map_err(|e| *e)
    }

    /// Reads (and fills), classifies and shows one unit, and counts it in the field
    /// statistics.
    ///
    /// # Errors
    /// A pin error. The lines have then been driven as far as they could towards NO-GO.
    pub fn step(&mut self) -> Result<Step<S::Error>, E> {
        let decided = match &self.classifier {
            Err(e) => Err(StationFault::Blob(*e)),
            Ok(c) => I::unit(c.model(), &mut self.sensor, self.samples, &mut self.field),
        };
        if let Err(f) = &decided {
            self.field.faulted(field_fault(f));
        }
        show(&mut self.lines, &mut self.last_fault, decided)
    }

    /// Gives the source, the sample buffer and the lines back.
    pub fn release(self) -> (S, &'w mut [i32], GoNoGoLines<G, N, R>) {
        (self.sensor, self.samples, self.lines)
    }
}

/// Where a fault comes from, as the field statistics count it: a reading out of range is its
/// channel's, a refused window its signal's, anything else (a wrong count, a sensor failure,
/// no valid model) other.
fn field_fault<SE>(fault: &StationFault<SE>) -> FieldFault {
    match *fault {
        StationFault::Reading(Fault::OutOfRange { channel, .. })
        | StationFault::Window(SignalFault::Reading(Fault::OutOfRange { channel, .. })) => {
            FieldFault::Channel(channel)
        }
        StationFault::Window(SignalFault::Window { signal, .. }) => FieldFault::Signal(signal),
        _ => FieldFault::Other,
    }
}

/// How a station of input kind `Self` gathers one unit from a source `S` and classifies it:
/// the one place where readings and windows differ. Implemented for [`Readings`] (any
/// [`SensorSource`]) and `SignalSection` (a [`WindowSource`]); not for other types.
pub trait Gather<S: SensorSource>: Inputs {
    /// Reads the unit (filling `samples` with its windows, if any), classifies it and, when
    /// it is decided, counts it in `field` with the values its weights multiplied (the
    /// station counts faults itself).
    ///
    /// # Errors
    /// The fault the station shows NO-GO for.
    fn unit<K: Outcomes>(
        model: &CheckedModel<Self, K>,
        sensor: &mut S,
        samples: &mut [i32],
        field: &mut FieldStats,
    ) -> Result<Decision, StationFault<S::Error>>;
}

/// Counts a decided unit in the field statistics: by the model's thresholds, or for a model
/// of several classes by its two-sided view (`FieldStats::decided_classes`). For a
/// two-sided kind `classes()` is a constant `None`: the class branch drops out.
#[inline(always)]
fn count_decided<I: Inputs, K: Outcomes>(
    model: &CheckedModel<I, K>,
    field: &mut FieldStats,
    d: &Decision,
    values: &[i32],
) {
    match model.classes() {
        Some(classes) => field.decided_classes(classes, d, values),
        None => field.decided(&model.thresholds(), d, values),
    }
}

impl<S: SensorSource> Gather<S> for Readings {
    #[inline]
    fn unit<K: Outcomes>(
        model: &CheckedModel<Readings, K>,
        sensor: &mut S,
        _samples: &mut [i32],
        field: &mut FieldStats,
    ) -> Result<Decision, StationFault<S::Error>> {
        readings_unit(model, sensor, field)
    }
}

/// A unit of a model without signals: one reading per channel, then the kernel. The
/// readings are the values the weights multiply (what `CheckedModel::channel_values` gives
/// for such a model), so the field statistics take them as they are: no copy.
#[inline]
fn readings_unit<I: Inputs, K: Outcomes, S: SensorSource>(
    model: &CheckedModel<I, K>,
    sensor: &mut S,
    field: &mut FieldStats,
) -> Result<Decision, StationFault<S::Error>> {
    let mut buf: Vec<i32, MAX_CHANNELS> = Vec::new();
    // channel_count <= MAX_CHANNELS by validation, so the resize cannot fail.
    let _ = buf.resize(model.channel_count(), 0);
    sensor.read(&mut buf).map_err(StationFault::Sensor)?;
    let d = model.classify(&buf).map_err(StationFault::Reading)?;
    count_decided(model, field, &d, &buf);
    Ok(d)
}

impl<S: WindowSource> Gather<S> for SignalSection {
    /// The readings, then each window carved from `samples` in turn, then the kernel's
    /// [`CheckedModel::channel_values`] and [`CheckedModel::classify`] (what
    /// `classify_windows` does); a model without signals (a version-1 or 2 blob) as a model
    /// of readings, which takes less stack for the same decision.
    fn unit<K: Outcomes>(
        model: &CheckedModel<SignalSection, K>,
        sensor: &mut S,
        samples: &mut [i32],
        field: &mut FieldStats,
    ) -> Result<Decision, StationFault<S::Error>> {
        if model.signal_count() == 0 {
            return readings_unit(model, sensor, field);
        }
        windows_unit(model, sensor, samples, field)
    }
}

/// A unit of a model with signals: the readings, then each window carved from `samples`
/// in turn, then the kernel. Out of line, so that its frame (the readings, the windows'
/// slices, the feature values) is not reserved when a model without signals steps.
#[inline(never)]
fn windows_unit<K: Outcomes, S: WindowSource>(
    model: &CheckedModel<SignalSection, K>,
    sensor: &mut S,
    samples: &mut [i32],
    field: &mut FieldStats,
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
    // The values the weights multiply, then the kernel on them: `classify_windows`'s two
    // steps, with the values kept for the field statistics.
    let mut values = [0i32; MAX_CHANNELS];
    let n = model
        .channel_values(&readings, &windows, &mut values)
        .map_err(|f| match f {
            SignalFault::Reading(r) => StationFault::Reading(r),
            other => StationFault::Window(other),
        })?;
    let values = values.get(..n).unwrap_or(&[]);
    let d = model.classify(values).map_err(StationFault::Reading)?;
    count_decided(model, field, &d, values);
    Ok(d)
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
