//! Any text through the quantity parsers (levels, frequencies, durations, dB): no panic,
//! and every value accepted is finite.
#![no_main]

use dbtrail::units::{parse_db, parse_duration, parse_frequency, parse_level};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    for allow_dc in [false, true] {
        if let Ok(level) = parse_level(text, allow_dc) {
            let _ = format!("{level:?}");
        }
    }
    if let Ok(hz) = parse_frequency(text) {
        assert!(hz.is_finite() && hz > 0.0, "{text:?} -> {hz}");
    }
    if let Ok(db) = parse_db(text) {
        assert!(db.is_finite(), "{text:?} -> {db}");
    }
    let _ = parse_duration(text);
});
