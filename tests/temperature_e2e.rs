//! Temperature compensation end to end: a simulated diode detector whose board is held at
//! three temperatures, calibrated at two of them (15 °C and 45 °C), and a capture made at
//! the third (30 °C) replayed through the real binary with the calibrated profile.

mod common;

use std::path::Path;

use common::{column, rows, scratch};
use dbtrail::adc::Adc;
use dbtrail::decode::encode_ascii;
use dbtrail::detector::{Detector, DiodeDetector};
use dbtrail::profile::parse_profile;
use dbtrail::sim::{BoardTemperature, Scenario, Simulator};
use dbtrail::units::{dbm_to_watts, watts_to_dbm, CELSIUS_ZERO_K};

const RATE_HZ: f64 = 1000.0;
const SECONDS: usize = 80;

/// The bench: a made-up Schottky detector behind a 20 dB pad, a 12-bit ADC, and a β
/// thermistor on the board read ratiometrically as channel 2.
const BENCH: &str = r#"
name = "bench"
reference_frequency = "146MHz"
[adc]
bits = 12
vref = 1.2
divider = 2.0
[offset]
db = 20.0
[temperature]
sensor = "ntc-beta"
channel = 2
r0_ohms = 10000
beta_k = 3950
fixed_ohms = 10000
window_s = 2
u_c = 0.3
"#;

/// The simulated detector's truth: n and V_L at 15 °C.
const TRUTH_N: f64 = 1.05;
const TRUTH_VL: f64 = 0.05;
const CALIBRATED_AT_K: f64 = 288.15;

fn truth_profile() -> String {
    format!(
        "{BENCH}[model]\nkind = \"diode\"\ntemperature = {CALIBRATED_AT_K}\nn = {TRUTH_N}\n\
         vl = {TRUTH_VL}\npoints = [\n  {{ applied = \"-20dBm\", counts = {} }},\n  \
         {{ applied = \"0dBm\", counts = {} }},\n  {{ applied = \"10dBm\", counts = {} }},\n  \
         {{ applied = \"15dBm\", counts = {} }},\n]\n",
        counts_at(-20.0, CALIBRATED_AT_K),
        counts_at(0.0, CALIBRATED_AT_K),
        counts_at(10.0, CALIBRATED_AT_K),
        counts_at(15.0, CALIBRATED_AT_K),
    )
}

/// The mean counts the bench's ADC reads for `dbm` at the detector with the board at
/// `kelvin` (what averaging many noisy samples gives: the simulator's noise is zero-mean).
fn counts_at(dbm: f64, kelvin: f64) -> f64 {
    let diode = DiodeDetector::new(TRUTH_N, TRUTH_VL, CALIBRATED_AT_K, 50.0, (-30.0, 15.0));
    let volts = diode.at_kelvin(kelvin).volts_at(dbm);
    // The bench's ADC: 12 bits over 1.2 V behind a 2:1 divider, no zero offset.
    let adc = Adc::new(12, 1.2, 2.0, 0.0, 0.005);
    (adc.counts(volts) * 1e3).round() / 1e3
}

/// The profile a calibration at 15 °C and 45 °C gives: the diode fitted over both sets.
fn calibrated_profile() -> String {
    let mut points = String::new();
    for celsius in [15.0, 45.0] {
        for i in 0..12 {
            let dbm = -24.0 + 3.5 * i as f64;
            let counts = counts_at(dbm, celsius + CELSIUS_ZERO_K);
            points.push_str(&format!(
                "  {{ applied = \"{dbm}dBm\", counts = {counts}, temp_c = {celsius} }},\n"
            ));
        }
    }
    format!(
        "{BENCH}[model]\nkind = \"diode\"\ntemperature = {CALIBRATED_AT_K}\npoints = [\n{points}]\n"
    )
}

/// A capture of the tuning scenario with the board held at `kelvin`; the true mean power
/// of each second, dBm at the reference plane (over watts).
fn write_capture(path: &Path, kelvin: f64) -> Vec<f64> {
    let truth = parse_profile(&truth_profile(), "truth.toml").unwrap();
    let mut sim = Simulator::new(&truth, Scenario::Tune, RATE_HZ, 11)
        .with_board(BoardTemperature::Held(kelvin));
    assert_eq!(sim.channels(), 2);
    let mut bytes = Vec::new();
    let mut truth_dbm = Vec::new();
    for _ in 0..SECONDS {
        let mut counts = Vec::new();
        let t0 = sim.fill(RATE_HZ as usize, &mut counts);
        let mut watts = 0.0;
        for (i, frame) in counts.chunks(2).enumerate() {
            watts += dbm_to_watts(Scenario::Tune.true_dbm(t0 + i as f64 / RATE_HZ));
            encode_ascii(frame, &mut bytes);
        }
        truth_dbm.push(watts_to_dbm(watts / RATE_HZ));
    }
    std::fs::write(path, bytes).unwrap();
    truth_dbm
}

/// A capture with the board held at 30 °C recorded through the profile `text`: the
/// truth of each second, and the log's header and rows.
fn replayed_at_30_c(name: &str, text: &str) -> (Vec<f64>, Vec<String>, Vec<Vec<String>>) {
    let dir = scratch(name);
    let profile = dir.path().join("calibrated.toml");
    std::fs::write(&profile, text).unwrap();
    let capture = dir.path().join("at-30C.txt");
    let truth = write_capture(&capture, 30.0 + CELSIUS_ZERO_K);
    let log = dir.path().join("at-30C.csv");
    let out = record(&capture, profile.to_str().unwrap(), &log);
    let said = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{said}");
    let (header, rows) = rows(&log);
    (truth, header, rows)
}

/// `record` of a capture at 1000 samples/s through `profile`, a row a second.
fn record(capture: &Path, profile: &str, out: &Path) -> std::process::Output {
    common::output(common::bin().args([
        "record",
        "--replay",
        capture.to_str().unwrap(),
        "--profile",
        profile,
        "--rate",
        "1000",
        "--every",
        "1s",
        "--out",
        out.to_str().unwrap(),
    ]))
}

fn number(cell: &str) -> Option<f64> {
    cell.parse().ok()
}

// Source: the GUM's coverage at k = 2 (about 95 %, JCGM 100:2008 6.2): the compensated
// means lie within their stated expanded uncertainty of the simulator's truth in at least
// 95 % of the rows; the diode's temperature law itself is checked against mpmath in
// tests/thermal_models.rs. The uncompensated means (the model as calibrated at 15 °C, read
// 15 K off) must miss the truth by far more.
#[test]
fn compensated_readings_hold_the_truth_at_a_temperature_between_the_calibrations() {
    let (truth, header, rows) = replayed_at_30_c("temperature-e2e", &calibrated_profile());
    let col = |name: &str| column(&header, name);
    let (mean, u, plain, temp, flags) = (
        col("mean_dbm"),
        col("u_db"),
        col("uncomp_dbm"),
        col("temp_c"),
        col("flags"),
    );
    assert_eq!(rows.len(), SECONDS);
    let (mut values, mut covered) = (0, 0);
    let (mut comp_err, mut plain_err) = (0.0, 0.0);
    // The first row's window is still filling; every later one reads the held 30 °C.
    for (row, truth) in rows.iter().zip(&truth).skip(1) {
        assert!(!row[flags].contains("temp-"), "{row:?}");
        let celsius = number(&row[temp]).unwrap();
        assert!((celsius - 30.0).abs() < 0.05, "board read {celsius} °C");
        let (Some(mean), Some(u)) = (number(&row[mean]), number(&row[u])) else {
            continue;
        };
        values += 1;
        covered += usize::from((mean - truth).abs() <= u);
        comp_err += (mean - truth).abs();
        plain_err += (number(&row[plain]).unwrap() - truth).abs();
    }
    assert!(values >= SECONDS * 9 / 10, "{values} rows with a value");
    assert!(
        covered * 100 >= values * 95,
        "{covered} of {values} covered"
    );
    let (comp_err, plain_err) = (comp_err / values as f64, plain_err / values as f64);
    eprintln!(
        "{covered} of {values} covered; mean |error| compensated {comp_err:.4} dB, \
         uncompensated {plain_err:.4} dB"
    );
    assert!(plain_err > 0.1, "uncompensated off by only {plain_err} dB");
    assert!(
        plain_err > 5.0 * comp_err,
        "compensated {comp_err} dB, uncompensated {plain_err} dB"
    );
}

/// The calibrated profile as a table model, its sets the same points.
fn calibrated_table() -> String {
    calibrated_profile()
        .replace("kind = \"diode\"", "kind = \"table\"")
        .replace(&format!("temperature = {CALIBRATED_AT_K}\n"), "")
}

// Source: the GUM's coverage at k = 2 (JCGM 100:2008 6.2), as above, for a table model
// of two sets: between them the reading is the temperature-weighted mean of both curves,
// and its stated uncertainty holds the interpolation's own error (docs/calibration.md,
// "Temperature"), so the truth at 30 °C lies within it in at least 95 % of the rows.
#[test]
fn a_table_of_two_temperature_sets_holds_the_truth_between_them() {
    let (truth, header, rows) = replayed_at_30_c("temperature-table", &calibrated_table());
    let (mean, u) = (column(&header, "mean_dbm"), column(&header, "u_db"));
    let (mut values, mut covered, mut worst) = (0, 0, 0.0f64);
    for (row, truth) in rows.iter().zip(&truth).skip(1) {
        let (Some(mean), Some(u)) = (number(&row[mean]), number(&row[u])) else {
            continue;
        };
        values += 1;
        covered += usize::from((mean - truth).abs() <= u);
        worst = worst.max((mean - truth).abs());
    }
    eprintln!("table: {covered} of {values} covered; worst error {worst:.4} dB");
    assert!(values >= SECONDS * 9 / 10, "{values} rows with a value");
    assert!(
        covered * 100 >= values * 95,
        "{covered} of {values} covered"
    );
}

// Source: the rules in docs/recording.md ("The board's temperature"): a sensor at a rail
// is flagged, never turned into a temperature; readings without a temperature are read
// as calibrated, flagged `temp-unknown`, with no stated uncertainty; a stream without the
// channel the profile names is refused, exit 2, saying which.
#[test]
fn a_shorted_sensor_is_flagged_and_a_missing_channel_refused() {
    let dir = scratch("temperature-faults");
    let capture = dir.path().join("short.txt");
    // The demo board's thermistor to ground reads code 0 when shorted, about 1964 at
    // 26.85 °C (10 kΩ·e^(3950·(1/300 − 1/298.15)) = 9.215 kΩ against 10 kΩ: 0.4796 of 4095).
    let lines: String = (0..3000)
        .map(|i| format!("1500,{}\n", if i < 1500 { 0 } else { 1964 }))
        .collect();
    std::fs::write(&capture, lines).unwrap();
    let log = dir.path().join("short.csv");
    let run = |profile: &str, out: &Path| record(&capture, profile, out);
    assert!(run("profiles/demo-diode.toml", &log).status.success());
    let (header, rows) = rows(&log);
    let col = |name: &str| column(&header, name);
    let cells = |row: &Vec<String>| {
        [col("flags"), col("u_db"), col("temp_c"), col("temp_flags")].map(|c| row[c].clone())
    };
    assert_eq!(
        cells(&rows[0]),
        ["temp-unknown", "", "", "sensor-short|temp-unknown"]
    );
    let [flags, u, temp, faults] = cells(&rows[2]);
    assert_eq!((flags.as_str(), faults.as_str()), ("", ""));
    assert!(number(&u).is_some());
    assert!((number(&temp).unwrap() - 26.85).abs() < 0.05, "{temp}");

    let other = dir.path().join("channel-3.toml");
    let text = std::fs::read_to_string("profiles/demo-diode.toml").unwrap();
    std::fs::write(&other, text.replace("channel = 2", "channel = 3")).unwrap();
    let out = run(other.to_str().unwrap(), &dir.path().join("refused.csv"));
    let said = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{said}");
    assert!(
        said.contains("on channel 3 but the stream sends 2"),
        "{said}"
    );
}
