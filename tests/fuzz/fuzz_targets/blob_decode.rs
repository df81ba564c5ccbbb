//! Any bytes: decode never panics; whatever decodes re-encodes to a blob that decodes to the
//! same model. The same for the decoder of models of several classes (every version, 1 to
//! 6), whose row scores and decision are then run too.
#![no_main]

use libfuzzer_sys::fuzz_target;
use shared_model::{ClassSection, SignalSection, blob};

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
    if let Ok(m) = blob::decode_classes::<SignalSection>(data) {
        let mut buf = [0u8; blob::MAX_BLOB_LEN];
        let n = blob::encode(&m, &mut buf).expect("a decoded model always fits MAX_BLOB_LEN");
        let back: shared_model::CheckedModel<SignalSection, ClassSection> =
            blob::decode_classes(&buf[..n]).expect("re-encoded blob decodes");
        assert_eq!(back, m);
        // Both ends of every range: the row scores and the decision never panic.
        for pick in [0usize, 1] {
            let raw: Vec<i32> = m
                .model()
                .channels
                .iter()
                .map(|c| if pick == 0 { c.raw_min } else { c.raw_max })
                .collect();
            let mut scores = [0i64; shared_model::MAX_CLASSES];
            let _ = m.class_scores(&raw, &mut scores);
            if let Ok(d) = m.classify(&raw) {
                assert_eq!(d.class.is_some(), m.classes().is_some());
            }
        }
    }
});
