//! Synthetic separable bench logs of any size, for benchmarks, footprint runs and
//! trying Linegate at scale. SYNTHETIC: a hidden random hyperplane labels uniform
//! readings, and units closer to it than the requested margin are redrawn.

use std::io::Write;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Writes `rows` units × `channels` readings in [0, 1000) with three decimals, labelled
/// GO/NO-GO, comma-separated.
///
/// `margin`: the gap (in the hidden hyperplane's units, readings scaled to [-1, 1]) kept
/// empty on each side, so the log is separable with at least that margin.
///
/// # Errors
/// Any write error.
pub fn write_log(
    out: &mut impl Write,
    rows: usize,
    channels: usize,
    margin: f64,
    seed: u64,
) -> std::io::Result<()> {
    write_log_delimited(out, rows, channels, margin, seed, b',')
}

/// The delimiter a log written to `path` should have: tab for `.tsv`, `.tab` and `.txt`
/// (tab-delimited text), comma otherwise.
pub fn delimiter_for(path: &std::path::Path) -> u8 {
    let tab = path.extension().is_some_and(|e| {
        ["tsv", "tab", "txt"]
            .iter()
            .any(|t| e.eq_ignore_ascii_case(t))
    });
    if tab { b'\t' } else { b',' }
}

/// [`write_log`] with another field delimiter.
///
/// # Errors
/// Any write error.
pub fn write_log_delimited(
    out: &mut impl Write,
    rows: usize,
    channels: usize,
    margin: f64,
    seed: u64,
    delimiter: u8,
) -> std::io::Result<()> {
    let sep = char::from(delimiter);
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let w: Vec<f64> = (0..channels).map(|_| rng.gen_range(-1.0..1.0)).collect();
    let norm = w.iter().map(|v| v * v).sum::<f64>().sqrt();
    let b: f64 = rng.gen_range(-0.2..0.2) * norm;
    write!(out, "unit_id")?;
    for j in 0..channels {
        write!(out, "{sep}ch{j:02}")?;
    }
    writeln!(out, "{sep}label")?;
    let mut x = vec![0.0f64; channels];
    let mut line = String::with_capacity(16 * channels);
    let mut n = 0;
    while n < rows {
        for v in x.iter_mut() {
            *v = f64::from(rng.gen_range(0u32..1_000_000)) / 1000.0;
        }
        let s: f64 = w
            .iter()
            .zip(&x)
            .map(|(w, v)| w * (v / 500.0 - 1.0))
            .sum::<f64>()
            + b;
        if s.abs() < margin * norm {
            continue;
        }
        line.clear();
        line.push_str(&format!("U{n}"));
        for v in &x {
            line.push_str(&format!("{sep}{v:.3}"));
        }
        line.push(sep);
        line.push_str(if s > 0.0 { "GO\n" } else { "NO-GO\n" });
        out.write_all(line.as_bytes())?;
        n += 1;
    }
    Ok(())
}

/// A channel sheet for [`write_log`]'s channels: range [0, 1000] at lsb 0.001.
pub fn sheet(channels: usize) -> String {
    let mut s = String::from("# Channel sheet for a SYNTHETIC log from `linegate generate`.\n");
    for j in 0..channels {
        s.push_str(&format!(
            "\n[[channel]]\nname = \"ch{j:02}\"\nmin = 0.0\nmax = 1000.0\nlsb = 0.001\n"
        ));
    }
    s
}
