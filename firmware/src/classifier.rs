//! The model as the device holds it.

use shared_model::{
    CheckedModel, ClassSection, Decision, DecodeError, Fault, Inputs, Outcomes, Readings, TwoSided,
    blob,
};

use crate::ReleaseKey;

/// A validated model, ready to classify: of readings alone (`Classifier`, the default
/// kind) or of readings and sample windows (`Classifier<SignalSection>`, which loads every
/// blob format version of two-sided models), as `shared_model::Inputs` says; two-sided
/// (`K` = `TwoSided`, the default: GO / NO-GO / RECHECK) or of several classes
/// (`K` = `ClassSection`: loads versions 1 to 6, two-sided blobs decide as before).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Classifier<I: Inputs = Readings, K: Outcomes = TwoSided> {
    model: CheckedModel<I, K>,
    blob_id: u32,
    key_id: Option<[u8; blob::KEY_ID_LEN]>,
}

impl Classifier {
    /// Validates the blob stored in a flash region, for a station that passes readings
    /// alone (a version-3 blob is refused: [`DecodeError::Signals`]).
    ///
    /// The region may be longer than the blob (erased flash after it): the
    /// header's payload length says where the blob ends.
    ///
    /// # Errors
    /// Any [`DecodeError`]: the device must then hold NO-GO.
    pub fn from_flash(region: &[u8]) -> Result<Self, DecodeError> {
        Self::load(region, None)
    }

    /// Validates the blob in a flash region and requires its signature to verify against
    /// `key`: a version-1 (unsigned) blob, another key's blob or a bad signature is refused.
    ///
    /// # Errors
    /// Any [`DecodeError`], including [`DecodeError::Unsigned`],
    /// [`DecodeError::UnknownKey`] and [`DecodeError::BadSignature`].
    pub fn from_flash_signed(region: &[u8], key: &ReleaseKey) -> Result<Self, DecodeError> {
        Self::load(region, Some(key))
    }
}

impl<I: Inputs> Classifier<I, ClassSection> {
    /// Validates the blob in a flash region into a model that may decide between several
    /// classes (format versions 1 to 6; a version-1 to 4 blob is two-sided and decides as
    /// it always did), its signature checked first against `key` when one is given.
    ///
    /// # Errors
    /// Any [`DecodeError`]; the device must then hold NO-GO.
    #[inline(always)]
    pub fn from_flash_classes(
        region: &[u8],
        key: Option<&ReleaseKey>,
    ) -> Result<Self, DecodeError> {
        Self::load(region, key)
    }
}

impl<I: Inputs, K: Outcomes> Classifier<I, K> {
    /// Validates a blob in `region` into a model of input kind `I` and outcome kind `K` (the
    /// one loader of every kind: [`from_flash`](Classifier::from_flash) for readings, the
    /// station's `with_windows` for windows), checking its signature first when `key` is
    /// given.
    ///
    /// Always inlined: where `key` is a constant `None` the signature verifier then drops
    /// out of the image, which keeps an unsigned build's panic-never proof free of it.
    #[inline(always)]
    pub(crate) fn load(region: &[u8], key: Option<&ReleaseKey>) -> Result<Self, DecodeError> {
        let bytes = blob_in(region, key)?;
        // decode proves the length, so the id is there; 0 is never reached.
        let blob_id = blob::blob_id(bytes).unwrap_or(0);
        let key_id = blob::signature(bytes).map(|s| s.key_id);
        // The model decoded straight into its place: a named temporary would be one more
        // copy of it on the start-up stack.
        Ok(Self {
            model: blob::decode_as(bytes)?,
            blob_id,
            key_id,
        })
    }

    /// Classifies one reading per channel with the shared kernel.
    ///
    /// # Errors
    /// A [`Fault`] if the count is wrong or a reading is outside its valid range.
    pub fn classify(&self, raw: &[i32]) -> Result<Decision, Fault> {
        self.model.classify(raw)
    }

    /// Number of channels the sensor source must fill.
    pub fn channel_count(&self) -> usize {
        self.model.channel_count()
    }

    /// The model id recorded by the host, for logs.
    pub fn model_id(&self) -> [u8; 16] {
        self.model.model().model_id
    }

    /// The blob id (its CRC-32, see `shared_model::blob::blob_id`), for logs.
    pub fn blob_id(&self) -> u32 {
        self.blob_id
    }

    /// The id of the key that signed the blob, for a signed blob (checked only when the
    /// classifier was loaded with [`from_flash_signed`](Self::from_flash_signed)).
    pub fn key_id(&self) -> Option<[u8; blob::KEY_ID_LEN]> {
        self.key_id
    }

    /// The validated model.
    pub fn model(&self) -> &CheckedModel<I, K> {
        &self.model
    }

    /// The classes of a model of several classes; `None` for a two-sided model.
    pub fn classes(&self) -> Option<&ClassSection> {
        self.model.classes()
    }

    /// How many classes the model decides between (0 for a two-sided model).
    pub fn class_count(&self) -> usize {
        self.classes().map_or(0, |c| c.rows.len())
    }

    /// The name of class `class` (as a step's `Decision::class` gives it), or `None` for a
    /// two-sided model or an index past the classes.
    pub fn class_name(&self, class: u8) -> Option<&str> {
        self.classes()?
            .rows
            .get(usize::from(class))
            .map(|r| r.name.as_str())
    }
}

/// The blob at the start of a flash region (the header says its length), its signature
/// checked first when `key` is given. Always inlined, for the reason given at
/// [`Classifier::load`].
#[inline(always)]
pub(crate) fn blob_in<'a>(
    region: &'a [u8],
    key: Option<&ReleaseKey>,
) -> Result<&'a [u8], DecodeError> {
    let header = blob::Header::read(region)?;
    let len = header.blob_len();
    let bytes = region.get(..len).ok_or(DecodeError::Truncated {
        needed: len,
        got: region.len(),
    })?;
    if let Some(k) = key {
        k.verify(bytes)?;
    }
    Ok(bytes)
}
