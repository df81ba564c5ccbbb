//! Any bytes as an Intel HEX image: reading returns an image or an error naming a line,
//! never panics; an accepted image fits below 4 GiB and writes back to the same bytes.
#![no_main]

use host_trainer::release::hex::{check_placement, from_hex, to_hex};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Ok((address, bytes)) = from_hex(text) {
        assert!(check_placement(address, bytes.len()).is_ok());
        assert_eq!(from_hex(&to_hex(address, &bytes)), Ok((address, bytes)));
    }
});
