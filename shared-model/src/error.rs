//! Typed errors, one enum per phase: building a model, encoding, decoding, classifying.

use core::fmt;

/// Why a fixed model was refused by validation (`CheckedModel::new`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ModelError {
    /// The model has no channels.
    ZeroChannels,
    /// `input_bits` is not 8 or 16.
    InputFormat(u8),
    /// `weight_bits` is outside 2..=32 or `weight_frac_bits` outside 0..=62.
    WeightFormat {
        /// Declared weight word length.
        bits: u8,
        /// Declared fractional bits.
        frac: u8,
    },
    /// `acc_bits` is not 32 or 64.
    AccumulatorFormat(u8),
    /// `raw_min > raw_max` on this channel.
    InvertedRange {
        /// Channel index.
        channel: u8,
    },
    /// Multiplier below 1, shift above 62, offset outside the valid range, or a range of 2^31 or wider.
    Conversion {
        /// Channel index.
        channel: u8,
    },
    /// A reading inside the valid range would scale outside the input word.
    ConversionOutOfRange {
        /// Channel index.
        channel: u8,
    },
    /// The weight does not fit the declared weight word.
    WeightOutOfRange {
        /// Channel index.
        channel: u8,
    },
    /// Thresholds out of order: `nogo_max` must be below `go_min`.
    ThresholdsOutOfOrder,
    /// Some in-range input could overflow the declared accumulator.
    AccumulatorOverflow {
        /// Bits the worst-case score needs, sign included.
        needed_bits: u8,
        /// Bits declared.
        declared_bits: u8,
    },
    /// The signal section lists a source count other than the channel count.
    Sources,
    /// A feature channel names a signal the model does not have.
    SignalIndex {
        /// Channel index.
        channel: u8,
    },
    /// A feature channel's signal or feature was refused (see [`SignalError`]).
    Signal {
        /// Channel index.
        channel: u8,
        /// Why.
        error: SignalError,
    },
    /// A model of several classes needs 2..=8 class rows; it has this many.
    ClassCount(u8),
    /// A class row does not give one weight per channel.
    ClassWeights {
        /// Class index.
        class: u8,
    },
    /// A class row's weight does not fit the declared weight word.
    ClassWeightOutOfRange {
        /// Class index.
        class: u8,
        /// Channel index.
        channel: u8,
    },
    /// A class name is empty, repeats an earlier class's name, or is not printable ASCII
    /// without spaces and `#`.
    ClassName {
        /// Class index.
        class: u8,
    },
    /// The GO class index names no class (and is not 255, "no GO class").
    GoClass(u8),
    /// A class gap below 1: equal scores would decide.
    ClassGap,
    /// A model of several classes must leave the two-sided fields unused: every channel's
    /// weight and the bias 0, NO-GO maximum −1, GO minimum 0.
    ClassUnusedFields,
}

impl fmt::Display for ModelError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::ZeroChannels => f.write_str("model has no channels"),
            Self::InputFormat(b) => {
                write!(f, "input word of {b} bits is not supported (use 8 or 16)")
            }
            Self::WeightFormat { bits, frac } => write!(
                f,
                "weight Q-format with {bits}-bit words and {frac} fractional bits is out of range (words 2..=32, fraction 0..=62)"
            ),
            Self::AccumulatorFormat(b) => {
                write!(f, "accumulator of {b} bits is not supported (use 32 or 64)")
            }
            Self::InvertedRange { channel } => {
                write!(f, "channel {channel}: valid range is inverted (min > max)")
            }
            Self::Conversion { channel } => write!(
                f,
                "channel {channel}: conversion needs multiplier >= 1, shift <= 62, offset inside the valid range and a range narrower than 2^31"
            ),
            Self::ConversionOutOfRange { channel } => {
                write!(
                    f,
                    "channel {channel}: an in-range reading scales outside the input word"
                )
            }
            Self::WeightOutOfRange { channel } => {
                write!(
                    f,
                    "channel {channel}: weight does not fit the declared weight word"
                )
            }
            Self::ThresholdsOutOfOrder => {
                f.write_str("thresholds out of order: NO-GO maximum must be below GO minimum")
            }
            Self::AccumulatorOverflow {
                needed_bits,
                declared_bits,
            } => write!(
                f,
                "worst-case score needs {needed_bits} bits but the accumulator declares {declared_bits}"
            ),
            Self::Sources => f.write_str("the signal section must give one source per channel"),
            Self::SignalIndex { channel } => {
                write!(
                    f,
                    "channel {channel}: its feature names a signal the model does not have"
                )
            }
            Self::Signal { channel, error } => write!(f, "channel {channel}: {error}"),
            Self::ClassCount(n) => write!(
                f,
                "a model of several classes needs 2 to {} class rows, not {n}",
                crate::limits::MAX_CLASSES
            ),
            Self::ClassWeights { class } => {
                write!(f, "class {class}: its row must give one weight per channel")
            }
            Self::ClassWeightOutOfRange { class, channel } => write!(
                f,
                "class {class}, channel {channel}: weight does not fit the declared weight word"
            ),
            Self::ClassName { class } => write!(
                f,
                "class {class}: its name is empty, repeats another class's, or is not one word of printable ASCII without '#'"
            ),
            Self::GoClass(k) => write!(f, "GO class {k} names no class row"),
            Self::ClassGap => f.write_str("class gaps must be at least 1"),
            Self::ClassUnusedFields => f.write_str(
                "a model of several classes must leave the two-sided weights, bias and thresholds at 0, 0, -1, 0",
            ),
        }
    }
}

impl core::error::Error for ModelError {}

/// Why a blob could not be decoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DecodeError {
    /// Fewer bytes than the header or the declared payload needs.
    Truncated {
        /// Bytes the blob must have.
        needed: usize,
        /// Bytes given.
        got: usize,
    },
    /// The blob does not start with the Linegate magic.
    BadMagic,
    /// The format version is not one this build reads.
    UnsupportedVersion(u16),
    /// Bytes follow the CRC.
    TrailingBytes {
        /// Bytes the blob should have.
        expected: usize,
        /// Bytes given.
        got: usize,
    },
    /// The stored CRC-32 does not match the bytes.
    CrcMismatch {
        /// CRC stored in the blob.
        stored: u32,
        /// CRC computed over the blob.
        computed: u32,
    },
    /// The header declares more channels than [`MAX_CHANNELS`](crate::limits::MAX_CHANNELS).
    ChannelOverCapacity(u8),
    /// The payload does not parse as a model.
    MalformedPayload,
    /// The header's channel count disagrees with the payload, or the payload has unread bytes.
    InconsistentLengths,
    /// The payload parsed but the model is not valid.
    Invalid(ModelError),
    /// The blob's model has signal features (version 3 or 4): it needs a station that
    /// passes sample windows (`CheckedModel<SignalSection>`), not readings alone.
    Signals,
    /// The blob's model decides between several classes (version 5 or 6): it needs a
    /// station that reports classes (`CheckedModel<_, ClassSection>`).
    Classes,
    /// A signature is required and the blob has none (a version-1 or 3 blob).
    Unsigned,
    /// The blob is signed by a key this device does not hold.
    UnknownKey,
    /// The signature does not verify over the blob's bytes.
    BadSignature,
}

impl fmt::Display for DecodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::Truncated { needed, got } => {
                write!(f, "blob truncated: needs {needed} bytes, got {got}")
            }
            Self::BadMagic => f.write_str("not a Linegate model blob (bad magic)"),
            Self::UnsupportedVersion(v) => write!(
                f,
                "blob format version {v} is not supported by this build (reads versions {} to {})",
                crate::limits::FORMAT_VERSION,
                crate::limits::SIGNED_CLASS_VERSION
            ),
            Self::Signals => f.write_str(
                "blob's model has signal features: load it where sample windows are passed",
            ),
            Self::Classes => f.write_str(
                "blob's model decides between several classes: load it where classes are reported",
            ),
            Self::TrailingBytes { expected, got } => {
                write!(
                    f,
                    "blob has trailing bytes: expected {expected} bytes, got {got}"
                )
            }
            Self::CrcMismatch { stored, computed } => write!(
                f,
                "blob CRC mismatch: stored {stored:#010x}, computed {computed:#010x} (corrupt blob)"
            ),
            Self::ChannelOverCapacity(n) => write!(
                f,
                "blob declares {n} channels; this build holds at most {}",
                crate::limits::MAX_CHANNELS
            ),
            Self::MalformedPayload => f.write_str("blob payload is malformed"),
            Self::InconsistentLengths => f.write_str("blob header and payload disagree on lengths"),
            Self::Invalid(e) => write!(f, "blob holds an invalid model: {e}"),
            Self::Unsigned => f.write_str("blob is not signed, and a signature is required"),
            Self::UnknownKey => f.write_str("blob is signed by a key this device does not accept"),
            Self::BadSignature => {
                f.write_str("blob signature does not verify (the blob was changed after signing)")
            }
        }
    }
}

impl core::error::Error for DecodeError {}

impl From<ModelError> for DecodeError {
    fn from(e: ModelError) -> Self {
        Self::Invalid(e)
    }
}

/// Why a model could not be encoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EncodeError {
    /// The output buffer is too small; [`MAX_BLOB_LEN`](crate::limits::MAX_BLOB_LEN) always suffices.
    BufferTooSmall,
}

impl fmt::Display for EncodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("output buffer too small for the model blob")
    }
}

impl core::error::Error for EncodeError {}

/// Why a set of readings could not be classified. The device treats every fault as NO-GO.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Fault {
    /// The number of readings differs from the model's channel count.
    ReadingCount {
        /// Channels in the model.
        expected: u8,
        /// Readings given.
        got: usize,
    },
    /// A reading lies outside its channel's valid raw range.
    OutOfRange {
        /// Channel index.
        channel: u8,
        /// The refused raw reading.
        raw: i32,
    },
}

impl fmt::Display for Fault {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::ReadingCount { expected, got } => {
                write!(f, "expected {expected} readings, got {got}")
            }
            Self::OutOfRange { channel, raw } => {
                write!(
                    f,
                    "channel {channel}: reading {raw} is outside the valid range"
                )
            }
        }
    }
}

impl core::error::Error for Fault {}

/// Why a signal feature was refused by validation (`CheckedFeature::new`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SignalError {
    /// `raw_min > raw_max`.
    InvertedRange,
    /// The offset lies outside the valid range, or the range is 2^31 counts or wider.
    Offset,
    /// The window length is 0 or above `MAX_WINDOW`.
    Window(u16),
    /// Some window of valid samples could overflow the feature's integers or its result.
    Overflow,
    /// A Goertzel coefficient above 2^30 in size (2cos ω·2^29 never is).
    Coefficient(i32),
}

impl fmt::Display for SignalError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::InvertedRange => f.write_str("signal range is inverted (raw_min > raw_max)"),
            Self::Offset => f.write_str(
                "signal offset lies outside the valid range, or the range spans 2^31 counts or more",
            ),
            Self::Window(n) => write!(
                f,
                "window of {n} samples (use 1 to {})",
                crate::limits::MAX_WINDOW
            ),
            Self::Overflow => f.write_str(
                "the feature of this window could overflow its integers: shorten the window or narrow the sample range",
            ),
            Self::Coefficient(c) => {
                write!(f, "Goertzel coefficient {c} is above 2^30 in size")
            }
        }
    }
}

/// Why a window of samples could not be reduced to its feature. The device treats it as a
/// fault: NO-GO.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WindowFault {
    /// The window holds a different number of samples than declared.
    Length {
        /// Samples declared.
        expected: u16,
        /// Samples given.
        got: usize,
    },
    /// A sample lies outside the signal's valid raw range.
    OutOfRange {
        /// Index of the first such sample in the window.
        index: u16,
        /// The refused raw sample.
        raw: i32,
    },
}

impl fmt::Display for WindowFault {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::Length { expected, got } => {
                write!(f, "expected a window of {expected} samples, got {got}")
            }
            Self::OutOfRange { index, raw } => {
                write!(f, "sample {index}: {raw} is outside the valid range")
            }
        }
    }
}

/// Why a unit given as readings and sample windows could not be classified. The device
/// treats every fault as NO-GO.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SignalFault {
    /// The number of windows differs from the model's signal count.
    Windows {
        /// Signals in the model.
        expected: u8,
        /// Windows given.
        got: usize,
    },
    /// A signal's window was refused.
    Window {
        /// Signal index.
        signal: u8,
        /// Why.
        fault: WindowFault,
    },
    /// A reading (or a feature, as its channel's reading) was refused.
    Reading(Fault),
}

impl fmt::Display for SignalFault {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::Windows { expected, got } => {
                write!(f, "expected {expected} sample windows, got {got}")
            }
            Self::Window { signal, fault } => write!(f, "signal {signal}: {fault}"),
            Self::Reading(fault) => fault.fmt(f),
        }
    }
}

impl From<Fault> for SignalFault {
    fn from(f: Fault) -> Self {
        Self::Reading(f)
    }
}

impl core::error::Error for SignalError {}
impl core::error::Error for WindowFault {}
impl core::error::Error for SignalFault {}
