//! Live sources and recording end to end, through the real binary, in real time: a
//! pseudo-terminal as the serial port, an unplug and replug, a signal mid-interval, and
//! the simulator over a pseudo-terminal. Part of the real-time group
//! (`cargo test --features realtime-tests --test 'realtime_*'`).

mod common;

use std::io::Write;
use std::process::Stdio;
use std::time::Duration;

use common::*;
use serialport::SerialPort;

/// Far beyond what each step takes (a row or two), so a loaded machine does not fail it;
/// a lost sample or reconnect (the fault) never arrives at all.
const EFFECT_LIMIT: Duration = Duration::from_secs(30);

#[test]
fn pty_to_csv_keeps_every_sample_and_its_value() {
    let tmp = scratch("pty");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let out = dir.join("pty.csv");
    let (mut master, slave) = pty_pair();
    let path = slave.name().unwrap();
    let child = &mut bin();
    child
        .args([
            "record",
            "--port",
            &path,
            "--profile",
            profile.to_str().unwrap(),
            "--freq",
            "100MHz",
        ])
        .args(["--every", "0", "--out", out.to_str().unwrap()])
        .stderr(Stdio::null());
    let child = KillOnDrop::new(spawn(child));
    wait_for_log_start(EFFECT_LIMIT, &out);
    // The first line after the port opens is skipped (it may be cut), so a banner goes first.
    master.write_all(b"# bench board\n").unwrap();
    let sent: Vec<u32> = (0..1000).map(|i| 600 + (i * 7) % 1300).collect();
    write_lines(&mut master, sent.iter().copied());
    wait_for(EFFECT_LIMIT, "a row for each of the 1000 samples", || {
        row_count(&out) >= sent.len()
    });
    signal(&child, "INT");
    assert!(wait(child.release(), Duration::from_secs(10)).success());
    drop(slave);
    let (header, rows) = rows(&out);
    let (counts_col, dbm_col) = (column(&header, "counts"), column(&header, "dbm"));
    let got: Vec<u32> = rows
        .iter()
        .map(|r| r[counts_col].parse().unwrap())
        .collect();
    assert_eq!(got, sent);
    for row in &rows {
        let counts: f64 = row[counts_col].parse().unwrap();
        let dbm: f64 = row[dbm_col].parse().unwrap();
        // Recorded to 4 decimals; one count is 0.04 dB.
        assert!((dbm - hand_dbm(counts)).abs() < 1e-4, "{row:?}");
    }
}

#[test]
fn unplug_and_replug_marks_the_gap_and_loses_no_row() {
    let tmp = scratch("unplug");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let out = dir.join("unplug.csv");
    let link = dir.join("port");
    let (mut master, slave) = pty_pair();
    repoint(&link, &slave);
    let child = &mut bin();
    child
        .args([
            "record",
            "--port",
            link.to_str().unwrap(),
            "--profile",
            profile.to_str().unwrap(),
        ])
        .args(["--every", "250ms", "--out", out.to_str().unwrap()])
        .stderr(Stdio::null());
    let child = KillOnDrop::new(spawn(child));
    let header = wait_for_first_row(EFFECT_LIMIT, &out);
    let (samples, flags, mean) = (
        column(&header, "samples"),
        column(&header, "flags"),
        column(&header, "mean_dbm"),
    );
    let recorded = |want| wait_for_samples(EFFECT_LIMIT, &out, samples, want);
    master.write_all(b"# first plug\n").unwrap();
    write_lines(&mut master, std::iter::repeat_n(1000, 400));
    recorded(400);
    drop(master);
    drop(slave);
    // Unplugged until a gap row is written, so the reconnect falls in a row of its own.
    wait_until(EFFECT_LIMIT, || {
        let rows = rows_so_far(&out).1;
        let last = rows.iter().rposition(|r| r[samples] != "0").unwrap_or(0);
        match flagged(&rows[last + 1..], flags, "gap") {
            0 => Err(format!("no gap row after the unplug: {rows:?}")),
            _ => Ok(()),
        }
    });
    let (mut master, slave) = pty_pair();
    repoint(&link, &slave);
    wait_for_flagged(EFFECT_LIMIT, &out, flags, "reconnect", 1);
    master.write_all(b"# second plug\n").unwrap();
    write_lines(&mut master, std::iter::repeat_n(1500, 300));
    recorded(700);
    signal(&child, "INT");
    assert!(wait(child.release(), Duration::from_secs(15)).success());
    drop(slave);
    let (_, rows) = rows(&out);
    assert_eq!(
        samples_in(&rows, samples),
        700,
        "every sample before and after the gap is kept: {rows:?}"
    );
    assert!(flagged(&rows, flags, "gap") >= 2, "{rows:?}");
    assert_eq!(flagged(&rows, flags, "reconnect"), 1, "{rows:?}");
    let means: Vec<f64> = rows.iter().filter_map(|r| r[mean].parse().ok()).collect();
    assert!(means
        .iter()
        .any(|m| (m - hand_dbm(1000.0) + 1.0).abs() < 1e-3));
    assert!(means
        .iter()
        .any(|m| (m - hand_dbm(1500.0) + 1.0).abs() < 1e-3));
}

#[test]
fn sigint_mid_interval_leaves_a_valid_csv_with_the_partial_row() {
    let tmp = scratch("sigint");
    let dir = tmp.path();
    let out = dir.join("soak.csv");
    let child = &mut bin();
    child
        .args([
            "record",
            "--demo",
            "soak",
            "--every",
            "10s",
            "--out",
            out.to_str().unwrap(),
        ])
        .args(["--metrics", "0"])
        .stderr(Stdio::piped());
    let mut child = spawn(child);
    let addr = address_said(&mut child, "metrics at http://", "/metrics");
    let child = KillOnDrop::new(child);
    // The signal comes once over a thousand samples are in, by the recorder's own count
    // (its metrics), part-way through the 10 s interval.
    wait_until(EFFECT_LIMIT, || {
        let (_, _, body) = http_get(&addr, "/metrics", None)?;
        let samples: f64 = body
            .lines()
            .find_map(|l| l.strip_prefix("dbtrail_link_samples_total{"))
            .and_then(|l| l.rsplit(' ').next()?.parse().ok())
            .ok_or("no sample count yet")?;
        if samples >= 1100.0 {
            Ok(())
        } else {
            Err(format!("{samples} samples so far"))
        }
    });
    signal(&child, "INT");
    assert!(wait(child.release(), Duration::from_secs(10)).success());
    let (header, rows) = rows(&out);
    assert_eq!(rows.len(), 1, "{rows:?}");
    let samples: u64 = rows[0][column(&header, "samples")].parse().unwrap();
    assert!(
        (1000..=3500).contains(&samples),
        "{samples} samples in the partial interval"
    );
    let mean: f64 = rows[0][column(&header, "mean_dbm")].parse().unwrap();
    // Source: the soak scenario's own story — about +29.2 dBm in its first seconds.
    assert!((mean - 29.2).abs() < 0.3, "{mean}");
}

/// Three seconds of the soak scenario, seed 5: to a file, and the same over a pty.
const SIM_SOAK_3S: [&str; 7] = ["sim", "--scenario", "soak", "--seconds", "3", "--seed", "5"];

#[test]
fn the_simulator_over_a_pty_arrives_sample_for_sample() {
    use std::io::BufRead;
    let tmp = scratch("simpty");
    let dir = tmp.path();
    let reference = dir.join("reference.txt");
    let made = bin()
        .args(SIM_SOAK_3S)
        .args(["--out", reference.to_str().unwrap()])
        .status()
        .unwrap();
    assert!(made.success());
    let sent: Vec<u32> = std::fs::read_to_string(&reference)
        .unwrap()
        .lines()
        // The detector's channel; the demo board's thermistor follows as channel 2.
        .map(|l| l.split(',').next().unwrap().parse().unwrap())
        .collect();
    assert_eq!(sent.len(), 3000);

    let sim = &mut bin();
    sim.args(SIM_SOAK_3S).arg("--pty").stdout(Stdio::piped());
    let mut sim = spawn(sim);
    let mut path = String::new();
    std::io::BufReader::new(sim.stdout.take().unwrap())
        .read_line(&mut path)
        .unwrap();
    let out = dir.join("simpty.csv");
    let record = &mut bin();
    record
        .args([
            "record",
            "--port",
            path.trim(),
            "--every",
            "0",
            "--duration",
            "4s",
            "--out",
            out.to_str().unwrap(),
        ])
        .args(["--profile", "profiles/demo-diode.toml", "--freq", "146MHz"])
        .stderr(Stdio::null());
    let record = spawn(record);
    assert!(wait(record, Duration::from_secs(15)).success());
    assert!(wait(sim, Duration::from_secs(5)).success());

    let (header, rows) = rows(&out);
    let counts_col = column(&header, "counts");
    let got: Vec<u32> = rows
        .iter()
        .filter_map(|r| r[counts_col].parse().ok())
        .collect();
    // Only the first line (perhaps cut when the port opened) may be missing.
    assert!(
        got.len() >= sent.len() - 1,
        "{} of {} samples arrived",
        got.len(),
        sent.len()
    );
    let start = sent.len() - got.len();
    assert_eq!(
        got,
        sent[start..],
        "the recorded counts are the simulator's, in order"
    );
    let flags = column(&header, "flags");
    assert!(
        rows.last().unwrap()[flags].contains("gap"),
        "the end of the stream is marked"
    );
}
