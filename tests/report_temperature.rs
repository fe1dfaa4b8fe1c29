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

/// The column header of an interval log of one channel with a temperature channel, as
/// issue 19 fixes it: `uncomp_dbm` right after the group's `u_db`, `temp_c` and
/// `temp_flags` at the end of the row.
const HEADER: &str = "time_s,utc,samples,mean_dbm,min_dbm,max_dbm,mean_w,flags,bound,averaged,\
                      u_db,uncomp_dbm,temp_c,temp_flags\n";

/// One row of such a log: the compensated mean, the uncompensated one, the temperature
/// cell (as text, so that it may be empty) and the power and temperature flags.
struct Row<'a> {
    t: f64,
    mean: f64,
    uncomp: Option<f64>,
    temp: &'a str,
    flags: &'a str,
    temp_flags: &'a str,
}

fn row(t: f64, mean: f64, uncomp: f64, temp: &str) -> Row<'_> {
    Row {
        t,
        mean,
        uncomp: Some(uncomp),
        temp,
        flags: "",
        temp_flags: "",
    }
}

/// The context lines `record` writes, with the starting zero, and the header.
fn opening(every_s: f64) -> String {
    format!(
        "# dbtrail 0.1.0 record\n# profile: synthetic; sha256 0\n\
         # started: 2026-12-03T08:00:00.000Z\n# source: test\n\
         # rows: every {every_s}s; power averaged over watts\n\
         # zero: time_s=0.000 counts=3.000 source=profile\n{HEADER}"
    )
}

fn row_line(r: &Row) -> String {
    let u_db = if r.flags.contains("temp-outside") {
        ""
    } else {
        "0.4000"
    };
    let uncomp = r.uncomp.map_or(String::new(), |u| format!("{u:.4}"));
    format!(
        "{:.6},x,100,{:.4},{:.4},{:.4},{:.6e},{},,100,{u_db},{uncomp},{},{}\n",
        r.t,
        r.mean,
        r.mean - 0.01,
        r.mean + 0.01,
        10f64.powf(r.mean / 10.0) * 1e-3,
        r.flags,
        r.temp,
        r.temp_flags
    )
}

fn log_of(every_s: f64, rows: &[Row]) -> String {
    let mut text = opening(every_s);
    for r in rows {
        text.push_str(&row_line(r));
    }
    text
}

/// Writes `text` as a log and runs `report` on it with `args`.
fn report_on(dir: &std::path::Path, name: &str, text: &str, args: &[&str]) -> std::process::Output {
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    bin().arg("report").arg(&path).args(args).output().unwrap()
}

fn json_of(out: &std::process::Output) -> serde_json::Value {
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn text_of(out: &std::process::Output) -> String {
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout.clone()).unwrap()
}

/// The value of the text report's line labelled `label`, its wrapped lines joined.
fn text_line(text: &str, label: &str) -> String {
    let mut lines = text
        .lines()
        .skip_while(|l| !l.trim_start().starts_with(&format!("{label} ")));
    let first = lines
        .next()
        .unwrap_or_else(|| panic!("no {label} in\n{text}"));
    let rest = lines.take_while(|l| l.starts_with("                "));
    std::iter::once(first.trim_start()[label.len()..].trim())
        .chain(rest.map(str::trim))
        .collect::<Vec<_>>()
        .join(" ")
}

fn number(value: &serde_json::Value, key: &str) -> f64 {
    value[key]
        .as_f64()
        .unwrap_or_else(|| panic!("no number `{key}` in {value}"))
}

/// Three hours of 10 s rows: the compensated mean falling 0.12 dB/h, the uncompensated
/// one 0.5 dB/h, both with the same white noise of 0.01 dB (seeded), and the board
/// warming from 25 °C.
fn drifting_log() -> String {
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};
    let mut rng = rand_pcg::Pcg64::seed_from_u64(19);
    let noise = Normal::new(0.0, 0.01).unwrap();
    let rows: Vec<(f64, f64, f64, String)> = (0..1080)
        .map(|i| {
            let t = f64::from(i) * 10.0;
            let h = t / 3600.0;
            let n = noise.sample(&mut rng);
            let temp = format!("{:.3}", 25.0 + 2.0 * h);
            (t, 20.0 - 0.12 * h + n, 20.0 - 0.5 * h + n, temp)
        })
        .collect();
    let rows: Vec<Row> = rows
        .iter()
        .map(|(t, mean, uncomp, temp)| row(*t, *mean, *uncomp, temp))
        .collect();
    log_of(10.0, &rows)
}

// Source: worked example: a straight-line fall plus white noise of known σ is recovered
// by least squares within about two standard errors (common practice: ±2 SE cover about
// 95 %; σ = 0.01 dB over 1080 rows in 3 h gives SE ≈ σ/√Sxx = 0.01/√810 ≈ 3.5e-4 dB/h,
// the estimator itself being checked against statsmodels in tests/soak.rs). The two
// series carry the same noise, so their slopes differ by the lines' −0.38 dB/h to the
// rounding of the 4-decimal cells: swapping the columns would give +0.38.
#[test]
fn the_drift_without_compensation_is_read_from_its_own_column() {
    let tmp = common::scratch("uncomp-drift");
    let dir = tmp.path();
    let text = drifting_log();
    let value = json_of(&report_on(dir, "d.csv", &text, &["--json"]));
    let (comp, comp_se) = (
        number(&value, "drift_db_per_hour"),
        number(&value, "drift_stderr_db_per_hour"),
    );
    let (uncomp, uncomp_se) = (
        number(&value, "drift_uncompensated_db_per_hour"),
        number(&value, "drift_uncompensated_stderr_db_per_hour"),
    );
    assert!((comp + 0.12).abs() <= 2.0 * comp_se, "{comp} ± {comp_se}");
    assert!(
        (uncomp + 0.5).abs() <= 2.0 * uncomp_se,
        "{uncomp} ± {uncomp_se}"
    );
    assert!(comp_se < 2e-3 && uncomp_se < 2e-3, "{comp_se} {uncomp_se}");
    assert!(
        ((uncomp - comp) + 0.38).abs() < 1e-3,
        "{uncomp} against {comp}"
    );
    let table = text_of(&report_on(dir, "d.csv", &text, &[]));
    let line = text_line(&table, "uncompensated");
    assert!(
        line.starts_with(&format!(
            "without temperature compensation: {uncomp:+.4} dB/h ± "
        )),
        "{line}"
    );
    let drift_at = table.find("  drift ").unwrap();
    let uncomp_at = table.find("  uncompensated ").unwrap();
    let whole_at = table.find("  whole span ").unwrap();
    assert!(drift_at < uncomp_at && uncomp_at < whole_at, "{table}");
}
