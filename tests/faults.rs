//! Faults through the real binary: a port unplugged and replugged twenty times, a port
//! that goes silent, signals at random moments, outputs that cannot be written.

mod common;

use std::io::Write;
use std::process::{Command, Stdio};
use std::time::Duration;

use common::*;
use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64;
use serialport::SerialPort;

fn flagged(rows: &[Vec<String>], flags: usize, word: &str) -> usize {
    rows.iter()
        .filter(|r| r[flags].split('|').any(|f| f == word))
        .count()
}

#[test]
fn twenty_unplugs_give_twenty_reconnects_every_gap_marked_and_no_row_lost() {
    const REPLUGS: usize = 20;
    const LINES: usize = 100;
    let tmp = scratch("replug20");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let out = dir.join("replug.csv");
    let link = dir.join("port");
    let (mut master, mut slave) = pty_pair();
    repoint(&link, &slave);
    let mut child = bin();
    child
        .args(["record", "--port", link.to_str().unwrap()])
        .args(["--profile", profile.to_str().unwrap()])
        .args(["--every", "250ms", "--out", out.to_str().unwrap()])
        .stderr(Stdio::null());
    let child = spawn(&mut child);
    for plug in 0..=REPLUGS {
        // Long enough for the reader's backoff (0.1 s, then 0.2 s, 0.4 s) to find the port.
        std::thread::sleep(Duration::from_millis(750));
        master
            .write_all(format!("# plug {plug}\n").as_bytes())
            .unwrap();
        write_lines(
            &mut master,
            (0..LINES).map(|i| 1000 + (plug * 7 + i) as u32 % 500),
        );
        std::thread::sleep(Duration::from_millis(300));
        if plug < REPLUGS {
            drop((master, slave));
            std::thread::sleep(Duration::from_millis(250));
            (master, slave) = pty_pair();
            repoint(&link, &slave);
        }
    }
    let stop = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(stop.success());
    assert!(wait(child, Duration::from_secs(15)).success());
    let (header, rows) = rows(&out);
    let samples = column(&header, "samples");
    let total: usize = rows
        .iter()
        .map(|r| r[samples].parse::<usize>().unwrap())
        .sum();
    assert_eq!(
        total,
        (REPLUGS + 1) * LINES,
        "every sample sent while plugged in is kept"
    );
    let flags = column(&header, "flags");
    assert_eq!(flagged(&rows, flags, "reconnect"), REPLUGS, "{rows:?}");
    assert!(flagged(&rows, flags, "gap") >= REPLUGS, "{rows:?}");
    // Each unplugged spell is its own run of gap rows between rows of samples.
    let gap_runs = rows
        .iter()
        .map(|r| r[flags].split('|').any(|f| f == "gap"))
        .collect::<Vec<_>>()
        .windows(2)
        .filter(|w| !w[0] && w[1])
        .count();
    assert!(gap_runs >= REPLUGS, "{gap_runs} gap runs: {rows:?}");
}

fn samples_in(rows: &[Vec<String>], samples: usize) -> usize {
    rows.iter()
        .map(|r| r[samples].parse::<usize>().unwrap())
        .sum()
}

// Source: the rules in docs/protocol.md ("Joining a stream": a port opened again learns
// the stream afresh) and docs/recording.md (a row whose interval refused input is flagged
// `rejected`). The values: worked example by hand, `hand_dbm` (1500 counts at 100 MHz
// read +11 dBm), on the first channel of the two.
#[test]
fn a_device_replugged_with_two_channels_is_learned_again_and_refused_lines_are_flagged() {
    const LINES: usize = 100;
    let limit = Duration::from_secs(20);
    let tmp = scratch("relearn");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let out = dir.join("relearn.csv");
    let link = dir.join("port");
    let (mut master, slave) = pty_pair();
    repoint(&link, &slave);
    let mut child = bin();
    child
        .args(["record", "--port", link.to_str().unwrap()])
        .args(["--profile", profile.to_str().unwrap(), "--freq", "100MHz"])
        .args(["--every", "250ms", "--out", out.to_str().unwrap()])
        .stderr(Stdio::null());
    let child = KillOnDrop::new(spawn(&mut child));
    // A row is written only once the port is open.
    let header = wait_until(limit, || match rows_so_far(&out) {
        (header, rows) if !rows.is_empty() => Ok(header),
        _ => Err("no row yet".to_string()),
    });
    let (samples, flags) = (column(&header, "samples"), column(&header, "flags"));
    let so_far = || rows_so_far(&out).1;
    master.write_all(b"# one channel\n").unwrap();
    write_lines(&mut master, std::iter::repeat_n(1500, LINES));
    write_lines(&mut master, ["12a", "1,,2", "-5"].into_iter());
    wait_until(limit, || {
        let rows = so_far();
        if flagged(&rows, flags, "rejected") > 0 && samples_in(&rows, samples) == LINES {
            Ok(())
        } else {
            Err(format!(
                "one-channel samples and a `rejected` row: {rows:?}"
            ))
        }
    });
    drop((master, slave));
    let (mut master, slave) = pty_pair();
    repoint(&link, &slave);
    let reconnected = |rows: &[Vec<String>]| {
        rows.iter()
            .position(|r| r[flags].split('|').any(|f| f == "reconnect"))
    };
    let back = wait_until(limit, || {
        let rows = so_far();
        reconnected(&rows).ok_or(format!("no reconnect yet: {rows:?}"))
    });
    // The first line after joining is skipped as perhaps cut: a banner loses nothing.
    master.write_all(b"# two channels now\n").unwrap();
    write_lines(&mut master, std::iter::repeat_n("1500,1200", LINES));
    wait_until(limit, || {
        let rows = so_far();
        match samples_in(&rows[back..], samples) {
            LINES => Ok(()),
            n => Err(format!(
                "{n} of {LINES} two-channel samples recorded: {rows:?}"
            )),
        }
    });
    Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(wait(child.release(), Duration::from_secs(15)).success());
    let (_, rows) = common::rows(&out);
    let mean = column(&header, "mean_dbm");
    assert_eq!(flagged(&rows, flags, "reconnect"), 1, "{rows:?}");
    assert_eq!(samples_in(&rows[back..], samples), LINES, "{rows:?}");
    assert_eq!(
        flagged(&rows[back..], flags, "rejected"),
        0,
        "the second device's lines are all good: {rows:?}"
    );
    let want = format!("{:.4}", hand_dbm(1500.0));
    for row in rows.iter().filter(|r| r[samples] != "0") {
        assert_eq!(row[mean], want, "{row:?}");
    }
    drop(slave);
}

#[test]
fn a_silent_port_gets_gap_rows_and_the_recorder_goes_on() {
    let tmp = scratch("silent");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let out = dir.join("silent.csv");
    let (mut master, slave) = pty_pair();
    let mut child = bin();
    child
        .args(["record", "--port", &slave.name().unwrap()])
        .args(["--profile", profile.to_str().unwrap()])
        .args(["--every", "500ms", "--out", out.to_str().unwrap()])
        .stderr(Stdio::null());
    let child = spawn(&mut child);
    std::thread::sleep(Duration::from_millis(500));
    master.write_all(b"# banner\n").unwrap();
    write_lines(&mut master, std::iter::repeat_n(1200, 100));
    std::thread::sleep(Duration::from_secs(3));
    write_lines(&mut master, std::iter::repeat_n(1300, 100));
    std::thread::sleep(Duration::from_millis(600));
    Command::new("kill")
        .args(["-TERM", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(wait(child, Duration::from_secs(10)).success());
    let (header, rows) = rows(&out);
    let (samples, flags) = (column(&header, "samples"), column(&header, "flags"));
    let silent_rows: Vec<_> = rows.iter().filter(|r| r[samples] == "0").collect();
    // Three seconds of silence at two rows a second: at least five empty rows, each a gap.
    assert!(silent_rows.len() >= 5, "{rows:?}");
    assert!(
        silent_rows
            .iter()
            .all(|r| r[flags].split('|').any(|f| f == "gap")),
        "{rows:?}"
    );
    let total: u64 = rows
        .iter()
        .map(|r| r[samples].parse::<u64>().unwrap())
        .sum();
    assert_eq!(total, 200, "the samples after the silence are recorded too");
    drop(slave);
}

/// Every data row has the header's columns and numbers where numbers belong, and the file
/// ends with a complete line.
fn assert_valid_log(path: &std::path::Path, what: &str) {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(text.ends_with('\n'), "{what}: last line cut: {text:?}");
    let (header, rows) = rows(path);
    assert!(header.len() >= 5, "{what}: {header:?}");
    let numeric = ["time_s", "samples"].map(|name| column(&header, name));
    for row in &rows {
        assert_eq!(row.len(), header.len(), "{what}: {row:?}");
        for &c in &numeric {
            assert!(row[c].parse::<f64>().is_ok(), "{what}: {row:?}");
        }
    }
}

#[test]
fn signals_at_twenty_random_moments_each_leave_a_valid_log() {
    let tmp = scratch("signals");
    let dir = tmp.path();
    let mut rng = Pcg64::seed_from_u64(20261202);
    let runs: Vec<(usize, &str, u64)> = (0..20)
        .map(|i| {
            (
                i,
                ["INT", "TERM", "HUP"][i % 3],
                rng.random_range(100..1500),
            )
        })
        .collect();
    // Four at a time, to keep the test short.
    for batch in runs.chunks(4) {
        let children: Vec<_> = batch
            .iter()
            .map(|&(i, signal, delay_ms)| {
                let out = dir.join(format!("run{i}.csv"));
                let mut child = bin();
                child
                    .args([
                        "record", "--demo", "soak", "--rate", "2k", "--every", "100ms",
                    ])
                    .args(["--duration", "20s"])
                    .args(["--out", out.to_str().unwrap()])
                    .stderr(Stdio::null());
                (spawn(&mut child), signal, delay_ms, out)
            })
            .collect();
        let start = std::time::Instant::now();
        let mut children = children;
        children.sort_by_key(|c| c.2);
        for (child, signal, delay_ms, out) in children {
            let due = Duration::from_millis(delay_ms);
            if let Some(left) = due.checked_sub(start.elapsed()) {
                std::thread::sleep(left);
            }
            let sent = Command::new("kill")
                .args([&format!("-{signal}"), &child.id().to_string()])
                .status()
                .unwrap();
            assert!(sent.success());
            let what = format!("SIG{signal} after {delay_ms} ms");
            assert!(wait(child, Duration::from_secs(10)).success(), "{what}");
            assert_valid_log(&out, &what);
        }
    }
}

#[test]
fn unwritable_outputs_fail_with_exit_1_and_a_clear_message() {
    let tmp = scratch("unwritable");
    let dir = tmp.path();
    let cases = [
        ("/dev/full".to_string(), 1, "cannot write to /dev/full"),
        (
            dir.join("no/such/dir/out.csv").display().to_string(),
            1,
            "no/such/dir/out.csv",
        ),
    ];
    for (path, code, want) in cases {
        let out = output(
            bin()
                .args(["record", "--demo", "--fast", "--duration", "30s", "--force"])
                .args(["--out", &path]),
        );
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(code), "{path}: {stderr}");
        assert!(stderr.contains(want), "{path}: `{stderr}` lacks `{want}`");
    }
}
