//! Packing: the model blob, raw `.bin` and Intel HEX images, and `inspect`.

use serde::Serialize;
use shared_model::features::{SignalSpec, Source};
use shared_model::{
    ChannelSpec, CheckedModel, ClassSection, DecodeError, Inputs, Outcomes, SignalSection, blob,
};

/// A model read from any blob the host takes: readings or signal features, two-sided or
/// deciding between several classes (`blob::decode_classes` reads versions 1 to 6).
pub type DeviceModel = CheckedModel<SignalSection, ClassSection>;

/// The blob bytes of a model (format version 1, 3 with signal features, 5 with classes).
pub fn blob_bytes<I: Inputs, K: Outcomes>(model: &CheckedModel<I, K>) -> Vec<u8> {
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    // MAX_BLOB_LEN holds any valid model with its largest signal section, so encode
    // cannot fail here.
    let n = blob::encode(model, &mut buf).unwrap_or(0);
    buf[..n].to_vec()
}

/// The blob within a flash image (`.hex` or `.bin`): erased flash (0xFF bytes) after the
/// blob's declared end is not part of it (FORMAT.md, "Flash images"), whether the blob is
/// signed or not. Anything else after it stays, for the decoder to refuse as trailing
/// bytes.
pub fn blob_of_image(image: &[u8]) -> &[u8] {
    let Ok(h) = blob::Header::read(image) else {
        return image;
    };
    match image.split_at_checked(h.blob_len()) {
        Some((blob, rest)) if rest.iter().all(|&b| b == 0xFF) => blob,
        _ => image,
    }
}

/// What `inspect` reports of a blob, valid or not.
#[derive(Clone, Debug, Serialize)]
pub struct Inspection {
    /// Bytes in the file.
    pub bytes: usize,
    /// Format version in the header, if readable.
    pub version: Option<u16>,
    /// CRC stored in the blob, if present.
    pub crc_stored: Option<String>,
    /// CRC computed over the bytes before it.
    pub crc_computed: Option<String>,
    /// "ok" or the decode error.
    pub status: String,
    /// Model id, hex.
    pub model_id: Option<String>,
    /// Blob id (its stored CRC-32, eight hex digits), as the device prints it.
    pub blob_id: Option<String>,
    /// SHA-256 of the blob's bytes, hex (what an audit report records of the blob).
    pub sha256: String,
    /// The signing key's id, for a signed (version-2) blob.
    pub key_id: Option<String>,
    /// Audit mark.
    pub audit: Option<String>,
    /// Input word bits.
    pub input_bits: Option<u8>,
    /// Weight word bits.
    pub weight_bits: Option<u8>,
    /// Weight fractional bits.
    pub weight_frac_bits: Option<u8>,
    /// Accumulator bits.
    pub acc_bits: Option<u8>,
    /// Whether the device kernel runs this model in 32-bit arithmetic only
    /// (`CheckedModel::is_narrow`: a proved 32-bit accumulator and conversions below 2^31).
    pub narrow: Option<bool>,
    /// Bias.
    pub bias: Option<i64>,
    /// NO-GO at or below.
    pub nogo_max: Option<i64>,
    /// GO at or above.
    pub go_min: Option<i64>,
    /// Channels, as stored.
    pub channels: Vec<ChannelSpec>,
    /// The signals' windows (format version 3 or 4; empty otherwise).
    pub signals: Vec<SignalSpec>,
    /// Each channel's source, a reading or a signal's feature (empty without signals).
    pub sources: Vec<Source>,
    /// A model of several classes (format version 5 or 6): its classes and their rule.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub classes: Option<InspectedClasses>,
}

/// The class section of a blob, as `inspect` shows it.
#[derive(Clone, Debug, Serialize)]
pub struct InspectedClasses {
    /// The GO class's name; `None` when no class is GO.
    pub go_class: Option<String>,
    /// Least lead (accumulator units) with which the GO class is decided.
    pub go_gap: i64,
    /// Least lead (accumulator units) with which a failure class is decided.
    pub class_gap: i64,
    /// Each class: name, bias and one weight per channel.
    pub rows: Vec<InspectedRow>,
}

/// One class row of a blob.
#[derive(Clone, Debug, Serialize)]
pub struct InspectedRow {
    /// The class's name.
    pub name: String,
    /// Bias, accumulator units.
    pub bias: i64,
    /// Weights in channel order.
    pub weights: Vec<i32>,
}

impl InspectedClasses {
    fn of(c: &ClassSection) -> Self {
        Self {
            go_class: c.go_class().map(|k| c.name(k).to_string()),
            go_gap: c.go_gap,
            class_gap: c.class_gap,
            rows: c
                .rows
                .iter()
                .map(|r| InspectedRow {
                    name: r.name.to_string(),
                    bias: r.bias,
                    weights: r.weights.iter().copied().collect(),
                })
                .collect(),
        }
    }
}

/// Decodes a blob of any format version for display; a corrupt blob still shows what can
/// be read.
pub fn inspect(bytes: &[u8]) -> (Inspection, Result<DeviceModel, DecodeError>) {
    let decoded = blob::decode_classes::<SignalSection>(bytes);
    let header = blob::Header::read(bytes).ok();
    let (mut crc_stored, mut crc_computed) = (None, None);
    if let Some(h) = header {
        let body = blob::HEADER_LEN + usize::from(h.payload_len);
        if let Some(c) = bytes.get(body..body + blob::CRC_LEN) {
            crc_stored = Some(format!(
                "{:#010x}",
                u32::from_le_bytes([c[0], c[1], c[2], c[3]])
            ));
            crc_computed = Some(format!("{:#010x}", blob::CRC32.checksum(&bytes[..body])));
        }
    }
    let mut ins = Inspection {
        bytes: bytes.len(),
        version: header.map(|h| h.version),
        crc_stored,
        crc_computed,
        status: match &decoded {
            Ok(_) => "ok".into(),
            Err(e) => e.to_string(),
        },
        model_id: None,
        blob_id: None,
        sha256: crate::digest::sha256_hex(bytes),
        key_id: blob::signature(bytes).map(|s| crate::digest::lower_hex(&s.key_id)),
        audit: None,
        input_bits: None,
        weight_bits: None,
        weight_frac_bits: None,
        acc_bits: None,
        narrow: None,
        bias: None,
        nogo_max: None,
        go_min: None,
        channels: Vec::new(),
        signals: Vec::new(),
        sources: Vec::new(),
        classes: None,
    };
    if let Ok(m) = &decoded {
        ins.classes = m.classes().map(InspectedClasses::of);
        ins.signals = m.signals().signals.iter().copied().collect();
        ins.sources = m.signals().sources.iter().copied().collect();
        ins.narrow = Some(m.is_narrow());
        let m = m.model();
        ins.model_id = Some(crate::digest::lower_hex(&m.model_id));
        ins.blob_id = blob::blob_id(bytes).map(|id| format!("{id:08x}"));
        ins.audit = Some(format!("{:?}", m.audit));
        ins.input_bits = Some(m.input_bits);
        ins.weight_bits = Some(m.weight_bits);
        ins.weight_frac_bits = Some(m.weight_frac_bits);
        ins.acc_bits = Some(m.acc_bits);
        ins.bias = Some(m.bias);
        ins.nogo_max = Some(m.nogo_max);
        ins.go_min = Some(m.go_min);
        ins.channels = m.channels.iter().cloned().collect();
    }
    (ins, decoded)
}
