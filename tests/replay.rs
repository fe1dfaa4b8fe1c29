//! Captures replayed through the real binary, as fast as they can be read: the profile's
//! maths done by hand on each row, and two channels with their suffixed columns and
//! `--append`.

mod common;

use std::process::Stdio;
use std::time::Duration;

use common::*;

#[test]
fn replayed_capture_matches_the_profile_maths_by_hand() {
    let tmp = scratch("replay");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let capture = dir.join("capture.txt");
    let counts: Vec<u32> = (0..40).map(|i| 700 + 31 * i).collect();
    let text: String = counts.iter().map(|c| format!("{c}\r\n")).collect();
    std::fs::write(&capture, text).unwrap();
    let out = dir.join("replay.csv");
    let status = &mut bin();
    status
        .args([
            "record",
            "--replay",
            capture.to_str().unwrap(),
            "--profile",
            profile.to_str().unwrap(),
        ])
        .args([
            "--freq",
            "100MHz",
            "--rate",
            "10",
            "--every",
            "1s",
            "--out",
            out.to_str().unwrap(),
        ])
        .stderr(Stdio::null());
    let status = wait(spawn(status), Duration::from_secs(20));
    assert!(status.success());
    let (header, rows) = rows(&out);
    assert_eq!(rows.len(), 4);
    let (mean, min, max) = (
        column(&header, "mean_dbm"),
        column(&header, "min_dbm"),
        column(&header, "max_dbm"),
    );
    for (row, chunk) in rows.iter().zip(counts.chunks(10)) {
        // Source: common practice — the mean of a set of levels is taken over watts.
        let watts: f64 = chunk
            .iter()
            .map(|&c| 10f64.powf(hand_dbm(f64::from(c)) / 10.0))
            .sum::<f64>()
            / 10.0;
        let want = 10.0 * watts.log10();
        assert!(
            (row[mean].parse::<f64>().unwrap() - want).abs() < 1e-4,
            "{row:?} vs {want}"
        );
        assert!((row[min].parse::<f64>().unwrap() - hand_dbm(f64::from(chunk[0]))).abs() < 1e-4);
        assert!((row[max].parse::<f64>().unwrap() - hand_dbm(f64::from(chunk[9]))).abs() < 1e-4);
    }
}

#[test]
fn two_channel_capture_gets_suffixed_columns_and_append_adds_rows() {
    let tmp = scratch("channels");
    let dir = tmp.path();
    let profile = write_profile(dir);
    let capture = dir.join("two.txt");
    std::fs::write(&capture, "1000,1500\n1000,1500\n").unwrap();
    let out = dir.join("two.csv");
    let run = |extra: &[&str]| {
        let cmd = &mut bin();
        cmd.args([
            "record",
            "--replay",
            capture.to_str().unwrap(),
            "--profile",
            profile.to_str().unwrap(),
        ])
        .args(["--every", "0", "--out", out.to_str().unwrap()])
        .args(extra);
        output(cmd)
    };
    assert!(run(&[]).status.success());
    let (header, rows) = rows(&out);
    assert_eq!(
        header,
        [
            "time_s",
            "counts",
            "volts",
            "dbm",
            "flags",
            "bound",
            "u_db",
            "counts_ch2",
            "volts_ch2",
            "dbm_ch2",
            "flags_ch2",
            "bound_ch2",
            "u_db_ch2"
        ]
    );
    // Source: worked example by hand at the reference frequency (no correction): 1000 counts
    // → 40 − 80 + 30 = −10 dBm; 1500 counts → +10 dBm.
    assert_eq!(rows[0][3], "-10.0000");
    assert_eq!(rows[0][9], "10.0000");
    assert!(run(&["--append"]).status.success());
    let (_, rows) = self::rows(&out);
    assert_eq!(rows.len(), 4);
    let text = std::fs::read_to_string(&out).unwrap();
    assert_eq!(text.matches("time_s,").count(), 1, "one header row");
    assert!(text.contains("# resumed"));
}
