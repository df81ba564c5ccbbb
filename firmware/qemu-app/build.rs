//! Puts the board's memory layout (memory.x, by target) on the linker path, links in the test vectors named by
//! LINEGATE_VECTORS (one unit per line, raw readings separated by spaces), and compiles in
//! the release key named by LINEGATE_PUBLIC_KEY (a `.pub` file from `linegate key new`):
//! a build with a key is a signed-release build, which loads only blobs signed with it;
//! and the field statistics' plan named by LINEGATE_FIELD_PLAN (see [`field_plan`]).

use std::env;
use std::fmt::Write;
use std::fs;
use std::path::PathBuf;

fn main() {
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("OUT_DIR"));
    // One memory layout per board (the M3 and M4F boards share one: flash at 0, RAM at
    // 0x20000000). None is called memory.x: the linker would find that in this folder first.
    let target = env::var("TARGET").unwrap_or_default();
    let memory = match target.as_str() {
        "thumbv6m-none-eabi" => "memory-microbit.x",
        "thumbv8m.main-none-eabihf" => "memory-an505.x",
        "riscv32imac-unknown-none-elf" => "memory-sifive-e.x",
        _ => "memory-lm3s6965.x",
    };
    fs::copy(memory, out.join("memory.x")).expect("copy the memory layout");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed={memory}");
    println!("cargo:rerun-if-env-changed=LINEGATE_VECTORS");
    let mut rows: Vec<Vec<i32>> = Vec::new();
    if let Some(path) = env::var_os("LINEGATE_VECTORS") {
        println!("cargo:rerun-if-changed={}", PathBuf::from(&path).display());
        let text = fs::read_to_string(&path).expect("read LINEGATE_VECTORS");
        // Lines starting with '#' (the model line) are comments.
        for (n, line) in text
            .lines()
            .enumerate()
            .filter(|(_, l)| !l.trim().is_empty() && !l.starts_with('#'))
        {
            let row: Vec<i32> = line
                .split_whitespace()
                .map(|v| {
                    v.parse()
                        .unwrap_or_else(|_| panic!("vectors line {}: '{v}' is not an i32", n + 1))
                })
                .collect();
            rows.push(row);
        }
    }
    let width = rows.first().map_or(0, Vec::len);
    assert!(
        rows.iter().all(|r| r.len() == width),
        "vectors: every line needs the same number of readings"
    );
    let mut src = format!(
        "/// Readings per vector.\npub const WIDTH: usize = {width};\n/// Test vectors, row-major.\npub static VECTORS: [i32; {}] = [",
        width * rows.len()
    );
    for r in &rows {
        for v in r {
            let _ = write!(src, "{v},");
        }
    }
    src.push_str("];\n");
    fs::write(out.join("vectors.rs"), src).expect("write vectors.rs");
    println!("cargo:rerun-if-env-changed=LINEGATE_PUBLIC_KEY");
    let key = env::var_os("LINEGATE_PUBLIC_KEY").map(|path| {
        println!("cargo:rerun-if-changed={}", PathBuf::from(&path).display());
        let text = fs::read_to_string(&path).expect("read LINEGATE_PUBLIC_KEY");
        // The key file's TOML layout (`public_key = "<64 hex>"`) or the older
        // `ed25519-public <64 hex>` line; `linegate inspect` checks the rest of the file.
        let hex = text
            .lines()
            .find_map(|l| {
                l.strip_prefix("ed25519-public ").or_else(|| {
                    let v = l
                        .strip_prefix("public_key")?
                        .trim_start()
                        .strip_prefix('=')?;
                    v.trim().strip_prefix('"')?.strip_suffix('"')
                })
            })
            .expect("LINEGATE_PUBLIC_KEY: no 'public_key' field (give the .pub file)")
            .trim()
            .to_string();
        assert_eq!(hex.len(), 64, "LINEGATE_PUBLIC_KEY: 64 hex digits expected");
        (0..32)
            .map(|i| format!("0x{},", &hex[2 * i..2 * i + 2]))
            .collect::<String>()
    });
    let key_src = match key {
        Some(bytes) => format!("/// The release key a blob must be signed with.\npub const RELEASE_KEY: Option<[u8; 32]> = Some([{bytes}]);\n"),
        None => "/// No release key: an unsigned build accepts any valid blob.\npub const RELEASE_KEY: Option<[u8; 32]> = None;\n".into(),
    };
    fs::write(out.join("release_key.rs"), key_src).expect("write release_key.rs");
    println!("cargo:rerun-if-env-changed=LINEGATE_FIELD_PLAN");
    fs::write(out.join("field_plan.rs"), field_plan()).expect("write field_plan.rs");
}

/// The keys of a plan file, in `FieldPlan` order.
const PLAN_KEYS: [&str; 8] = [
    "origin",
    "shift",
    "go_target",
    "go_slack",
    "go_limit",
    "nogo_target",
    "nogo_slack",
    "nogo_limit",
];

/// The field statistics' plan as Rust source. LINEGATE_FIELD_PLAN names a small text file of
/// `key = integer` lines (`#` starts a comment), every key of [`PLAN_KEYS`] exactly once, in
/// accumulator units as `shared_model::field::FieldPlan` takes them (the blob id is the
/// loaded blob's). Without it, the zero plan: every count, fault and channel figure as
/// under any plan; bins of 1 unit from score 0; CUSUMs with target, slack and limit 0.
fn field_plan() -> String {
    let mut v = [0i64; 8];
    if let Some(path) = env::var_os("LINEGATE_FIELD_PLAN") {
        let shown = PathBuf::from(&path).display().to_string();
        println!("cargo:rerun-if-changed={shown}");
        let text = fs::read_to_string(&path)
            .unwrap_or_else(|e| panic!("read LINEGATE_FIELD_PLAN {shown}: {e}"));
        let mut seen = [false; 8];
        for (n, line) in text.lines().enumerate() {
            let line = line.split('#').next().unwrap_or("").trim();
            if line.is_empty() {
                continue;
            }
            let (key, value) = line
                .split_once('=')
                .unwrap_or_else(|| panic!("{shown} line {}: 'key = integer' expected", n + 1));
            let (key, value) = (key.trim(), value.trim());
            let i = PLAN_KEYS.iter().position(|k| *k == key).unwrap_or_else(|| {
                panic!(
                    "{shown} line {}: unknown key '{key}' (keys: {PLAN_KEYS:?})",
                    n + 1
                )
            });
            assert!(!seen[i], "{shown} line {}: '{key}' given twice", n + 1);
            seen[i] = true;
            v[i] = value
                .parse()
                .unwrap_or_else(|_| panic!("{shown} line {}: '{value}' is not an integer", n + 1));
        }
        if let Some(i) = seen.iter().position(|s| !s) {
            panic!(
                "{shown}: no '{}' (every key is needed: {PLAN_KEYS:?})",
                PLAN_KEYS[i]
            );
        }
        assert!(
            (0..=62).contains(&v[1]),
            "{shown}: shift {} is outside 0..=62",
            v[1]
        );
    }
    format!(
        "/// The field statistics' plan this image was built with (LINEGATE_FIELD_PLAN).\n\
         pub const PLAN: shared_model::field::FieldPlan = shared_model::field::FieldPlan {{\n\
         blob_id: 0,\norigin: {},\nshift: {},\n\
         go: shared_model::field::CusumPlan {{ target: {}, slack: {}, limit: {} }},\n\
         nogo: shared_model::field::CusumPlan {{ target: {}, slack: {}, limit: {} }},\n}};\n",
        v[0], v[1], v[2], v[3], v[4], v[5], v[6], v[7]
    )
}
