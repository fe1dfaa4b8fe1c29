//! Corrections between the detector and the reference plane: the detector's frequency
//! correction and the offset of the attenuator or coupler in front of it.
//!
//! Both are tables of (frequency, dB) interpolated linearly in log-frequency and clamped
//! (and flagged) outside the table. The frequency correction is defined as true minus
//! indicated; the offset is the loss (or coupling factor) between the reference plane and
//! the detector input, so power at the reference plane =
//! detector-input dBm + correction(f) + offset(f).
//!
//! The frequency correction may instead follow a single-pole roll-off fitted to its table
//! ([`RollOff`]): a detector reads low as its junction capacitance shunts the RF, a loss
//! that rises like f², which straight lines between rows follow only roughly.

use thiserror::Error;

use crate::maths::numeric::levenberg_marquardt;

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

/// How many rows a roll-off needs: two parameters and at least one row to judge them by.
pub const ROLL_OFF_MIN_ROWS: usize = 3;

/// 10·log10(1 + (f/fc)²): how much a single pole at `corner_hz` takes off at `hz`, dB.
pub fn single_pole_db(hz: f64, corner_hz: f64) -> f64 {
    10.0 * (hz / corner_hz).powi(2).ln_1p() / std::f64::consts::LN_10
}

/// A single-pole roll-off fitted to a correction table: correction(f) =
/// constant + 10·log10(1 + (f/corner)²). The constant takes up the roll-off already in the
/// detector curve at the frequency it was taken at, and any flat error of the rows, so the
/// corner is set by the rise alone.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RollOff {
    /// The corner frequency, Hz.
    pub corner_hz: f64,
    /// The constant, dB.
    pub constant_db: f64,
    /// The rows' residual standard deviation about the curve, √(SSE/(n − 2)), dB.
    pub residual_db: f64,
    /// The rows' lowest and highest frequency, Hz: the range the fit was judged over.
    pub rows_hz: (f64, f64),
}

/// Why a table's rows gave no roll-off.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum RollOffError {
    /// Fewer than [`ROLL_OFF_MIN_ROWS`] rows.
    #[error(
        "the roll-off is fitted to the rows and needs at least {ROLL_OFF_MIN_ROWS}; {count} \
         given: add rows or use kind = \"table\""
    )]
    TooFewRows {
        /// Rows given.
        count: usize,
    },
    /// The least-squares fit did not settle, or its corner ended on the edge of its search
    /// range (the rows are flat or fall with frequency, so no corner describes them).
    #[error(
        "the rows do not rise with frequency as a single-pole roll-off does, so no corner \
         frequency fits them; use kind = \"table\""
    )]
    NoFit,
}

impl RollOff {
    /// The least-squares fit of the roll-off to `table`'s rows (unweighted, in dB).
    pub fn fit(table: &FreqTable) -> Result<RollOff, RollOffError> {
        let rows = table.rows();
        if rows.len() < ROLL_OFF_MIN_ROWS {
            return Err(RollOffError::TooFewRows { count: rows.len() });
        }
        let (lo_hz, hi_hz) = (rows[0].0, rows[rows.len() - 1].0);
        // The corner is searched as log10(Hz), three decades either side of the rows: a
        // corner further out leaves no trace in them.
        let corner_bounds = (lo_hz.log10() - 3.0, hi_hz.log10() + 3.0);
        let residuals = |p: [f64; 2], r: &mut [f64]| {
            let corner_hz = 10f64.powf(p[0]);
            for (ri, &(hz, db)) in r.iter_mut().zip(rows) {
                *ri = p[1] + single_pole_db(hz, corner_hz) - db;
            }
            r.iter().all(|v| v.is_finite())
        };
        let start = start_guess(rows);
        let fit = levenberg_marquardt(
            &residuals,
            rows.len(),
            [start[0].clamp(corner_bounds.0, corner_bounds.1), start[1]],
            [corner_bounds, (-200.0, 200.0)],
        );
        let on_edge = [corner_bounds.0, corner_bounds.1]
            .iter()
            .any(|edge| (fit.params[0] - edge).abs() < 1e-6);
        if !fit.converged || on_edge || !fit.sse.is_finite() {
            return Err(RollOffError::NoFit);
        }
        Ok(RollOff {
            corner_hz: 10f64.powf(fit.params[0]),
            constant_db: fit.params[1],
            residual_db: (fit.sse / (rows.len() - 2) as f64).sqrt(),
            rows_hz: (lo_hz, hi_hz),
        })
    }

    /// The correction at `hz`, dB.
    pub fn db(&self, hz: f64) -> f64 {
        self.constant_db + single_pole_db(hz, self.corner_hz)
    }
}

/// A start for the fit: the corner that gives the table's rise between its first and last
/// row (or far above the rows when they do not rise), and the first row's level.
fn start_guess(rows: &[(f64, f64)]) -> [f64; 2] {
    let ((f0, d0), (f1, d1)) = (rows[0], rows[rows.len() - 1]);
    let rise = (d1 - d0).max(0.01);
    let corner_hz = f1 / (10f64.powf(rise / 10.0) - 1.0).sqrt();
    [corner_hz.log10(), d0 - single_pole_db(f0, corner_hz)]
}

/// Which description of the frequency correction is in use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CorrectionKind {
    /// The table, interpolated in log-frequency.
    Table,
    /// The single-pole roll-off fitted to the table.
    RollOff,
}

impl CorrectionKind {
    /// Every kind with its profile name.
    pub const NAMES: [(&'static str, CorrectionKind); 2] = [
        ("table", CorrectionKind::Table),
        ("roll-off", CorrectionKind::RollOff),
    ];

    /// The kind a profile names, if any.
    pub fn from_name(name: &str) -> Option<Self> {
        Self::NAMES
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, k)| *k)
    }

    /// The profile name.
    pub fn name(self) -> &'static str {
        Self::NAMES
            .iter()
            .find(|(_, k)| *k == self)
            .map_or("", |(n, _)| n)
    }
}

/// The detector's frequency correction: its table, the roll-off fitted to the table when it
/// has enough rows, and which of the two is in use.
#[derive(Debug, Clone, PartialEq)]
pub struct FrequencyCorrection {
    table: FreqTable,
    roll_off: Option<RollOff>,
    kind: CorrectionKind,
}

impl FrequencyCorrection {
    /// The correction of `kind` from `table`. The roll-off is fitted whenever the table has
    /// [`ROLL_OFF_MIN_ROWS`] rows, so it can be compared with the table; it must fit when it
    /// is the kind in use.
    pub fn new(table: FreqTable, kind: CorrectionKind) -> Result<Self, RollOffError> {
        let roll_off = match (RollOff::fit(&table), kind) {
            (Ok(fit), _) => Some(fit),
            (Err(e), CorrectionKind::RollOff) => return Err(e),
            (Err(_), CorrectionKind::Table) => None,
        };
        Ok(FrequencyCorrection {
            table,
            roll_off,
            kind,
        })
    }

    /// The table as given.
    pub fn table(&self) -> &FreqTable {
        &self.table
    }

    /// The roll-off fitted to the table, when it has enough rows and they follow one.
    pub fn roll_off(&self) -> Option<&RollOff> {
        self.roll_off.as_ref()
    }

    /// Which description is in use.
    pub fn kind(&self) -> CorrectionKind {
        self.kind
    }

    /// The table's rows, (Hz, dB).
    pub fn rows(&self) -> &[(f64, f64)] {
        self.table.rows()
    }

    /// The correction in use at `hz`. The roll-off follows its curve beyond the rows (the
    /// pole goes on rising) but flags such a frequency as outside, as the table does.
    pub fn at(&self, hz: f64) -> Lookup {
        match (self.kind, &self.roll_off) {
            (CorrectionKind::RollOff, Some(fit)) => Lookup {
                db: fit.db(hz),
                outside: hz < fit.rows_hz.0 || hz > fit.rows_hz.1,
            },
            _ => self.table.at(hz),
        }
    }

    /// The standard uncertainty of the correction in use at `hz`, dB: for the table, its
    /// interpolation estimate ([`FreqTable::interpolation_u_db`]); for the roll-off, the
    /// rows' residual standard deviation about the curve, at every frequency (the curve
    /// misses the rows by about that much, on a row as between rows).
    pub fn interpolation_u_db(&self, hz: f64) -> f64 {
        match (self.kind, &self.roll_off) {
            (CorrectionKind::RollOff, Some(fit)) => fit.residual_db,
            _ => self.table.interpolation_u_db(hz),
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

    // Source: common practice — a single pole is 3 dB down at its corner: 10·log10 2 =
    // 3.0103 dB; a decade above, 10·log10 101 = 20.0432 dB.
    #[test]
    fn a_single_pole_is_three_db_down_at_its_corner() {
        assert!((single_pole_db(300e6, 300e6) - 3.010_299_957).abs() < 1e-9);
        assert!((single_pole_db(3e9, 300e6) - 20.043_213_737).abs() < 1e-9);
        assert!(single_pole_db(1e3, 300e6) < 1e-10);
    }

    fn rows_of(corner_hz: f64, constant_db: f64, freqs: &[f64]) -> FreqTable {
        FreqTable::new(
            freqs
                .iter()
                .map(|&f| (f, constant_db + single_pole_db(f, corner_hz)))
                .collect(),
        )
        .unwrap()
    }

    // Source: worked example — rows computed from the formula with a known corner and
    // constant must give them back, with no residual.
    #[test]
    fn the_fit_recovers_a_known_corner_and_constant() {
        let freqs = [1e6, 10e6, 50e6, 146e6, 250e6, 440e6];
        for (corner_hz, constant_db) in [(486e6, 0.0), (700e6, -0.03), (200e6, 0.1)] {
            let fit = RollOff::fit(&rows_of(corner_hz, constant_db, &freqs)).unwrap();
            assert!(
                (fit.corner_hz / corner_hz - 1.0).abs() < 1e-4,
                "{corner_hz}: {fit:?}"
            );
            assert!((fit.constant_db - constant_db).abs() < 1e-5, "{fit:?}");
            assert!(fit.residual_db < 1e-5, "{fit:?}");
            assert_eq!(fit.rows_hz, (1e6, 440e6));
        }
    }

    // Source: the rule in docs/profiles.md — the roll-off needs three rows, and rows that do
    // not rise give no corner.
    #[test]
    fn too_few_or_falling_rows_give_no_roll_off() {
        let two = FreqTable::new(vec![(1e6, 0.0), (1e9, 3.0)]).unwrap();
        assert_eq!(
            RollOff::fit(&two),
            Err(RollOffError::TooFewRows { count: 2 })
        );
        let falling = FreqTable::new(vec![(10e6, 0.2), (100e6, 0.0), (435e6, -0.4)]).unwrap();
        assert_eq!(RollOff::fit(&falling), Err(RollOffError::NoFit));
        assert!(FrequencyCorrection::new(falling.clone(), CorrectionKind::RollOff).is_err());
        let shown = FrequencyCorrection::new(falling, CorrectionKind::Table).unwrap();
        assert!(shown.roll_off().is_none());
    }

    // Source: worked example — with the roll-off in use, the value is the curve's (beyond
    // the rows too, flagged) and the uncertainty the residual; with the table, the table's.
    #[test]
    fn the_kind_in_use_gives_the_value_and_its_uncertainty() {
        let mut table = rows_of(486e6, 0.0, &[10e6, 146e6, 440e6]).rows().to_vec();
        table[1].1 += 0.05;
        let table = FreqTable::new(table).unwrap();
        let roll = FrequencyCorrection::new(table.clone(), CorrectionKind::RollOff).unwrap();
        let fit = *roll.roll_off().unwrap();
        assert_eq!(roll.at(250e6).db, fit.db(250e6));
        assert!(roll.at(1e9).outside && !roll.at(250e6).outside);
        assert!(roll.at(1e9).db > table.at(1e9).db);
        assert!(fit.residual_db > 0.0);
        assert_eq!(roll.interpolation_u_db(146e6), fit.residual_db);
        let plain = FrequencyCorrection::new(table.clone(), CorrectionKind::Table).unwrap();
        assert_eq!(plain.at(250e6), table.at(250e6));
        assert_eq!(
            plain.interpolation_u_db(250e6),
            table.interpolation_u_db(250e6)
        );
        assert_eq!(plain.interpolation_u_db(146e6), 0.0);
    }
}
