//! Models of several classes on the device range: the Rust example (and the C station) on
//! M0, M3, M4F, M33 and RV32IMAC under QEMU print, line for line, what the host's kernel
//! decides for the same units: `<i> <GO|NO-GO|RECHECK> <lead> <class name>` and FAULT lines.
//!
//! Reusable: [`expected_lines`] and [`on_five_cores`] take any blob's bytes and its units
//! (one row each: the readings, then every window), so a blob and log written by the CLI
//! can be fed in the same way.

use rand::{Rng, SeedableRng};
use shared_model::{
    ChannelSpec, CheckedModel, ClassSection, Fault, FixedModel, NO_GO_CLASS, SignalFault,
    SignalSection, blob,
};

/// The host's line for one unit, as the example prints it: a class model's decision with
/// its leading class's name, a two-sided one without; a refused reading `FAULT ch<c>`, a
/// refused window `FAULT signal<s>`, a wrong count `FAULT count`.
pub fn expected_lines(blob_bytes: &[u8], rows: &[Vec<i32>]) -> Vec<String> {
    let model: CheckedModel<SignalSection, ClassSection> =
        blob::decode_classes(blob_bytes).expect("the blob decodes");
    let readings = model.reading_count();
    rows.iter()
        .enumerate()
        .map(|(i, row)| {
            let decided = if model.signal_count() == 0 {
                model.classify(row).map_err(SignalFault::Reading)
            } else {
                let (r, mut rest) = row.split_at(readings.min(row.len()));
                let mut windows = Vec::new();
                for s in &model.signals().signals {
                    let (w, t) = rest.split_at(usize::from(s.window).min(rest.len()));
                    windows.push(w);
                    rest = t;
                }
                model.classify_windows(r, &windows)
            };
            match decided {
                Ok(d) => match (d.class, model.classes()) {
                    (Some(k), Some(c)) => {
                        format!("{i} {} {} {}", d.verdict.as_str(), d.score, c.name(k))
                    }
                    _ => format!("{i} {} {}", d.verdict.as_str(), d.score),
                },
                Err(SignalFault::Reading(Fault::OutOfRange { channel, .. })) => {
                    format!("{i} FAULT ch{channel}")
                }
                Err(SignalFault::Window { signal, .. }) => format!("{i} FAULT signal{signal}"),
                Err(SignalFault::Reading(Fault::ReadingCount { .. })) => format!("{i} FAULT count"),
                Err(_) => format!("{i} FAULT other"),
            }
        })
        .collect()
}

/// What one core's run measured: its name and start-up stack in bytes.
pub struct CoreRun {
    /// The core.
    pub core: String,
    /// Stack from reset through start-up.
    pub startup: usize,
    /// Stack of the deepest step.
    pub step: usize,
}

/// Runs the example with `rows` linked in and `blob_bytes` loaded on every core of the device
/// range and checks that each prints exactly [`expected_lines`] (its model line naming the
/// blob's id first) and leaves the lines at the last unit's verdict. Returns each core's
/// stack figures (a core whose QEMU or Rust target is missing is SKIPPED).
pub fn on_five_cores(blob_bytes: &[u8], rows: &[Vec<i32>]) -> Vec<CoreRun> {
    let want = expected_lines(blob_bytes, rows);
    let dir = tempfile::tempdir().unwrap();
    let blob_path = dir.path().join("classes.lgmb");
    std::fs::write(&blob_path, blob_bytes).unwrap();
    let text: String = rows
        .iter()
        .map(|r| r.iter().map(i32::to_string).collect::<Vec<_>>().join(" ") + "\n")
        .collect();
    let vpath = dir.path().join("units.txt");
    std::fs::write(&vpath, text).unwrap();
    let id = format!(" blob {:08x}", blob::blob_id(blob_bytes).unwrap());
    let mut runs = Vec::new();
    crate::device::on_every_core("signals", &vpath, &blob_path, None, |core, stdout| {
        assert!(
            stdout
                .lines()
                .any(|l| l.starts_with("# model ") && l.contains(&id)),
            "{core}: no model line naming{id}:\n{stdout}"
        );
        let got: Vec<&str> = stdout.lines().filter(|l| !l.starts_with("# ")).collect();
        assert_eq!(got.len(), want.len(), "{core}: line count\n{stdout}");
        for (g, w) in got.iter().zip(&want) {
            assert_eq!(g, w, "{core}: the device and the host differ");
        }
        let last = want.last().unwrap();
        let shown = if last.contains(" GO ") {
            "# lines: GO=1 NO-GO=0 RECHECK=0"
        } else if last.contains(" RECHECK ") {
            "# lines: GO=0 NO-GO=1 RECHECK=1"
        } else {
            "# lines: GO=0 NO-GO=1 RECHECK=0"
        };
        assert!(
            stdout.contains(shown),
            "{core}: {shown} expected:\n{stdout}"
        );
        let figure = |prefix: &str| -> usize {
            stdout
                .lines()
                .find_map(|l| l.strip_prefix(prefix))
                .unwrap()
                .trim()
                .parse()
                .unwrap()
        };
        runs.push(CoreRun {
            core: core.to_string(),
            startup: figure("# stack bytes used from reset through start-up: "),
            step: figure("# stack bytes used by one step: "),
        });
    });
    runs
}

/// Sixteen channels of varied ranges, each mapped onto ±32767 (Q15), in a model of 8-bit
/// weights and a 32-bit accumulator: the base the class models below are drawn over.
pub fn sixteen_channels() -> FixedModel {
    let mut m = FixedModel::example_two_channel();
    m.channels.clear();
    for j in 0..16i32 {
        let (raw_min, raw_max) = (-50 * j, 1000 + 123 * j);
        let offset = (raw_min + raw_max).div_euclid(2);
        let half = (raw_max - offset).max(offset - raw_min);
        m.channels
            .push(ChannelSpec {
                name: heapless::String::try_from(format!("ch{j}").as_str()).unwrap(),
                raw_min,
                raw_max,
                offset,
                multiplier: i32::try_from((32767i64 << 16) / i64::from(half)).unwrap(),
                shift: 16,
                weight: 0,
            })
            .unwrap();
    }
    m
}

/// A class model over [`sixteen_channels`] from a fixed seed, as a blob (version 5).
pub fn class_blob(classes: u8, go: u8, seed: u64) -> Vec<u8> {
    let (m, section) = ClassSection::example_over(&sixteen_channels(), classes, go, seed).unwrap();
    let model = CheckedModel::with_outcomes(m, shared_model::Readings, section).unwrap();
    let mut buf = vec![0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(&model, &mut buf).unwrap();
    buf.truncate(n);
    buf
}

/// `count` units over [`sixteen_channels`] from `seed`: readings inside every range, every
/// 37th unit with one reading one count past its channel's range (a FAULT).
pub fn class_units(count: usize, seed: u64) -> Vec<Vec<i32>> {
    let base = sixteen_channels();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    (0..count)
        .map(|i| {
            let mut row: Vec<i32> = base
                .channels
                .iter()
                .map(|c| rng.gen_range(c.raw_min..=c.raw_max))
                .collect();
            if i % 37 == 36 {
                let c = &base.channels[i % 16];
                row[i % 16] = if i % 2 == 0 {
                    c.raw_max + 1
                } else {
                    c.raw_min - 1
                };
            }
            row
        })
        .collect()
}

/// Asserts that `lines` hold RECHECK, a FAULT and every class of `blob_bytes` decided.
pub fn assert_covers(blob_bytes: &[u8], lines: &[String]) {
    let model: CheckedModel<SignalSection, ClassSection> =
        blob::decode_classes(blob_bytes).unwrap();
    let classes = model.classes().unwrap();
    assert!(lines.iter().any(|l| l.contains(" RECHECK ")), "no RECHECK");
    assert!(lines.iter().any(|l| l.contains(" FAULT ")), "no FAULT");
    for (k, row) in classes.rows.iter().enumerate() {
        let decided = if Some(k as u8) == classes.go_class() {
            " GO "
        } else {
            " NO-GO "
        };
        assert!(
            lines
                .iter()
                .any(|l| l.contains(decided) && l.ends_with(&format!(" {}", row.name))),
            "class {} never decided",
            row.name
        );
    }
}

/// A model of 4 classes (GO and three failures) × 16 channels and one of 3 failure classes
/// without a GO class, both drawn from fixed seeds in Rust, on the five cores: every line
/// as the host's kernel decides it (its class's name included), RECHECK units, each class
/// decided, FAULTs; the class station's start-up stack fits the 16 KiB Cortex-M0.
#[test]
fn class_models_on_five_cores_agree_with_the_host() {
    let units = class_units(400, 33);
    for blob_bytes in [class_blob(4, 0, 7), class_blob(3, NO_GO_CLASS, 11)] {
        assert_eq!(blob_bytes[4], 5, "version 5");
        let want = expected_lines(&blob_bytes, &units);
        assert_covers(&blob_bytes, &want);
        for run in on_five_cores(&blob_bytes, &units) {
            // Measured 2026-12-05: see README's footprint section; 16 KiB is the M0's RAM.
            assert!(
                run.startup < 15 * 1024,
                "{}: start-up stack {} bytes",
                run.core,
                run.startup
            );
            eprintln!(
                "{}: class model of {} rows agrees with the host on {} units; start-up stack {} B, step {} B",
                run.core,
                blob::decode_classes::<SignalSection>(&blob_bytes)
                    .unwrap()
                    .classes()
                    .unwrap()
                    .rows
                    .len(),
                units.len(),
                run.startup,
                run.step
            );
        }
    }
}

/// The C example station with a blob of several classes: on the host (and the interface's
/// class edges from C, `make checks`) and on the Cortex-M0 board under QEMU, it prints
/// exactly the lines of the host's kernel, which are the Rust example's on five cores
/// ([`class_models_on_five_cores_agree_with_the_host`]).
#[test]
fn c_example_runs_a_class_blob_on_the_host_and_on_cortex_m0() {
    use crate::c_api::{build_c_library, tool};
    use std::process::Command;
    if let Err(why) = tool("gcc").and_then(|_| tool("make")) {
        return crate::skip_or_fail("C example with a class blob", &why);
    }
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let blob_bytes = class_blob(4, 0, 7);
    let units = class_units(400, 33);
    let want = expected_lines(&blob_bytes, &units);
    std::fs::write(d.join("c.lgmb"), &blob_bytes).unwrap();
    let text: String = units
        .iter()
        .map(|r| r.iter().map(i32::to_string).collect::<Vec<_>>().join(" ") + "\n")
        .collect();
    std::fs::write(d.join("v.txt"), text).unwrap();
    let id = format!(" blob {:08x}", blob::blob_id(&blob_bytes).unwrap());
    let check = |board: &str, out: &str| {
        assert!(
            out.lines()
                .any(|l| l.starts_with("# model ") && l.ends_with(&id)),
            "{board}: model line\n{out}"
        );
        let got: Vec<&str> = out.lines().filter(|l| !l.starts_with("# ")).collect();
        assert_eq!(got, want, "{board}: the C station and the host differ");
    };
    let example = crate::root().join("firmware/c-example");
    build_c_library(None);
    let bin = d.join("station-host");
    let st = Command::new("make")
        .args(["-s", "host"])
        .arg(format!("OUT={}", bin.display()))
        .current_dir(&example)
        .status()
        .unwrap();
    assert!(st.success(), "make host failed");
    let o = Command::new(&bin)
        .arg(d.join("c.lgmb"))
        .arg(d.join("v.txt"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0));
    check(
        "C station on the host",
        &String::from_utf8(o.stdout).unwrap(),
    );
    // The class edges from C: a two-sided blob has no classes; the class blob's names,
    // results and station.
    let two_sided = {
        let mut buf = [0u8; blob::MAX_BLOB_LEN];
        let m = CheckedModel::new(FixedModel::example_two_channel()).unwrap();
        let n = blob::encode(&m, &mut buf).unwrap();
        buf[..n].to_vec()
    };
    std::fs::write(d.join("m.lgmb"), two_sided).unwrap();
    let checks = d.join("checks");
    let st = Command::new("make")
        .args(["-s", "checks"])
        .arg(format!("OUT={}", checks.display()))
        .current_dir(&example)
        .status()
        .unwrap();
    assert!(st.success(), "make checks failed");
    let o = Command::new(&checks)
        .arg(d.join("m.lgmb"))
        .arg(d.join("c.lgmb"))
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{text}");
    assert!(!text.contains("FAILED"), "{text}");
    assert!(text.contains("ok: a decision names a class"), "{text}");

    if let Err(why) = tool("arm-none-eabi-gcc").and_then(|_| tool("qemu-system-arm")) {
        return crate::skip_or_fail("C example with a class blob under QEMU", &why);
    }
    build_c_library(Some("thumbv6m-none-eabi"));
    let st = Command::new("make")
        .args(["-s", "m0"])
        .arg(format!("BLOB={}", d.join("c.lgmb").display()))
        .arg(format!("VECTORS={}", d.join("v.txt").display()))
        .arg(format!("BUILD={}", d.display()))
        .current_dir(&example)
        .status()
        .unwrap();
    assert!(st.success(), "make m0 failed");
    let o = Command::new("timeout")
        .args([
            "120",
            "qemu-system-arm",
            "-machine",
            "microbit",
            "-cpu",
            "cortex-m0",
        ])
        .args([
            "-nographic",
            "-semihosting-config",
            "enable=on,target=native",
            "-kernel",
        ])
        .arg(d.join("station-m0.elf"))
        .output()
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout).into_owned();
    assert_eq!(o.status.code(), Some(0), "Cortex-M0: {out}");
    check("C station on Cortex-M0", &out);
    let stack: u32 = out
        .lines()
        .find_map(|l| l.strip_prefix("# stack bytes used: "))
        .unwrap()
        .parse()
        .unwrap();
    assert!(
        stack < 12 * 1024,
        "Cortex-M0: C station's stack {stack} bytes"
    );
    eprintln!(
        "Cortex-M0: C example agrees with the host on {} units of a class blob; stack {stack} bytes",
        units.len()
    );
}
