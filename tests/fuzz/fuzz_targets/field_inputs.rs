//! Any bytes as a device's field record or as its score lines: decoding returns statistics
//! or an error, never panics; a record that decodes re-encodes to the same bytes.
#![no_main]

use host_trainer::field::device_lines::parse;
use host_trainer::field::run::FieldRun;
use libfuzzer_sys::fuzz_target;
use shared_model::field::MAX_RECORD_LEN;
use shared_model::{FieldStats, Thresholds};

fuzz_target!(|data: &[u8]| {
    if let Ok(s) = FieldStats::decode(data) {
        let mut buf = [0u8; MAX_RECORD_LEN];
        let n = s.encode(&mut buf).expect("a decoded record fits");
        assert_eq!(&buf[..n], data);
    }
    if let Ok(text) = std::str::from_utf8(data) {
        let t = Thresholds {
            nogo_max: -10,
            go_min: 10,
        };
        let mut run = FieldRun::new(Default::default(), t, 4, 2, false);
        let _ = parse(text, "ab", "0000cafe", &mut run);
    }
});
