//! Any text as a channel sheet: parsing returns a sheet or a message, never panics, and
//! every accepted channel maps its range into [-1, 1].
#![no_main]

use host_trainer::ingest::scaling::ChannelSheet;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Ok(sheet) = ChannelSheet::parse(text) {
        for c in &sheet.channels {
            assert!(c.scaled(c.raw_min) >= -1.0 && c.scaled(c.raw_max) <= 1.0);
            let _ = c.conversion(16);
            let _ = c.conversion(8);
        }
    }
});
