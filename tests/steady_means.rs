//! Means of steady levels near the bottom of the span, against modulated ones: a steady
//! level with white count noise is read from its mean count, so the curve's bend there
//! does not lift it; a level that changes is still averaged over watts. Monte-Carlo with
//! fixed seeds, against the truth the simulation knows.

use dbtrail::calibration::Calibration;
use dbtrail::profile::{parse_profile, Profile};
use dbtrail::stats::PowerStats;
use dbtrail::uncertainty::Uncertainty;
use dbtrail::units::{dbm_to_watts, watts_to_dbm};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

fn demo_diode() -> (Profile, Calibration) {
    let text = std::fs::read_to_string("profiles/demo-diode.toml").unwrap();
    let profile = parse_profile(&text, "demo-diode.toml").unwrap();
    let cal = Calibration::new(&profile, None, 0.0);
    (profile, cal)
}

/// The demo diode's lowest calibration point, counts.
const LOWEST_POINT: f64 = 6.1;
/// Samples in one interval (a second at 1000 samples/s).
const INTERVAL: usize = 1000;
const TRIALS: usize = 300;

/// One interval of `level(i)` (noise-free counts) with Gaussian noise of `sigma` counts,
/// rounded and held to the ADC's range as the simulator's board does.
fn interval(level: impl Fn(usize) -> f64, sigma: f64, rng: &mut rand_pcg::Pcg64) -> Vec<u32> {
    let noise = Normal::new(0.0, sigma).unwrap();
    (0..INTERVAL)
        .map(|i| (level(i) + noise.sample(rng)).round().clamp(0.0, 4095.0) as u32)
        .collect()
}

/// The result of the trials of one case.
struct Outcome {
    /// Trials whose mean was taken as a steady level's.
    steady: usize,
    /// Trials whose mean lay within its stated expanded uncertainty of the truth.
    covered: usize,
    /// Mean error of the row's mean, dB.
    bias_db: f64,
    /// Mean error of the plain mean over watts of the same samples, dB.
    watts_bias_db: f64,
}

fn trials(seed: u64, truth_dbm: f64, level: impl Fn(usize) -> f64, sigma: f64) -> Outcome {
    let (profile, cal) = demo_diode();
    let budget = Uncertainty::new(&profile, &cal);
    let mut rng = rand_pcg::Pcg64::seed_from_u64(seed);
    let mut outcome = Outcome {
        steady: 0,
        covered: 0,
        bias_db: 0.0,
        watts_bias_db: 0.0,
    };
    for _ in 0..TRIALS {
        let codes = interval(&level, sigma, &mut rng);
        let mut stats = PowerStats::default();
        stats.add_codes(&cal, &codes);
        let figures = stats.figures(&cal);
        let mean = figures.mean_dbm.expect("a mean");
        let u = budget.budget(mean, figures.noise).expanded_db();
        outcome.steady += usize::from(figures.steady);
        outcome.covered += usize::from((mean - truth_dbm).abs() <= u);
        outcome.bias_db += (mean - truth_dbm) / TRIALS as f64;
        outcome.watts_bias_db += (stats.mean_dbm().unwrap() - truth_dbm) / TRIALS as f64;
    }
    outcome
}

// Source: Jensen's inequality (a mean of a convex function of noisy counts lies above the
// function of the mean count) and the bias the issue measured at the demo diode's lowest
// point (+0.59 dB for 0.7 counts of noise, +1.77 dB for 2, with below-span samples left
// out). The level is 0.3 counts above the lowest point, so that the mean count lies in
// the span in every trial; samples stray below the span all the same. The truth is the
// exact model's reading of the noise-free count. The row's mean is within 0.05 dB of it
// on average, and within its stated expanded uncertainty in 95 % of trials or more. Before
// the steady estimator the row's mean was the watts mean, with below-span samples counted
// at the span's bottom: +0.12 dB high for 0.7 counts and +0.69 dB for 2 (seeds 7 and 8),
// which the bias check refuses.
#[test]
fn a_steady_level_at_the_bottom_of_the_span_is_read_from_its_mean_count() {
    let (_, cal) = demo_diode();
    let count = LOWEST_POINT + 0.3;
    let truth = cal.reading(count).dbm;
    for (seed, sigma, least_watts_bias) in [(7, 0.7, 0.08), (8, 2.0, 0.5)] {
        let got = trials(seed, truth, |_| count, sigma);
        let what = format!("σ = {sigma} counts");
        // The white-noise test refuses 0.1 % of white intervals: a few at most.
        assert!(got.steady >= TRIALS - 3, "{what}: {} steady", got.steady);
        assert!(
            got.covered >= TRIALS * 95 / 100,
            "{what}: {} covered",
            got.covered
        );
        assert!(got.bias_db.abs() < 0.05, "{what}: bias {} dB", got.bias_db);
        assert!(
            got.watts_bias_db > least_watts_bias,
            "{what}: the watts mean is biased {} dB",
            got.watts_bias_db
        );
    }
}

/// The true mean power of a level that takes the noise-free counts `levels` in equal
/// shares, dBm.
fn true_mean_dbm(cal: &Calibration, levels: &[f64]) -> f64 {
    let watts: f64 = levels
        .iter()
        .map(|&c| dbm_to_watts(cal.reading(c).dbm))
        .sum();
    watts_to_dbm(watts / levels.len() as f64)
}

// Source: common practice — the mean power of a modulated level is the mean of its
// watts, not the reading of its mean count. A square wave between 100 and 1300 counts (50
// samples each way; its spread is far beyond noise) and a sine-wave envelope of ±2.5
// counts about 40 counts (period 40 samples: a spread a steady level's noise could have,
// refused because its successive counts are far from white) are both averaged over watts,
// with 0.7 counts of noise; the truth is the mean of the watts of the noise-free counts.
#[test]
fn a_modulated_level_is_still_averaged_over_watts() {
    let (_, cal) = demo_diode();
    let square = |i: usize| {
        if (i / 50).is_multiple_of(2) {
            100.0
        } else {
            1300.0
        }
    };
    let tone = |i: usize| 40.0 + 2.5 * (std::f64::consts::TAU * i as f64 / 40.0).sin();
    let square_truth = true_mean_dbm(&cal, &[100.0, 1300.0]);
    let tone_levels: Vec<f64> = (0..40).map(tone).collect();
    let tone_truth = true_mean_dbm(&cal, &tone_levels);
    for (name, seed, truth, got) in [
        (
            "square wave",
            11,
            square_truth,
            trials(11, square_truth, square, 0.7),
        ),
        ("tone", 12, tone_truth, trials(12, tone_truth, tone, 0.7)),
    ] {
        let what = format!("{name} (seed {seed}, truth {truth:.3} dBm)");
        assert_eq!(got.steady, 0, "{what}");
        assert!(
            got.covered >= TRIALS * 95 / 100,
            "{what}: {} covered",
            got.covered
        );
        assert!(got.bias_db.abs() < 0.05, "{what}: bias {} dB", got.bias_db);
    }
    // The reading of the square wave's mean count (700) is not its mean power: taken as
    // steady, it would be this far off.
    let misread = cal.reading(700.0).dbm - square_truth;
    assert!(misread < -1.0, "{misread} dB");
}
