//! What a run with a temperature channel logs about its compensation (issue 19), read
//! beside its rows: each row's mean read without temperature compensation (`uncomp_dbm`),
//! the board's temperature (`temp_c`), and the zeros taken with the RF off (`# zero:`
//! lines); and the figures the report makes of them: the drift without compensation, the
//! temperature over the span and how far the zero moved.

use serde::Serialize;

use super::soak::{self, Drift, SoakFit};
use super::{bad, LogError, LogRow, ReportOptions, Run};
use crate::thermal::SensorFault;
use crate::units::{dbm_to_watts, watts_to_dbm};

/// The board's temperatures over a row (or a folded interval of rows), °C.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Temperatures {
    /// The lowest.
    pub lowest: f64,
    /// The highest.
    pub highest: f64,
    /// The first in time.
    pub first: f64,
    /// The last in time.
    pub last: f64,
}

impl Temperatures {
    /// One reading.
    pub fn at(temp_c: f64) -> Self {
        Temperatures {
            lowest: temp_c,
            highest: temp_c,
            first: temp_c,
            last: temp_c,
        }
    }

    /// These and `later`'s together.
    fn then(self, later: Temperatures) -> Self {
        Temperatures {
            lowest: self.lowest.min(later.lowest),
            highest: self.highest.max(later.highest),
            first: self.first,
            last: later.last,
        }
    }
}

/// The kinds of sensor fault a row's `temp_flags` can name.
pub const FAULT_KINDS: usize = SensorFault::ALL.len();

/// What one row (or folded interval) adds to its power figures.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct RowCompensation {
    /// The mean read without temperature compensation, dBm; None when the row has none
    /// (or the log has no `uncomp_dbm` column).
    pub uncomp_dbm: Option<f64>,
    /// The board's temperatures over the row; None when unknown.
    pub temp_c: Option<Temperatures>,
    /// Rows as logged whose `temp_c` is empty.
    pub unknown_rows: u64,
    /// Rows as logged whose `temp_flags` name each sensor fault, in the order of
    /// [`SensorFault::ALL`].
    pub fault_rows: [u64; FAULT_KINDS],
}

impl RowCompensation {
    /// `other`'s temperatures (later in time) joined to these; the uncompensated mean is
    /// the folder's to join, over watts.
    pub(super) fn join_temperatures(&mut self, other: &RowCompensation) {
        self.temp_c = match (self.temp_c, other.temp_c) {
            (Some(a), Some(b)) => Some(a.then(b)),
            (a, b) => a.or(b),
        };
        self.unknown_rows = self.unknown_rows.saturating_add(other.unknown_rows);
        for (mine, theirs) in self.fault_rows.iter_mut().zip(other.fault_rows) {
            *mine = mine.saturating_add(theirs);
        }
    }
}

/// A `# zero:` line: a zero of the detector's counts, taken with the RF off.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Zero {
    /// The line it is on.
    pub line: u64,
    /// When, seconds since the run started (a resumed leg's moved on as its rows are).
    pub t: f64,
    /// The zero, counts.
    pub counts: f64,
    /// For a zero taken during the run: how it moved from the run's starting zero. None
    /// for the starting zero itself.
    pub change: Option<ZeroChange>,
}

/// How far a zero taken during the run moved from the zero the run started with.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ZeroChange {
    /// Counts.
    pub counts: f64,
    /// How far that moves a reading at the span's bottom, dB.
    pub db_at_span_bottom: f64,
    /// The span's bottom, dBm.
    pub span_bottom_dbm: f64,
}

/// What a run logs about its compensation, beside its rows.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct RunCompensation {
    /// True when the log has the channel's `uncomp_dbm` column.
    pub has_uncomp: bool,
    /// True when the log has the `temp_c` column.
    pub has_temp: bool,
    /// One per row of the run, in the same order.
    pub rows: Vec<RowCompensation>,
    /// The zero the run started with, from its opening `#` lines.
    pub start_zero: Option<Zero>,
    /// The zeros taken during the run, in file order.
    pub zeros: Vec<Zero>,
}

impl RunCompensation {
    /// Takes a zero line read in the run: the starting zero (the first without change
    /// fields), or one taken.
    pub(super) fn add_zero(&mut self, zero: Zero) {
        match zero.change {
            Some(_) => self.zeros.push(zero),
            None => {
                self.start_zero.get_or_insert(zero);
            }
        }
    }
}

/// The keys a zero line must give.
const ZERO_KEYS: [&str; 2] = ["time_s", "counts"];
/// The keys a zero taken during the run gives as well, all or none.
const CHANGE_KEYS: [&str; 3] = [
    "change_counts",
    "change_db_at_span_bottom",
    "span_bottom_dbm",
];

/// Reads the fields of a `# zero:` line (after `zero:`), on `line` of `origin`: space-
/// separated `key=value` pairs in any order, unknown keys passed over.
pub(super) fn parse_zero(fields: &str, line: u64, origin: &str) -> Result<Zero, LogError> {
    let wrong = |what: String| {
        bad(
            origin,
            line,
            "# zero",
            format!(
                "{what}; a zero line reads `# zero: time_s=… counts=…`, with \
                 `change_counts=… change_db_at_span_bottom=… span_bottom_dbm=…` for a zero \
                 taken during the run; fix or remove the line"
            ),
        )
    };
    let mut known: [Option<f64>; 5] = [None; 5];
    let names: Vec<&str> = ZERO_KEYS.iter().chain(&CHANGE_KEYS).copied().collect();
    for pair in fields.split_whitespace() {
        let (key, value) = pair
            .split_once('=')
            .ok_or_else(|| wrong(format!("`{pair}` is not a key=value pair")))?;
        let Some(at) = names.iter().position(|n| *n == key) else {
            continue;
        };
        let number = value
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite())
            .ok_or_else(|| wrong(format!("`{pair}`: `{value}` is not a number")))?;
        if known[at].replace(number).is_some() {
            return Err(wrong(format!("`{key}` is given twice")));
        }
    }
    let [Some(t), Some(counts), change @ ..] = known else {
        return Err(wrong(format!(
            "no `{}`",
            missing(&ZERO_KEYS, &known, "` or `")
        )));
    };
    if !(0.0..=super::MAX_TIME_S).contains(&t) {
        return Err(wrong(format!(
            "`time_s={t}` is outside 0 to {:e} s since the run started",
            super::MAX_TIME_S
        )));
    }
    let change = match change {
        [Some(counts), Some(db_at_span_bottom), Some(span_bottom_dbm)] => Some(ZeroChange {
            counts,
            db_at_span_bottom,
            span_bottom_dbm,
        }),
        [None, None, None] => None,
        _ => {
            return Err(wrong(format!(
                "a zero taken during the run gives all of its change, but `{}` is missing",
                missing(&CHANGE_KEYS, &change, "`, `")
            )));
        }
    };
    Ok(Zero {
        line,
        t,
        counts,
        change,
    })
}

/// The `keys` whose `values` were not given, joined by `between`.
fn missing(keys: &[&str], values: &[Option<f64>], between: &str) -> String {
    let names: Vec<&str> = keys
        .iter()
        .zip(values)
        .filter(|(_, v)| v.is_none())
        .map(|(k, _)| *k)
        .collect();
    names.join(between)
}

/// The drift read without temperature compensation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UncompensatedDrift {
    /// Drift of `uncomp_dbm` over the drift's stretch, dB per hour; null by the drift's
    /// rules (too few rows, or residuals correlated over more than half of them).
    #[serde(rename = "drift_uncompensated_db_per_hour")]
    pub db_per_hour: Option<f64>,
    /// Its standard error, by the drift's method.
    #[serde(rename = "drift_uncompensated_stderr_db_per_hour")]
    pub stderr_db_per_hour: Option<f64>,
    /// Why there is none, when there is none (for the text; not a JSON key).
    #[serde(skip)]
    pub missing: Option<String>,
}

/// The board's temperature over the span (JSON `temperature_c`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TemperatureRange {
    /// Lowest, °C; null when no row of the span has one.
    pub min: Option<f64>,
    /// Highest, °C.
    pub max: Option<f64>,
    /// The first row's that has one, °C.
    pub first: Option<f64>,
    /// The last row's that has one, °C.
    pub last: Option<f64>,
    /// Rows (as logged) of the span whose `temp_c` is empty.
    pub rows_unknown: u64,
    /// Rows (as logged) of the span whose `temp_flags` name each sensor fault: every
    /// fault's name (`sensor-open`, …) with its count, zeros included.
    #[serde(serialize_with = "fault_names")]
    pub sensor_fault_rows: [u64; FAULT_KINDS],
}

/// The fault counts as an object keyed by the faults' own names.
fn fault_names<S: serde::Serializer>(rows: &[u64; FAULT_KINDS], out: S) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeMap;
    let mut map = out.serialize_map(Some(rows.len()))?;
    for (fault, n) in SensorFault::ALL.iter().zip(rows) {
        map.serialize_entry(fault.short_name(), n)?;
    }
    map.end()
}

/// How far the zero moved (JSON `zero`): from the run's starting zero to the last zero
/// taken in the span.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ZeroSummary {
    /// The zero the run started with, counts (from its opening lines, or, without one,
    /// the first zero taken less its change).
    pub start_counts: f64,
    /// Zeros taken in the span.
    pub zeros_taken: u64,
    /// The last of them, counts.
    pub last_counts: f64,
    /// Its change from the starting zero, counts, as its line gives it.
    pub change_counts: f64,
    /// How far that moves a reading at the span's bottom, dB.
    pub change_db_at_span_bottom: f64,
    /// The span's bottom, dBm.
    pub span_bottom_dbm: f64,
    /// The change over the time from the starting zero to the last zero taken, counts
    /// per hour; null when they are at one time.
    pub change_counts_per_hour: Option<f64>,
    /// When the last zero was taken, seconds since the run started (for the text).
    #[serde(skip)]
    pub last_t: f64,
}

/// The run's rows in the options' span, each with what it adds; None when the run's
/// compensation does not match its rows (none was read).
pub fn span_pairs<'a>(
    run: &'a Run,
    compensation: &'a RunCompensation,
    options: &ReportOptions,
) -> Option<Vec<(&'a LogRow, &'a RowCompensation)>> {
    (compensation.rows.len() == run.rows.len()).then(|| {
        run.rows
            .iter()
            .zip(&compensation.rows)
            .filter(|(r, _)| in_span(r.t, options))
            .collect()
    })
}

fn in_span(t: f64, options: &ReportOptions) -> bool {
    options.from_s.is_none_or(|f| t >= f) && options.to_s.is_none_or(|to| t <= to)
}

/// The drift of the span's `uncomp_dbm` as the report's drift is made: the same
/// thinning, the same fitted warm-up term (of the compensated means) taken off, the same
/// estimator from the same start, so that the two drifts differ only by what the
/// compensation did.
pub fn uncompensated_drift(
    pairs: &[(&LogRow, &RowCompensation)],
    start_s: f64,
    fit: &SoakFit,
    drift_from_s: f64,
) -> UncompensatedDrift {
    let (times, levels): (Vec<f64>, Vec<f64>) = pairs
        .iter()
        .filter_map(|(r, c)| c.uncomp_dbm.map(|u| (r.t - start_s, u)))
        .unzip();
    let none = vec![None; times.len()];
    let (since, levels, _) = soak::thinned(&times, &levels, &none);
    let settled: Vec<f64> = since
        .iter()
        .zip(&levels)
        .map(|(t, m)| m - fit.warmup_db(*t))
        .collect();
    let drift: Result<Drift, String> = soak::drift(&since, &settled, drift_from_s);
    UncompensatedDrift {
        db_per_hour: drift.as_ref().ok().map(|d| d.db_per_hour),
        stderr_db_per_hour: drift.as_ref().ok().and_then(|d| d.stderr_db_per_hour),
        missing: drift.err(),
    }
}

/// The board's temperature over the span's rows.
pub fn temperature_range(pairs: &[(&LogRow, &RowCompensation)]) -> TemperatureRange {
    let known = pairs
        .iter()
        .filter_map(|(_, c)| c.temp_c)
        .reduce(Temperatures::then);
    TemperatureRange {
        min: known.map(|k| k.lowest),
        max: known.map(|k| k.highest),
        first: known.map(|k| k.first),
        last: known.map(|k| k.last),
        rows_unknown: pairs.iter().map(|(_, c)| c.unknown_rows).sum(),
        sensor_fault_rows: std::array::from_fn(|i| {
            pairs.iter().map(|(_, c)| c.fault_rows[i]).sum()
        }),
    }
}

/// How far the zero moved by the last zero taken in the span; None when the span holds
/// no zero taken.
pub fn zero_summary(
    compensation: &RunCompensation,
    options: &ReportOptions,
) -> Option<ZeroSummary> {
    let taken: Vec<(&Zero, ZeroChange)> = compensation
        .zeros
        .iter()
        .filter(|z| in_span(z.t, options))
        .filter_map(|z| z.change.map(|c| (z, c)))
        .collect();
    let (last, change) = *taken.last()?;
    let (start_t, start_counts) = match compensation.start_zero {
        Some(start) => (start.t, start.counts),
        // The first zero taken says where the run started, as counts less its change.
        None => {
            let first = compensation.zeros.first()?;
            (0.0, first.counts - first.change?.counts)
        }
    };
    let hours = (last.t - start_t) / 3600.0;
    Some(ZeroSummary {
        start_counts,
        zeros_taken: taken.len() as u64,
        last_counts: last.counts,
        change_counts: change.counts,
        change_db_at_span_bottom: change.db_at_span_bottom,
        span_bottom_dbm: change.span_bottom_dbm,
        change_counts_per_hour: (hours > 0.0).then(|| change.counts / hours),
        last_t: last.t,
    })
}

/// The power mean over watts of an interval's uncompensated means, as the folder sums
/// them: Σ w·P and Σ w over the rows that have one.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(super) struct UncompSums {
    energy: f64,
    weight: f64,
}

impl UncompSums {
    pub(super) fn of(row: &LogRow, compensation: &RowCompensation) -> Self {
        let w = row.averaged.max(1) as f64;
        compensation
            .uncomp_dbm
            .map_or(UncompSums::default(), |u| UncompSums {
                energy: w * dbm_to_watts(u),
                weight: w,
            })
    }

    pub(super) fn add(&mut self, other: UncompSums) {
        self.energy += other.energy;
        self.weight += other.weight;
    }

    pub(super) fn mean_dbm(self) -> Option<f64> {
        (self.weight > 0.0).then(|| watts_to_dbm(self.energy / self.weight))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const FULL: &str = " time_s=1234.500 counts=3.412 change_counts=+0.412 \
                        change_db_at_span_bottom=-0.153 span_bottom_dbm=-27.000";

    // Source: the zero line's format in issue 19 (the example line given there): its
    // fields in any order, unknown keys passed over, a `+` before a change read.
    #[test]
    fn a_zero_line_reads_in_any_order_and_passes_over_unknown_keys() {
        let zero = parse_zero(FULL, 9, "z.csv").unwrap();
        let change = zero.change.unwrap();
        assert_eq!((zero.t, zero.counts, change.counts), (1234.5, 3.412, 0.412));
        assert_eq!(
            (change.db_at_span_bottom, change.span_bottom_dbm),
            (-0.153, -27.0)
        );
        let shuffled = " span_bottom_dbm=-27.000 colour=blue counts=3.412 change_counts=+0.412 \
                        time_s=1234.500 change_db_at_span_bottom=-0.153";
        assert_eq!(parse_zero(shuffled, 9, "z.csv").unwrap(), zero);
        let start = parse_zero(" time_s=0.000 counts=3.000 source=profile", 2, "z.csv").unwrap();
        assert_eq!((start.t, start.counts, start.change), (0.0, 3.0, None));
    }

    #[test]
    fn a_malformed_zero_line_names_its_line_and_what_is_wrong() {
        let cases = [
            (
                " time_s=1 counts=abc",
                "`counts=abc`: `abc` is not a number",
            ),
            (" counts=3", "no `time_s`"),
            (
                " time_s=1 counts=3 change_counts=0.1",
                "`change_db_at_span_bottom`, `span_bottom_dbm` is missing",
            ),
            (" time_s=1 counts=3 counts=4", "`counts` is given twice"),
            (" time_s=1 counts 3", "`counts` is not a key=value pair"),
            (" time_s=-5 counts=3", "outside 0 to"),
        ];
        for (fields, want) in cases {
            let message = parse_zero(fields, 17, "z.csv").unwrap_err().to_string();
            assert!(message.starts_with("z.csv:17: # zero: "), "{message}");
            assert!(message.contains(want), "`{message}` lacks `{want}`");
        }
    }
}
