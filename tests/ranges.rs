//! Quantities on the command line are finite and within a physical range, checked when
//! they are parsed, and negative numbers reach the option's own message.
//!
//! Source of the rule: docs/reliability.md (bad input exits 2 with a message naming the
//! option and what it accepts). Source of the ranges: the limits stated in src/units.rs and
//! src/cli/source_args.rs; the level range's floor sits below the thermal noise floor of
//! -174 dBm in 1 Hz at room temperature (kTB; common practice, from memory).

mod common;

use common::*;

/// Runs the binary; its exit code and standard error.
fn run(args: &[&str]) -> (Option<i32>, String) {
    let mut command = bin();
    let out = output(command.args(args));
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn refused(args: &[&str], option: &str, range: &str) {
    let (code, said) = run(args);
    assert_eq!(code, Some(2), "{args:?}: {said}");
    assert!(said.contains(option), "{args:?} names {option}: {said}");
    assert!(
        said.contains(range),
        "{args:?} gives the range {range:?}: {said}"
    );
    assert!(!said.contains("panicked"), "{said}");
}

#[test]
fn huge_and_infinite_quantities_are_refused_with_their_range() {
    let record = ["record", "--demo", "--duration", "1s", "--out", "-"];
    let with = |extra: &[&'static str]| [&record[..], extra].concat();
    refused(
        &with(&["--offset", "1e308dB"]),
        "--offset",
        "-200 dB and +200 dB",
    );
    refused(&with(&["--freq", "1e300GHz"]), "--freq", "1 Hz to 1 THz");
    refused(
        &with(&["--rate", "1e300k"]),
        "--rate",
        "0.001 and 10M samples/s",
    );
    refused(
        &with(&["--rate", "1e-11"]),
        "--rate",
        "0.001 and 10M samples/s",
    );
    refused(&with(&["--every", "1e10s"]), "--every", "ten years");
    refused(&with(&["--every", "1e-10s"]), "--every", "1 ns");
    refused(
        &["record", "--demo", "--duration", "1e20s"],
        "--duration",
        "ten years",
    );
    refused(&["convert", "1e308dBm"], "1e308dBm", "+200 dBm");
    refused(&["convert", "1e-300W"], "1e-300W", "-200 dBm");
    refused(&["sim", "--seconds", "1e300"], "--seconds", "ten years");
}

#[test]
fn the_edges_of_each_range_are_accepted() {
    // Source: the stated ranges; their ends are inside.
    let (code, said) = run(&["convert", "200dBm"]);
    assert_eq!(code, Some(0), "{said}");
    let (code, said) = run(&["convert", "-200dBm"]);
    assert_eq!(code, Some(0), "{said}");
    let (code, said) = run(&["check", "profiles/demo-diode.toml", "--freq", "1000GHz"]);
    assert_ne!(
        code,
        Some(2),
        "1 THz parses (the profile may flag it): {said}"
    );
}

#[test]
fn an_interval_shorter_than_a_sample_is_refused() {
    refused(
        &["record", "--demo", "--every", "0.1ms", "--duration", "1s"],
        "--every 100us",
        "one sample at --rate 1000",
    );
    refused(
        &["record", "--port", "/dev/null", "--every", "0.5ms"],
        "--every 500us",
        "1 ms",
    );
    // One sample a row is still there, plainly, as --every 0.
    let (code, said) = run(&[
        "record",
        "--demo",
        "--fast",
        "--every",
        "0",
        "--duration",
        "10ms",
    ]);
    assert_eq!(code, Some(0), "{said}");
}

#[test]
fn negative_numbers_reach_the_options_own_message() {
    let fit = [
        "fit",
        "no-points.csv",
        "--model",
        "log",
        "--adc-bits",
        "12",
        "--freq",
        "10MHz",
        "--out",
        "x.toml",
    ];
    let (code, said) = run(&[&fit[..], &["--vref", "-1"]].concat());
    assert_eq!(code, Some(2), "{said}");
    assert!(!said.contains("unexpected argument"), "{said}");
    let (code, said) = run(&["sim", "--seconds", "-1"]);
    assert_eq!(code, Some(2));
    assert!(
        said.contains("--seconds") && said.contains("cannot be negative"),
        "{said}"
    );
    let (code, said) = run(&["record", "--demo", "--rate", "-5k"]);
    assert_eq!(code, Some(2));
    assert!(
        said.contains("--rate") && !said.contains("unexpected argument"),
        "{said}"
    );
    let (code, said) = run(&["calibrate", "--demo", "--average", "-3"]);
    assert_eq!(code, Some(2));
    assert!(
        said.contains("--average") && !said.contains("unexpected argument"),
        "{said}"
    );
}
