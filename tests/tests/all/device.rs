//! On-device proof: the real firmware binary on an emulated Cortex-M3 (QEMU lm3s6965evb),
//! flashed with the Intel HEX image from the packer, must print exactly the lines of
//! `replay` for the holdout vectors; a bit-flipped blob must show the fault and hold NO-GO.
//! The same example on the other cores (M0, M4F, M33, RV32IMAC) must print the same lines.

use std::path::Path;
use std::process::Command;

fn have_qemu_and_target() -> Result<(), String> {
    Command::new("qemu-system-arm")
        .arg("--version")
        .output()
        .map_err(|_| "qemu-system-arm not found (apt-get install qemu-system-arm)".to_string())?;
    have_target("thumbv7m-none-eabi")
}

/// The demo written into `dir/demo`, and its model line with the first 300 holdout vectors
/// in `dir/vectors.txt` (what a device build links in). Returns both paths.
fn demo_vectors(dir: &Path) -> (std::path::PathBuf, std::path::PathBuf) {
    let out = dir.join("demo");
    host_trainer::demo::run(&out, false).unwrap();
    let vectors: Vec<String> = std::fs::read_to_string(out.join("vectors-holdout.txt"))
        .unwrap()
        .lines()
        .take(301)
        .map(String::from)
        .collect();
    assert_eq!(vectors.len(), 301, "the model line and 300 vectors");
    let vpath = dir.join("vectors.txt");
    std::fs::write(&vpath, vectors.join("\n") + "\n").unwrap();
    (out, vpath)
}

/// Checks that a device run left its lines at the verdict of its `last` result line and
/// that one step took a small stack; returns that stack in bytes.
fn lines_and_stack(stdout: &str, last: &str, core: &str) -> usize {
    let want = if last.contains(" GO ") {
        "# lines: GO=1 NO-GO=0"
    } else {
        "# lines: GO=0 NO-GO=1"
    };
    assert!(
        stdout.contains(want),
        "{core}: the lines should show the last verdict:\n{stdout}"
    );
    let stack: usize = stdout
        .lines()
        .find_map(|l| l.strip_prefix("# stack bytes used by one step: "))
        .unwrap()
        .trim()
        .parse()
        .unwrap();
    assert!(stack > 0 && stack < 512, "{core}: stack {stack} bytes");
    stack
}

fn run_qemu(elf: &Path, loader: &str) -> (i32, String) {
    let out = Command::new("timeout")
        .args([
            "60",
            "qemu-system-arm",
            "-cpu",
            "cortex-m3",
            "-machine",
            "lm3s6965evb",
            "-nographic",
        ])
        .args(["-semihosting-config", "enable=on,target=native", "-kernel"])
        .arg(elf)
        .args(["-device", loader])
        .output()
        .expect("run qemu");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
    )
}

#[test]
fn device_agrees_with_replay_line_for_line_and_fails_safe_on_a_corrupt_blob() {
    if let Err(why) = have_qemu_and_target() {
        return crate::skip_or_fail("QEMU end-to-end", &why);
    }
    let dir = tempfile::tempdir().unwrap();
    let (out, vpath) = demo_vectors(dir.path());
    let app = crate::root().join("firmware/qemu-app");
    let st = Command::new("cargo")
        .args(["build", "--release", "--bin", "linegate-qemu-app"])
        .current_dir(&app)
        .env("LINEGATE_VECTORS", &vpath)
        .env_remove("CARGO_TARGET_DIR")
        .status()
        .unwrap();
    assert!(st.success(), "device build failed");
    let elf = app.join("target/thumbv7m-none-eabi/release/linegate-qemu-app");

    // The HEX image is flashed by QEMU's generic loader at the address it names (0x3F000).
    let hex = out.join("model.hex");
    let (code, stdout) = run_qemu(&elf, &format!("loader,file={}", hex.display()));
    assert_eq!(code, 0, "device run failed:\n{stdout}");
    let replay = std::fs::read_to_string(out.join("replay-holdout.txt")).unwrap();
    let model_line = replay.lines().next().unwrap();
    assert!(model_line.starts_with("# model "), "{model_line}");
    assert!(
        stdout.lines().any(|l| l == model_line),
        "the device names the same model:\n{stdout}"
    );
    let device: Vec<&str> = stdout.lines().filter(|l| !l.starts_with('#')).collect();
    let host: Vec<&str> = replay
        .lines()
        .filter(|l| !l.starts_with('#'))
        .take(300)
        .collect();
    let tail: Vec<&str> = stdout.lines().rev().take(4).collect();
    assert_eq!(
        device.len(),
        300,
        "device printed {} result lines; last lines: {tail:?}",
        device.len()
    );
    for (i, (d, h)) in device.iter().zip(&host).enumerate() {
        assert_eq!(d, h, "vector {i}: device and replay differ");
    }
    lines_and_stack(&stdout, host.last().unwrap(), "Cortex-M3");

    // A single flipped bit: the device reports the fault and holds NO-GO.
    let mut blob = std::fs::read(out.join("model.lgmb")).unwrap();
    blob[20] ^= 0x04;
    let bad = dir.path().join("bad.bin");
    std::fs::write(&bad, &blob).unwrap();
    let (code, stdout) = run_qemu(
        &elf,
        &format!("loader,file={},addr=0x3F000,force-raw=on", bad.display()),
    );
    assert_eq!(code, 1, "corrupt blob must exit with failure:\n{stdout}");
    assert!(stdout.contains("FAULT blob: blob CRC mismatch"), "{stdout}");
    assert!(
        stdout.contains("# lines: GO=0 NO-GO=1 RECHECK=0"),
        "{stdout}"
    );
    assert!(
        !stdout.lines().any(|l| l.contains(" GO ")),
        "no verdict may be shown: {stdout}"
    );

    // Erased flash (no blob at all) is refused the same way.
    let (code, stdout) = run_qemu(&elf, "loader,addr=0x3F000,data=0,data-len=4");
    assert_eq!(code, 1, "{stdout}");
    assert!(
        stdout.contains("FAULT blob") && stdout.contains("NO-GO=1"),
        "{stdout}"
    );
}

#[test]
fn a_signed_release_build_runs_only_the_owners_blob() {
    if let Err(why) = have_qemu_and_target() {
        return crate::skip_or_fail("QEMU signed release", &why);
    }
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    host_trainer::demo::run(&out, false).unwrap();
    // The owner's key (fixed here, so the build is reproducible) and its public file.
    let owner = ed25519_dalek::SigningKey::from_bytes(&[42u8; 32]);
    let public = dir.path().join("owner.pub");
    std::fs::write(
        &public,
        host_trainer::release::sign::public_text(&owner.verifying_key()),
    )
    .unwrap();
    let plain = std::fs::read(out.join("model.lgmb")).unwrap();
    let model = shared_model::blob::decode::<shared_model::Readings>(&plain).unwrap();
    let signed = host_trainer::release::sign::signed_blob(&model, &owner);
    let vectors: Vec<String> = std::fs::read_to_string(out.join("vectors-holdout.txt"))
        .unwrap()
        .lines()
        .take(51)
        .map(String::from)
        .collect();
    let vpath = dir.path().join("vectors.txt");
    std::fs::write(&vpath, vectors.join("\n") + "\n").unwrap();
    let app = crate::root().join("firmware/qemu-app");
    // Its own target folder: the unsigned build of the other test must not be overwritten.
    let target = app.join("target/signed");
    let st = Command::new("cargo")
        .args(["build", "--release", "--bin", "linegate-qemu-app"])
        .current_dir(&app)
        .env("LINEGATE_VECTORS", &vpath)
        .env("LINEGATE_PUBLIC_KEY", &public)
        .env("CARGO_TARGET_DIR", &target)
        .status()
        .unwrap();
    assert!(st.success(), "signed device build failed");
    let elf = target.join("thumbv7m-none-eabi/release/linegate-qemu-app");
    let raw = |name: &str, bytes: &[u8]| {
        let p = dir.path().join(name);
        std::fs::write(&p, bytes).unwrap();
        format!("loader,file={},addr=0x3F000,force-raw=on", p.display())
    };
    // The owner's blob runs, and the device names the key, as replay does.
    let (code, stdout) = run_qemu(&elf, &raw("signed.bin", &signed));
    assert_eq!(code, 0, "{stdout}");
    let m = shared_model::blob::decode::<shared_model::Readings>(&signed).unwrap();
    let line = host_trainer::release::replay::model_line(&m, &signed);
    assert!(
        stdout.lines().any(|l| l == line.trim_end()),
        "{line}\n{stdout}"
    );
    assert_eq!(stdout.lines().filter(|l| !l.starts_with('#')).count(), 50);
    // The threshold forgery (CRC recomputed, the owner's signature kept), an unsigned blob
    // and another key's blob: the fault is printed and NO-GO held.
    let mut fm = model.model().clone();
    fm.nogo_max = i64::MIN;
    fm.go_min = i64::MIN + 1;
    let mut buf = [0u8; shared_model::blob::MAX_BLOB_LEN];
    let key_id = host_trainer::release::sign::key_id(&owner.verifying_key());
    let n = shared_model::blob::encode_for_signing(
        &shared_model::CheckedModel::new(fm).unwrap(),
        key_id,
        &mut buf,
    )
    .unwrap();
    buf[n..n + 64].copy_from_slice(&signed[signed.len() - 64..]);
    let other = host_trainer::release::sign::signed_blob(
        &model,
        &ed25519_dalek::SigningKey::from_bytes(&[7u8; 32]),
    );
    for (name, bytes, says) in [
        ("forged.bin", &buf[..n + 64], "signature does not verify"),
        ("unsigned.bin", &plain[..], "not signed"),
        (
            "other.bin",
            &other[..],
            "signed by a key this device does not accept",
        ),
    ] {
        let (code, stdout) = run_qemu(&elf, &raw(name, bytes));
        assert_eq!(code, 1, "{name}: {stdout}");
        assert!(
            stdout.contains("FAULT blob") && stdout.contains(says),
            "{name}: {stdout}"
        );
        assert!(stdout.contains("# lines: GO=0 NO-GO=1"), "{name}: {stdout}");
        assert!(
            !stdout.lines().any(|l| l.contains(" GO ")),
            "{name}: {stdout}"
        );
    }
}

/// Whether `target`'s standard library is installed (rustup target add).
fn have_target(target: &str) -> Result<(), String> {
    let sysroot = Command::new("rustc")
        .args(["--print", "sysroot"])
        .output()
        .map_err(|e| e.to_string())?;
    let sysroot = String::from_utf8_lossy(&sysroot.stdout).trim().to_string();
    if Path::new(&sysroot)
        .join("lib/rustlib")
        .join(target)
        .exists()
    {
        Ok(())
    } else {
        Err(format!(
            "rust target {target} not installed (rustup target add {target})"
        ))
    }
}

/// A core of the device range: name, Rust target, QEMU program, board, CPU (none on
/// RISC-V, which boots without a BIOS) and the board's model address.
type Board = (
    &'static str,
    &'static str,
    &'static str,
    &'static str,
    Option<&'static str>,
    &'static str,
);

/// The device range.
const BOARDS: [Board; 5] = [
    (
        "Cortex-M0",
        "thumbv6m-none-eabi",
        "qemu-system-arm",
        "microbit",
        Some("cortex-m0"),
        "0x3F000",
    ),
    (
        "Cortex-M3",
        "thumbv7m-none-eabi",
        "qemu-system-arm",
        "lm3s6965evb",
        Some("cortex-m3"),
        "0x3F000",
    ),
    (
        "Cortex-M4F",
        "thumbv7em-none-eabihf",
        "qemu-system-arm",
        "mps2-an386",
        Some("cortex-m4"),
        "0x3F000",
    ),
    (
        "Cortex-M33",
        "thumbv8m.main-none-eabihf",
        "qemu-system-arm",
        "mps2-an505",
        Some("cortex-m33"),
        "0x1003F000",
    ),
    (
        "RV32IMAC",
        "riscv32imac-unknown-none-elf",
        "qemu-system-riscv32",
        "sifive_e",
        None,
        "0x2043F000",
    ),
];

/// Builds the QEMU application with `vectors` linked in (and the field plan `plan`, when
/// given) for every core of
/// [`BOARDS`] (in `target/<folder>`), runs it with `blob` loaded raw at the board's model
/// address, and hands each core's name and stdout to `check`. A core whose QEMU or Rust
/// target is missing is SKIPPED (a failure in CI).
/// The lines of a device's output that `linegate replay` prints too: the model line and
/// one line per unit (its other `# ` lines are measurements).
fn replay_lines(stdout: &str) -> Vec<&str> {
    stdout
        .lines()
        .filter(|l| !l.starts_with("# ") || l.starts_with("# model"))
        .collect()
}

/// Serialises the tests that build the example into the `signals` target folder with
/// different vectors: each builds and runs before the other builds.
static SIGNAL_APP: std::sync::Mutex<()> = std::sync::Mutex::new(());

pub(crate) fn on_every_core(
    folder: &str,
    vectors: &Path,
    blob: &Path,
    plan: Option<&Path>,
    mut check: impl FnMut(&str, &str),
) {
    let _serial =
        (folder == "signals").then(|| SIGNAL_APP.lock().unwrap_or_else(|e| e.into_inner()));
    let bin = "linegate-qemu-app";
    let app = crate::root().join("firmware/qemu-app");
    // Its own target folder: the other device tests build the M3 image with other vectors.
    let target_dir = app.join("target").join(folder);
    for (core, target, qemu, machine, cpu, addr) in BOARDS {
        let ready = Command::new(qemu)
            .arg("--version")
            .output()
            .map_err(|_| {
                format!("{qemu} not found (apt-get install qemu-system-arm qemu-system-misc)")
            })
            .and_then(|_| have_target(target));
        if let Err(why) = ready {
            crate::skip_or_fail(&format!("{core} under QEMU"), &why);
            continue;
        }
        let mut build = Command::new("cargo");
        build
            .args(["build", "--release", "--bin", bin, "--target", target])
            .current_dir(&app)
            .env("LINEGATE_VECTORS", vectors)
            .env("CARGO_TARGET_DIR", &target_dir);
        match plan {
            Some(p) => build.env("LINEGATE_FIELD_PLAN", p),
            None => build.env_remove("LINEGATE_FIELD_PLAN"),
        };
        let st = build.status().unwrap();
        assert!(st.success(), "{core}: build failed");
        let elf = target_dir.join(target).join("release").join(bin);
        let mut cmd = Command::new("timeout");
        cmd.args(["120", qemu, "-machine", machine, "-nographic"]);
        if let Some(cpu) = cpu {
            cmd.args(["-cpu", cpu]);
        } else {
            cmd.args(["-bios", "none"]);
        }
        let o = cmd
            .args(["-semihosting-config", "enable=on,target=native", "-kernel"])
            .arg(&elf)
            .arg("-device")
            .arg(format!(
                "loader,file={},addr={addr},force-raw=on",
                blob.display()
            ))
            .stdin(std::process::Stdio::null())
            .output()
            .unwrap();
        let stdout = String::from_utf8_lossy(&o.stdout).into_owned();
        assert_eq!(
            o.status.code(),
            Some(0),
            "{core}: {stdout}{}",
            String::from_utf8_lossy(&o.stderr)
        );
        check(core, &stdout);
    }
}

/// The Rust example on every core of the device range, each on its QEMU board with the blob
/// loaded raw at the board's model address, over the demo's drifted log (SYNTHETIC) under
/// the field plan of the release audit: the same lines as `replay --form device`, the lines
/// left at the last verdict, a small stack for one step, and the field record equal, byte
/// for byte, to the one `linegate drift --record-out` computes over the same log. Read back
/// by `linegate drift --record`, the device's own record raises the drift alarm (exit 1),
/// as the desk test of the log does.
#[test]
fn rust_example_on_m0_m3_m4f_m33_and_riscv_agrees_with_replay() {
    let bin = crate::c_api::linegate_bin();
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let run = |args: &[&str]| {
        Command::new(&bin)
            .args(args)
            .current_dir(d)
            .output()
            .unwrap()
    };
    assert!(run(&["-q", "demo", "--out-dir", "demo"]).status.success());
    let release = ["--model", "demo/model.json", "--blob", "demo/model.lgmb"];
    let o = run(&[
        &[
            "-q",
            "replay",
            "--form",
            "device",
            "demo/drift-synthetic.csv",
        ][..],
        &release,
        &["--vectors", "vectors.txt", "-o", "lines.txt"],
    ]
    .concat());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let o = run(&[
        &[
            "-q",
            "drift",
            "demo/drift-synthetic.csv",
            "--audit",
            "demo/audit.json",
        ][..],
        &release,
        &["--record-out", "host.lgfr"],
    ]
    .concat());
    assert_eq!(
        o.status.code(),
        Some(1),
        "the drifted log alarms on the desk"
    );
    let replay = std::fs::read_to_string(d.join("lines.txt")).unwrap();
    let want: Vec<&str> = replay.lines().collect();
    assert!(want.len() > 300, "the drifted log's units: {}", want.len());
    // The plan the audit recorded, as `drift --plan` prints it for the device build.
    let o = run(&["-q", "drift", "--audit", "demo", "--plan"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8(o.stdout).unwrap();
    let plan_file = &text[text.find("# Plan file").expect("the plan file form")..];
    let plan_path = d.join("plan.txt");
    std::fs::write(&plan_path, plan_file).unwrap();
    let plan = host_trainer::field::baseline::read(&d.join("demo/audit.json"))
        .unwrap()
        .baseline
        .plan
        .field_plan();
    let host = std::fs::read(d.join("host.lgfr")).unwrap();
    let field = shared_model::FieldStats::decode(&host).unwrap();
    assert_eq!(field.plan, plan);
    assert!(
        field.cusum_go.alarm_down > 0,
        "the GO margins shrink: {field:?}"
    );
    let mut device_record = None;
    on_every_core(
        "cores",
        &d.join("vectors.txt"),
        &d.join("demo/model.lgmb"),
        Some(&plan_path),
        |core, stdout| {
            assert_eq!(
                replay_lines(stdout),
                want,
                "{core}: the device and replay differ"
            );
            crate::device_field::check_record(core, stdout, &field);
            device_record.get_or_insert_with(|| crate::device_field::device_bytes(core, stdout));
            let stack = lines_and_stack(stdout, want.last().unwrap(), core);
            eprintln!(
                "{core}: Rust example agrees with replay on {} drifted units, field record equal to the host's; one step {stack} stack bytes",
                want.len() - 1
            );
        },
    );
    // The device's own record, read back on the desk, raises the alarm.
    if let Some(bytes) = device_record {
        std::fs::write(d.join("device.lgfr"), bytes).unwrap();
        let o = run(&[
            "-q",
            "drift",
            "--record",
            "device.lgfr",
            "--audit",
            "demo/audit.json",
        ]);
        assert_eq!(
            o.status.code(),
            Some(1),
            "{}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        );
    }
}

/// A model with signal features (a band magnitude and a standard deviation of a 64-sample
/// vibration window, the RMS of a 32-sample current window, and a temperature reading),
/// released as a version-3 blob: the example on every core prints, for 200 units
/// and the faulty ones among them, exactly the lines the host computes with the same
/// kernel (`CheckedModel::classify_windows`). SYNTHETIC units, seeded.
#[test]
fn signal_model_on_five_cores_agrees_with_the_host() {
    use rand::{Rng, SeedableRng};
    use shared_model::features::{CheckedFeature, Feature, SignalSection, SignalSpec, Source};
    use shared_model::{ChannelSpec, CheckedModel, FixedModel, blob};
    let vib = SignalSpec {
        raw_min: 0,
        raw_max: 4095,
        offset: 2048,
        window: 64,
    };
    let cur = SignalSpec {
        raw_min: 0,
        raw_max: 4095,
        offset: 0,
        window: 32,
    };
    // Bin 4 of 64: round(2cos(2π·4/64)·2²⁹).
    let coeff = (2.0 * (2.0 * std::f64::consts::PI * 4.0 / 64.0).cos() * f64::from(1u32 << 29))
        .round() as i32;
    let features = [
        ("vib.band4", 0u8, Feature::Band { coeff }, vib, 40),
        ("vib.std", 0, Feature::StdDev, vib, -25),
        ("cur.rms", 1, Feature::Rms, cur, 30),
    ];
    let mut m = FixedModel::example_two_channel();
    m.channels.clear();
    m.acc_bits = 64;
    m.weight_bits = 16;
    m.nogo_max = -200_000;
    m.go_min = 200_000;
    let mut signals = SignalSection::default();
    signals.signals.push(vib).unwrap();
    signals.signals.push(cur).unwrap();
    for (name, signal, feature, spec, weight) in features {
        // The channel's range is the feature's proved range; full scale maps to ±32767.
        let bound = CheckedFeature::new(spec, feature).unwrap().bound();
        m.channels
            .push(ChannelSpec {
                name: heapless::String::try_from(name).unwrap(),
                raw_min: -bound,
                raw_max: bound,
                offset: 0,
                multiplier: ((32767i64 << 24) / i64::from(bound)) as i32,
                shift: 24,
                weight,
            })
            .unwrap();
        signals
            .sources
            .push(Source::Feature { signal, feature })
            .unwrap();
    }
    m.channels
        .push(ChannelSpec {
            name: heapless::String::try_from("temp").unwrap(),
            raw_min: 0,
            raw_max: 1000,
            offset: 500,
            multiplier: 4_294_836,
            shift: 16,
            weight: -20,
        })
        .unwrap();
    signals.sources.push(Source::Reading).unwrap();
    let model = CheckedModel::with_inputs(m, signals).unwrap();
    let mut buf = [0u8; blob::MAX_BLOB_LEN];
    let n = blob::encode(&model, &mut buf).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let blob_path = dir.path().join("signals.lgmb");
    std::fs::write(&blob_path, &buf[..n]).unwrap();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(18);
    let (mut rows, mut want) = (String::new(), Vec::new());
    for i in 0..200 {
        let amp: f64 = rng.gen_range(0.0..1500.0);
        let level: f64 = rng.gen_range(100.0..3500.0);
        let temp: i32 = if i % 50 == 7 {
            1001
        } else {
            rng.gen_range(0..=1000)
        };
        let mut w: Vec<i32> = (0..64)
            .map(|k| {
                let t = 2.0 * std::f64::consts::PI * 4.0 * f64::from(k) / 64.0;
                (2048.0 + amp * t.sin() + rng.gen_range(-300.0..300.0))
                    .round()
                    .clamp(0.0, 4095.0) as i32
            })
            .collect();
        if i % 50 == 23 {
            w[17] = 4096;
        }
        let c: Vec<i32> = (0..32)
            .map(|_| {
                (level + rng.gen_range(-200.0..200.0))
                    .round()
                    .clamp(0.0, 4095.0) as i32
            })
            .collect();
        let line = match model.classify_windows(&[temp], &[&w, &c]) {
            Ok(d) => format!("{i} {} {}", d.verdict.as_str(), d.score),
            Err(shared_model::SignalFault::Reading(shared_model::Fault::OutOfRange {
                channel,
                ..
            })) => {
                format!("{i} FAULT ch{channel}")
            }
            Err(shared_model::SignalFault::Window { signal, .. }) => {
                format!("{i} FAULT signal{signal}")
            }
            Err(e) => panic!("unit {i}: {e}"),
        };
        want.push(line);
        let row: Vec<String> = std::iter::once(temp)
            .chain(w)
            .chain(c)
            .map(|v| v.to_string())
            .collect();
        rows.push_str(&row.join(" "));
        rows.push('\n');
    }
    // The units span every verdict and both kinds of fault.
    for kind in [" GO ", " NO-GO ", " RECHECK ", "FAULT ch3", "FAULT signal0"] {
        assert!(
            want.iter().any(|l| format!("{l} ").contains(kind)),
            "no {kind} among the units"
        );
    }
    let vpath = dir.path().join("units.txt");
    std::fs::write(&vpath, &rows).unwrap();
    // The field record too: readings out of range (channel 3) and refused windows
    // (signal 0) in its fault counts, under a plan from these units' scores.
    let plan = crate::device_field::plan_for(&buf[..n], &rows);
    let plan_path = dir.path().join("plan.txt");
    crate::device_field::write_plan(&plan_path, &plan);
    let field = crate::device_field::host_record(&buf[..n], &rows, plan);
    assert!(field.channel_faults[3] > 0 && field.signal_faults[0] > 0);
    crate::device_field::python_reference(&buf[..n], &rows, &field, dir.path());
    on_every_core(
        "signals",
        &vpath,
        &blob_path,
        Some(&plan_path),
        |core, stdout| {
            let got: Vec<&str> = stdout.lines().filter(|l| !l.starts_with("# ")).collect();
            assert_eq!(got, want, "{core}: the device and the host differ");
            crate::device_field::check_record(core, stdout, &field);
            let startup: usize = stdout
                .lines()
                .find_map(|l| l.strip_prefix("# stack bytes used from reset through start-up: "))
                .unwrap()
                .parse()
                .unwrap();
            // The model, its windows' buffer (1.5 KiB), the start-up and the feature costs'
            // 4 KiB window (measured before the station, in its own frame) fit a 16 KiB
            // Cortex-M0. One example for both kinds of blob: 10.5–12.9 KiB (12.9 on the M0,
            // measured 2026-12-04); with the field statistics (about 1 KiB in the station)
            // 12.0–12.2 KiB (12,260–12,472 bytes, the M0 highest, 2026-12-05). The bound
            // leaves about 1.5 KiB for growth before a change must say why the stack grew.
            assert!(
                startup < 14 * 1024,
                "{core}: start-up stack {startup} bytes"
            );
            eprintln!(
                "{core}: example agrees with the host on 200 units; start-up stack {startup} bytes"
            );
        },
    );
}

/// The demo's signal scenario (SYNTHETIC): the model trained, audited and packed from a
/// signal log by the host, and its field log, whose units include clipped vibration
/// windows. The example on every core prints exactly the lines `linegate replay`
/// printed for the same units, the model line first: the features computed on the device
/// are the host's, line for line.
#[test]
fn demo_signal_model_on_five_cores_agrees_with_replay() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    host_trainer::demo::run(&out, false).unwrap();
    let replay = std::fs::read_to_string(out.join("signal-replay-field.txt")).unwrap();
    let want: Vec<&str> = replay.lines().collect();
    assert!(want[0].starts_with("# model "));
    for kind in [" GO ", " NO-GO ", "FAULT signal0"] {
        assert!(
            want.iter().any(|l| format!("{l} ").contains(kind)),
            "no {kind} in the field replay"
        );
    }
    // The field record: under a plan from the log's scores (see `device_field::plan_for`)
    // the CUSUMs move and the GO one alarms, and the refused windows are signal 0's faults.
    let blob = std::fs::read(out.join("signal-model.lgmb")).unwrap();
    let vectors = std::fs::read_to_string(out.join("signal-vectors-field.txt")).unwrap();
    let plan = crate::device_field::plan_for(&blob, &vectors);
    let plan_path = dir.path().join("plan.txt");
    crate::device_field::write_plan(&plan_path, &plan);
    let field = crate::device_field::host_record(&blob, &vectors, plan);
    assert!(
        field.cusum_go.alarm_down > 0,
        "the GO CUSUM alarms: {field:?}"
    );
    assert!(field.cusum_go.down > 0 && field.cusum_nogo.up + field.cusum_nogo.down > 0);
    assert!(field.signal_faults[0] > 0 && field.below > 0 && field.above > 0);
    eprintln!(
        "field plan {plan:?}: GO CUSUM alarm at unit {}, {} faults",
        field.cusum_go.alarm_down, field.faults
    );
    crate::device_field::python_reference(&blob, &vectors, &field, dir.path());
    on_every_core(
        "signals",
        &out.join("signal-vectors-field.txt"),
        &out.join("signal-model.lgmb"),
        Some(&plan_path),
        |core, stdout| {
            assert_eq!(
                replay_lines(stdout),
                want,
                "{core}: the device and replay differ"
            );
            crate::device_field::check_record(core, stdout, &field);
            eprintln!(
                "{core}: example agrees with replay on {} field units",
                want.len() - 1
            );
        },
    );
}
