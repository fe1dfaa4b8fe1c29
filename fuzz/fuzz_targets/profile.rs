//! Any bytes as a profile: either a clear error, or a profile whose calibration reads
//! every count without panicking and gives a flag wherever the value is not finite.
#![no_main]

use dbtrail::calibration::Calibration;
use dbtrail::profile::parse_profile_bytes;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(profile) = parse_profile_bytes(data, "fuzz.toml") else {
        return;
    };
    let cal = Calibration::new(&profile, None, 0.0);
    for counts in [0.0, 1.0, 0.5, 1e3, 4095.0, 65535.0, 1e9, -1.0] {
        let r = cal.reading(counts);
        assert!(r.dbm.is_finite() || !r.flags.is_empty(), "{counts}: {r:?}");
    }
});
