//! `record --metrics`: the refusals that come before a run starts.

mod common;

use common::{bin, output};

fn record_with(metrics: &[&str]) -> std::process::Output {
    output(
        bin()
            .args([
                "record",
                "--demo",
                "--fast",
                "--duration",
                "1s",
                "--out",
                "-",
            ])
            .args(metrics),
    )
}

// Source: the rule of the issue (docs/lab.md): a port in use is bad input, exit 2, with
// the address named; nothing is recorded.
#[test]
fn a_port_in_use_is_refused_naming_it() {
    let taken = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
    let port = taken.local_addr().unwrap().port().to_string();
    let out = record_with(&["--metrics", &port]);
    let said = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{said}");
    assert!(said.contains(&format!("127.0.0.1:{port}")), "{said}");
    assert!(said.contains("choose another port"), "{said}");
    assert!(out.stdout.is_empty());
}

// Source: the rule of the issue: a bare port serves on loopback; any other address must
// be asked for (--metrics-anywhere); a malformed one is refused saying what to give.
#[test]
fn an_address_beyond_loopback_must_be_asked_for() {
    let out = record_with(&["--metrics", "0.0.0.0:0"]);
    let said = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{said}");
    assert!(said.contains("--metrics-anywhere"), "{said}");
    let out = record_with(&["--metrics", "here"]);
    let said = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{said}");
    assert!(said.contains("is not an address"), "{said}");
    let out = record_with(&["--metrics", "0.0.0.0:0", "--metrics-anywhere"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}
