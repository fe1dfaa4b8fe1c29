//! A real time-series engine end to end: the distribution's `prometheus` started on
//! loopback, scraping a running `record --metrics` every second; what it stored is
//! queried through its HTTP API and held against the rows the same run wrote to its CSV.
//! `.ci/run` installs the package; without it this test fails in CI (CI=true) and says
//! so loudly elsewhere.

mod common;

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Duration;

use common::{
    address_said, bin, http_get, rows, scratch, serving_metrics, signal, spawn, wait, wait_until,
    KillOnDrop,
};

/// The engine's program, when installed.
fn prometheus() -> Option<&'static str> {
    let found = Command::new("prometheus")
        .arg("--version")
        .output()
        .is_ok_and(|out| out.status.success());
    if found {
        return Some("prometheus");
    }
    assert!(
        std::env::var("CI").is_err(),
        "the `prometheus` package is not installed: .ci/run installs it from the \
         distribution's packages, so in CI this test fails rather than pass unchecked"
    );
    eprintln!("SKIPPED, NOT CHECKED: install the distribution's `prometheus` package to run it");
    None
}

/// Percent-encodes a query for a URL.
fn encoded(query: &str) -> String {
    query
        .bytes()
        .map(|b| match b {
            b'a'..=b'z' | b'A'..=b'Z' | b'0'..=b'9' | b'_' | b'.' | b'-' => (b as char).to_string(),
            _ => format!("%{b:02X}"),
        })
        .collect()
}

/// The JSON body of a GET of `path` at `addr`.
fn get(addr: &str, path: &str) -> Result<String, String> {
    let (_, _, body) = http_get(addr, path, None)?;
    // Chunked bodies: the JSON lies between the first and last chunk lines.
    let json = body
        .find('{')
        .zip(body.rfind('}'))
        .map(|(a, b)| &body[a..=b])
        .ok_or_else(|| format!("no JSON in {body}"))?;
    Ok(json.to_string())
}

/// The result of an instant query to the engine's API.
fn query(engine: &str, q: &str) -> Result<serde_json::Value, String> {
    let body = get(engine, &format!("/api/v1/query?query={}", encoded(q)))?;
    let value: serde_json::Value = serde_json::from_str(&body).map_err(|e| e.to_string())?;
    if value["status"] != "success" {
        return Err(format!("{q}: {body}"));
    }
    Ok(value["data"]["result"].clone())
}

/// The engine started on loopback with a 1 s scrape of `target`, and the lab page's
/// alerting rules evaluated every second; its address.
fn start_engine(program: &str, dir: &Path, target: &str) -> (KillOnDrop, String) {
    let config = dir.join("engine.yml");
    let rules = common::lab_page_block("yaml", "# lab-alerts.yml");
    std::fs::write(dir.join("lab-alerts.yml"), rules).unwrap();
    std::fs::write(
        &config,
        format!(
            "global:\n  scrape_interval: 1s\n  evaluation_interval: 1s\n\
             rule_files: [lab-alerts.yml]\nscrape_configs:\n  \
             - job_name: dbtrail\n    scrape_interval: 1s\n    static_configs:\n      \
             - targets: [\"{target}\"]\n"
        ),
    )
    .unwrap();
    let mut command = Command::new(program);
    command
        .arg(format!("--config.file={}", config.display()))
        .arg(format!(
            "--storage.tsdb.path={}",
            dir.join("data").display()
        ))
        .arg("--web.listen-address=127.0.0.1:0")
        .stdout(Stdio::null())
        .stderr(Stdio::piped());
    let mut child = spawn(&mut command);
    let addr = address_said(&mut child, "msg=\"Listening on\" address=", "\n");
    (KillOnDrop::new(child), addr)
}

// Source: the engine itself (the distribution's prometheus, its HTTP API's
// /api/v1/query, as its documentation describes it): the target is up, a few scrapes
// landed, and every power it stored is one of the rows the run wrote (mean_dbm, to the
// row's 4 decimals).
#[test]
fn a_real_engine_scrapes_a_run_and_stores_its_rows() {
    let Some(program) = prometheus() else {
        return;
    };
    let dir = scratch("engine");
    let log = dir.path().join("run.csv");
    let (recorder, target) = serving_metrics(&log, "lab-1");
    let (_engine, engine) = start_engine(program, dir.path(), &target);

    wait_until(Duration::from_secs(40), || {
        let up = query(&engine, "up{job=\"dbtrail\"}")?;
        match up[0]["value"][1].as_str() {
            Some("1") => Ok(()),
            _ => Err(format!("not up yet: {up}")),
        }
    });
    let stored = wait_until(Duration::from_secs(40), || {
        let got = query(&engine, "dbtrail_power_dbm{station=\"lab-1\"}[1m]")?;
        let values: Vec<f64> = got[0]["values"]
            .as_array()
            .map(|v| {
                v.iter()
                    .filter_map(|p| p[1].as_str()?.parse().ok())
                    .collect()
            })
            .unwrap_or_default();
        if values.len() >= 4 {
            Ok(values)
        } else {
            Err(format!("{} scrapes stored so far", values.len()))
        }
    });
    // The lab page's rules load and are evaluated on the live run without error, and its
    // drift query answers for the station.
    wait_until(Duration::from_secs(40), || {
        let body = get(&engine, "/api/v1/rules")?;
        let rules: serde_json::Value = serde_json::from_str(&body).map_err(|e| e.to_string())?;
        let rules = rules["data"]["groups"][0]["rules"]
            .as_array()
            .cloned()
            .unwrap_or_default();
        let evaluated = rules
            .iter()
            // A rule never evaluated says the zero time, 0001-01-01.
            .filter(|r| {
                let at = r["lastEvaluation"].as_str().unwrap_or("0001");
                r["health"] == "ok" && !at.starts_with("0001")
            })
            .count();
        if rules.len() == 4 && evaluated == 4 {
            Ok(())
        } else {
            Err(format!("rules not all evaluated yet: {rules:?}"))
        }
    });
    let drift = query(&engine, "deriv(dbtrail_power_dbm[1h]) * 3600").unwrap();
    assert_eq!(drift[0]["metric"]["station"], "lab-1", "{drift}");
    signal(&recorder, "INT");
    assert!(wait(recorder.release(), Duration::from_secs(10)).success());
    let (header, rows) = rows(&log);
    let mean = common::column(&header, "mean_dbm");
    let logged: Vec<f64> = rows.iter().filter_map(|r| r[mean].parse().ok()).collect();
    for value in &stored {
        assert!(
            logged.iter().any(|m| (m - value).abs() <= 5e-5),
            "stored {value} dBm is no row of the run: {logged:?}"
        );
    }
}

/// The latest value of an instant query's first series, when there is one.
fn latest(engine: &str, q: &str) -> Result<f64, String> {
    let got = query(engine, q)?;
    got[0]["value"][1]
        .as_str()
        .and_then(|v| v.parse().ok())
        .ok_or_else(|| format!("{q}: nothing yet ({got})"))
}

// Source: the engine itself, as above: a port that is unplugged shows in what it stored:
// the link goes down (dbtrail_link_up 0) and the power is left out, so its series goes
// stale; plugged in again, the reconnect counter rises.
#[test]
fn a_real_engine_sees_the_source_unplugged_and_back() {
    use common::{pty_pair, repoint, write_lines, write_profile};
    let Some(program) = prometheus() else {
        return;
    };
    let dir = scratch("engine-unplug");
    let profile = write_profile(dir.path());
    let link = dir.path().join("port");
    let (mut master, slave) = pty_pair();
    repoint(&link, &slave);
    let mut command = bin();
    command
        .args(["record", "--port", link.to_str().unwrap()])
        .args(["--profile", profile.to_str().unwrap(), "--every", "200ms"])
        .args(["--metrics", "0", "--station", "lab-2", "--out"])
        .arg(dir.path().join("live.csv"))
        .stderr(Stdio::piped());
    let mut recorder = spawn(&mut command);
    let target = address_said(&mut recorder, "metrics at http://", "/metrics");
    let recorder = KillOnDrop::new(recorder);
    let (_engine, engine) = start_engine(program, dir.path(), &target);
    let feeding = |master: &mut serialport::TTYPort| {
        write_lines(master, (0..200).map(|i| 1000 + i % 50));
    };
    wait_until(Duration::from_secs(40), || {
        feeding(&mut master);
        let up = latest(&engine, "dbtrail_link_up{station=\"lab-2\"}")?;
        if up != 1.0 {
            return Err(format!("link_up {up}"));
        }
        latest(&engine, "dbtrail_power_dbm{station=\"lab-2\"}").map(|_| ())
    });
    drop((master, slave));
    wait_until(Duration::from_secs(40), || {
        let up = latest(&engine, "dbtrail_link_up{station=\"lab-2\"}")?;
        if up == 0.0 {
            Ok(())
        } else {
            Err(format!("still up ({up})"))
        }
    });
    // A scrape without the series marks it stale at once: no power is read any more.
    wait_until(Duration::from_secs(40), || {
        let power = query(&engine, "dbtrail_power_dbm{station=\"lab-2\"}")?;
        match power.as_array().map(Vec::len) {
            Some(0) => Ok(()),
            _ => Err(format!("power still read: {power}")),
        }
    });
    // The lab page's rule sees it: its alert is pending (held 30 s before it fires).
    wait_until(Duration::from_secs(40), || {
        let alert = query(
            &engine,
            "ALERTS{alertname=\"StationLinkDead\",station=\"lab-2\"}",
        )?;
        match alert[0]["metric"]["alertstate"].as_str() {
            Some("pending" | "firing") => Ok(()),
            _ => Err(format!("no StationLinkDead alert yet: {alert}")),
        }
    });
    let (mut master, slave) = pty_pair();
    repoint(&link, &slave);
    wait_until(Duration::from_secs(40), || {
        feeding(&mut master);
        let reconnects = latest(&engine, "dbtrail_link_reconnects_total{station=\"lab-2\"}")?;
        if reconnects >= 1.0 {
            Ok(())
        } else {
            Err(format!("{reconnects} reconnects"))
        }
    });
    signal(&recorder, "INT");
    assert!(wait(recorder.release(), Duration::from_secs(15)).success());
}
