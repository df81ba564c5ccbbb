//! `linegate inspect`: decode a blob or HEX image, check it against a model or report.

use std::path::{Path, PathBuf};

use anyhow::Result;
use clap::Args;

use super::{CheckFailed, to_json};
use crate::release::{blob_match, image, pack};

/// Flags of `linegate inspect`.
#[derive(Args)]
pub struct InspectArgs {
    /// Blob (.lgmb/.bin) or Intel HEX (.hex).
    pub blob: PathBuf,
    /// Check the blob was made from this float model.
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Check the blob matches this audit report (audit.json).
    #[arg(long)]
    pub report: Option<PathBuf>,
    /// Require a valid signature by this public key file (from `linegate key new`), as a
    /// device built with it does; exit 1 if the blob is unsigned, signed by another key, or
    /// changed after signing.
    #[arg(long, value_name = "PUB_FILE")]
    pub public_key: Option<PathBuf>,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

impl InspectArgs {
    /// Runs `linegate inspect`.
    pub fn run(&self, quiet: bool) -> Result<()> {
        let Self {
            blob,
            model,
            report: rep,
            public_key,
            json,
        } = self;
        inspect(
            blob,
            model.as_deref(),
            rep.as_deref(),
            public_key.as_deref(),
            *json,
            quiet,
        )?;
        Ok(())
    }
}

fn inspect(
    path: &Path,
    model: Option<&Path>,
    rep: Option<&Path>,
    public_key: Option<&Path>,
    json: bool,
    quiet: bool,
) -> Result<()> {
    // A corrupt HEX image is a corrupt blob: exit 1, as for a bad CRC.
    let image::Image {
        load_address,
        blob: bytes,
    } = image::read(path).map_err(|e| {
        if e.is_input() {
            anyhow::Error::new(e)
        } else {
            anyhow::Error::new(CheckFailed(e.to_string()))
        }
    })?;
    let (ins, decoded) = pack::inspect(&bytes);
    if json {
        say_raw!("{}", to_json(&ins));
    } else if !quiet {
        say!(
            "{}: {} bytes, format version {}",
            path.display(),
            ins.bytes,
            ins.version.map_or("?".into(), |v| v.to_string())
        );
        if let Some(a) = load_address {
            say!("Intel HEX image: the blob loads at {a:#010x}");
        }
        say!(
            "CRC-32: stored {}, computed {}",
            ins.crc_stored.as_deref().unwrap_or("–"),
            ins.crc_computed.as_deref().unwrap_or("–")
        );
        // A signed blob is only as good as its signature: say when it was not checked.
        if ins.key_id.is_some() && public_key.is_none() && decoded.is_ok() {
            say!(
                "status: {} (signature present, not checked: give --public-key)",
                ins.status
            );
        } else {
            say!("status: {}", ins.status);
        }
        if let Some(id) = &ins.model_id {
            say!(
                "model id: {id}; blob id: {}; SHA-256 {}\naudit: {}",
                ins.blob_id.as_deref().unwrap_or("?"),
                ins.sha256,
                ins.audit.as_deref().unwrap_or("?")
            );
            say!(
                "inputs Q{} ({}-bit); weights {}-bit, {} fractional bits; accumulator {} bits; device kernel in {}-bit arithmetic",
                ins.input_bits.unwrap_or(0).saturating_sub(1),
                ins.input_bits.unwrap_or(0),
                ins.weight_bits.unwrap_or(0),
                ins.weight_frac_bits.unwrap_or(0),
                ins.acc_bits.unwrap_or(0),
                if ins.narrow == Some(true) { 32 } else { 64 }
            );
            if let Some(c) = &ins.classes {
                say!(
                    "{} classes; GO class {}; a class is decided when it leads the runner-up by at least {} (GO) or {} (a failure class), else RECHECK",
                    c.rows.len(),
                    c.go_class
                        .as_deref()
                        .map_or("none (diagnosis only)".into(), super::shown),
                    c.go_gap,
                    c.class_gap
                );
            } else {
                say!(
                    "bias {}; NO-GO at score <= {}; GO at score >= {}",
                    ins.bias.unwrap_or(0),
                    ins.nogo_max.unwrap_or(0),
                    ins.go_min.unwrap_or(0)
                );
            }
            // As wide as the longest name (up to 24 bytes), 18 at least as before.
            let w = ins
                .channels
                .iter()
                .map(|c| super::shown(c.name.as_str()).chars().count())
                .fold(18, usize::max);
            say!(
                "{:<w$} {:>11} {:>11} {:>11} {:>11} {:>5} {:>11}",
                "channel",
                "raw_min",
                "raw_max",
                "offset",
                "multiplier",
                "shift",
                "weight"
            );
            for c in &ins.channels {
                say!(
                    "{:<w$} {:>11} {:>11} {:>11} {:>11} {:>5} {:>11}",
                    super::shown(c.name.as_str()),
                    c.raw_min,
                    c.raw_max,
                    c.offset,
                    c.multiplier,
                    c.shift,
                    c.weight
                );
            }
            print_classes(&ins);
            print_signals(&ins);
        }
    }
    if !quiet && !json {
        match (&ins.key_id, ins.version) {
            (Some(k), _) => say!("signed: key id {k}"),
            (None, Some(1)) => say!("unsigned (format version 1)"),
            _ => {}
        }
    }
    // A blob that does not decode is reported as what it is (truncated, bad magic…), not
    // as unsigned.
    decoded
        .as_ref()
        .map_err(|e| CheckFailed(format!("{}: {e}", path.display())))?;
    // The other files of the same pack must hold the same blob.
    image::check_set(path, &bytes).map_err(|e| CheckFailed(e.to_string()))?;
    let say_ok = |line: String| {
        if !quiet && !json {
            say!("{line}");
        }
    };
    if let Some(p) = public_key {
        blob_match::signed_by(path, &bytes, p).map_err(failed)?;
        say_ok(format!("signature valid for {}", p.display()));
    }
    if let Some(p) = model {
        blob_match::made_from(path, &bytes, p).map_err(failed)?;
        say_ok(format!("matches float model {}", p.display()));
    }
    if let Some(p) = rep {
        blob_match::audited_as(&ins.sha256, p).map_err(failed)?;
        say_ok(format!("matches audit report {}", p.display()));
    }
    Ok(())
}

/// A file that could not be read is a usage error (exit 2); a blob that does not belong with
/// it is a failed check (exit 1).
fn failed(e: blob_match::BlobCheck) -> anyhow::Error {
    if e.is_input() {
        anyhow::Error::new(e)
    } else {
        anyhow::Error::new(CheckFailed(e.to_string()))
    }
}

/// The class rows of a format-5 blob: one line per class, its bias and weights in channel
/// order (the channel table's weight column is unused, 0, in such a blob).
fn print_classes(ins: &pack::Inspection) {
    let Some(c) = &ins.classes else {
        return;
    };
    say!("class rows (bias, then one weight per channel in the order above):");
    for r in &c.rows {
        let weights: Vec<String> = r.weights.iter().map(i32::to_string).collect();
        say!(
            "  {:<24} {:>11}  {}",
            super::shown(&r.name),
            r.bias,
            weights.join(" ")
        );
    }
}

/// The signals of a format-3 blob and which channels are their features.
fn print_signals(ins: &pack::Inspection) {
    use shared_model::features::Source;
    if ins.signals.is_empty() {
        return;
    }
    say!(
        "signals (windows of raw samples; a station must pass them, format version {}):",
        ins.version.unwrap_or(0)
    );
    for (i, s) in ins.signals.iter().enumerate() {
        say!(
            "  signal {i}: {} samples, valid {}..={}, zero at {}",
            s.window,
            s.raw_min,
            s.raw_max,
            s.offset
        );
    }
    for (c, source) in ins.channels.iter().zip(&ins.sources) {
        if let Source::Feature { signal, feature } = source {
            say!(
                "  channel {} = {feature:?} of signal {signal}",
                super::shown(c.name.as_str())
            );
        }
    }
}
