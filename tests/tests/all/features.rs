//! Signal features against outside references: `tests/verify/features.py` recomputes every
//! feature with Python's exact integers, `math.isqrt` and numpy, sharing no code with
//! Linegate, and compares the band magnitude with numpy's FFT within the bound
//! `shared_model::features` derives (and Goertzel's published recurrence with the FFT).

use std::io::Write as _;
use std::process::Command;

use rand::{Rng, SeedableRng};
use shared_model::features::{CheckedFeature, Feature, SignalSpec};

/// round(2cos(2πk/N)·2²⁹), the band coefficient of bin k of an N-sample window.
fn coefficient(k: usize, n: usize) -> i32 {
    let w = 2.0 * std::f64::consts::PI * k as f64 / n as f64;
    (2.0 * w.cos() * f64::from(1u32 << 29)).round() as i32
}

/// One window of a signal: the kinds a test station records, plus the range's extremes.
fn window(rng: &mut impl Rng, spec: &SignalSpec, kind: u32, k: usize) -> Vec<i32> {
    let n = usize::from(spec.window);
    let (lo, hi) = (f64::from(spec.raw_min), f64::from(spec.raw_max));
    let mid = f64::from(spec.offset);
    let amp = (hi - mid).min(mid - lo);
    (0..n)
        .map(|i| {
            let v = match kind {
                // A tone on the bin, another off it, and noise.
                0 => {
                    let t = i as f64 / n as f64;
                    mid + 0.6 * amp * (2.0 * std::f64::consts::PI * k as f64 * t).sin()
                        + 0.2 * amp * (2.0 * std::f64::consts::PI * 3.3 * t).cos()
                        + rng.gen_range(-0.1..0.1) * amp
                }
                // Uniform over the whole valid range.
                1 => rng.gen_range(lo..=hi),
                // Only the two ends of the range.
                2 => {
                    if rng.gen_bool(0.5) {
                        lo
                    } else {
                        hi
                    }
                }
                // Constant.
                _ => mid + 0.3 * amp,
            };
            (v.round() as i32).clamp(spec.raw_min, spec.raw_max)
        })
        .collect()
}

#[test]
fn features_agree_with_numpy_and_the_fft() {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(18);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("cases.jsonl");
    let mut out = std::io::BufWriter::new(std::fs::File::create(&path).unwrap());
    let mut cases = 0;
    for &n in &[1usize, 2, 3, 8, 64, 250, 1024, 4096] {
        for bits in [8u32, 12, 16] {
            for kind in 0..4 {
                let top = (1i32 << bits) - 1;
                // An offset at mid-scale (AC signals) or at one end (currents, pressures).
                let offset = match kind % 2 {
                    0 => 1 << (bits - 1),
                    _ => 0,
                };
                let spec = SignalSpec {
                    raw_min: 0,
                    raw_max: top,
                    offset,
                    window: n as u16,
                };
                // Bins: DC, the lowest, a quarter, Nyquist, one at random.
                for k in [0, 1.min(n - 1), n / 4, n / 2, rng.gen_range(0..n)] {
                    let samples = window(&mut rng, &spec, kind, k);
                    let coeff = coefficient(k, n);
                    let mut results = serde_json::Map::new();
                    for (name, f) in [
                        ("Mean", Feature::Mean),
                        ("Rms", Feature::Rms),
                        ("Min", Feature::Min),
                        ("Max", Feature::Max),
                        ("PeakToPeak", Feature::PeakToPeak),
                        ("AbsPeak", Feature::AbsPeak),
                        ("StdDev", Feature::StdDev),
                        ("ZeroCrossings", Feature::ZeroCrossings),
                        ("Band", Feature::Band { coeff }),
                    ] {
                        let checked = CheckedFeature::new(spec, f).unwrap();
                        let v = checked.compute(&samples).unwrap();
                        assert!(v.unsigned_abs() <= checked.bound().unsigned_abs());
                        results.insert(name.into(), v.into());
                    }
                    let case = serde_json::json!({
                        "raw_min": spec.raw_min, "raw_max": spec.raw_max,
                        "offset": spec.offset, "window": n, "samples": samples,
                        "k": k, "coeff": coeff, "results": results,
                    });
                    writeln!(out, "{case}").unwrap();
                    cases += 1;
                }
            }
        }
    }
    out.flush().unwrap();
    drop(out);
    let script = crate::root().join("tests/verify/features.py");
    let o = match Command::new("python3").arg(&script).arg(&path).output() {
        Ok(o) => o,
        Err(e) => return crate::skip_or_fail("signal features against numpy", &e.to_string()),
    };
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    match o.status.code() {
        Some(3) => crate::skip_or_fail("signal features against numpy", &text),
        Some(0) => {
            assert!(
                text.contains(&format!("{cases} windows, 0 disagreeing")),
                "{text}"
            );
            println!("{}", text.trim());
        }
        _ => panic!("the features disagree with the outside reference:\n{text}"),
    }
}
