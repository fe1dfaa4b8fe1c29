//! Statistics over readings, in the power domain: means are taken over watts and only then
//! turned into dBm, save for a steady level, whose mean is the reading of its mean count
//! (see [`CountMoments::is_steady`]). [`PowerStats`] is a value type that merges, so
//! intervals, holds and trend buckets are all made of it; [`Averager`] is the moving
//! average the screen shows, [`Settle`] says when that number has stopped moving, and
//! [`Trend`] keeps min/max buckets so that no peak or dip is lost when history is shown at
//! low resolution. An average over a time is made of the same buckets, so neither grows
//! with the rate.

use std::collections::VecDeque;

use crate::calibration::{
    untally, Calibration, Counted, Flags, Reading, TableTotals, CODE_BLOCK, NOT_A_VALUE,
};
use crate::uncertainty::Noise;
use crate::units::{dbm_to_watts, parse_duration, watts_to_dbm, UnitError};

/// What the mean, minimum and maximum of a set of readings are: values, or bounds on the
/// true figures because some readings were counted at a bound of what can be measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Bound {
    /// Every reading counted was a value.
    Exact,
    /// Clipped or above-span readings were counted at the clip level or the span's top:
    /// the true figure is at least the one shown.
    AtLeast,
    /// Below-span readings were counted at the span's bottom: the true figure is at most
    /// the one shown.
    AtMost,
    /// Bounds both ways, or readings of which none had a level: no figure can be given.
    Unknown,
}

impl Bound {
    /// The log's `bound` cell: empty for a value.
    pub fn cell(self) -> &'static str {
        match self {
            Bound::Exact => "",
            Bound::AtLeast => "at-least",
            Bound::AtMost => "at-most",
            Bound::Unknown => "none",
        }
    }

    /// Reads a `bound` cell back; None for text that is not one.
    pub fn from_cell(text: &str) -> Option<Bound> {
        [Bound::Exact, Bound::AtLeast, Bound::AtMost, Bound::Unknown]
            .into_iter()
            .find(|b| b.cell() == text.trim())
    }

    /// The bound of figures made of readings with bounds `self` and `other`.
    pub fn join(self, other: Bound) -> Bound {
        match (self, other) {
            (Bound::Exact, b) | (b, Bound::Exact) => b,
            (a, b) if a == b => a,
            _ => Bound::Unknown,
        }
    }
}

/// Moments of a run of ADC counts in time order: their number, sum, sum of squares and the
/// sum of squared differences of successive counts, held about the first count so that a
/// spread of a few counts on a level of thousands keeps its digits. They tell a steady
/// level with white noise from a changing one (see [`CountMoments::is_steady`]) and give
/// the noise of the mean. Whole counts add as integers in `add_codes`' blocks.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct CountMoments {
    /// Counts taken.
    pub n: u64,
    /// The first count (0 when none), the origin of the sums.
    first: f64,
    /// The last count, for the difference to the next.
    last: f64,
    /// Σ (c − first).
    sum: f64,
    /// Σ (c − first)².
    sum_sq: f64,
    /// Σ (c_i − c_{i−1})² over successive counts.
    sum_diff_sq: f64,
}

/// Fewest counts whose spread and succession say whether a level is steady.
pub const STEADY_MIN_COUNTS: u64 = 16;
/// Largest standard deviation of a steady level's counts: ADC noise of a few counts, not a
/// modulation.
pub const STEADY_MAX_SIGMA_COUNTS: f64 = 3.0;
/// Two-sided normal quantile of the test of white noise (0.1 % of white-noise intervals
/// are taken for changing ones and averaged over watts, as before).
const WHITE_NOISE_Z: f64 = 3.29;

impl CountMoments {
    /// Adds one count (after those added before).
    pub fn add(&mut self, count: f64) {
        if self.n == 0 {
            self.first = count;
        } else {
            self.sum_diff_sq += (count - self.last).powi(2);
        }
        let x = count - self.first;
        self.n += 1;
        self.sum += x;
        self.sum_sq += x * x;
        self.last = count;
    }

    /// The moments of a block of at most [`CODE_BLOCK`] whole counts of a table of at most
    /// 4096 codes (12 bits), summed as integers about the first: each count's offset and
    /// each successive difference lies within ±4095, so they are 16-bit numbers whose
    /// squares (under 2^24) sum exactly in 32 bits for 256 of them, eight to a vector
    /// register. Counts of wider tables take [`CountMoments::of_wide_block`].
    fn of_block(codes: &[u32]) -> CountMoments {
        let Some((&head, &tail)) = codes.first().zip(codes.last()) else {
            return CountMoments::default();
        };
        let mut offsets = [0i16; CODE_BLOCK];
        let offsets = &mut offsets[..codes.len()];
        for (x, &c) in offsets.iter_mut().zip(codes) {
            // Within ±4095 already: the clamp lets the narrowing be one saturating pack.
            *x = (c as i32 - head as i32).clamp(-32768, 32767) as i16;
        }
        let offsets = &*offsets;
        let square = |v: i32| (v * v) as u32;
        // The first count's offset is 0: its sums start empty.
        let (mut sum, mut sum_sq, mut diff_sq) = (0i32, 0u32, 0u32);
        for (&before, &x) in offsets.iter().zip(&offsets[1..]) {
            let (x, before) = (i32::from(x), i32::from(before));
            sum += x;
            sum_sq = sum_sq.wrapping_add(square(x));
            diff_sq = diff_sq.wrapping_add(square(x - before));
        }
        CountMoments {
            n: codes.len() as u64,
            first: f64::from(head),
            last: f64::from(tail),
            sum: f64::from(sum),
            sum_sq: f64::from(sum_sq),
            sum_diff_sq: f64::from(diff_sq),
        }
    }

    /// As [`CountMoments::of_block`] for counts below 2^16 (a table of up to 16 bits), in
    /// 64-bit sums.
    fn of_wide_block(codes: &[u32]) -> CountMoments {
        let Some((&head, &tail)) = codes.first().zip(codes.last()) else {
            return CountMoments::default();
        };
        let sum: u64 = codes.iter().map(|&c| u64::from(c)).sum();
        let sum_sq: u64 = codes.iter().map(|&c| u64::from(c) * u64::from(c)).sum();
        let diff_sq: u64 = codes
            .iter()
            .zip(&codes[1..])
            .map(|(&a, &b)| u64::from(a.abs_diff(b)).pow(2))
            .sum();
        let (n, origin) = (codes.len() as i64, i64::from(head));
        let (sum, sum_sq) = (sum as i64, sum_sq as i64);
        CountMoments {
            n: n as u64,
            first: f64::from(head),
            last: f64::from(tail),
            sum: (sum - n * origin) as f64,
            sum_sq: (sum_sq - 2 * origin * sum + n * origin * origin) as f64,
            sum_diff_sq: diff_sq as f64,
        }
    }

    /// Adds the counts of `other`, which came after these.
    pub fn merge(&mut self, other: &CountMoments) {
        if other.n == 0 {
            return;
        }
        if self.n == 0 {
            *self = *other;
            return;
        }
        let shift = other.first - self.first;
        let n = other.n as f64;
        self.sum_sq += other.sum_sq + 2.0 * shift * other.sum + n * shift * shift;
        self.sum += other.sum + n * shift;
        self.sum_diff_sq += other.sum_diff_sq + (other.first - self.last).powi(2);
        self.n += other.n;
        self.last = other.last;
    }

    /// The mean count.
    pub fn mean(&self) -> Option<f64> {
        (self.n > 0).then(|| self.first + self.sum / self.n as f64)
    }

    /// The sample variance of the counts (n − 1 in the denominator).
    pub fn variance(&self) -> Option<f64> {
        (self.n > 1).then(|| {
            let n = self.n as f64;
            ((self.sum_sq - self.sum * self.sum / n) / (n - 1.0)).max(0.0)
        })
    }

    /// The von Neumann ratio: mean squared successive difference over the variance, 2 for
    /// white noise, near 0 for a level that moves slowly against the sample rate, above 2
    /// for one that alternates. None for fewer than two counts or counts all alike.
    pub fn successive_ratio(&self) -> Option<f64> {
        let var = self.variance().filter(|v| *v > 0.0)?;
        Some(self.sum_diff_sq / (self.n - 1) as f64 / var)
    }

    /// Whether the counts are a steady level with white noise of a few counts: at least
    /// [`STEADY_MIN_COUNTS`], a standard deviation of at most [`STEADY_MAX_SIGMA_COUNTS`],
    /// and a von Neumann ratio within `WHITE_NOISE_Z` standard errors of white noise's
    /// 2 (its variance is 4(n − 2)/((n − 1)(n + 1)) for normal white noise). Counts all
    /// alike are steady.
    pub fn is_steady(&self) -> bool {
        let (Some(var), true) = (self.variance(), self.n >= STEADY_MIN_COUNTS) else {
            return false;
        };
        if var.sqrt() > STEADY_MAX_SIGMA_COUNTS {
            return false;
        }
        let Some(ratio) = self.successive_ratio() else {
            return true;
        };
        let n = self.n as f64;
        let se = (4.0 * (n - 2.0) / ((n - 1.0) * (n + 1.0))).sqrt();
        (ratio - 2.0).abs() <= WHITE_NOISE_Z * se
    }

    /// The lag-one autocorrelation from the successive differences, ρ = 1 − ratio / 2,
    /// held at 0 or above (negative correlation would claim more than N samples' worth).
    pub fn lag_one(&self) -> Option<f64> {
        Some((1.0 - self.successive_ratio()? / 2.0).clamp(0.0, 1.0))
    }

    /// The counts' standard deviation and their effective number, N(1 − ρ)/(1 + ρ), for
    /// the noise of the mean; None for fewer than two counts.
    pub fn noise(&self) -> Option<Noise> {
        let sigma_counts = self.variance()?.sqrt();
        let rho = self.lag_one().unwrap_or(0.0);
        Some(Noise::correlated(sigma_counts, self.n as f64, rho))
    }
}

/// Count, power-domain sum, extremes and flags of a set of readings, and the moments of
/// their counts.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct PowerStats {
    /// Count, sum of watts, extremes and flags.
    pub totals: TableTotals,
    /// Moments of the counts of the readings added with their code (`add_codes`,
    /// `add_within` of a whole count): `moments.n` falls short of `samples` otherwise, as
    /// it does after a block of `add_codes` that held a code past the table (over full
    /// scale; see [`PowerStats::counts_complete`]).
    pub moments: CountMoments,
}

/// An interval's figures as a row gives them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Figures {
    /// Whether the mean is a value or a bound.
    pub bound: Bound,
    /// The mean, dBm; None when the bound is `Unknown` or nothing was counted.
    pub mean_dbm: Option<f64>,
    /// The mean, watts.
    pub mean_w: Option<f64>,
    /// Lowest and highest reading counted (bounds as the mean is); None when unknown.
    pub min_dbm: Option<f64>,
    /// See `min_dbm`.
    pub max_dbm: Option<f64>,
    /// Samples that went into the mean.
    pub averaged: u64,
    /// True when the mean is the reading of the mean count of a steady level.
    pub steady: bool,
    /// The noise of the counts, for the mean's uncertainty: None for a bound, for fewer
    /// than two counts, or when a sample's count says nothing of the level (clipped, over
    /// full scale).
    pub noise: Option<Noise>,
}

impl PowerStats {
    /// Adds one reading as the screen's holds and trend keep them: a value, or only its
    /// flags for a bound (see [`NOT_A_VALUE`]).
    pub fn add(&mut self, reading: &Reading) {
        if reading.flags.intersects(NOT_A_VALUE) {
            self.totals.samples += 1;
            self.totals.flags |= reading.flags;
            return;
        }
        self.add_within(reading, f64::INFINITY);
    }

    /// Adds one reading of a calibration whose span tops out at `span_top_dbm`
    /// (reference plane), as interval statistics count it: a clipped or above-span reading
    /// at its level but no higher than that, a below-span one at the span's bottom.
    pub fn add_within(&mut self, reading: &Reading, span_top_dbm: f64) {
        let counted = Counted::of(reading.flags, reading.dbm, span_top_dbm);
        self.totals.samples += 1;
        self.totals.flags |= reading.flags;
        if reading.counts.fract() == 0.0 {
            self.moments.add(reading.counts);
        }
        let (valid, at_least, at_most) = untally(counted.tally());
        self.totals.valid += valid;
        self.totals.at_least += at_least;
        self.totals.at_most += at_most;
        if counted == Counted::Nothing {
            return;
        }
        let dbm = counted.dbm();
        self.totals.sum_w += dbm_to_watts(dbm);
        self.totals.min_dbm = self.totals.min_dbm.min(dbm);
        self.totals.max_dbm = self.totals.max_dbm.max(dbm);
    }

    /// Adds one ADC code through the calibration's precomputed table, falling back to the
    /// exact model for codes the table does not cover.
    pub fn add_code(&mut self, cal: &Calibration, code: u32) {
        self.add_codes(cal, &[code]);
    }

    /// Adds a run of ADC codes, as `add_within` of each code's reading (the recorder's
    /// inner loop): the per-code table adds up what it covers (`Calibration::accumulate`),
    /// and each of its blocks brings its count moments here.
    pub fn add_codes(&mut self, cal: &Calibration, codes: &[u32]) {
        let table_len = cal.code_table().len();
        let totals = cal.accumulate(codes, |block, all_tabled| {
            if all_tabled {
                self.add_moments(table_len, block);
            } else {
                self.add_untabled(cal, table_len, block);
            }
        });
        self.totals.merge(&totals);
    }

    /// The count moments of a block whose every code lies in the table. A block with a
    /// code past it (over full scale) is left out, so the moments no longer cover every
    /// sample (see [`PowerStats::counts_complete`]); without a table, `add_within` adds
    /// each count.
    #[inline(always)]
    fn add_moments(&mut self, table_len: usize, block: &[u32]) {
        let block = if table_len <= 4096 {
            CountMoments::of_block(block)
        } else {
            CountMoments::of_wide_block(block)
        };
        self.moments.merge(&block);
    }

    /// The exact model for the codes of `block` the table does not cover (above the ADC's
    /// full scale): out of the hot loop so its registers stay free.
    #[cold]
    #[inline(never)]
    fn add_untabled(&mut self, cal: &Calibration, table_len: usize, block: &[u32]) {
        for &code in block.iter().filter(|&&code| code as usize >= table_len) {
            self.add_within(&cal.reading_code(code), cal.span_dbm().1);
        }
    }

    /// Adds every `width`-th code of `counts` from `first` on: one channel of
    /// interleaved samples.
    pub fn add_channel(&mut self, cal: &Calibration, counts: &[u32], first: usize, width: usize) {
        let mut batch = [0u32; 256];
        let mut column = counts
            .iter()
            .skip(first)
            .step_by(width.max(1))
            .copied()
            .peekable();
        while column.peek().is_some() {
            let mut n = 0;
            for (slot, code) in batch.iter_mut().zip(column.by_ref()) {
                *slot = code;
                n += 1;
            }
            self.add_codes(cal, &batch[..n]);
        }
    }

    /// Adds another set, whose readings came after these (as if they had been added one by
    /// one).
    pub fn merge(&mut self, other: &PowerStats) {
        self.totals.merge(&other.totals);
        self.moments.merge(&other.moments);
    }

    /// Whether the count moments cover every reading.
    pub fn counts_complete(&self) -> bool {
        self.moments.n == self.totals.samples
    }

    /// Whether the mean and extremes over watts are values or bounds.
    pub fn bound(&self) -> Bound {
        match (self.totals.at_least > 0, self.totals.at_most > 0) {
            (true, true) => Bound::Unknown,
            _ if self.averaged() == 0 && self.totals.samples > 0 => Bound::Unknown,
            (true, false) => Bound::AtLeast,
            (false, true) => Bound::AtMost,
            (false, false) => Bound::Exact,
        }
    }

    /// Readings that went into the mean over watts: the values and those counted at a
    /// bound; 0 when the bounds go both ways and there is no mean.
    pub fn averaged(&self) -> u64 {
        if self.totals.at_least > 0 && self.totals.at_most > 0 {
            0
        } else {
            self.totals.valid + self.totals.at_least + self.totals.at_most
        }
    }

    /// Mean power in watts over the readings counted (see [`PowerStats::bound`]).
    pub fn mean_w(&self) -> Option<f64> {
        let n = self.averaged();
        (n > 0).then(|| self.totals.sum_w / n as f64)
    }

    /// Mean power in dBm (of the mean in watts).
    pub fn mean_dbm(&self) -> Option<f64> {
        self.mean_w().map(watts_to_dbm)
    }

    /// Lowest and highest reading counted, dBm.
    pub fn extremes(&self) -> Option<(f64, f64)> {
        (self.averaged() > 0).then_some((self.totals.min_dbm, self.totals.max_dbm))
    }

    /// The reading of the mean count when the counts are a steady level (see
    /// [`CountMoments::is_steady`]) whose every count is a measured one (none clipped,
    /// none over full scale) and whose mean count lies in the span: the estimator of a
    /// steady level, unbiased where the curve bends (docs/calibration.md, "Means near the
    /// bottom of the span"). Samples of such a level may stray past the span's ends.
    pub fn steady_reading(&self, cal: &Calibration) -> Option<Reading> {
        let unmeasured = Flags::ADC_CLIP | Flags::OVER_FULL_SCALE;
        if self.totals.flags.intersects(unmeasured) || !self.counts_complete() {
            return None;
        }
        if !self.moments.is_steady() {
            return None;
        }
        let reading = cal.reading(self.moments.mean()?);
        let outside = NOT_A_VALUE | Flags::ABOVE_SPAN;
        (!reading.flags.intersects(outside)).then_some(reading)
    }

    /// The figures of a row: over watts with their bound, or the steady reading.
    pub fn figures(&self, cal: &Calibration) -> Figures {
        if let Some(reading) = self.steady_reading(cal) {
            return Figures {
                bound: Bound::Exact,
                mean_dbm: Some(reading.dbm),
                mean_w: Some(reading.watts()),
                // A sample past a span's end has no value to show as an extreme.
                min_dbm: (self.totals.at_most == 0).then_some(self.totals.min_dbm),
                max_dbm: (self.totals.at_least == 0).then_some(self.totals.max_dbm),
                averaged: self.totals.samples,
                steady: true,
                noise: self.moments.noise(),
            };
        }
        let bound = self.bound();
        let measured = !self
            .totals
            .flags
            .intersects(Flags::ADC_CLIP | Flags::OVER_FULL_SCALE);
        Figures {
            bound,
            mean_dbm: self.mean_dbm(),
            mean_w: self.mean_w(),
            min_dbm: self.extremes().map(|e| e.0),
            max_dbm: self.extremes().map(|e| e.1),
            averaged: self.averaged(),
            steady: false,
            noise: self
                .moments
                .noise()
                .filter(|_| bound == Bound::Exact && measured && self.counts_complete()),
        }
    }

    /// Moves every level by `db` (the offset or frequency correction changed).
    pub fn shift_db(&mut self, db: f64) {
        self.totals.sum_w *= 10f64.powf(db / 10.0);
        self.totals.min_dbm += db;
        self.totals.max_dbm += db;
    }
}

/// How the displayed value is averaged.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Averaging {
    /// Each reading as it comes.
    Off,
    /// The mean of the last N valid readings.
    Samples(usize),
    /// The mean of the valid readings of the last so many seconds.
    Seconds(f64),
}

impl Averaging {
    /// Parses `off`, `0`, a count such as `32`, or a duration such as `500ms` or `2s`.
    pub fn parse(text: &str) -> Result<Self, UnitError> {
        let text = text.trim();
        if text.eq_ignore_ascii_case("off") || text == "0" || text == "1" {
            return Ok(Averaging::Off);
        }
        if let Ok(n) = text.parse::<usize>() {
            return Ok(Averaging::Samples(n.min(1_000_000)));
        }
        let seconds = parse_duration(text)?.as_secs_f64();
        Ok(if seconds > 0.0 {
            Averaging::Seconds(seconds.min(3600.0))
        } else {
            Averaging::Off
        })
    }

    /// A short description, e.g. `32 samples` or `2 s`.
    pub fn describe(&self) -> String {
        match self {
            Averaging::Off => "off".into(),
            Averaging::Samples(n) => format!("{n} samples"),
            Averaging::Seconds(s) => format!("{s} s"),
        }
    }
}

/// Buckets a time average keeps, whatever its window and the sample rate: its memory is
/// fixed, and the window it covers falls short of the asked time by at most one bucket
/// (a thousandth of the window) at its old end.
pub const AVERAGE_BUCKETS: usize = 1000;

/// A moving average over watts.
#[derive(Debug, Clone)]
pub struct Averager {
    mode: Averaging,
    held: Held,
    first_t: Option<f64>,
}

/// What an [`Averager`] keeps of the readings in its window.
#[derive(Debug, Clone)]
enum Held {
    /// Off or by count: the readings themselves, at most the count.
    Readings(LastReadings),
    /// By time: the power sums of [`AVERAGE_BUCKETS`] slices of the window, as the trend
    /// keeps them, so an hour at any rate takes no more room than a second.
    Buckets(Trend),
}

/// The watts of the last few readings and their running sum.
#[derive(Debug, Clone, Default)]
struct LastReadings {
    watts: VecDeque<f64>,
    sum_w: f64,
    since_exact: usize,
}

impl LastReadings {
    fn push(&mut self, w: f64, keep: usize) {
        self.watts.push_back(w);
        self.sum_w += w;
        while self.watts.len() > keep {
            if let Some(old) = self.watts.pop_front() {
                self.sum_w -= old;
                self.since_exact += 1;
            }
        }
        // Running sums drift; add them up afresh now and then.
        if self.since_exact > 4096 {
            self.sum_w = self.watts.iter().sum();
            self.since_exact = 0;
        }
    }

    fn scale(&mut self, factor: f64) {
        for w in &mut self.watts {
            *w *= factor;
        }
        self.sum_w *= factor;
    }
}

impl Averager {
    /// An empty average.
    pub fn new(mode: Averaging) -> Self {
        let held = match mode {
            Averaging::Seconds(s) => Held::Buckets(Trend::new(s, AVERAGE_BUCKETS)),
            Averaging::Off | Averaging::Samples(_) => Held::Readings(LastReadings::default()),
        };
        Averager {
            mode,
            held,
            first_t: None,
        }
    }

    /// The averaging in use.
    pub fn mode(&self) -> Averaging {
        self.mode
    }

    /// Adds a reading taken at `t` seconds; bounds (below span, clip) are left out.
    pub fn push(&mut self, t: f64, reading: &Reading) {
        if reading.flags.intersects(NOT_A_VALUE) {
            return;
        }
        self.first_t.get_or_insert(t);
        let keep = match self.mode {
            Averaging::Samples(n) => n.max(1),
            Averaging::Off | Averaging::Seconds(_) => 1,
        };
        match &mut self.held {
            Held::Buckets(buckets) => buckets.push(t, reading),
            Held::Readings(last) => last.push(dbm_to_watts(reading.dbm), keep),
        }
    }

    /// Count and power sum of the readings in the window.
    fn totals(&self) -> (u64, f64) {
        match &self.held {
            Held::Readings(last) => (last.watts.len() as u64, last.sum_w),
            Held::Buckets(buckets) => {
                let all = buckets.total();
                (all.averaged(), all.totals.sum_w)
            }
        }
    }

    /// The mean, dBm.
    pub fn mean_dbm(&self) -> Option<f64> {
        let (n, sum_w) = self.totals();
        (n > 0).then(|| watts_to_dbm(sum_w / n as f64))
    }

    /// Readings in the window now.
    pub fn len(&self) -> usize {
        self.totals().0 as usize
    }

    /// True when no reading is held.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Entries kept in memory: readings for a count, buckets for a time.
    pub fn entries(&self) -> usize {
        match &self.held {
            Held::Readings(last) => last.watts.len(),
            Held::Buckets(buckets) => buckets.buckets_held(),
        }
    }

    /// True when the window holds all it is meant to, so the mean is over a full window.
    pub fn is_full(&self, now: f64) -> bool {
        match self.mode {
            Averaging::Off => !self.is_empty(),
            Averaging::Samples(n) => self.len() >= n.max(1),
            Averaging::Seconds(s) => self.first_t.is_some_and(|t0| now - t0 >= s),
        }
    }

    /// Forgets every reading, keeping the room for them: the screen clears the average at
    /// each reading below the span or at clip.
    pub fn clear(&mut self) {
        match &mut self.held {
            Held::Buckets(buckets) => buckets.clear(),
            Held::Readings(last) => {
                last.watts.clear();
                last.sum_w = 0.0;
                last.since_exact = 0;
            }
        }
        self.first_t = None;
    }

    /// Moves every level by `db`.
    pub fn shift_db(&mut self, db: f64) {
        match &mut self.held {
            Held::Buckets(buckets) => buckets.shift_db(db),
            Held::Readings(last) => last.scale(10f64.powf(db / 10.0)),
        }
    }
}

/// Whether a displayed value has stopped moving: its spread over the last `span` seconds
/// is within `tolerance_db`.
#[derive(Debug, Clone)]
pub struct Settle {
    span: f64,
    tolerance_db: f64,
    history: VecDeque<(f64, f64)>,
}

impl Settle {
    /// A check over `span` seconds with a tolerance in dB.
    pub fn new(span: f64, tolerance_db: f64) -> Self {
        Settle {
            span,
            tolerance_db,
            history: VecDeque::new(),
        }
    }

    /// Notes the displayed value at `t`.
    pub fn push(&mut self, t: f64, dbm: f64) {
        self.history.push_back((t, dbm));
        while self
            .history
            .front()
            .is_some_and(|(t0, _)| t - t0 > 2.0 * self.span)
        {
            self.history.pop_front();
        }
    }

    /// True when values cover the whole span and stay within the tolerance.
    pub fn is_settled(&self, now: f64) -> bool {
        let recent = || self.history.iter().filter(|(t, _)| now - t <= self.span);
        let covered = self
            .history
            .front()
            .is_some_and(|(t0, _)| now - t0 >= self.span);
        let (lo, hi) = recent().fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), (_, v)| {
            (lo.min(*v), hi.max(*v))
        });
        covered && hi - lo <= self.tolerance_db
    }

    /// The change of the value over the last second: now minus about one second ago.
    pub fn change_over_last_second(&self, now: f64) -> Option<f64> {
        let (_, latest) = *self.history.back()?;
        let (t_then, then) = *self.history.iter().rev().find(|(t, _)| now - t >= 1.0)?;
        (now - t_then < 2.0).then_some(latest - then)
    }

    /// Forgets the history.
    pub fn clear(&mut self) {
        self.history.clear();
    }

    /// Moves every level by `db`.
    pub fn shift_db(&mut self, db: f64) {
        for (_, v) in &mut self.history {
            *v += db;
        }
    }
}

/// History as a fixed number of buckets of a fixed duration, each keeping min, max and the
/// power sum of its readings, so memory does not grow and no extreme is lost.
#[derive(Debug, Clone)]
pub struct Trend {
    bucket_s: f64,
    capacity: usize,
    buckets: VecDeque<(i64, PowerStats)>,
}

impl Trend {
    /// `capacity` buckets covering `window_s` seconds.
    pub fn new(window_s: f64, capacity: usize) -> Self {
        Trend {
            bucket_s: window_s / capacity as f64,
            capacity,
            buckets: VecDeque::with_capacity(capacity + 1),
        }
    }

    /// The time the buckets cover, seconds.
    pub fn window_s(&self) -> f64 {
        self.bucket_s * self.capacity as f64
    }

    /// Adds a reading at `t`.
    pub fn push(&mut self, t: f64, reading: &Reading) {
        let index = (t / self.bucket_s).floor() as i64;
        match self.buckets.back_mut() {
            Some((last, stats)) if *last == index => stats.add(reading),
            Some((last, _)) if *last > index => {}
            _ => {
                let mut stats = PowerStats::default();
                stats.add(reading);
                self.buckets.push_back((index, stats));
            }
        }
        while self
            .buckets
            .front()
            .is_some_and(|(first, _)| index - first >= self.capacity as i64)
        {
            self.buckets.pop_front();
        }
    }

    /// The buckets ending with the one at `now`, oldest first, merged down to `columns`
    /// (min of mins, max of maxes); None for a column with no valid reading.
    pub fn columns(&self, now: f64, columns: usize) -> Vec<Option<(f64, f64)>> {
        let columns = columns.max(1);
        let newest = (now / self.bucket_s).floor() as i64;
        let oldest = newest - self.capacity as i64 + 1;
        let mut out = vec![PowerStats::default(); columns];
        for (index, stats) in &self.buckets {
            if *index < oldest || *index > newest {
                continue;
            }
            let column = ((index - oldest) as usize * columns) / self.capacity;
            out[column.min(columns - 1)].merge(stats);
        }
        out.iter().map(PowerStats::extremes).collect()
    }

    /// Every reading held, merged: those of the last `window_s` seconds up to the newest,
    /// save any in the bucket last let go, which reached less than one bucket into the
    /// window.
    pub fn total(&self) -> PowerStats {
        let mut all = PowerStats::default();
        for (_, stats) in &self.buckets {
            all.merge(stats);
        }
        all
    }

    /// Buckets held now: at most the capacity, however many readings came.
    pub fn buckets_held(&self) -> usize {
        self.buckets.len()
    }

    /// Forgets the history.
    pub fn clear(&mut self) {
        self.buckets.clear();
    }

    /// Moves every level by `db`.
    pub fn shift_db(&mut self, db: f64) {
        for (_, stats) in &mut self.buckets {
            stats.shift_db(db);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reading(dbm: f64, flags: Flags) -> Reading {
        Reading {
            counts: 0.0,
            volts: 0.0,
            detector_dbm: dbm,
            dbm,
            flags,
        }
    }

    // Source: common practice — averages are taken over watts: 0 dBm (1 mW) and 10 dBm
    // (10 mW) average to 5.5 mW = 7.404 dBm, not 5 dBm.
    #[test]
    fn mean_is_over_watts_not_db() {
        let mut s = PowerStats::default();
        s.add(&reading(0.0, Flags::empty()));
        s.add(&reading(10.0, Flags::empty()));
        assert!((s.mean_w().unwrap() - 5.5e-3).abs() < 1e-15);
        assert!((s.mean_dbm().unwrap() - 7.403626894942439).abs() < 1e-12);
        assert_eq!(s.extremes(), Some((0.0, 10.0)));
    }

    /// Three readings at 0 dBm and `fourth`, as `add_within` counts them under a span
    /// topping out at +6 dBm.
    fn three_at_zero_and(fourth: Reading) -> PowerStats {
        let mut s = PowerStats::default();
        for _ in 0..3 {
            s.add_within(&reading(0.0, Flags::empty()), 6.0);
        }
        s.add_within(&fourth, 6.0);
        s
    }

    // Source: worked by hand (power-domain mean, common practice). Three readings of
    // 0 dBm (1 mW each) and one clipped at +5 dBm, counted at its clip level (3.16228 mW):
    // (3 + 3.16228) / 4 = 1.54057 mW = +1.8768 dBm, and the true mean is at least that.
    // Above the span (+12 dBm extrapolated) it counts at the span's top, +6 dBm
    // (3.98107 mW): (3 + 3.98107) / 4 = 1.74527 mW = +2.4186 dBm. Before bounds were
    // counted, both gave a plain 0 dBm.
    #[test]
    fn clipped_and_above_span_readings_count_at_their_bound_and_make_the_mean_at_least() {
        let clipped = three_at_zero_and(reading(5.0, Flags::ADC_CLIP));
        assert!((clipped.mean_dbm().unwrap() - 1.876_812_716).abs() < 1e-8);
        assert_eq!(clipped.bound(), Bound::AtLeast);
        assert_eq!(clipped.extremes(), Some((0.0, 5.0)));
        assert_eq!((clipped.totals.samples, clipped.averaged()), (4, 4));
        let above = three_at_zero_and(reading(12.0, Flags::ABOVE_SPAN));
        assert!((above.mean_dbm().unwrap() - 2.418_621_075).abs() < 1e-8);
        assert_eq!(above.bound(), Bound::AtLeast);
        assert_eq!(above.extremes(), Some((0.0, 6.0)));
        assert_eq!(above.bound().cell(), "at-least");
    }

    // Source: worked by hand. Three readings of 0 dBm and one below the span, read at the
    // span's bottom, −10 dBm (0.1 mW): (3 + 0.1) / 4 = 0.775 mW = −1.10698 dBm, and the
    // true mean is at most that. Before, the mean was a plain 0 dBm.
    #[test]
    fn below_span_readings_count_at_the_bottom_and_make_the_mean_at_most() {
        let s = three_at_zero_and(reading(-10.0, Flags::BELOW_SPAN));
        assert!((s.mean_dbm().unwrap() - -1.106_982_975).abs() < 1e-8);
        assert_eq!(s.bound(), Bound::AtMost);
        assert_eq!(s.bound().cell(), "at-most");
        assert_eq!(s.extremes(), Some((-10.0, 0.0)));
    }

    // Source: the rule in docs/recording.md: bounds both ways, or no reading with a level,
    // give no figure (`none`); readings with no level stay out of the mean.
    #[test]
    fn bounds_both_ways_or_no_level_give_no_figure() {
        let mut both = three_at_zero_and(reading(-10.0, Flags::BELOW_SPAN));
        both.add_within(&reading(5.0, Flags::ADC_CLIP), 6.0);
        assert_eq!(both.bound(), Bound::Unknown);
        assert_eq!(both.bound().cell(), "none");
        assert_eq!((both.mean_dbm(), both.extremes()), (None, None));
        let mut damaged = PowerStats::default();
        damaged.add(&reading(f64::NAN, Flags::OVER_FULL_SCALE));
        assert_eq!(damaged.bound(), Bound::Unknown);
        assert_eq!(damaged.mean_dbm(), None);
        let mixed = three_at_zero_and(reading(f64::NAN, Flags::OVER_FULL_SCALE));
        assert_eq!(mixed.bound(), Bound::Exact);
        assert_eq!((mixed.totals.samples, mixed.averaged()), (4, 3));
        assert!(mixed.mean_dbm().unwrap().abs() < 1e-12);
        assert_eq!(
            PowerStats::default().bound(),
            Bound::Exact,
            "a row of no samples"
        );
        assert_eq!(Bound::AtLeast.join(Bound::Exact), Bound::AtLeast);
        assert_eq!(Bound::AtLeast.join(Bound::AtMost), Bound::Unknown);
        for bound in [Bound::Exact, Bound::AtLeast, Bound::AtMost, Bound::Unknown] {
            assert_eq!(Bound::from_cell(bound.cell()), Some(bound));
        }
    }

    fn demo_log_amp() -> Calibration {
        let profile = crate::profile::parse_profile(
            include_str!("../profiles/demo-logamp.toml"),
            "demo-logamp.toml",
        )
        .unwrap();
        Calibration::new(&profile, None, 0.0)
    }

    // Source: the rule in docs/recording.md ("Bounds"), through the per-code table and its
    // blocks: 512 codes below the demo log amp's span (100 counts) count at the span's
    // bottom, at most; 512 clipped codes (4095) at no more than the span's top, at least.
    // Before, the table gave bounds no watts and both sets had no mean.
    #[test]
    fn the_code_table_counts_runs_of_bounded_codes_at_their_bound() {
        let cal = demo_log_amp();
        let (bottom, top) = cal.span_dbm();
        let mut below = PowerStats::default();
        below.add_codes(&cal, &[100; 512]);
        assert_eq!(
            (
                below.totals.valid,
                below.totals.at_least,
                below.totals.at_most
            ),
            (0, 0, 512)
        );
        assert_eq!(below.bound(), Bound::AtMost);
        assert_eq!(below.extremes(), Some((bottom, bottom)));
        assert!((below.mean_dbm().unwrap() - bottom).abs() < 1e-9);
        let mut clipped = PowerStats::default();
        clipped.add_codes(&cal, &[4095; 512]);
        assert_eq!(
            (
                clipped.totals.valid,
                clipped.totals.at_least,
                clipped.totals.at_most
            ),
            (0, 512, 0)
        );
        assert_eq!(clipped.bound(), Bound::AtLeast);
        let level = cal.reading(4095.0).dbm.min(top);
        assert_eq!(clipped.extremes(), Some((level, level)));
        assert!(clipped.totals.flags.contains(Flags::ADC_CLIP));
    }

    // Source: the rule in docs/screen.md: readings below the span or at ADC clip "are left
    // out of holds and trend values"; they raise their flags only.
    #[test]
    fn the_screens_add_keeps_values_only() {
        let mut s = PowerStats::default();
        s.add(&reading(-30.0, Flags::BELOW_SPAN));
        s.add(&reading(9.0, Flags::ADC_CLIP));
        assert_eq!(s.extremes(), None);
        s.add(&reading(3.0, Flags::empty()));
        assert_eq!(
            (
                s.totals.samples,
                s.totals.valid,
                s.totals.at_least,
                s.totals.at_most
            ),
            (3, 1, 0, 0)
        );
        assert_eq!(s.extremes(), Some((3.0, 3.0)));
        assert_eq!(s.totals.flags, Flags::BELOW_SPAN | Flags::ADC_CLIP);
    }

    // Source: worked by hand. Counts 1, 2, 3, 4: mean 2.5, sample variance 5/3, squared
    // successive differences 3 over 3 pairs, so the von Neumann ratio is 1 / (5/3) = 0.6
    // and ρ = 1 − 0.6/2 = 0.7, N_eff = 4·0.3/1.7 < 1, held at 1. Counts 0, 2, 0, 2: mean
    // 1, variance 4/3, differences 12 over 3, ratio 3, ρ = −0.5 held at 0, N_eff = 4.
    // Merging 1, 2 and 3, 4 (the second after the first) gives the same as one run.
    #[test]
    fn count_moments_by_hand() {
        let of = |counts: &[f64]| {
            let mut m = CountMoments::default();
            counts.iter().for_each(|&c| m.add(c));
            m
        };
        let ramp = of(&[1.0, 2.0, 3.0, 4.0]);
        assert_eq!(ramp.mean(), Some(2.5));
        assert!((ramp.variance().unwrap() - 5.0 / 3.0).abs() < 1e-12);
        assert!((ramp.successive_ratio().unwrap() - 0.6).abs() < 1e-12);
        assert!((ramp.lag_one().unwrap() - 0.7).abs() < 1e-12);
        assert_eq!(ramp.noise().unwrap().n_eff, 1.0);
        let alternating = of(&[0.0, 2.0, 0.0, 2.0]);
        assert!((alternating.successive_ratio().unwrap() - 3.0).abs() < 1e-12);
        assert_eq!(alternating.lag_one(), Some(0.0));
        assert_eq!(alternating.noise().unwrap().n_eff, 4.0);
        let mut merged = of(&[1.0, 2.0]);
        merged.merge(&of(&[3.0, 4.0]));
        assert_eq!(merged, ramp);
        assert_eq!(CountMoments::of_block(&[1, 2, 3, 4]), ramp);
        assert_eq!(CountMoments::of_wide_block(&[1, 2, 3, 4]), ramp);
        // Offsets both ways from the first count, up to the 12-bit table's ±4095.
        let swing = [2000, 0, 4095, 1, 4094, 2000];
        let one_by_one = of(&swing.map(f64::from));
        assert_eq!(CountMoments::of_block(&swing), one_by_one);
        assert_eq!(CountMoments::of_wide_block(&swing), one_by_one);
    }

    #[test]
    fn averaging_by_count_and_by_time_over_watts() {
        let mut by_count = Averager::new(Averaging::Samples(2));
        for (t, dbm) in [(0.0, 20.0), (0.1, 0.0), (0.2, 10.0)] {
            by_count.push(t, &reading(dbm, Flags::empty()));
        }
        // Source: common practice — 1 mW and 10 mW average to 5.5 mW.
        assert!((by_count.mean_dbm().unwrap() - 7.403626894942439).abs() < 1e-12);
        let mut by_time = Averager::new(Averaging::Seconds(1.0));
        // Steps of 1/8 s are exact in binary, so the window's edges are too.
        for i in 0..24 {
            by_time.push(
                f64::from(i) * 0.125,
                &reading(if i < 12 { 0.0 } else { 10.0 }, Flags::empty()),
            );
        }
        // The last second before 2.875 s reaches back to 1.875 s, a reading on the very
        // edge; the window's buckets start at the bucket after the edge, so they let it go
        // (less than one bucket's worth, see `time_average_within_a_bucket_of_the_exact`).
        assert_eq!(by_time.len(), 8, "2 s to 2.875 s inclusive");
        assert!((by_time.mean_dbm().unwrap() - 10.0).abs() < 1e-9);
        assert!(by_time.is_full(2.875));
        assert!(!Averager::new(Averaging::Seconds(5.0)).is_full(1.0));
    }

    // Source: the rule of this change: a time average keeps at most AVERAGE_BUCKETS
    // buckets, whatever its window and the rate (before, an hour at 10 k samples/s kept
    // 36 M readings). Readings here are a millisecond apart or closer, so every window
    // below would hold thousands of them.
    #[test]
    fn a_time_average_keeps_a_bounded_number_of_buckets_whatever_the_window_and_rate() {
        for (window_s, rate_hz, seconds) in
            [(0.5, 100e3, 1.5), (2.0, 20e3, 5.0), (3600.0, 1e3, 4000.0)]
        {
            let mut average = Averager::new(Averaging::Seconds(window_s));
            let n = (rate_hz * seconds) as u64;
            for i in 0..n {
                average.push(
                    i as f64 / rate_hz,
                    &reading(f64::from((i % 7) as u8), Flags::empty()),
                );
            }
            let what = format!("{window_s} s at {rate_hz} Hz");
            assert!(
                average.entries() <= AVERAGE_BUCKETS,
                "{what}: {} entries",
                average.entries()
            );
            let expected = (window_s * rate_hz) as usize;
            assert!(
                average.len().abs_diff(expected) <= expected / AVERAGE_BUCKETS + 1,
                "{what}: {} readings averaged",
                average.len()
            );
        }
    }

    /// The plain reference: every reading of the last `window_s` seconds, kept.
    struct ExactWindow {
        window_s: f64,
        readings: VecDeque<(f64, f64)>,
    }

    impl ExactWindow {
        fn push(&mut self, t: f64, watts: f64) {
            self.readings.push_back((t, watts));
            while self
                .readings
                .front()
                .is_some_and(|(t0, _)| t - t0 > self.window_s)
            {
                self.readings.pop_front();
            }
        }

        fn mean_w(&self) -> f64 {
            self.readings.iter().map(|(_, w)| w).sum::<f64>() / self.readings.len() as f64
        }

        /// Readings at or after `t`.
        fn since(&self, t: f64) -> usize {
            self.readings.iter().filter(|(t0, _)| *t0 >= t).count()
        }

        fn spread_w(&self) -> f64 {
            let (lo, hi) = self
                .readings
                .iter()
                .fold((f64::INFINITY, 0.0f64), |(lo, hi), (_, w)| {
                    (lo.min(*w), hi.max(*w))
                });
            hi - lo
        }
    }

    // Source: the bound worked by hand for this change. The buckets cover the exact window
    // C less the readings of at most one bucket at its old end, k of them: B ⊆ C with
    // |C| − |B| = k. Then mean(C) = (|B|·mean(B) + k·mean(C∖B)) / |C|, so
    // |mean(B) − mean(C)| = k/|C| · |mean(C∖B) − mean(B)| ≤ k/|C| · (max − min) over C, in
    // watts. Monte-Carlo with a fixed seed: levels in steps of random height and length,
    // readings at jittered times around 10 k/s, windows that do not fit the bucket grid.
    #[test]
    fn a_time_average_is_within_one_bucket_of_the_exact_window() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_pcg::Pcg64::seed_from_u64(20261203);
        for window_s in [0.0371, 0.25, 1.7] {
            let bucket_s = window_s / AVERAGE_BUCKETS as f64;
            let mut average = Averager::new(Averaging::Seconds(window_s));
            let mut exact = ExactWindow {
                window_s,
                readings: VecDeque::new(),
            };
            let (mut t, mut level, mut left) = (0.0, 0.0, 0);
            let mut edge_losses = 0;
            for i in 0..40_000 {
                if left == 0 {
                    (level, left) = (rng.random_range(-20.0..20.0), rng.random_range(1..3000));
                }
                left -= 1;
                t += 1e-4 * rng.random_range(0.5..1.5);
                average.push(t, &reading(level, Flags::empty()));
                exact.push(t, dbm_to_watts(level));
                if i % 37 != 0 {
                    continue;
                }
                let slack = 1e-9;
                let what = format!("{window_s} s window at t = {t}");
                let (held, all) = (average.len(), exact.readings.len());
                // Only readings within one bucket of the old edge may be missing.
                let surely_in = exact.since(t - window_s + bucket_s + slack);
                assert!(
                    surely_in <= held && held <= all,
                    "{what}: {surely_in} <= {held} <= {all}"
                );
                let k = all - held;
                // Readings are at least 50 µs apart: so many fit in one bucket.
                assert!(
                    k as f64 <= bucket_s / 0.5e-4 + 1.0,
                    "{what}: {k} readings lost at the edge"
                );
                edge_losses += k;
                let bucketed = dbm_to_watts(average.mean_dbm().unwrap());
                // Plus rounding: sums of n positive terms are good to n·ε, under 1e-10 here.
                let bound = k as f64 / all as f64 * exact.spread_w() + 1e-10 * exact.mean_w();
                let error = (bucketed - exact.mean_w()).abs();
                assert!(
                    error <= bound,
                    "{what}: off by {error:e} W, allowed {bound:e} W"
                );
            }
            assert!(
                edge_losses > 0,
                "{window_s} s: the edge was never exercised"
            );
        }
    }

    #[test]
    fn settle_needs_a_full_span_within_tolerance() {
        let mut s = Settle::new(1.0, 0.1);
        for i in 0..30 {
            let t = f64::from(i) * 0.1;
            s.push(
                t,
                if t < 1.5 {
                    f64::from(i) * 0.1
                } else {
                    5.0 + 0.01 * f64::from(i % 2)
                },
            );
        }
        assert!(s.is_settled(2.9));
        assert!(!s.is_settled(1.6));
        assert!((s.change_over_last_second(2.9).unwrap()).abs() < 0.02);
    }

    #[test]
    fn trend_buckets_keep_a_one_sample_spike_when_merged() {
        let mut trend = Trend::new(60.0, 240);
        for i in 0..6000 {
            let t = f64::from(i) * 0.01;
            let dbm = if i == 3001 { 30.0 } else { 10.0 };
            trend.push(t, &reading(dbm, Flags::empty()));
        }
        let columns = trend.columns(59.99, 20);
        assert_eq!(columns.len(), 20);
        let spikes = columns
            .iter()
            .flatten()
            .filter(|(_, hi)| *hi == 30.0)
            .count();
        assert_eq!(spikes, 1);
        assert!(columns.iter().flatten().all(|(lo, _)| *lo == 10.0));
    }

    #[test]
    fn merging_equals_adding_one_by_one() {
        let values = [-3.0, 4.5, 12.0, 0.25, 7.0];
        let mut all = PowerStats::default();
        let (mut left, mut right) = (PowerStats::default(), PowerStats::default());
        for (i, v) in values.iter().enumerate() {
            all.add(&reading(*v, Flags::empty()));
            if i < 2 {
                left.add(&reading(*v, Flags::empty()))
            } else {
                right.add(&reading(*v, Flags::empty()))
            }
        }
        left.merge(&right);
        assert_eq!(left.totals.samples, all.totals.samples);
        assert!((left.totals.sum_w - all.totals.sum_w).abs() < 1e-18);
        assert_eq!(left.extremes(), all.extremes());
    }
}
