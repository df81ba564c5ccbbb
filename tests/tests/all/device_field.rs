//! The device's field record against the host's: the example under QEMU prints its record
//! after the units (`# field <hex>`), and it must equal, byte for byte and field for field,
//! the record the host computes over the same units with the same accumulator
//! (`CheckedModel::channel_values`, `classify`, `FieldStats`), the way `linegate replay`
//! reads a log. The plan is derived from the log's scores so that the CUSUMs move and alarm.

use std::path::Path;

use shared_model::field::{CusumPlan, FieldFault, FieldPlan, FieldStats};
use shared_model::{CheckedModel, Fault, SignalFault, SignalSection, blob};

/// One unit's outcome: decided with the values its weights multiplied, or a fault.
enum Outcome {
    Decided(shared_model::Decision, Vec<i32>),
    Faulted(FieldFault),
}

/// Each unit of a vectors file (`#` lines skipped; a row is the readings, then every
/// signal's window) as the example's station takes it: a row that is not one unit of the
/// model is a read failure (other).
fn outcomes(model: &CheckedModel<SignalSection>, vectors: &str) -> Vec<Outcome> {
    let windows: Vec<usize> = model
        .signals()
        .signals
        .iter()
        .map(|s| usize::from(s.window))
        .collect();
    let readings = model.reading_count();
    let width = readings + windows.iter().sum::<usize>();
    vectors
        .lines()
        .filter(|l| !l.trim().is_empty() && !l.starts_with('#'))
        .map(|line| {
            let row: Vec<i32> = line
                .split_whitespace()
                .map(|v| v.parse().unwrap())
                .collect();
            if row.len() != width {
                return Outcome::Faulted(FieldFault::Other);
            }
            let (r, mut rest) = row.split_at(readings);
            let mut ws: Vec<&[i32]> = Vec::new();
            for &w in &windows {
                let (a, b) = rest.split_at(w);
                ws.push(a);
                rest = b;
            }
            let mut values = [0i32; shared_model::MAX_CHANNELS];
            match model.channel_values(r, &ws, &mut values) {
                Err(SignalFault::Window { signal, .. }) => {
                    Outcome::Faulted(FieldFault::Signal(signal))
                }
                Err(SignalFault::Reading(Fault::OutOfRange { channel, .. })) => {
                    Outcome::Faulted(FieldFault::Channel(channel))
                }
                Err(_) => Outcome::Faulted(FieldFault::Other),
                Ok(n) => match model.classify(&values[..n]) {
                    Ok(d) => Outcome::Decided(d, values[..n].to_vec()),
                    Err(Fault::OutOfRange { channel, .. }) => {
                        Outcome::Faulted(FieldFault::Channel(channel))
                    }
                    Err(_) => Outcome::Faulted(FieldFault::Other),
                },
            }
        })
        .collect()
}

/// A plan that makes the statistics move on this log. Bins: from an eighth of the way
/// up the decided scores' range, `2^shift` wide with `32·2^shift` at most the range, so
/// some units fall below and above. GO CUSUM: μ₀ twice the GO units' mean margin `m̄`,
/// k = m̄/4, h = 4·m̄: the log then reads as a downward shift of m̄, and C⁻ gains about
/// 0.75·m̄ a GO unit, so it passes h within a few units (an alarm by design). NO-GO CUSUM:
/// μ₀ the NO-GO units' mean margin, k = a quarter of it, h = 8 times it: in control, its
/// sums move with each unit's deviation.
pub fn plan_for(blob_bytes: &[u8], vectors: &str) -> FieldPlan {
    let model: CheckedModel<SignalSection> = blob::decode(blob_bytes).unwrap();
    let t = model.thresholds();
    let (mut scores, mut go, mut nogo) = (Vec::new(), Vec::new(), Vec::new());
    for o in outcomes(&model, vectors) {
        if let Outcome::Decided(d, _) = o {
            scores.push(d.score);
            match d.verdict {
                shared_model::Verdict::Go => go.push(d.score - t.go_min),
                shared_model::Verdict::NoGo => nogo.push(t.nogo_max - d.score),
                shared_model::Verdict::Recheck => {}
            }
        }
    }
    let mean = |v: &[i64]| v.iter().sum::<i64>() / i64::try_from(v.len().max(1)).unwrap();
    let (lo, hi) = (*scores.iter().min().unwrap(), *scores.iter().max().unwrap());
    let shift = ((hi - lo) / 32).max(1).ilog2() as u8;
    let (g, n) = (mean(&go).max(1), mean(&nogo).max(1));
    FieldPlan {
        blob_id: 0,
        origin: lo + (hi - lo) / 8,
        shift,
        go: CusumPlan {
            target: 2 * g,
            slack: g / 4,
            limit: 4 * g,
        },
        nogo: CusumPlan {
            target: n,
            slack: n / 4,
            limit: 8 * n,
        },
    }
}

/// Writes `plan` as the example's build reads it (LINEGATE_FIELD_PLAN, `key = integer`).
pub fn write_plan(path: &Path, p: &FieldPlan) {
    let text = format!(
        "# field plan (accumulator units)\n{}",
        host_trainer::field::baseline::plan_file(p)
    );
    std::fs::write(path, text).unwrap();
}

/// The host's statistics over a vectors file under `plan` (its blob id the blob's).
pub fn host_record(blob_bytes: &[u8], vectors: &str, plan: FieldPlan) -> FieldStats {
    let model: CheckedModel<SignalSection> = blob::decode(blob_bytes).unwrap();
    let blob_id = blob::blob_id(blob_bytes).unwrap();
    let mut s = FieldStats::new(
        FieldPlan { blob_id, ..plan },
        model.channel_count(),
        model.signal_count(),
    );
    let t = model.thresholds();
    for o in outcomes(&model, vectors) {
        match o {
            Outcome::Decided(d, v) => s.decided(&t, &d, &v),
            Outcome::Faulted(f) => s.faulted(f),
        }
    }
    s
}

/// The record a device printed (`# field <hex>`), as bytes.
pub fn device_bytes(core: &str, stdout: &str) -> Vec<u8> {
    let hex = stdout
        .lines()
        .find_map(|l| l.strip_prefix("# field "))
        .unwrap_or_else(|| panic!("{core}: no field record:\n{stdout}"))
        .trim();
    assert!(
        hex.len() % 2 == 0
            && hex
                .bytes()
                .all(|b| b.is_ascii_hexdigit() && !b.is_ascii_uppercase()),
        "{core}: not lower-case hex: {hex}"
    );
    (0..hex.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&hex[i..i + 2], 16).unwrap())
        .collect()
}

/// The device's record equals the host's byte for byte, and decodes to the host's
/// statistics field for field (each compared on its own, so a difference is named).
pub fn check_record(core: &str, stdout: &str, want: &FieldStats) {
    let got = device_bytes(core, stdout);
    let mut buf = [0u8; shared_model::field::MAX_RECORD_LEN];
    let n = want.encode(&mut buf).unwrap();
    let d = FieldStats::decode(&got).unwrap_or_else(|e| panic!("{core}: {e}"));
    let c = usize::from(want.channels);
    let k = usize::from(want.signals);
    let fields: [(&str, String, String); 17] = [
        ("plan", format!("{:?}", d.plan), format!("{:?}", want.plan)),
        (
            "channels, signals",
            format!("{} {}", d.channels, d.signals),
            format!("{} {}", want.channels, want.signals),
        ),
        ("units", d.units.to_string(), want.units.to_string()),
        ("go", d.go.to_string(), want.go.to_string()),
        ("nogo", d.nogo.to_string(), want.nogo.to_string()),
        ("recheck", d.recheck.to_string(), want.recheck.to_string()),
        ("faults", d.faults.to_string(), want.faults.to_string()),
        (
            "saturated",
            d.saturated.to_string(),
            want.saturated.to_string(),
        ),
        (
            "other_faults",
            d.other_faults.to_string(),
            want.other_faults.to_string(),
        ),
        (
            "below, above",
            format!("{} {}", d.below, d.above),
            format!("{} {}", want.below, want.above),
        ),
        ("bins", format!("{:?}", d.bins), format!("{:?}", want.bins)),
        (
            "cusum_go",
            format!("{:?}", d.cusum_go),
            format!("{:?}", want.cusum_go),
        ),
        (
            "cusum_nogo",
            format!("{:?}", d.cusum_nogo),
            format!("{:?}", want.cusum_nogo),
        ),
        (
            "channel_faults",
            format!("{:?}", &d.channel_faults[..c]),
            format!("{:?}", &want.channel_faults[..c]),
        ),
        (
            "signal_faults",
            format!("{:?}", &d.signal_faults[..k]),
            format!("{:?}", &want.signal_faults[..k]),
        ),
        (
            "min, max",
            format!("{:?} {:?}", &d.min[..c], &d.max[..c]),
            format!("{:?} {:?}", &want.min[..c], &want.max[..c]),
        ),
        (
            "sum",
            format!("{:?}", &d.sum[..c]),
            format!("{:?}", &want.sum[..c]),
        ),
    ];
    for (name, dev, host) in fields {
        assert_eq!(
            dev, host,
            "{core}: field record's {name}: device and host differ"
        );
    }
    assert_eq!(&d, want, "{core}: field records differ");
    assert_eq!(got, &buf[..n], "{core}: field record bytes differ");
}

/// The host's record over a vectors file checked by an outside reference
/// (`tests/verify/field_record.py`: the layout read with Python's struct, the CRC with
/// zlib.crc32, every statistic and both CUSUMs recomputed from the units with Python's
/// integers from FORMAT.md and the CUSUM's published recursion).
pub fn python_reference(blob_bytes: &[u8], vectors: &str, field: &FieldStats, dir: &Path) {
    let model: CheckedModel<SignalSection> = blob::decode(blob_bytes).unwrap();
    let t = model.thresholds();
    let mut units = format!("# thresholds {} {}\n", t.nogo_max, t.go_min);
    for o in outcomes(&model, vectors) {
        let line = match o {
            Outcome::Decided(d, v) => {
                let v: Vec<String> = v.iter().map(ToString::to_string).collect();
                format!("{} {} {}", d.verdict.as_str(), d.score, v.join(" "))
            }
            Outcome::Faulted(FieldFault::Channel(c)) => format!("FAULT channel {c}"),
            Outcome::Faulted(FieldFault::Signal(k)) => format!("FAULT signal {k}"),
            Outcome::Faulted(FieldFault::Other) => "FAULT other".into(),
        };
        units.push_str(&line);
        units.push('\n');
    }
    let mut buf = [0u8; shared_model::field::MAX_RECORD_LEN];
    let n = field.encode(&mut buf).unwrap();
    let (rec, txt) = (dir.join("field-record.bin"), dir.join("field-units.txt"));
    std::fs::write(&rec, &buf[..n]).unwrap();
    std::fs::write(&txt, units).unwrap();
    let Some((code, out)) = crate::python_check(
        "field record against Python",
        "field_record.py",
        &[rec.as_os_str(), txt.as_os_str()],
        dir,
    ) else {
        return;
    };
    assert_eq!(code, Some(0), "{out}");
    assert!(out.contains(" 0 mismatches"), "{out}");
}
