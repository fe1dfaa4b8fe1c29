//! Detector models across temperature, checked against physics from outside the project:
//! the saturation current's temperature law evaluated directly by mpmath
//! (tests/reference/is_law.json, written by tests/reference/make_is_law_fixture.py) and
//! the square-law detector's 1/T dependence.

use dbtrail::detector::thermal::{Curve, ThermalModel};
use dbtrail::detector::{CalPoint, Detector, DiodeDetector, LogAmpDetector, SaturationLaw};
use std::sync::Arc;

mod common;

use common::reference_fixture as fixture;

fn number(case: &serde_json::Value, key: &str) -> f64 {
    case[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} in {case}"))
}

// Source: mpmath 1.3.0 at 40 digits, tests/reference/is_law.json: Is(T)/Is(T0) =
// (T/T0)^(XTI/n)·exp((T/T0 − 1)·EG/(n·Vt)), and the loaded peak detector's output with
// V_L following it.
#[test]
fn the_saturation_law_and_the_output_at_temperature_match_mpmath() {
    let data = fixture("is_law.json");
    let cases = data["cases"].as_array().unwrap();
    assert!(cases.len() > 300);
    for case in cases {
        let [t, t0, n, xti, eg_ev, vl0, vpk] =
            ["t", "t0", "n", "xti", "eg_ev", "vl0", "vpk"].map(|k| number(case, k));
        let law = SaturationLaw { xti, eg_ev };
        let ratio = law.ratio(t, t0, n);
        let want = number(case, "ratio");
        assert!(
            ((ratio - want) / want).abs() < 1e-12,
            "{case}: ratio {ratio}"
        );
        let diode = DiodeDetector::new(n, vl0, t0, 50.0, (-30.0, 10.0)).with_law(law);
        let vo = diode.at_kelvin(t).output_for_peak(vpk);
        let want = number(case, "vo");
        assert!(((vo - want) / want).abs() < 1e-9, "{case}: vo {vo}");
    }
}

// Source: common practice. In the square-law region (Vpk ≪ n·Vt) ln I0(x) ≈ x²/4, and a
// lightly loaded diode (V_L ≫ n·Vt, so that ln(1 + Vo/V_L) ≈ 0) settles where
// Vo/(n·Vt) = x²/4 with x = Vpk/(n·Vt): Vo = Vpk²/(4·n·Vt), proportional to 1/T. From 300 K
// to 310 K the output for one input power falls by 10·log10(300/310) = −0.1424 dB, and a
// detector calibrated at 300 K reads that input 0.142 dB low at 310 K.
#[test]
fn a_lightly_loaded_square_law_diode_reads_0_142_db_low_10_k_warmer() {
    let at_300 = DiodeDetector::new(1.05, 5e3, 300.0, 50.0, (-50.0, -20.0));
    let at_310 = at_300.at_kelvin(310.0);
    let dbm = -45.0;
    let ratio_db = 10.0 * (at_310.volts_at(dbm) / at_300.volts_at(dbm)).log10();
    assert!((ratio_db - -0.1424).abs() < 0.002, "{ratio_db}");
    let read = at_300.dbm_at(at_310.volts_at(dbm)) - dbm;
    assert!((read - -0.142).abs() < 0.002, "{read}");
}

// Source: common practice. A heavily loaded diode (V_L ≪ n·Vt) in the square-law region
// gives Vo ≈ V_L·x²/4 with x = Vpk/(n·Vt): proportional to Is/T², which rises with
// temperature since Is does far faster than T². Its output must rise with temperature, by
// 10·log10(ratio·(T0/T)²) dB.
#[test]
fn a_heavily_loaded_square_law_diode_rises_with_temperature_as_is_over_t_squared() {
    let law = SaturationLaw::default();
    let at_300 = DiodeDetector::new(1.05, 1e-5, 300.0, 50.0, (-50.0, -20.0));
    let at_310 = at_300.at_kelvin(310.0);
    let dbm = -45.0;
    let got_db = 10.0 * (at_310.volts_at(dbm) / at_300.volts_at(dbm)).log10();
    let want_db = 10.0 * (law.ratio(310.0, 300.0, 1.05) * (300.0f64 / 310.0).powi(2)).log10();
    assert!(got_db > 1.0, "{got_db}");
    assert!((got_db - want_db).abs() < 0.01, "{got_db} vs {want_db}");
}

/// Points of a diode at `kelvin` (volts from the model itself), one per level.
fn diode_points(diode: &DiodeDetector, kelvin: f64, levels: &[f64]) -> Vec<CalPoint> {
    let warm = diode.at_kelvin(kelvin);
    levels
        .iter()
        .map(|&dbm| CalPoint::new(dbm, warm.volts_at(dbm)))
        .collect()
}

// Source: worked example: points computed at 288 K and 318 K from a diode with known n and
// V_L at 300 K (its law checked against mpmath above) must give those parameters back from
// one fit over both sets.
#[test]
fn one_diode_fit_over_two_temperatures_recovers_the_parameters() {
    let truth = DiodeDetector::new(1.08, 0.02, 300.0, 50.0, (-30.0, 10.0));
    let levels: Vec<f64> = (0..9).map(|i| -30.0 + 5.0 * i as f64).collect();
    let mut points = diode_points(&truth, 288.0, &levels);
    points.extend(diode_points(&truth, 318.0, &levels));
    let kelvins: Vec<f64> = (0..points.len())
        .map(|i| if i < levels.len() { 288.0 } else { 318.0 })
        .collect();
    let fit =
        DiodeDetector::fit_at(&points, &kelvins, 300.0, 50.0, SaturationLaw::default()).unwrap();
    let d = fit.detector;
    assert!((d.n() - 1.08).abs() < 1e-6, "n {}", d.n());
    assert!(((d.vl() - 0.02) / 0.02).abs() < 1e-5, "vl {}", d.vl());
    // A fit at one assumed temperature (the old way) cannot match both sets.
    let one = DiodeDetector::fit(&points, 300.0, 50.0);
    assert!(one.is_err(), "repeated levels cannot make one curve");
}

// Source: worked example: for two log-amp lines, the reading halfway between their
// temperatures is the mean of the two lines' readings: intercept and 1/slope move linearly
// with temperature (here 25 mV/dB at −60 dBm at 280 K, 24 mV/dB at −58 dBm at 320 K).
#[test]
fn between_two_log_amp_lines_the_reading_is_their_temperature_weighted_mean() {
    let cold = LogAmpDetector::new(0.025, -60.0, (-55.0, 0.0));
    let warm = LogAmpDetector::new(0.024, -58.0, (-55.0, 0.0));
    let points = [CalPoint::new(-55.0, 0.125), CalPoint::new(0.0, 1.5)];
    let model = ThermalModel::curves(
        vec![
            Curve::new(320.0, Arc::new(warm.clone()), &points),
            Curve::new(280.0, Arc::new(cold.clone()), &points),
        ],
        280.0,
        (280.0, 320.0),
    )
    .unwrap();
    assert_eq!(model.range_k(), (280.0, 320.0));
    let at = model.at_kelvin(290.0);
    assert!(!at.outside);
    for volts in [0.2, 0.8, 1.4] {
        let want = 0.75 * cold.dbm_at(volts) + 0.25 * warm.dbm_at(volts);
        let got = at.detector.dbm_at(volts);
        assert!((got - want).abs() < 1e-12, "{volts} V: {got} vs {want}");
        assert!((at.detector.volts_at(got) - volts).abs() < 1e-9);
    }
    let below = model.at_kelvin(270.0);
    assert!(below.outside);
    assert_eq!(below.detector.dbm_at(0.8), cold.dbm_at(0.8));
}

// Source: the law's domain: a diode calibrated at 290 K and 310 K is trusted 10 K beyond
// (a choice, docs/calibration.md) and flagged outside that.
#[test]
fn a_diode_is_outside_its_range_ten_kelvin_past_its_calibration() {
    let d = DiodeDetector::new(1.05, 0.02, 300.0, 50.0, (-30.0, 10.0));
    let model = ThermalModel::diode(d, (-30.0, 10.0), &[290.0, 310.0]);
    assert_eq!(model.range_k(), (280.0, 320.0));
    assert!(!model.at_kelvin(319.0).outside);
    assert!(model.at_kelvin(321.0).outside);
    assert!(model.at_kelvin(279.0).outside);
}

// Source: the rule in docs/calibration.md ("Temperature"): between two sets the model's
// uncertainty holds each curve's own (mixed as the readings are) and, in quadrature, a
// rectangular interpolation error of half-width 2·w·(1 − w)·|cold − warm| (worked here at
// w = 1/4: 0.375 of the gap, divided by √3), nothing of it on a set itself.
#[test]
fn between_two_sets_the_uncertainty_holds_the_interpolation() {
    let line = |slope: f64, intercept: f64| {
        let points: Vec<CalPoint> = [-50.0, -40.0, -30.0, -20.0, -10.0, 0.0]
            .iter()
            .map(|&dbm| CalPoint::new(dbm, slope * (dbm - intercept)))
            .collect();
        (LogAmpDetector::fit(&points).unwrap(), points)
    };
    let (cold, cold_points) = line(0.025, -60.0);
    let (warm, warm_points) = line(0.024, -57.0);
    let model = ThermalModel::curves(
        vec![
            Curve::new(280.0, Arc::new(cold.clone()), &cold_points),
            Curve::new(320.0, Arc::new(warm.clone()), &warm_points),
        ],
        280.0,
        (280.0, 320.0),
    )
    .unwrap();
    let dbm = -25.0;
    let at = model.at_kelvin(290.0);
    let volts = at.detector.volts_at(dbm);
    let gap = (cold.dbm_at(volts) - warm.dbm_at(volts)).abs();
    assert!(gap > 2.0, "{gap}");
    let (uc, uw) = (cold.model_u_db(dbm).unwrap(), warm.model_u_db(dbm).unwrap());
    let curves = uc + 0.25 * (uw - uc);
    let between = 0.375 * gap / 3f64.sqrt();
    let want = curves.hypot(between);
    let got = at.detector.model_u_db(dbm).unwrap();
    assert!((got - want).abs() < 1e-9, "{got} vs {want}");
    assert_eq!(model.at_kelvin(280.0).detector.model_u_db(dbm), Some(uc));
}
