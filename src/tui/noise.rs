//! The noise of the shown reading: the standard deviation, in dB, of the single readings
//! in the averaging window, shown beside the peaking aid's best value so that a best a
//! little above the present value can be told from noise.

use std::collections::VecDeque;

use dbtrail::stats::Averaging;

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
