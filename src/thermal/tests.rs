use proptest::prelude::*;

use super::*;
use crate::adc::DEFAULT_CLIP_MARGIN;

/// A 12-bit ADC at 3.3 V: full scale 4095 counts, the rail margin 20.475 counts.
fn adc() -> Adc {
    Adc::new(12, 3.3, 2.0, 7.0, DEFAULT_CLIP_MARGIN)
}

const BETA_10K_3950: NtcLaw = NtcLaw::Beta {
    r0_ohms: 10_000.0,
    t0_c: 25.0,
    beta_k: 3950.0,
};

/// A Steinhart–Hart set with c ≠ 0 as quoted for common 10 kΩ thermistors (from memory; it
/// reads about 24.7 °C at 10 kΩ). Only its shape matters here: the checks below are round
/// trips and a bisection of the forward law, not its published table.
const SH_10K: NtcLaw = NtcLaw::SteinhartHart {
    a: 1.009249522e-3,
    b: 2.378405444e-4,
    c: 2.019202697e-7,
};

fn ntc(law: NtcLaw, placement: NtcPlacement) -> Sensor {
    Sensor::Ntc(Ntc {
        law,
        fixed_ohms: 10_000.0,
        placement,
    })
}

/// A TMP36-like part: 10 mV/°C, 500 mV at 0 °C (750 mV at 25 °C; datasheet figures from
/// memory, common practice for this kind of sensor).
const LINEAR: Sensor = Sensor::Linear {
    volts_per_c: 0.010,
    volts_at_0c: 0.5,
};

/// Hundredths of a kelvin: the profile's defaults.
const CENTIKELVIN: Sensor = Sensor::Degrees {
    c_per_count: 0.01,
    c_at_zero: -273.15,
};

fn channel(sensor: Sensor) -> TemperatureChannel {
    TemperatureChannel {
        channel: 1,
        sensor,
        window_s: 5.0,
        u_c: 0.5,
    }
}

// Source: the β equation R = R0·exp(β(1/T − 1/T0)) (../shared/REFERENCES.md, from memory,
// recomputed): T = 273.15 K, T0 = 298.15 K, 1/T − 1/T0 = 3.0697569e-4 K⁻¹, times 3950 K is
// 1.2125540, exp of that 3.3620604, so R = 33 620.6 Ω at 0 °C for 10 kΩ at 25 °C.
#[test]
fn a_10k_3950_thermistor_reads_33_62_kilohms_at_0c_and_back() {
    let ohms = BETA_10K_3950.ohms_at(0.0);
    assert!((ohms - 33_620.6).abs() < 0.05, "{ohms}");
    assert!(BETA_10K_3950.celsius_at(ohms).abs() < 1e-9);
    assert!((BETA_10K_3950.ohms_at(25.0) - 10_000.0).abs() < 1e-9);
}

// Source: the β law is the Steinhart–Hart equation with c = 0 (a = 1/T0 − ln R0/β,
// b = 1/β; worked from the two equations), so both forms agree everywhere.
#[test]
fn steinhart_hart_of_the_beta_coefficients_reproduces_the_beta_law() {
    let (a, b, c) = NtcLaw::steinhart_hart_of_beta(10_000.0, 25.0, 3950.0);
    assert_eq!(c, 0.0);
    let sh = NtcLaw::SteinhartHart { a, b, c };
    for tenth in -400..=1250 {
        let celsius = f64::from(tenth) / 10.0;
        let ohms = BETA_10K_3950.ohms_at(celsius);
        assert!((sh.celsius_at(ohms) - celsius).abs() < 1e-6, "{celsius} °C");
        assert!(
            (sh.ohms_at(celsius) / ohms - 1.0).abs() < 1e-9,
            "{celsius} °C"
        );
    }
}

// Source: a Steinhart–Hart law through three points, its coefficients from the usual
// three-point solution worked by hand: with L = ln R and Y = 1/T, γ2 = (Y2 − Y1)/(L2 − L1),
// γ3 = (Y3 − Y1)/(L3 − L1), c = (γ3 − γ2)/((L3 − L2)(L1 + L2 + L3)),
// b = γ2 − c(L1² + L1·L2 + L2²), a = Y1 − (b + c·L1²)·L1. The points are an invented
// thermistor whose β rises with temperature, as datasheets show (common practice): 10 kΩ
// at 25 °C, β 3900 K from 0 to 25 °C and 4000 K from 25 to 50 °C (33 108.5 Ω at 0 °C,
// 3 541.93 Ω at 50 °C; recomputed: c = 1.032e-7). The law passes through its three points
// both ways, with c ≠ 0.
#[test]
fn a_steinhart_hart_law_fitted_to_three_points_passes_through_them() {
    let temps = [0.0, 25.0, 50.0];
    let beta = |celsius: f64, beta_k: f64| {
        NtcLaw::Beta {
            r0_ohms: 10_000.0,
            t0_c: 25.0,
            beta_k,
        }
        .ohms_at(celsius)
    };
    let l = [beta(0.0, 3900.0), 10_000.0, beta(50.0, 4000.0)].map(f64::ln);
    assert!((l[0].exp() - 33_108.5).abs() < 0.05 && (l[2].exp() - 3_541.93).abs() < 0.005);
    let y = temps.map(|t: f64| 1.0 / (t + 273.15));
    let g2 = (y[1] - y[0]) / (l[1] - l[0]);
    let g3 = (y[2] - y[0]) / (l[2] - l[0]);
    let c = (g3 - g2) / ((l[2] - l[1]) * (l[0] + l[1] + l[2]));
    let b = g2 - c * (l[0] * l[0] + l[0] * l[1] + l[1] * l[1]);
    let a = y[0] - (b + c * l[0] * l[0]) * l[0];
    assert!((c / 1.032e-7 - 1.0).abs() < 1e-3, "{c}");
    let sh = NtcLaw::SteinhartHart { a, b, c };
    for (t, ln_r) in temps.iter().zip(l) {
        assert!((sh.celsius_at(ln_r.exp()) - t).abs() < 1e-8, "{t} °C");
        assert!((sh.ohms_at(*t).ln() - ln_r).abs() < 1e-9, "{t} °C");
    }
}

// Source: plain reference — the cubic solve for ln R against a bisection of the forward
// Steinhart–Hart law (1/T rises with ln R when b > 0 and c ≥ 0).
fn ln_ohms_by_bisection(law: &NtcLaw, celsius: f64) -> f64 {
    let (mut lo, mut hi) = (0.0f64, 30.0f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if law.celsius_at(mid.exp()) > celsius {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

// Source: the rails rule (docs/profiles.md, "[temperature]"): a code within 0.5 % of full
// scale of a rail is a fault; for a divider with one leg missing or shorted the pin sits
// at a rail (common practice): with the NTC to ground, open reads the high rail and
// shorted the low; to the supply, the other way round.
#[test]
fn an_open_or_shorted_thermistor_is_named_by_its_placement() {
    let adc = adc();
    let cases = [
        (NtcPlacement::ToGround, 4095, SensorFault::Open),
        (NtcPlacement::ToGround, 4075, SensorFault::Open),
        (NtcPlacement::ToGround, 0, SensorFault::Shorted),
        (NtcPlacement::ToGround, 20, SensorFault::Shorted),
        (NtcPlacement::ToSupply, 4095, SensorFault::Shorted),
        (NtcPlacement::ToSupply, 0, SensorFault::Open),
        (NtcPlacement::ToSupply, 20, SensorFault::Open),
    ];
    for (placement, code, fault) in cases {
        let got = channel(ntc(BETA_10K_3950, placement)).celsius(&adc, code);
        assert_eq!(got, Err(fault), "{placement:?} at {code}");
    }
    // Mid-scale is the thermistor equal to the fixed resistor: 25 °C either way.
    for placement in [NtcPlacement::ToGround, NtcPlacement::ToSupply] {
        let sensor = ntc(BETA_10K_3950, placement);
        let mid = sensor.celsius(&adc, 4095.0 / 2.0).unwrap();
        assert!((mid - 25.0).abs() < 1e-9, "{placement:?}: {mid}");
    }
}

// Source: the rails rule (docs/profiles.md): 0.5 % of 4095 counts is 20.475, so codes 0
// to 20 and 4075 to 4095 are rails and 21 and 4074 are not. A sensor 20 mV/°C with 1.1 V
// at 0 °C (invented) reads (21/4095·3.3 − 1.1)/0.02 = −54.15 °C at 21 and
// (4074/4095·3.3 − 1.1)/0.02 = 109.15 °C at 4074.
#[test]
fn a_linear_sensor_at_either_rail_is_at_rail() {
    let adc = adc();
    let sensor = Sensor::Linear {
        volts_per_c: 0.02,
        volts_at_0c: 1.1,
    };
    for code in [0u32, 20, 4075, 4095, 5000] {
        let got = channel(sensor).celsius(&adc, code);
        assert_eq!(got, Err(SensorFault::AtRail), "{code}");
    }
    let low = channel(sensor).celsius(&adc, 21).unwrap();
    let high = channel(sensor).celsius(&adc, 4074).unwrap();
    assert!(
        (low - (21.0 / 4095.0 * 3.3 - 1.1) / 0.02).abs() < 1e-12,
        "{low}"
    );
    assert!((low + 54.1538).abs() < 1e-3, "{low}");
    assert!((high - 109.1538).abs() < 1e-3, "{high}");
}

// Source: hundredths of a kelvin (common practice for digital board sensors): 29 815
// counts is 298.15 K = 25 °C; a code of 0 is no reading (0 K), so it is at rail; 50 000 is
// 226.85 °C, beyond the −55 to 150 °C a board sensor reports (common practice), so
// implausible; so is a β thermistor reading 100 Ω (about 198 °C).
#[test]
fn a_digital_zero_is_at_rail_and_a_value_out_of_range_is_implausible() {
    let adc = adc();
    let digital = channel(CENTIKELVIN);
    assert!((digital.celsius(&adc, 29_815).unwrap() - 25.0).abs() < 1e-9);
    assert_eq!(digital.celsius(&adc, 0), Err(SensorFault::AtRail));
    assert_eq!(digital.celsius(&adc, 50_000), Err(SensorFault::Implausible));
    let hot = BETA_10K_3950.celsius_at(100.0);
    assert!(hot > 150.0, "{hot}");
    let thermistor = ntc(BETA_10K_3950, NtcPlacement::ToGround);
    let code = thermistor.counts_for(&adc, hot);
    assert!(code > 40.0, "not at a rail: {code}");
    assert_eq!(
        thermistor.celsius(&adc, code),
        Err(SensorFault::Implausible)
    );
}

// Source: the short names and advice of each fault as docs/profiles.md lists them.
#[test]
fn faults_have_short_names_and_say_what_to_check() {
    let faults = [
        (SensorFault::Open, "sensor-open"),
        (SensorFault::Shorted, "sensor-short"),
        (SensorFault::AtRail, "sensor-rail"),
        (SensorFault::Implausible, "sensor-implausible"),
    ];
    for (fault, name) in faults {
        assert_eq!(fault.short_name(), name);
        assert!(fault.to_string().contains(": check "), "{fault}");
    }
}

// Source: the channel is a 0-based index into a frame (the profile writes it 1-based).
#[test]
fn the_channel_is_read_from_its_place_in_the_frame() {
    let adc = adc();
    let digital = channel(CENTIKELVIN);
    let got = digital.celsius_in_frame(&adc, &[100, 29_815]).unwrap();
    assert!((got.unwrap() - 25.0).abs() < 1e-9);
    assert_eq!(digital.celsius_in_frame(&adc, &[29_815]), None);
}

fn every_sensor() -> Vec<Sensor> {
    let (a, b, c) = NtcLaw::steinhart_hart_of_beta(10_000.0, 25.0, 3950.0);
    let mut sensors = vec![LINEAR, CENTIKELVIN];
    for law in [BETA_10K_3950, SH_10K, NtcLaw::SteinhartHart { a, b, c }] {
        for placement in [NtcPlacement::ToGround, NtcPlacement::ToSupply] {
            sensors.push(ntc(law, placement));
        }
    }
    sensors
}

/// The readings a window of `window_s` holds after `pushes`, by its definition: from
/// the last restart of the clock, those newer than the newest time minus the window, and
/// the newest always; then at most the newest [`MAX_WINDOW_READINGS`].
fn naive_window_mean(pushes: &[(f64, f64)], window_s: f64) -> f64 {
    let restart = (1..pushes.len())
        .rev()
        .find(|&i| pushes[i].0 < pushes[i - 1].0)
        .unwrap_or(0);
    let run = &pushes[restart..];
    let newest = run[run.len() - 1].0;
    let mut kept: Vec<f64> = run
        .iter()
        .enumerate()
        .filter(|(i, p)| p.0 > newest - window_s || *i == run.len() - 1)
        .map(|(_, p)| p.1)
        .collect();
    let excess = kept.len().saturating_sub(MAX_WINDOW_READINGS);
    kept.drain(..excess);
    kept.iter().sum::<f64>() / kept.len() as f64
}

// Source: the arithmetic mean of the last five readings of a 5 s window at 1 s steps,
// worked by hand: after readings 0 to 9 at t = 0 to 9 s the window holds t = 5 to 9 s
// (t0 > 9 − 5), mean 7.
#[test]
fn the_window_keeps_the_readings_of_its_last_seconds() {
    let mut window = TemperatureWindow::new(5.0);
    assert_eq!(window.mean(), None);
    for t in 0..10 {
        window.push(f64::from(t), f64::from(t));
    }
    assert_eq!(window.len(), 5);
    assert_eq!(window.mean(), Some(7.0));
    window.push(f64::NAN, 100.0);
    window.push(10.0, f64::INFINITY);
    assert_eq!(window.mean(), Some(7.0));
    window.push(3.0, 21.5);
    assert_eq!((window.len(), window.mean()), (1, Some(21.5)));
    window.clear();
    assert!(window.is_empty() && window.mean().is_none());
}

// Source: plain reference — a window far longer than the stream keeps only the newest
// 65 536 readings; their mean summed afresh.
#[test]
fn the_window_holds_at_most_its_cap() {
    let mut window = TemperatureWindow::new(1e9);
    let value = |i: u32| 20.0 + f64::from(i % 97) / 10.0;
    let pushes: Vec<(f64, f64)> = (0..100_000u32)
        .map(|i| (f64::from(i) * 1e-3, value(i)))
        .collect();
    for &(t, c) in &pushes {
        window.push(t, c);
    }
    assert_eq!(window.len(), MAX_WINDOW_READINGS);
    let expected = naive_window_mean(&pushes, 1e9);
    assert!((window.mean().unwrap() - expected).abs() < 1e-9);
}

// Source: IEEE 754 double rounding (common practice): 1e15 has a spacing of 0.125, so
// 1e15 + 0.1 − 1e15 is 0.125, not 0.1; a running sum kept only by adding and subtracting
// would carry that error on after the 1e15 has left. Summed afresh, it does not.
#[test]
fn rounding_does_not_build_up_after_a_large_value_leaves() {
    let mut window = TemperatureWindow::new(5.0);
    window.push(0.0, 1e15);
    for t in 1..=20 {
        window.push(f64::from(t), 0.1);
    }
    let mean = window.mean().unwrap();
    assert!((mean - 0.1).abs() < 1e-12, "{mean}");
}

proptest! {
    // Source: plain reference — the running mean against the mean of the readings the
    // window's definition keeps, summed afresh at every step.
    #[test]
    fn the_running_mean_matches_the_mean_summed_afresh(
        window_s in 0.5f64..10.0,
        steps in proptest::collection::vec((-0.5f64..2.0, -55.0f64..150.0), 1..200),
    ) {
        let mut window = TemperatureWindow::new(window_s);
        let mut pushes = Vec::new();
        let mut t = 0.0;
        for (dt, celsius) in steps {
            t += dt;
            window.push(t, celsius);
            pushes.push((t, celsius));
            let expected = naive_window_mean(&pushes, window_s);
            prop_assert!((window.mean().unwrap() - expected).abs() < 1e-9);
        }
    }

    // Source: plain reference — counts_for is the inverse of celsius away from the rails,
    // for every sensor kind and both placements.
    #[test]
    fn counts_for_and_celsius_round_trip(celsius in -55.0f64..=150.0, index in 0usize..8) {
        let adc = adc();
        let sensor = every_sensor()[index];
        let counts = sensor.counts_for(&adc, celsius);
        let margin = RAIL_MARGIN * adc.full_scale();
        let is_ntc_or_linear = !matches!(sensor, Sensor::Degrees { .. });
        prop_assume!(!is_ntc_or_linear || (margin < counts && counts < adc.full_scale() - margin));
        let back = sensor.celsius(&adc, counts).unwrap();
        prop_assert!((back - celsius).abs() < 1e-8, "{} {celsius} -> {counts} -> {back}", sensor.name());
        // The nearest whole code reads between the readings half a count either side
        // (the conversion is monotone), where those are temperatures.
        let whole = channel(sensor).celsius(&adc, counts.round() as u32);
        let up = sensor.celsius(&adc, counts + 0.5);
        let down = sensor.celsius(&adc, counts - 0.5);
        if let (Ok(whole), Ok(up), Ok(down)) = (whole, up, down) {
            prop_assert!((whole - celsius).abs() <= (up - down).abs() + 1e-9);
        }
    }

    // Source: plain reference — the cubic solve against a bisection of the forward law.
    #[test]
    fn the_steinhart_hart_cubic_solve_matches_a_bisection(celsius in -55.0f64..=150.0) {
        for law in [SH_10K, BETA_10K_3950] {
            let solved = law.ohms_at(celsius).ln();
            prop_assert!((solved - ln_ohms_by_bisection(&law, celsius)).abs() < 1e-9);
        }
    }
}
