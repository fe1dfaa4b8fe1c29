//! Reading a recorded log back: its `#` context lines, its rows for one channel, and the
//! runs it holds. A `# resumed` line (an appended recording) starts a new leg whose times
//! restart; a leg whose fresh context lines change the profile, the frequency or the rows'
//! spacing starts a new run, reported on its own. Rows must move forward in time through a
//! run; every message names the file's real line. A run with a temperature channel logs
//! its rows' uncompensated means and temperatures, and the zeros it takes as `# zero:`
//! lines between rows; those are read beside the runs (see [`super::compensation`]).

use std::io::BufRead;
use std::time::SystemTime;

use super::compensation::FAULT_KINDS;
use super::compensation::{parse_zero, RowCompensation, RunCompensation, Temperatures, Zero};
use super::reduce::{Folder, Reduction};
use super::{bad, Log, LogError, LogRow, Run, Spacing};
use crate::record::{BOARD_COLUMNS, UNCOMPENSATED_COLUMN};
use crate::stats::Bound;
use crate::thermal::SensorFault;

/// The range of power a cell may hold, dBm: no detector reads outside it (thermal noise in
/// 1 Hz at 290 K is −174 dBm; +200 dBm is 10^17 W).
pub const DBM_RANGE: (f64, f64) = (-200.0, 200.0);

/// The largest `u_db` a cell may hold, dB: an uncertainty of a factor of 10^10 says nothing.
const U_DB_MAX: f64 = 100.0;
/// The temperatures a `temp_c` cell may hold, °C: from absolute zero to well past where
/// any detector board still works.
const TEMP_C_RANGE: (f64, f64) = (-273.15, 1000.0);
/// The latest time a row may carry, seconds since the run started (about 32 years).
pub const MAX_TIME_S: f64 = 1e9;
/// The most samples one row may count: a million a second for over eleven days.
pub const MAX_ROW_SAMPLES: u64 = 1_000_000_000_000;
/// Times are written to the microsecond, so two stamps may each be rounded by half of it.
const PRINT_ROUNDING_S: f64 = 2e-6;
/// How far before the rows above a resumed leg may start: its place in time comes from two
/// clock stamps written to the millisecond, taken a few milliseconds from the source's
/// start.
const RESUME_SLACK_S: f64 = 0.05;

/// The spacing the `#` lines declare; the rows fill in what they leave open.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Declared {
    Interval(f64),
    Rate(f64),
    Clock,
    Unknown,
}

/// The columns of the channel asked for, with their names as the header spells them.
struct Columns {
    width: usize,
    per_sample: bool,
    time: usize,
    samples: Option<usize>,
    mean: usize,
    min: Option<usize>,
    max: Option<usize>,
    flags: usize,
    bound: Option<usize>,
    averaged: Option<usize>,
    u_db: Option<usize>,
    /// The channel's mean read without temperature compensation.
    uncomp: Option<usize>,
    /// The board's temperature, one for all channels.
    temp: Option<usize>,
    /// The sensor's faults over the row.
    temp_flags: Option<usize>,
    names: Vec<String>,
}

/// A `# resumed` line whose leg has no row yet: its own context lines gather here.
struct Pending {
    line: u64,
    stamp: Option<SystemTime>,
    context: Vec<(u64, String)>,
    /// The zero lines among them, their times the leg's own.
    zeros: Vec<Zero>,
    header: bool,
}

/// A run being read.
struct Current {
    run: Run,
    /// The line of each of the run's context lines.
    context_at: Vec<u64>,
    declared: Declared,
    /// When the run's time 0 was, from `# started:` (or its `# resumed` line).
    base: Option<SystemTime>,
    /// Added to the times of the leg being read, seconds.
    offset: f64,
    /// The previous row's time (after the offset) and line.
    last: Option<(f64, u64)>,
    /// True for the first row of a resumed leg.
    leg_start: bool,
    /// The run's rows, as logged or folded into intervals.
    folder: Folder,
    /// What the run logs about its compensation (its rows' part comes from the folder).
    compensation: RunCompensation,
}

struct Reader<'a> {
    origin: &'a str,
    channel: usize,
    columns: Option<Columns>,
    done: Vec<(Run, RunCompensation)>,
    current: Current,
    pending: Option<Pending>,
    reduction: Reduction,
}

/// Reads every run of the log `input` for `channel` (1 is the first), a line at a time,
/// folding its rows as `reduction` says: nothing but the runs' rows is held, and a bad
/// line stops the reading there.
pub(super) fn read_runs(
    input: impl BufRead,
    origin: &str,
    channel: usize,
    reduction: Reduction,
) -> Result<Log, LogError> {
    let mut lines = Lines::new(input, origin);
    let opens_as_a_log = lines.peek()?.is_some_and(|first| {
        first.text.starts_with('#') && body(&first.text).starts_with("dbtrail")
    });
    if !opens_as_a_log {
        return Err(LogError::NotALog {
            origin: origin.into(),
            why: "it does not open with dbtrail's `# dbtrail` context lines".into(),
        });
    }
    let mut reader = Reader {
        origin,
        channel,
        columns: None,
        done: Vec::new(),
        current: Current::new(1, 1, Vec::new(), reduction),
        pending: None,
        reduction,
    };
    let mut record = csv::StringRecord::new();
    while let Some(line) = lines.next()? {
        if line.text.starts_with('#') {
            reader.comment(line.number, body(&line.text))?;
            continue;
        }
        if line.text.is_empty() {
            continue;
        }
        split_cells(&line.text, &mut record)
            .map_err(|e| bad(origin, line.number, "(row)", e.to_string()))?;
        let next = lines.peek()?.map(|next| next.text.as_str());
        let place = Place {
            line: line.number,
            ended: line.ended,
            before_resuming: next.is_some_and(|next| next.starts_with("# resumed")),
        };
        reader.record(&record, place)?;
    }
    reader.finish()
}

/// A `#` line without its `#`.
fn body(line: &str) -> &str {
    line.trim_start_matches('#').trim()
}

/// One line of the log, without its line end.
struct Line {
    number: u64,
    text: String,
    /// False for a last line with no line end.
    ended: bool,
}

/// Where a row stands in the file.
#[derive(Clone, Copy)]
struct Place {
    line: u64,
    /// False for a last line with no line end (a recording cut off mid-row).
    ended: bool,
    /// True when the next line is a `# resumed` line.
    before_resuming: bool,
}

/// The log's lines one at a time, with one line of look-ahead.
struct Lines<'a, R> {
    input: R,
    origin: &'a str,
    number: u64,
    ahead: Option<Line>,
    bytes: Vec<u8>,
}

impl<'a, R: BufRead> Lines<'a, R> {
    fn new(input: R, origin: &'a str) -> Self {
        Lines {
            input,
            origin,
            number: 0,
            ahead: None,
            bytes: Vec::new(),
        }
    }

    fn peek(&mut self) -> Result<Option<&Line>, LogError> {
        if self.ahead.is_none() {
            self.ahead = self.read()?;
        }
        Ok(self.ahead.as_ref())
    }

    fn next(&mut self) -> Result<Option<Line>, LogError> {
        match self.ahead.take() {
            Some(line) => Ok(Some(line)),
            None => self.read(),
        }
    }

    fn read(&mut self) -> Result<Option<Line>, LogError> {
        self.bytes.clear();
        let read =
            self.input
                .read_until(b'\n', &mut self.bytes)
                .map_err(|e| LogError::Unreadable {
                    origin: self.origin.into(),
                    line: self.number + 1,
                    why: e.to_string(),
                })?;
        if read == 0 {
            return Ok(None);
        }
        self.number += 1;
        let ended = self.bytes.ends_with(b"\n");
        let text = std::str::from_utf8(&self.bytes).map_err(|_| LogError::NotText {
            origin: self.origin.into(),
            line: self.number,
        })?;
        Ok(Some(Line {
            number: self.number,
            text: text.trim_end_matches(['\n', '\r']).to_string(),
            ended,
        }))
    }
}

/// The cells of a row: split at commas, or read as CSV when the line holds quotes (which
/// dbtrail never writes, but a spreadsheet may).
fn split_cells(line: &str, record: &mut csv::StringRecord) -> Result<(), csv::Error> {
    record.clear();
    if !line.contains('"') {
        for cell in line.split(',') {
            record.push_field(cell);
        }
        return Ok(());
    }
    let mut csv = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .from_reader(line.as_bytes());
    csv.read_record(record).map(|_| ())
}

impl Current {
    fn new(
        number: usize,
        first_line: u64,
        context: Vec<(u64, String)>,
        reduction: Reduction,
    ) -> Self {
        let (context_at, context): (Vec<u64>, Vec<String>) = context.into_iter().unzip();
        Current {
            context_at,
            run: Run {
                number,
                first_line,
                context,
                spacing: Spacing::MedianStep(1.0),
                per_sample: false,
                rows: Vec::new(),
                resumed_lines: Vec::new(),
                reduced_to_s: None,
            },
            declared: Declared::Unknown,
            base: None,
            offset: 0.0,
            last: None,
            leg_start: false,
            folder: Folder::new(reduction, None),
            compensation: RunCompensation::default(),
        }
    }
}

impl Reader<'_> {
    fn comment(&mut self, line: u64, text: &str) -> Result<(), LogError> {
        let zero = match text.strip_prefix("zero:") {
            Some(fields) => Some(parse_zero(fields, line, self.origin)?),
            None => None,
        };
        if self.columns.is_none() {
            self.current.run.context.push(text.to_string());
            self.current.context_at.push(line);
            if let Some(zero) = zero {
                self.current.compensation.add_zero(zero);
            }
        } else if let Some(rest) = text.strip_prefix("resumed") {
            self.pending = Some(Pending {
                line,
                stamp: rest.split_whitespace().next().and_then(parse_utc),
                context: Vec::new(),
                zeros: Vec::new(),
                header: false,
            });
        } else if let Some(pending) = &mut self.pending {
            pending.context.push((line, text.to_string()));
            pending.zeros.extend(zero);
        } else if text.starts_with("dbtrail") {
            return Err(self.joined(line, "a second log's `# dbtrail` lines begin here"));
        } else if let Some(zero) = zero {
            self.zero_taken(zero)?;
        }
        Ok(())
    }

    /// A zero line among a run's rows: a zero taken during the run, placed in time as the
    /// rows of its leg are.
    fn zero_taken(&mut self, mut zero: Zero) -> Result<(), LogError> {
        if zero.change.is_none() {
            return Err(bad(
                self.origin,
                zero.line,
                "# zero",
                "a zero line among the rows is a zero taken during the run and gives its \
                 `change_counts=… change_db_at_span_bottom=… span_bottom_dbm=…`; only the \
                 run's opening lines hold its starting zero without them; fix or remove \
                 the line"
                    .into(),
            ));
        }
        zero.t += self.current.offset;
        self.current.compensation.add_zero(zero);
        Ok(())
    }

    fn joined(&self, line: u64, what: &str) -> LogError {
        bad(
            self.origin,
            line,
            "(row)",
            format!(
                "{what} with no `# resumed` line before them: the file looks like two logs \
                 joined one after the other; split it at this line and report on each part"
            ),
        )
    }

    /// Takes one record: the column header, a later one at a resumed leg, or a row.
    fn record(&mut self, record: &csv::StringRecord, place: Place) -> Result<(), LogError> {
        let line = place.line;
        if self.columns.is_none() {
            let columns = columns(record, line, self.channel, self.origin)?;
            self.current
                .declare(&columns, self.reduction, self.origin)?;
            self.columns = Some(columns);
            return Ok(());
        }
        if record.iter().any(|cell| cell == "time_s") {
            return match &mut self.pending {
                Some(pending) if !pending.header => {
                    pending.header = true;
                    self.columns = Some(columns(record, line, self.channel, self.origin)?);
                    Ok(())
                }
                _ => Err(self.joined(line, "a second column header comes here")),
            };
        }
        if let Some(pending) = self.pending.take() {
            self.begin_leg(pending)?;
        }
        let columns = self.columns.as_ref().expect("set at the header");
        // A row cut part-way when a recording stopped, which the next run's `# resumed`
        // line follows on a line of its own (`record --append` never joins them): passed
        // over.
        if record.len() < columns.width && place.before_resuming {
            return Ok(());
        }
        let (mut row, compensation) = parse_row(record, columns, place, self.origin)?;
        row.t += self.current.offset;
        self.current.check_order(row.t, line, self.origin)?;
        let logged = &mut self.current.compensation;
        logged.has_uncomp |= columns.uncomp.is_some();
        logged.has_temp |= columns.temp.is_some();
        self.current.folder.push(row, compensation);
        Ok(())
    }

    /// The first row of a resumed leg: a new run if its context changes what the rows
    /// mean, else the same run on, placed in time by its `# resumed` stamp.
    fn begin_leg(&mut self, pending: Pending) -> Result<(), LogError> {
        let columns = self.columns.as_ref().expect("set at the header");
        let run = &self.current.run;
        let fresh: Vec<String> = pending.context.iter().map(|(_, l)| l.clone()).collect();
        if changes(&fresh, &run.context) || columns.per_sample != run.per_sample {
            let context = self.current.carried_into(pending.context);
            let mut next = Current::new(run.number + 1, pending.line, context, self.reduction);
            next.base = next.base.or(pending.stamp);
            next.declare(columns, self.reduction, self.origin)?;
            for zero in pending.zeros {
                next.compensation.add_zero(zero);
            }
            let done = std::mem::replace(&mut self.current, next);
            self.done.push(done.finish());
            return Ok(());
        }
        let (Some(base), Some(stamp)) = (self.current.base, pending.stamp) else {
            return Err(bad(
                self.origin,
                pending.line,
                "(row)",
                "cannot place the rows resumed here in time: the `# resumed` line or the \
                 run's `# started:` line has no readable UTC time; split the file at this \
                 line and report on each part"
                    .into(),
            ));
        };
        let offset = stamp.duration_since(base).map_or_else(
            |early| -early.duration().as_secs_f64(),
            |late| late.as_secs_f64(),
        );
        self.current.offset = offset;
        self.current.leg_start = true;
        self.current.run.resumed_lines.push(pending.line);
        // The leg's own starting zero is passed over when the run has one; the zeros it
        // takes are placed in time as its rows are.
        for mut zero in pending.zeros {
            zero.t += offset;
            self.current.compensation.add_zero(zero);
        }
        Ok(())
    }

    /// A `# resumed` line with no row after it adds nothing.
    fn finish(mut self) -> Result<Log, LogError> {
        if self.columns.is_none() {
            return Err(LogError::NotALog {
                origin: self.origin.into(),
                why: format!(
                    "no column header after its context lines (line {})",
                    self.current.run.context.len() + 1
                ),
            });
        }
        self.done.push(self.current.finish());
        let (runs, compensation) = self.done.into_iter().unzip();
        Ok(Log { runs, compensation })
    }
}

impl Current {
    /// Takes the run's spacing from its `#` lines and the columns' format.
    fn declare(
        &mut self,
        columns: &Columns,
        reduction: Reduction,
        origin: &str,
    ) -> Result<(), LogError> {
        self.base = context_value(&self.run.context, "started:")
            .and_then(parse_utc)
            .or(self.base);
        self.run.per_sample = columns.per_sample;
        self.declared = if columns.per_sample {
            let at = |i: usize| {
                self.context_at
                    .get(i)
                    .copied()
                    .unwrap_or(self.run.first_line)
            };
            stamps(&self.run.context, at, origin)?
        } else {
            interval_from_context(&self.run.context).map_or(Declared::Unknown, Declared::Interval)
        };
        let interval = match self.declared {
            Declared::Interval(s) => Some(s),
            _ => None,
        };
        self.folder = Folder::new(reduction, interval);
        Ok(())
    }

    /// Rows move forward in time: never back, and (where the spacing is known) never
    /// closer than one interval or sample period; a resumed leg may not start before the
    /// rows above it.
    fn check_order(&mut self, t: f64, line: u64, origin: &str) -> Result<(), LogError> {
        let leg_start = std::mem::take(&mut self.leg_start);
        let Some((prev, prev_line)) = self.last.replace((t, line)) else {
            return Ok(());
        };
        let step = t - prev;
        let problem = if leg_start {
            (step < -RESUME_SLACK_S).then(|| {
                format!(
                    "the rows resumed above start at {t:.3} s, before the rows above them end \
                     ({prev:.3} s on line {prev_line}): was the computer's clock set back between \
                     the two recordings? Split the file at the `# resumed` line and report on \
                     each part"
                )
            })
        } else if step < 0.0 {
            Some(format!(
                "{t} s comes before {prev} s on line {prev_line}: times must rise through a run \
                 (an appended recording restarts its times only after a `# resumed` line); was \
                 another log joined on? Split the file here and report on each part"
            ))
        } else {
            self.too_close(step, t, prev, prev_line)
        };
        match problem {
            Some(message) => Err(bad(origin, line, "time_s", message)),
            None => Ok(()),
        }
    }

    fn too_close(&self, step: f64, t: f64, prev: f64, prev_line: u64) -> Option<String> {
        let (least, what) = match self.declared {
            Declared::Interval(s) => (s - PRINT_ROUNDING_S, format!("its {s} s interval")),
            Declared::Rate(r) => (
                1.0 / r - PRINT_ROUNDING_S,
                format!("the sample period at {r} samples/s"),
            ),
            // One read of a live port stamps all its samples alike.
            Declared::Clock | Declared::Unknown if self.run.per_sample => return None,
            // An interval log whose interval no line gives: at least one row per time.
            Declared::Clock | Declared::Unknown => (f64::MIN_POSITIVE, String::new()),
        };
        if step >= least {
            return None;
        }
        Some(if step == 0.0 {
            format!(
                "{t} s is the time of line {prev_line} too: a time may come only once; was \
                 part of the log copied in twice? Remove the repeated rows"
            )
        } else {
            format!(
                "{t} s is only {step} s after line {prev_line} ({prev} s), inside {what}: the \
                 rows overlap; was another log joined on? Split the file here and report on \
                 each part"
            )
        })
    }

    /// A new run's context: the resumed leg's own lines, and the run's lines for what
    /// they leave unsaid.
    fn carried_into(&self, mut fresh: Vec<(u64, String)>) -> Vec<(u64, String)> {
        for key in IDENTITY {
            if fresh.iter().any(|(_, l)| l.starts_with(key)) {
                continue;
            }
            let mut carried = self.run.context.iter().zip(&self.context_at);
            if let Some((line, at)) = carried.find(|(l, _)| l.starts_with(key)) {
                fresh.push((*at, line.clone()));
            }
        }
        fresh
    }

    fn finish(self) -> (Run, RunCompensation) {
        let mut run = self.run;
        let mut compensation = self.compensation;
        run.reduced_to_s = self.folder.width_s();
        (run.rows, compensation.rows) = self.folder.into_rows();
        run.spacing = match (run.reduced_to_s, self.declared) {
            (Some(width), _) => Spacing::Interval(width),
            (None, declared) => declared_spacing(declared, &run.rows),
        };
        (run, compensation)
    }
}

/// The spacing of rows as logged: as the `#` lines declare it, or judged from the times.
fn declared_spacing(declared: Declared, rows: &[LogRow]) -> Spacing {
    match declared {
        Declared::Interval(s) => Spacing::Interval(s),
        Declared::Rate(r) => Spacing::Rate(r),
        Declared::Clock => Spacing::Clock(median_clock_step(rows)),
        Declared::Unknown => Spacing::MedianStep(median_step(rows)),
    }
}

fn not_a_log(origin: &str, line: u64, why: String) -> LogError {
    LogError::NotALog {
        origin: origin.into(),
        why: format!("the column header (line {line}) has {why}"),
    }
}

fn columns(
    header: &csv::StringRecord,
    line: u64,
    channel: usize,
    origin: &str,
) -> Result<Columns, LogError> {
    let names: Vec<String> = header.iter().map(|h| h.trim().to_string()).collect();
    let not_a_log = |why: String| not_a_log(origin, line, why);
    // A coupler run's arms are its channels: 1 the forward arm, 2 the reflected.
    let coupled = names.iter().any(|h| h == "fwd_dbm");
    let (prefix, suffix) = match (coupled, channel) {
        (true, 0 | 1) => ("fwd_", String::new()),
        (true, 2) => ("ref_", String::new()),
        (true, _) => {
            return Err(bad(
                origin,
                line,
                "--channel",
                format!(
                    "the log is a coupler run's, with two arms: give --channel 1 (forward) or \
                     2 (reflected), not {channel}"
                ),
            ))
        }
        (false, 0 | 1) => ("", String::new()),
        (false, _) => ("", format!("_ch{channel}")),
    };
    let find = |name: &str| {
        // A coupler arm's mean is its `dbm` (and `w`), as per-sample rows name a reading.
        let name = match (coupled, name) {
            (true, "mean_dbm") => "dbm",
            (_, other) => other,
        };
        names
            .iter()
            .position(|h| *h == format!("{prefix}{name}{suffix}"))
    };
    let time = names
        .iter()
        .position(|h| h == "time_s")
        .ok_or_else(|| not_a_log("no `time_s` column".into()))?;
    let per_sample = if coupled {
        find("samples").is_none()
    } else {
        find("dbm").is_some() && find("mean_dbm").is_none()
    };
    let mean = find(if per_sample { "dbm" } else { "mean_dbm" }).ok_or_else(|| {
        not_a_log(if channel > 1 {
            format!("no columns for channel {channel}")
        } else {
            "no `mean_dbm` or `dbm` column".into()
        })
    })?;
    let flags = find("flags").ok_or_else(|| not_a_log("no `flags` column".into()))?;
    Ok(Columns {
        width: names.len(),
        per_sample,
        time,
        samples: find("samples"),
        mean,
        min: find("min_dbm"),
        max: find("max_dbm"),
        flags,
        bound: find("bound"),
        averaged: find("averaged"),
        u_db: find("u_db"),
        uncomp: find(UNCOMPENSATED_COLUMN),
        temp: names.iter().position(|h| h == BOARD_COLUMNS[0]),
        temp_flags: names.iter().position(|h| h == BOARD_COLUMNS[1]),
        names,
    })
}

fn parse_row(
    record: &csv::StringRecord,
    cols: &Columns,
    place: Place,
    origin: &str,
) -> Result<(LogRow, RowCompensation), LogError> {
    let line = place.line;
    if record.len() != cols.width {
        // A short last line with no line end: the recording was cut off mid-row.
        let message = if !place.ended {
            "the file ends part-way through this row (was the recording cut off?); remove the last line, or use --to to stop before it".to_string()
        } else {
            format!(
                "{} fields where the header has {}",
                record.len(),
                cols.width
            )
        };
        return Err(bad(origin, line, "(row)", message));
    }
    let cell = |i: usize| record.get(i).unwrap_or("").trim();
    let name = |i: usize| cols.names[i].as_str();
    let number = |i: usize| -> Result<Option<f64>, LogError> {
        match cell(i) {
            "" => Ok(None),
            text => text
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .map(Some)
                .ok_or_else(|| bad(origin, line, name(i), format!("`{text}` is not a number"))),
        }
    };
    let dbm = |i: usize| -> Result<Option<f64>, LogError> {
        let value = number(i)?;
        match value {
            Some(v) if !(DBM_RANGE.0..=DBM_RANGE.1).contains(&v) => Err(bad(
                origin,
                line,
                name(i),
                format!(
                    "`{}` dBm is outside {} to +{} dBm, more than any detector reads (thermal \
                     noise in 1 Hz is −174 dBm); fix or remove the row",
                    cell(i),
                    DBM_RANGE.0,
                    DBM_RANGE.1
                ),
            )),
            _ => Ok(value),
        }
    };
    let t = time(number(cols.time)?, cell(cols.time), line, origin)?;
    let mean_dbm = dbm(cols.mean)?;
    let count = |i: usize| samples(cell(i), name(i), line, origin);
    let samples = match cols.samples {
        Some(i) => count(i)?,
        None => 1,
    };
    let pick = |col: Option<usize>| col.map_or(Ok(mean_dbm), dbm);
    let bound = match cols.bound {
        Some(i) => Bound::from_cell(cell(i)).ok_or_else(|| {
            bad(
                origin,
                line,
                name(i),
                format!(
                    "`{}` is not a bound (empty, `at-least`, `at-most` or `none`); fix or \
                     remove the row",
                    cell(i)
                ),
            )
        })?,
        None => Bound::Exact,
    };
    let averaged = match cols.averaged {
        Some(i) => match count(i)? {
            n if n > samples => {
                return Err(bad(
                    origin,
                    line,
                    name(i),
                    format!("{n} averaged of {samples} samples; fix or remove the row"),
                ))
            }
            n => n,
        },
        None => samples,
    };
    let u_db = match cols.u_db {
        Some(i) => match number(i)? {
            Some(u) if !(0.0..=U_DB_MAX).contains(&u) => {
                return Err(bad(
                    origin,
                    line,
                    name(i),
                    format!(
                        "`{u}` dB is not an expanded uncertainty (0 to {U_DB_MAX} dB); fix or \
                         remove the row"
                    ),
                ))
            }
            u => u,
        },
        None => None,
    };
    let temp_c = match cols.temp {
        Some(i) => match number(i)? {
            Some(c) if !(TEMP_C_RANGE.0..=TEMP_C_RANGE.1).contains(&c) => {
                return Err(bad(
                    origin,
                    line,
                    name(i),
                    format!(
                        "`{}` °C is outside {} to {} °C, colder than absolute zero or hotter \
                         than any board works at; fix or remove the row",
                        cell(i),
                        TEMP_C_RANGE.0,
                        TEMP_C_RANGE.1
                    ),
                ))
            }
            c => c,
        },
        None => None,
    };
    let compensation = RowCompensation {
        uncomp_dbm: cols.uncomp.map_or(Ok(None), dbm)?,
        temp_c: temp_c.map(Temperatures::at),
        unknown_rows: u64::from(cols.temp.is_some() && temp_c.is_none()),
        fault_rows: cols.temp_flags.map_or([0; 4], |i| fault_rows(cell(i))),
    };
    let row = LogRow {
        t,
        samples,
        mean_dbm,
        min_dbm: pick(cols.min)?,
        max_dbm: pick(cols.max)?,
        flags: cell(cols.flags)
            .split('|')
            .filter(|f| !f.is_empty())
            .map(String::from)
            .collect(),
        bound,
        averaged,
        u_db,
    };
    Ok((row, compensation))
}

fn time(value: Option<f64>, text: &str, line: u64, origin: &str) -> Result<f64, LogError> {
    let t = value.ok_or_else(|| bad(origin, line, "time_s", "the time is empty".into()))?;
    if (0.0..=MAX_TIME_S).contains(&t) {
        return Ok(t);
    }
    Err(bad(
        origin,
        line,
        "time_s",
        format!(
            "`{text}` s is outside 0 to {MAX_TIME_S:e} s: times count seconds since the run \
             started (1e9 s is about 32 years); fix or remove the row"
        ),
    ))
}

fn samples(text: &str, name: &str, line: u64, origin: &str) -> Result<u64, LogError> {
    let count = text.parse::<u64>().map_err(|_| {
        bad(
            origin,
            line,
            name,
            format!("`{text}` is not a whole number"),
        )
    })?;
    if count <= MAX_ROW_SAMPLES {
        return Ok(count);
    }
    Err(bad(
        origin,
        line,
        name,
        format!(
            "{count} samples in one row is more than {MAX_ROW_SAMPLES:e} (a million a second \
             for over eleven days): no recording counts that many; fix or remove the row"
        ),
    ))
}

/// Which sensor faults a `temp_flags` cell names, as 0 or 1 in the order of
/// [`SensorFault::ALL`]; other names in it (the readings' `temp-unknown`) are not faults.
fn fault_rows(cell: &str) -> [u64; FAULT_KINDS] {
    let named: Vec<&str> = cell.split('|').collect();
    SensorFault::ALL.map(|fault| u64::from(named.contains(&fault.short_name())))
}

/// The value of a context line such as `started: …`.
pub(super) fn context_value<'a>(context: &'a [String], key: &str) -> Option<&'a str> {
    context
        .iter()
        .find_map(|l| l.strip_prefix(key))
        .map(str::trim)
}

fn parse_utc(text: &str) -> Option<SystemTime> {
    humantime::parse_rfc3339_weak(text.trim()).ok()
}

/// The context lines that say what a run's rows mean.
const IDENTITY: [&str; 4] = ["profile:", "frequency:", "rows:", "stamps:"];

/// True when a resumed leg's own context lines say something other than the run's about
/// what its rows mean: another profile (by its hash), frequency, interval or stamping.
fn changes(fresh: &[String], run: &[String]) -> bool {
    IDENTITY
        .iter()
        .any(|key| identity(fresh, key).is_some_and(|value| identity(run, key) != Some(value)))
}

/// The part of a context line that decides whether it changed: a profile's hash, the
/// rows' spacing (not their flag legend).
fn identity<'a>(context: &'a [String], key: &str) -> Option<&'a str> {
    let value = context_value(context, key)?;
    Some(match key {
        "profile:" => value.rsplit_once("sha256 ").map_or(value, |(_, hash)| hash),
        "rows:" => value.split(';').next().unwrap_or(value),
        _ => value,
    })
}

/// The interval from the `rows: every 1s` context line.
fn interval_from_context(context: &[String]) -> Option<f64> {
    let line = context_value(context, "rows:")?;
    if line.starts_with("every sample") {
        return None;
    }
    let every = line.strip_prefix("every ")?.split(';').next()?;
    humantime::parse_duration(every.trim())
        .ok()
        .map(|d| d.as_secs_f64())
        .filter(|s| *s > 0.0)
}

/// How a per-sample log's times were stamped, from its `# stamps:` line (written by
/// `record --every 0`; older logs have none).
fn stamps(
    context: &[String],
    line_of: impl Fn(usize) -> u64,
    origin: &str,
) -> Result<Declared, LogError> {
    let Some(index) = context.iter().position(|l| l.starts_with("stamps:")) else {
        return Ok(Declared::Unknown);
    };
    let text = context[index]["stamps:".len()..].trim();
    if text.starts_with(crate::record::STAMPED_BY_CLOCK) {
        return Ok(Declared::Clock);
    }
    let rate = text
        .strip_prefix("at ")
        .and_then(|r| r.strip_suffix("samples/s"))
        .and_then(|r| r.trim().parse::<f64>().ok())
        .filter(|r| r.is_finite() && *r > 0.0);
    rate.map(Declared::Rate).ok_or_else(|| {
        bad(
            origin,
            line_of(index),
            "# stamps",
            format!(
                "`{text}` is not a stamping dbtrail knows: `at N samples/s` or `{}`; fix the \
                 line or remove it to have the report judge the spacing from the times",
                crate::record::STAMPED_BY_CLOCK
            ),
        )
    })
}

/// The typical step between a live port's stamps: the median of all steps, the zero steps
/// between the samples of one read among them, so that a silence can never be typical
/// (two reads either side of one would make it the only step that moves time on).
fn median_clock_step(rows: &[LogRow]) -> f64 {
    let mut steps: Vec<f64> = rows.windows(2).map(|w| w[1].t - w[0].t).collect();
    steps.sort_by(f64::total_cmp);
    steps.get(steps.len() / 2).copied().unwrap_or(0.0)
}

/// The typical step between rows: the median of the steps that move time on.
fn median_step(rows: &[LogRow]) -> f64 {
    let mut steps: Vec<f64> = rows
        .windows(2)
        .map(|w| w[1].t - w[0].t)
        .filter(|s| *s > 0.0)
        .collect();
    steps.sort_by(f64::total_cmp);
    steps.get(steps.len() / 2).copied().unwrap_or(1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// A cell as a log or a spreadsheet may hold it, commas and quotes left out (a line
    /// with a quote goes to the CSV reader itself).
    fn cell() -> impl Strategy<Value = String> {
        "[ a-z0-9.|+\\-\\t]{0,8}"
    }

    proptest! {
        // Source: the csv crate's reader, which the rows went through before: splitting
        // a line without quotes at its commas gives the cells it gives.
        #[test]
        fn splitting_at_commas_gives_the_csv_readers_cells(
            cells in proptest::collection::vec(cell(), 1..10),
        ) {
            let line = cells.join(",");
            let mut split = csv::StringRecord::new();
            split_cells(&line, &mut split).unwrap();
            let mut reference = csv::StringRecord::new();
            csv::ReaderBuilder::new()
                .has_headers(false)
                .flexible(true)
                .from_reader(line.as_bytes())
                .read_record(&mut reference)
                .unwrap();
            if line.trim().is_empty() && cells.len() == 1 {
                // The csv reader skips an empty line; the log reader never sends one.
                return Ok(());
            }
            prop_assert_eq!(split, reference);
        }

        // Source: the same bytes read whole: a log read through a buffer of a few bytes,
        // so that lines break across reads, gives the same runs, or the same error.
        #[test]
        fn a_log_read_in_small_pieces_reads_as_the_whole(
            steps in proptest::collection::vec((0u32..3, proptest::option::of(-50.0..20.0f64)), 1..40),
            bad_at in proptest::option::of(0usize..40),
            capacity in 1usize..40,
        ) {
            let mut text = String::from(
                "# dbtrail 0.1.0 record\n# profile: p; sha256 0\n# stamps: at 10 samples/s\n\
                 time_s,counts,volts,dbm,flags,bound,u_db\n",
            );
            let mut k = 0;
            for (i, (step, dbm)) in steps.iter().enumerate() {
                k += step + 1;
                let cell = match (bad_at == Some(i), dbm) {
                    (true, _) => "x".to_string(),
                    (false, Some(d)) => format!("{d:.4}"),
                    (false, None) => String::new(),
                };
                text.push_str(&format!("{:.6},1,0.5,{cell},,,0.4\n", f64::from(k) / 10.0));
            }
            let whole = read_runs(text.as_bytes(), "t.csv", 1, Reduction::default());
            let pieces = read_runs(
                std::io::BufReader::with_capacity(capacity, text.as_bytes()),
                "t.csv",
                1,
                Reduction::default(),
            );
            prop_assert_eq!(whole, pieces);
        }
    }
}
