//! Intel HEX writer and reader (the published Intel hexadecimal object file format).
//!
//! Records are `:LLAAAATT<data>CC`: byte count, 16-bit address, type, data,
//! and a checksum that makes the sum of all record bytes 0 mod 256. Type 00
//! is data, 01 end of file, 04 extended linear address (the upper 16 bits of
//! the 32-bit address for the data records that follow), 02 extended segment
//! address (a base of segment × 16 for the records that follow). Types 03 and
//! 05 (start segment / start linear address: where a CPU would begin executing)
//! are read and ignored: a blob is data, not a program. The writer uses 00, 01
//! and 04 only.

/// Why an image cannot be written at an address.
#[derive(Debug, PartialEq, Eq, thiserror::Error)]
pub enum PlaceError {
    /// The image would run past the top of the 32-bit address space (and wrap to 0).
    #[error(
        "an image of {len} bytes at {address:#010x} runs past the top of the 32-bit address space (it would wrap to address 0, the vector table on most parts); choose an address at or below {last:#010x}"
    )]
    PastTop {
        /// Where it was to start.
        address: u32,
        /// Its length.
        len: usize,
        /// The highest start address that fits.
        last: u64,
    },
}

/// Checks that `len` bytes fit at `address` without wrapping past 4 GiB.
///
/// # Errors
/// [`PlaceError::PastTop`] if they do not.
pub fn check_placement(address: u32, len: usize) -> Result<(), PlaceError> {
    let end = u64::from(address) + len as u64;
    if end > 1 << 32 {
        return Err(PlaceError::PastTop {
            address,
            len,
            last: (1u64 << 32).saturating_sub(len as u64),
        });
    }
    Ok(())
}

/// Writes `data` placed at `address` as Intel HEX: 16-byte data records, an extended
/// linear address record wherever the upper 16 address bits change, and the EOF record.
/// The caller checks the placement first ([`check_placement`]); data past 4 GiB would wrap.
pub fn to_hex(address: u32, data: &[u8]) -> String {
    let mut out = String::new();
    let mut upper: Option<u16> = None;
    let mut addr = address;
    for chunk in data.chunks(16) {
        // A record must not cross a 64 KiB boundary: split there.
        let room = (0x1_0000 - (addr & 0xFFFF)) as usize;
        let (a, b) = chunk.split_at(chunk.len().min(room));
        for part in [a, b] {
            if part.is_empty() {
                continue;
            }
            let hi = (addr >> 16) as u16;
            if upper != Some(hi) {
                record(&mut out, 0, 0x04, &hi.to_be_bytes());
                upper = Some(hi);
            }
            record(&mut out, (addr & 0xFFFF) as u16, 0x00, part);
            addr = addr.wrapping_add(part.len() as u32);
        }
    }
    record(&mut out, 0, 0x01, &[]);
    out
}

fn record(out: &mut String, addr: u16, kind: u8, data: &[u8]) {
    let mut bytes = vec![data.len() as u8, (addr >> 8) as u8, addr as u8, kind];
    bytes.extend_from_slice(data);
    let sum = bytes.iter().fold(0u8, |s, b| s.wrapping_add(*b));
    bytes.push(sum.wrapping_neg());
    out.push(':');
    for b in bytes {
        out.push_str(&format!("{b:02X}"));
    }
    out.push('\n');
}

/// Why a HEX file could not be read.
#[derive(Debug, PartialEq, Eq, thiserror::Error)]
pub enum HexError {
    /// A record is malformed.
    #[error("line {0}: malformed record")]
    Malformed(usize),
    /// A record's checksum is wrong.
    #[error("line {0}: checksum mismatch")]
    Checksum(usize),
    /// Data are not contiguous.
    #[error("line {0}: data not contiguous with the previous record")]
    Gap(usize),
    /// No EOF record.
    #[error("no end-of-file record")]
    NoEof,
    /// Something other than blank lines follows the end-of-file record.
    #[error("line {0}: content after the end-of-file record")]
    AfterEof(usize),
    /// A record other than a data record carries a non-zero address field.
    #[error(
        "line {0}: the address field of an extended address or start address record must be 0000"
    )]
    AddressField(usize),
    /// Data run past the top of the 32-bit address space.
    #[error("line {0}: data run past the top of the 32-bit address space")]
    PastTop(usize),
}

/// Reads contiguous data back: (start address, bytes). Verifies every checksum.
///
/// # Errors
/// [`HexError`] naming the line.
pub fn from_hex(text: &str) -> Result<(u32, Vec<u8>), HexError> {
    // The base the next data records' addresses add to (record type 04 or 02).
    let mut base = 0u32;
    let mut start: Option<u32> = None;
    let mut data = Vec::new();
    let mut eof: Option<(u32, Vec<u8>)> = None;
    for (n, line) in text.lines().enumerate().map(|(n, l)| (n + 1, l.trim())) {
        if line.is_empty() {
            continue;
        }
        if eof.is_some() {
            return Err(HexError::AfterEof(n));
        }
        let body = line.strip_prefix(':').ok_or(HexError::Malformed(n))?;
        // Hex digits only (no sign, and no slicing of text that is not ASCII).
        let bytes = crate::digest::parse_hex(body)
            .filter(|b| b.len() >= 5)
            .ok_or(HexError::Malformed(n))?;
        if bytes.iter().fold(0u8, |s, b| s.wrapping_add(*b)) != 0 {
            return Err(HexError::Checksum(n));
        }
        let len = bytes[0] as usize;
        if bytes.len() != len + 5 {
            return Err(HexError::Malformed(n));
        }
        let addr = u32::from(u16::from_be_bytes([bytes[1], bytes[2]]));
        let payload = &bytes[4..4 + len];
        match bytes[3] {
            0x00 => {
                let wide = u64::from(base) + u64::from(addr);
                if wide + len as u64 > 1 << 32 {
                    return Err(HexError::PastTop(n));
                }
                let full = wide as u32;
                let s = *start.get_or_insert(full);
                if u64::from(full) != u64::from(s) + data.len() as u64 {
                    return Err(HexError::Gap(n));
                }
                data.extend_from_slice(payload);
            }
            0x01 if len == 0 && addr == 0 => {
                eof = Some((start.unwrap_or(0), std::mem::take(&mut data)))
            }
            0x02 | 0x04 if len == 2 => {
                if addr != 0 {
                    return Err(HexError::AddressField(n));
                }
                let v = u32::from(u16::from_be_bytes([payload[0], payload[1]]));
                base = if bytes[3] == 0x04 { v << 16 } else { v << 4 };
            }
            0x03 | 0x05 if len == 4 => {
                if addr != 0 {
                    return Err(HexError::AddressField(n));
                }
            }
            _ => return Err(HexError::Malformed(n)),
        }
    }
    eof.ok_or(HexError::NoEof)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn known_records() {
        // Worked values from the format's definition: the EOF record is ":00000001FF",
        // and an extended linear address record for 0x0001xxxx is ":020000040001F9".
        let h = to_hex(0x0001_0000, &[0xAB]);
        assert_eq!(h, ":020000040001F9\n:01000000AB54\n:00000001FF\n");
    }

    #[test]
    fn crossing_64k_splits_and_round_trips() {
        let data: Vec<u8> = (0..100u8).collect();
        for addr in [0u32, 0xFFF8, 0x3F000, 0x0801_FFF0] {
            let h = to_hex(addr, &data);
            assert_eq!(from_hex(&h).unwrap(), (addr, data.clone()));
        }
    }

    #[test]
    fn corrupt_checksum_is_caught() {
        let mut h = to_hex(0, &[1, 2, 3]);
        h.replace_range(9..11, "02");
        assert!(matches!(from_hex(&h), Err(HexError::Checksum(1))));
    }

    /// Intel HEX specification (Intel, "Hexadecimal Object File Format Specification",
    /// revision A, 1988): record type 02 sets a segment base of its value × 16; types 03
    /// and 05 give a start address (CS:IP, EIP) and hold no data.
    #[test]
    fn segment_and_start_address_records_are_read() {
        let rec = |addr: u16, kind: u8, data: &[u8]| {
            let mut s = String::new();
            record(&mut s, addr, kind, data);
            s
        };
        // Segment 0x1000 → base 0x10000; data at offset 0x0010 → 0x10010.
        let img = rec(0, 0x02, &[0x10, 0x00])
            + &rec(0x0010, 0x00, &[1, 2, 3])
            + &rec(0, 0x03, &[0x00, 0x00, 0x10, 0x00])
            + &rec(0, 0x05, &[0x00, 0x00, 0x10, 0x00])
            + &rec(0, 0x01, &[]);
        assert_eq!(from_hex(&img), Ok((0x10010, vec![1, 2, 3])));
        // The segment record ":020000021200EA" (segment 0x1200, base 0x12000).
        let spec = ":020000021200EA\n:03000000010203F7\n:00000001FF\n";
        assert_eq!(from_hex(spec), Ok((0x12000, vec![1, 2, 3])));
        // A start address record of the wrong length is still malformed.
        let bad = rec(0x0010, 0x00, &[1]) + &rec(0, 0x05, &[0, 0]) + &rec(0, 0x01, &[]);
        assert_eq!(from_hex(&bad), Err(HexError::Malformed(2)));
    }

    #[test]
    fn hostile_records_are_refused() {
        let good = to_hex(0x3F000, &[1, 2, 3]);
        assert!(from_hex(&good).is_ok());
        // A sign where a hex digit belongs (from_str_radix would take "+1").
        let plus = good.replacen(":03F00000", ":+3F00000", 1);
        assert!(matches!(from_hex(&plus), Err(HexError::Malformed(_))));
        // Multi-byte UTF-8 in a record: refused, not split mid-character.
        assert!(matches!(
            from_hex(":0300é0000010203F7\n:00000001FF\n"),
            Err(HexError::Malformed(1))
        ));
        // Records or junk after the end-of-file record.
        assert_eq!(
            from_hex(&(good.clone() + ":00000001FF\n")),
            Err(HexError::AfterEof(4))
        );
        assert_eq!(
            from_hex(&(good.clone() + "junk\n")),
            Err(HexError::AfterEof(4))
        );
        // An extended linear address record with a non-zero address field (checksum fixed).
        let bad04 = good.replacen(":020000040003F7", ":020001040003F6", 1);
        assert_eq!(from_hex(&bad04), Err(HexError::AddressField(1)));
        // Data past 4 GiB: refused when writing and when reading.
        assert!(check_placement(0xFFFF_FFF0, 16).is_ok());
        assert!(matches!(
            check_placement(0xFFFF_FFF0, 17),
            Err(PlaceError::PastTop { .. })
        ));
        let top = ":02000004FFFFFC\n:10FFF8000102030405060708090A0B0C0D0E0F1071\n:00000001FF\n";
        assert_eq!(from_hex(top), Err(HexError::PastTop(2)));
    }
}
