//! Any bytes: decode never panics; whatever decodes re-encodes to a blob that decodes to the same model.
#![no_main]

use libfuzzer_sys::fuzz_target;
use shared_model::blob;

fuzz_target!(|data: &[u8]| {
    if let Ok(m) = blob::decode::<shared_model::Readings>(data) {
        let mut buf = [0u8; blob::MAX_BLOB_LEN];
        let n = blob::encode(&m, &mut buf).expect("a decoded model always fits MAX_BLOB_LEN");
        assert_eq!(
            blob::decode::<shared_model::Readings>(&buf[..n]).expect("re-encoded blob decodes"),
            m
        );
        // Every reading set is either classified or refused, never a panic.
        let raw: Vec<i32> = m.model().channels.iter().map(|c| c.raw_min).collect();
        let _ = m.classify(&raw);
    }
});
