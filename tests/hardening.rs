//! Hardening checks on the library: noise on the wire gives no readings, and counts an ADC
//! cannot produce are flagged and never calibrated.

use dbtrail::calibration::{Calibration, Flags};
use dbtrail::decode::{Decoder, FlatCounts, Format};
use dbtrail::profile::load_profile;
use dbtrail::stats::PowerStats;
use rand::{RngCore, SeedableRng};
use rand_pcg::Pcg64;

fn demo_calibration() -> Calibration {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/profiles/demo-diode.toml");
    Calibration::new(&load_profile(path.as_ref()).unwrap(), None, 0.0)
}

/// Source: common practice. A UART at the wrong baud rate delivers bytes that are, for
/// this purpose, random; the seeds are fixed so the run is repeatable.
#[test]
fn ten_megabytes_of_noise_give_no_reading_and_a_rising_error_count() {
    for (seed, format) in [
        (1u64, Format::Ascii),
        (2, Format::Auto),
        (3, Format::Binary),
    ] {
        let mut rng = Pcg64::seed_from_u64(seed);
        let mut decoder = Decoder::new(format);
        let mut out = FlatCounts::default();
        let mut errors_seen = Vec::new();
        let mut read = vec![0u8; 4096];
        for _ in 0..(10 << 20) / read.len() {
            rng.fill_bytes(&mut read);
            decoder.feed(&read, &mut out);
            let s = decoder.stats();
            errors_seen.push(s.bad_lines + s.long_lines + s.crc_errors + s.skipped_bytes);
        }
        decoder.finish(&mut out);
        assert_eq!(out.counts.len(), 0, "{format:?}: noise read as samples");
        assert_eq!(decoder.stats().frames, 0, "{format:?}");
        // The count rises through the run, not only at its end.
        let tenth = errors_seen.len() / 10;
        assert!(
            errors_seen.windows(tenth).all(|w| w[tenth - 1] > w[0]),
            "{format:?}: {:?}",
            &errors_seen[..5]
        );
    }
}

/// Source: common practice. An n-bit ADC gives codes 0 to 2^n − 1 and nothing above; the
/// demo profile's ADC has 12 bits, so 4096 and up cannot come from it.
#[test]
fn counts_above_full_scale_are_flagged_and_never_calibrated() {
    let cal = demo_calibration();
    for counts in [4096.0, 4095.5, 70_000.0, 1e12] {
        let r = cal.reading(counts);
        assert!(r.flags.contains(Flags::OVER_FULL_SCALE), "{counts}");
        assert!(r.dbm.is_nan() && r.watts().is_nan(), "{counts}: {r:?}");
        assert!(!r.flags.contains(Flags::ADC_CLIP), "{counts}: not a clip");
    }
    let at_full_scale = cal.reading(4095.0);
    assert!(!at_full_scale.flags.contains(Flags::OVER_FULL_SCALE));
    assert!(at_full_scale.dbm.is_finite());

    let mut stats = PowerStats::default();
    stats.add_codes(&cal, &[2000u32, 4096, 65_535, 2000]);
    assert_eq!(stats.totals.samples, 4);
    assert_eq!(
        stats.totals.valid, 2,
        "only the two real codes are averaged"
    );
    assert!(stats.totals.flags.contains(Flags::OVER_FULL_SCALE));
    let one = cal.reading(2000.0).dbm;
    assert!((stats.mean_dbm().unwrap() - one).abs() < 1e-9);
}

mod short_fuzz {
    //! Short property-test versions of the fuzz campaigns (fuzz/), run with the suite.
    use dbtrail::report::{analyse, read_log, ReportOptions};
    use dbtrail::units::{parse_db, parse_duration, parse_frequency, parse_level};
    use proptest::prelude::*;

    const LOG: &str = include_str!("../fuzz/seeds/log_reader/soak.csv");

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(2000))]

        #[test]
        fn quantity_parsers_never_panic_and_accept_only_finite_values(text in "\\PC{0,24}") {
            let _ = parse_level(&text, true);
            if let Ok(hz) = parse_frequency(&text) {
                prop_assert!(hz.is_finite() && hz > 0.0, "{text:?} -> {hz}");
            }
            if let Ok(db) = parse_db(&text) {
                prop_assert!(db.is_finite(), "{text:?} -> {db}");
            }
            let _ = parse_duration(&text);
        }

        // Source: SI prefixes (k = 1e3, M = 1e6, G = 1e9), an open standard. Values from
        // 1.00 up, as frequencies lie from 1 Hz (the rule in src/units.rs).
        #[test]
        fn frequencies_read_back_what_was_written(mantissa in 100u32..100_000, unit in prop::sample::select(vec![("Hz", 1.0), ("kHz", 1e3), ("MHz", 1e6), ("GHz", 1e9), (" MHz", 1e6), ("k", 1e3)])) {
            let value = f64::from(mantissa) / 100.0;
            let text = format!("{value}{}", unit.0);
            let hz = parse_frequency(&text).unwrap();
            prop_assert!((hz - value * unit.1).abs() <= 1e-12 * hz, "{text} -> {hz}");
        }

        #[test]
        fn a_mangled_log_is_read_or_refused_never_a_panic(edits in prop::collection::vec((any::<prop::sample::Index>(), any::<u8>(), 0u8..3), 1..6)) {
            let mut bytes = LOG.as_bytes().to_vec();
            for (at, byte, how) in edits {
                let i = at.index(bytes.len().max(1));
                match how {
                    0 if !bytes.is_empty() => { bytes.remove(i.min(bytes.len() - 1)); }
                    1 => bytes.insert(i.min(bytes.len()), byte),
                    _ if !bytes.is_empty() => { let j = i.min(bytes.len() - 1); bytes[j] = byte; }
                    _ => {}
                }
            }
            if let Ok(log) = read_log(&bytes, "mangled.csv", 0) {
                for run in &log.runs {
                    let _ = analyse(run, "mangled.csv", &ReportOptions::default());
                }
            }
        }

        #[test]
        fn any_bytes_as_a_log_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..2000)) {
            if let Ok(log) = read_log(&bytes, "junk.csv", 0) {
                for run in &log.runs {
                    let _ = analyse(run, "junk.csv", &ReportOptions::default());
                }
            }
        }
    }
}
