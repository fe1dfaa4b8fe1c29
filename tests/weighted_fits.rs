//! Weighted calibration fits and their parameters' covariance, checked against
//! scipy.optimize.curve_fit (tests/reference/weighted_fits.json, written by
//! tests/reference/make_fit_fixtures.py), and the models' own uncertainty at a level.

use dbtrail::detector::covariance::chi_square_95;
use dbtrail::detector::table::leave_one_out_db;
use dbtrail::detector::{
    Axis, CalPoint, Detector, DiodeDetector, LogAmpDetector, PointU, TableDetector, Weighting,
};
use serde_json::Value;

mod common;

use common::{floats, reference_fixture};

fn fixture() -> Value {
    reference_fixture("weighted_fits.json")
}

/// The fixture's fit cases of one model.
fn cases_of(model: &str) -> Vec<Value> {
    let cases = fixture()["cases"].as_array().unwrap().clone();
    cases.into_iter().filter(|c| c["model"] == model).collect()
}

fn matrix(v: &Value) -> [[f64; 2]; 2] {
    let rows: Vec<Vec<f64>> = v.as_array().unwrap().iter().map(floats).collect();
    [[rows[0][0], rows[0][1]], [rows[1][0], rows[1][1]]]
}

/// The case's points, with its uncertainties stated as standard ones (absolute_sigma) or
/// as relative ones.
fn case_points(case: &Value) -> Vec<CalPoint> {
    let absolute = case["absolute_sigma"].as_bool().unwrap();
    let (dbm, volts, u) = (
        floats(&case["dbm"]),
        floats(&case["volts"]),
        floats(&case["u_volts"]),
    );
    (0..dbm.len())
        .map(|i| CalPoint {
            dbm: dbm[i],
            volts: volts[i],
            u_volts: if absolute {
                PointU::Standard(u[i])
            } else {
                PointU::Relative(u[i])
            },
        })
        .collect()
}

fn assert_close(got: f64, want: f64, rel: f64, what: &str) {
    assert!(
        (got - want).abs() <= rel * want.abs(),
        "{what}: {got}, expected {want}"
    );
}

fn assert_covariance(got: [[f64; 2]; 2], want: [[f64; 2]; 2], rel: f64, what: &str) {
    for i in 0..2 {
        for j in 0..2 {
            // The off-diagonal terms are checked against the scale of the diagonal ones.
            let scale = (want[i][i] * want[j][j]).sqrt();
            assert!(
                (got[i][j] - want[i][j]).abs() <= rel * scale,
                "{what} covariance[{i}][{j}]: {} against scipy's {}",
                got[i][j],
                want[i][j]
            );
        }
    }
}

// Source: scipy.optimize.curve_fit (scipy 1.17.1, sigma=, absolute_sigma=True and False),
// tests/reference/weighted_fits.json; the diode's parameters are (n, ln V_L).
#[test]
fn weighted_diode_fit_and_covariance_match_scipy_curve_fit() {
    for case in &cases_of("diode") {
        let points = case_points(case);
        let kelvin = case["kelvin"].as_f64().unwrap();
        let ohms = case["ohms"].as_f64().unwrap();
        let fit = DiodeDetector::fit(&points, kelvin, ohms).unwrap();
        let want = floats(&case["params"]);
        let what = format!("diode, absolute_sigma={}", case["absolute_sigma"]);
        assert_close(fit.detector.n(), want[0], 1e-7, &what);
        assert_close(fit.detector.vl().ln(), want[1], 1e-7, &what);
        let covariance = fit.detector.covariance().unwrap();
        assert_close(
            covariance.reduced_chi2 * covariance.dof as f64,
            case["chi_square"].as_f64().unwrap(),
            1e-6,
            &what,
        );
        assert_covariance(
            covariance.covariance,
            matrix(&case["covariance"]),
            1e-5,
            &what,
        );
    }
}

// Source: scipy.optimize.curve_fit (scipy 1.17.1) on a straight line with sigma=,
// tests/reference/weighted_fits.json; the line's parameters are (slope, volts at 0 dBm).
#[test]
fn weighted_log_amp_fit_and_covariance_match_scipy_curve_fit() {
    for case in &cases_of("log") {
        let fit = LogAmpDetector::fit(&case_points(case)).unwrap();
        let want = floats(&case["params"]);
        let what = format!("log, absolute_sigma={}", case["absolute_sigma"]);
        assert_close(fit.slope(), want[0], 1e-10, &what);
        assert_close(-fit.slope() * fit.intercept(), want[1], 1e-10, &what);
        let covariance = fit.covariance().unwrap();
        assert_covariance(
            covariance.covariance,
            matrix(&case["covariance"]),
            1e-8,
            &what,
        );
    }
}

// Source: scipy.stats.chi2.ppf(0.95, k) for k = 1 … 40, tests/reference/weighted_fits.json;
// the Wilson–Hilferty approximation falls short of it by at most 2.5 % at one degree of
// freedom, 1 % at two and 0.6 % from three on (so the test errs on the side of failing).
#[test]
fn chi_square_percentile_follows_scipy() {
    for row in fixture()["chi2_95"].as_array().unwrap() {
        let dof = row["dof"].as_u64().unwrap() as usize;
        let want = row["chi2_95"].as_f64().unwrap();
        let limit = match dof {
            1 => 0.025,
            2 => 0.01,
            _ => 0.006,
        };
        let got = chi_square_95(dof);
        assert!(got <= want, "{dof} degrees: {got} above scipy's {want}");
        assert_close(got, want, limit, &format!("{dof} degrees"));
    }
}

/// Points on a known log-amp line with the noise of each point drawn from `u`.
fn noisy_line(u: &[f64], seed: u64) -> Vec<CalPoint> {
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};
    let mut rng = rand_pcg::Pcg64::seed_from_u64(seed);
    u.iter()
        .enumerate()
        .map(|(i, &u)| {
            let dbm = -60.0 + 10.0 * i as f64;
            let noise = Normal::new(0.0, u).unwrap().sample(&mut rng);
            CalPoint {
                dbm,
                volts: 0.025 * (dbm + 84.0) + noise,
                u_volts: PointU::Standard(u),
            }
        })
        .collect()
}

// Source: worked example — two points 50 times noisier than the rest. Weighted least
// squares gives them 1/2500 of the weight, so the line's slope error over many seeded
// draws must be several times smaller than the unweighted fit's (the regression the
// issue named: the noisiest points dominated an unweighted fit).
#[test]
fn noisy_points_no_longer_dominate_the_fit() {
    let mut u = vec![0.0002; 7];
    u[0] = 0.01;
    u[1] = 0.01;
    let (mut weighted, mut unweighted) = (0.0, 0.0);
    for seed in 0..200 {
        let points = noisy_line(&u, seed);
        let plain: Vec<CalPoint> = points
            .iter()
            .map(|p| CalPoint::new(p.dbm, p.volts))
            .collect();
        weighted += (LogAmpDetector::fit(&points).unwrap().slope() - 0.025).powi(2);
        unweighted += (LogAmpDetector::fit(&plain).unwrap().slope() - 0.025).powi(2);
    }
    assert!(
        unweighted > 10.0 * weighted,
        "mean square slope error {unweighted} unweighted against {weighted} weighted"
    );
}

// Source: the rule in docs/calibration.md ("The model term"): standard uncertainties on
// every point that the residuals agree with give (JᵀWJ)⁻¹ unscaled and no residual term;
// the same points made 20 times noisier than stated fail the chi-square test, so the
// covariance is scaled by χ²/(n − 2) and the residual term comes in.
#[test]
fn residuals_beyond_the_stated_noise_enlarge_the_model_term() {
    let u = [0.0005; 9];
    let honest = LogAmpDetector::fit(&noisy_line(&u, 3)).unwrap();
    let c = honest.covariance().unwrap();
    assert_eq!(c.weighting, Weighting::Absolute);
    assert!(!c.residual_term && c.residual_u_db(-30.0) == 0.0);
    let understated: Vec<CalPoint> = noisy_line(&[0.01; 9], 3)
        .into_iter()
        .map(|p| CalPoint {
            u_volts: PointU::Standard(0.0005),
            ..p
        })
        .collect();
    let fit = LogAmpDetector::fit(&understated).unwrap();
    let c = fit.covariance().unwrap();
    assert!(c.residual_term && c.reduced_chi2 > 100.0, "{c:?}");
    assert!(fit.model_u_db(-30.0).unwrap() > 10.0 * honest.model_u_db(-30.0).unwrap());
}

// Source: propagation by hand for a line. With V = s·P + b0 and (s, b0) of covariance C,
// dBm = (V − b0)/s, so at a level P the gradient is (−P/s, −1/s) and u² = gᵀCg; with
// stated noise that the residuals agree with there is no residual term.
#[test]
fn log_amp_model_term_is_the_propagated_covariance() {
    let fit = LogAmpDetector::fit(&noisy_line(&[0.0005; 9], 5)).unwrap();
    let c = fit.covariance().unwrap();
    assert!(!c.residual_term);
    let s = fit.slope();
    for level in [-60.0, -25.0, 20.0] {
        let g = [-level / s, -1.0 / s];
        let m = c.covariance;
        let want =
            (g[0] * g[0] * m[0][0] + 2.0 * g[0] * g[1] * m[0][1] + g[1] * g[1] * m[1][1]).sqrt();
        assert_close(fit.model_u_db(level).unwrap(), want, 1e-9, "at {level} dBm");
    }
    // Narrowest near the weighted mean of the levels, wider towards the ends.
    assert!(fit.model_u_db(-20.0).unwrap() < fit.model_u_db(-60.0).unwrap());
    assert!(fit.model_u_db(-20.0).unwrap() < fit.model_u_db(20.0).unwrap());
}

// Source: the rule in docs/calibration.md ("The model term"): a model built from given
// parameters carries what its points say about parameters near those; parameters moved
// off the fit leave residuals, which enlarge the term.
#[test]
fn given_parameters_carry_the_covariance_their_points_give() {
    let points = noisy_line(&[0.0005; 9], 8);
    let fit = LogAmpDetector::fit(&points).unwrap();
    let same =
        LogAmpDetector::new(fit.slope(), fit.intercept(), fit.span_dbm()).with_covariance(&points);
    assert_close(
        same.model_u_db(-10.0).unwrap(),
        fit.model_u_db(-10.0).unwrap(),
        1e-9,
        "given the fitted parameters",
    );
    let moved = LogAmpDetector::new(fit.slope(), fit.intercept() + 0.5, fit.span_dbm())
        .with_covariance(&points);
    assert!(moved.model_u_db(-10.0).unwrap() > 0.4);
    assert_eq!(
        LogAmpDetector::new(0.025, -84.0, (-60.0, 20.0)).model_u_db(0.0),
        None
    );
}

// Source: the definition of the table's term in docs/calibration.md: each interior
// point's leave-one-out error (leave_one_out_db), interpolated linearly in level between
// interior points and held beyond them; none for a table without interior points.
#[test]
fn table_model_term_is_the_leave_one_out_error_interpolated() {
    let points: Vec<CalPoint> = [
        (-30.0, 0.002),
        (-20.0, 0.012),
        (-10.0, 0.08),
        (0.0, 0.4),
        (10.0, 1.3),
    ]
    .iter()
    .map(|&(dbm, volts)| CalPoint::new(dbm, volts))
    .collect();
    let table = TableDetector::new(&points, Axis::LogVolts).unwrap();
    let errors: Vec<f64> = leave_one_out_db(&points, Axis::LogVolts)
        .into_iter()
        .flatten()
        .map(f64::abs)
        .collect();
    assert_eq!(errors.len(), 3);
    assert_eq!(table.model_u_db(-20.0), Some(errors[0]));
    assert_eq!(table.model_u_db(-28.0), Some(errors[0]));
    assert_close(
        table.model_u_db(-15.0).unwrap(),
        0.5 * (errors[0] + errors[1]),
        1e-12,
        "halfway",
    );
    assert_eq!(table.model_u_db(12.0), Some(errors[2]));
    let two = TableDetector::new(&points[..2], Axis::LogVolts).unwrap();
    assert_eq!(two.model_u_db(-25.0), None);
}

// Source: common practice — the standard uncertainty of a mean of N samples of spread σ
// is σ/√N; the quantisation of one count (1/√12) is added below half a count of spread;
// without N the figure is only relative.
#[test]
fn point_uncertainty_from_stored_counts() {
    let volts_per_count = 0.001;
    let PointU::Standard(u) = PointU::from_counts(Some(2.0), Some(64), volts_per_count) else {
        panic!("std_counts and samples give a standard uncertainty");
    };
    assert_close(u, 0.25e-3, 1e-12, "2 counts over √64");
    let PointU::Standard(u) = PointU::from_counts(Some(0.0), Some(100), volts_per_count) else {
        panic!("std_counts and samples give a standard uncertainty");
    };
    assert_close(u, 1e-3 / 12f64.sqrt(), 1e-12, "quantisation only");
    assert!(matches!(
        PointU::from_counts(Some(2.0), None, volts_per_count),
        PointU::Relative(u) if (u - 2e-3).abs() < 1e-15
    ));
    assert_eq!(
        PointU::from_counts(None, Some(64), volts_per_count),
        PointU::Unknown
    );
}

// Source: the fit's own stopping rule (a step must lower the SSE; the search ends when it
// no longer can) and scipy's curve_fit on the same points (n = 1.06036, V_L = 0.217198 V,
// computed with tests/reference/make_fit_fixtures.py's diode model, trf, 3-point
// Jacobian). A weighted diode fit whose n and ln V_L correlate at 0.998 used to zig-zag
// across the narrow valley, lowering the SSE a little each step, until it ran out of
// iterations and the profile was refused.
#[test]
fn a_weighted_diode_fit_along_a_narrow_valley_converges() {
    let volts_per_count = 1.2 / 1023.0;
    let measured = [
        (-12.0, 31.34375, 1.842323),
        (-9.0, 53.03125, 2.402745),
        (-6.0, 84.875, 2.01206),
        (-3.0, 133.1875, 1.533234),
        (0.0, 202.90625, 1.747983),
        (3.0, 304.1875, 1.874059),
        (6.0, 450.9375, 1.966453),
        (9.0, 661.40625, 2.029768),
    ];
    let points: Vec<CalPoint> = measured
        .iter()
        .map(|&(dbm, counts, std)| CalPoint {
            dbm,
            volts: counts * volts_per_count,
            u_volts: PointU::from_counts(Some(std), Some(32), volts_per_count),
        })
        .collect();
    let fit = DiodeDetector::fit(&points, 300.0, 50.0).unwrap();
    assert_close(fit.detector.n(), 1.06036, 1e-5, "n");
    assert_close(fit.detector.vl(), 0.217198, 1e-5, "V_L");
}

// Source: the rule in docs/calibration.md ("The model term"): for weighted points the
// residual term speaks only for the levels around it (the dB residuals interpolated), so
// large residuals of the noisy bottom points do not spread to the quiet top. With every
// uncertainty understated 20 times the chi-square test fails; at the top point the term
// must be that point's own residual, far below the residuals' pooled deviation.
#[test]
fn noisy_bottom_points_do_not_widen_the_residual_term_at_the_top() {
    let mut u = [0.0004; 9];
    u[0] = 0.02;
    u[1] = 0.02;
    let understated: Vec<CalPoint> = noisy_line(&u, 11)
        .into_iter()
        .zip(u)
        .map(|(p, u)| CalPoint {
            u_volts: PointU::Standard(u / 20.0),
            ..p
        })
        .collect();
    let fit = LogAmpDetector::fit(&understated).unwrap();
    let c = fit.covariance().unwrap();
    assert!(c.residual_term);
    let top = understated[8];
    let own = (fit.dbm_at(top.volts) - top.dbm).abs();
    assert_close(
        c.residual_u_db(top.dbm),
        own,
        1e-12,
        "the top point's own residual",
    );
    let errors: Vec<f64> = understated
        .iter()
        .map(|p| fit.dbm_at(p.volts) - p.dbm)
        .collect();
    let pooled = (errors.iter().map(|e| e * e).sum::<f64>() / 7.0).sqrt();
    assert!(own < 0.2 * pooled, "own {own} against pooled {pooled}");
}
