//! The `dbtrail` binary as a user meets it: output, exit codes and messages.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use common::scratch;

fn dbtrail(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_dbtrail"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("the binary runs")
}

fn stdout(out: &Output) -> String {
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

// Source: ../shared/REFERENCES.md (common practice): +13 dBm in 50 Ω is 19.95 mW,
// 998.8 mVrms, 1.413 Vpk, 2.825 Vpp.
#[test]
fn convert_json_has_every_form_in_si_units() {
    let out = dbtrail(&["convert", "13dBm", "--json"]);
    assert!(out.status.success(), "{}", stderr(&out));
    let v: serde_json::Value = serde_json::from_str(&stdout(&out)).unwrap();
    let close = |key: &str, want: f64| {
        let got = v[key].as_f64().unwrap();
        assert!(((got - want) / want).abs() < 5e-4, "{key}: {got}");
    };
    close("dbm", 13.0);
    close("dbw", -17.0);
    close("watts", 19.95e-3);
    close("vrms", 0.9988);
    close("vpk", 1.413);
    close("vpp", 2.825);
    close("ohms", 50.0);
}

// Source: ../shared/REFERENCES.md: 0 dBm at 75 Ω is 273.9 mVrms.
#[test]
fn convert_text_at_75_ohms() {
    let out = dbtrail(&["convert", "273.86mVrms", "--ohms", "75"]);
    let text = stdout(&out);
    assert!(out.status.success());
    assert!(
        text.contains("dBm         -0.000") || text.contains("dBm          0.000"),
        "{text}"
    );
    assert!(
        text.contains("387.3 mV") && text.contains("774.6 mV") && text.contains("1.000 mW"),
        "{text}"
    );
}

// Source: docs/calibration.md, "Calibrating a peak detector by DC injection": DC reads RF
// low by 0.4 to 4.7 dB with the demo's diode, so a Vpk equal to the DC is only the ideal;
// the rule is that the label says so and names the section that gives the bias.
#[test]
fn convert_calls_the_dc_for_injection_ideal_and_points_to_its_bias() {
    const SECTION: &str = "Calibrating a peak detector by DC injection";
    let out = dbtrail(&["convert", "-10dBm"]);
    assert!(out.status.success(), "{}", stderr(&out));
    let text = stdout(&out);
    let vpk = text.lines().find(|l| l.contains("Vpk")).unwrap();
    assert!(
        vpk.contains("100.0 mV") && vpk.contains("ideal DC"),
        "{vpk}"
    );
    assert!(
        vpk.contains(SECTION) && vpk.contains("docs/calibration.md"),
        "{vpk}"
    );
    assert!(!vpk.contains("= the DC"), "{vpk}");
    let doc = std::fs::read_to_string("docs/calibration.md").unwrap();
    assert!(
        doc.contains(&format!("\n## {SECTION}\n")),
        "no such section"
    );
}

#[test]
fn convert_refuses_bad_quantities_with_exit_2_and_the_accepted_list() {
    for bad in ["0W", "-3mW", "-1Vpk", "NaN dBm", "12 parsecs", "1MW"] {
        let out = dbtrail(&["convert", bad]);
        assert_eq!(out.status.code(), Some(2), "{bad}");
        assert!(stderr(&out).contains("dBm"), "{bad}: {}", stderr(&out));
    }
    let out = dbtrail(&["convert", "0dBm", "--ohms", "-50"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("positive number of ohms"));
}

#[test]
fn check_summarises_a_shipped_profile() {
    let out = dbtrail(&["check", "profiles/demo-diode.toml", "--freq", "145.5MHz"]);
    let text = stdout(&out);
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(text.contains("diode peak detector"), "{text}");
    assert!(text.contains("correction +0.60 dB"), "{text}");
    assert!(
        text.contains("Resolution across the span") && text.contains("RMS error"),
        "{text}"
    );
    assert!(text.contains("is valid"));
}

#[test]
fn check_of_a_broken_profile_lists_problems_and_exits_2() {
    let out = dbtrail(&["check", "tests/profiles/bad/unknown_key_adc.toml"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("unknown_key_adc.toml:7:1: adc.bitz"),
        "{}",
        stderr(&out)
    );
    let out = dbtrail(&["check", "no/such/profile.toml"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("no/such/profile.toml"),
        "{}",
        stderr(&out)
    );
}

fn fit_args<'a>(points: &'a str, model: &'a str, out: &'a str) -> Vec<&'a str> {
    let mut args = vec!["fit", points, "--model", model];
    args.extend(common::FIT_ADC_AND_FREQ);
    args.extend(["--out", out]);
    args
}

// Source: worked example — points on V = 0.025·(P + 80) with 1 mV per count must fit to a
// 25 mV/dB slope and a −80 dBm intercept.
#[test]
fn fit_writes_a_profile_that_loads_and_keeps_its_fit() {
    let tmp = scratch("fit");
    let dir = tmp.path();
    let points = dir.join("points.csv");
    let mut csv = String::from("applied,counts\n");
    for dbm in [-60, -45, -30, -15, 0] {
        csv.push_str(&format!("{dbm}dBm,{}\n", 25.0 * f64::from(dbm + 80)));
    }
    std::fs::write(&points, csv).unwrap();
    let out_path = dir.join("line.toml");
    let _ = std::fs::remove_file(&out_path);
    let (p, o) = (points.to_str().unwrap(), out_path.to_str().unwrap());
    let out = dbtrail(&fit_args(p, "log", o));
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(
        stdout(&out).contains("RMS error 0.000 dB"),
        "{}",
        stdout(&out)
    );
    let profile = dbtrail::profile::load_profile(&out_path).unwrap();
    assert!((profile.raw.model.slope.unwrap() - 0.025).abs() < 1e-12);
    assert!((profile.raw.model.intercept.unwrap() + 80.0).abs() < 1e-9);
    assert_eq!(profile.name, "line");

    let again = dbtrail(&fit_args(p, "log", o));
    assert_eq!(again.status.code(), Some(2));
    assert!(stderr(&again).contains("already exists") && stderr(&again).contains("--force"));
    let mut forced = fit_args(p, "table", o);
    forced.push("--force");
    assert!(dbtrail(&forced).status.success());
    assert_eq!(
        dbtrail::profile::load_profile(&out_path)
            .unwrap()
            .model
            .kind
            .name(),
        "table"
    );
}

// Source: worked example — the log-amp line of the test above, each point with the board
// temperature it was taken at (the column first, as the header may order columns any
// way): the written profile keeps them, on the same points, and the fit is the line's own
// 25 mV/dB (temp_c does not enter the model).
#[test]
fn fit_carries_each_points_board_temperature_into_the_profile() {
    let tmp = scratch("fit-temp");
    let dir = tmp.path();
    let points = dir.join("points.csv");
    let mut csv = String::from("temp_c,applied,counts\n");
    let temps = [21.5, 22.0, 23.25, 24.0, 26.5];
    for (dbm, temp) in [-60, -45, -30, -15, 0].into_iter().zip(temps) {
        csv.push_str(&format!("{temp},{dbm}dBm,{}\n", 25.0 * f64::from(dbm + 80)));
    }
    std::fs::write(&points, csv).unwrap();
    let out_path = dir.join("warm.toml");
    let (p, o) = (points.to_str().unwrap(), out_path.to_str().unwrap());
    let out = dbtrail(&fit_args(p, "log", o));
    assert!(out.status.success(), "{}", stderr(&out));
    let profile = dbtrail::profile::load_profile(&out_path).unwrap();
    let got: Vec<Option<f64>> = profile.points.iter().map(|p| p.temp_c).collect();
    assert_eq!(got, temps.map(Some));
    assert_eq!(profile.points[4].applied, "0dBm");
    assert!((profile.raw.model.slope.unwrap() - 0.025).abs() < 1e-12);
}

/// A points file of `count` points on the log-amp line V = 0.025·(P + 80) (1 mV a count),
/// each level written with `padding` zeros after its decimal point.
fn line_points(dir: &Path, count: usize, padding: usize) -> PathBuf {
    let path = dir.join(format!("line-{count}-{padding}.csv"));
    let mut csv = String::from("applied,counts\n");
    for i in 0..count {
        let dbm = -60.0 + 60.0 * i as f64 / count as f64;
        let zeros = "0".repeat(padding);
        csv.push_str(&format!("{dbm:.6}{zeros}dBm,{}\n", 25.0 * (dbm + 80.0)));
    }
    std::fs::write(&path, csv).unwrap();
    path
}

/// Runs a log-amp fit of `points` that must be refused: exit 2 and nothing written.
/// Returns the message.
fn refused_log_fit(points: &Path, out_path: &Path) -> String {
    let out = dbtrail(&fit_args(
        points.to_str().unwrap(),
        "log",
        out_path.to_str().unwrap(),
    ));
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    assert!(!out_path.exists(), "nothing may be written on failure");
    stderr(&out)
}

// Source: the rule in docs/reliability.md (bad input exits 2 with a message and writes
// nothing) and the profile loader's limit of 4096 points (docs/profiles.md).
#[test]
fn fit_refuses_more_points_than_a_profile_holds() {
    let tmp = scratch("too-many-points");
    let dir = tmp.path();
    let message = refused_log_fit(&line_points(dir, 4097, 0), &dir.join("many.toml"));
    assert!(
        message.contains("4097 calibration points; a profile holds at most 4096"),
        "{message}"
    );
}

// Source: the rule that `fit` never writes a profile `check` refuses: 4000 points whose
// levels are written with 250 padding zeros make a file over the loader's 1 MiB, which
// must be refused with the loader's message before anything is written.
#[test]
fn fit_never_writes_a_profile_that_check_refuses() {
    let tmp = scratch("fit-too-large");
    let dir = tmp.path();
    let message = refused_log_fit(&line_points(dir, 4000, 250), &dir.join("large.toml"));
    assert!(
        message.contains("would not load, so") && message.contains("was not written"),
        "{message}"
    );
    assert!(
        message.contains("large.toml:1:1: (file): the file is")
            && message.contains("a profile is at most 1048576 bytes"),
        "{message}"
    );
}

/// (file, model, what the message must name)
const BAD_POINTS: &[(&str, &str, &str)] = &[
    (
        "empty.csv",
        "table",
        "empty.csv:1: (file): the file is empty",
    ),
    ("header_only.csv", "table", "no points after the header"),
    ("missing_counts_column.csv", "table", "no `counts` column"),
    (
        "non_numeric_counts.csv",
        "table",
        "non_numeric_counts.csv:3: counts",
    ),
    (
        "bad_unit.csv",
        "table",
        "bad_unit.csv:3: applied: unknown unit `dBmm`",
    ),
    (
        "negative_power.csv",
        "table",
        "negative_power.csv:3: applied",
    ),
    ("short_row.csv", "table", "short_row.csv:3: (row)"),
    ("nan_counts.csv", "table", "nan_counts.csv:3: counts"),
    (
        "non_utf8.csv",
        "table",
        "non_utf8.csv:3: (file): bytes that are not UTF-8",
    ),
    (
        "non_monotone.csv",
        "table",
        "non_monotone.csv:3: counts: at -10.000 dBm",
    ),
    (
        "too_few_for_diode.csv",
        "diode",
        "at least 4 calibration points; 3 given",
    ),
    (
        "counts_over_full_scale.csv",
        "table",
        "counts_over_full_scale.csv:4: counts: 5000 is out of range",
    ),
    (
        "no_header.csv",
        "table",
        "no_header.csv:1: (header): no `applied` column; the first line must be a header",
    ),
    (
        "truncated.csv",
        "table",
        "truncated.csv:4: counts: `` is not a finite",
    ),
    // Source: the rules in docs/profiles.md: temp_c is °C from -55 to 150, on every
    // point or on none.
    (
        "temp_c_missing_on_a_row.csv",
        "table",
        "temp_c_missing_on_a_row.csv:3: temp_c: this point has no `temp_c`",
    ),
    (
        "temp_c_with_unit.csv",
        "table",
        "temp_c_with_unit.csv:3: temp_c: `25C` is not a finite number",
    ),
    (
        "temp_c_in_kelvin.csv",
        "table",
        "temp_c_in_kelvin.csv:3: temp_c: 298.15 is out of range",
    ),
    (
        "duplicate_applied_column.csv",
        "table",
        "duplicate_applied_column.csv:1: (header): two `applied` columns (columns 1 and 3)",
    ),
    (
        "zero_samples.csv",
        "table",
        "zero_samples.csv:3: samples: `0` is not a whole number of samples, 1 or more",
    ),
];

// Source: worked example — the same log-amp line as above with its columns swapped (and
// an extra column): a points file is read by its header names, not by position.
#[test]
fn points_columns_are_found_by_name_in_any_order() {
    let tmp = scratch("reordered");
    let dir = tmp.path();
    let points = dir.join("reordered.csv");
    let mut csv = String::from("note,counts,applied\n");
    for dbm in [-60, -45, -30, -15, 0] {
        csv.push_str(&format!("bench,{},{dbm}dBm\n", 25.0 * f64::from(dbm + 80)));
    }
    std::fs::write(&points, csv).unwrap();
    let out_path = dir.join("line.toml");
    let out = dbtrail(&fit_args(
        points.to_str().unwrap(),
        "log",
        out_path.to_str().unwrap(),
    ));
    assert!(out.status.success(), "{}", stderr(&out));
    let profile = dbtrail::profile::load_profile(&out_path).unwrap();
    assert!((profile.raw.model.slope.unwrap() - 0.025).abs() < 1e-12);
    assert!((profile.raw.model.intercept.unwrap() + 80.0).abs() < 1e-9);
}

#[test]
fn malformed_points_files_name_the_line_and_exit_2() {
    let tmp = scratch("bad-points");
    let dir = tmp.path();
    for &(file, model, want) in BAD_POINTS {
        let path = Path::new("tests/points/bad").join(file);
        let out_path = dir.join(format!("{file}.toml"));
        let out = dbtrail(&fit_args(
            path.to_str().unwrap(),
            model,
            out_path.to_str().unwrap(),
        ));
        assert_eq!(out.status.code(), Some(2), "{file}: {}", stderr(&out));
        assert!(
            stderr(&out).contains(want),
            "{file}: `{}` lacks `{want}`",
            stderr(&out)
        );
        assert!(
            !out_path.exists(),
            "{file}: nothing may be written on failure"
        );
    }
    let files = std::fs::read_dir("tests/points/bad").unwrap().count();
    assert_eq!(files, BAD_POINTS.len());
}

#[test]
fn usage_errors_exit_2_and_help_carries_the_safety_note() {
    assert_eq!(dbtrail(&["fit"]).status.code(), Some(2));
    assert_eq!(dbtrail(&["no-such-command"]).status.code(), Some(2));
    let help = stdout(&dbtrail(&["--help"]));
    assert!(help.contains("licence") && help.contains("burn"), "{help}");
}

#[test]
fn check_shows_readings_and_end_points_stay_inside_their_span() {
    // 2821 counts is the demo diode's own +15 dBm calibration point: it must not read as
    // outside the span; 4090 counts is at ADC clip.
    let out = dbtrail(&[
        "check",
        "profiles/demo-diode.toml",
        "--counts",
        "2821",
        "4090",
    ]);
    let text = stdout(&out);
    assert!(out.status.success(), "{}", stderr(&out));
    let line = |counts: &str| {
        text.lines()
            .find(|l| l.trim_start().starts_with(counts))
            .unwrap()
            .to_string()
    };
    assert!(!line("2821").contains('['), "{}", line("2821"));
    assert!(line("4090").contains("clip"), "{}", line("4090"));
}

// Source: profiles/demo-diode.toml — `detector_max_dbm = 18` and a +2.6 dB correction at
// 440 MHz; docs/calibration.md ("Limits"): the limit is on the true detector input, the
// shown detector dBm (the curve's, 17.900 by dbtrail's diode model) plus the correction:
// 17.9 + 2.6 = 20.5 dBm, over 18 (worked by hand).
#[test]
fn check_flags_the_detector_limit_after_the_frequency_correction() {
    let tmp = scratch("detector-limit");
    let dir = tmp.path();
    let profile = dir.join("rated-high.toml");
    let text = std::fs::read_to_string("profiles/demo-diode.toml").unwrap();
    let text = text.replacen("reference_max_dbm = 37", "reference_max_dbm = 60", 1);
    std::fs::write(&profile, text).unwrap();
    let out = dbtrail(&[
        "check",
        profile.to_str().unwrap(),
        "--freq",
        "440MHz",
        "--counts",
        "4000",
    ]);
    assert!(out.status.success(), "{}", stderr(&out));
    let text = stdout(&out);
    let line = text
        .lines()
        .find(|l| l.trim_start().starts_with("4000"))
        .unwrap();
    assert!(line.contains("17.900"), "{line}");
    assert!(line.contains("[above|over-detector-max]"), "{line}");
}

#[test]
fn a_missing_profile_is_named_once_with_the_os_reason() {
    let out = dbtrail(&["check", "no/such/profile.toml"]);
    let message = stderr(&out);
    assert_eq!(message.matches("No such file").count(), 1, "{message}");
    assert!(
        message.starts_with("dbtrail: error: cannot read profile no/such/profile.toml"),
        "{message}"
    );
}

// Source: worked example — points on a straight line in dB (a log-amp) cannot be described
// by the diode model; fit must refuse rather than write a profile 40 dB wrong.
#[test]
fn diode_fit_of_log_amp_points_is_refused() {
    let tmp = scratch("diode-on-logamp");
    let dir = tmp.path();
    let points = dir.join("points.csv");
    let mut csv = String::from("applied,counts\n");
    for dbm in (-60..=0).step_by(10) {
        csv.push_str(&format!("{dbm}dBm,{}\n", 25.0 * f64::from(dbm + 80)));
    }
    std::fs::write(&points, csv).unwrap();
    let out_path = dir.join("never.toml");
    let out = dbtrail(&fit_args(
        points.to_str().unwrap(),
        "diode",
        out_path.to_str().unwrap(),
    ));
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("do not look like a diode detector"),
        "{}",
        stderr(&out)
    );
    assert!(!out_path.exists());
}

/// (arguments, what the message must say): each names the option, the bad text and what
/// would be accepted, and exits 2 before anything is opened or written.
const BAD_QUANTITIES: &[(&[&str], &str)] = &[
    (
        &["record", "--demo", "--freq", "10m"],
        "'--freq <FREQ>': unknown unit `m` in `10m`; write M or MHz",
    ),
    (
        &["record", "--demo", "--freq", "-5MHz"],
        "`-5MHz` must be greater than zero",
    ),
    (
        &["watch", "--demo", "--freq", "nan"],
        "`nan` is not a finite number",
    ),
    (
        &["record", "--demo", "--offset", "3dBx"],
        "'--offset <OFFSET>': unknown unit `dBx`",
    ),
    (
        &["record", "--demo", "--offset", "inf"],
        "`inf` is not a finite number",
    ),
    (
        &["record", "--demo", "--every", "-1s"],
        "a duration cannot be negative",
    ),
    (
        &["record", "--demo", "--duration", "forever"],
        "expected a duration such as 90s",
    ),
    (
        &["record", "--demo", "--rate", "0"],
        "'--rate <RATE>': `0` must be greater than zero",
    ),
    (
        &["report", "x.csv", "--from", "1q"],
        "'--from <FROM>': unknown unit `q`",
    ),
    (
        &["check", "profiles/demo-diode.toml", "--counts", "abc"],
        "`abc` is not a number of ADC counts",
    ),
    (&["convert", "12", "parsecs"], "unknown unit"),
    (&["convert", "--ohms", "-50", "1mW"], "--ohms"),
];

#[test]
fn bad_quantities_on_the_command_line_are_named_and_exit_2() {
    for (args, want) in BAD_QUANTITIES {
        let out = dbtrail(args);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {}", stderr(&out));
        assert!(
            stderr(&out).contains(want),
            "{args:?}: `{}` lacks `{want}`",
            stderr(&out)
        );
        assert!(!stderr(&out).contains("panicked"), "{args:?}");
    }
}

#[test]
fn a_unit_written_apart_from_its_number_is_accepted() {
    // Source: common practice, P = Vrms²/R: −3 dBm is 0.5012 mW, and √(0.5012 mW × 50 Ω) =
    // 158.30 mV rms.
    let out = dbtrail(&["convert", "-3", "dBm", "--json"]);
    assert!(out.status.success(), "{}", stderr(&out));
    let json: serde_json::Value = serde_json::from_str(&stdout(&out)).unwrap();
    assert!((json["vrms"].as_f64().unwrap() - 0.15830).abs() < 1e-5);
}

// A record whose profile or capture cannot be read stops with exit 2 before it makes its
// output file, so a second try is not refused as "already exists".
#[test]
fn a_record_with_a_bad_profile_or_capture_leaves_no_output_file() {
    let tmp = scratch("no-output");
    let dir = tmp.path();
    let capture = dir.join("c.txt");
    std::fs::write(&capture, "1200\n1201\n").unwrap();
    let missing = dir.join("missing.txt");
    let profile = "profiles/demo-diode.toml";
    let cases = [
        (
            capture.to_str().unwrap(),
            "profiles/no-such.toml",
            "cannot read profile",
        ),
        (missing.to_str().unwrap(), profile, "cannot open capture"),
    ];
    for (i, (replay, profile, says)) in cases.into_iter().enumerate() {
        let out_path = dir.join(format!("out{i}.csv"));
        let out_arg = out_path.to_str().unwrap();
        let out = dbtrail(&[
            "record",
            "--replay",
            replay,
            "--profile",
            profile,
            "--out",
            out_arg,
        ]);
        assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
        assert!(stderr(&out).contains(says), "{}", stderr(&out));
        assert!(!out_path.exists(), "{out_arg} was made");
    }
}

// Source: the rule in docs/reliability.md (bad input exits 2 with a message saying what
// is wrong; nothing grows without bound on user input): /dev/zero never ends, so a points
// file that is a device is refused before it is read, and one past its limit at the limit.
#[test]
fn a_device_or_a_huge_file_as_points_is_refused_without_reading_it_all() {
    let fit = |points: &str| dbtrail(&fit_args(points, "log", "never.toml"));
    let out = fit("/dev/zero");
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("not a regular file"),
        "{}",
        stderr(&out)
    );
    let tmp = scratch("huge-points");
    let dir = tmp.path();
    let huge = dir.join("huge.csv");
    let row = "-10dBm,1000\n";
    std::fs::write(
        &huge,
        format!("applied,counts\n{}", row.repeat((17 << 20) / row.len())),
    )
    .unwrap();
    let out = fit(huge.to_str().unwrap());
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("over 16 MiB"), "{}", stderr(&out));
    assert!(!std::path::Path::new("never.toml").exists());
}

/// Runs the binary with its standard output read for one line and then closed, as
/// `| head -1` does; the exit status and standard error once it has ended.
fn with_reader_gone_after_one_line(args: &[&str]) -> (std::process::ExitStatus, String) {
    use std::io::{BufRead, Read};
    let mut child = common::spawn(
        common::bin()
            .args(args)
            .stdout(std::process::Stdio::piped())
            .stderr(std::process::Stdio::piped()),
    );
    let mut first = String::new();
    let mut stdout = std::io::BufReader::new(child.stdout.take().unwrap());
    stdout.read_line(&mut first).unwrap();
    assert!(!first.is_empty(), "{args:?} wrote nothing");
    drop(stdout);
    let mut stderr = child.stderr.take().unwrap();
    let status = common::wait(child, std::time::Duration::from_secs(60));
    let mut said = String::new();
    stderr.read_to_string(&mut said).unwrap();
    (status, said)
}

// Source: the exit-code rule in docs/reliability.md: a reader that stops early (`| head`)
// is a normal end for every command, exit 0 and no message. Before, record ended with
// "cannot write to standard output … Broken pipe" and exit 1.
#[test]
fn a_reader_that_stops_early_ends_every_command_quietly() {
    for args in [
        &["record", "--demo", "soak", "--fast", "--duration", "2h"][..],
        &[
            "record",
            "--demo",
            "soak",
            "--fast",
            "--duration",
            "2h",
            "--every",
            "0",
        ],
        &["sim", "--scenario", "soak", "--seconds", "7200"],
    ] {
        let (status, said) = with_reader_gone_after_one_line(args);
        assert_eq!(status.code(), Some(0), "{args:?}: {said}");
        assert!(!said.contains("error"), "{args:?}: {said}");
    }
}

// Source: `sim --help`: the simulated time is --seconds or, as `record` and `watch` name
// theirs, --duration, in either a number or a duration: 2 s at 100 samples/s is 200
// samples (one line each), the same lines whichever name is used.
#[test]
fn sim_takes_its_time_as_duration_too() {
    let sim = |args: &[&str]| {
        let out = common::succeeded(
            ["sim", "--scenario", "tune", "--rate", "100"]
                .iter()
                .chain(args),
        );
        String::from_utf8(out.stdout).unwrap()
    };
    let by_duration = sim(&["--duration", "2s"]);
    assert_eq!(
        by_duration.lines().filter(|l| !l.starts_with('#')).count(),
        200
    );
    assert_eq!(by_duration, sim(&["--seconds", "2"]));
}
