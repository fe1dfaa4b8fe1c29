//! The calibration procedure end to end: scripted sessions against the simulated bench,
//! the saved profile then used by `record --replay` on counts from the same hidden
//! detector, compared with the levels that were really applied.

mod common;

use std::path::Path;
use std::process::{Command, Stdio};

use common::scratch;

use dbtrail::sim::{BenchDetector, SignalBench};

/// Runs `calibrate` with `script` on its standard input.
fn calibrate(args: &[&str], script: &[&str]) -> std::process::Output {
    use std::io::Write;
    let mut child = Command::new(env!("CARGO_BIN_EXE_dbtrail"))
        .arg("calibrate")
        .args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut input = script.join("\n");
    input.push('\n');
    // A run that refuses its options at once closes its input unread: that is its answer.
    let _ = child.stdin.take().unwrap().write_all(input.as_bytes());
    child.wait_with_output().unwrap()
}

/// A capture from the hidden detector: for each (dBm, Hz), 1000 settled samples.
fn capture(kind: BenchDetector, levels: &[(f64, f64)], path: &Path) {
    let mut bench = SignalBench::new(kind, 1000.0, 99);
    let mut text = String::new();
    for &applied in levels {
        bench.apply(Some(applied));
        for _ in 0..400 {
            bench.next_sample();
        }
        for _ in 0..1000 {
            text.push_str(&format!("{}\n", bench.next_sample().1));
        }
    }
    std::fs::write(path, text).unwrap();
}

/// Mean dBm of each one-second row when `capture` is replayed through `profile` at `freq`.
fn replayed_means(profile: &Path, capture: &Path, freq: &str) -> Vec<f64> {
    let out = common::succeeded([
        "record",
        "--replay",
        capture.to_str().unwrap(),
        "--profile",
        profile.to_str().unwrap(),
        "--freq",
        freq,
        "--rate",
        "1000",
        "--every",
        "1s",
    ]);
    String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("time_s"))
        .map(|l| l.split(',').nth(3).unwrap().parse().unwrap())
        .collect()
}

fn levels(from: f64, to: f64, step: f64) -> Vec<String> {
    let mut out = Vec::new();
    let mut l = from;
    while l <= to + 1e-9 {
        out.push(format!("{l}dBm"));
        l += step;
    }
    out
}

/// Calibrates the hidden detector with `model`, then checks the profile against levels
/// between the calibration points.
fn round_trip(
    kind: BenchDetector,
    demo: &str,
    model: &str,
    cal: (f64, f64, f64),
    check: (f64, f64, f64),
    tolerance: f64,
) {
    let tmp = scratch(&format!("{demo}-{model}"));
    let dir = tmp.path();
    let profile = dir.join("bench.toml");
    let mut script: Vec<String> = levels(cal.0, cal.1, cal.2);
    script.push("save".into());
    let script: Vec<&str> = script.iter().map(String::as_str).collect();
    let out = calibrate(
        &[
            "--demo",
            demo,
            "--model",
            model,
            "--out",
            profile.to_str().unwrap(),
        ],
        &script,
    );
    assert!(
        out.status.success(),
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(dir.join("bench.points.csv").exists());
    let truth: Vec<(f64, f64)> = levels(check.0, check.1, check.2)
        .iter()
        .map(|l| (l.trim_end_matches("dBm").parse().unwrap(), 10e6))
        .collect();
    let capture_path = dir.join("capture.txt");
    capture(kind, &truth, &capture_path);
    let means = replayed_means(&profile, &capture_path, "10MHz");
    assert_eq!(means.len(), truth.len());
    for ((applied, _), got) in truth.iter().zip(&means) {
        assert!(
            (got - applied).abs() < tolerance,
            "{model}: applied {applied} dBm, read {got} dBm"
        );
    }
}

// Source: the simulated bench's own truth (the level applied is known exactly); the
// tolerance 0.1 dB is the acceptance figure for well-resolved levels.
#[test]
fn diode_bench_with_the_table_model_reads_true_power_within_0_1_db() {
    round_trip(
        BenchDetector::Diode,
        "diode",
        "table",
        (-16.0, 17.0, 3.0),
        (-9.5, 15.5, 2.5),
        0.1,
    );
}

#[test]
fn diode_bench_with_the_diode_model_reads_true_power_within_0_1_db() {
    round_trip(
        BenchDetector::Diode,
        "diode",
        "diode",
        (-16.0, 17.0, 3.0),
        (-9.5, 15.5, 2.5),
        0.1,
    );
}

#[test]
fn logamp_bench_with_the_log_model_reads_true_power_within_0_1_db() {
    round_trip(
        BenchDetector::LogAmp,
        "logamp",
        "log",
        (-65.0, 5.0, 10.0),
        (-62.0, 3.0, 5.0),
        0.1,
    );
}

// Source: the simulated bench's roll-off, 10·log10(1 + (f/700 MHz)²) (a first-order
// corner; the figure is the bench's invented truth).
#[test]
fn frequency_stage_corrects_captured_frequencies_and_interpolates_between() {
    let tmp = scratch("freq");
    let dir = tmp.path();
    let profile = dir.join("freq.toml");
    let mut script: Vec<String> = levels(-16.0, 17.0, 3.0);
    script.extend(["freq 5dBm", "50MHz", "146MHz", "300MHz", "440MHz", "save"].map(String::from));
    let script: Vec<&str> = script.iter().map(String::as_str).collect();
    let out = calibrate(
        &[
            "--demo",
            "--model",
            "diode",
            "--out",
            profile.to_str().unwrap(),
        ],
        &script,
    );
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{stdout}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let bench = SignalBench::new(BenchDetector::Diode, 1000.0, 1);
    let saved = dbtrail::profile::load_profile(&profile).unwrap();
    let table = saved
        .frequency_correction
        .as_ref()
        .expect("a frequency table was saved");
    for hz in [50e6, 146e6, 300e6, 440e6] {
        let got = table.at(hz).db;
        assert!(
            (got - bench.rolloff_db(hz)).abs() < 0.05,
            "{hz}: {got} vs {}",
            bench.rolloff_db(hz)
        );
    }
    assert_eq!(
        table.at(10e6).db,
        0.0,
        "the reference frequency carries no correction"
    );
    // Readings at 146 MHz (captured) and 220 MHz (between two entries), at two levels.
    for (hz, name, tolerance) in [(146e6, "146MHz", 0.05), (220e6, "220MHz", 0.1)] {
        let capture_path = dir.join(format!("{name}.txt"));
        let truth = [(2.0, hz), (12.0, hz)];
        capture(BenchDetector::Diode, &truth, &capture_path);
        let means = replayed_means(&profile, &capture_path, name);
        for ((applied, _), got) in truth.iter().zip(&means) {
            assert!(
                (got - applied).abs() < tolerance,
                "{name}: applied {applied}, read {got}"
            );
        }
        // Without the correction the reading is off by the roll-off.
        let raw = replayed_means(&profile, &capture_path, "10MHz");
        assert!((raw[0] - truth[0].0 + bench.rolloff_db(hz)).abs() < 0.1);
    }
}

#[test]
fn bad_entries_get_a_message_and_the_session_goes_on() {
    let tmp = scratch("bad");
    let dir = tmp.path();
    let profile = dir.join("bad.toml");
    let script = [
        "-10dBm",
        "-5dBmW",
        "-3mW",
        "frobnicate",
        "delete 9",
        "0dBm",
        "model dioed",
        "10dBm",
        "save",
    ];
    let out = calibrate(&["--demo", "--out", profile.to_str().unwrap()], &script);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{stdout}");
    assert!(stdout.contains("unknown unit `dBmW`"), "{stdout}");
    assert!(
        stdout.contains("`-3mW` must be greater than zero"),
        "{stdout}"
    );
    assert!(
        stdout.contains("`frobnicate` does not start with a number"),
        "{stdout}"
    );
    assert!(stdout.contains("there is no point 9"), "{stdout}");
    assert!(stdout.contains("unknown model `dioed`"), "{stdout}");
    assert_eq!(stdout.matches("the session goes on").count(), 5, "{stdout}");
    let saved = dbtrail::profile::load_profile(&profile).unwrap();
    let applied: Vec<&str> = saved.points.iter().map(|p| p.applied.as_str()).collect();
    assert_eq!(
        applied,
        ["-10dBm", "0dBm", "10dBm"],
        "nothing entered before or after the mistakes is lost"
    );
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

fn path(p: &Path) -> &str {
    p.to_str().unwrap()
}

// Source: the rule in docs/reliability.md (bad input exits 2 with a message naming the
// file and what to do) and issue 16's decision: --out is checked before any measuring.
#[test]
fn an_existing_out_is_refused_before_any_measuring() {
    let tmp = scratch("keep");
    let dir = tmp.path();
    let profile = dir.join("keep.toml");
    std::fs::write(&profile, "precious\n").unwrap();
    let out = calibrate(
        &["--demo", "--out", path(&profile)],
        &["0dBm", "5dBm", "save"],
    );
    let stderr = text(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains(path(&profile)) && stderr.contains("choose another --out, or add --force"),
        "{stderr}"
    );
    assert!(
        !text(&out.stdout).contains("settled"),
        "nothing was measured"
    );
    assert_eq!(std::fs::read_to_string(&profile).unwrap(), "precious\n");
}

// Source: issue 16's decision: `save FILE` writes FILE and the points CSV beside it, and
// refuses an existing FILE unless --force was given, saying so; the session goes on.
#[test]
fn save_with_a_file_name_writes_that_file_and_refuses_an_existing_one() {
    let tmp = scratch("save-as");
    let dir = tmp.path();
    let taken = dir.join("taken.toml");
    std::fs::write(&taken, "precious\n").unwrap();
    let other = dir.join("other.toml");
    let save_taken = format!("save {}", path(&taken));
    let save_other = format!("save {}", path(&other));
    let out = calibrate(
        &["--demo", "--out", path(&dir.join("p.toml"))],
        &["0dBm", "5dBm", "10dBm", &save_taken, &save_other],
    );
    let stdout = text(&out.stdout);
    assert!(out.status.success(), "{stdout}{}", text(&out.stderr));
    assert!(
        stdout.contains(&format!("{} already exists", path(&taken)))
            && stdout.contains("without --force"),
        "{stdout}"
    );
    assert_eq!(std::fs::read_to_string(&taken).unwrap(), "precious\n");
    let saved = dbtrail::profile::load_profile(&other).unwrap();
    assert_eq!(saved.points.len(), 3);
    assert!(dir.join("other.points.csv").exists());
    assert!(
        !dir.join("p.toml").exists(),
        "the name given replaces --out"
    );
}

/// Data rows (not `#` lines, not the header) of a points CSV.
fn point_rows(file: &Path) -> Vec<String> {
    std::fs::read_to_string(file)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("applied"))
        .map(String::from)
        .collect()
}

// Source: issue 16's decision: the first `quit` with unsaved points warns, the second
// leaves with exit 0 and keeps the points in FILE.points.csv, saying where.
#[test]
fn quit_with_unsaved_points_warns_then_keeps_them() {
    let tmp = scratch("quit");
    let dir = tmp.path();
    let profile = dir.join("q.toml");
    let out = calibrate(
        &["--demo", "--out", path(&profile)],
        &["0dBm", "5dBm", "quit", "quit"],
    );
    let stdout = text(&out.stdout);
    assert_eq!(out.status.code(), Some(0), "{stdout}");
    let kept = dir.join("q.points.csv");
    assert!(
        stdout.contains(&format!(
            "2 points not saved: `save` writes them, `quit` again leaves and keeps them in {}",
            path(&kept)
        )),
        "{stdout}"
    );
    assert!(stdout.contains(&format!("2 points kept in {}", path(&kept))));
    let rows = point_rows(&kept);
    assert!(
        rows[0].starts_with("0dBm,") && rows[1].starts_with("5dBm,"),
        "{rows:?}"
    );
    assert!(!profile.exists());
}

// Source: issue 16's decision: end of input before `save` keeps exit 1 and now writes the
// points CSV beside the intended profile, printing its path.
#[test]
fn input_ending_before_save_keeps_the_points_in_a_file() {
    let tmp = scratch("early");
    let dir = tmp.path();
    let early = calibrate(
        &["--demo", "--out", path(&dir.join("early.toml"))],
        &["0dBm", "5dBm"],
    );
    assert_eq!(early.status.code(), Some(1));
    let kept = dir.join("early.points.csv");
    let stderr = text(&early.stderr);
    assert!(
        stderr.contains(&format!("kept in {}", path(&kept))),
        "{stderr}"
    );
    assert_eq!(point_rows(&kept).len(), 2);
}

// Source: dBm = 10·log10(P / 1 mW): 5 W is 36.99 dBm. The zero: the simulated bench's
// invented ADC offset (sim::BENCH_ZERO_COUNTS, 3 counts) under noise of mean zero
// (σ = 0.7 counts, rounded: symmetric about a whole count, so the mean stays 3);
// 1000 samples leave ±0.03, so 0.1 is a generous bound.
#[test]
fn the_zero_and_the_limits_are_measured_first_and_saved() {
    let tmp = scratch("zero");
    let dir = tmp.path();
    let profile = dir.join("z.toml");
    let mut script = vec!["zero", "limit detector 20dBm", "limit load 5W"];
    script.extend(["-5dBm", "0dBm", "5dBm", "10dBm", "save"]);
    let out = calibrate(&["--demo", "--out", path(&profile)], &script);
    let stdout = text(&out.stdout);
    assert!(out.status.success(), "{stdout}{}", text(&out.stderr));
    assert!(
        stdout.contains("zero: RF off + `zero`, or `skip`, or a level> "),
        "the zero is asked for first: {stdout}"
    );
    let saved = dbtrail::profile::load_profile(&profile).unwrap();
    let zero = saved.adc.zero_counts();
    assert!(
        (zero - dbtrail::sim::BENCH_ZERO_COUNTS).abs() < 0.1,
        "{zero}"
    );
    assert_eq!(saved.limits.detector_max_dbm, Some(20.0));
    let load = saved.limits.reference_max_dbm.unwrap();
    assert!((load - 36.9897).abs() < 1e-3, "{load}");
}

// Source: issue 16's decision: a level entered again replaces the earlier point and says
// "replaced point N (was X counts, now Y)"; no order warning, no blanked fits.
#[test]
fn a_level_entered_again_replaces_its_point() {
    let tmp = scratch("again");
    let dir = tmp.path();
    let profile = dir.join("a.toml");
    let out = calibrate(
        &["--demo", "--out", path(&profile)],
        &["-5dBm", "0dBm", "5dBm", "0dBm", "save"],
    );
    let stdout = text(&out.stdout);
    assert!(out.status.success(), "{stdout}");
    assert!(
        stdout.contains("replaced point 2 (was ") && stdout.contains(" at 0dBm"),
        "{stdout}"
    );
    assert!(!stdout.contains("not in order"), "{stdout}");
    let saved = dbtrail::profile::load_profile(&profile).unwrap();
    assert_eq!(saved.points.len(), 3);
}

// Source: issue 16: `fit` on calibrate's own points CSV, with no ADC options, must give
// the model calibrate saved (same points, same settings, same fit: parameters equal to
// 1e-9 relative); an option that differs from the file is used and reported.
#[test]
fn fit_on_calibrates_points_file_gives_the_saved_model() {
    let tmp = scratch("refit");
    let dir = tmp.path();
    let profile = dir.join("bench.toml");
    let mut script: Vec<String> = vec!["zero".into()];
    script.extend(levels(-16.0, 17.0, 3.0));
    script.push("save".into());
    let script: Vec<&str> = script.iter().map(String::as_str).collect();
    let out = calibrate(
        &["--demo", "--model", "diode", "--out", path(&profile)],
        &script,
    );
    assert!(out.status.success(), "{}", text(&out.stderr));
    let points = dir.join("bench.points.csv");
    let refit = dir.join("refit.toml");
    common::succeeded(["fit", path(&points), "--out", path(&refit)]);
    let (saved, again) = (
        dbtrail::profile::load_profile(&profile).unwrap(),
        dbtrail::profile::load_profile(&refit).unwrap(),
    );
    assert!(saved.adc.zero_counts() > 0.0, "the zero went through");
    for name in ["n", "vl"] {
        let (a, b) = (
            saved.model.param(name).unwrap(),
            again.model.param(name).unwrap(),
        );
        assert!((a - b).abs() <= 1e-9 * a.abs(), "{name}: {a} vs {b}");
    }
    assert_eq!(again.adc.zero_counts(), saved.adc.zero_counts());
    let other = dir.join("other.toml");
    let conflict = common::bin()
        .args(["fit", path(&points), "--divider", "1", "--model", "table"])
        .args(["--out", path(&other)])
        .output()
        .unwrap();
    let stderr = text(&conflict.stderr);
    assert!(
        stderr.contains("--divider 1 given, the points file says 2 (")
            && stderr.contains("line 4); using 1"),
        "{stderr}"
    );
}

/// The levels of one calibration set.
const SET: [&str; 3] = ["-10dBm", "0dBm", "10dBm"];

/// Runs `script` on the diode demo bench, saving to `profile`; its standard output, once
/// the run has succeeded.
fn demo_session(profile: &Path, script: &[&str]) -> String {
    let out = calibrate(&["--demo", "--out", path(profile)], script);
    let stdout = text(&out.stdout);
    assert!(out.status.success(), "{stdout}{}", text(&out.stderr));
    stdout
}

// Source: docs/profiles.md ("Temperature"): points carry `temp_c`; a second set taken ten
// or more degrees away may repeat the levels of the first, and the model then holds over
// the temperatures the points were taken at: 25 and 45 °C are 298.15 and 318.15 K
// (T/K = t/°C + 273.15, SI). The same level again within a set replaces its point.
#[test]
fn a_second_set_at_another_board_temperature_repeats_the_levels() {
    let tmp = scratch("two-sets");
    let profile = tmp.path().join("t.toml");
    let mut script = vec!["zero", "temp 25"];
    script.extend(SET);
    script.push("temp 45C");
    script.extend(SET);
    script.extend(["0dBm", "save"]);
    let stdout = demo_session(&profile, &script);
    assert!(stdout.contains("board 45.00 °C"), "{stdout}");
    // Only the last 0dBm, in the 45 °C set, replaced a point: point 5.
    assert_eq!(stdout.matches("replaced point").count(), 1, "{stdout}");
    assert!(stdout.contains("replaced point 5 (was "), "{stdout}");
    let saved = dbtrail::profile::load_profile(&profile).unwrap();
    let temps: Vec<Option<f64>> = saved.raw.model.points.iter().map(|p| p.temp_c).collect();
    let expected = [25.0, 25.0, 25.0, 45.0, 45.0, 45.0].map(Some);
    assert_eq!(temps, expected);
    let thermal = saved
        .model
        .thermal
        .as_ref()
        .expect("a model across temperature");
    let (lo, hi) = thermal.range_k();
    assert!(
        (lo - 298.15).abs() < 1e-9 && (hi - 318.15).abs() < 1e-9,
        "{lo} {hi}"
    );
    let csv = std::fs::read_to_string(tmp.path().join("t.points.csv")).unwrap();
    assert!(
        csv.contains("applied,counts,std_counts,samples,temp_c\n"),
        "{csv}"
    );
    assert!(csv.lines().last().unwrap().ends_with(",45"), "{csv}");
}

// Source: docs/profiles.md: a profile tells its calibration sets apart by `temp_c`, so a
// board temperature typed after points taken without one is refused, nothing changed.
#[test]
fn a_board_temperature_after_untagged_points_is_refused() {
    let tmp = scratch("untagged");
    let profile = tmp.path().join("u.toml");
    let script = ["-10dBm", "temp 25", "temp 200", "0dBm", "10dBm", "save"];
    let stdout = demo_session(&profile, &script);
    assert!(
        stdout.contains("point(s) 1 were taken without a board temperature"),
        "{stdout}"
    );
    assert!(
        stdout.contains("`temp 200`: give the board's temperature in °C"),
        "{stdout}"
    );
    let saved = dbtrail::profile::load_profile(&profile).unwrap();
    assert!(saved.raw.model.points.iter().all(|p| p.temp_c.is_none()));
}

// Source: the simulated bench's invented ADC offset (sim::BENCH_ZERO_COUNTS, 3 counts)
// under noise of mean zero, as in the test of the first zero above: a `zero` taken later
// in the session, with the RF off, still sets the written profile's [adc] zero_counts.
#[test]
fn a_zero_taken_later_sets_the_written_zero() {
    let tmp = scratch("late-zero");
    let profile = tmp.path().join("z.toml");
    let mut script = vec!["skip", "temp 30"];
    script.extend(SET);
    script.extend(["zero", "save"]);
    let stdout = demo_session(&profile, &script);
    assert!(
        stdout.contains("zero skipped: zero_counts stays 0"),
        "{stdout}"
    );
    let saved = dbtrail::profile::load_profile(&profile).unwrap();
    let zero = saved.adc.zero_counts();
    assert!(
        (zero - dbtrail::sim::BENCH_ZERO_COUNTS).abs() < 0.1,
        "{zero}"
    );
}
