//! Faults through the real binary, in real time: a port (a pseudo-terminal) unplugged and
//! replugged twenty times, a port that goes silent, signals at random moments. Part of
//! the real-time group (`cargo test --features realtime-tests --test 'realtime_*'`).

mod common;

use std::io::Write;
use std::process::{Command, Stdio};
use std::time::Duration;

use common::*;
use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64;
use serialport::SerialPort;

/// Far beyond what each step takes (a few short rows), so a loaded machine does not
/// fail it; a lost reconnect or sample (the fault) never arrives at all.
const EFFECT_LIMIT: Duration = Duration::from_secs(30);

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
        .args(["--every", "50ms", "--out", out.to_str().unwrap()])
        .stderr(Stdio::null());
    let child = KillOnDrop::new(spawn(&mut child));
    let header = wait_for_first_row(EFFECT_LIMIT, &out);
    let (samples, flags) = (column(&header, "samples"), column(&header, "flags"));
    for plug in 0..=REPLUGS {
        if plug > 0 {
            drop((master, slave));
            (master, slave) = pty_pair();
            repoint(&link, &slave);
            // Written only once its interval is over: what is sent next lands after it.
            wait_for_flagged(EFFECT_LIMIT, &out, flags, "reconnect", plug);
        }
        master
            .write_all(format!("# plug {plug}\n").as_bytes())
            .unwrap();
        write_lines(
            &mut master,
            (0..LINES).map(|i| 1000 + (plug * 7 + i) as u32 % 500),
        );
        // Unplugged only once the rows holding them are written, so the gap comes after.
        wait_for_samples(EFFECT_LIMIT, &out, samples, (plug + 1) * LINES);
    }
    signal(&child, "INT");
    assert!(wait(child.release(), Duration::from_secs(15)).success());
    let (_, rows) = rows(&out);
    assert_eq!(
        samples_in(&rows, samples),
        (REPLUGS + 1) * LINES,
        "every sample sent while plugged in is kept"
    );
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

// Source: the rules in docs/protocol.md ("Joining a stream": a port opened again learns
// the stream afresh) and docs/recording.md (a row whose interval refused input is flagged
// `rejected`). The values: worked example by hand, `hand_dbm` (1500 counts at 100 MHz
// read +11 dBm), on the first channel of the two.
#[test]
fn a_device_replugged_with_two_channels_is_learned_again_and_refused_lines_are_flagged() {
    const LINES: usize = 100;
    let limit = EFFECT_LIMIT;
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
    let header = wait_for_first_row(limit, &out);
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

/// The rows after the last that holds samples: the silence at the end so far.
fn silent_tail(rows: &[Vec<String>], samples: usize) -> &[Vec<String>] {
    let last = rows.iter().rposition(|r| r[samples] != "0");
    &rows[last.map_or(rows.len(), |i| i + 1)..]
}

#[test]
fn a_silent_port_gets_gap_rows_and_the_recorder_goes_on() {
    // The silence: five empty rows of 200 ms, each of which must be a gap.
    const SILENT_ROWS: usize = 5;
    let tmp = scratch("silent");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let out = dir.join("silent.csv");
    let (mut master, slave) = pty_pair();
    let mut child = bin();
    child
        .args(["record", "--port", &slave.name().unwrap()])
        .args(["--profile", profile.to_str().unwrap()])
        .args(["--every", "200ms", "--out", out.to_str().unwrap()])
        .stderr(Stdio::null());
    let child = KillOnDrop::new(spawn(&mut child));
    let header = wait_for_first_row(EFFECT_LIMIT, &out);
    let (samples, flags) = (column(&header, "samples"), column(&header, "flags"));
    let recorded = |want| wait_for_samples(EFFECT_LIMIT, &out, samples, want);
    master.write_all(b"# banner\n").unwrap();
    write_lines(&mut master, std::iter::repeat_n(1200, 100));
    let before_silence = recorded(100);
    wait_until(EFFECT_LIMIT, || match rows_so_far(&out).1 {
        rows if silent_tail(&rows, samples).len() >= SILENT_ROWS => Ok(()),
        rows => Err(format!("not {SILENT_ROWS} silent rows yet: {rows:?}")),
    });
    write_lines(&mut master, std::iter::repeat_n(1300, 100));
    recorded(200);
    signal(&child, "TERM");
    assert!(wait(child.release(), Duration::from_secs(10)).success());
    let (_, rows) = rows(&out);
    let between = &rows[before_silence..];
    let between = &between[..between.iter().position(|r| r[samples] != "0").unwrap()];
    assert!(between.len() >= SILENT_ROWS, "{rows:?}");
    let silent_rows: Vec<_> = rows.iter().filter(|r| r[samples] == "0").collect();
    assert!(
        silent_rows
            .iter()
            .all(|r| r[flags].split('|').any(|f| f == "gap")),
        "{rows:?}"
    );
    assert_eq!(
        samples_in(&rows, samples),
        200,
        "the samples after the silence are recorded too"
    );
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
    // Ten at a time, to keep the test short.
    for batch in runs.chunks(10) {
        let mut children: Vec<_> = batch
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
                (KillOnDrop::new(spawn(&mut child)), signal, delay_ms, out)
            })
            .collect();
        // The moments count from when every run of the batch is recording: before its
        // log and signal handlers exist a run has nothing to keep, and how long a loaded
        // machine takes to start it is no part of the test.
        for (_, _, _, out) in &children {
            wait_for_log_start(EFFECT_LIMIT, out);
        }
        let start = std::time::Instant::now();
        children.sort_by_key(|c| c.2);
        for (child, signal_name, delay_ms, out) in children {
            // The random moment is the test's input, not a wait for an effect.
            let due = Duration::from_millis(delay_ms);
            if let Some(left) = due.checked_sub(start.elapsed()) {
                std::thread::sleep(left);
            }
            signal(&child, signal_name);
            let what = format!("SIG{signal_name} {delay_ms} ms into the recording");
            assert!(
                wait(child.release(), Duration::from_secs(10)).success(),
                "{what}"
            );
            assert_valid_log(&out, &what);
        }
    }
}
