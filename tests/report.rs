//! The soak report checked against a certified regression dataset, synthetic runs with a
//! known slope and noise, an exponential warm-up with a known time constant, and bad logs.

use std::path::PathBuf;
use std::process::Command;

use dbtrail::report::{analyse, read_log, ReportOptions};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("dbtrail-report-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// A log in `record`'s interval format: (time s, mean dBm or None, flags).
fn log_text(every_s: f64, rows: &[(f64, Option<f64>, &str)]) -> String {
    let mut text = format!(
        "# dbtrail 0.1.0 record\n# profile: synthetic; sha256 0\n# source: test\n# rows: every {every_s}s; power averaged over watts\n\
         time_s,utc,samples,mean_dbm,min_dbm,max_dbm,mean_w,flags\n"
    );
    for (t, mean, flags) in rows {
        match mean {
            Some(m) => text.push_str(&format!(
                "{t},x,10,{m},{},{},{},{flags}\n",
                m - 0.05,
                m + 0.05,
                10f64.powf(m / 10.0) * 1e-3
            )),
            None => text.push_str(&format!("{t},x,0,,,,,{flags}\n")),
        }
    }
    text
}

fn analysed(text: &str, options: &ReportOptions) -> dbtrail::report::Report {
    let log = read_log(text.as_bytes(), "test.csv", 1).unwrap();
    analyse(&log, "test.csv", options).unwrap()
}

// Source: NIST StRD "Norris" linear regression dataset (tests/reference/Norris.dat, from
// scipy's test suite): certified slope 1.00211681802045, SE 4.29796848199937e-4. Its x
// values are taken as hours and its y values as dBm, so the drift must be the slope.
#[test]
fn drift_matches_the_norris_certified_slope_and_error() {
    let text = include_str!("reference/Norris.dat");
    let rows: Vec<(f64, Option<f64>, &str)> = text
        .lines()
        .skip(60)
        .filter_map(|l| {
            let v: Vec<f64> = l
                .split_whitespace()
                .filter_map(|c| c.parse().ok())
                .collect();
            (v.len() == 2).then(|| (v[1] * 3600.0, Some(v[0]), ""))
        })
        .collect();
    assert_eq!(rows.len(), 36);
    let report = analysed(&log_text(3600.0, &rows), &ReportOptions::default());
    assert!(((report.drift_db_per_hour - 1.00211681802045) / 1.00211681802045).abs() < 1e-10);
    let se = report.drift_stderr_db_per_hour.unwrap();
    assert!(
        ((se - 4.29796848199937e-4) / 4.29796848199937e-4).abs() < 1e-8,
        "{se}"
    );
}

// Source: common practice for least squares (SE(b1) = σ/√Sxx): with a known slope and
// Gaussian noise of known σ, the fitted slope lands within two standard errors about 95 %
// of the time, and the reported standard error estimates σ/√Sxx.
#[test]
fn known_slope_plus_noise_is_recovered_within_its_standard_error() {
    let (slope, sigma) = (-0.35, 0.02);
    let hours: Vec<f64> = (0..600).map(|i| f64::from(i) * 10.0 / 3600.0).collect();
    let mean_h = hours.iter().sum::<f64>() / hours.len() as f64;
    let sxx: f64 = hours.iter().map(|h| (h - mean_h).powi(2)).sum();
    let true_se = sigma / sxx.sqrt();
    let mut within = 0;
    for seed in 0..40 {
        let mut rng = rand_pcg::Pcg64::seed_from_u64(seed);
        let noise = Normal::new(0.0, sigma).unwrap();
        let rows: Vec<(f64, Option<f64>, &str)> = hours
            .iter()
            .map(|h| {
                (
                    h * 3600.0,
                    Some(30.0 + slope * h + noise.sample(&mut rng)),
                    "",
                )
            })
            .collect();
        let report = analysed(&log_text(10.0, &rows), &ReportOptions::default());
        let se = report.drift_stderr_db_per_hour.unwrap();
        assert!(
            (se - true_se).abs() < 0.2 * true_se,
            "seed {seed}: se {se} vs {true_se}"
        );
        if (report.drift_db_per_hour - slope).abs() < 2.0 * se {
            within += 1;
        }
    }
    assert!(within >= 34, "{within} of 40 within two standard errors");
}

// Source: worked example — P(t) = P∞ − A·e^(−t/τ) stays within tol of P∞ from
// t = τ·ln(A/tol): τ = 300 s, A = 2 dB, tol = 0.1 dB gives 898.7 s.
#[test]
fn exponential_warm_up_settles_when_the_maths_says() {
    let (tau, a, tol) = (300.0, 2.0, 0.1);
    let rows: Vec<(f64, Option<f64>, &str)> = (0..10_800)
        .map(|i| {
            (
                f64::from(i),
                Some(27.0 - a * (-f64::from(i) / tau).exp()),
                "",
            )
        })
        .collect();
    let options = ReportOptions {
        settle_tol_db: tol,
        ..ReportOptions::default()
    };
    let report = analysed(&log_text(1.0, &rows), &options);
    let analytic = tau * (a / tol).ln();
    let got = report.settled_after_s.unwrap();
    assert!(
        (got - analytic).abs() <= 1.0,
        "settled after {got} s, analytic {analytic} s"
    );
    // Cut at 600 s the level still rises 0.06 dB over the last minute: with a tolerance
    // of ±0.01 dB the last interval is itself outside, so it never settled.
    let still_rising = ReportOptions {
        settle_tol_db: 0.01,
        settle_window_s: Some(60.0),
        ..options
    };
    let never = analysed(&log_text(1.0, &rows[..600]), &still_rising);
    assert_eq!(never.settled_after_s, None);
}

#[test]
fn gaps_and_flags_are_counted() {
    let mut rows: Vec<(f64, Option<f64>, &str)> =
        (0..100).map(|i| (f64::from(i), Some(20.0), "")).collect();
    rows.retain(|r| !(40.0..45.0).contains(&r.0)); // five rows missing: one gap of 5 s
    rows[10] = (10.0, None, "gap");
    rows[11] = (11.0, None, "gap|reconnect");
    rows[70].2 = "clip|above";
    let report = analysed(&log_text(1.0, &rows), &ReportOptions::default());
    assert_eq!(report.gaps, 2);
    assert!((report.gap_s - 7.0).abs() < 1e-9, "{}", report.gap_s);
    assert_eq!(report.flagged_rows.get("gap"), Some(&2));
    assert_eq!(report.flagged_rows.get("reconnect"), Some(&1));
    assert_eq!(report.flagged_rows.get("clip"), Some(&1));
    assert_eq!(report.samples, 93 * 10);
}

// Source: common practice — the mean of 0 dBm and 10 dBm intervals of equal length is
// 5.5 mW (+7.40 dBm), over watts.
#[test]
fn mean_power_is_over_watts_and_the_span_can_be_cut() {
    let rows: Vec<(f64, Option<f64>, &str)> = (0..20)
        .map(|i| (f64::from(i), Some(if i % 2 == 0 { 0.0 } else { 10.0 }), ""))
        .collect();
    let report = analysed(&log_text(1.0, &rows), &ReportOptions::default());
    assert!((report.mean_dbm - 7.403626894942439).abs() < 1e-9);
    let cut = analysed(
        &log_text(1.0, &rows),
        &ReportOptions {
            from_s: Some(10.0),
            to_s: Some(10.0),
            ..ReportOptions::default()
        },
    );
    assert!((cut.mean_dbm - 0.0).abs() < 1e-9);
    assert_eq!(cut.duration_s, 1.0);
}

fn dbtrail(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_dbtrail"))
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn plots_are_valid_svg_and_png_of_the_stated_size() {
    let dir = scratch("plots");
    let log = dir.join("run.csv");
    let mut rows: Vec<(f64, Option<f64>, &str)> = (0..3000)
        .map(|i| (f64::from(i), Some(25.0 + 0.001 * f64::from(i)), ""))
        .collect();
    rows[1234].1 = Some(31.0);
    rows[2000] = (2000.0, None, "gap");
    std::fs::write(&log, log_text(1.0, &rows)).unwrap();
    let (svg, png) = (dir.join("run.svg"), dir.join("run.png"));
    for (path, size) in [(&svg, "900x500"), (&png, "640x480")] {
        let out = dbtrail(&[
            "report",
            log.to_str().unwrap(),
            "--plot",
            path.to_str().unwrap(),
            "--size",
            size,
        ]);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    let svg_text = std::fs::read_to_string(&svg).unwrap();
    assert!(svg_text.starts_with("<svg") && svg_text.trim_end().ends_with("</svg>"));
    assert!(svg_text.contains(r#"width="900""#) && svg_text.contains(r#"height="500""#));
    assert!(svg_text.contains("time since start") && svg_text.contains("dBm"));
    let bytes = std::fs::read(&png).unwrap();
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
    let width = u32::from_be_bytes(bytes[16..20].try_into().unwrap());
    let height = u32::from_be_bytes(bytes[20..24].try_into().unwrap());
    assert_eq!((width, height), (640, 480));
    let bad = dbtrail(&[
        "report",
        log.to_str().unwrap(),
        "--plot",
        dir.join("run.gif").to_str().unwrap(),
    ]);
    assert_eq!(bad.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&bad.stderr).contains(".svg or .png"));
}

#[test]
fn bad_logs_get_a_clear_message_and_exit_2() {
    let dir = scratch("bad");
    let good = log_text(1.0, &[(0.0, Some(1.0), ""), (1.0, Some(1.0), "")]);
    let cases: [(&str, String, &str); 6] = [
        (
            "no_header.csv",
            good.replace(
                "time_s,utc,samples,mean_dbm,min_dbm,max_dbm,mean_w,flags\n",
                "",
            ),
            "the column header (line 5) has no `time_s` column",
        ),
        (
            "truncated.csv",
            good.trim_end()
                .rsplit_once(',')
                .unwrap()
                .0
                .rsplit_once(',')
                .unwrap()
                .0
                .to_string(),
            "part-way through this row",
        ),
        (
            "empty_rows.csv",
            log_text(1.0, &[(0.0, None, "gap"), (1.0, None, "gap")]),
            "no valid rows",
        ),
        (
            "foreign.csv",
            "time,value\n1,2\n".into(),
            "not a dbtrail log",
        ),
        (
            "letters.csv",
            good.replace("0,x,10,1,", "0,x,10,abc,"),
            ":6: mean_dbm: `abc` is not a number",
        ),
        (
            "binary.csv",
            String::from_utf8_lossy(b"# dbtrail\n\xff\xfe").into_owned(),
            "not a dbtrail log",
        ),
    ];
    for (name, text, want) in cases {
        let path = dir.join(name);
        std::fs::write(&path, text).unwrap();
        let out = dbtrail(&["report", path.to_str().unwrap()]);
        assert_eq!(out.status.code(), Some(2), "{name}");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(stderr.contains(want), "{name}: `{stderr}` lacks `{want}`");
    }
    let raw = dir.join("raw.csv");
    std::fs::write(&raw, b"# dbtrail\n\xff\xfe\n").unwrap();
    let out = dbtrail(&["report", raw.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not UTF-8"));
}

// Source: worked example — the same three rows with the columns in another order give
// the same report: a log is read by its header names.
#[test]
fn log_columns_are_found_by_name_in_any_order() {
    let rows = [
        (0.0, Some(1.0), ""),
        (1.0, Some(3.0), ""),
        (2.0, None, "gap"),
    ];
    let text = log_text(1.0, &rows);
    let (context, table) = text.split_at(text.find("time_s").unwrap());
    let order = [7, 3, 0, 2, 1, 4, 5, 6];
    let reordered: String = table
        .lines()
        .map(|l| {
            let cells: Vec<&str> = l.split(',').collect();
            order.map(|i| cells[i]).join(",") + "\n"
        })
        .collect();
    let options = ReportOptions::default();
    let plain = analysed(&text, &options);
    let swapped = analysed(&format!("{context}{reordered}"), &options);
    assert_eq!(
        serde_json::to_value(&plain).unwrap(),
        serde_json::to_value(&swapped).unwrap()
    );
    // Mean over watts of 1 dBm and 3 dBm: 10·log10((1.2589 + 1.9953)/2) = 2.1141 dBm.
    assert!((plain.mean_dbm - 2.1141).abs() < 1e-3, "{}", plain.mean_dbm);
}

#[test]
fn json_has_exactly_the_documented_keys() {
    let dir = scratch("json");
    let log = dir.join("j.csv");
    std::fs::write(
        &log,
        log_text(
            1.0,
            &[
                (0.0, Some(1.0), ""),
                (1.0, Some(1.2), ""),
                (2.0, Some(1.1), ""),
            ],
        ),
    )
    .unwrap();
    let out = dbtrail(&["report", log.to_str().unwrap(), "--json"]);
    let value: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let mut keys: Vec<&str> = value
        .as_object()
        .unwrap()
        .keys()
        .map(String::as_str)
        .collect();
    keys.sort_unstable();
    assert_eq!(
        keys,
        [
            "drift_db_per_hour",
            "drift_stderr_db_per_hour",
            "duration_s",
            "flagged_rows",
            "gap_s",
            "gaps",
            "max_dbm",
            "mean_dbm",
            "mean_w",
            "min_dbm",
            "pk_pk_db",
            "samples",
            "settled_after_s",
            "std_db"
        ]
    );
}

#[test]
fn an_existing_plot_is_never_replaced_without_force() {
    let dir = scratch("plot-exists");
    let log = dir.join("run.csv");
    std::fs::write(
        &log,
        log_text(1.0, &[(0.0, Some(1.0), ""), (1.0, Some(1.5), "")]),
    )
    .unwrap();
    let plot = dir.join("run.svg");
    std::fs::write(&plot, "keep me\n").unwrap();
    let (log_arg, plot_arg) = (log.to_str().unwrap(), plot.to_str().unwrap());
    let refused = dbtrail(&["report", log_arg, "--plot", plot_arg]);
    assert_eq!(refused.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&refused.stderr).contains("--force"));
    assert_eq!(std::fs::read_to_string(&plot).unwrap(), "keep me\n");
    let forced = dbtrail(&["report", log_arg, "--plot", plot_arg, "--force"]);
    assert!(forced.status.success());
    assert!(std::fs::read_to_string(&plot).unwrap().starts_with("<svg"));
}
