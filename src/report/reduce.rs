//! Folding a run's rows into intervals as they are read, so that a run of any length is held
//! in a bounded number of rows. Rows are kept as logged while there are few; past the cap
//! they are folded into intervals of a first width on a grid from the run's time 0, and
//! whenever the intervals pass the cap again neighbours are merged pairwise (the width
//! doubles). Since every width is the first one times a power of two, an interval's place
//! on the grid is the row's place at the first width shifted right, so merging in steps
//! gives the same intervals as folding at the final width in one go.

use super::compensation::{RowCompensation, UncompSums};
use super::LogRow;
use crate::units::{dbm_to_watts, watts_to_dbm};

/// The most rows a run holds before they are folded (or merged further): enough for a
/// plot's columns many times over and for the model's fit, small enough to keep a day's
/// per-sample log in a few megabytes.
pub const MOST_ROWS: usize = 100_000;
/// The first width per-sample rows are folded into, seconds.
pub const FIRST_WIDTH_S: f64 = 1.0;

/// How a log's rows are to be folded while it is read.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Reduction {
    /// Fold from the first row into intervals of this width, seconds (`report --every`);
    /// None keeps rows as logged until there are more than `most_rows`.
    pub width_s: Option<f64>,
    /// The cap on rows held: past it, the width doubles.
    pub most_rows: usize,
}

impl Default for Reduction {
    fn default() -> Self {
        Reduction {
            width_s: None,
            most_rows: MOST_ROWS,
        }
    }
}

/// One interval being filled: its figures so far, with the sums its power mean and its
/// uncertainty are made from.
#[derive(Debug, Clone, PartialEq)]
struct Interval {
    /// Its place on the grid at the current width.
    index: u64,
    row: LogRow,
    /// Σ w·P over its rows with a mean (w the row's samples averaged, P in watts).
    energy: f64,
    /// Σ w over the same rows.
    weight: f64,
    /// Σ w·P·u over the same rows.
    energy_u: f64,
    /// False once a row with a mean has no `u_db`.
    every_u: bool,
    /// What its rows add: their temperatures joined (the uncompensated mean comes from
    /// `uncomp`).
    compensation: RowCompensation,
    /// The sums its uncompensated mean is made from.
    uncomp: UncompSums,
}

/// The rows of one run, as logged or folded.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Folder {
    most_rows: usize,
    /// The width at doubling 0, seconds.
    first_width_s: f64,
    /// None while rows are kept as logged.
    doublings: Option<u32>,
    logged: Vec<(LogRow, RowCompensation)>,
    intervals: Vec<Interval>,
}

impl Folder {
    /// A folder for a run whose rows are `interval_s` apart, when a line says so (folding
    /// then starts at that interval, so that each first interval holds one row).
    pub(super) fn new(reduction: Reduction, interval_s: Option<f64>) -> Self {
        let first_width_s = reduction.width_s.or(interval_s).unwrap_or(FIRST_WIDTH_S);
        Folder {
            most_rows: reduction.most_rows.max(1),
            first_width_s,
            doublings: reduction.width_s.map(|_| 0),
            logged: Vec::new(),
            intervals: Vec::new(),
        }
    }

    /// Takes the next row (rows come in time order) with what it adds.
    pub(super) fn push(&mut self, row: LogRow, compensation: RowCompensation) {
        match self.doublings {
            None => {
                self.logged.push((row, compensation));
                if self.logged.len() > self.most_rows {
                    self.doublings = Some(0);
                    for (row, compensation) in std::mem::take(&mut self.logged) {
                        self.fold(row, compensation);
                    }
                    self.keep_under_cap();
                }
            }
            Some(_) => {
                self.fold(row, compensation);
                self.keep_under_cap();
            }
        }
    }

    /// The width the rows were folded into, seconds; None when they are as logged.
    pub(super) fn width_s(&self) -> Option<f64> {
        self.doublings
            .map(|d| self.first_width_s * 2f64.powi(d as i32))
    }

    /// The rows held: as logged, or one per interval (stamped at its start); and beside
    /// them what each adds.
    pub(super) fn into_rows(self) -> (Vec<LogRow>, Vec<RowCompensation>) {
        match self.width_s() {
            None => self.logged.into_iter().unzip(),
            Some(width) => self.intervals.iter().map(|i| finished(i, width)).unzip(),
        }
    }

    fn fold(&mut self, row: LogRow, compensation: RowCompensation) {
        let first = (row.t / self.first_width_s).floor().max(0.0) as u64;
        let index = first.checked_shr(self.doublings.unwrap_or(0)).unwrap_or(0);
        match self.intervals.last_mut() {
            // A resumed leg may start a few milliseconds before the rows above it end:
            // such a row joins the interval those rows are in.
            Some(last) if index <= last.index => merge(last, &start(index, row, compensation)),
            _ => self.intervals.push(start(index, row, compensation)),
        }
    }

    fn keep_under_cap(&mut self) {
        while self.intervals.len() > self.most_rows {
            self.doublings = self.doublings.map(|d| d + 1);
            let mut merged: Vec<Interval> = Vec::with_capacity(self.intervals.len() / 2 + 1);
            for mut interval in std::mem::take(&mut self.intervals) {
                interval.index >>= 1;
                match merged.last_mut() {
                    Some(last) if last.index == interval.index => merge(last, &interval),
                    _ => merged.push(interval),
                }
            }
            self.intervals = merged;
        }
    }
}

/// An interval of one row.
fn start(index: u64, row: LogRow, compensation: RowCompensation) -> Interval {
    let uncomp = UncompSums::of(&row, &compensation);
    let (weight, energy, u) = match row.mean_dbm {
        Some(mean) => {
            let w = row.averaged.max(1) as f64;
            (w, w * dbm_to_watts(mean), row.u_db)
        }
        None => (0.0, 0.0, Some(0.0)),
    };
    let lowest = row.min_dbm.or(row.mean_dbm);
    let highest = row.max_dbm.or(row.mean_dbm);
    Interval {
        index,
        row: LogRow {
            min_dbm: lowest,
            max_dbm: highest,
            bound: row.part_in_bound(),
            ..row
        },
        energy,
        weight,
        energy_u: energy * u.unwrap_or(0.0),
        every_u: u.is_some(),
        compensation,
        uncomp,
    }
}

/// Adds `other` (later in time) to `into`.
fn merge(into: &mut Interval, other: &Interval) {
    let (a, b) = (&mut into.row, &other.row);
    a.samples = a.samples.saturating_add(b.samples);
    a.averaged = a.averaged.saturating_add(b.averaged);
    a.min_dbm = either(a.min_dbm, b.min_dbm, f64::min);
    a.max_dbm = either(a.max_dbm, b.max_dbm, f64::max);
    for flag in &b.flags {
        if !a.flags.contains(flag) {
            a.flags.push(flag.clone());
        }
    }
    a.bound = a.bound.join(b.bound);
    into.energy += other.energy;
    into.weight += other.weight;
    into.energy_u += other.energy_u;
    into.every_u &= other.every_u;
    into.compensation.join_temperatures(&other.compensation);
    into.uncomp.add(other.uncomp);
}

fn either(a: Option<f64>, b: Option<f64>, pick: fn(f64, f64) -> f64) -> Option<f64> {
    match (a, b) {
        (Some(a), Some(b)) => Some(pick(a, b)),
        (a, b) => a.or(b),
    }
}

/// The row an interval stands as: stamped at its start, its mean the power mean of its
/// rows' (over watts, weighted by samples averaged), its uncertainty theirs weighted by
/// energy as the report weighs rows' (each wholly systematic); beside it, its
/// uncompensated mean over watts the same way and its rows' temperatures.
fn finished(interval: &Interval, width_s: f64) -> (LogRow, RowCompensation) {
    let has_mean = interval.weight > 0.0;
    let mean_w = interval.energy / interval.weight;
    let compensation = RowCompensation {
        uncomp_dbm: interval.uncomp.mean_dbm(),
        ..interval.compensation
    };
    let row = LogRow {
        t: interval.index as f64 * width_s,
        mean_dbm: has_mean.then(|| watts_to_dbm(mean_w)),
        u_db: (has_mean && interval.every_u && interval.energy > 0.0)
            .then(|| interval.energy_u / interval.energy),
        bound: interval.row.bound,
        ..interval.row.clone()
    };
    (row, compensation)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::compensation::Temperatures;
    use crate::stats::Bound;

    fn sample(t: f64, dbm: Option<f64>) -> LogRow {
        LogRow {
            t,
            samples: 1,
            mean_dbm: dbm,
            min_dbm: dbm,
            max_dbm: dbm,
            flags: Vec::new(),
            bound: Bound::Exact,
            averaged: 1,
            u_db: Some(0.4),
        }
    }

    // Source: worked by hand: 1 mW and 3 mW average to 2 mW (3.0103 dBm), not to the mean
    // of 0 and 4.77 dBm (2.39 dBm).
    #[test]
    fn an_interval_holds_the_power_mean_of_its_rows_and_their_extremes() {
        let mut folder = Folder::new(
            Reduction {
                width_s: Some(1.0),
                most_rows: 10,
            },
            None,
        );
        folder.push(sample(0.0, Some(0.0)), RowCompensation::default());
        let mut flagged = sample(0.5, Some(10.0 * 3f64.log10()));
        flagged.flags.push("clip".into());
        flagged.bound = Bound::AtLeast;
        folder.push(flagged, RowCompensation::default());
        folder.push(sample(1.2, None), RowCompensation::default());
        let rows = folder.into_rows().0;
        assert_eq!(rows.len(), 2);
        assert!((rows[0].mean_dbm.unwrap() - 10.0 * 2f64.log10()).abs() < 1e-12);
        assert_eq!(rows[0].min_dbm, Some(0.0));
        assert!((rows[0].max_dbm.unwrap() - 4.771_212_547).abs() < 1e-9);
        assert_eq!(
            (rows[0].samples, rows[0].flags.clone()),
            (2, vec!["clip".into()])
        );
        assert_eq!(rows[0].bound, Bound::AtLeast);
        assert!((rows[0].u_db.unwrap() - 0.4).abs() < 1e-12);
        assert_eq!(
            (rows[1].t, rows[1].mean_dbm, rows[1].u_db),
            (1.0, None, None)
        );
    }

    // Source: the rule in docs/report.md ("Long logs"): past the cap, neighbours merge
    // pairwise; 10 rows a second apart under a cap of 4 end in intervals of 4 s.
    #[test]
    fn rows_past_the_cap_fold_and_the_width_doubles() {
        let mut folder = Folder::new(
            Reduction {
                width_s: None,
                most_rows: 4,
            },
            None,
        );
        for i in 0..4 {
            folder.push(sample(f64::from(i), Some(1.0)), RowCompensation::default());
        }
        assert_eq!(folder.width_s(), None);
        for i in 4..10 {
            folder.push(sample(f64::from(i), Some(1.0)), RowCompensation::default());
        }
        assert_eq!(folder.width_s(), Some(4.0));
        let rows = folder.into_rows().0;
        let stamps: Vec<(f64, u64)> = rows.iter().map(|r| (r.t, r.samples)).collect();
        assert_eq!(stamps, [(0.0, 4), (4.0, 4), (8.0, 2)]);
    }

    /// The reduction done the plain way, after reading every row: the smallest doubling
    /// that keeps the intervals within the cap, then each interval's figures summed
    /// straight from its rows.
    fn two_pass(
        pairs: &[(LogRow, RowCompensation)],
        reduction: Reduction,
        interval_s: Option<f64>,
    ) -> Vec<(LogRow, RowCompensation)> {
        if reduction.width_s.is_none() && pairs.len() <= reduction.most_rows {
            return pairs.to_vec();
        }
        let rows: Vec<LogRow> = pairs.iter().map(|(r, _)| r.clone()).collect();
        let first = reduction.width_s.or(interval_s).unwrap_or(FIRST_WIDTH_S);
        let place = |r: &LogRow, d: u32| ((r.t / first).floor() as u64) >> d;
        let count = |d: u32| {
            let mut places: Vec<u64> = rows.iter().map(|r| place(r, d)).collect();
            places.dedup();
            places.len()
        };
        let doublings = (0..64).find(|d| count(*d) <= reduction.most_rows).unwrap();
        let width = first * 2f64.powi(doublings as i32);
        let mut out = Vec::new();
        let mut from = 0;
        while from < rows.len() {
            let at = place(&rows[from], doublings);
            let to = from
                + rows[from..]
                    .iter()
                    .take_while(|r| place(r, doublings) == at)
                    .count();
            out.push((
                summed(&rows[from..to], at as f64 * width),
                summed_compensation(&pairs[from..to]),
            ));
            from = to;
        }
        out
    }

    fn summed(rows: &[LogRow], t: f64) -> LogRow {
        let with_mean: Vec<&LogRow> = rows.iter().filter(|r| r.mean_dbm.is_some()).collect();
        let w = |r: &LogRow| r.averaged.max(1) as f64;
        let p = |r: &LogRow| w(r) * dbm_to_watts(r.mean_dbm.unwrap());
        let energy: f64 = with_mean.iter().map(|r| p(r)).sum();
        let weight: f64 = with_mean.iter().map(|r| w(r)).sum();
        let every_u = with_mean.iter().all(|r| r.u_db.is_some());
        let lowest = rows
            .iter()
            .filter_map(|r| r.min_dbm.or(r.mean_dbm))
            .reduce(f64::min);
        let highest = rows
            .iter()
            .filter_map(|r| r.max_dbm.or(r.mean_dbm))
            .reduce(f64::max);
        let mut flags: Vec<String> = Vec::new();
        for flag in rows.iter().flat_map(|r| &r.flags) {
            if !flags.contains(flag) {
                flags.push(flag.clone());
            }
        }
        LogRow {
            t,
            samples: rows.iter().map(|r| r.samples).sum(),
            mean_dbm: (!with_mean.is_empty()).then(|| watts_to_dbm(energy / weight)),
            min_dbm: lowest,
            max_dbm: highest,
            flags,
            bound: rows
                .iter()
                .fold(Bound::Exact, |b, r| b.join(r.part_in_bound())),
            averaged: rows.iter().map(|r| r.averaged).sum(),
            u_db: (!with_mean.is_empty() && every_u && energy > 0.0).then(|| {
                with_mean
                    .iter()
                    .map(|r| p(r) * r.u_db.unwrap())
                    .sum::<f64>()
                    / energy
            }),
        }
    }

    /// An interval's compensation straight from its rows: the uncompensated means over
    /// watts weighted by samples averaged, the temperatures' extremes, first and last.
    fn summed_compensation(pairs: &[(LogRow, RowCompensation)]) -> RowCompensation {
        let with_uncomp: Vec<(f64, f64)> = pairs
            .iter()
            .filter_map(|(r, c)| c.uncomp_dbm.map(|u| (r.averaged.max(1) as f64, u)))
            .collect();
        let energy: f64 = with_uncomp.iter().map(|(w, u)| w * dbm_to_watts(*u)).sum();
        let weight: f64 = with_uncomp.iter().map(|(w, _)| w).sum();
        let temps: Vec<Temperatures> = pairs.iter().filter_map(|(_, c)| c.temp_c).collect();
        RowCompensation {
            uncomp_dbm: (!with_uncomp.is_empty()).then(|| watts_to_dbm(energy / weight)),
            temp_c: (!temps.is_empty()).then(|| Temperatures {
                lowest: temps.iter().map(|t| t.lowest).fold(f64::INFINITY, f64::min),
                highest: temps
                    .iter()
                    .map(|t| t.highest)
                    .fold(f64::NEG_INFINITY, f64::max),
                first: temps[0].first,
                last: temps[temps.len() - 1].last,
            }),
            unknown_rows: pairs.iter().map(|(_, c)| c.unknown_rows).sum(),
            fault_rows: std::array::from_fn(|i| pairs.iter().map(|(_, c)| c.fault_rows[i]).sum()),
        }
    }

    fn close(a: Option<f64>, b: Option<f64>) -> bool {
        match (a, b) {
            (Some(a), Some(b)) => (a - b).abs() <= 1e-9 * a.abs().max(1.0),
            (a, b) => a == b,
        }
    }

    const FLAGS: [&str; 3] = ["gap", "clip", "below"];
    const BOUNDS: [Bound; 4] = [Bound::Exact, Bound::AtLeast, Bound::AtMost, Bound::Unknown];

    /// Random rows in time order: steps of up to 3 s (gaps among them), some without a
    /// mean, random flags, bounds and uncertainties, and beside them uncompensated means
    /// and temperatures, some missing.
    fn random_rows() -> impl Strategy<Value = Vec<(LogRow, RowCompensation)>> {
        proptest::collection::vec(
            (
                (
                    0.0..3.0f64,
                    proptest::option::weighted(0.8, -60.0..30.0f64),
                    0..8usize,
                    0..4usize,
                    proptest::option::weighted(0.9, 0.0..2.0f64),
                    1..20u64,
                ),
                (
                    proptest::option::weighted(0.8, -60.0..30.0f64),
                    proptest::option::weighted(0.8, -20.0..70.0f64),
                ),
            ),
            1..400,
        )
        .prop_map(|cells| {
            let mut t = 0.0;
            cells
                .into_iter()
                .map(
                    |((step, mean, flags, bound, u_db, samples), (uncomp, temp))| {
                        t += step;
                        let compensation = RowCompensation {
                            uncomp_dbm: uncomp,
                            temp_c: temp.map(Temperatures::at),
                            unknown_rows: u64::from(temp.is_none()),
                            // A row without a temperature as an open sensor gives it.
                            fault_rows: [u64::from(temp.is_none()), 0, 0, 0],
                        };
                        let row = LogRow {
                            t,
                            samples,
                            mean_dbm: mean,
                            min_dbm: mean.map(|m| m - 0.5),
                            max_dbm: mean.map(|m| m + 0.25),
                            flags: (0..3)
                                .filter(|i| flags & (1 << i) != 0)
                                .map(|i| FLAGS[i].to_string())
                                .collect(),
                            bound: BOUNDS[bound],
                            averaged: samples,
                            u_db,
                        };
                        (row, compensation)
                    },
                )
                .collect()
        })
    }

    use proptest::prelude::*;

    proptest! {
        // Source: the two-pass reference above (folding after reading everything, at the
        // smallest doubling within the cap); the streaming fold must give the same rows.
        #[test]
        fn folding_as_rows_come_equals_folding_after_reading_them_all(
            rows in random_rows(),
            most_rows in 1..60usize,
            width in proptest::option::of(prop_oneof![Just(0.5), Just(1.0), Just(7.0)]),
            interval in proptest::option::of(Just(2.0)),
        ) {
            let reduction = Reduction { width_s: width, most_rows };
            let mut folder = Folder::new(reduction, interval);
            for (row, compensation) in &rows {
                folder.push(row.clone(), *compensation);
            }
            let (streamed, beside) = folder.into_rows();
            let (reference, reference_beside): (Vec<LogRow>, Vec<RowCompensation>) =
                two_pass(&rows, reduction, interval).into_iter().unzip();
            prop_assert!(streamed.len() <= most_rows.max(rows.len().min(most_rows)));
            prop_assert_eq!(streamed.len(), reference.len());
            prop_assert_eq!(beside.len(), streamed.len());
            for (s, r) in beside.iter().zip(&reference_beside) {
                prop_assert!(close(s.uncomp_dbm, r.uncomp_dbm), "{:?} {:?}", s, r);
                prop_assert_eq!((s.temp_c, s.unknown_rows), (r.temp_c, r.unknown_rows));
            }
            for (s, r) in streamed.iter().zip(&reference) {
                prop_assert_eq!(
                    (s.t, s.samples, s.averaged, &s.flags, s.bound),
                    (r.t, r.samples, r.averaged, &r.flags, r.bound)
                );
                prop_assert!(close(s.mean_dbm, r.mean_dbm), "{:?} {:?}", s, r);
                prop_assert!(close(s.min_dbm, r.min_dbm) && close(s.max_dbm, r.max_dbm));
                prop_assert!(close(s.u_db, r.u_db), "{:?} {:?}", s.u_db, r.u_db);
            }
        }
    }
}
