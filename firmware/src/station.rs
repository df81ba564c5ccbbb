//! One test station: classifier + sensors + lines, fail-safe.

use embedded_hal::digital::OutputPin;
use heapless::Vec;
use shared_model::{Decision, DecodeError, Fault, MAX_CHANNELS};

use crate::{Classifier, GoNoGoLines, ReleaseKey, SensorSource};

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
        match decided {
            Ok(d) => {
                self.last_fault = None;
                self.lines.show(d.verdict)?;
                Ok(Step::Decided(d))
            }
            Err(fault) => {
                let first = self.last_fault != Some(fault);
                self.last_fault = Some(fault);
                self.lines.safe()?;
                Ok(Step::Faulted { fault, first })
            }
        }
    }

    /// Gives the sensor source and the lines back.
    pub fn release(self) -> (S, GoNoGoLines<G, N, R>) {
        (self.sensor, self.lines)
    }
}
