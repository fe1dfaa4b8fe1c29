//! A run and its report written by hand, for the tests of the table and the plot: a
//! warm-up on a drift with an Allan deviation, which the library's maths may not give
//! for any log today.

use std::collections::BTreeMap;

use dbtrail::report::allan::AllanPoint;
use dbtrail::report::soak::{SoakFit, SoakModel, Warmup};
use dbtrail::report::{LogRow, Report, Run, Spacing};
use dbtrail::stats::Bound;

/// A 3 h run of 10 s rows that follows a warm-up on a drift, with the report a
/// warm-up fit would give, written by hand: the figures are the drawing's input, not
/// claims about the maths.
pub fn warm_run(hours: f64) -> (Run, Report) {
    let fit = SoakFit {
        model: SoakModel::Warmup,
        choice: "by hand".into(),
        level_dbm: 29.8,
        slope_db_per_s: -0.12 / 3600.0,
        warmup: Some(Warmup {
            amplitude_db: -0.6,
            tau_s: 480.0,
        }),
        warmup_s: Some(480.0 * 6f64.ln()),
        still_warming: false,
        warmup_tested: true,
    };
    let n = (hours * 360.0) as usize;
    let rows: Vec<LogRow> = (0..n)
        .map(|i| {
            let t = i as f64 * 10.0;
            let mean = fit.at(t) + 0.01 * (t / 37.0).sin();
            LogRow {
                t,
                samples: 10_000,
                mean_dbm: Some(mean),
                min_dbm: Some(mean - 0.02),
                max_dbm: Some(mean + 0.02),
                flags: Vec::new(),
                bound: Bound::Exact,
                averaged: 10_000,
                u_db: None,
            }
        })
        .collect();
    let means: Vec<f64> = rows.iter().filter_map(|r| r.mean_dbm).collect();
    let (lo, hi) = means
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &m| {
            (a.min(m), b.max(m))
        });
    let report = Report {
        duration_s: n as f64 * 10.0,
        reduced_to_s: None,
        samples: 10_000 * n as u64,
        mean_dbm: Some(29.7),
        mean_w: Some(0.933),
        mean_bound: Bound::Exact,
        mean_u_db: None,
        u_leaves_out: None,
        min_dbm: lo - 0.02,
        min_bound: Bound::Exact,
        max_dbm: hi + 0.02,
        max_bound: Bound::Exact,
        pk_pk_db: hi - lo + 0.04,
        std_db: 0.1,
        model: SoakModel::Warmup,
        model_choice: "by hand".into(),
        warmup_s: fit.warmup_s,
        warmup_tau_s: Some(480.0),
        warmup_amplitude_db: Some(-0.6),
        drift_from_s: fit.warmup_s.unwrap_or(0.0),
        drift_db_per_hour: Some(-0.12),
        drift_stderr_db_per_hour: Some(0.004),
        drift_stderr_method: Some("by hand"),
        drift_missing: None,
        drift_whole_db_per_hour: Some(-0.05),
        drift_whole_stderr_db_per_hour: Some(0.01),
        drift_whole_missing: None,
        allan: (0..9)
            .map(|k| {
                let tau = 10.0 * 2f64.powi(k);
                AllanPoint {
                    tau_s: tau,
                    adev_db: 0.01 / (tau / 10.0).sqrt() + 2e-5 * tau,
                    pairs: (n + 1).saturating_sub(2 << k),
                }
            })
            .collect(),
        fit,
        settled_after_s: Some(480.0 * 6f64.ln()),
        gaps: 1,
        gap_s: 300.0,
        flagged_rows: BTreeMap::new(),
        drift_at_start_dbm: 29.8,
        start_s: 0.0,
        gap_spans: vec![(5000.0, 5300.0)],
        uncompensated: None,
        temperature_c: None,
        zero: None,
    };
    let run = Run {
        number: 1,
        first_line: 1,
        context: vec![
            "dbtrail 0.1.0 record".into(),
            "profile: hand (by hand); sha256 0".into(),
            "frequency: 433.92MHz; offset +20 dB".into(),
            "started: 2026-12-02T10:00:00.000Z".into(),
        ],
        spacing: Spacing::Interval(10.0),
        per_sample: false,
        rows,
        resumed_lines: Vec::new(),
        reduced_to_s: None,
    };
    (run, report)
}
