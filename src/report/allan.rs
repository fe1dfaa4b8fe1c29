//! Stability against averaging time: the overlapping Allan deviation of the interval
//! means, at octave-spaced averaging times.
//!
//! The means are treated as frequency-like data (each an average over its interval), so
//! at τ = m·τ0
//!
//! σ²(τ) = 1 / (2·m²·n) · Σⱼ (Σ_{i=j}^{j+m−1} (y_{i+m} − y_i))²,
//!
//! the sum over every position j whose 2m values are all present, n the number of such
//! positions (N − 2m + 1 for a series without missing values). Each inner sum is the
//! difference of two adjacent block sums, read from compensated prefix sums, so a τ costs
//! O(N) and the whole list O(N log N). A value that is not finite (NaN for a missing row)
//! leaves out every position whose 2m values include it; [`on_time_grid`] puts rows with
//! gaps between them onto such a series. See docs/allan.md.

use serde::Serialize;

/// The Allan deviation at one averaging time.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AllanPoint {
    /// Averaging time τ = m·τ0, seconds.
    pub tau_s: f64,
    /// Overlapping Allan deviation at τ, dB.
    pub adev_db: f64,
    /// How many overlapping pairs of adjacent τ-averages the variance was taken over.
    pub pairs: usize,
}

/// The overlapping Allan deviation of `values` (equally spaced by `tau0_s`) at
/// τ = τ0, 2τ0, 4τ0 … while at least 2m + 1 pairs remain (for a series without missing
/// values: while N ≥ 4m). Values that are not finite count as missing. Empty when `tau0_s`
/// is not a positive number or there are too few values.
pub fn overlapping_adev(values: &[f64], tau0_s: f64) -> Vec<AllanPoint> {
    if !usable_spacing(tau0_s) {
        return Vec::new();
    }
    let sums = BlockSums::new(values);
    std::iter::successors(Some(1usize), |m| m.checked_mul(2))
        .map_while(|m| point_at(&sums, m, tau0_s))
        .collect()
}

/// The overlapping Allan deviation of `values` at the one averaging time τ = m·τ0, any
/// m ≥ 1, under the same rules as [`overlapping_adev`]; None where that gives no point.
pub fn overlapping_adev_at(values: &[f64], tau0_s: f64, m: usize) -> Option<AllanPoint> {
    if !usable_spacing(tau0_s) || m == 0 {
        return None;
    }
    point_at(&BlockSums::new(values), m, tau0_s)
}

/// Whether `tau0_s` can space a series: a positive number of seconds.
fn usable_spacing(tau0_s: f64) -> bool {
    tau0_s.is_finite() && tau0_s > 0.0
}

/// The point at averaging factor `m`, or None when fewer than 2m + 1 pairs are complete
/// (few pairs that overlap this much hold little more than one independent difference).
fn point_at(sums: &BlockSums, m: usize, tau0_s: f64) -> Option<AllanPoint> {
    let last_start = sums.len().checked_sub(m.checked_mul(2)?)?;
    let (pairs, squares) = (0..=last_start)
        .filter(|&j| sums.complete(j, j + 2 * m))
        .map(|j| sums.total(j + m, j + 2 * m) - sums.total(j, j + m))
        .fold((0usize, 0.0), |(n, s), d| (n + 1, s + d * d));
    (pairs > 2 * m).then(|| AllanPoint {
        tau_s: m as f64 * tau0_s,
        adev_db: (squares / (2.0 * (m as f64).powi(2) * pairs as f64)).sqrt(),
        pairs,
    })
}

/// Prefix sums of a series less its mean, compensated (Neumaier) so that a block's sum is
/// accurate relative to the block rather than to everything before it, and a prefix count
/// of its missing values.
struct BlockSums {
    high: Vec<f64>,
    low: Vec<f64>,
    missing: Vec<usize>,
}

impl BlockSums {
    fn new(values: &[f64]) -> Self {
        // The differences do not depend on an offset; taking the mean out keeps the sums
        // small, so a level of −20 dBm does not cost digits of its 0.001 dB wander.
        let finite = || values.iter().copied().filter(|v| v.is_finite());
        let count = finite().count();
        let mean = if count == 0 {
            0.0
        } else {
            finite().sum::<f64>() / count as f64
        };
        let mut sums = BlockSums {
            high: vec![0.0],
            low: vec![0.0],
            missing: vec![0],
        };
        let (mut high, mut low, mut missing) = (0.0f64, 0.0f64, 0usize);
        for &value in values {
            let x = if value.is_finite() {
                value - mean
            } else {
                missing += 1;
                0.0
            };
            let next = high + x;
            low += if high.abs() >= x.abs() {
                (high - next) + x
            } else {
                (x - next) + high
            };
            high = next;
            sums.high.push(high);
            sums.low.push(low);
            sums.missing.push(missing);
        }
        sums
    }

    /// Values in the series.
    fn len(&self) -> usize {
        self.high.len() - 1
    }

    /// The sum of values `from..to` (less the mean each).
    fn total(&self, from: usize, to: usize) -> f64 {
        (self.high[to] - self.high[from]) + (self.low[to] - self.low[from])
    }

    /// Whether values `from..to` are all present.
    fn complete(&self, from: usize, to: usize) -> bool {
        self.missing[to] == self.missing[from]
    }
}

/// Most slots of the time grid per row given: a series mostly missing says little about
/// stability, and a wild time stamp must not allocate without bound.
const MOST_SLOTS_PER_ROW: usize = 4;

/// The rows' `values` placed on a grid of step `tau0_s` from the first row's time, NaN in
/// each slot no row fell into, ready for [`overlapping_adev`]. A row goes to its nearest
/// slot. None when the lengths differ, `tau0_s` is not a positive number, a time is not
/// finite, the times do not increase, two rows fall into one slot (they are not equally
/// spaced), or the grid would hold more than four slots per row.
pub fn on_time_grid(times_s: &[f64], values: &[f64], tau0_s: f64) -> Option<Vec<f64>> {
    if times_s.len() != values.len() || !usable_spacing(tau0_s) {
        return None;
    }
    let first = *times_s.first()?;
    let slot = |t: f64| ((t - first) / tau0_s).round();
    let last = slot(*times_s.last()?);
    let most = (MOST_SLOTS_PER_ROW * times_s.len()) as f64;
    if !(last.is_finite() && last < most) {
        return None;
    }
    let mut grid = vec![f64::NAN; last as usize + 1];
    let mut next_free = 0usize;
    for (&t, &value) in times_s.iter().zip(values) {
        let index = slot(t);
        if !(index.is_finite() && index >= next_free as f64 && index <= last) {
            return None;
        }
        grid[index as usize] = value;
        next_free = index as usize + 1;
    }
    Some(grid)
}
