//! Where rows go: targets that cannot be synced, writers that must not replace a file,
//! and a standard error that cannot be written.
//!
//! Source of every expectation here: the rules in docs/reliability.md (an existing file is
//! never replaced without --force; bad input exits 2, a failure while running 1; nothing
//! panics) and the POSIX fsync(2) page, which lets a target that cannot be synced (a pipe,
//! a FIFO, a character device) refuse with EINVAL.

mod common;

use std::io::Read;
use std::process::Stdio;
use std::time::Duration;

use common::*;

fn demo_record(out: &str, extra: &[&str]) -> std::process::Output {
    let mut command = bin();
    command
        .args(["record", "--demo", "--fast", "--duration", "3s"])
        .args(["--out", out])
        .args(extra);
    output(&mut command)
}

#[test]
fn outputs_that_cannot_be_synced_take_the_whole_run() {
    let out = demo_record("/dev/null", &["--force"]);
    let said = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "/dev/null: {said}");
    assert!(said.contains("3 rows to /dev/null"), "{said}");

    let mut command = bin();
    command
        .args(["record", "--demo", "--fast", "--duration", "3s", "--force"])
        .args(["--out", "/dev/stdout"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    let piped = spawn(&mut command).wait_with_output().unwrap();
    assert!(
        piped.status.success(),
        "{}",
        String::from_utf8_lossy(&piped.stderr)
    );
    let text = String::from_utf8_lossy(&piped.stdout);
    assert_eq!(
        text.lines().filter(|l| l.starts_with("1.0")).count(),
        1,
        "{text}"
    );
}

#[test]
fn a_fifo_as_the_output_takes_every_row() {
    let dir = scratch("fifo-out");
    let pipe = fifo(&dir, "rows.fifo");
    let reader = {
        let pipe = pipe.clone();
        std::thread::spawn(move || {
            let mut text = String::new();
            std::fs::File::open(pipe)
                .unwrap()
                .read_to_string(&mut text)
                .unwrap();
            text
        })
    };
    let out = demo_record(pipe.to_str().unwrap(), &["--force"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = reader.join().unwrap();
    let data = text.lines().filter(|l| !l.starts_with('#')).count();
    assert_eq!(data, 1 + 3, "header and three rows: {text}");
}

#[test]
fn fit_can_write_its_profile_to_dev_null() {
    let dir = scratch("fit-null");
    let points = dir.join("points.csv");
    let mut csv = String::from("applied,counts\n");
    // Source: worked example by hand: a log detector of 25 counts per dB, -80 dBm at 0.
    for dbm in [-60, -45, -30, -15, 0] {
        csv.push_str(&format!("{dbm}dBm,{}\n", 25 * (dbm + 80)));
    }
    std::fs::write(&points, csv).unwrap();
    let mut command = bin();
    command.args(["fit", points.to_str().unwrap(), "--model", "log"]);
    command.args(["--adc-bits", "12", "--vref", "4.095", "--freq", "10MHz"]);
    command.args(["--out", "/dev/null", "--force"]);
    let out = output(&mut command);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn sim_refuses_to_replace_a_file_without_force() {
    let dir = scratch("sim-out");
    let path = dir.join("capture.txt");
    std::fs::write(&path, "keep me\n").unwrap();
    let sim = |extra: &[&str]| {
        let mut command = bin();
        command.args(["sim", "--seconds", "0.1", "--out", path.to_str().unwrap()]);
        output(command.args(extra))
    };
    let refused = sim(&[]);
    assert_eq!(refused.status.code(), Some(2));
    let said = String::from_utf8_lossy(&refused.stderr);
    assert!(
        said.contains("already exists") && said.contains("--force"),
        "{said}"
    );
    assert_eq!(std::fs::read_to_string(&path).unwrap(), "keep me\n");
    let replaced = sim(&["--force"]);
    assert!(replaced.status.success());
    // 0.1 s at the default 1000 samples/s.
    assert_eq!(std::fs::read_to_string(&path).unwrap().lines().count(), 100);
}

/// Runs the binary with its standard error on /dev/full, where every write fails.
fn with_full_stderr(args: &[&str]) -> std::process::ExitStatus {
    let full = std::fs::OpenOptions::new()
        .write(true)
        .open("/dev/full")
        .unwrap();
    let mut command = bin();
    command.args(args).stdout(Stdio::null()).stderr(full);
    wait(spawn(&mut command), Duration::from_secs(60))
}

#[test]
fn an_unwritable_standard_error_never_panics() {
    let dir = scratch("full-stderr");
    let log = dir.join("log.csv");
    let status = with_full_stderr(&["check", "no-such-profile.toml"]);
    assert_eq!(status.code(), Some(2), "check of a missing profile");
    let args = ["record", "--demo", "--fast", "--duration", "2s", "--out"];
    let status = with_full_stderr(&[&args[..], &[log.to_str().unwrap()]].concat());
    assert_eq!(
        status.code(),
        Some(0),
        "record, whose summary goes to stderr"
    );
    assert_eq!(rows(&log).1.len(), 2);
    let status = with_full_stderr(&["report", "no-such-log.csv"]);
    assert_eq!(status.code(), Some(2), "report of a missing log");
}
