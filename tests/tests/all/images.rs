//! Flash images against GNU objcopy (Debian's binutils), which reads Intel HEX as published.

use std::process::Command;

use host_trainer::release::hex::{from_hex, to_hex};

#[test]
fn intel_hex_equals_the_blob_byte_for_byte_through_objcopy() {
    let Ok(out) = Command::new("objcopy").arg("--version").output() else {
        return crate::skip_or_fail(
            "Intel HEX vs objcopy",
            "objcopy not found (apt-get install binutils)",
        );
    };
    assert!(out.status.success());
    let dir = tempfile::tempdir().unwrap();
    let blob: Vec<u8> = (0..300u32).map(|i| (i * 7 + 3) as u8).collect();
    // Below 64 KiB, straddling 64 KiB, and high in a 32-bit map (extended linear address records).
    for addr in [0x0003_F000u32, 0x0000_FFF0, 0x0800_0000, 0x0001_0000] {
        let hex = to_hex(addr, &blob);
        // Every record's checksum makes its bytes sum to 0 mod 256 (the format's definition).
        for line in hex.lines() {
            let bytes: Vec<u8> = (1..line.len())
                .step_by(2)
                .map(|i| u8::from_str_radix(&line[i..i + 2], 16).unwrap())
                .collect();
            assert_eq!(
                bytes.iter().fold(0u8, |s, b| s.wrapping_add(*b)),
                0,
                "{line}"
            );
        }
        assert_eq!(from_hex(&hex).unwrap(), (addr, blob.clone()));
        let hp = dir.path().join("m.hex");
        let bp = dir.path().join("m.bin");
        std::fs::write(&hp, &hex).unwrap();
        let st = Command::new("objcopy")
            .args(["-I", "ihex", "-O", "binary"])
            .arg(&hp)
            .arg(&bp)
            .status()
            .unwrap();
        assert!(st.success(), "objcopy refused the HEX at {addr:#x}");
        assert_eq!(
            std::fs::read(&bp).unwrap(),
            blob,
            "objcopy image differs at {addr:#x}"
        );
    }
}
