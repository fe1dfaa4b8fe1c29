//! The noise of the shown reading, two ways: [`ReadingSpread`], the standard deviation in
//! dB of the single readings in the averaging window, shown beside the peaking aid's best
//! value so that a best a little above the present value can be told from noise; and
//! [`CountWindow`], the raw counts of the same window (σ, lag-1 correlation, effective
//! number of samples), which the uncertainty budget's noise term takes.

use std::collections::VecDeque;

use dbtrail::stats::{Averaging, AVERAGE_BUCKETS};
use dbtrail::uncertainty::Noise;

/// The fewest readings the spread is taken over, whatever the averaging: with averaging
/// off or a short count a window of one or two readings says nothing about their noise.
pub const SPREAD_MIN_READINGS: usize = 16;
/// The most readings kept for a time window, the most recent: enough for a standard
/// deviation good to a few per cent, in bounded memory at any sample rate.
pub const SPREAD_MAX_READINGS: usize = 4096;

/// The recent single readings, dBm, with their times, as many as the averaging window
/// holds (within the bounds above).
#[derive(Debug, Clone)]
pub struct ReadingSpread {
    window: Averaging,
    readings: VecDeque<(f64, f64)>,
}

impl ReadingSpread {
    /// An empty spread for an averaging window.
    pub fn new(window: Averaging) -> Self {
        ReadingSpread {
            window,
            readings: VecDeque::new(),
        }
    }

    /// Adds a valid reading of `dbm` taken at `t` seconds.
    pub fn push(&mut self, t: f64, dbm: f64) {
        self.readings.push_back((t, dbm));
        let keep = match self.window {
            Averaging::Samples(n) => n.clamp(SPREAD_MIN_READINGS, SPREAD_MAX_READINGS),
            Averaging::Off => SPREAD_MIN_READINGS,
            Averaging::Seconds(_) => SPREAD_MAX_READINGS,
        };
        while self.readings.len() > keep || self.is_stale(t) {
            self.readings.pop_front();
        }
    }

    /// True when the oldest reading has left a time window and enough newer ones remain.
    fn is_stale(&self, now: f64) -> bool {
        let Averaging::Seconds(s) = self.window else {
            return false;
        };
        self.readings.len() > SPREAD_MIN_READINGS
            && self.readings.front().is_some_and(|(t, _)| now - t > s)
    }

    /// Forgets every reading (the average was started afresh).
    pub fn clear(&mut self) {
        self.readings.clear();
    }

    /// Moves every level by `db`.
    pub fn shift_db(&mut self, db: f64) {
        for (_, dbm) in &mut self.readings {
            *dbm += db;
        }
    }

    /// The sample standard deviation of the readings, dB; None under two readings.
    pub fn std_db(&self) -> Option<f64> {
        let n = self.readings.len();
        if n < 2 {
            return None;
        }
        let mean = self.readings.iter().map(|(_, d)| d).sum::<f64>() / n as f64;
        let squares: f64 = self.readings.iter().map(|(_, d)| (d - mean).powi(2)).sum();
        Some((squares / (n - 1) as f64).sqrt())
    }
}

/// Sums over a run of consecutive counts, kept exactly in integers so that a window can
/// slide for hours without drift, and runs that follow each other can be joined.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct CountSums {
    n: u64,
    sum: i128,
    sum_sq: i128,
    /// Σ of each count times the next one.
    sum_lag: i128,
    first: u32,
    last: u32,
    /// How many of the samples were above the calibrated span.
    above_span: u64,
}

impl CountSums {
    /// Adds the next count of the run.
    pub fn push(&mut self, code: u32, above_span: bool) {
        let x = i128::from(code);
        if self.n == 0 {
            self.first = code;
        } else {
            self.sum_lag += i128::from(self.last) * x;
        }
        self.n += 1;
        self.sum += x;
        self.sum_sq += x * x;
        self.last = code;
        self.above_span += u64::from(above_span);
    }

    /// Appends a run that came straight after this one.
    pub fn join(&mut self, later: &CountSums) {
        if later.n == 0 {
            return;
        }
        if self.n == 0 {
            *self = *later;
            return;
        }
        self.sum_lag += later.sum_lag + i128::from(self.last) * i128::from(later.first);
        self.n += later.n;
        self.sum += later.sum;
        self.sum_sq += later.sum_sq;
        self.last = later.last;
        self.above_span += later.above_span;
    }

    /// Takes the first count off the run; `next` is the one after it (None when it was the
    /// only one).
    fn pop_first(&mut self, first: (u32, bool), next: Option<u32>) {
        let x = i128::from(first.0);
        self.n -= 1;
        self.sum -= x;
        self.sum_sq -= x * x;
        self.above_span -= u64::from(first.1);
        match next {
            Some(next) => {
                self.sum_lag -= x * i128::from(next);
                self.first = next;
            }
            None => *self = CountSums::default(),
        }
    }

    /// Counts in the run.
    pub fn len(&self) -> u64 {
        self.n
    }

    /// How many samples of the run were above the calibrated span.
    pub fn above_span(&self) -> u64 {
        self.above_span
    }

    /// n · Σ(x − mean)², exact; None when it would not fit (never with 24-bit counts
    /// under 2^31 samples).
    fn n_squares(&self) -> Option<i128> {
        let n = i128::from(self.n);
        n.checked_mul(self.sum_sq)?
            .checked_sub(self.sum.checked_mul(self.sum)?)
    }

    /// The sample standard deviation of the counts; None under two counts.
    pub fn std_counts(&self) -> Option<f64> {
        if self.n < 2 {
            return None;
        }
        let n = self.n as f64;
        Some((self.n_squares()? as f64 / (n * (n - 1.0))).sqrt())
    }

    /// The lag-1 autocorrelation Σ(xᵢ − m)(xᵢ₊₁ − m) / Σ(xᵢ − m)²; None under two counts
    /// or when every count is the same.
    pub fn lag1(&self) -> Option<f64> {
        let squares = self.n_squares()?;
        if self.n < 2 || squares == 0 {
            return None;
        }
        // n · Σ(xᵢ − m)(xᵢ₊₁ − m) = n·P − S·(2S − x₁ − xₙ) + (n − 1)·S²/n: the integer
        // part exactly, the last term's fraction (under one) in floating point.
        let n = i128::from(self.n);
        let s = self.sum;
        let ends = i128::from(self.first) + i128::from(self.last);
        let s2 = s.checked_mul(s)?;
        let whole = n
            .checked_mul(self.sum_lag)?
            .checked_sub(s.checked_mul(2 * s - ends)?)?
            .checked_add((n - 1).checked_mul(s2 / n)?)?;
        let fraction = ((n - 1) * (s2 % n)) as f64 / n as f64;
        Some((whole as f64 + fraction) / squares as f64)
    }
}

/// The fewest counts σ and the correlation are taken over: a window of one or two samples
/// (averaging off or a short count) says nothing about their noise, so the last this many
/// are used instead.
pub const NOISE_MIN_COUNTS: usize = 16;

/// The raw counts of the averaging window, matched to its mode (the last sample, the last
/// N, or the last T seconds in [`AVERAGE_BUCKETS`] slices aligned as the average's own),
/// for the noise of the shown number.
#[derive(Debug, Clone)]
pub struct CountWindow {
    /// The last [`NOISE_MIN_COUNTS`], for σ when the window holds fewer.
    recent: LastCounts,
    held: HeldCounts,
}

#[derive(Debug, Clone)]
enum HeldCounts {
    /// Off (the last one) or by count.
    Last(LastCounts),
    /// By time: the sums of each slice of the window.
    Buckets(CountBuckets),
}

/// The last few counts, each with whether it was above the span, and their sums.
#[derive(Debug, Clone, Default)]
struct LastCounts {
    keep: usize,
    codes: VecDeque<(u32, bool)>,
    sums: CountSums,
}

impl LastCounts {
    fn new(keep: usize) -> Self {
        LastCounts {
            keep: keep.max(1),
            ..LastCounts::default()
        }
    }

    fn push(&mut self, code: u32, above_span: bool) {
        self.codes.push_back((code, above_span));
        self.sums.push(code, above_span);
        while self.codes.len() > self.keep {
            if let Some(first) = self.codes.pop_front() {
                let next = self.codes.front().map(|(c, _)| *c);
                self.sums.pop_first(first, next);
            }
        }
    }

    fn clear(&mut self) {
        self.codes.clear();
        self.sums = CountSums::default();
    }
}

/// Slices of a time window, as [`dbtrail::stats::Trend`] keeps them: slice k covers
/// [k·width, (k + 1)·width) and the newest [`AVERAGE_BUCKETS`] are kept.
#[derive(Debug, Clone)]
struct CountBuckets {
    width_s: f64,
    buckets: VecDeque<(i64, CountSums)>,
}

impl CountBuckets {
    fn push(&mut self, t: f64, code: u32, above_span: bool) {
        let index = (t / self.width_s).floor() as i64;
        match self.buckets.back_mut() {
            Some((last, sums)) if *last == index => sums.push(code, above_span),
            // Late samples are left out, as the average leaves them out.
            Some((last, _)) if *last > index => {}
            _ => {
                let mut sums = CountSums::default();
                sums.push(code, above_span);
                self.buckets.push_back((index, sums));
            }
        }
        while self
            .buckets
            .front()
            .is_some_and(|(first, _)| index - first >= AVERAGE_BUCKETS as i64)
        {
            self.buckets.pop_front();
        }
    }

    fn total(&self) -> CountSums {
        let mut all = CountSums::default();
        for (_, sums) in &self.buckets {
            all.join(sums);
        }
        all
    }
}

impl CountWindow {
    /// An empty window for an averaging mode.
    pub fn new(mode: Averaging) -> Self {
        let held = match mode {
            Averaging::Off => HeldCounts::Last(LastCounts::new(1)),
            Averaging::Samples(n) => HeldCounts::Last(LastCounts::new(n)),
            Averaging::Seconds(s) => HeldCounts::Buckets(CountBuckets {
                width_s: s / AVERAGE_BUCKETS as f64,
                buckets: VecDeque::new(),
            }),
        };
        CountWindow {
            recent: LastCounts::new(NOISE_MIN_COUNTS),
            held,
        }
    }

    /// Adds the count of a sample that went into the average, taken at `t` seconds.
    pub fn push(&mut self, t: f64, code: u32, above_span: bool) {
        self.recent.push(code, above_span);
        match &mut self.held {
            HeldCounts::Last(last) => last.push(code, above_span),
            HeldCounts::Buckets(buckets) => buckets.push(t, code, above_span),
        }
    }

    /// Forgets every count (the average was started afresh).
    pub fn clear(&mut self) {
        self.recent.clear();
        match &mut self.held {
            HeldCounts::Last(last) => last.clear(),
            HeldCounts::Buckets(buckets) => buckets.buckets.clear(),
        }
    }

    /// The sums over the window.
    pub fn sums(&self) -> CountSums {
        match &self.held {
            HeldCounts::Last(last) => last.sums,
            HeldCounts::Buckets(buckets) => buckets.total(),
        }
    }

    /// Entries kept in memory: counts for a count, slices for a time (for the tests of
    /// bounded memory).
    #[cfg(test)]
    pub fn entries(&self) -> usize {
        self.recent.codes.len()
            + match &self.held {
                HeldCounts::Last(last) => last.codes.len(),
                HeldCounts::Buckets(buckets) => buckets.buckets.len(),
            }
    }

    /// The noise of the window's mean ([`Noise::correlated`]): σ of the counts and their
    /// lag-1 correlation, both taken over the window (over the last [`NOISE_MIN_COUNTS`]
    /// when it holds fewer). None under two counts.
    pub fn noise(&self) -> Option<Noise> {
        let window = self.sums();
        let basis = if window.len() as usize >= NOISE_MIN_COUNTS {
            window
        } else {
            self.recent.sums
        };
        let sigma_counts = basis.std_counts()?;
        let rho = basis.lag1().unwrap_or(0.0);
        Some(Noise::correlated(
            sigma_counts,
            window.len().max(1) as f64,
            rho,
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Source: worked by hand — readings 1, 2, 3, 4 dBm: mean 2.5, squares 2.25 + 0.25 +
    // 0.25 + 2.25 = 5, over n − 1 = 3: variance 5/3, standard deviation 1.290994.
    #[test]
    fn the_spread_is_the_sample_standard_deviation() {
        let mut spread = ReadingSpread::new(Averaging::Samples(4));
        assert_eq!(spread.std_db(), None);
        for (i, dbm) in [1.0, 2.0, 3.0, 4.0].into_iter().enumerate() {
            spread.push(i as f64, dbm);
        }
        assert!((spread.std_db().unwrap() - (5.0f64 / 3.0).sqrt()).abs() < 1e-12);
        spread.shift_db(10.0);
        assert!((spread.std_db().unwrap() - (5.0f64 / 3.0).sqrt()).abs() < 1e-12);
        spread.clear();
        assert_eq!(spread.std_db(), None);
    }
}

#[cfg(test)]
mod count_tests {
    use super::*;
    use proptest::prelude::*;

    fn sums_of(codes: &[u32]) -> CountSums {
        let mut sums = CountSums::default();
        for &c in codes {
            sums.push(c, false);
        }
        sums
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() < 1e-12
    }

    // Source: worked by hand — counts 1, 2, 3, 4: mean 2.5, deviations −1.5, −0.5, 0.5,
    // 1.5; squares 5, so σ = √(5/3); lag products 0.75 − 0.25 + 0.75 = 1.25, so ρ = 0.25
    // and N_eff = 4 · 0.75 / 1.25 = 2.4.
    #[test]
    fn a_rising_run_has_the_hand_worked_sigma_correlation_and_effective_count() {
        let sums = sums_of(&[1, 2, 3, 4]);
        assert!(close(sums.std_counts().unwrap(), (5.0f64 / 3.0).sqrt()));
        assert!(close(sums.lag1().unwrap(), 0.25));
        let mut window = CountWindow::new(Averaging::Samples(4));
        for (i, c) in [1, 2, 3, 4].into_iter().enumerate() {
            window.push(i as f64, c, false);
        }
        let noise = window.noise().unwrap();
        assert!(close(noise.sigma_counts, (5.0f64 / 3.0).sqrt()));
        assert!(close(noise.n_eff, 2.4), "{noise:?}");
    }

    // Source: worked by hand — eight 0s then eight 4s: mean 2, every deviation ±2, squares
    // 64, σ = √(64/15); lag products 7·4 − 4 + 7·4 = 52, ρ = 52/64 = 0.8125, N_eff =
    // 16 · 0.1875 / 1.8125 = 1.6552 (a step, strongly correlated).
    #[test]
    fn a_correlated_window_counts_fewer_independent_samples() {
        let mut window = CountWindow::new(Averaging::Samples(16));
        for i in 0..16 {
            window.push(f64::from(i), if i < 8 { 0 } else { 4 }, false);
        }
        let noise = window.noise().unwrap();
        assert!(close(noise.sigma_counts, (64.0f64 / 15.0).sqrt()));
        assert!(close(noise.n_eff, 16.0 * 0.1875 / 1.8125), "{noise:?}");
    }

    // Source: worked by hand — 3, 5, 3, 5: deviations ∓1, lag products −3, squares 4, so
    // ρ = −0.75; held at 0, N_eff is N = 4, not the 28 the formula would give.
    #[test]
    fn an_alternating_run_claims_no_more_than_its_samples() {
        assert!(close(sums_of(&[3, 5, 3, 5]).lag1().unwrap(), -0.75));
        let mut window = CountWindow::new(Averaging::Samples(4));
        for (i, c) in [3, 5, 3, 5].into_iter().enumerate() {
            window.push(i as f64, c, false);
        }
        assert!(close(window.noise().unwrap().n_eff, 4.0));
    }

    // Source: the rule in docs/screen.md — with averaging off the shown number is one
    // sample: σ from the last 16 counts, N_eff 1. Counts 0, 2 alternating: σ = √(16/15).
    #[test]
    fn with_averaging_off_the_noise_is_of_one_sample_from_the_last_sixteen() {
        let mut window = CountWindow::new(Averaging::Off);
        assert_eq!(window.noise(), None);
        for i in 0..40 {
            window.push(f64::from(i), if i % 2 == 0 { 0 } else { 2 }, false);
        }
        let noise = window.noise().unwrap();
        assert!(
            close(noise.sigma_counts, (16.0f64 / 15.0).sqrt()),
            "{noise:?}"
        );
        assert_eq!(noise.n_eff, 1.0);
        window.clear();
        assert_eq!(window.noise(), None);
    }

    #[test]
    fn a_sliding_window_forgets_its_oldest_count_and_whether_it_was_above_the_span() {
        let mut window = CountWindow::new(Averaging::Samples(4));
        window.push(0.0, 9, true);
        assert_eq!(window.sums().above_span(), 1);
        for (i, c) in [1, 2, 3, 4].into_iter().enumerate() {
            window.push(1.0 + i as f64, c, false);
        }
        assert_eq!(window.sums(), sums_of(&[1, 2, 3, 4]));
        assert_eq!(window.sums().above_span(), 0);
    }

    // Source: the rule of this change (docs/screen.md): a time window keeps the sums of
    // at most AVERAGE_BUCKETS slices, whatever the rate: here 10 000 samples a second for
    // 5 s into a 1 s window, which holds the last second's samples only.
    #[test]
    fn a_time_window_keeps_bounded_memory_and_only_its_last_seconds() {
        let mut window = CountWindow::new(Averaging::Seconds(1.0));
        for i in 0..50_000u32 {
            window.push(f64::from(i) * 1e-4, 1000 + i % 7, i == 100);
        }
        assert!(
            window.entries() <= AVERAGE_BUCKETS + NOISE_MIN_COUNTS,
            "{} entries",
            window.entries()
        );
        let n = window.sums().len();
        assert!((9_990..=10_000).contains(&n), "{n} counts in the window");
        assert_eq!(window.sums().above_span(), 0, "the early one has left");
    }

    // Source: the first-order autoregressive process (common practice in time-series
    // texts; from memory): xᵢ = ρ·xᵢ₋₁ + eᵢ has lag-1 correlation ρ, and the mean of N of
    // its samples varies about (1 + ρ)/(1 − ρ) times as much as that of N independent
    // ones, which is what N_eff = N(1 − ρ)/(1 + ρ) claims. Counts at 2000 with σ of 20 (so
    // rounding to counts does not matter), ρ = 0.6 and independent, N = 256, 400 windows
    // each, fixed seed: the stated σ/√N_eff against the spread of the window means.
    #[test]
    fn the_stated_noise_of_the_mean_matches_the_spread_of_means_of_correlated_counts() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let mut rng = rand_pcg::Pcg64::seed_from_u64(20261202);
        for rho in [0.0, 0.6] {
            let innovation = Normal::new(0.0, 20.0 * (1.0f64 - rho * rho).sqrt()).unwrap();
            let (mut means, mut stated) = (Vec::new(), Vec::new());
            let mut x = 0.0;
            for _ in 0..400 {
                let mut window = CountWindow::new(Averaging::Samples(256));
                let mut total = 0.0;
                for i in 0..256 {
                    x = rho * x + innovation.sample(&mut rng);
                    let code = (2000.0 + x).round() as u32;
                    window.push(f64::from(i), code, false);
                    total += f64::from(code);
                }
                means.push(total / 256.0);
                let noise = window.noise().unwrap();
                stated.push(noise.sigma_counts / noise.n_eff.sqrt());
            }
            let mean_of_means = means.iter().sum::<f64>() / 400.0;
            let spread = (means
                .iter()
                .map(|m| (m - mean_of_means).powi(2))
                .sum::<f64>()
                / 399.0)
                .sqrt();
            let stated = stated.iter().sum::<f64>() / 400.0;
            // The spread itself is good to about 1/√800 = 3.5 %.
            assert!(
                (stated / spread - 1.0).abs() < 0.12,
                "ρ = {rho}: stated {stated:.3}, spread of means {spread:.3}"
            );
        }
    }

    proptest! {
        // The joined slices against the counts added one by one.
        #[test]
        fn joined_runs_equal_the_run_added_whole(
            codes in proptest::collection::vec(0u32..(1 << 24), 0..60),
            cut in 0usize..60,
        ) {
            let cut = cut.min(codes.len());
            let mut joined = sums_of(&codes[..cut]);
            joined.join(&sums_of(&codes[cut..]));
            prop_assert_eq!(joined, sums_of(&codes));
        }

        // The sliding window against the sums of its last counts taken afresh, and the
        // time window's slices against the same counts added whole.
        #[test]
        fn windows_equal_their_counts_added_afresh(
            codes in proptest::collection::vec(0u32..(1 << 24), 1..80),
            keep in 1usize..20,
        ) {
            let mut last = CountWindow::new(Averaging::Samples(keep));
            let mut timed = CountWindow::new(Averaging::Seconds(1000.0));
            for (i, &c) in codes.iter().enumerate() {
                last.push(i as f64, c, false);
                timed.push(i as f64 * 0.37, c, false);
            }
            let tail = &codes[codes.len().saturating_sub(keep)..];
            prop_assert_eq!(last.sums(), sums_of(tail));
            prop_assert_eq!(timed.sums(), sums_of(&codes));
        }

        // The exact sums' σ and ρ against the two-pass formulas in floating point.
        #[test]
        fn sigma_and_correlation_match_the_two_pass_formulas(
            codes in proptest::collection::vec(0u32..(1 << 24), 2..60),
        ) {
            let sums = sums_of(&codes);
            let x: Vec<f64> = codes.iter().map(|&c| f64::from(c)).collect();
            let n = x.len() as f64;
            let mean = x.iter().sum::<f64>() / n;
            let squares: f64 = x.iter().map(|v| (v - mean).powi(2)).sum();
            let sd = (squares / (n - 1.0)).sqrt();
            prop_assert!((sums.std_counts().unwrap() - sd).abs() <= 1e-9 * (1.0 + sd));
            if squares > 0.0 {
                let lag: f64 = x.windows(2).map(|w| (w[0] - mean) * (w[1] - mean)).sum();
                prop_assert!((sums.lag1().unwrap() - lag / squares).abs() < 1e-9);
            }
        }
    }
}
