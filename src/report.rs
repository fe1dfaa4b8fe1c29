//! The soak report: reading a recorded log back, and the figures a person needs after a
//! long run: mean power (over watts), extremes, spread, drift with its standard error,
//! when the output settled, gaps and flagged rows; and the decimation that lets a long log
//! be drawn without losing its extremes.

use std::collections::BTreeMap;

use serde::Serialize;
use thiserror::Error;

use crate::numeric::fit_line;
use crate::units::{dbm_to_watts, watts_to_dbm};

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
}

/// A log read back.
#[derive(Debug, Clone, PartialEq)]
pub struct Log {
    /// The `#` context lines, without the `#`.
    pub context: Vec<String>,
    /// The row interval, seconds (0 for one row per sample).
    pub interval_s: f64,
    /// The rows, in time order.
    pub rows: Vec<LogRow>,
}

/// Columns of the channel asked for.
struct Columns {
    time: usize,
    samples: Option<usize>,
    mean: usize,
    min: Option<usize>,
    max: Option<usize>,
    flags: usize,
}

fn columns(
    header: &csv::StringRecord,
    line: usize,
    channel: usize,
    origin: &str,
) -> Result<Columns, LogError> {
    let suffix = if channel <= 1 {
        String::new()
    } else {
        format!("_ch{channel}")
    };
    let find = |name: &str| header.iter().position(|h| h == format!("{name}{suffix}"));
    let not_a_log = |why: String| LogError::NotALog {
        origin: origin.into(),
        why: format!("the column header (line {line}) has {why}"),
    };
    let time = header
        .iter()
        .position(|h| h == "time_s")
        .ok_or_else(|| not_a_log("no `time_s` column".into()))?;
    let per_sample = find("dbm").is_some() && find("mean_dbm").is_none();
    let mean = find(if per_sample { "dbm" } else { "mean_dbm" }).ok_or_else(|| {
        not_a_log(if channel > 1 {
            format!("no columns for channel {channel}")
        } else {
            "no `mean_dbm` or `dbm` column".into()
        })
    })?;
    let flags = find("flags").ok_or_else(|| not_a_log("no `flags` column".into()))?;
    Ok(Columns {
        time,
        samples: find("samples"),
        mean,
        min: find("min_dbm"),
        max: find("max_dbm"),
        flags,
    })
}

/// Reads a log written by `record` (or the screen's logging), per interval or per sample,
/// for `channel` (1 is the first).
pub fn read_log(bytes: &[u8], origin: &str, channel: usize) -> Result<Log, LogError> {
    let text = std::str::from_utf8(bytes).map_err(|e| LogError::NotText {
        origin: origin.into(),
        line: bytes[..e.valid_up_to()]
            .iter()
            .filter(|&&b| b == b'\n')
            .count() as u64
            + 1,
    })?;
    let context: Vec<String> = text
        .lines()
        .take_while(|l| l.starts_with('#'))
        .map(|l| l.trim_start_matches('#').trim().to_string())
        .collect();
    if !context.first().is_some_and(|l| l.starts_with("dbtrail")) {
        return Err(LogError::NotALog {
            origin: origin.into(),
            why: "it does not open with dbtrail's `# dbtrail` context lines".into(),
        });
    }
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(text.as_bytes());
    let header = reader
        .headers()
        .map_err(|e| {
            bad(
                origin,
                e.position().map_or(1, |p| p.line()),
                "(header)",
                e.to_string(),
            )
        })?
        .clone();
    // The csv reader skips the `#` lines without counting them.
    let cols = columns(&header, context.len() + 1, channel, origin)?;
    let truncated_at_end = !text.ends_with('\n');
    let mut rows = Vec::new();
    for record in reader.records() {
        let record = record.map_err(|e| {
            let line = e.position().map_or(0, |p| p.line());
            let message = match e.kind() {
                csv::ErrorKind::UnequalLengths { .. } if truncated_at_end => {
                    "the file ends part-way through this row (was the recording cut off?); remove the last line, or use --to to stop before it".to_string()
                }
                csv::ErrorKind::UnequalLengths { expected_len, len, .. } => format!("{len} fields where the header has {expected_len}"),
                _ => e.to_string(),
            };
            bad(origin, line, "(row)", message)
        })?;
        rows.push(parse_row(&record, &cols, origin)?);
    }
    rows.sort_by(|a, b| a.t.total_cmp(&b.t));
    let interval_s = interval_from_context(&context).unwrap_or_else(|| median_step(&rows));
    Ok(Log {
        context,
        interval_s,
        rows,
    })
}

fn bad(origin: &str, line: u64, field: &str, message: String) -> LogError {
    LogError::BadRow {
        origin: origin.into(),
        line,
        field: field.into(),
        message,
    }
}

fn parse_row(record: &csv::StringRecord, cols: &Columns, origin: &str) -> Result<LogRow, LogError> {
    let line = record.position().map_or(0, |p| p.line());
    let cell = |i: usize| record.get(i).unwrap_or("").trim();
    let number = |i: usize, name: &str| -> Result<Option<f64>, LogError> {
        match cell(i) {
            "" => Ok(None),
            text => text
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .map(Some)
                .ok_or_else(|| bad(origin, line, name, format!("`{text}` is not a number"))),
        }
    };
    let t = number(cols.time, "time_s")?
        .ok_or_else(|| bad(origin, line, "time_s", "the time is empty".into()))?;
    let mean_dbm = number(cols.mean, "mean_dbm")?;
    let samples = match cols.samples {
        Some(i) => cell(i).parse::<u64>().map_err(|_| {
            bad(
                origin,
                line,
                "samples",
                format!("`{}` is not a whole number", cell(i)),
            )
        })?,
        None => 1,
    };
    let pick = |col: Option<usize>, name: &str| col.map_or(Ok(mean_dbm), |i| number(i, name));
    Ok(LogRow {
        t,
        samples,
        mean_dbm,
        min_dbm: pick(cols.min, "min_dbm")?,
        max_dbm: pick(cols.max, "max_dbm")?,
        flags: cell(cols.flags)
            .split('|')
            .filter(|f| !f.is_empty())
            .map(String::from)
            .collect(),
    })
}

/// The interval from the `rows: every 1s` context line.
fn interval_from_context(context: &[String]) -> Option<f64> {
    let line = context.iter().find_map(|l| l.strip_prefix("rows: "))?;
    if line.starts_with("every sample") {
        return None;
    }
    let every = line.strip_prefix("every ")?.split(';').next()?;
    humantime::parse_duration(every.trim())
        .ok()
        .map(|d| d.as_secs_f64())
}

fn median_step(rows: &[LogRow]) -> f64 {
    let mut steps: Vec<f64> = rows
        .windows(2)
        .map(|w| w[1].t - w[0].t)
        .filter(|s| *s > 0.0)
        .collect();
    steps.sort_by(f64::total_cmp);
    steps.get(steps.len() / 2).copied().unwrap_or(1.0)
}

/// Choices for a report.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReportOptions {
    /// Settled means within ± this many dB of the final mean.
    pub settle_tol_db: f64,
    /// The final window whose mean is the settled level, seconds; None: 10 minutes, or
    /// the last fifth of a log shorter than 50 minutes.
    pub settle_window_s: Option<f64>,
    /// Start of the span, seconds since the run started.
    pub from_s: Option<f64>,
    /// End of the span.
    pub to_s: Option<f64>,
}

impl Default for ReportOptions {
    fn default() -> Self {
        ReportOptions {
            settle_tol_db: 0.1,
            settle_window_s: None,
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
    /// Samples in the span.
    pub samples: u64,
    /// Mean power, dBm (of the mean in watts).
    pub mean_dbm: f64,
    /// Mean power, watts.
    pub mean_w: f64,
    /// Lowest reading, dBm.
    pub min_dbm: f64,
    /// Highest reading, dBm.
    pub max_dbm: f64,
    /// Highest minus lowest, dB.
    pub pk_pk_db: f64,
    /// Standard deviation of the interval means, dB.
    pub std_db: f64,
    /// Least-squares slope of interval mean dBm against time, dB per hour.
    pub drift_db_per_hour: f64,
    /// Its standard error (null with fewer than three rows).
    pub drift_stderr_db_per_hour: Option<f64>,
    /// Seconds from the start after which every interval stays within the tolerance of the
    /// final mean; null when it never settled.
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
    /// The settled level the settle test used, dBm.
    #[serde(skip)]
    pub settled_dbm: f64,
    /// The span's first row time, seconds since the run started.
    #[serde(skip)]
    pub start_s: f64,
    /// The gaps as (start, end) seconds since the run started.
    #[serde(skip)]
    pub gap_spans: Vec<(f64, f64)>,
}

/// The rows within the options' span.
pub fn span_rows<'a>(log: &'a Log, options: &ReportOptions) -> Vec<&'a LogRow> {
    log.rows
        .iter()
        .filter(|r| {
            options.from_s.is_none_or(|f| r.t >= f) && options.to_s.is_none_or(|t| r.t <= t)
        })
        .collect()
}

/// Works out the figures of `log` over the chosen span.
pub fn analyse(log: &Log, origin: &str, options: &ReportOptions) -> Result<Report, LogError> {
    let rows = span_rows(log, options);
    let valid: Vec<(f64, f64)> = rows
        .iter()
        .filter_map(|r| r.mean_dbm.map(|m| (r.t, m)))
        .collect();
    if valid.is_empty() {
        let span = match (options.from_s, options.to_s) {
            (None, None) => String::new(),
            (from, to) => format!(
                " from {} s to {} s",
                from.unwrap_or(0.0),
                to.map_or("the end".into(), |t| t.to_string())
            ),
        };
        return Err(LogError::NoValidRows {
            origin: origin.into(),
            span,
        });
    }
    let interval = log.interval_s;
    let start = rows[0].t;
    let end = rows[rows.len() - 1].t + interval;
    let weight = |r: &&LogRow| r.samples.max(1) as f64;
    let (sum_w, weights) =
        rows.iter()
            .filter(|r| r.mean_dbm.is_some())
            .fold((0.0, 0.0), |(s, n), r| {
                (
                    s + dbm_to_watts(r.mean_dbm.unwrap_or(0.0)) * weight(r),
                    n + weight(r),
                )
            });
    let mean_w = sum_w / weights;
    let min_dbm = rows
        .iter()
        .filter_map(|r| r.min_dbm.or(r.mean_dbm))
        .fold(f64::INFINITY, f64::min);
    let max_dbm = rows
        .iter()
        .filter_map(|r| r.max_dbm.or(r.mean_dbm))
        .fold(f64::NEG_INFINITY, f64::max);
    let means: Vec<f64> = valid.iter().map(|(_, m)| *m).collect();
    let hours: Vec<f64> = valid.iter().map(|(t, _)| (t - start) / 3600.0).collect();
    let line = fit_line(&hours, &means);
    let (gaps, gap_spans) = find_gaps(&rows, interval);
    let mut flagged_rows = BTreeMap::new();
    for flag in rows.iter().flat_map(|r| r.flags.iter()) {
        *flagged_rows.entry(flag.clone()).or_insert(0) += 1;
    }
    let (settled_after_s, settled_dbm) = settle(&valid, start, end, options);
    Ok(Report {
        duration_s: end - start,
        samples: rows.iter().map(|r| r.samples).sum(),
        mean_dbm: watts_to_dbm(mean_w),
        mean_w,
        min_dbm,
        max_dbm,
        pk_pk_db: max_dbm - min_dbm,
        std_db: std_dev(&means),
        drift_db_per_hour: line.map_or(0.0, |l| l.slope),
        drift_stderr_db_per_hour: line.map(|l| l.slope_stderr).filter(|s| s.is_finite()),
        settled_after_s,
        gaps,
        gap_s: gap_spans.iter().fold(0.0, |total, (a, b)| total + (b - a)),
        flagged_rows,
        drift_at_start_dbm: line.map_or(means[0], |l| l.intercept),
        settled_dbm,
        start_s: start,
        gap_spans,
    })
}

fn std_dev(values: &[f64]) -> f64 {
    if values.len() < 2 {
        return 0.0;
    }
    let mean = values.iter().sum::<f64>() / values.len() as f64;
    (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (values.len() - 1) as f64).sqrt()
}

/// Gaps: runs of gap-flagged rows, and time steps over 1.5 intervals (rows missing).
fn find_gaps(rows: &[&LogRow], interval: f64) -> (u64, Vec<(f64, f64)>) {
    let mut spans: Vec<(f64, f64)> = Vec::new();
    let mut add = |from: f64, to: f64| match spans.last_mut() {
        Some(last) if from <= last.1 + 1e-9 => last.1 = last.1.max(to),
        _ => spans.push((from, to)),
    };
    for (i, row) in rows.iter().enumerate() {
        if i > 0 && interval > 0.0 && row.t - rows[i - 1].t > 1.5 * interval {
            add(rows[i - 1].t + interval, row.t);
        }
        if row.flags.iter().any(|f| f == "gap") {
            add(row.t, row.t + interval.max(0.0));
        }
    }
    (spans.len() as u64, spans)
}

/// The settling time and the settled level (power mean of the final window).
fn settle(
    valid: &[(f64, f64)],
    start: f64,
    end: f64,
    options: &ReportOptions,
) -> (Option<f64>, f64) {
    let duration = end - start;
    let window = options
        .settle_window_s
        .unwrap_or_else(|| 600f64.min(duration / 5.0))
        .min(duration);
    let last: Vec<f64> = valid
        .iter()
        .filter(|(t, _)| *t >= end - window)
        .map(|(_, m)| dbm_to_watts(*m))
        .collect();
    let settled_dbm = if last.is_empty() {
        valid[valid.len() - 1].1
    } else {
        watts_to_dbm(last.iter().sum::<f64>() / last.len() as f64)
    };
    let outside = |m: f64| (m - settled_dbm).abs() > options.settle_tol_db;
    let settled_after = match valid.iter().rposition(|(_, m)| outside(*m)) {
        None => Some(0.0),
        Some(i) if i + 1 == valid.len() => None,
        Some(i) => Some(valid[i + 1].0 - start),
    };
    (settled_after, settled_dbm)
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

    #[test]
    fn gaps_from_missing_rows_and_flags_merge() {
        let mut rows: Vec<LogRow> = (0..10).map(|i| row(f64::from(i), 10.0)).collect();
        rows.retain(|r| r.t != 4.0 && r.t != 5.0);
        rows[6].flags.push("gap".into()); // t = 8
        rows[6].mean_dbm = None;
        let refs: Vec<&LogRow> = rows.iter().collect();
        let (count, spans) = find_gaps(&refs, 1.0);
        assert_eq!(count, 2);
        assert_eq!(spans, [(4.0, 6.0), (8.0, 9.0)]);
    }
}
