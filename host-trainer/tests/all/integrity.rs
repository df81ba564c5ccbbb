//! Release integrity: a blob changed after packing (its CRC recomputed), a blob of another
//! model, a signed blob whose signature is not checked, and replay output left half-written
//! are all caught by `inspect` and `replay`. (The demo data is synthetic.)

use std::path::Path;

use crate::common;
use crate::common::{demo, exits, linegate, write};
use shared_model::{CheckedModel, FixedModel, blob};

/// The demo blob's model.
fn demo_model(d: &Path) -> FixedModel {
    let bytes = std::fs::read(d.join("demo/model.lgmb")).unwrap();
    blob::decode::<shared_model::Readings>(&bytes)
        .unwrap()
        .model()
        .clone()
}

/// Writes `m` as a valid blob (a fresh CRC) named `name`; `None` if `m` does not validate.
fn write_model(d: &Path, name: &str, m: FixedModel) -> Option<()> {
    let c = CheckedModel::new(m).ok()?;
    write(d, name, &host_trainer::release::pack::blob_bytes(&c));
    Some(())
}

fn replay(d: &Path, blob: &str, model: &str, extra: &[&str]) -> std::process::Output {
    let mut a = vec![
        "replay",
        "--form",
        "device",
        "--blob",
        blob,
        "--model",
        model,
        "demo/holdout-synthetic.csv",
    ];
    a.extend_from_slice(extra);
    linegate(&a, d)
}

#[test]
fn a_blob_changed_in_any_verdict_field_with_its_crc_recomputed_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let good = demo_model(d);
    // The demo's own blob and a blob of another word length still match.
    exits(
        &linegate(
            &["inspect", "demo/model.lgmb", "--model", "demo/model.json"],
            d,
        ),
        0,
    );
    exits(
        &linegate(
            &common::on_demo(
                "pack",
                &["--weight-bits", "8", "-o", "w8.lgmb", "--override-audit"],
            ),
            d,
        ),
        0,
    );
    exits(
        &linegate(&["inspect", "w8.lgmb", "--model", "demo/model.json"], d),
        0,
    );
    // One bias bit flipped, highest first, as long as the model still validates.
    let mut flipped = None;
    for bit in (1..31).rev() {
        let mut m = good.clone();
        m.bias ^= 1 << bit;
        if write_model(d, "bias.lgmb", m).is_some() {
            flipped = Some(bit);
            break;
        }
    }
    assert!(flipped.is_some(), "no bias bit gives a valid blob");
    let o = linegate(&["inspect", "bias.lgmb", "--model", "demo/model.json"], d);
    let err = exits(&o, 1);
    assert!(err.contains("bias"), "{err}");
    assert!(!String::from_utf8_lossy(&o.stdout).contains("matches float model"));
    let o = replay(d, "bias.lgmb", "demo/model.json", &[]);
    let err = exits(&o, 1);
    assert!(err.contains("bias"), "{err}");
    assert!(o.stdout.is_empty(), "nothing printed for a refused blob");
    // Each other field that decides a verdict, changed a little (one way or the other, as
    // long as the model still validates), is named.
    type Change = fn(&mut FixedModel, i64);
    let cases: [(&str, Change); 7] = [
        ("weight of channel 1", |m, s| {
            m.channels[1].weight += 2 * s as i32
        }),
        // The conversion fills the input word at the range's ends: a moved offset needs
        // a smaller multiplier to stay valid (the offset is compared first).
        ("offset", |m, s| {
            m.channels[0].offset += s as i32;
            m.channels[0].multiplier -= m.channels[0].multiplier / 64;
        }),
        ("valid range", |m, s| m.channels[2].raw_max += s as i32),
        ("conversion", |m, s| m.channels[3].multiplier += s as i32),
        ("thresholds", |m, s| m.go_min += 3 * s),
        ("fractional bits", |m, s| {
            m.weight_frac_bits = (i64::from(m.weight_frac_bits) + s) as u8
        }),
        ("channel 0 name", |m, _| m.channels.swap(0, 1)),
    ];
    for (field, change) in cases {
        let valid = [1, -1].into_iter().any(|s| {
            let mut m = good.clone();
            change(&mut m, s);
            write_model(d, "changed.lgmb", m).is_some()
        });
        assert!(valid, "{field}: no valid change");
        let err = exits(
            &linegate(
                &["inspect", "changed.lgmb", "--model", "demo/model.json"],
                d,
            ),
            1,
        );
        assert!(err.contains(field), "{field}: {err}");
        exits(&replay(d, "changed.lgmb", "demo/model.json", &[]), 1);
    }
}

#[test]
fn replay_refuses_a_blob_of_another_model() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let o = linegate(
        &[
            "train",
            "demo/drift-synthetic.csv",
            "--sheet",
            "demo/channels.toml",
            "--folds",
            "0",
            "-o",
            "other.json",
        ],
        d,
    );
    exits(&o, 0);
    let o = replay(d, "demo/model.lgmb", "other.json", &[]);
    let err = exits(&o, 1);
    assert!(err.contains("model id"), "{err}");
    assert!(o.stdout.is_empty());
}

#[test]
fn replay_checks_a_signature_and_says_when_it_did_not() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    exits(&linegate(&["-q", "key", "new", "-o", "owner"], d), 0);
    exits(&linegate(&["-q", "key", "new", "-o", "stranger"], d), 0);
    exits(
        &linegate(
            &common::on_demo(
                "pack",
                &[
                    "--sign",
                    "owner.key",
                    "--apply-suggested-band",
                    "-o",
                    "signed.lgmb",
                ],
            ),
            d,
        ),
        0,
    );
    let o = replay(
        d,
        "signed.lgmb",
        "demo/model.json",
        &["--public-key", "stranger.pub"],
    );
    let err = exits(&o, 1);
    assert!(err.contains("signed by key"), "{err}");
    assert!(o.stdout.is_empty(), "nothing printed before the signature");
    let o = replay(
        d,
        "demo/model.lgmb",
        "demo/model.json",
        &["--public-key", "owner.pub"],
    );
    let err = exits(&o, 1);
    assert!(err.contains("not signed"), "{err}");
    let o = replay(
        d,
        "signed.lgmb",
        "demo/model.json",
        &["--public-key", "owner.pub"],
    );
    let err = exits(&o, 0);
    assert!(!err.contains("not checked"), "{err}");
    let o = replay(d, "signed.lgmb", "demo/model.json", &[]);
    let err = exits(&o, 0);
    assert!(err.contains("not checked"), "{err}");
    // Inspect without a key does not call a signed blob plainly "ok".
    let o = linegate(&["inspect", "signed.lgmb"], d);
    exits(&o, 0);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        out.contains("status: ok (signature present, not checked: give --public-key)"),
        "{out}"
    );
    let o = linegate(&["inspect", "signed.lgmb", "--public-key", "owner.pub"], d);
    exits(&o, 0);
    assert!(!String::from_utf8_lossy(&o.stdout).contains("not checked"));
}

#[test]
fn replay_prints_nothing_before_its_checks_and_writes_its_file_whole() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    // A log without one of the model's channels fails on its header: no line printed.
    let log = std::fs::read_to_string(d.join("demo/holdout-synthetic.csv")).unwrap();
    let cut: String = log
        .lines()
        .map(|l| l.rsplitn(3, ',').nth(2).unwrap().to_string() + "\n")
        .collect();
    write(d, "cut.csv", cut.as_bytes());
    let run = |extra: &[&str]| {
        let mut a = vec![
            "replay",
            "--form",
            "device",
            "--blob",
            "demo/model.lgmb",
            "--model",
            "demo/model.json",
        ];
        a.extend_from_slice(extra);
        linegate(&a, d)
    };
    let o = run(&["cut.csv"]);
    exits(&o, 2);
    assert!(
        o.stdout.is_empty(),
        "{}",
        String::from_utf8_lossy(&o.stdout)
    );
    // -o: the whole replay, or no file at all.
    let o = run(&["cut.csv", "-o", "out.txt"]);
    exits(&o, 2);
    assert!(!d.join("out.txt").exists());
    let o = run(&["demo/holdout-synthetic.csv", "-o", "out.txt"]);
    exits(&o, 0);
    assert!(o.stdout.is_empty());
    assert_eq!(
        std::fs::read_to_string(d.join("out.txt")).unwrap(),
        std::fs::read_to_string(d.join("demo/replay-holdout.txt")).unwrap()
    );
    // A bad row half-way: stdout has the lines before it, the -o file is not written.
    let mut rows: Vec<String> = log.lines().map(str::to_string).collect();
    rows[200] = rows[200].replacen(",GO", ",GO,extra", 1);
    rows[200] = rows[200].replacen(",NO-GO", ",NO-GO,extra", 1);
    write(d, "bad.csv", (rows.join("\n") + "\n").as_bytes());
    let o = run(&["bad.csv", "-o", "bad.txt"]);
    exits(&o, 2);
    assert!(!d.join("bad.txt").exists());
    let left: Vec<_> = std::fs::read_dir(d)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(left.is_empty(), "temporary files left: {left:?}");
    let o = run(&["bad.csv"]);
    exits(&o, 2);
    assert!(String::from_utf8_lossy(&o.stdout).starts_with("# model "));
    // Without --force an existing output is kept.
    let o = run(&["demo/holdout-synthetic.csv", "-o", "out.txt"]);
    exits(&o, 2);
}

/// One Intel HEX record, built here by hand (Intel HEX specification: `:LLAAAATT<data>CC`,
/// the checksum making the record's bytes sum to 0 mod 256).
fn record(addr: u16, kind: u8, data: &[u8]) -> String {
    let mut b = vec![data.len() as u8, (addr >> 8) as u8, addr as u8, kind];
    b.extend_from_slice(data);
    let sum = b.iter().fold(0u8, |s, x| s.wrapping_add(*x));
    b.push(sum.wrapping_neg());
    let hex: String = b.iter().map(|x| format!("{x:02X}")).collect();
    format!(":{hex}\n")
}

/// `data` at `segment`:0 with extended segment address records (type 02), as 16-bit tools
/// write them, and start address records (types 03 and 05) before the end.
fn segment_image(segment: u16, data: &[u8]) -> String {
    let mut out = record(0, 0x02, &segment.to_be_bytes());
    for (i, chunk) in data.chunks(16).enumerate() {
        out += &record((i * 16) as u16, 0x00, chunk);
    }
    out += &record(0, 0x03, &[0x00, 0x00, 0x10, 0x00]);
    out += &record(0, 0x05, &[0x00, 0x00, 0x10, 0x00]);
    out + &record(0, 0x01, &[])
}

#[test]
fn flash_images_with_erased_flash_and_segment_or_start_records_are_read() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    exits(&linegate(&["-q", "key", "new", "-o", "owner"], d), 0);
    exits(
        &linegate(
            &common::on_demo(
                "pack",
                &[
                    "--sign",
                    "owner.key",
                    "--apply-suggested-band",
                    "-o",
                    "signed.lgmb",
                ],
            ),
            d,
        ),
        0,
    );
    let signed = std::fs::read(d.join("signed.lgmb")).unwrap();
    // Erased flash after a signed blob (FORMAT.md: ignored), in a HEX image and a raw one.
    let mut erased = signed.clone();
    erased.extend_from_slice(&[0xFF; 100]);
    write(d, "erased.hex", segment_image(0x3F00, &erased).as_bytes());
    write(d, "erased.bin", &erased);
    for f in ["erased.hex", "erased.bin"] {
        let o = linegate(
            &[
                "inspect",
                f,
                "--public-key",
                "owner.pub",
                "--model",
                "demo/model.json",
            ],
            d,
        );
        exits(&o, 0);
        let out = String::from_utf8_lossy(&o.stdout);
        assert!(out.contains("signature valid"), "{f}: {out}");
    }
    let o = linegate(&["inspect", "erased.hex"], d);
    assert!(
        String::from_utf8_lossy(&o.stdout).contains("loads at 0x0003f000"),
        "segment 0x3F00 is base 0x3F000"
    );
    // Anything but erased flash after the blob is still refused.
    let mut junk = erased.clone();
    *junk.last_mut().unwrap() = 0x00;
    write(d, "junk.hex", segment_image(0x3F00, &junk).as_bytes());
    let err = exits(&linegate(&["inspect", "junk.hex"], d), 1);
    assert!(err.contains("trailing bytes"), "{err}");
    // As GNU objcopy writes an image with a start address, when it is installed.
    let ok = std::process::Command::new("objcopy")
        .args(["-I", "binary", "-O", "ihex", "--set-start", "0x1000"])
        .arg(d.join("erased.bin"))
        .arg(d.join("objcopy.hex"))
        .status()
        .is_ok_and(|s| s.success());
    if ok {
        let o = linegate(&["inspect", "objcopy.hex", "--public-key", "owner.pub"], d);
        exits(&o, 0);
    } else {
        eprintln!(
            "\n======== SKIPPED: objcopy is not installed: no image written by it ========\n"
        );
    }
}

#[test]
fn inspect_names_what_is_wrong_under_q_and_with_a_key() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    exits(&linegate(&["-q", "key", "new", "-o", "owner"], d), 0);
    let blob = std::fs::read(d.join("demo/model.lgmb")).unwrap();
    let mut f = blob.clone();
    f[30] ^= 0x08;
    write(d, "flipped.lgmb", &f);
    let o = linegate(&["-q", "inspect", "flipped.lgmb"], d);
    let err = exits(&o, 1);
    assert!(err.contains("CRC mismatch"), "-q still says why: {err:?}");
    assert!(o.stdout.is_empty());
    write(d, "short.lgmb", &blob[..blob.len() / 2]);
    let mut bad = blob.clone();
    bad[0] = b'X';
    write(d, "magic.lgmb", &bad);
    for (f, want) in [("short.lgmb", "truncated"), ("magic.lgmb", "bad magic")] {
        let err = exits(
            &linegate(&["inspect", f, "--public-key", "owner.pub"], d),
            1,
        );
        assert!(
            err.contains(want) && !err.contains("not signed"),
            "{f}: {err}"
        );
    }
}

#[test]
fn a_mixed_pack_set_is_refused_wherever_it_is_inspected() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    let pack = |bits: &str| {
        linegate(
            &common::on_demo(
                "pack",
                &[
                    "--weight-bits",
                    bits,
                    "--override-audit",
                    "--hex",
                    "0x3F000",
                    "--bin",
                    "--force",
                    "-o",
                    "rel.lgmb",
                ],
            ),
            d,
        )
    };
    exits(&pack("16"), 0);
    for f in ["rel.lgmb", "rel.hex", "rel.bin"] {
        exits(&linegate(&["inspect", f], d), 0);
    }
    // The .hex and .bin are compared with an audit report by the blob's SHA-256, as the .lgmb.
    exits(
        &linegate(
            &["inspect", "demo/model.hex", "--report", "demo/audit.json"],
            d,
        ),
        0,
    );
    // A pack stopped after its new blob: the old .hex and .bin stay beside it.
    let old_hex = std::fs::read(d.join("rel.hex")).unwrap();
    let old_bin = std::fs::read(d.join("rel.bin")).unwrap();
    exits(&pack("12"), 0);
    std::fs::write(d.join("rel.hex"), &old_hex).unwrap();
    let err = exits(&linegate(&["inspect", "rel.lgmb"], d), 1);
    assert!(err.contains("rel.hex holds another blob"), "{err}");
    let err = exits(&linegate(&["inspect", "rel.bin"], d), 1);
    assert!(err.contains("rel.hex holds another blob"), "{err}");
    let err = exits(&linegate(&["inspect", "rel.hex"], d), 1);
    assert!(err.contains("rel.lgmb holds another blob"), "{err}");
    std::fs::write(d.join("rel.bin"), &old_bin).unwrap();
    std::fs::remove_file(d.join("rel.hex")).unwrap();
    let err = exits(&linegate(&["inspect", "rel.lgmb"], d), 1);
    assert!(err.contains("rel.bin holds another blob"), "{err}");
}

/// Whether `line` is a unit line of the grammar README.md gives for replay.
fn unit_line(line: &str) -> bool {
    let mut w = line.split(' ');
    let index_ok = w.next().is_some_and(|i| i.parse::<usize>().is_ok());
    let rest: Vec<&str> = w.collect();
    let word_ok = match rest.as_slice() {
        [v, s] if ["GO", "NO-GO", "RECHECK"].contains(v) => s.parse::<i64>().is_ok(),
        ["FAULT", what] => {
            ["count", "other"].contains(what)
                || what
                    .strip_prefix("ch")
                    .or_else(|| what.strip_prefix("signal"))
                    .is_some_and(|n| n.parse::<u8>().is_ok())
        }
        _ => false,
    };
    index_ok && word_ok
}

#[test]
fn replay_lines_follow_the_grammar_the_readme_gives() {
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("../README.md"))
            .unwrap();
    for form in [
        "`# model <32 hex digits> blob <8 hex digits>`",
        "` key <16 hex digits>`",
        "`<index> GO <score>`",
        "`<index> NO-GO <score>`",
        "`<index> RECHECK <score>`",
        "`<index> FAULT ch<n>`",
        "`<index> FAULT signal<k>`",
        "`<index> FAULT count`",
    ] {
        assert!(readme.contains(form), "README.md lacks {form}");
    }
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    demo(d);
    for (blob, model, log) in [
        ("model.lgmb", "model.json", "holdout-synthetic.csv"),
        (
            "signal-model.lgmb",
            "signal-model.json",
            "signal-field-synthetic.csv",
        ),
    ] {
        let (blob, model, log) = (
            format!("demo/{blob}"),
            format!("demo/{model}"),
            format!("demo/{log}"),
        );
        let o = linegate(
            &[
                "replay", "--form", "device", "--blob", &blob, "--model", &model, &log,
            ],
            d,
        );
        exits(&o, 0);
        let out = String::from_utf8(o.stdout).unwrap();
        let mut lines = out.lines();
        let first: Vec<&str> = lines.next().unwrap().split(' ').collect();
        assert!(
            first.len() == 5
                && first[..2] == ["#", "model"]
                && first[2].len() == 32
                && first[3] == "blob"
                && first[4].len() == 8,
            "{first:?}"
        );
        for (i, l) in lines.enumerate() {
            assert!(unit_line(l), "{blob}: line {}: {l}", i + 2);
            assert!(l.starts_with(&format!("{i} ")), "{l}");
        }
    }
}
