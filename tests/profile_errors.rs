//! Every malformed profile under tests/profiles/bad/ must fail with a message that names the
//! offending line and field; the shipped profiles must load.

mod common;

use common::demo_diode_with_stale_fit;
use dbtrail::profile::{
    load_profile, parse_profile, parse_profile_bytes, ProfileError, MAX_PROFILE_BYTES,
    MAX_PROFILE_POINTS,
};
use std::path::Path;

fn problems(name: &str) -> Vec<dbtrail::profile::Problem> {
    let path = format!(
        "{}/tests/profiles/bad/{name}.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    match load_profile(Path::new(&path)) {
        Ok(_) => panic!("{name} should have been refused"),
        Err(ProfileError::Invalid { problems, .. }) => problems,
        Err(e) => panic!("{name}: unexpected error {e}"),
    }
}

/// (file, line, field, a fragment of the message)
const CASES: &[(&str, usize, &str, &str)] = &[
    (
        "syntax_unterminated_string",
        1,
        "(syntax)",
        "not valid TOML",
    ),
    ("syntax_missing_equals", 6, "(syntax)", "expected `=`"),
    ("unknown_key_adc", 7, "adc.bitz", "did you mean `bits`"),
    (
        "unknown_key_top",
        2,
        "refrence_frequency",
        "did you mean `reference_frequency`",
    ),
    (
        "unknown_key_point",
        12,
        "model.points[1].count",
        "did you mean `counts`",
    ),
    ("unknown_table", 16, "limts", "did you mean `limits`"),
    ("wrong_type_bits", 5, "adc.bits", "expected a whole number"),
    ("wrong_type_points", 10, "model.points", "expected a list"),
    ("missing_vref", 4, "adc.vref", "required and missing"),
    ("missing_name", 1, "name", "required and missing"),
    ("bits_out_of_range", 5, "adc.bits", "1 to 24 bits"),
    ("vref_zero", 6, "adc.vref", "above 0 V"),
    ("vref_nan", 6, "adc.vref", "not a finite number"),
    (
        "counts_infinite",
        12,
        "model.points[1].counts",
        "not a finite number",
    ),
    (
        "counts_over_full_scale",
        13,
        "model.points[2].counts",
        "full scale, 4095",
    ),
    ("counts_at_clip", 13, "model.points[2].counts", "ADC clip"),
    ("ohms_negative", 2, "ohms", "greater than 0 ohms"),
    (
        "zero_counts_out_of_range",
        7,
        "adc.zero_counts",
        "below full scale",
    ),
    ("too_few_points_table", 10, "model.points", "at least 2"),
    ("too_few_points_log", 10, "model.points", "at least 3"),
    ("too_few_points_diode", 10, "model.points", "at least 4"),
    (
        "non_monotone_points",
        12,
        "model.points[1].counts",
        "re-measure this point",
    ),
    (
        "duplicate_level",
        13,
        "model.points[2].applied",
        "repeats the applied level",
    ),
    (
        "bad_unit_applied",
        12,
        "model.points[1].applied",
        "unknown unit `dBmW`",
    ),
    (
        "mega_watt_applied",
        12,
        "model.points[1].applied",
        "for milli write `mW`",
    ),
    (
        "unknown_model_kind",
        9,
        "model.kind",
        "did you mean `diode`",
    ),
    (
        "axis_on_diode",
        10,
        "model.axis",
        "belongs to the table model",
    ),
    ("unknown_axis", 10, "model.axis", "unknown axis `log`"),
    // Source: the rule in docs/profiles.md: a point is the mean of 1 or more samples.
    (
        "zero_samples",
        12,
        "model.points[1].samples",
        "at least one sample",
    ),
    (
        "temperature_in_celsius",
        10,
        "model.temperature",
        "in kelvin",
    ),
    ("diode_n_without_vl", 8, "model", "both `n` and `vl`"),
    ("log_slope_zero", 10, "model.slope", "not zero"),
    // Source: the rule in docs/profiles.md ("Frequencies"): a bare number has no unit to
    // trust, so it is refused with the fix rather than read as hertz.
    (
        "reference_frequency_bare_number",
        2,
        "reference_frequency",
        "add MHz or kHz",
    ),
    (
        "reference_frequency_lone_m",
        2,
        "reference_frequency",
        "write M or MHz",
    ),
    (
        "frequencies_unsorted",
        19,
        "frequency_correction.points[1].freq",
        "rising order",
    ),
    (
        "frequencies_duplicate",
        19,
        "frequency_correction.points[1].freq",
        "no duplicates",
    ),
    (
        "frequency_bad_unit",
        19,
        "frequency_correction.points[1].freq",
        "unknown unit `GHzz`",
    ),
    ("offset_both_forms", 16, "offset", "not both"),
    (
        "limit_not_finite",
        17,
        "limits.detector_max_dbm",
        "not a finite number",
    ),
    ("divider_negative", 7, "adc.divider", "must be above 0"),
    ("clip_margin_too_large", 7, "adc.clip_margin", "below 0.5"),
    ("name_empty", 1, "name", "name is empty"),
    ("empty", 1, "(file)", "empty"),
    ("only_comments", 1, "(file)", "only comments"),
    ("binary_junk", 1, "(file)", "not UTF-8"),
    // Finite values that are far outside any bench: each would read ±inf or a number
    // with no meaning, so each is refused with its range.
    (
        "reference_frequency_huge",
        2,
        "reference_frequency",
        "`1e300GHz` is out of range; a frequency lies from 1 Hz to 1 THz",
    ),
    (
        "log_slope_tiny",
        10,
        "model.slope",
        "1e-300 is out of range; the slope in V/dB is not zero: its size lies from 1 µV/dB to 10 V/dB",
    ),
    (
        "log_slope_subnormal",
        10,
        "model.slope",
        "from 1 µV/dB to 10 V/dB",
    ),
    (
        "log_intercept_huge",
        11,
        "model.intercept",
        "lies from -500 to +500 dBm",
    ),
    ("offset_db_huge", 17, "offset.db", "from -200 to +200 dB"),
    (
        "correction_db_huge",
        19,
        "frequency_correction.points[1].db",
        "from -200 to +200 dB",
    ),
    (
        "limit_huge",
        17,
        "limits.detector_max_dbm",
        "a level lies from -200 to +100 dBm",
    ),
    (
        "applied_level_tiny",
        11,
        "model.points[0].applied",
        "`1e-300W` is out of range; a level must lie between -200 dBm and +200 dBm",
    ),
    ("vref_huge", 6, "adc.vref", "from 1 mV to 100 V"),
    ("divider_huge", 7, "adc.divider", "from 0.001 to 1000"),
    ("ohms_huge", 2, "ohms", "from 1 to 10000"),
    ("diode_vl_huge", 11, "model.vl", "from 1 µV to 10 kV"),
    (
        "std_counts_huge",
        11,
        "model.points[0].std_counts",
        "up to the ADC's full scale, 4095",
    ),
    // [uncertainty] and the roll-off form; source: the rules in docs/profiles.md (SWR ≥ 1,
    // return loss > 0 dB, uncertainties ≥ 0 and finite, 0 < k ≤ 10, rows in rising
    // frequency, one of SWR or return loss per part, three rows for a roll-off).
    ("uncertainty_swr_below_one", 18, "uncertainty.dut_swr", "an SWR is 1"),
    (
        "uncertainty_return_loss_negative",
        18,
        "uncertainty.detector_return_loss",
        "a return loss is above 0 dB",
    ),
    (
        "uncertainty_rows_unsorted",
        20,
        "uncertainty.detector_swr[1].freq",
        "rising order",
    ),
    (
        "uncertainty_row_swr_nan",
        19,
        "uncertainty.source_swr[0].swr",
        "not a finite number",
    ),
    (
        "uncertainty_row_return_loss_zero",
        20,
        "uncertainty.front_return_loss[1].return_loss",
        "0 is out of range; a return loss is above 0 dB",
    ),
    (
        "uncertainty_row_bad_frequency",
        20,
        "uncertainty.dut_return_loss[1].freq",
        "write M or MHz",
    ),
    ("uncertainty_k_zero", 18, "uncertainty.source.k", "k is above 0"),
    (
        "uncertainty_negative",
        18,
        "uncertainty.offset.db",
        "an uncertainty is 0 dB or more",
    ),
    (
        "uncertainty_infinite",
        18,
        "uncertainty.source.db",
        "not a finite number",
    ),
    (
        "uncertainty_swr_and_return_loss",
        19,
        "uncertainty.front_return_loss",
        "give either `front_swr` or `front_return_loss`, not both",
    ),
    (
        "uncertainty_unknown_key",
        18,
        "uncertainty.dut_vswr",
        "did you mean `dut_swr`",
    ),
    (
        "uncertainty_unknown_row_key",
        19,
        "uncertainty.detector_swr[0].vswr",
        "did you mean `swr`",
    ),
    (
        "uncertainty_plain_number",
        18,
        "uncertainty.source",
        "{ db = 0.3, k = 2 } for an expanded value",
    ),
    (
        "correction_kind_unknown",
        17,
        "frequency_correction.kind",
        "did you mean `roll-off`",
    ),
    (
        "correction_roll_off_two_rows",
        17,
        "frequency_correction.kind",
        "needs at least 3; 2 given",
    ),
    (
        "correction_roll_off_falling",
        17,
        "frequency_correction.kind",
        "do not rise with frequency",
    ),
    // [temperature] and the points' temp_c; source: the rules in docs/profiles.md
    // ("[temperature]"): each sensor kind takes only its own keys, each value within its
    // range, the channel counted from 1, temp_c on every point or on none.
    (
        "temperature_beta_key_on_linear",
        20,
        "temperature.beta_k",
        "`beta_k` belongs to the ntc-beta sensor, but this table's sensor is linear",
    ),
    (
        "temperature_linear_key_on_beta",
        21,
        "temperature.volts_at_0c",
        "belongs to the linear sensor, but this table's sensor is ntc-beta",
    ),
    (
        "temperature_degrees_key_on_steinhart_hart",
        22,
        "temperature.c_per_count",
        "belongs to the degrees sensor, but this table's sensor is ntc-steinhart-hart",
    ),
    (
        "temperature_ntc_key_on_degrees",
        18,
        "temperature.placement",
        "belongs to the ntc-beta and ntc-steinhart-hart sensors, but this table's sensor is degrees",
    ),
    (
        "temperature_beta_out_of_range",
        19,
        "temperature.beta_k",
        "3.95 is out of range; β lies from 500 to 20000 K",
    ),
    (
        "temperature_steinhart_hart_b_negative",
        19,
        "temperature.b",
        "above 0",
    ),
    // Source: the Steinhart–Hart law (from memory, a common 10 kΩ set): at 10 Ω it gives
    // 1/T = 1.5594e-3 K⁻¹, 368 °C, so mid-scale reads no board temperature.
    (
        "temperature_fixed_ohms_in_kilohms",
        21,
        "temperature.fixed_ohms",
        "reads 368.",
    ),
    (
        "temperature_linear_slope_zero",
        18,
        "temperature.volts_per_c",
        "the output's slope is not zero",
    ),
    (
        "temperature_degrees_scale_negative",
        18,
        "temperature.c_per_count",
        "the scale is above 0",
    ),
    (
        "temperature_unknown_sensor",
        17,
        "temperature.sensor",
        "did you mean `ntc-beta`",
    ),
    (
        "temperature_unknown_placement",
        21,
        "temperature.placement",
        "unknown placement `to-gnd`",
    ),
    (
        "temperature_missing_r0",
        16,
        "temperature.r0_ohms",
        "the ntc-beta sensor needs `r0_ohms`",
    ),
    (
        "temperature_missing_sensor",
        16,
        "temperature.sensor",
        "required and missing",
    ),
    (
        "temperature_channel_zero",
        17,
        "temperature.channel",
        "counted from 1",
    ),
    (
        "temperature_window_too_long",
        18,
        "temperature.window_s",
        "up to 600 s",
    ),
    ("temperature_u_c_negative", 18, "temperature.u_c", "0 °C or more"),
    (
        "temperature_unknown_key",
        19,
        "temperature.beta",
        "did you mean `beta_k`",
    ),
    (
        "temp_c_on_some_points",
        12,
        "model.points[1].temp_c",
        "this point has no `temp_c` but model.points[0] has one",
    ),
    (
        "temp_c_out_of_range",
        12,
        "model.points[1].temp_c",
        "298.15 is out of range; a board temperature lies from -55 to 150 °C",
    ),
];

#[test]
fn every_malformed_profile_names_its_line_and_field() {
    for &(name, line, field, fragment) in CASES {
        let found = problems(name);
        let hit = found.iter().find(|p| p.field == field);
        let Some(problem) = hit else {
            panic!("{name}: no problem on field {field}; got {found:?}");
        };
        assert_eq!(problem.line, line, "{name}: {problem:?}");
        assert!(
            problem.message.contains(fragment),
            "{name}: `{}` lacks `{fragment}`",
            problem.message
        );
    }
}

#[test]
fn the_corpus_holds_every_file_in_the_folder() {
    let dir = format!("{}/tests/profiles/bad", env!("CARGO_MANIFEST_DIR"));
    let files = std::fs::read_dir(dir).unwrap().count();
    assert_eq!(files, CASES.len(), "add each new bad profile to CASES");
    assert!(files >= 30);
}

#[test]
fn all_problems_of_a_file_are_reported_together() {
    let text =
        "name = \"x\"\nohms = 0\nreference_frequency = \"10MHz\"\n[adc]\nbits = 40\nvref = -1\n\
                [model]\nkind = \"table\"\npoints = []\n";
    let Err(ProfileError::Invalid { problems, .. }) = parse_profile(text, "multi.toml") else {
        panic!("should fail");
    };
    let fields: Vec<&str> = problems.iter().map(|p| p.field.as_str()).collect();
    assert_eq!(fields, ["ohms", "adc.bits", "adc.vref"], "{problems:?}");
}

#[test]
fn a_huge_file_is_refused_without_parsing() {
    let big = vec![b'#'; MAX_PROFILE_BYTES + 1];
    let Err(ProfileError::Invalid { problems, .. }) = parse_profile_bytes(&big, "big.toml") else {
        panic!("should fail");
    };
    assert!(problems[0].message.contains("at most"), "{problems:?}");
}

// Source: the loader's limit of 4096 calibration points (docs/profiles.md), one over it.
#[test]
fn more_points_than_the_limit_are_refused_on_the_points_field() {
    let mut text = String::from(
        "name = \"many\"\nreference_frequency = \"10MHz\"\n[adc]\nbits = 16\nvref = 4.0\n\
         [model]\nkind = \"table\"\npoints = [\n",
    );
    for i in 0..=MAX_PROFILE_POINTS {
        text.push_str(&format!(
            "  {{ applied = \"{}dBm\", counts = {} }},\n",
            i,
            i + 1
        ));
    }
    text.push_str("]\n");
    let Err(ProfileError::Invalid { problems, .. }) = parse_profile(&text, "many.toml") else {
        panic!("4097 points should be refused");
    };
    assert_eq!(problems.len(), 1, "{problems:?}");
    assert_eq!(
        (problems[0].line, problems[0].field.as_str()),
        (8, "model.points")
    );
    assert!(
        problems[0]
            .message
            .contains("4097 calibration points; a profile holds at most 4096"),
        "{problems:?}"
    );
}

// Source: the fit limit in src/detector/mod.rs (a model missing its own points by more
// than 2 dB RMS describes no detector): the demo diode with its fitted n and vl written in
// and vref changed from 1.2 V to 0.6 V misses its points by about 4.4 dB RMS; it must be
// refused on the field `n`, with the error and what to do.
#[test]
fn parameters_that_miss_their_own_points_are_refused() {
    let stale = demo_diode_with_stale_fit(0.6);
    let n_line = stale.lines().position(|l| l.starts_with("n = ")).unwrap() + 1;
    let Err(ProfileError::Invalid { problems, .. }) = parse_profile(&stale, "stale.toml") else {
        panic!("a model 4 dB off its own points should be refused");
    };
    assert_eq!(problems.len(), 1, "{problems:?}");
    let problem = &problems[0];
    assert_eq!((problem.line, problem.field.as_str()), (n_line, "model.n"));
    for fragment in [
        "misses its own calibration points by 4.",
        "dB RMS (worst model.points[",
        "at most 2 dB",
        "Delete n and vl to fit them again",
    ] {
        assert!(
            problem.message.contains(fragment),
            "{problem:?} lacks {fragment}"
        );
    }
}

#[test]
fn shipped_profiles_load() {
    for name in ["demo-diode", "demo-logamp"] {
        let path = format!("{}/profiles/{name}.toml", env!("CARGO_MANIFEST_DIR"));
        let profile = load_profile(Path::new(&path)).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(profile.name, name);
    }
}

// Source: the β equation (../shared/REFERENCES.md, from memory; recomputed): a 10 kΩ,
// β 3950 K thermistor reads 33 620.6 Ω at 0 °C; to ground under a 10 kΩ fixed resistor
// the pin sits at 33 620.6/43 620.6 of the reference, 3156.2 counts of 4095. The other
// keys take the defaults docs/profiles.md gives: channel 2, to-ground, t0_c 25 °C,
// window_s 5 s, u_c 0.5 °C.
#[test]
fn a_profile_with_a_temperature_table_loads_with_its_defaults_and_renders_back() {
    use dbtrail::thermal::{Ntc, NtcLaw, NtcPlacement, Sensor};
    let path = format!(
        "{}/tests/profiles/good/board-ntc.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    let profile = load_profile(Path::new(&path)).unwrap_or_else(|e| panic!("{e}"));
    let channel = profile.temperature.expect("a temperature channel");
    assert_eq!(
        (channel.channel, channel.window_s, channel.u_c),
        (1, 5.0, 0.5)
    );
    let Sensor::Ntc(Ntc {
        law: NtcLaw::Beta { t0_c, .. },
        placement,
        fixed_ohms,
    }) = channel.sensor
    else {
        panic!("an ntc-beta sensor: {:?}", channel.sensor);
    };
    assert_eq!(
        (t0_c, placement, fixed_ohms),
        (25.0, NtcPlacement::ToGround, 1e4)
    );
    let at_0c = channel.counts_for(&profile.adc, 0.0);
    assert!((at_0c - 3156.2).abs() < 0.05, "{at_0c}");
    assert!(channel.celsius(&profile.adc, 3156).unwrap().abs() < 0.02);
    let temps: Vec<Option<f64>> = profile.points.iter().map(|p| p.temp_c).collect();
    assert_eq!(temps, [Some(24.8), Some(25.1), Some(25.6)]);

    let rendered = dbtrail::profile::render_profile(&profile.raw, "again").unwrap();
    let again = parse_profile(&rendered, "again.toml").unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(again.temperature, Some(channel));
    assert_eq!(again.points, profile.points);
}

#[test]
fn the_rendered_message_carries_file_line_and_column() {
    let path = format!(
        "{}/tests/profiles/bad/unknown_key_adc.toml",
        env!("CARGO_MANIFEST_DIR")
    );
    let message = load_profile(Path::new(&path)).unwrap_err().to_string();
    assert!(
        message.contains("unknown_key_adc.toml:7:1: adc.bitz: unknown key `bitz`"),
        "{message}"
    );
}

mod never_panics {
    use super::*;
    use proptest::prelude::*;

    const GOOD: &str = include_str!("../profiles/demo-diode.toml");

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(300))]

        #[test]
        fn random_bytes(bytes in proptest::collection::vec(any::<u8>(), 0..2048)) {
            let _ = parse_profile_bytes(&bytes, "junk.toml");
        }

        // A real profile with a stretch cut out or replaced: every outcome must be a
        // profile or a list of located problems, never a panic.
        #[test]
        fn mangled_real_profile(start in 0usize..GOOD.len(), len in 0usize..64, junk in "\\PC{0,8}") {
            let start = (0..=start).rev().find(|&i| GOOD.is_char_boundary(i)).unwrap_or(0);
            let end = (start + len).min(GOOD.len());
            let end = (end..=GOOD.len()).find(|&i| GOOD.is_char_boundary(i)).unwrap_or(GOOD.len());
            let text = format!("{}{junk}{}", &GOOD[..start], &GOOD[end..]);
            if let Err(ProfileError::Invalid { problems, .. }) = parse_profile(&text, "m.toml") {
                prop_assert!(!problems.is_empty());
                for p in problems {
                    prop_assert!(p.line >= 1 && p.column >= 1 && !p.field.is_empty());
                }
            }
        }
    }
}
