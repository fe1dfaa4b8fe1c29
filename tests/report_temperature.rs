//! The report on logs of a run with a temperature channel (issue 19): the drift read
//! without temperature compensation beside the drift with it, the board's temperature
//! over the run, the zeros taken with the RF off; and logs without any of it, which must
//! report exactly as before.

mod common;

use common::bin;

/// Logs written by `record` before issue 19 (a demo soak of 1 h at 10 s with 10 min at
/// 30 s appended, so two runs; an overload demo with bound and flagged rows), with the
/// report's output on them saved from the build before the temperature columns were read.
const BEFORE: [(&str, &[&str], &str); 6] = [
    ("soak_before_temperature.csv", &[], "soak.txt"),
    ("soak_before_temperature.csv", &["--json"], "soak.json"),
    (
        "soak_before_temperature.csv",
        &["--run", "1", "--from", "10m", "--to", "50m"],
        "soak_run1_span.txt",
    ),
    (
        "soak_before_temperature.csv",
        &["--run", "1", "--every", "1m", "--json"],
        "soak_run1_every.json",
    ),
    ("overload_before_temperature.csv", &[], "overload.txt"),
    (
        "overload_before_temperature.csv",
        &["--json"],
        "overload.json",
    ),
];

// Source: the report's own output on the same logs, saved before the temperature columns
// and zero lines were read (tests/report_logs/*.txt, *.json): a log without them must
// give the same bytes, text and JSON, whole log, one run, a span and folded rows.
#[test]
fn a_log_without_temperature_reports_byte_for_byte_as_before() {
    for (log, args, saved) in BEFORE {
        let out = bin()
            .arg("report")
            .arg(format!("tests/report_logs/{log}"))
            .args(args)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{log} {args:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let want = std::fs::read(format!(
            "{}/tests/report_logs/{saved}",
            env!("CARGO_MANIFEST_DIR")
        ))
        .unwrap();
        assert!(
            out.stdout == want,
            "{log} {args:?} differs from {saved}:\n{}",
            String::from_utf8_lossy(&out.stdout)
        );
    }
}
