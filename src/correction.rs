//! Corrections between the detector and the reference plane: the detector's frequency
//! correction and the offset of the attenuator or coupler in front of it.
//!
//! Both are tables of (frequency, dB) interpolated linearly in log-frequency and clamped
//! (and flagged) outside the table. The frequency correction is defined as true minus
//! indicated; the offset is the loss (or coupling factor) between the reference plane and
//! the detector input, so power at the reference plane =
//! detector-input dBm + correction(f) + offset(f).

use thiserror::Error;

/// Why a (frequency, dB) table was refused; indices count from 0 in the order given.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum TableError {
    /// No rows.
    #[error("the table is empty; give at least one (frequency, dB) row or leave it out")]
    Empty,
    /// A frequency that is not a positive finite number.
    #[error("the frequency ({hz} Hz) must be a positive finite number")]
    BadFrequency {
        /// Row.
        index: usize,
        /// The value.
        hz: f64,
    },
    /// A correction that is NaN or infinite.
    #[error("the dB value must be a finite number")]
    BadDb {
        /// Row.
        index: usize,
    },
    /// A frequency equal to or below the one before it.
    #[error(
        "{} is not above the frequency of the row before it; list frequencies in rising \
         order with no duplicates",
        crate::units::format_frequency(*hz)
    )]
    NotIncreasing {
        /// Row.
        index: usize,
        /// The value.
        hz: f64,
    },
}

/// A (frequency, dB) table, interpolated linearly in log-frequency.
#[derive(Debug, Clone, PartialEq)]
pub struct FreqTable {
    rows: Vec<(f64, f64)>,
}

/// A looked-up dB value, and whether the frequency fell outside the table (then clamped).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Lookup {
    /// The dB value.
    pub db: f64,
    /// True when the frequency lay outside the table and the end value was used.
    pub outside: bool,
}

impl FreqTable {
    /// Builds the table from (Hz, dB) rows in rising frequency order.
    pub fn new(rows: Vec<(f64, f64)>) -> Result<Self, TableError> {
        if rows.is_empty() {
            return Err(TableError::Empty);
        }
        for (index, &(hz, db)) in rows.iter().enumerate() {
            if !(hz.is_finite() && hz > 0.0) {
                return Err(TableError::BadFrequency { index, hz });
            }
            if !db.is_finite() {
                return Err(TableError::BadDb { index });
            }
            if index > 0 && hz <= rows[index - 1].0 {
                return Err(TableError::NotIncreasing { index, hz });
            }
        }
        Ok(FreqTable { rows })
    }

    /// The rows, (Hz, dB).
    pub fn rows(&self) -> &[(f64, f64)] {
        &self.rows
    }

    /// An estimate of the standard uncertainty of interpolating between rows at `hz`, dB:
    /// half the difference between interpolating linearly in log-frequency and linearly
    /// in frequency, taken as the half-width of a rectangular distribution (÷ √3). Zero
    /// at a row and outside the table (where the end value is flagged instead).
    pub fn interpolation_u_db(&self, hz: f64) -> f64 {
        let rows = &self.rows;
        let (first, last) = (rows[0], rows[rows.len() - 1]);
        if rows.len() == 1 || hz <= first.0 || hz >= last.0 {
            return 0.0;
        }
        let k = rows.partition_point(|&(f, _)| f <= hz) - 1;
        let ((f0, d0), (f1, d1)) = (rows[k], rows[k + 1]);
        let in_log = d0 + (d1 - d0) * (hz / f0).ln() / (f1 / f0).ln();
        let in_linear = d0 + (d1 - d0) * (hz - f0) / (f1 - f0);
        (in_log - in_linear).abs() / 2.0 / 3f64.sqrt()
    }

    /// The value at `hz`.
    pub fn at(&self, hz: f64) -> Lookup {
        let rows = &self.rows;
        let (first, last) = (rows[0], rows[rows.len() - 1]);
        if hz <= first.0 || hz >= last.0 || rows.len() == 1 {
            let end = if hz <= first.0 { first } else { last };
            return Lookup {
                db: end.1,
                outside: hz < first.0 || hz > last.0,
            };
        }
        let k = rows.partition_point(|&(f, _)| f <= hz) - 1;
        let ((f0, d0), (f1, d1)) = (rows[k], rows[k + 1]);
        let t = (hz / f0).ln() / (f1 / f0).ln();
        Lookup {
            db: d0 + t * (d1 - d0),
            outside: false,
        }
    }
}

/// What sits between the reference plane and the detector.
#[derive(Debug, Clone, PartialEq)]
pub enum Offset {
    /// A fixed dB figure at every frequency.
    Fixed(f64),
    /// A figure that varies with frequency.
    Table(FreqTable),
}

impl Offset {
    /// The offset at `hz`.
    pub fn at(&self, hz: f64) -> Lookup {
        match self {
            Offset::Fixed(db) => Lookup {
                db: *db,
                outside: false,
            },
            Offset::Table(table) => table.at(hz),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Source: worked example — halfway between 10 MHz and 1 GHz on a log scale is 100 MHz,
    // so a correction going 0 → +2 dB reads +1 dB there.
    #[test]
    fn interpolates_in_log_frequency() {
        let t = FreqTable::new(vec![(10e6, 0.0), (1e9, 2.0)]).unwrap();
        let mid = t.at(100e6);
        assert!((mid.db - 1.0).abs() < 1e-12 && !mid.outside);
        assert!((t.at(10e6 * 10f64.powf(0.5)).db - 0.5).abs() < 1e-12);
    }

    #[test]
    fn clamps_and_flags_outside_the_table() {
        let t = FreqTable::new(vec![(1e6, 0.1), (30e6, 0.3), (150e6, 1.2)]).unwrap();
        assert_eq!(
            t.at(100e3),
            Lookup {
                db: 0.1,
                outside: true
            }
        );
        assert_eq!(
            t.at(433e6),
            Lookup {
                db: 1.2,
                outside: true
            }
        );
        assert_eq!(
            t.at(30e6),
            Lookup {
                db: 0.3,
                outside: false
            }
        );
        assert_eq!(
            t.at(150e6),
            Lookup {
                db: 1.2,
                outside: false
            }
        );
    }

    #[test]
    fn refuses_unsorted_duplicate_and_bad_rows() {
        assert_eq!(
            FreqTable::new(vec![(2e6, 0.0), (1e6, 0.0)]),
            Err(TableError::NotIncreasing { index: 1, hz: 1e6 })
        );
        assert!(matches!(
            FreqTable::new(vec![(1e6, 0.0), (1e6, 0.1)]),
            Err(TableError::NotIncreasing { index: 1, .. })
        ));
        assert!(matches!(
            FreqTable::new(vec![(0.0, 0.0)]),
            Err(TableError::BadFrequency { .. })
        ));
        assert!(matches!(
            FreqTable::new(vec![(1.0, f64::NAN)]),
            Err(TableError::BadDb { .. })
        ));
        assert_eq!(FreqTable::new(vec![]), Err(TableError::Empty));
    }

    // Source: worked by hand. Rows (100 MHz, 0 dB) and (400 MHz, 2 dB); at 200 MHz the
    // log-frequency line gives 2·ln2/ln4 = 1.0 dB and the linear one 2·100/300 = 0.6667 dB,
    // so the estimate is (1.0 − 0.6667)/2/√3 = 0.09623 dB; zero on a row.
    #[test]
    fn interpolation_error_is_half_the_log_linear_difference_over_root_three() {
        let t = FreqTable::new(vec![(100e6, 0.0), (400e6, 2.0)]).unwrap();
        assert!((t.interpolation_u_db(200e6) - 0.096225).abs() < 1e-6);
        assert_eq!(t.interpolation_u_db(100e6), 0.0);
        assert_eq!(t.interpolation_u_db(400e6), 0.0);
        assert_eq!(t.interpolation_u_db(1e9), 0.0);
    }
}
