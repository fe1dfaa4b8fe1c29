//! The soak's warm-up model and drift checked against statsmodels' HAC standard error
//! (a committed fixture), a hand-worked bandwidth, Monte-Carlo logs of known truth, and
//! the demo soak whose truth the simulator states.

mod common;

use dbtrail::report::soak::{
    andrews_bartlett_lags, newey_west_slope, prewhitened_slope, SoakModel,
};
use dbtrail::report::{
    analyse, analyse_compensated, read_log, LogRow, Report, ReportOptions, Run, Spacing,
};
use dbtrail::sim::Scenario;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use rand_pcg::Pcg64;

const STEP_S: f64 = 10.0;

fn run_of(t_s: &[f64], dbm: &[f64]) -> Run {
    let rows = t_s
        .iter()
        .zip(dbm)
        .map(|(t, m)| LogRow {
            t: *t,
            samples: 100,
            mean_dbm: Some(*m),
            min_dbm: Some(*m),
            max_dbm: Some(*m),
            flags: Vec::new(),
            bound: dbtrail::stats::Bound::Exact,
            averaged: 100,
            u_db: Some(0.4),
        })
        .collect();
    Run {
        number: 1,
        first_line: 1,
        context: Vec::new(),
        spacing: Spacing::Interval(STEP_S),
        per_sample: false,
        rows,
        resumed_lines: Vec::new(),
        reduced_to_s: None,
    }
}

fn report_of(t_s: &[f64], dbm: &[f64]) -> Report {
    analyse(&run_of(t_s, dbm), "mc", &ReportOptions::default()).unwrap()
}

/// `n` values of stationary AR(1) noise with lag-1 correlation `rho` and standard
/// deviation `sigma` (innovations σ·√(1 − ρ²)).
fn ar1_noise(rng: &mut Pcg64, n: usize, rho: f64, sigma: f64) -> Vec<f64> {
    let innovation = Normal::new(0.0, sigma * (1.0 - rho * rho).sqrt()).unwrap();
    let mut x = Normal::new(0.0, sigma).unwrap().sample(rng);
    (0..n)
        .map(|_| {
            let now = x;
            x = rho * x + innovation.sample(rng);
            now
        })
        .collect()
}

fn times(n: usize) -> Vec<f64> {
    (0..n).map(|i| i as f64 * STEP_S).collect()
}

fn fixture() -> serde_json::Value {
    serde_json::from_str(include_str!("reference/hac.json")).unwrap()
}

fn floats(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn relative(got: f64, want: f64) -> f64 {
    ((got - want) / want).abs()
}

// Source: statsmodels 0.15.0, OLS(y, [1, t]).fit(cov_type="HAC", cov_kwds={"maxlags": L})
// (Bartlett weights 1 − j/(L + 1), use_correction False), written to
// tests/reference/hac.json by tests/reference/make_hac_fixture.py.
#[test]
fn newey_west_slope_error_matches_statsmodels_at_each_bandwidth() {
    let f = fixture();
    let (t, y) = (floats(&f["t_hours"]), floats(&f["dbm"]));
    let want_slope = f["slope_db_per_hour"].as_f64().unwrap();
    let by_lags = f["stderr_by_lags"].as_object().unwrap();
    assert_eq!(by_lags.len(), 6);
    for (lags, want) in by_lags {
        let lags: usize = lags.parse().unwrap();
        let got = newey_west_slope(&t, &y, lags).unwrap();
        assert!(relative(got.slope, want_slope) < 1e-10, "{got:?}");
        let want = want.as_f64().unwrap();
        assert!(
            relative(got.stderr, want) < 1e-9,
            "L = {lags}: {} vs statsmodels {want}",
            got.stderr
        );
    }
}

// Source: the same fixture's `prewhitened` case: the AR(1)-prewhitened estimate formed in
// make_hac_fixture.py with numpy and statsmodels' kernel sum `S_hac_simple`, and the
// reasoning of Andrews & Monahan (1992) for prewhitening and Andrews (1991) for the
// bandwidth.
#[test]
fn prewhitened_slope_error_matches_the_fixtures_independent_computation() {
    let f = fixture();
    let (t, y) = (floats(&f["t_hours"]), floats(&f["dbm"]));
    let want = &f["prewhitened"];
    let got = prewhitened_slope(&t, &y).unwrap();
    assert!(relative(got.rho, want["rho"].as_f64().unwrap()) < 1e-12);
    assert_eq!(got.lags as u64, want["lags"].as_u64().unwrap());
    assert!(relative(got.stderr, want["stderr"].as_f64().unwrap()) < 1e-9);
}

// Source: Andrews (1991), the AR(1) plug-in for the Bartlett kernel, S = 1.1447·(α·n)^(1/3),
// α = 4ρ²/((1 − ρ)²(1 + ρ)²) (formula from memory). By hand: ρ = 0.5, n = 100 gives
// α = 1/0.5625 = 1.7778, (177.78)^(1/3) = 5.6239, S = 6.4377, so 6 lags; ρ = 0.95,
// n = 720: α = 3.61/0.0095063 = 379.75, (273 421)^(1/3) = 64.93, S = 74.33, so 74 lags.
// The fixture holds the same formula evaluated in Python at four cases.
#[test]
fn andrews_bandwidth_matches_a_hand_computation_and_the_fixture() {
    assert_eq!(andrews_bartlett_lags(0.5, 100), 6);
    assert_eq!(andrews_bartlett_lags(0.95, 720), 74);
    assert_eq!(andrews_bartlett_lags(0.0, 720), 0);
    for case in fixture()["andrews_lags"].as_array().unwrap() {
        let (rho, n) = (case["rho"].as_f64().unwrap(), case["n"].as_u64().unwrap());
        assert_eq!(
            andrews_bartlett_lags(rho, n as usize) as u64,
            case["lags"].as_u64().unwrap(),
            "{case}"
        );
    }
}

/// Over `logs` zero-drift logs of AR(1) noise: the share whose drift lies beyond two of
/// its standard errors, and the share given a warm-up they do not have.
fn false_drift_rate(rho: f64, logs: u64) -> (f64, f64) {
    let t = times(720);
    let (mut beyond, mut warmups) = (0, 0);
    for seed in 0..logs {
        let mut rng = Pcg64::seed_from_u64(seed);
        let dbm: Vec<f64> = ar1_noise(&mut rng, t.len(), rho, 0.02)
            .iter()
            .map(|e| 30.0 + e)
            .collect();
        let report = report_of(&t, &dbm);
        let drift = report.drift_db_per_hour.unwrap();
        if drift.abs() > 2.0 * report.drift_stderr_db_per_hour.unwrap() {
            beyond += 1;
        }
        if report.model == SoakModel::Warmup {
            warmups += 1;
        }
    }
    (beyond as f64 / logs as f64, warmups as f64 / logs as f64)
}

/// Asserts the rate of `false_drift_rate` stays within 2 % to 10 %, and that at most 2 %
/// of the logs are given a warm-up (the choice's criterion is meant to refuse noise).
fn assert_false_drift_rate(rho: f64) {
    let (rate, warmups) = false_drift_rate(rho, 400);
    eprintln!(
        "rho {rho}: |drift| > 2 SE in {:.1} % of logs, a warm-up in {:.1} %",
        100.0 * rate,
        100.0 * warmups
    );
    assert!((0.02..=0.10).contains(&rate), "rho {rho}: {rate}");
    assert!(warmups <= 0.02, "rho {rho}: warm-up in {warmups}");
}

// Source: the definition of a standard error: with no drift, |drift| > 2·SE should happen
// in about 5 % of logs (the issue asks for 2 % to 10 %); the independent-residual error
// gave 64 % here. And the rule in docs/report.md ("The model"): the warm-up model is
// chosen only for a warm-up beyond the tolerance that stands clear of the noise, so logs
// of noise alone get a line. Monte-Carlo, fixed seeds, 400 logs of 720 rows of AR(1)
// noise, σ = 0.02 dB.
#[test]
fn zero_drift_in_noise_correlated_at_0_9_is_flagged_as_often_as_two_errors_promise() {
    assert_false_drift_rate(0.9);
}

// Source: as above, at ρ = 0.95 (the issue measured 77 % with the independent-residual
// error there).
#[test]
fn zero_drift_in_noise_correlated_at_0_95_is_flagged_as_often_as_two_errors_promise() {
    assert_false_drift_rate(0.95);
}

/// The demo soak's shape, as src/sim.rs writes it: a warm-up of −0.8 dB with τ = 480 s on
/// a drift of −0.12 dB/h.
fn warmup_truth(t: f64) -> f64 {
    30.0 - 0.8 * (-t / 480.0).exp() - 0.12 * t / 3600.0
}

/// The demo soak's shape at `t` plus AR(1) noise (ρ = 0.9, `sigma`) from `seed`.
fn noisy_warmup(t: &[f64], seed: u64, sigma: f64) -> Vec<f64> {
    let mut rng = Pcg64::seed_from_u64(seed);
    let noise = ar1_noise(&mut rng, t.len(), 0.9, sigma);
    t.iter()
        .zip(&noise)
        .map(|(t, e)| warmup_truth(*t) + e)
        .collect()
}

// Source: the definition of a standard error (±2·SE covers the truth in about 95 % of
// logs; the issue asks for at least 90 %). Monte-Carlo, fixed seeds: 400 logs of 3 h at
// 10 s of a known warm-up (A = −0.8 dB, τ = 480 s) and drift (−0.12 dB/h) plus AR(1)
// noise ρ = 0.9, σ = 0.02 dB.
#[test]
fn the_drift_after_a_known_warmup_is_covered_by_two_standard_errors() {
    let t = times(1080);
    let (mut covered, logs) = (0, 400);
    for seed in 0..logs {
        let dbm = noisy_warmup(&t, 1000 + seed, 0.02);
        let report = report_of(&t, &dbm);
        assert_eq!(
            report.model,
            SoakModel::Warmup,
            "seed {seed}: {}",
            report.model_choice
        );
        let drift = report.drift_db_per_hour.unwrap();
        if (drift + 0.12).abs() <= 2.0 * report.drift_stderr_db_per_hour.unwrap() {
            covered += 1;
        }
    }
    eprintln!("±2 SE covered the true drift in {covered} of {logs} logs");
    assert!(covered * 10 >= logs * 9, "{covered} of {logs}");
}

// Source: worked example — the warm-up term |A|·e^(−t/τ) falls to tol at t = τ·ln(|A|/tol):
// A = −0.8 dB, τ = 480 s, tol = 0.1 dB gives 480·ln 8 = 998.13 s. The issue asks that an 8 h
// log and its 1 h, 2 h and 4 h cuts agree within 10 %, and with the truth within 15 %;
// noise AR(1) ρ = 0.9, σ = 0.01 dB (at σ = 0.02 dB a 1 h cut strays up to 15 % from the
// 8 h log: an hour holds too little drift to tell it from the warm-up's tail), ten fixed
// seeds.
#[test]
fn the_warmup_time_does_not_depend_on_how_long_the_recording_goes_on() {
    let truth = 480.0 * 8f64.ln();
    let t = times(2880);
    for seed in 0..10 {
        let dbm = noisy_warmup(&t, 2000 + seed, 0.01);
        let whole = report_of(&t, &dbm).warmup_s.unwrap();
        assert!(
            relative(whole, truth) < 0.15,
            "seed {seed}: {whole} vs {truth}"
        );
        for hours in [1, 2, 4] {
            let rows = hours * 360;
            let cut = report_of(&t[..rows], &dbm[..rows]).warmup_s.unwrap();
            assert!(
                relative(cut, whole) < 0.10,
                "seed {seed}, {hours} h: {cut} vs {whole}"
            );
            assert!(
                relative(cut, truth) < 0.15,
                "seed {seed}, {hours} h: {cut} vs {truth}"
            );
        }
    }
}

// Source: the simulator's truth in src/sim.rs, `Scenario::Soak.true_dbm`: 30 dBm −
// 0.8 dB·e^(−t/480 s) − 0.12 dB/h·t, read here through the library (so a change to the
// scenario shows). The detector board also warms by 6 K with τ = 900 s
// (`board_kelvin`, through the diode's full saturation law); the demo profile reads the
// board's thermistor and compensates, so the compensated drift must be the transmitter's
// own within ±0.02 dB/h and τ near 480 s, while the rows' uncompensated means carry the
// board's warming besides (their drift is reported too, and differs).
#[test]
fn the_demo_soak_gives_back_the_simulators_late_drift_and_warmup() {
    let truth = |t: f64| Scenario::Soak.true_dbm(t);
    let late_slope = truth(3.0 * 3600.0) - truth(2.0 * 3600.0);
    assert!((late_slope + 0.12).abs() < 1e-6, "{late_slope}");
    assert!((truth(0.0) - (30.0 - 0.8)).abs() < 1e-12);

    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("soak.csv");
    common::succeeded([
        "record",
        "--demo",
        "soak",
        "--fast",
        "--duration",
        "3h",
        "--every",
        "10s",
        "--out",
        path.to_str().unwrap(),
    ]);
    let log = read_log(&std::fs::read(&path).unwrap(), "soak.csv", 1).unwrap();
    let run = &log.runs[0];
    let logged = log.compensation_of(run);
    let report = analyse_compensated(run, logged, "soak.csv", &ReportOptions::default()).unwrap();
    assert_eq!(report.model, SoakModel::Warmup, "{}", report.model_choice);
    let drift = report.drift_db_per_hour.unwrap();
    assert!((drift + 0.12).abs() <= 0.02, "late drift {drift} dB/h");
    let plain = report.uncompensated.as_ref().unwrap().db_per_hour.unwrap();
    assert!((plain - drift).abs() > 1e-3, "uncompensated {plain} dB/h");
    let board = report.temperature_c.as_ref().unwrap();
    // 300 K = 26.85 °C, warming 6 K·(1 − e^(−t/900 s)): 32.85 °C to 0.1 mK after 3 h.
    assert!((board.first.unwrap() - 26.85).abs() < 0.05, "{board:?}");
    assert!((board.max.unwrap() - 32.85).abs() < 0.02, "{board:?}");
    assert_eq!(board.rows_unknown, 0);
    let tau = report.warmup_tau_s.unwrap();
    assert!((tau - 480.0).abs() <= 0.05 * 480.0, "τ {tau} s");
    // The warm-up time follows from τ and A: 480·ln 8 = 998 s for the truth.
    let warmup = report.warmup_s.unwrap();
    assert!(relative(warmup, 998.13) < 0.05, "warm-up {warmup} s");
    assert!(report.drift_from_s == warmup && report.settled_after_s == Some(warmup));
}

// Source: the rule in docs/report.md ("The model"): a span of more than 4096 rows is
// thinned to means of consecutive rows before the fit, which must not move the figures
// beyond their own scatter. Fenced by the plain reference: the same rows fitted one by
// one through `soak::fit` and `soak::drift` directly.
#[test]
fn thinning_a_long_span_keeps_the_warmup_and_the_drift() {
    use dbtrail::report::soak::{drift, fit, MAX_MODEL_ROWS};
    let t: Vec<f64> = (0..3 * MAX_MODEL_ROWS).map(|i| i as f64 * 3.0).collect();
    let dbm = noisy_warmup(&t, 7, 0.01);
    let thinned = analyse(&run_of(&t, &dbm), "long", &ReportOptions::default()).unwrap();
    let u = vec![Some(0.4); t.len()];
    let full = fit(&t, &dbm, &u, 0.1);
    let full_warmup = full.warmup_s.unwrap();
    let settled: Vec<f64> = t
        .iter()
        .zip(&dbm)
        .map(|(t, m)| m - full.warmup_db(*t))
        .collect();
    let full_drift = drift(&t, &settled, full_warmup).unwrap();
    assert!(relative(thinned.warmup_s.unwrap(), full_warmup) < 0.01);
    let se = full_drift.stderr_db_per_hour.unwrap();
    let got = thinned.drift_db_per_hour.unwrap();
    assert!(
        (got - full_drift.db_per_hour).abs() < se,
        "{got} vs {full_drift:?}"
    );
    let thinned_se = thinned.drift_stderr_db_per_hour.unwrap();
    assert!(relative(thinned_se, se) < 0.3, "{thinned_se} vs {se}");
}

// Source: the rule in docs/report.md ("Too short"): a drift needs at least 30 rows after
// the warm-up, and the report says why when there are fewer. Worked example: τ = 150 s,
// A = −1 dB, tol = 0.1 dB give a warm-up time of 150·ln 10 = 345.4 s; 60 rows 10 s apart
// leave the 25 rows from 350 s to 590 s after it.
#[test]
fn a_run_too_short_after_its_warmup_gets_no_drift_and_says_why() {
    let level = |t: &[f64]| -> Vec<f64> {
        t.iter()
            .map(|t| 20.0 - (-t / 150.0).exp() - 0.1 * t / 3600.0)
            .collect()
    };
    let t = times(60);
    let dbm = level(&t);
    let report = report_of(&t, &dbm);
    assert_eq!(report.model, SoakModel::Warmup, "{}", report.model_choice);
    assert!((report.warmup_s.unwrap() - 150.0 * 10f64.ln()).abs() < 1.0);
    assert_eq!(report.drift_db_per_hour, None);
    assert_eq!(report.drift_stderr_db_per_hour, None);
    let why = report.drift_missing.unwrap();
    assert!(
        why.contains("only 25 rows") && why.contains("at least 30"),
        "{why}"
    );
    // The whole span has its 60 rows, but a line through the warm-up leaves residuals
    // that are a curve, correlated over more than half the rows: the second rule.
    assert_eq!(report.drift_whole_db_per_hour, None);
    let whole = report.drift_whole_missing.unwrap();
    assert!(whole.contains("against 60): record longer"), "{whole}");
    // With the rule's own count the drift is given: 30 rows from the warm-up time on.
    let longer = times(65);
    let report = report_of(&longer, &level(&longer));
    assert!((report.drift_db_per_hour.unwrap() + 0.1).abs() < 1e-3);
}
