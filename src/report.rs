//! The soak report: reading a recorded log back (`read`), and the figures a person needs after a
//! long run: mean power (over watts), extremes, spread, drift with its standard error,
//! when the output settled, gaps and flagged rows; and the decimation that lets a long log
//! be drawn without losing its extremes; for a run with a temperature channel, the drift
//! read without compensation, the board's temperature and the zeros taken
//! (`compensation`).

use std::collections::BTreeMap;

use serde::Serialize;
use thiserror::Error;

use crate::maths::numeric::fit_line;
use crate::stats::Bound;
use crate::units::{dbm_to_watts, format_clock, watts_to_dbm};
use allan::AllanPoint;
use compensation::{RunCompensation, TemperatureRange, UncompensatedDrift, ZeroSummary};
use soak::{SoakFit, SoakModel};

pub mod allan;
pub mod compensation;
pub mod matched;
mod read;
pub mod reduce;
pub mod soak;

pub use read::{DBM_RANGE, MAX_ROW_SAMPLES, MAX_TIME_S};
pub use reduce::Reduction;

/// A log that could not be read, with where and what to do.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum LogError {
    /// Not text.
    #[error("{origin}:{line}: bytes that are not UTF-8 text; a dbtrail log is a CSV text file")]
    NotText {
        /// File.
        origin: String,
        /// Line of the first bad byte.
        line: u64,
    },
    /// The file could not be read on.
    #[error("{origin}:{line}: cannot read the log on from this line: {why}; check the file and the disk")]
    Unreadable {
        /// File.
        origin: String,
        /// The line it stopped at.
        line: u64,
        /// The system's reason.
        why: String,
    },
    /// Not written by dbtrail.
    #[error("{origin}: not a dbtrail log: {why}; give a file written by `dbtrail record` or by logging in `dbtrail watch`")]
    NotALog {
        /// File.
        origin: String,
        /// What is missing.
        why: String,
    },
    /// A row that cannot be read.
    #[error("{origin}:{line}: {field}: {message}")]
    BadRow {
        /// File.
        origin: String,
        /// Line.
        line: u64,
        /// Column.
        field: String,
        /// What and what to do.
        message: String,
    },
    /// Nothing to report on.
    #[error("{origin}: no valid rows{span}: every row lacks a reading (gaps, or readings below the span or at clip)")]
    NoValidRows {
        /// File.
        origin: String,
        /// The span asked for, if any.
        span: String,
    },
    /// The span asked for holds no row.
    #[error("{origin}: no rows {span}: the log's rows are stamped from {first} to {last} since the run started; give --from and --to within that")]
    OutsideRows {
        /// File.
        origin: String,
        /// The span asked for.
        span: String,
        /// The first row's time, as h:mm:ss and seconds.
        first: String,
        /// The last row's time.
        last: String,
    },
    /// More samples than a count holds.
    #[error("{origin}: the rows' sample counts add up to more than {}; report on a shorter span with --from and --to", u64::MAX)]
    TooManySamples {
        /// File.
        origin: String,
    },
}

/// One row of a log, for one channel.
#[derive(Debug, Clone, PartialEq)]
pub struct LogRow {
    /// Seconds since the run started.
    pub t: f64,
    /// Samples in the row.
    pub samples: u64,
    /// Mean power, dBm (None when the row has no valid reading).
    pub mean_dbm: Option<f64>,
    /// Lowest valid reading, dBm.
    pub min_dbm: Option<f64>,
    /// Highest valid reading, dBm.
    pub max_dbm: Option<f64>,
    /// Flags of the row.
    pub flags: Vec<String>,
    /// Whether the row's figures are values or bounds (`Exact` in logs before the `bound`
    /// column).
    pub bound: Bound,
    /// Samples that went into the row's mean (all of them in logs before the `averaged`
    /// column).
    pub averaged: u64,
    /// Expanded uncertainty (k = 2) of the row's mean, dB; None for a bound and in logs
    /// before the `u_db` column.
    pub u_db: Option<f64>,
}

impl LogRow {
    /// The row's part in the run's bound: a `none` row counts only when it held bounds
    /// both ways; one with no level at all is a row without a reading, as a gap is.
    fn part_in_bound(&self) -> Bound {
        let flagged = |name: &str| self.flags.iter().any(|f| f == name);
        match self.bound {
            Bound::Unknown if !(flagged("below") && (flagged("clip") || flagged("above"))) => {
                Bound::Exact
            }
            bound => bound,
        }
    }
}

/// How a run's rows are spaced in time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Spacing {
    /// One row per interval of this many seconds (`# rows: every 10s`).
    Interval(f64),
    /// One row per sample, stamped at this many samples a second (`# stamps: at 1000
    /// samples/s`).
    Rate(f64),
    /// One row per sample, stamped by the clock as each read of a live port arrived
    /// (`# stamps: by the clock …`): the typical step between rows, seconds (the median of
    /// all steps, zero between the samples of one read).
    Clock(f64),
    /// No line says (logs written before the stamps line, or without a rows line): the
    /// median step between rows, seconds.
    MedianStep(f64),
}

/// A live port's stamps are never further apart than this without a gap being counted, at
/// the least: the time after which `record` calls a port silent.
pub const CLOCK_GAP_FLOOR_S: f64 = 0.5;
/// A live port's stamps further apart than this many typical steps are a gap.
pub const CLOCK_GAP_STEPS: f64 = 10.0;

impl Spacing {
    /// The time one row stands for, seconds: its interval, the sample period, or the
    /// typical step.
    pub fn step_s(self) -> f64 {
        match self {
            Spacing::Interval(s) | Spacing::Clock(s) | Spacing::MedianStep(s) => s,
            Spacing::Rate(r) => 1.0 / r,
        }
    }

    /// The longest step between two rows that is not a gap, seconds: one and a half rows,
    /// or for a live port's stamps ten typical steps and at least half a second (a read
    /// arrives whenever the port has bytes, so its steps vary widely; a slow device's
    /// steady steps are not gaps).
    pub fn longest_step_s(self) -> f64 {
        match self {
            Spacing::Clock(typical) => (CLOCK_GAP_STEPS * typical).max(CLOCK_GAP_FLOOR_S),
            other => 1.5 * other.step_s(),
        }
    }
}

/// One run of a log: the whole file, or the part after a `# resumed` line whose context
/// lines change the profile, the frequency or the rows' spacing.
#[derive(Debug, Clone, PartialEq)]
pub struct Run {
    /// Its number in the log, from 1.
    pub number: usize,
    /// The line it starts on: 1, or its `# resumed` line.
    pub first_line: u64,
    /// Its `#` context lines, without the `#`.
    pub context: Vec<String>,
    /// How its rows are spaced.
    pub spacing: Spacing,
    /// True for one row per sample.
    pub per_sample: bool,
    /// The rows, in time order; the times of resumed legs moved on by the time between
    /// the run's start and their `# resumed` stamp.
    pub rows: Vec<LogRow>,
    /// The `# resumed` lines that continued this run.
    pub resumed_lines: Vec<u64>,
    /// The width its rows were folded into while read, seconds (see [`Reduction`]); None
    /// when they are as logged.
    pub reduced_to_s: Option<f64>,
}

impl Run {
    /// The value of a context line such as `profile: …`, without its key.
    pub fn context_value(&self, key: &str) -> Option<&str> {
        read::context_value(&self.context, key)
    }
}

/// A log read back: one run, or more when it was appended to with another profile or
/// spacing.
#[derive(Debug, Clone, PartialEq)]
pub struct Log {
    /// The runs, in file order.
    pub runs: Vec<Run>,
    /// What each run logs about its compensation, one per run in the same order.
    pub compensation: Vec<RunCompensation>,
}

impl Log {
    /// What `run` (one of this log's) logs about its compensation.
    pub fn compensation_of(&self, run: &Run) -> Option<&RunCompensation> {
        self.compensation.get(run.number.checked_sub(1)?)
    }
}

/// Reads a log written by `record` (or the screen's logging), per interval or per sample,
/// for `channel` (1 is the first); a run of more rows than [`reduce::MOST_ROWS`] is folded
/// into intervals (see [`Reduction`]).
pub fn read_log(bytes: &[u8], origin: &str, channel: usize) -> Result<Log, LogError> {
    read_log_folded(bytes, origin, channel, Reduction::default())
}

/// [`read_log`] from any buffered input (a file, read a line at a time, so that a log of
/// any size is read in bounded memory), its rows folded into intervals as `reduction` says.
pub fn read_log_folded(
    input: impl std::io::BufRead,
    origin: &str,
    channel: usize,
    reduction: Reduction,
) -> Result<Log, LogError> {
    read::read_runs(input, origin, channel, reduction)
}

fn bad(origin: &str, line: u64, field: &str, message: String) -> LogError {
    LogError::BadRow {
        origin: origin.into(),
        line,
        field: field.into(),
        message,
    }
}

/// Choices for a report.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReportOptions {
    /// The settle tolerance, dB: the warm-up is over once its term stays within ± this,
    /// and a warm-up smaller than this is no warm-up (docs/report.md, "The model").
    pub settle_tol_db: f64,
    /// Start of the span, seconds since the run started.
    pub from_s: Option<f64>,
    /// End of the span.
    pub to_s: Option<f64>,
}

impl Default for ReportOptions {
    fn default() -> Self {
        ReportOptions {
            settle_tol_db: 0.1,
            from_s: None,
            to_s: None,
        }
    }
}

/// The figures of a run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Report {
    /// Length of the span, seconds.
    pub duration_s: f64,
    /// The width the log's rows were folded into while read, seconds; null when the
    /// figures are from the rows as logged.
    pub reduced_to_s: Option<f64>,
    /// Samples in the span.
    pub samples: u64,
    /// Mean power, dBm (of the mean in watts); null when `mean_bound` is `none`.
    pub mean_dbm: Option<f64>,
    /// Mean power, watts; null when `mean_bound` is `none`.
    pub mean_w: Option<f64>,
    /// Null when the mean is a value; `at-least`, `at-most` or `none` when rows counted
    /// samples at a bound (see docs/report.md).
    #[serde(serialize_with = "bound_cell")]
    pub mean_bound: Bound,
    /// Expanded uncertainty (k = 2) of the mean power, dB: the rows' `u_db` taken as wholly
    /// systematic, so not reduced by their number (see docs/report.md); null when the mean
    /// is a bound or a row with a mean has no `u_db`.
    pub mean_u_db: Option<f64>,
    /// The budget terms the rows' `u_db` leaves out, as the log's `# u_db:` line names
    /// them; null when the log has no such line.
    pub u_leaves_out: Option<String>,
    /// Lowest reading, dBm.
    pub min_dbm: f64,
    /// Null when the lowest reading is a value; `at-least` when it comes from a row of
    /// at-least bounds, `at-most` when a row of at-most bounds may hide a lower one,
    /// `none` when both (docs/report.md, "Bounds").
    #[serde(serialize_with = "bound_cell")]
    pub min_bound: Bound,
    /// Highest reading, dBm.
    pub max_dbm: f64,
    /// Null when the highest reading is a value; `at-least` when a row of at-least
    /// bounds may hide a higher one, `at-most` when it comes from a row of at-most
    /// bounds, `none` when both.
    #[serde(serialize_with = "bound_cell")]
    pub max_bound: Bound,
    /// Highest minus lowest, dB.
    pub pk_pk_db: f64,
    /// Standard deviation of the interval means, dB.
    pub std_db: f64,
    /// The model chosen for the interval means.
    pub model: SoakModel,
    /// Why it was chosen (the criterion and its figures, or the test the warm-up model
    /// failed).
    pub model_choice: String,
    /// Seconds from the span's start after which the warm-up term stays within the
    /// settle tolerance, τ·ln(|A|/tol); null for a line (no warm-up found).
    pub warmup_s: Option<f64>,
    /// The warm-up's time constant τ, seconds.
    pub warmup_tau_s: Option<f64>,
    /// The warm-up's amplitude A at the span's start, dB.
    pub warmup_amplitude_db: Option<f64>,
    /// Where the drift's fit begins, seconds from the span's start: `warmup_s`, or 0 for
    /// a line.
    pub drift_from_s: f64,
    /// Drift of the interval means after the warm-up (with the fitted warm-up term taken
    /// off), dB per hour; null when the run is too short after the warm-up: fewer than
    /// 30 rows, or residuals correlated over more than half of them (`drift_missing`
    /// says which).
    pub drift_db_per_hour: Option<f64>,
    /// Its standard error: prewhitened Newey–West with Andrews' plug-in bandwidth, valid
    /// for autocorrelated residuals.
    pub drift_stderr_db_per_hour: Option<f64>,
    /// How that standard error was worked out, naming the estimator.
    pub drift_stderr_method: Option<&'static str>,
    /// Why there is no drift after the warm-up, when there is none.
    pub drift_missing: Option<String>,
    /// Drift over the whole span, warm-up and all, dB per hour; null by the same rule as
    /// the drift after the warm-up.
    pub drift_whole_db_per_hour: Option<f64>,
    /// Its standard error, by the same method.
    pub drift_whole_stderr_db_per_hour: Option<f64>,
    /// Why there is no whole-span drift, when there is none (for the text; not a JSON
    /// key).
    #[serde(skip)]
    pub drift_whole_missing: Option<String>,
    /// Overlapping Allan deviation of the interval means at octave-spaced averaging times.
    pub allan: Vec<AllanPoint>,
    /// The fitted model, for drawing.
    #[serde(skip)]
    pub fit: SoakFit,
    /// Seconds from the start after which the run is settled: `warmup_s` (null when that
    /// lies past the span's end), or 0 for a line whose warm-up fitted is within the
    /// tolerance; null for a line chosen because the warm-up fitted is too slow for the
    /// span, so the run was not seen to settle, or when the warm-up model could not be
    /// tried or judged (`fit.warmup_tested` false).
    pub settled_after_s: Option<f64>,
    /// Gaps: stretches of missing or gap-flagged rows.
    pub gaps: u64,
    /// Their total time, seconds.
    pub gap_s: f64,
    /// Rows carrying each flag.
    pub flagged_rows: BTreeMap<String, u64>,
    /// The drift line's value at the span's start, dBm (for drawing).
    #[serde(skip)]
    pub drift_at_start_dbm: f64,
    /// The span's first row time, seconds since the run started.
    #[serde(skip)]
    pub start_s: f64,
    /// The gaps as (start, end) seconds since the run started.
    #[serde(skip)]
    pub gap_spans: Vec<(f64, f64)>,
    /// The drift read without temperature compensation; no keys at all for a log
    /// without the `uncomp_dbm` column.
    #[serde(flatten)]
    pub uncompensated: Option<UncompensatedDrift>,
    /// The board's temperature over the span; absent for a log without `temp_c`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub temperature_c: Option<TemperatureRange>,
    /// How far the zero moved; absent when the span holds no zero taken.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub zero: Option<ZeroSummary>,
}

/// The rows within the options' span.
pub fn span_rows<'a>(run: &'a Run, options: &ReportOptions) -> Vec<&'a LogRow> {
    run.rows
        .iter()
        .filter(|r| {
            options.from_s.is_none_or(|f| r.t >= f) && options.to_s.is_none_or(|t| r.t <= t)
        })
        .collect()
}

/// A time as the report prints it, with its seconds: `1:05:10 (3910 s)`.
fn clock_and_seconds(t: f64) -> String {
    format!("{} ({t} s)", format_clock(t))
}

/// The span asked for, in words: `from 0:20:00 (1200 s) to 1:00:00 (3600 s)`.
fn span_words(options: &ReportOptions) -> String {
    match (options.from_s, options.to_s) {
        (None, None) => "in the whole log".into(),
        (Some(from), None) => format!("from {} to the end", clock_and_seconds(from)),
        (None, Some(to)) => format!("up to {}", clock_and_seconds(to)),
        (Some(from), Some(to)) => format!(
            "from {} to {}",
            clock_and_seconds(from),
            clock_and_seconds(to)
        ),
    }
}

/// Works out the figures of `run` over the chosen span.
pub fn analyse(run: &Run, origin: &str, options: &ReportOptions) -> Result<Report, LogError> {
    analyse_compensated(run, None, origin, options)
}

/// [`analyse`], with the figures of what the run logs about its compensation (from
/// [`Log::compensation_of`]) when given.
pub fn analyse_compensated(
    run: &Run,
    compensation: Option<&RunCompensation>,
    origin: &str,
    options: &ReportOptions,
) -> Result<Report, LogError> {
    let mut report = analyse_power(run, origin, options)?;
    if let Some(logged) = compensation {
        add_compensation(&mut report, run, logged, options);
    }
    Ok(report)
}

/// The compensation's figures over the span: each only when the log has its column or
/// lines.
fn add_compensation(
    report: &mut Report,
    run: &Run,
    logged: &RunCompensation,
    options: &ReportOptions,
) {
    report.zero = compensation::zero_summary(logged, options);
    let Some(pairs) = compensation::span_pairs(run, logged, options) else {
        return;
    };
    report.uncompensated = logged.has_uncomp.then(|| {
        compensation::uncompensated_drift(&pairs, report.start_s, &report.fit, report.drift_from_s)
    });
    report.temperature_c = logged
        .has_temp
        .then(|| compensation::temperature_range(&pairs));
}

fn analyse_power(run: &Run, origin: &str, options: &ReportOptions) -> Result<Report, LogError> {
    let rows = span_rows(run, options);
    if let (Some(first), Some(last), true) = (run.rows.first(), run.rows.last(), rows.is_empty()) {
        return Err(LogError::OutsideRows {
            origin: origin.into(),
            span: span_words(options),
            first: clock_and_seconds(first.t),
            last: clock_and_seconds(last.t),
        });
    }
    let valid: Vec<(f64, f64)> = rows
        .iter()
        .filter_map(|r| r.mean_dbm.map(|m| (r.t, m)))
        .collect();
    if valid.is_empty() {
        let span = if options.from_s.is_some() || options.to_s.is_some() {
            format!(" {}", span_words(options))
        } else {
            String::new()
        };
        return Err(LogError::NoValidRows {
            origin: origin.into(),
            span,
        });
    }
    let samples = rows
        .iter()
        .try_fold(0u64, |total, r| total.checked_add(r.samples))
        .ok_or_else(|| LogError::TooManySamples {
            origin: origin.into(),
        })?;
    let step = run.spacing.step_s();
    let start = rows[0].t;
    let end = rows[rows.len() - 1].t + step;
    let weight = |r: &&LogRow| r.averaged.max(1) as f64;
    let (sum_w, weights) =
        rows.iter()
            .filter(|r| r.mean_dbm.is_some())
            .fold((0.0, 0.0), |(s, n), r| {
                (
                    s + dbm_to_watts(r.mean_dbm.unwrap_or(0.0)) * weight(r),
                    n + weight(r),
                )
            });
    let mean_bound = rows
        .iter()
        .fold(Bound::Exact, |bound, r| bound.join(r.part_in_bound()));
    let mean_w = (mean_bound != Bound::Unknown).then_some(sum_w / weights);
    let mean_u_db = (mean_bound == Bound::Exact)
        .then(|| systematic_u_db(&rows, weight))
        .flatten();
    let min_dbm = rows
        .iter()
        .filter_map(|r| r.min_dbm.or(r.mean_dbm))
        .fold(f64::INFINITY, f64::min);
    let max_dbm = rows
        .iter()
        .filter_map(|r| r.max_dbm.or(r.mean_dbm))
        .fold(f64::NEG_INFINITY, f64::max);
    let extremes = |of: fn(&LogRow) -> Option<f64>| {
        rows.iter()
            .filter_map(move |r| of(r).or(r.mean_dbm).map(|v| (v, r.part_in_bound())))
    };
    let means: Vec<f64> = valid.iter().map(|(_, m)| *m).collect();
    let hours: Vec<f64> = valid.iter().map(|(t, _)| (t - start) / 3600.0).collect();
    let line = fit_line(&hours, &means);
    let u_db: Vec<Option<f64>> = rows
        .iter()
        .filter(|r| r.mean_dbm.is_some())
        .map(|r| r.u_db)
        .collect();
    let times: Vec<f64> = valid.iter().map(|(t, _)| t - start).collect();
    let (since, model_means, u_db) = soak::thinned(&times, &means, &u_db);

    let fit = soak::fit(&since, &model_means, &u_db, options.settle_tol_db);
    let drift_from_s = fit.warmup_s.unwrap_or(0.0);
    // The fitted warm-up term comes off first: what is left of it after `warmup_s` (up
    // to the tolerance, falling fast) would otherwise tilt a short stretch's line.
    let settled_means: Vec<f64> = since
        .iter()
        .zip(&model_means)
        .map(|(t, m)| m - fit.warmup_db(*t))
        .collect();
    let late = soak::drift(&since, &settled_means, drift_from_s);
    let whole = soak::drift(&since, &model_means, 0.0);
    let (gaps, gap_spans) = find_gaps(&rows, run.spacing);
    let mut flagged_rows = BTreeMap::new();
    for flag in rows.iter().flat_map(|r| r.flags.iter()) {
        *flagged_rows.entry(flag.clone()).or_insert(0) += 1;
    }
    let settled_after_s = match fit.warmup_s {
        Some(t) => (t <= end - start).then_some(t),
        // Only a warm-up model fitted and found within the tolerance shows settling.
        None => (fit.warmup_tested && !fit.still_warming).then_some(0.0),
    };
    Ok(Report {
        duration_s: end - start,
        reduced_to_s: run.reduced_to_s,
        samples,
        mean_dbm: mean_w.map(watts_to_dbm),
        mean_w,
        mean_bound,
        mean_u_db,
        u_leaves_out: run
            .context_value("u_db:")
            .and_then(|line| line.split_once("leaves out:"))
            .map(|(_, terms)| terms.trim().to_string()),
        min_dbm,
        min_bound: extreme_bound(extremes(|r| r.min_dbm), min_dbm, Bound::AtMost),
        max_dbm,
        max_bound: extreme_bound(extremes(|r| r.max_dbm), max_dbm, Bound::AtLeast),
        pk_pk_db: max_dbm - min_dbm,
        std_db: std_dev(&means),
        model: fit.model,
        model_choice: fit.choice.clone(),
        warmup_s: fit.warmup_s,
        warmup_tau_s: fit.warmup.map(|w| w.tau_s),
        warmup_amplitude_db: fit.warmup.map(|w| w.amplitude_db),
        drift_from_s,
        drift_db_per_hour: late.as_ref().ok().map(|d| d.db_per_hour),
        drift_stderr_db_per_hour: late.as_ref().ok().and_then(|d| d.stderr_db_per_hour),
        drift_stderr_method: late.as_ref().ok().map(|d| d.method),
        drift_missing: late.as_ref().err().cloned(),
        drift_whole_db_per_hour: whole.as_ref().ok().map(|d| d.db_per_hour),
        drift_whole_stderr_db_per_hour: whole.as_ref().ok().and_then(|d| d.stderr_db_per_hour),
        drift_whole_missing: whole.as_ref().err().cloned(),
        allan: allan::on_time_grid(&times, &means, step)
            .map_or_else(Vec::new, |grid| allan::overlapping_adev(&grid, step)),
        fit,
        settled_after_s,
        gaps,
        gap_s: gap_spans.iter().fold(0.0, |total, (a, b)| total + (b - a)),
        flagged_rows,
        drift_at_start_dbm: line.map_or(means[0], |l| l.intercept),
        start_s: start,
        gap_spans,
        uncompensated: None,
        temperature_c: None,
        zero: None,
    })
}

/// Whether a lowest (or highest) figure `extreme` among `parts` (value and bound) is a
/// value or a bound, by the rule in docs/recording.md that a row of at-least samples has
/// at-least extremes and a row of at-most samples at-most ones: any part bounded
/// `beyond` (the way past the extreme: at-most for the lowest) or both ways may hide a
/// figure past it, and an extreme that no exact part (nor one bounded `beyond`) reaches
/// may itself lie the other way.
pub fn extreme_bound(
    parts: impl Iterator<Item = (f64, Bound)>,
    extreme: f64,
    beyond: Bound,
) -> Bound {
    let (mut past, mut pinned) = (false, false);
    for (value, part) in parts {
        past |= part == beyond || part == Bound::Unknown;
        pinned |= value == extreme && (part == Bound::Exact || part == beyond);
    }
    let toward = match beyond {
        Bound::AtMost => Bound::AtLeast,
        _ => Bound::AtMost,
    };
    let from_past = if past { beyond } else { Bound::Exact };
    from_past.join(if pinned { Bound::Exact } else { toward })
}

/// The expanded uncertainty of the mean power from the rows' own, each taken as wholly
/// systematic (the budget gives one figure per row, not its noise apart): errors that
/// repeat from row to row add linearly, so the mean's relative uncertainty is the rows'
/// weighted by their share of the energy, Σ wᵢPᵢuᵢ / Σ wᵢPᵢ, no smaller for more rows.
/// None when a row with a mean has no `u_db`.
fn systematic_u_db(rows: &[&LogRow], weight: impl Fn(&&LogRow) -> f64) -> Option<f64> {
    let (mut weighted, mut energy) = (0.0, 0.0);
    for row in rows {
        let Some(mean) = row.mean_dbm else { continue };
        let share = dbm_to_watts(mean) * weight(row);
        weighted += share * row.u_db?;
        energy += share;
    }
    (energy > 0.0).then(|| weighted / energy)
}

/// `mean_bound` in JSON: null for a value, else the log's cell text.
fn bound_cell<S: serde::Serializer>(bound: &Bound, serializer: S) -> Result<S::Ok, S::Error> {
    match bound {
        Bound::Exact => serializer.serialize_none(),
        other => serializer.serialize_str(other.cell()),
    }
}

fn std_dev(values: &[f64]) -> f64 {
    if values.len() < 2 {
        return 0.0;
    }
    let mean = values.iter().sum::<f64>() / values.len() as f64;
    (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (values.len() - 1) as f64).sqrt()
}

/// Gaps: runs of gap-flagged rows, and steps between rows longer than the spacing allows
/// (rows missing, or a port silent).
fn find_gaps(rows: &[&LogRow], spacing: Spacing) -> (u64, Vec<(f64, f64)>) {
    let (interval, longest) = (spacing.step_s(), spacing.longest_step_s());
    let mut spans: Vec<(f64, f64)> = Vec::new();
    let mut add = |from: f64, to: f64| match spans.last_mut() {
        Some(last) if from <= last.1 + 1e-9 => last.1 = last.1.max(to),
        _ => spans.push((from, to)),
    };
    for (i, row) in rows.iter().enumerate() {
        if i > 0 && row.t - rows[i - 1].t > longest {
            add(rows[i - 1].t + interval, row.t);
        }
        if row.flags.iter().any(|f| f == "gap") {
            add(row.t, row.t + interval.max(0.0));
        }
    }
    (spans.len() as u64, spans)
}

/// A log drawn at `columns` across: each column keeps the lowest minimum, the highest
/// maximum and the power mean of its rows, so no one-row spike is lost. Returns
/// (time at the column's middle, min, max, mean) for columns holding a valid row.
pub fn decimate(rows: &[&LogRow], columns: usize) -> Vec<(f64, f64, f64, f64)> {
    let valid: Vec<&&LogRow> = rows.iter().filter(|r| r.mean_dbm.is_some()).collect();
    if valid.is_empty() || columns == 0 {
        return Vec::new();
    }
    let (t0, t1) = (valid[0].t, valid[valid.len() - 1].t);
    let width = ((t1 - t0) / columns as f64).max(f64::MIN_POSITIVE);
    let mut out: Vec<(f64, f64, f64, f64, f64)> = Vec::new();
    let mut current = usize::MAX;
    for row in valid {
        let column = (((row.t - t0) / width) as usize).min(columns - 1);
        let mean = row.mean_dbm.unwrap_or(f64::NAN);
        let (lo, hi) = (row.min_dbm.unwrap_or(mean), row.max_dbm.unwrap_or(mean));
        if column != current || out.is_empty() {
            out.push((t0 + (column as f64 + 0.5) * width, lo, hi, 0.0, 0.0));
            current = column;
        }
        let last = out.last_mut().expect("pushed above");
        last.1 = last.1.min(lo);
        last.2 = last.2.max(hi);
        last.3 += dbm_to_watts(mean);
        last.4 += 1.0;
    }
    out.into_iter()
        .map(|(t, lo, hi, w, n)| (t, lo, hi, watts_to_dbm(w / n)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(t: f64, dbm: f64) -> LogRow {
        LogRow {
            t,
            samples: 10,
            mean_dbm: Some(dbm),
            min_dbm: Some(dbm - 0.1),
            max_dbm: Some(dbm + 0.1),
            flags: Vec::new(),
            bound: Bound::Exact,
            averaged: 10,
            u_db: None,
        }
    }

    #[test]
    fn decimation_keeps_a_one_row_spike() {
        let rows: Vec<LogRow> = (0..200_000)
            .map(|i| row(f64::from(i), if i == 123_457 { 40.0 } else { 30.0 }))
            .collect();
        let refs: Vec<&LogRow> = rows.iter().collect();
        let columns = decimate(&refs, 800);
        assert!(columns.len() <= 800);
        assert_eq!(columns.iter().filter(|c| c.2 > 39.0).count(), 1);
        assert!(columns.iter().all(|c| (c.1 - 29.9).abs() < 1e-9));
    }

    // Source: the rule in docs/report.md: sample counts are summed with checked arithmetic;
    // two rows of 2^63 samples make 2^64, one more than a u64 holds.
    #[test]
    fn sample_counts_past_what_a_count_holds_are_an_error_not_a_wrap() {
        let mut rows = vec![row(0.0, 1.0), row(1.0, 1.0)];
        for r in &mut rows {
            r.samples = 1 << 63;
        }
        let run = Run {
            number: 1,
            first_line: 1,
            context: Vec::new(),
            spacing: Spacing::Interval(1.0),
            per_sample: false,
            rows,
            resumed_lines: Vec::new(),
            reduced_to_s: None,
        };
        let outcome = analyse(&run, "huge.csv", &ReportOptions::default());
        assert_eq!(
            outcome,
            Err(LogError::TooManySamples {
                origin: "huge.csv".into()
            })
        );
    }

    #[test]
    fn gaps_from_missing_rows_and_flags_merge() {
        let mut rows: Vec<LogRow> = (0..10).map(|i| row(f64::from(i), 10.0)).collect();
        rows.retain(|r| r.t != 4.0 && r.t != 5.0);
        rows[6].flags.push("gap".into()); // t = 8
        rows[6].mean_dbm = None;
        let refs: Vec<&LogRow> = rows.iter().collect();
        let (count, spans) = find_gaps(&refs, Spacing::Interval(1.0));
        assert_eq!(count, 2);
        assert_eq!(spans, [(4.0, 6.0), (8.0, 9.0)]);
    }
}
