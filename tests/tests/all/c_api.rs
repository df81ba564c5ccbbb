//! The C interface (firmware/c-api): its committed header is the one cbindgen generates
//! from the source, and the C example station built against it on this machine prints,
//! for 100,000 vectors, exactly the lines `linegate replay` prints.

use std::path::Path;
use std::process::Command;

/// The header cbindgen (the registry's C-binding generator) makes from the crate now.
fn generated_header() -> String {
    let krate = crate::root().join("firmware/c-api");
    let config = cbindgen::Config::from_file(krate.join("cbindgen.toml")).unwrap();
    let mut out = Vec::new();
    cbindgen::Builder::new()
        .with_crate(&krate)
        .with_config(config)
        .generate()
        .unwrap()
        .write(&mut out);
    String::from_utf8(out).unwrap()
}

/// `LINEGATE_BLESS=1 cargo test -p tests c_header` rewrites the committed header.
#[test]
fn c_header_is_the_one_cbindgen_generates() {
    let path = crate::root().join("firmware/c-api/include/linegate.h");
    let fresh = generated_header();
    if std::env::var("LINEGATE_BLESS").is_ok_and(|v| v == "1") {
        std::fs::write(&path, &fresh).unwrap();
    }
    let committed = std::fs::read_to_string(&path).unwrap_or_default();
    assert!(
        committed == fresh,
        "firmware/c-api/include/linegate.h is stale: run LINEGATE_BLESS=1 cargo test -p tests c_header"
    );
    for f in [
        "lg_load",
        "lg_classify",
        "lg_model_id",
        "lg_blob_id",
        "lg_channel_count",
        "lg_channel_name",
        "lg_station_init",
        "lg_station_step",
        "lg_station_ids",
    ] {
        assert!(fresh.contains(&format!(" {f}(")), "{f} declared");
    }
}

pub(crate) fn tool(name: &str) -> Result<(), String> {
    Command::new(name)
        .arg("--version")
        .output()
        .map(|_| ())
        .map_err(|_| format!("{name} not found"))
}

/// The `linegate` binary, built in release (the tests crate has no binary of its own).
pub fn linegate_bin() -> std::path::PathBuf {
    let st = Command::new("cargo")
        .args(["build", "-q", "--release", "-p", "host-trainer"])
        .current_dir(crate::root())
        .status()
        .unwrap();
    assert!(st.success(), "building linegate failed");
    std::env::var_os("CARGO_TARGET_DIR")
        .map_or_else(|| crate::root().join("target"), Into::into)
        .join("release/linegate")
}

fn linegate(dir: &Path, args: &[&str]) -> std::process::Output {
    let o = Command::new(linegate_bin())
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "linegate {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    o
}

/// A generated 16-channel log of `rows` units (seed `seed`), its model and blob (m.lgmb)
/// in `d`, and `replay`'s lines for its first `units` units, every `every`-th of which has
/// one reading replaced by `bad` (out of range: a FAULT line). Returns the lines and how
/// many units were damaged.
fn replayed_fixture(
    d: &Path,
    rows: usize,
    seed: u64,
    units: usize,
    every: usize,
    bad: &str,
) -> (String, usize) {
    let (rows, seed) = (rows.to_string(), seed.to_string());
    linegate(
        d,
        &[
            "-q",
            "generate",
            "--rows",
            &rows,
            "--channels",
            "16",
            "--seed",
            &seed,
            "-o",
            "g.csv",
        ],
    );
    linegate(
        d,
        &[
            "-q", "train", "g.csv", "--sheet", "g.toml", "--folds", "0", "-o", "m.json",
        ],
    );
    linegate(
        d,
        &[
            "-q",
            "pack",
            "--model",
            "m.json",
            "--train",
            "g.csv",
            "-o",
            "m.lgmb",
            "--override-audit",
        ],
    );
    let text = std::fs::read_to_string(d.join("g.csv")).unwrap();
    let mut damaged = 0;
    let log: String = text
        .lines()
        .take(units + 1)
        .enumerate()
        .map(|(k, l)| {
            if k > 0 && k % every == 0 {
                damaged += 1;
                let mut cells: Vec<&str> = l.split(',').collect();
                cells[1 + k % 16] = bad; // a channel column (after the unit id)
                cells.join(",") + "\n"
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    std::fs::write(d.join("u.csv"), log).unwrap();
    let out = linegate(
        d,
        &[
            "replay",
            "--form",
            "device",
            "--blob",
            "m.lgmb",
            "--model",
            "m.json",
            "u.csv",
            "--vectors",
            "v.txt",
        ],
    );
    (String::from_utf8(out.stdout).unwrap(), damaged)
}

/// Builds the static library for `target` (None: this machine) in release.
pub fn build_c_library(target: Option<&str>) {
    let mut cmd = Command::new("cargo");
    cmd.args(["build", "--release", "-q"]);
    if let Some(t) = target {
        cmd.args(["--target", t]);
    }
    let st = cmd
        .current_dir(crate::root().join("firmware/c-api"))
        .env_remove("CARGO_TARGET_DIR")
        .status()
        .unwrap();
    assert!(st.success(), "c-api build for {target:?} failed");
}

#[test]
fn c_example_on_the_host_matches_replay_and_holds_at_its_edges() {
    if let Err(why) = tool("gcc").and_then(|_| tool("make")) {
        return crate::skip_or_fail("C example on the host", &why);
    }
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Every 997th unit gets a reading far outside its channel's range: a FAULT line each.
    let (replay, faulted) = replayed_fixture(d, 100_000, 11, 100_000, 997, "99999999");

    build_c_library(None);
    let example = crate::root().join("firmware/c-example");
    let bin = d.join("station-host");
    let st = Command::new("make")
        .args(["-s", "host"])
        .arg(format!("OUT={}", bin.display()))
        .current_dir(&example)
        .status()
        .unwrap();
    assert!(st.success(), "make host failed");
    let o = Command::new(&bin)
        .arg(d.join("m.lgmb"))
        .arg(d.join("v.txt"))
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let c = String::from_utf8(o.stdout).unwrap();
    let host: Vec<&str> = replay.lines().collect();
    let device: Vec<&str> = c
        .lines()
        .filter(|l| !l.starts_with("# lines") && !l.starts_with("# field"))
        .collect();
    assert_eq!(host.len(), 100_001, "the model line and 100,000 units");
    assert_eq!(device.len(), host.len(), "one line per unit");
    for (i, (a, b)) in device.iter().zip(&host).enumerate() {
        assert_eq!(a, b, "line {i}: the C station and replay differ");
    }
    let faults = host.iter().filter(|l| l.contains(" FAULT ch")).count();
    assert_eq!(faults, faulted, "each damaged unit is a FAULT");
    // The C station's field record (zero plan) is the host's over the same vectors, its
    // channel faults included.
    let blob = std::fs::read(d.join("m.lgmb")).unwrap();
    let vectors = std::fs::read_to_string(d.join("v.txt")).unwrap();
    let field = crate::device_field::host_record(&blob, &vectors, Default::default());
    assert_eq!(field.faults as usize, faulted);
    crate::device_field::check_record("C station on the host", &c, &field);

    // The interface's edges from C: NULLs, storage never set up, damaged blobs, names and
    // short buffers, wrong counts, a key without signed releases, failing callbacks.
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
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{text}");
    assert!(
        text.lines().filter(|l| l.starts_with("ok: ")).count() >= 30,
        "{text}"
    );
    assert!(!text.contains("FAILED"), "{text}");
}

/// The C example station, built by the Debian Arm GCC against the device static library,
/// on an emulated Cortex-M0 (QEMU microbit) and Cortex-M4F (mps2-an386): each prints
/// `linegate replay`'s lines for the same vectors (FAULTs included), drives the lines to
/// the last verdict, and reports its stack and static RAM.
#[test]
fn c_example_on_cortex_m0_and_m4f_prints_what_replay_prints() {
    if let Err(why) = tool("arm-none-eabi-gcc")
        .and_then(|_| tool("qemu-system-arm"))
        .and_then(|_| tool("make"))
    {
        return crate::skip_or_fail("C example under QEMU", &why);
    }
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // 300 units, every 37th with a reading out of range.
    let (replay, _) = replayed_fixture(d, 2000, 5, 300, 37, "-99999999");
    assert_eq!(replay.lines().count(), 301);
    let blob = std::fs::read(d.join("m.lgmb")).unwrap();
    let vectors = std::fs::read_to_string(d.join("v.txt")).unwrap();
    let field = crate::device_field::host_record(&blob, &vectors, Default::default());
    for (board, make, machine, cpu, target) in [
        (
            "Cortex-M0",
            "m0",
            "microbit",
            "cortex-m0",
            "thumbv6m-none-eabi",
        ),
        (
            "Cortex-M4F",
            "m4f",
            "mps2-an386",
            "cortex-m4",
            "thumbv7em-none-eabihf",
        ),
    ] {
        build_c_library(Some(target));
        let st = Command::new("make")
            .args(["-s", make])
            .arg(format!("BLOB={}", d.join("m.lgmb").display()))
            .arg(format!("VECTORS={}", d.join("v.txt").display()))
            .arg(format!("BUILD={}", d.display()))
            .current_dir(crate::root().join("firmware/c-example"))
            .status()
            .unwrap();
        assert!(
            st.success(),
            "{board}: make {make} failed (the panic-never proof is part of the link)"
        );
        let elf = d.join(format!("station-{make}.elf"));
        let o = Command::new("timeout")
            .args([
                "120",
                "qemu-system-arm",
                "-machine",
                machine,
                "-cpu",
                cpu,
                "-nographic",
            ])
            .args(["-semihosting-config", "enable=on,target=native", "-kernel"])
            .arg(&elf)
            .output()
            .unwrap();
        let out = String::from_utf8_lossy(&o.stdout).into_owned();
        assert_eq!(o.status.code(), Some(0), "{board}: {out}");
        let lines: Vec<&str> = out
            .lines()
            .filter(|l| !l.starts_with("# ") || l.starts_with("# model"))
            .collect();
        let want: Vec<&str> = replay.lines().collect();
        assert_eq!(lines, want, "{board}: the device and replay differ");
        crate::device_field::check_record(board, &out, &field);
        let last = want.last().unwrap();
        let go = if last.contains(" GO ") { 1 } else { 0 };
        assert!(
            out.contains(&format!("# lines: GO={go} NO-GO={}", 1 - go)),
            "{board}: {out}"
        );
        let stack: u32 = out
            .lines()
            .find_map(|l| l.strip_prefix("# stack bytes used: "))
            .unwrap()
            .parse()
            .unwrap();
        assert!(
            stack > 0 && stack < 12 * 1024,
            "{board}: stack {stack} bytes within 16 KiB RAM"
        );
        eprintln!("{board}: C example agrees with replay on 300 vectors; stack {stack} bytes");
    }
}

/// The C example in the README's "On the device" section compiles against the committed
/// header (with stand-ins for the board functions it names), so the README cannot drift
/// from the interface.
#[test]
fn readme_c_example_compiles_against_the_header() {
    if let Err(why) = tool("gcc") {
        return crate::skip_or_fail("README C example", &why);
    }
    let readme = std::fs::read_to_string(crate::root().join("README.md")).unwrap();
    let start = readme.find("```c\n").expect("a C example in the README") + 5;
    let len = readme[start..].find("```").unwrap();
    let example = &readme[start..start + len];
    assert!(
        example.contains("lg_station_step"),
        "the example runs a station"
    );
    let dir = tempfile::tempdir().unwrap();
    let src = dir.path().join("example.c");
    let stand_ins = "#include <stdbool.h>\n#include <stddef.h>\n#include <stdint.h>\n\
        bool adc_read_all(int32_t *raw, size_t n);\n\
        bool gpio_write(int line, bool high);\n\
        void log_fault(const char *fmt, ...);\n";
    std::fs::write(&src, format!("{stand_ins}{example}")).unwrap();
    let o = Command::new("gcc")
        .args([
            "-std=c11",
            "-Wall",
            "-Wextra",
            "-Werror",
            "-Wno-unused-parameter",
            "-fsyntax-only",
            "-I",
        ])
        .arg(crate::root().join("firmware/c-api/include"))
        .arg(&src)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "the README's C example does not compile:\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
}
