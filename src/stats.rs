//! Statistics over readings, always in the power domain: means are taken over watts and
//! only then turned into dBm. A value type that adds, so intervals, holds and trend
//! buckets merge.

use crate::calibration::{Flags, Reading};
use crate::units::{dbm_to_watts, watts_to_dbm};

/// Readings with these flags are bounds, not values, and are left out of means and extremes.
pub const NOT_A_VALUE: Flags = Flags::BELOW_SPAN.union(Flags::ADC_CLIP);

/// Count, power-domain sum, extremes and flags of a set of readings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PowerStats {
    /// Readings seen, valid or not.
    pub samples: u64,
    /// Readings that are values (not below span, not clipped).
    pub valid: u64,
    /// Sum of the valid readings in watts.
    pub sum_w: f64,
    /// Lowest valid reading, dBm (+∞ when none).
    pub min_dbm: f64,
    /// Highest valid reading, dBm (−∞ when none).
    pub max_dbm: f64,
    /// Every flag any reading carried.
    pub flags: Flags,
}

impl Default for PowerStats {
    fn default() -> Self {
        PowerStats {
            samples: 0,
            valid: 0,
            sum_w: 0.0,
            min_dbm: f64::INFINITY,
            max_dbm: f64::NEG_INFINITY,
            flags: Flags::empty(),
        }
    }
}

impl PowerStats {
    /// Adds one reading.
    pub fn add(&mut self, reading: &Reading) {
        self.samples += 1;
        self.flags |= reading.flags;
        if reading.flags.intersects(NOT_A_VALUE) {
            return;
        }
        self.valid += 1;
        self.sum_w += dbm_to_watts(reading.dbm);
        self.min_dbm = self.min_dbm.min(reading.dbm);
        self.max_dbm = self.max_dbm.max(reading.dbm);
    }

    /// Adds another set (as if its readings had been added one by one).
    pub fn merge(&mut self, other: &PowerStats) {
        self.samples += other.samples;
        self.valid += other.valid;
        self.sum_w += other.sum_w;
        self.min_dbm = self.min_dbm.min(other.min_dbm);
        self.max_dbm = self.max_dbm.max(other.max_dbm);
        self.flags |= other.flags;
    }

    /// Mean power in watts over the valid readings.
    pub fn mean_w(&self) -> Option<f64> {
        (self.valid > 0).then(|| self.sum_w / self.valid as f64)
    }

    /// Mean power in dBm (of the mean in watts).
    pub fn mean_dbm(&self) -> Option<f64> {
        self.mean_w().map(watts_to_dbm)
    }

    /// Lowest and highest valid reading, dBm.
    pub fn extremes(&self) -> Option<(f64, f64)> {
        (self.valid > 0).then_some((self.min_dbm, self.max_dbm))
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

    #[test]
    fn bounds_are_flagged_but_not_averaged() {
        let mut s = PowerStats::default();
        s.add(&reading(-30.0, Flags::BELOW_SPAN));
        assert_eq!(s.mean_dbm(), None);
        s.add(&reading(3.0, Flags::ABOVE_SPAN));
        assert_eq!(s.samples, 2);
        assert_eq!(s.valid, 1);
        assert!((s.mean_dbm().unwrap() - 3.0).abs() < 1e-12);
        assert_eq!(s.flags, Flags::BELOW_SPAN | Flags::ABOVE_SPAN);
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
        assert_eq!(left.samples, all.samples);
        assert!((left.sum_w - all.sum_w).abs() < 1e-18);
        assert_eq!(left.extremes(), all.extremes());
    }
}
