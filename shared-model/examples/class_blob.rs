//! Writes a blob of several classes over the channels of a two-sided blob: the footprint
//! script's class model (`ClassSection::example_over`, weights drawn from a seed).
//!
//! Usage: `cargo run -p shared-model --example class_blob -- IN.lgmb OUT.lgmb CLASSES GO SEED`
//! (`GO` the GO class's index, 255 for none). Prints which kernel the device runs for it
//! (`device kernel in 32-bit` or `64-bit`).

use shared_model::{CheckedModel, ClassSection, SignalSection, blob};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let [input, output, classes, go, seed] = args.as_slice() else {
        return Err("usage: class_blob IN.lgmb OUT.lgmb CLASSES GO SEED".into());
    };
    let bytes = std::fs::read(input)?;
    let base: CheckedModel<SignalSection> =
        blob::decode(&bytes).map_err(|e| format!("{input}: {e}"))?;
    if base.signal_count() != 0 {
        return Err(format!("{input}: a model of readings is needed").into());
    }
    let (m, section) =
        ClassSection::example_over(base.model(), classes.parse()?, go.parse()?, seed.parse()?)
            .ok_or("no valid class model of that shape over these channels")?;
    let model = CheckedModel::with_outcomes(m, shared_model::Readings, section)?;
    let mut buf = vec![0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(&model, &mut buf).map_err(|e| format!("{e}"))?;
    std::fs::write(output, &buf[..n])?;
    let bits = if model.is_narrow() { 32 } else { 64 };
    println!("device kernel in {bits}-bit");
    Ok(())
}
