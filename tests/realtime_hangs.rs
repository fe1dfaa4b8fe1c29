//! Sources that never end or block, and signals: every command ends soon after SIGINT,
//! SIGTERM or SIGHUP whatever its source is doing, and every sample received before the
//! signal is in the output. Part of the real-time group (`cargo test --features
//! realtime-tests --test 'realtime_*'`): it sends real signals, reads a pseudo-terminal and
//! paces a replay by the clock.
//!
//! Source of every expectation here: the rules in docs/reliability.md (a signal ends the
//! run cleanly with exit 0; nothing already received is lost). The deadlines only catch a
//! hang; the time a stop takes is measured by hand and recorded there.

mod common;

use std::io::Write;
use std::path::Path;
use std::process::Stdio;
use std::time::Duration;

use common::*;
use serialport::SerialPort;

/// Far beyond the 1 s a stop takes, so a loaded CI machine does not fail it; a hang (the
/// fault) never ends at all.
const STOP_LIMIT: Duration = Duration::from_secs(10);
const EFFECT_LIMIT: Duration = Duration::from_secs(20);

fn record_replay(path: &Path, out: &Path, every: &str, profile: &Path) -> KillOnDrop {
    let mut command = bin();
    command
        .args(["record", "--replay", path.to_str().unwrap()])
        .args(["--profile", profile.to_str().unwrap(), "--format", "ascii"])
        .args(["--every", every, "--out", out.to_str().unwrap()])
        .stderr(Stdio::null());
    KillOnDrop::new(spawn(&mut command))
}

fn total_samples(out: &Path) -> usize {
    let (header, rows) = rows(out);
    let samples = column(&header, "samples");
    rows.iter()
        .map(|r| r[samples].parse::<usize>().unwrap_or(0))
        .sum()
}

#[test]
fn a_silent_fifo_writer_gives_up_its_samples_and_every_signal_ends_the_replay() {
    let tmp = scratch("fifo-signals");
    let dir = tmp.path();
    let profile = write_profile(dir);
    for signal_name in ["INT", "TERM", "HUP"] {
        let pipe = fifo(dir, &format!("{signal_name}.fifo"));
        let out = dir.join(format!("{signal_name}.csv"));
        let child = record_replay(&pipe, &out, "0", &profile);
        // Opening blocks until the recorder opens its end; the writer then stays silent.
        let mut writer = std::fs::OpenOptions::new().write(true).open(&pipe).unwrap();
        let lines: String = (0..50).map(|i| format!("{}\n", 1000 + i)).collect();
        writer.write_all(lines.as_bytes()).unwrap();
        wait_for(EFFECT_LIMIT, "50 per-sample rows in the CSV", || {
            row_count(&out) >= 50
        });
        signal(&child, signal_name);
        let status = wait(child.release(), STOP_LIMIT);
        assert!(status.success(), "SIG{signal_name}: {status:?}");
        let (header, rows) = rows(&out);
        let counts = column(&header, "counts");
        let got: Vec<u32> = rows.iter().map(|r| r[counts].parse().unwrap()).collect();
        assert_eq!(got, (1000..1050).collect::<Vec<u32>>(), "SIG{signal_name}");
        drop(writer);
    }
}

#[test]
fn interval_rows_of_a_blocked_fifo_hold_every_sample_received_before_the_signal() {
    let tmp = scratch("fifo-intervals");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let pipe = fifo(dir, "capture.fifo");
    let out = dir.join("intervals.csv");
    // 10 ms rows at the default 1000 samples/s: 50 samples make five rows.
    let child = record_replay(&pipe, &out, "10ms", &profile);
    let mut writer = std::fs::OpenOptions::new().write(true).open(&pipe).unwrap();
    let lines: String = (0..50).map(|i| format!("{}\n", 1000 + i)).collect();
    writer.write_all(lines.as_bytes()).unwrap();
    wait_for(EFFECT_LIMIT, "four interval rows", || row_count(&out) >= 4);
    signal(&child, "INT");
    assert!(wait(child.release(), STOP_LIMIT).success());
    assert_eq!(total_samples(&out), 50);
    drop(writer);
}

#[test]
fn a_pseudo_terminal_given_to_replay_ends_on_a_signal_with_its_samples() {
    let tmp = scratch("pty-replay");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let (mut master, slave) = pty_pair();
    let out = dir.join("pty.csv");
    let child = record_replay(Path::new(&slave.name().unwrap()), &out, "0", &profile);
    write_lines(&mut master, 2000..2030);
    wait_for(EFFECT_LIMIT, "30 per-sample rows", || row_count(&out) >= 30);
    signal(&child, "TERM");
    assert!(wait(child.release(), STOP_LIMIT).success());
    let (_, rows) = rows(&out);
    assert_eq!(rows.len(), 30);
}

#[test]
fn an_endless_device_as_a_capture_ends_on_a_signal() {
    let tmp = scratch("dev-zero");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let out = dir.join("zero.csv");
    let child = record_replay(Path::new("/dev/zero"), &out, "1s", &profile);
    wait_for(EFFECT_LIMIT, "the log's context lines", || {
        std::fs::read_to_string(&out).is_ok_and(|t| t.contains("# source:"))
    });
    signal(&child, "INT");
    assert!(wait(child.release(), STOP_LIMIT).success());
}

#[test]
fn a_fast_simulator_without_a_duration_says_how_to_stop_and_stops_on_a_signal() {
    let tmp = scratch("fast-endless");
    let dir = tmp.path();
    for signal_name in ["INT", "TERM"] {
        let out = dir.join(format!("{signal_name}.csv"));
        let err = dir.join(format!("{signal_name}.err"));
        let mut command = bin();
        command
            .args(["record", "--demo", "--fast", "--every", "0"])
            .args(["--out", out.to_str().unwrap()])
            .stderr(std::fs::File::create(&err).unwrap());
        let child = KillOnDrop::new(spawn(&mut command));
        wait_for(EFFECT_LIMIT, "rows from the fast simulator", || {
            row_count(&out) > 1000
        });
        signal(&child, signal_name);
        assert!(
            wait(child.release(), STOP_LIMIT).success(),
            "SIG{signal_name}"
        );
        let said = std::fs::read_to_string(&err).unwrap();
        assert!(said.contains("Ctrl-C"), "{said}");
        // Every row is whole: the last one too.
        let (header, rows) = rows(&out);
        assert!(rows.iter().all(|r| r.len() == header.len()));
        let size = std::fs::metadata(&out).unwrap().len();
        assert!(
            size < 1 << 30,
            "stopped long before a gigabyte: {size} bytes"
        );
    }
}

#[test]
fn a_signal_during_a_slow_paced_replay_writes_no_rows_for_time_that_did_not_pass() {
    let tmp = scratch("slow-paced");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let capture = dir.join("slow.txt");
    std::fs::write(&capture, "1000\n1001\n1002\n").unwrap();
    let out = dir.join("slow.csv");
    let mut command = bin();
    // One sample every 100 s: the second is due long after the signal.
    command
        .args([
            "record",
            "--replay",
            capture.to_str().unwrap(),
            "--realtime",
        ])
        .args(["--rate", "0.01", "--every", "100s"])
        .args(["--profile", profile.to_str().unwrap()])
        .args(["--out", out.to_str().unwrap()])
        .stderr(Stdio::null());
    let child = KillOnDrop::new(spawn(&mut command));
    wait_for(EFFECT_LIMIT, "the log's context lines", || {
        std::fs::read_to_string(&out).is_ok_and(|t| t.contains("# source:"))
    });
    signal(&child, "INT");
    assert!(wait(child.release(), STOP_LIMIT).success());
    let (header, rows) = rows(&out);
    let time = column(&header, "time_s");
    let last: f64 = rows.last().map_or(0.0, |r| r[time].parse().unwrap());
    // Rows end where the clock was (a second or so in): one row, from 0 s, not a second
    // one at 100 s, a sample period past the last sample.
    assert_eq!(rows.len(), 1, "{rows:?}");
    assert_eq!(last, 0.0);
    assert_eq!(total_samples(&out), 1, "{rows:?}");
}
