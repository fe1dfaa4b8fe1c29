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

/// Eight 10 s rows whose temperatures are worked by hand below: two without one (a
/// sensor fault and an unknown), one read outside the calibrated temperature range.
fn temperature_log() -> String {
    let mut rows = vec![
        row(0.0, 10.0, 10.1, "24.000"),
        row(10.0, 10.0, 10.1, "23.500"),
        row(20.0, 10.0, 10.1, ""),
        row(30.0, 10.0, 10.1, "31.250"),
        row(40.0, 10.0, 10.1, "29.125"),
        row(50.0, 10.0, 10.1, ""),
        row(60.0, 10.0, 10.1, "30.000"),
        row(70.0, 10.0, 10.1, "30.500"),
    ];
    rows[2].temp_flags = "sensor-open|temp-unknown";
    rows[2].flags = "temp-unknown";
    rows[5].temp_flags = "temp-unknown";
    rows[5].flags = "temp-unknown";
    rows[3].flags = "temp-outside";
    rows[7].uncomp = None;
    log_of(10.0, &rows)
}

// Source: worked by hand from the rows above: the lowest temperature is 23.500 °C (10 s),
// the highest 31.250 °C (30 s), the first 24.000 °C and the last 30.500 °C; the rows at
// 20 and 50 s have empty `temp_c` (2 unknown). From 25 s to 65 s: 31.250 / 29.125 °C,
// first 31.250, last 30.000, 1 unknown. A row flagged `temp-outside` counts as any flag
// is counted (docs/report.md, "Flags"), and carries no `u_db`, so the mean has none.
#[test]
fn the_temperature_range_and_its_unknown_rows_come_from_temp_c() {
    let tmp = common::scratch("temperature");
    let dir = tmp.path();
    let text = temperature_log();
    let value = json_of(&report_on(dir, "t.csv", &text, &["--json"]));
    let range = &value["temperature_c"];
    assert_eq!(
        (number(range, "min"), number(range, "max")),
        (23.5, 31.25),
        "{range}"
    );
    assert_eq!(
        (number(range, "first"), number(range, "last")),
        (24.0, 30.5),
        "{range}"
    );
    assert_eq!(range["rows_unknown"], 2, "{range}");
    assert_eq!(value["flagged_rows"]["temp-outside"], 1, "{value}");
    assert_eq!(value["flagged_rows"]["temp-unknown"], 2, "{value}");
    assert!(value["mean_u_db"].is_null(), "{value}");
    // Eight rows are too few for a drift, with the column or without it: null, not absent.
    assert!(
        value["drift_uncompensated_db_per_hour"].is_null(),
        "{value}"
    );
    assert!(
        value
            .as_object()
            .unwrap()
            .contains_key("drift_uncompensated_db_per_hour"),
        "{value}"
    );

    let cut = json_of(&report_on(
        dir,
        "t.csv",
        &text,
        &["--json", "--from", "25s", "--to", "65s"],
    ));
    let range = &cut["temperature_c"];
    assert_eq!(
        (
            number(range, "min"),
            number(range, "max"),
            number(range, "first"),
            number(range, "last")
        ),
        (29.125, 31.25, 31.25, 30.0),
        "{range}"
    );
    assert_eq!(range["rows_unknown"], 1, "{range}");

    let table = text_of(&report_on(dir, "t.csv", &text, &[]));
    assert_eq!(
        text_line(&table, "temperature"),
        "23.50 to 31.25 °C on the board, 24.00 °C at the span's start and 30.50 °C at its \
         end; 2 rows with no temperature"
    );
    assert!(
        text_line(&table, "flagged rows").contains("temp-outside 1"),
        "{table}"
    );
    assert!(
        text_line(&table, "uncertainty").starts_with(
            "not known: 1 row was read outside the calibrated temperature range (temp-outside)"
        ),
        "{table}"
    );
}

// Source: the rule in docs/report.md ("Long logs"): folded intervals keep the extremes
// and counts of the rows as logged, so folding the rows above into 40 s intervals gives
// the same temperature figures.
#[test]
fn folded_rows_keep_the_temperature_figures_of_the_rows_as_logged() {
    let tmp = common::scratch("temperature-folded");
    let dir = tmp.path();
    let text = temperature_log();
    let logged = json_of(&report_on(dir, "t.csv", &text, &["--json"]));
    let folded = json_of(&report_on(
        dir,
        "t.csv",
        &text,
        &["--json", "--every", "40s"],
    ));
    assert_eq!(folded["reduced_to_s"], 40.0, "{folded}");
    assert_eq!(folded["temperature_c"], logged["temperature_c"]);
}

/// Rows of an hour and a half at 60 s with the starting zero and two zeros taken, one
/// after 30 min and one after 1 h 30 min, and a unit of each change in the same line.
fn zero_log() -> String {
    let mut text = opening(60.0);
    for i in 0..=90 {
        let t = f64::from(i) * 60.0;
        text.push_str(&row_line(&row(t, -10.0, -10.2, "25.000")));
        if i == 30 {
            text.push_str(
                "# zero: time_s=1800.000 counts=3.200 change_counts=+0.200 \
                 change_db_at_span_bottom=-0.074 span_bottom_dbm=-27.000\n",
            );
        }
        if i == 89 {
            text.push_str(
                "# zero: span_bottom_dbm=-27.000 change_db_at_span_bottom=-0.153 \
                 change_counts=+0.412 counts=3.412 time_s=5400.000 by=operator\n",
            );
        }
    }
    text
}

// Source: worked by hand from the zero lines above. Whole log: 2 zeros taken, the last
// 3.412 counts at 5400 s, +0.412 counts from the start's 3.000, which over the 1.5 h
// from the starting zero (time 0) is 0.412 / 1.5 = 0.274667 counts/h; at the span's
// bottom (−27 dBm) a change of −0.153 dB. Up to 40 min only the first counts: +0.200
// over 0.5 h = 0.4 counts/h. Up to 20 min no zero was taken, and a log whose only zero
// line is its start has none either: the key is absent.
#[test]
fn zeros_taken_give_the_change_and_its_rate_from_the_runs_starting_zero() {
    let tmp = common::scratch("zeros");
    let dir = tmp.path();
    let text = zero_log();
    let value = json_of(&report_on(dir, "z.csv", &text, &["--json"]));
    let zero = &value["zero"];
    assert_eq!(number(zero, "start_counts"), 3.0, "{zero}");
    assert_eq!(zero["zeros_taken"], 2, "{zero}");
    assert_eq!(number(zero, "last_counts"), 3.412, "{zero}");
    assert_eq!(number(zero, "change_counts"), 0.412, "{zero}");
    assert_eq!(number(zero, "change_db_at_span_bottom"), -0.153, "{zero}");
    assert_eq!(number(zero, "span_bottom_dbm"), -27.0, "{zero}");
    assert!(
        (number(zero, "change_counts_per_hour") - 0.412 / 1.5).abs() < 1e-12,
        "{zero}"
    );

    let early = json_of(&report_on(dir, "z.csv", &text, &["--json", "--to", "40m"]));
    let zero = &early["zero"];
    assert_eq!(zero["zeros_taken"], 1, "{zero}");
    assert_eq!(number(zero, "change_counts"), 0.2, "{zero}");
    assert!(
        (number(zero, "change_counts_per_hour") - 0.4).abs() < 1e-12,
        "{zero}"
    );

    let before = json_of(&report_on(dir, "z.csv", &text, &["--json", "--to", "20m"]));
    assert!(
        !before.as_object().unwrap().contains_key("zero"),
        "{before}"
    );
    let only_start = temperature_log();
    let plain = json_of(&report_on(dir, "s.csv", &only_start, &["--json"]));
    assert!(!plain.as_object().unwrap().contains_key("zero"), "{plain}");

    let table = text_of(&report_on(dir, "z.csv", &text, &[]));
    assert_eq!(
        text_line(&table, "zero"),
        "2 taken with the RF off; the last, at 1:30:00 (5400 s), 3.412 counts, +0.412 counts \
         from the run's starting zero of 3.000 (+0.275 counts/h): a reading at the span's \
         bottom (-27.000 dBm) moves by -0.153 dB"
    );
}

// Source: the rule in docs/report.md ("Bad logs"): a bad line gets a message naming the
// file and its line, and exit code 2. Line numbers count every line: the zero line after
// the first row of `opening` (7 context lines and the header) is line 10.
#[test]
fn a_malformed_zero_line_is_refused_with_its_file_and_line() {
    let tmp = common::scratch("bad-zero");
    let dir = tmp.path();
    let cases = [
        (
            "# zero: time_s=60.000 counts=3.1x change_counts=+0.1 \
             change_db_at_span_bottom=-0.04 span_bottom_dbm=-27.000\n",
            "`counts=3.1x`: `3.1x` is not a number",
        ),
        (
            "# zero: time_s=60.000 counts=3.100\n",
            "a zero line among the rows is a zero taken during the run",
        ),
        (
            "# zero: time_s=60.000 counts=3.100 change_counts=+0.100\n",
            "`change_db_at_span_bottom`, `span_bottom_dbm` is missing",
        ),
    ];
    for (zero_line, want) in cases {
        let mut text = opening(60.0);
        text.push_str(&row_line(&row(0.0, -10.0, -10.2, "25.000")));
        text.push_str(&row_line(&row(60.0, -10.0, -10.2, "25.000")));
        text.push_str(zero_line);
        text.push_str(&row_line(&row(120.0, -10.0, -10.2, "25.000")));
        let out = report_on(dir, "bad.csv", &text, &[]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{stderr}");
        let place = format!("{}:10: # zero: ", dir.join("bad.csv").display());
        assert!(stderr.contains(&place), "`{stderr}` lacks `{place}`");
        assert!(stderr.contains(want), "`{stderr}` lacks `{want}`");
    }
}
