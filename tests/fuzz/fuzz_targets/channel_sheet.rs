//! Any text as a channel sheet: parsing returns a sheet or a message, never panics; every
//! accepted channel maps its range into [-1, 1], and every accepted feature channel's
//! computation (the device's) takes its signal's extreme windows to a count inside the
//! feature channel's range.
#![no_main]

use host_trainer::ingest::sheet::ChannelSheet;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(sheet) = ChannelSheet::parse(text) else {
        return;
    };
    for c in sheet.channels.iter().chain(&sheet.features) {
        assert!(c.scaled(c.raw_min) >= -1.0 && c.scaled(c.raw_max) <= 1.0);
        let _ = c.conversion(16);
        let _ = c.conversion(8);
    }
    for f in &sheet.features {
        let src = f.source.as_ref().expect("a feature channel has a source");
        let signal = sheet
            .signals
            .iter()
            .find(|s| s.name == src.signal)
            .expect("an accepted feature names a declared signal");
        let checked = src.checked(signal).expect("an accepted feature is checked");
        // Windows the device accepts: every sample at one end, and alternating ends.
        let n = usize::from(signal.window);
        let (lo, hi) = (signal.raw_min, signal.raw_max);
        let alternating: Vec<i32> = (0..n).map(|k| if k % 2 == 0 { lo } else { hi }).collect();
        for w in [vec![lo; n], vec![hi; n], alternating] {
            let v = checked
                .compute(&w)
                .expect("a window of valid samples is accepted");
            assert!(
                (f.raw_min..=f.raw_max).contains(&v),
                "feature {} gives {v} outside [{}, {}]",
                f.name,
                f.raw_min,
                f.raw_max
            );
        }
        // One sample too many or too few, or out of range, is refused, never a panic.
        assert!(checked.compute(&vec![lo; n + 1]).is_err());
        if lo > i32::MIN {
            assert!(checked.compute(&vec![lo - 1; n]).is_err());
        }
    }
});
