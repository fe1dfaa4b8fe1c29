//! `record --coupler` from a live port: a coupler board's two-channel lines written to a
//! pseudo-terminal come out as the same per-sample rows as the same lines replayed from a
//! file, and each row's return loss is the ratio of its own arms' powers. Part of the
//! real-time group (`cargo test --features realtime-tests --test 'realtime_*'`).

mod common;

use std::io::Write;
use std::process::Stdio;
use std::time::Duration;

use common::{
    bin, column, pty_pair, row_count, rows, scratch, signal, spawn, succeeded, wait, wait_for,
    wait_for_log_start, write_lines, KillOnDrop,
};
use serialport::SerialPort;

const SET_UP: &str = "profiles/demo-coupler.toml";
const EFFECT_LIMIT: Duration = Duration::from_secs(30);

/// The board's lines: forward codes across the diode arm's middle, reflected codes in the
/// log-amp arm's upper part, so that about half the rows have a match that is a value and
/// the rest each kind of bound (at least, at most, below the directivity, unknown).
fn lines() -> Vec<String> {
    (0..600u32)
        .map(|i| format!("{},{}", 1800 + (i * 37) % 1500, 2500 + (i * 53) % 500))
        .collect()
}

/// The cells of a per-sample row but its time.
fn without_time(header: &[String], row: &[String]) -> Vec<String> {
    let time = column(header, "time_s");
    row.iter()
        .enumerate()
        .filter(|(i, _)| *i != time)
        .map(|(_, c)| c.clone())
        .collect()
}

// Source: the program's two ways in for one stream (a live port and --replay of the same
// lines, docs/protocol.md) must give the same rows; and the return loss is
// 10·log10(P_forward / P_reflected), the definition (common practice): the row's own
// fwd_dbm less its ref_dbm (each to 4 decimals, so to 1.5e-4 dB).
#[test]
fn a_coupler_board_on_a_port_gives_the_rows_its_replay_gives() {
    let tmp = scratch("coupler-pty");
    let dir = tmp.path();
    let (port_out, replay_out) = (dir.join("port.csv"), dir.join("replay.csv"));
    let (mut master, slave) = pty_pair();
    let path = slave.name().unwrap();
    let recorder = &mut bin();
    recorder
        .args([
            "record",
            "--port",
            &path,
            "--coupler",
            SET_UP,
            "--freq",
            "146MHz",
        ])
        .args(["--every", "0", "--out", port_out.to_str().unwrap()])
        .stderr(Stdio::null());
    let recorder = KillOnDrop::new(spawn(recorder));
    wait_for_log_start(EFFECT_LIMIT, &port_out);
    // The first line after the port opens is skipped (it may be cut), so a banner goes first.
    master.write_all(b"# coupler board\n").unwrap();
    let sent = lines();
    write_lines(&mut master, sent.iter());
    wait_for(EFFECT_LIMIT, "a row for each of the 600 frames", || {
        row_count(&port_out) >= sent.len()
    });
    signal(&recorder, "INT");
    assert!(wait(recorder.release(), Duration::from_secs(10)).success());
    drop(slave);

    let capture = dir.join("capture.txt");
    std::fs::write(&capture, sent.join("\n") + "\n").unwrap();
    succeeded([
        "record",
        "--replay",
        capture.to_str().unwrap(),
        "--rate",
        "1000",
        "--coupler",
        SET_UP,
        "--freq",
        "146MHz",
        "--every",
        "0",
        "--out",
        replay_out.to_str().unwrap(),
    ]);

    let (header, from_port) = rows(&port_out);
    let (replay_header, from_replay) = rows(&replay_out);
    assert_eq!(header, replay_header);
    assert_eq!(from_port.len(), sent.len());
    for (port, replay) in from_port.iter().zip(&from_replay) {
        assert_eq!(without_time(&header, port), without_time(&header, replay));
    }
    let col = |name: &str| column(&header, name);
    let number = |cell: &str| cell.parse::<f64>().ok();
    let mut values = 0;
    for row in &from_port {
        let (Some(fwd), Some(refl), Some(rl)) = (
            number(&row[col("fwd_dbm")]),
            number(&row[col("ref_dbm")]),
            number(&row[col("return_loss_db")]),
        ) else {
            continue;
        };
        if !row[col("match")].is_empty() {
            continue;
        }
        values += 1;
        let expected = fwd - refl;
        assert!(
            (rl - expected).abs() < 1.5e-4,
            "{rl} against {expected}: {row:?}"
        );
    }
    let marks = col("match");
    for kind in [
        "rl-at-least",
        "rl-at-most",
        "below-directivity",
        "match-unknown",
    ] {
        let seen = from_port.iter().filter(|r| r[marks] == kind).count();
        assert!(seen > 0, "no row marked {kind}");
    }
    assert!(
        values > 200,
        "only {values} rows with a match that is a value"
    );
}
