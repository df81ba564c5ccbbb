//! The model as the device holds it.

use shared_model::{CheckedModel, Decision, DecodeError, Fault, Inputs, Readings, blob};

use crate::ReleaseKey;

/// A validated model, ready to classify: of readings alone (`Classifier`, the default
/// kind) or of readings and sample windows (`Classifier<SignalSection>`, which loads every
/// blob format version), as `shared_model::Inputs` says.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Classifier<I: Inputs = Readings> {
    model: CheckedModel<I>,
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

impl<I: Inputs> Classifier<I> {
    /// Validates a blob in `region` into a model of input kind `I` (the one loader of
    /// both kinds: [`from_flash`](Classifier::from_flash) for readings, the station's
    /// `with_windows` for windows), checking its signature first when `key` is given.
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
            model: blob::decode(bytes)?,
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
    pub fn model(&self) -> &CheckedModel<I> {
        &self.model
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
