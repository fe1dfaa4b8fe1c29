//! Monte-Carlo checks of the budget (the GUM's claim that U = 2·u covers the truth about
//! 95 % of the time). A simulated detector of known curve and count noise is calibrated
//! from noisy points (each the mean of a few quantised samples, stored with std_counts
//! and samples, so the fit at load is weighted and has real parameter error) through a
//! source of known standard uncertainty whose error each trial draws, and then measures
//! means at several levels. The stated U must cover the true level in 93–97 % of the
//! trials at every level, and be no more than twice the spread observed.

use dbtrail::calibration::Calibration;
use dbtrail::detector::{Detector, DiodeDetector, LogAmpDetector};
use dbtrail::profile::{parse_profile, Profile};
use dbtrail::uncertainty::{Noise, Uncertainty};
use rand::{Rng, SeedableRng};
use rand_distr::StandardNormal;

const TRIALS: usize = 2000;
/// Gaussian noise of every sample, ADC counts.
const SIGMA_COUNTS: f64 = 2.0;

/// One simulated bench (all values invented).
struct Bench {
    truth: Box<dyn Detector>,
    /// The profile's `[adc]` and `[model]` lines before the points.
    head: String,
    bits: u32,
    vref: f64,
    cal_levels: Vec<f64>,
    cal_samples: usize,
    source_u_db: f64,
    levels: Vec<f64>,
    measure_samples: usize,
}

impl Bench {
    fn full_scale(&self) -> f64 {
        f64::from((1u32 << self.bits) - 1)
    }

    /// Mean and standard deviation of `n` quantised noisy samples at a true level.
    fn measure(&self, dbm: f64, n: usize, rng: &mut impl Rng) -> (f64, f64) {
        let exact = self.truth.volts_at(dbm) / (self.vref / self.full_scale());
        let samples: Vec<f64> = (0..n)
            .map(|_| {
                let noise: f64 = rng.sample(StandardNormal);
                (exact + SIGMA_COUNTS * noise)
                    .round()
                    .clamp(0.0, self.full_scale())
            })
            .collect();
        let mean = samples.iter().sum::<f64>() / n as f64;
        let var = samples.iter().map(|s| (s - mean).powi(2)).sum::<f64>() / (n as f64 - 1.0);
        (mean, var.sqrt())
    }

    /// A profile from points taken through a source whose true level is `source_error`
    /// dB above what it claims; the model's parameters are left to the fit at load.
    fn calibrate(&self, source_error: f64, rng: &mut impl Rng) -> Profile {
        let points: Vec<String> = self
            .cal_levels
            .iter()
            .map(|&claimed| {
                let (mean, std) = self.measure(claimed + source_error, self.cal_samples, rng);
                format!(
                    "{{ applied = \"{claimed}dBm\", counts = {mean:.6}, std_counts = {std:.6}, \
                     samples = {} }}",
                    self.cal_samples
                )
            })
            .collect();
        let text = format!(
            "name = \"mc\"\nreference_frequency = \"100MHz\"\n[adc]\nbits = {}\nvref = {}\n\
             [model]\n{}points = [\n{}\n]\n",
            self.bits,
            self.vref,
            self.head,
            points.join(",\n")
        );
        let mut profile = parse_profile(&text, "(monte carlo)")
            .unwrap_or_else(|e| panic!("the simulated calibration did not load: {e}\n{text}"));
        profile.uncertainty.source_u_db = Some(self.source_u_db);
        profile
    }

    /// Runs the trials; per level the coverage, the mean stated U, the observed standard
    /// deviation of the errors, and a line for the report.
    fn run(&self, seed: u64) -> Vec<(f64, f64, f64, String)> {
        let mut rng = rand_pcg::Pcg64::seed_from_u64(seed);
        let mut errors = vec![Vec::with_capacity(TRIALS); self.levels.len()];
        let mut stated = vec![Vec::with_capacity(TRIALS); self.levels.len()];
        for _ in 0..TRIALS {
            let source_error = self.source_u_db * rng.sample::<f64, _>(StandardNormal);
            let profile = self.calibrate(source_error, &mut rng);
            let cal = Calibration::new(&profile, None, 0.0);
            let budget = Uncertainty::new(&profile, &cal);
            for (i, &level) in self.levels.iter().enumerate() {
                let (mean, std) = self.measure(level, self.measure_samples, &mut rng);
                let reading = cal.reading(mean);
                let noise = Noise {
                    sigma_counts: std,
                    n_eff: self.measure_samples as f64,
                };
                stated[i].push(budget.budget(reading.dbm, Some(noise)).expanded_db());
                errors[i].push(reading.dbm - level);
            }
        }
        self.levels
            .iter()
            .enumerate()
            .map(|(i, &level)| summarise(level, &errors[i], &stated[i]))
            .collect()
    }
}

fn summarise(level: f64, errors: &[f64], stated: &[f64]) -> (f64, f64, f64, String) {
    let n = errors.len() as f64;
    let covered = errors
        .iter()
        .zip(stated)
        .filter(|(e, u)| e.abs() <= **u)
        .count();
    let coverage = covered as f64 / n;
    let mean_error = errors.iter().sum::<f64>() / n;
    let spread = (errors.iter().map(|e| (e - mean_error).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    let mean_u = stated.iter().sum::<f64>() / n;
    let line = format!(
        "{level:+} dBm: coverage {:.1} %, mean U {mean_u:.4} dB, observed σ {spread:.4} dB, \
         U/(2σ) {:.2}, mean error {mean_error:+.4} dB",
        100.0 * coverage,
        mean_u / (2.0 * spread)
    );
    (coverage, mean_u, spread, line)
}

fn assert_honest(results: &[(f64, f64, f64, String)]) {
    let report: Vec<&str> = results.iter().map(|r| r.3.as_str()).collect();
    eprintln!("{}", report.join("\n"));
    for (coverage, mean_u, spread, _) in results {
        // U is k = 2 times a standard uncertainty: compare it with 2σ, like with like.
        assert!(
            (0.93..=0.97).contains(coverage) && *mean_u <= 2.0 * (2.0 * spread),
            "{}",
            report.join("\n")
        );
    }
}

// Source: the GUM (JCGM 100), from memory: an expanded uncertainty with k = 2 built from
// honest standard uncertainties covers about 95 % of outcomes; checked by Monte-Carlo
// with a fixed seed (2000 trials: one standard error of a coverage near 95 % is 0.5 %).
// A log-amp line (25 mV/dB, 0 V at −84 dBm) on a 12-bit ADC at 3.3 V, nine points of
// 8 samples, a source of 0.01 dB, means of 16 samples: the model, noise and source terms
// are of similar size.
#[test]
fn log_amp_budget_covers_the_truth_about_95_percent_of_the_time() {
    let bench = Bench {
        truth: Box::new(LogAmpDetector::new(0.025, -84.0, (-60.0, 20.0))),
        head: "kind = \"log\"\n".into(),
        bits: 12,
        vref: 3.3,
        cal_levels: (-6..=2).map(|i| 10.0 * f64::from(i)).collect(),
        cal_samples: 8,
        source_u_db: 0.01,
        levels: vec![-58.0, -33.0, -7.0, 18.0],
        measure_samples: 16,
    };
    assert_honest(&bench.run(20261202));
}

// Source: the GUM (JCGM 100), from memory, as above. A diode detector (n = 1.07,
// V_L = 0.25 V, 300 K, 50 Ω) on a 10-bit ADC at 1.2 V, eight points of 32 samples,
// means of 100 samples. This checks the weighted nonlinear fit's propagated covariance,
// so the source is exact (0 dB): the diode curve has no free level offset, and a common
// error in the calibration levels reaches its readings by a factor that varies across
// the span and with the error itself (see docs/calibration.md, "The model term").
#[test]
fn diode_fit_budget_covers_the_truth_about_95_percent_of_the_time() {
    let bench = Bench {
        truth: Box::new(DiodeDetector::new(1.07, 0.25, 300.0, 50.0, (-12.0, 9.0))),
        head: "kind = \"diode\"\ntemperature = 300\n".into(),
        bits: 10,
        vref: 1.2,
        cal_levels: (-4..=3).map(|i| 3.0 * f64::from(i)).collect(),
        cal_samples: 32,
        source_u_db: 0.0,
        levels: vec![-11.0, -4.5, 1.5, 8.0],
        measure_samples: 100,
    };
    assert_honest(&bench.run(20261203));
}
