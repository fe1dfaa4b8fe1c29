//! The whole chain from counts to reference-plane dBm, checked against hand-worked examples.

mod common;

use common::demo_diode_with_stale_fit;
use dbtrail::calibration::{Calibration, CodeEntry, Flags};
use dbtrail::profile::{parse_profile, Profile};

/// A log-amp on a 12-bit ADC with vref 4.095 V, so one count is exactly 1 mV, following
/// V = slope·(P − intercept): the arithmetic can be done by hand.
fn log_amp_profile(slope: f64, intercept: f64, extra: &str) -> Profile {
    let counts = |dbm: f64| slope * (dbm - intercept) * 1000.0;
    let text = format!(
        "name = \"hand\"\nreference_frequency = \"10MHz\"\n[adc]\nbits = 12\nvref = 4.095\n\
         [model]\nkind = \"log\"\nslope = {slope}\nintercept = {intercept}\npoints = [\n\
         {{ applied = \"-60dBm\", counts = {} }},\n{{ applied = \"-30dBm\", counts = {} }},\n\
         {{ applied = \"0dBm\", counts = {} }},\n]\n{extra}",
        counts(-60.0),
        counts(-30.0),
        counts(0.0),
    );
    parse_profile(&text, "hand.toml").unwrap_or_else(|e| panic!("{e}"))
}

const CORRECTIONS: &str = "[frequency_correction]\npoints = [ { freq = \"10MHz\", db = 0.0 }, \
    { freq = \"1GHz\", db = 2.0 } ]\n[offset]\ndb = 30.0\n\
    [limits]\ndetector_max_dbm = -5.0\nreference_max_dbm = 20.0\n";

// Source: worked example by hand — 1500 counts = 1.500 V; 1.5/0.025 − 80 = −20 dBm at the
// detector; 100 MHz lies halfway (in log-frequency) from 10 MHz to 1 GHz, so the correction
// is +1.0 dB; with a 30 dB attenuator the reference plane sees −20 + 1 + 30 = +11 dBm.
#[test]
fn worked_example_of_the_sign_conventions() {
    let profile = log_amp_profile(0.025, -80.0, CORRECTIONS);
    let cal = Calibration::new(&profile, Some(100e6), 0.0);
    let r = cal.reading(1500.0);
    assert!((r.volts - 1.5).abs() < 1e-12);
    assert!((r.detector_dbm + 20.0).abs() < 1e-9);
    assert!((cal.correction_db() - 1.0).abs() < 1e-12);
    assert!((r.dbm - 11.0).abs() < 1e-9, "{}", r.dbm);
    assert_eq!(r.flags, Flags::empty());
    assert_eq!(r.to_string(), "11.00 dBm");
}

// Source: worked example — an extra offset given on the command line adds to the profile's.
#[test]
fn an_extra_offset_adds_to_the_profile_offset() {
    let profile = log_amp_profile(0.025, -80.0, CORRECTIONS);
    let cal = Calibration::new(&profile, Some(10e6), 10.0);
    assert!((cal.reading(1500.0).dbm - 20.0).abs() < 1e-9);
}

#[test]
fn below_the_span_is_a_bound_not_a_number() {
    let profile = log_amp_profile(0.025, -80.0, CORRECTIONS);
    let cal = Calibration::new(&profile, Some(10e6), 0.0);
    // 400 counts = 0.4 V = −64 dBm at the detector, under the −60 dBm lowest point.
    let r = cal.reading(400.0);
    assert!(r.flags.contains(Flags::BELOW_SPAN));
    assert!((r.dbm - (-60.0 + 30.0)).abs() < 1e-9);
    assert_eq!(r.to_string(), "below -30.00 dBm");
}

#[test]
fn above_the_span_and_the_safety_limits_are_flagged() {
    let profile = log_amp_profile(0.025, -80.0, CORRECTIONS);
    let cal = Calibration::new(&profile, Some(10e6), 0.0);
    // 2100 counts = 2.1 V = +4 dBm at the detector: above the 0 dBm top point and the
    // −5 dBm safe input; +34 dBm at the reference plane is above its +20 dBm rating.
    let r = cal.reading(2100.0);
    assert!(r
        .flags
        .contains(Flags::ABOVE_SPAN | Flags::OVER_DETECTOR_MAX | Flags::OVER_RATED));
    assert!((r.dbm - 34.0).abs() < 1e-9);
    // 1950 counts = −2 dBm at the detector: inside the span, over the safe input; with an
    // extra −20 dB the reference plane sees +8 dBm, within its rating.
    let cal = Calibration::new(&profile, Some(10e6), -20.0);
    let r = cal.reading(1950.0);
    assert_eq!(r.flags, Flags::OVER_DETECTOR_MAX);
    assert!((r.dbm - 8.0).abs() < 1e-9);
}

#[test]
fn adc_clip_and_frequency_outside_the_table() {
    let profile = log_amp_profile(0.025, -80.0, CORRECTIONS);
    let cal = Calibration::new(&profile, Some(2.4e9), 0.0);
    assert_eq!(cal.correction_db(), 2.0);
    assert!(cal.reading(1500.0).flags.contains(Flags::FREQ_OUTSIDE));
    assert!(cal.reading(4090.0).flags.contains(Flags::ADC_CLIP));
    assert!(!cal.reading(4070.0).flags.contains(Flags::ADC_CLIP));
}

#[test]
fn a_falling_output_log_amp_is_flagged_the_right_way_round() {
    // Output falls 25 mV per dB (a negative-slope log-amp): 3.5 V at −60 dBm, 2 V at 0 dBm.
    let profile = log_amp_profile(-0.025, 80.0, "");
    let cal = Calibration::new(&profile, None, 0.0);
    let top = cal.counts_for(0.0);
    assert!(cal.reading(top - 50.0).flags.contains(Flags::ABOVE_SPAN));
    assert!(cal.reading(top + 2000.0).flags.contains(Flags::BELOW_SPAN));
    assert_eq!(cal.reading(top + 500.0).flags, Flags::empty());
}

// Source: common practice — a detector's level moves one way with its output (up for a
// diode or most log amps, down for a negative-slope log amp). A run of the code table is a
// stretch of counted codes with one set of flags (values, or bounds of one way), so a
// block of codes inside one takes its extremes from the run's order and its flags and
// kinds from any of its codes.
#[test]
fn runs_of_the_code_table_hold_codes_of_one_kind_in_level_order() {
    for (slope, intercept) in [(0.025, -80.0), (-0.025, 20.0)] {
        let cal = Calibration::new(&log_amp_profile(slope, intercept, CORRECTIONS), None, 0.0);
        let (table, runs) = (cal.code_table(), cal.code_runs());
        for lo in (0..4096u32).step_by(7) {
            for hi in [lo, lo + 3, lo + 40, lo + 900, 4095, 4096, u32::MAX] {
                let Some((lowest, highest)) = runs.extreme_codes(lo, hi) else {
                    continue;
                };
                let (lowest, highest) = (&table[lowest as usize], &table[highest as usize]);
                let first = &table[lo as usize];
                for entry in &table[lo as usize..=hi as usize] {
                    let kind = |e: &CodeEntry| (e.tally, e.flags);
                    assert_eq!(kind(entry), kind(first));
                    assert!(!entry.counted_dbm.is_nan());
                    assert!(
                        lowest.counted_dbm <= entry.counted_dbm
                            && entry.counted_dbm <= highest.counted_dbm
                    );
                }
            }
        }
        // −20 to 0 dBm at the reference plane (−50 to −30 dBm at the detector, behind the
        // 30 dB offset) is plain: one run, so blocks there take the short way, the lowest
        // level at the −20 dBm code whichever way the output moves.
        let (a, b) = (cal.counts_for(-20.0) as u32, cal.counts_for(0.0) as u32);
        let ends = runs.extreme_codes(a.min(b), a.max(b));
        assert_eq!(ends, Some((a, b)), "slope {slope}");
    }
}

// Source: worked example — 1 mV per count over 25 mV per dB is 0.04 dB per count.
#[test]
fn resolution_of_a_log_amp_is_constant() {
    let cal = Calibration::new(&log_amp_profile(0.025, -80.0, ""), None, 0.0);
    for dbm in [-55.0, -30.0, -2.0] {
        assert!((cal.db_per_count(dbm) - 0.04).abs() < 1e-9);
        assert!((cal.reading(cal.counts_for(dbm)).dbm - dbm).abs() < 1e-9);
    }
}

// Source: common practice — a diode detector's resolution is coarse in its square-law
// region and fine at high level.
#[test]
fn diode_profile_resolution_improves_with_level() {
    let path = format!("{}/profiles/demo-diode.toml", env!("CARGO_MANIFEST_DIR"));
    let profile = dbtrail::profile::load_profile(std::path::Path::new(&path)).unwrap();
    let cal = Calibration::new(&profile, None, 0.0);
    let (lo, hi) = cal.span_dbm();
    assert!(cal.db_per_count(lo) > 10.0 * cal.db_per_count(hi));
    for counts in [10.0, 100.0, 1000.0, 2500.0] {
        let r = cal.reading(counts);
        assert!((cal.counts_for(r.dbm) - counts).abs() < 1e-6, "{counts}");
    }
}

// Source: common practice (a look-up table must reproduce the model it was built from):
// every ADC code's precomputed reading equals the exact chain to 1e-9 dB, flags included,
// and a new frequency builds a new table with its correction.
#[test]
fn the_per_code_table_agrees_with_the_exact_model_at_every_code() {
    let path = format!("{}/profiles/demo-diode.toml", env!("CARGO_MANIFEST_DIR"));
    let profile = dbtrail::profile::load_profile(std::path::Path::new(&path)).unwrap();
    for freq in [None, Some(146e6), Some(440e6)] {
        let cal = Calibration::new(&profile, freq, 1.5);
        assert_eq!(cal.code_table().len(), 4096);
        for code in 0..4096u32 {
            let exact = cal.reading(f64::from(code));
            let fast = cal.reading_code(code);
            assert!((exact.dbm - fast.dbm).abs() < 1e-9, "code {code}");
            assert_eq!(exact.flags, fast.flags, "code {code}");
        }
    }
    let a = Calibration::new(&profile, Some(10e6), 0.0)
        .reading_code(1000)
        .dbm;
    let b = Calibration::new(&profile, Some(146e6), 0.0)
        .reading_code(1000)
        .dbm;
    // Worked by hand from the profile: the correction rises 0 → +0.6 dB; the offset, 20.0 dB
    // at 1 MHz and 20.1 dB at 146 MHz, is 20.0 + 0.1·ln 10/ln 146 dB at 10 MHz.
    let offset_at_10mhz = 20.0 + 0.1 * 10f64.ln() / 146f64.ln();
    let want = 0.6 + (20.1 - offset_at_10mhz);
    assert!((b - a - want).abs() < 1e-9, "{a} {b} {want}");
}

mod batched_statistics {
    use super::*;
    use dbtrail::stats::PowerStats;
    use proptest::prelude::*;

    proptest! {
        // Source: common practice (power-domain averaging: count, sum of watts, extremes and
        // flags over the readings). The recorder's batched path, with its partial sums,
        // must equal the readings of the exact chain added one at a time, for any run
        // length and any mix of codes below span, clipped and over the ADC's full scale.
        // Steady codes (a level with a few counts of noise, now and then a code from
        // anywhere) and slow ramps across the flags' edges, over several blocks, on a
        // detector whose output rises with power and on one whose output falls, exercise
        // the blocks taken by runs of the table. Clipped, above- and below-span codes are
        // counted at their bound on both paths, and the counts of each kind agree.
        #[test]
        fn batched_codes_equal_readings_added_one_by_one(
            codes in prop_oneof![
                proptest::collection::vec(prop_oneof![0u32..4096, 4000u32..4200, any::<u32>()], 0..70),
                (0u32..4096, proptest::collection::vec(prop_oneof![20 => -3i64..=3, 1 => -5000i64..5000], 0..1100))
                    .prop_map(|(level, noise)| noise.iter().map(|n| (i64::from(level) + n).max(0) as u32).collect()),
                (0u32..4096, 1u32..4, 0usize..1100)
                    .prop_map(|(start, step, n)| (0..n as u32).map(|i| start + i * step / 3).collect()),
            ],
            width in 1usize..4,
            falling in any::<bool>(),
        ) {
            let profile = match falling {
                false => log_amp_profile(0.025, -80.0, CORRECTIONS),
                true => log_amp_profile(-0.025, 20.0, CORRECTIONS),
            };
            let cal = Calibration::new(&profile, Some(100e6), 0.0);
            let mut batched = PowerStats::default();
            batched.add_codes(&cal, &codes);
            let mut channel = PowerStats::default();
            channel.add_channel(&cal, &codes, width - 1, width);
            let mut single = PowerStats::default();
            let mut column = PowerStats::default();
            let span_top = cal.span_dbm().1;
            for (i, &code) in codes.iter().enumerate() {
                let reading = cal.reading(f64::from(code));
                single.add_within(&reading, span_top);
                if i % width == width - 1 {
                    column.add_within(&reading, span_top);
                }
            }
            let tabled = codes.iter().all(|&c| c <= 4095);
            for (fast, slow) in [(batched, single), (channel, column)] {
                // Count moments are kept over whole blocks of tabled codes only.
                if tabled {
                    prop_assert_eq!(fast.moments.n, slow.moments.n);
                    prop_assert_eq!(fast.moments.mean(), slow.moments.mean());
                    let close = |a: Option<f64>, b: Option<f64>| match (a, b) {
                        (Some(a), Some(b)) => (a - b).abs() <= 1e-9 * b.abs().max(1.0),
                        (a, b) => a == b,
                    };
                    prop_assert!(close(fast.moments.variance(), slow.moments.variance()));
                    prop_assert!(close(
                        fast.moments.successive_ratio(),
                        slow.moments.successive_ratio()
                    ));
                }
                prop_assert_eq!(fast.totals.samples, slow.totals.samples);
                prop_assert_eq!(fast.totals.valid, slow.totals.valid);
                prop_assert_eq!(fast.totals.at_least, slow.totals.at_least);
                prop_assert_eq!(fast.totals.at_most, slow.totals.at_most);
                prop_assert_eq!(fast.bound(), slow.bound());
                prop_assert_eq!(fast.totals.flags, slow.totals.flags);
                prop_assert!((fast.totals.sum_w - slow.totals.sum_w).abs() <= 1e-12 * slow.totals.sum_w.abs());
                if slow.averaged() > 0 {
                    prop_assert!((fast.totals.min_dbm - slow.totals.min_dbm).abs() < 1e-9);
                    prop_assert!((fast.totals.max_dbm - slow.totals.max_dbm).abs() < 1e-9);
                }
            }
        }
    }
}

// Source: the rule in src/calibration.rs (nothing is extrapolated silently: a reading
// outside the calibrated span carries a flag). With vref 0.9 V instead of 1.2 V the
// model reads the lowest point about 0.9 dB below its applied −27 dBm (1.9 dB RMS over
// the points, inside the fit limit, so the profile loads); counts swept finely over the
// ends, as averages are fractional, must read inside the span shown or carry its flag.
#[test]
fn readings_outside_the_span_are_flagged_even_where_the_model_misses_its_end_points() {
    let profile = parse_profile(&demo_diode_with_stale_fit(0.9), "stale.toml").unwrap();
    let cal = Calibration::new(&profile, None, 0.0);
    let (lo, hi) = cal.span_dbm();
    let bottom = (0..2000).map(|i| f64::from(i) * 0.01);
    let top = (0..=2790).map(|i| 2700.0 + f64::from(i) * 0.5);
    for counts in bottom.chain(top) {
        let r = cal.reading(counts);
        if !r.flags.contains(Flags::BELOW_SPAN) {
            assert!(
                r.dbm >= lo - 1e-9,
                "{counts} counts read {} below {lo}",
                r.dbm
            );
        }
        if !r.flags.contains(Flags::ABOVE_SPAN) {
            assert!(
                r.dbm <= hi + 1e-9,
                "{counts} counts read {} above {hi}",
                r.dbm
            );
        }
    }
    // Every calibration point still reads inside its own span.
    for point in &profile.points {
        let flags = cal.reading(point.counts).flags;
        assert!(
            !flags.intersects(Flags::BELOW_SPAN | Flags::ABOVE_SPAN),
            "{point:?}"
        );
    }
}

/// The shipped demo diode with its attenuator rating raised out of the way, so that only
/// the detector's own limit can flag a reading.
fn demo_diode_rated_high() -> Profile {
    let text = include_str!("../profiles/demo-diode.toml").replacen(
        "reference_max_dbm = 37",
        "reference_max_dbm = 60",
        1,
    );
    parse_profile(&text, "demo-diode.toml").unwrap_or_else(|e| panic!("{e}"))
}

// Source: profiles/demo-diode.toml — the correction row at 440 MHz is +2.6 dB (true minus
// indicated) and `detector_max_dbm = 18`; by docs/calibration.md ("Limits", "Sign
// conventions") the limit is on the true detector input, indicated + correction. 4000
// counts indicates just under 18 dBm (dbtrail's own diode model, asserted first), so the
// true input is over 17.8 + 2.6 > 18 at 440 MHz, while at 10 MHz (correction 0) it is
// under the limit.
#[test]
fn the_detector_limit_applies_after_the_frequency_correction() {
    let profile = demo_diode_rated_high();
    let at_440 = Calibration::new(&profile, Some(440e6), 0.0);
    assert_eq!(at_440.correction_db(), 2.6);
    let r = at_440.reading(4000.0);
    assert!(
        r.detector_dbm > 17.8 && r.detector_dbm < 18.0,
        "{}",
        r.detector_dbm
    );
    assert_eq!(r.flags, Flags::ABOVE_SPAN | Flags::OVER_DETECTOR_MAX);
    // The per-code table of the fast statistics path agrees with the exact reading.
    assert_eq!(at_440.code_entry(4000).unwrap().flags, r.flags);
    let at_10 = Calibration::new(&profile, Some(10e6), 0.0);
    assert_eq!(at_10.correction_db(), 0.0);
    assert_eq!(at_10.reading(4000.0).flags, Flags::ABOVE_SPAN);
    assert_eq!(at_10.code_entry(4000).unwrap().flags, Flags::ABOVE_SPAN);
}
