//! Any text as a float model file: loading returns a model or an error, never panics; an
//! accepted model quantises or is refused with an error, never a panic.
#![no_main]

use host_trainer::release::quantise::{QuantConfig, quantise};
use host_trainer::train::float_model::FloatModel;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Ok(fm) = FloatModel::from_text(std::path::Path::new("fuzz.json"), text) {
        for bits in [8u8, 16] {
            let _ = quantise(
                &fm,
                None,
                QuantConfig {
                    weight_bits: bits,
                    ..QuantConfig::default()
                },
            );
        }
    }
});
