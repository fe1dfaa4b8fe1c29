//! The numerical core checked against values from outside the project: scipy and mpmath
//! fixtures in tests/reference/ (written by tests/reference/make_fixtures.py) and the
//! published check values in ../shared/REFERENCES.md.

use dbtrail::detector::{
    table::leave_one_out_db, Axis, CalPoint, Detector, DiodeDetector, TableDetector,
};
use dbtrail::maths::pchip::Pchip;
use dbtrail::maths::special::{i0, i0e, ln_i0, thermal_voltage};
use dbtrail::units::{Power, VoltageForm};

mod common;

use common::{floats, reference_fixture as fixture};

fn rel_err(got: f64, want: f64) -> f64 {
    if want == 0.0 {
        got.abs()
    } else {
        ((got - want) / want).abs()
    }
}

// Source: scipy.interpolate.PchipInterpolator (scipy 1.17.1), tests/reference/pchip.json.
#[test]
fn pchip_matches_scipy_to_1e9() {
    let data = fixture("pchip.json");
    for case in data["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let p = Pchip::new(floats(&case["x"]), floats(&case["y"])).unwrap();
        for (got, want) in p.slopes().iter().zip(floats(&case["slopes"])) {
            assert!(
                (got - want).abs() <= 1e-9 * (1.0 + want.abs()),
                "{name}: slope {got} vs {want}"
            );
        }
        for (t, want) in floats(&case["xq"]).into_iter().zip(floats(&case["yq"])) {
            let got = p.eval(t);
            assert!(
                (got - want).abs() <= 1e-9 * (1.0 + want.abs()),
                "{name}: p({t}) = {got}, scipy {want}"
            );
        }
    }
}

// Source: mpmath besseli(0, x) at 40 digits, cross-checked with scipy.special.i0/i0e,
// tests/reference/bessel_i0.json.
#[test]
fn bessel_i0_matches_mpmath() {
    let data = fixture("bessel_i0.json");
    for point in data["points"].as_array().unwrap() {
        let x = point["x"].as_f64().unwrap();
        let want_e = point["i0e"].as_f64().unwrap();
        assert!(
            rel_err(i0e(x), want_e) < 1e-13,
            "i0e({x}) = {} vs {want_e}",
            i0e(x)
        );
        if x >= 1.0 {
            let want_ln = point["i0"].as_f64().map_or(x + want_e.ln(), f64::ln);
            assert!(rel_err(ln_i0(x), want_ln) < 1e-12, "ln_i0({x})");
        }
        match point["i0"].as_f64() {
            Some(want) => assert!(
                rel_err(i0(x), want) < 1e-12,
                "i0({x}) = {} vs {want}",
                i0(x)
            ),
            None => assert!(i0(x).is_infinite(), "i0({x}) should overflow"),
        }
    }
}

fn diode(n: f64, vl: f64, t: f64) -> DiodeDetector {
    DiodeDetector::new(n, vl, t, 50.0, (-30.0, 20.0))
}

// Source: mpmath at 40 digits (findroot on the diode current balance), tests/reference/diode.json.
#[test]
fn diode_output_matches_mpmath_solution() {
    let data = fixture("diode.json");
    for case in data["cases"].as_array().unwrap() {
        let n = case["n"].as_f64().unwrap();
        let vl = case["vl"].as_f64().unwrap_or(f64::INFINITY);
        let t = case["t"].as_f64().unwrap();
        let vpk = case["vpk"].as_f64().unwrap();
        let want = case["vo"].as_f64().unwrap();
        let det = diode(n, vl, t);
        let got = det.output_for_peak(vpk);
        assert!(
            rel_err(got, want) < 1e-12,
            "n={n} vl={vl} T={t} vpk={vpk}: {got} vs {want}"
        );
        assert!(
            rel_err(det.peak_for_output(want), vpk) < 1e-11,
            "inverse at vpk={vpk}"
        );
    }
}

// Source: ../shared/REFERENCES.md, diode check values computed with mpmath (30 digits).
#[test]
fn diode_reference_check_values() {
    let open = diode(1.0, f64::INFINITY, 300.0);
    assert!(rel_err(open.output_for_peak(1e-3), 9.66953e-6) < 1e-6);
    assert!(rel_err(open.output_for_peak(1.0), 0.929079) < 1e-6);
    let loaded = diode(1.05, 0.3, 300.0);
    for (vpk, want) in [(0.01, 0.837614e-3), (0.1, 53.9814e-3), (1.0, 0.888823)] {
        assert!(
            rel_err(loaded.output_for_peak(vpk), want) < 1e-6,
            "vpk {vpk}"
        );
    }
}

// Source: ../shared/REFERENCES.md: any Is and RL with the same product give the same curve.
#[test]
fn diode_curve_depends_only_on_is_times_rl() {
    let (is_a, rl_a) = (3e-6, 100e3);
    let (is_b, rl_b) = (30e-9, 10e6);
    let a = diode(1.05, is_a * rl_a, 300.0);
    let b = diode(1.05, is_b * rl_b, 300.0);
    for vpk in [0.003, 0.05, 0.7, 4.0] {
        assert!(rel_err(a.output_for_peak(vpk), b.output_for_peak(vpk)) < 1e-12);
    }
}

// Source: ../shared/REFERENCES.md, small-signal limit Vo ≈ Vpk²/(4·n·Vt) for large V_L
// (square law) and large-signal limit Vo ≈ Vpk − n·Vt·ln sqrt(2π·Vpk/(n·Vt)) (open circuit).
#[test]
fn diode_square_law_and_linear_limits() {
    let n = 1.1;
    let n_vt = n * thermal_voltage(300.0);
    let det = diode(n, 1e6, 300.0);
    for vpk in [1e-5, 1e-4, 3e-4] {
        let square_law = vpk * vpk / (4.0 * n_vt);
        assert!(
            rel_err(det.output_for_peak(vpk), square_law) < 0.01 * (vpk / 1e-3),
            "vpk {vpk}"
        );
    }
    let open = diode(n, f64::INFINITY, 300.0);
    for vpk in [5.0, 20.0, 100.0] {
        let linear = vpk - n_vt * (2.0 * std::f64::consts::PI * vpk / n_vt).sqrt().ln();
        // The next term of the expansion is about n·Vt²/(8·Vpk).
        assert!(
            (open.output_for_peak(vpk) - linear).abs() < n_vt * n_vt / vpk,
            "vpk {vpk}"
        );
    }
}

fn diode_points(det: &DiodeDetector, levels: impl Iterator<Item = f64>) -> Vec<CalPoint> {
    levels
        .map(|dbm| CalPoint::new(dbm, det.volts_at(dbm)))
        .collect()
}

// Source: worked example — points made with known n and V_L must give them back.
#[test]
fn diode_fit_recovers_known_parameters() {
    for (n, vl) in [(1.05, 0.3), (1.2, 0.02), (1.02, 5.0)] {
        let truth = diode(n, vl, 300.0);
        let points = diode_points(&truth, (-30..=20).step_by(5).map(f64::from));
        let fit = DiodeDetector::fit(&points, 300.0, 50.0).unwrap();
        assert!(
            rel_err(fit.detector.n(), n) < 1e-6,
            "n {} vs {n}",
            fit.detector.n()
        );
        assert!(
            rel_err(fit.detector.vl(), vl) < 1e-5,
            "vl {} vs {vl}",
            fit.detector.vl()
        );
        assert!(fit.at_bound.is_empty());
    }
}

// Source: common practice (an inverse must undo its forward map); target 1e-9 dB.
#[test]
fn diode_inverse_of_forward_within_1e9_db() {
    for (n, vl) in [(1.05, 0.3), (1.0, f64::INFINITY), (1.3, 1e-3)] {
        let det = diode(n, vl, 290.0);
        let mut dbm = -60.0;
        while dbm <= 40.0 {
            let back = det.dbm_at(det.volts_at(dbm));
            assert!((back - dbm).abs() < 1e-9, "n={n} vl={vl}: {dbm} -> {back}");
            dbm += 0.37;
        }
    }
}

// Source: common practice — a diode's output follows a power law of its input in both the
// square-law and peak regions, so dBm is nearly straight against ln(volts). With points
// every 3 dB, PCHIP on ln volts should beat PCHIP on volts by several times.
#[test]
fn log_volts_axis_cuts_interpolation_error_several_fold() {
    let truth = diode(1.05, 0.3, 300.0);
    let points = diode_points(&truth, (-30..=21).step_by(3).map(f64::from));
    let worst = |axis| {
        let table = TableDetector::new(&points, axis).unwrap();
        (0..points.len() - 1)
            .map(|i| {
                let mid = points[i].dbm + 1.5;
                (table.dbm_at(truth.volts_at(mid)) - mid).abs()
            })
            .fold(0.0, f64::max)
    };
    let (log_axis, linear_axis) = (worst(Axis::LogVolts), worst(Axis::Volts));
    assert!(
        linear_axis > 4.0 * log_axis,
        "log-volts {log_axis} dB, volts {linear_axis} dB"
    );
    assert!(log_axis < 0.05, "log-volts worst error {log_axis} dB");
}

// Source: common practice (leaving a point out of a table estimates the error between points).
#[test]
fn leave_one_out_is_small_on_a_smooth_curve_and_absent_at_the_ends() {
    let truth = diode(1.05, 0.3, 300.0);
    let points = diode_points(&truth, (-30..=21).step_by(3).map(f64::from));
    let errors = leave_one_out_db(&points, Axis::LogVolts);
    assert!(errors[0].is_none() && errors[errors.len() - 1].is_none());
    let interior: Vec<f64> = errors.iter().flatten().copied().collect();
    assert_eq!(interior.len(), points.len() - 2);
    assert!(
        interior.iter().all(|e| e.abs() < 0.3 && *e != 0.0),
        "{interior:?}"
    );
}

// Source: ../shared/REFERENCES.md power table: 0 dBm in 50 Ω is 316.2 mVpk.
#[test]
fn diode_input_power_is_stated_at_the_profile_impedance() {
    let det = diode(1.05, 0.3, 300.0);
    let vpk = Power::from_dbm(0.0).volts(50.0, VoltageForm::Peak);
    assert!(rel_err(vpk, 0.3162) < 1e-4);
    assert!(rel_err(det.volts_at(0.0), det.output_for_peak(vpk)) < 1e-15);
}

mod properties {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(400))]

        // Source: common practice (an inverse must undo its forward map), over the whole
        // parameter range the fit may return.
        #[test]
        fn diode_inverse_of_forward_anywhere(
            n in 0.8f64..3.0, ln_vl in (1e-5f64).ln()..(1e3f64).ln(), t in 200.0f64..400.0,
            dbm in -70.0f64..45.0,
        ) {
            let det = diode(n, ln_vl.exp(), t);
            let volts = det.volts_at(dbm);
            prop_assert!(volts > 0.0 && volts.is_finite());
            prop_assert!((det.dbm_at(volts) - dbm).abs() < 1e-9);
        }

        #[test]
        fn table_is_monotone_between_and_beyond_points(
            steps in proptest::collection::vec(0.01f64..1.0, 2..12), probe in 0.0f64..1.0,
        ) {
            let mut volts = 0.005;
            let points: Vec<CalPoint> = steps.iter().enumerate().map(|(i, s)| {
                volts += s;
                CalPoint::new(-30.0 + 3.0 * i as f64, volts)
            }).collect();
            for axis in [Axis::LogVolts, Axis::Volts] {
                let table = TableDetector::new(&points, axis).unwrap();
                let v = 0.5 * points[0].volts + probe * 2.0 * volts;
                prop_assert!(table.dbm_at(v * 1.001) > table.dbm_at(v));
                prop_assert!((table.volts_at(table.dbm_at(v)) - v).abs() < 1e-9 * v.max(1.0));
            }
        }
    }
}
