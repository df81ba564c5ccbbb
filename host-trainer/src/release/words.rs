//! The pieces every quantiser starts from (one row or several): the word lengths checked,
//! each channel's conversion and κ, the accumulator scale that fills the weight word, the
//! blob's channel list. The quantisers' own error (`QuantError`) is made from
//! [`WordError`].

use shared_model::ChannelSpec;

use crate::train::float_model::FloatModel;

/// Why the words or the channel list cannot be made.
#[derive(Debug)]
pub enum WordError {
    /// Word lengths the blob does not support, or too many channels.
    Format(String),
    /// A channel name over 24 bytes.
    Name(String),
}

/// Each channel's (multiplier, shift) and its κᵢ.
pub type Conversions = (Vec<(i32, u8)>, Vec<f64>);

/// Each channel's conversion (multiplier, shift) at the input word and its
/// κᵢ = multiplierᵢ / 2^shiftᵢ, once the word lengths are checked: what every quantiser
/// (one row or several) starts from.
///
/// # Errors
/// [`WordError::Format`] for word lengths the blob does not support.
pub fn conversions(
    fm: &FloatModel,
    input_bits: u8,
    weight_bits: u8,
) -> Result<Conversions, WordError> {
    if input_bits != 8 && input_bits != 16 || !(2..=32).contains(&weight_bits) {
        return Err(WordError::Format(format!(
            "{input_bits}-bit inputs, {weight_bits}-bit weights"
        )));
    }
    let conv: Vec<(i32, u8)> = fm
        .channels
        .iter()
        .map(|c| c.conversion(input_bits))
        .collect();
    let kappa = conv
        .iter()
        .map(|&(m, s)| f64::from(m) / 2f64.powi(i32::from(s)))
        .collect();
    Ok((conv, kappa))
}

/// The accumulator scale A for the largest ideal weight ratio `max_r` (|wᵢ|/(halfᵢ·κᵢ) over
/// every weight), the blob's fractional bits, and the largest weight word value.
pub fn word_scale(max_r: f64, input_bits: u8, weight_bits: u8) -> (f64, u8, f64) {
    let wmax = ((1i64 << (weight_bits - 1)) - 1) as f64;
    let fx = i32::from(input_bits) - 1;
    // A fills the weight word: the largest ideal weight is exactly ±Wmax. The float score's unit
    // is arbitrary, so this costs nothing; a pure power of two would leave up to one bit unused.
    let scale = if max_r > 0.0 {
        wmax / max_r
    } else {
        2f64.powi(fx)
    };
    let k = (scale.log2().floor() as i32).clamp(fx, fx + 62);
    (scale, (k - fx) as u8, wmax)
}

/// The blob's channel list: each channel's name, range, conversion and weight.
///
/// # Errors
/// [`WordError::Name`] for a name over 24 bytes, [`WordError::Format`] for too many
/// channels.
pub fn channel_specs(
    fm: &FloatModel,
    conv: &[(i32, u8)],
    weights: &[i32],
) -> Result<heapless::Vec<ChannelSpec, { shared_model::MAX_CHANNELS }>, WordError> {
    let mut channels = heapless::Vec::new();
    for ((c, &(multiplier, shift)), &weight) in fm.channels.iter().zip(conv).zip(weights) {
        let name = heapless::String::try_from(c.name.as_str())
            .map_err(|_| WordError::Name(c.name.clone()))?;
        let spec = ChannelSpec {
            name,
            raw_min: c.raw_min,
            raw_max: c.raw_max,
            offset: c.offset,
            multiplier,
            shift,
            weight,
        };
        channels
            .push(spec)
            .map_err(|_| WordError::Format(format!("{} channels", fm.channels.len())))?;
    }
    Ok(channels)
}
