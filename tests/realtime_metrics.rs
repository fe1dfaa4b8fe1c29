//! `record --metrics` serving while it runs: scraped over HTTP by hand (a plain TCP
//! client), the power it serves is one of the rows the same run writes to its CSV.

mod common;

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::process::Stdio;
use std::time::Duration;

use common::{bin, rows, scratch, signal, spawn, wait, wait_until, KillOnDrop};

/// A GET of `path` with `accept`: the status line, the headers and the body.
fn get(addr: &str, path: &str, accept: &str) -> Result<(String, String, String), String> {
    let mut stream = TcpStream::connect(addr).map_err(|e| e.to_string())?;
    stream
        .set_read_timeout(Some(Duration::from_secs(5)))
        .map_err(|e| e.to_string())?;
    let request = format!(
        "GET {path} HTTP/1.1\r\nHost: {addr}\r\nAccept: {accept}\r\nConnection: close\r\n\r\n"
    );
    stream
        .write_all(request.as_bytes())
        .map_err(|e| e.to_string())?;
    let mut response = String::new();
    stream
        .read_to_string(&mut response)
        .map_err(|e| e.to_string())?;
    let (head, body) = response.split_once("\r\n\r\n").ok_or("no header end")?;
    let (status, headers) = head.split_once("\r\n").unwrap_or((head, ""));
    Ok((status.to_string(), headers.to_lowercase(), body.to_string()))
}

// Source: the rules of the issue and docs/lab.md: OpenMetrics with its content type and
// `# EOF` when asked for; 404 for another path, 405 for another method; the power served
// is the last interval row written (mean_dbm, to the row's 4 decimals).
#[test]
fn the_served_power_is_a_row_of_the_same_run() {
    let dir = scratch("metrics-live");
    let log = dir.path().join("live.csv");
    let mut command = bin();
    command
        .args([
            "record",
            "--demo",
            "soak",
            "--every",
            "1s",
            "--duration",
            "20s",
        ])
        .args(["--metrics", "0", "--station", "bench-7", "--out"])
        .arg(&log)
        .stderr(Stdio::piped());
    let mut child = spawn(&mut command);
    let mut said = BufReader::new(child.stderr.take().unwrap());
    let mut first = String::new();
    said.read_line(&mut first).unwrap();
    let addr = first
        .trim()
        .strip_prefix("dbtrail: metrics at http://")
        .and_then(|rest| rest.strip_suffix("/metrics"))
        .unwrap_or_else(|| panic!("{first}"))
        .to_string();
    // Keep reading what it says, so that its standard error never fills.
    std::thread::spawn(move || std::io::copy(&mut said, &mut std::io::sink()));
    let child = KillOnDrop::new(child);
    let accept = "application/openmetrics-text; version=1.0.0";
    let (status, headers, body) = wait_until(Duration::from_secs(15), || {
        let got = get(&addr, "/metrics", accept)?;
        if got.2.contains("dbtrail_power_dbm{") {
            Ok(got)
        } else {
            Err(format!("no power yet: {}", got.2))
        }
    });
    assert!(status.contains("200"), "{status}");
    assert!(
        headers.contains("content-type: application/openmetrics-text; version=1.0.0"),
        "{headers}"
    );
    assert!(body.ends_with("# EOF\n"), "{body}");
    assert!(body.contains("station=\"bench-7\""), "{body}");
    let served: f64 = body
        .lines()
        .find(|l| l.starts_with("dbtrail_power_dbm{"))
        .and_then(|l| l.rsplit(' ').next())
        .and_then(|v| v.parse().ok())
        .unwrap();
    assert!(get(&addr, "/other", accept).unwrap().0.contains("404"));
    let mut stream = TcpStream::connect(&addr).unwrap();
    stream
        .write_all(
            b"POST /metrics HTTP/1.1\r\nHost: x\r\nContent-Length: 0\r\nConnection: close\r\n\r\n",
        )
        .unwrap();
    let mut response = String::new();
    stream.read_to_string(&mut response).unwrap();
    assert!(response.starts_with("HTTP/1.1 405"), "{response}");

    signal(&child, "INT");
    assert!(wait(child.release(), Duration::from_secs(10)).success());
    let (header, rows) = rows(&log);
    let mean = common::column(&header, "mean_dbm");
    let logged: Vec<f64> = rows.iter().filter_map(|r| r[mean].parse().ok()).collect();
    assert!(
        logged.iter().any(|m| (m - served).abs() <= 5e-5),
        "served {served} dBm; rows {logged:?}"
    );
}
