//! `dbtrail record`: calibrated power written to CSV for as long as it runs, with nothing
//! lost on a signal, a full disk or an unplugged port.

use std::io::{self, IsTerminal, Write};
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use anyhow::{anyhow, Context};
use dbtrail::calibration::Calibration;
use dbtrail::events::Event;
use dbtrail::record::{
    coupler_context_lines, BoardChannel, ChannelMismatch, CouplerChannels, Opening, Recorder,
    RunContext,
};
use dbtrail::resume::LogShape;

use super::metrics_serve::MetricsArgs;
use super::run_plan::{RunPlan, SourcePlan, StartedRun};
use super::source_args::{LinkArgs, ReadingArgs, SourceArgs};
use super::{parse_duration_arg, BadInput, Failure, Runtime};
use crate::endpoint::Published;
use crate::logs::{Durable, IfExists, LogFile, LogKeeper, LogOpenError, LogTampered};
use crate::source::Running;

#[derive(clap::Args)]
pub struct Args {
    #[command(flatten)]
    source: SourceArgs,
    #[command(flatten)]
    link: LinkArgs,
    #[command(flatten)]
    reading: ReadingArgs,
    /// Interval per row, e.g. 1s, 10s, 1m; 0 writes one row per sample
    #[arg(long, default_value = "1s", allow_hyphen_values = true, value_parser = parse_duration_arg)]
    every: Duration,
    /// Stop after this much source time, e.g. 90s, 2h, 1h30m
    #[arg(long, allow_hyphen_values = true, value_parser = parse_duration_arg)]
    duration: Option<Duration>,
    /// Output CSV file, or - for standard output
    #[arg(long, default_value = "-")]
    out: String,
    /// Add to an existing file instead of refusing it
    #[arg(long)]
    append: bool,
    /// Replace an existing file
    #[arg(long, conflicts_with = "append")]
    force: bool,
    #[command(flatten)]
    metrics: MetricsArgs,
}

/// Events taken from the ring between flushes.
const BATCH: usize = 1 << 16;

pub fn run(args: Args) -> Result<(), Failure> {
    let plan = RunPlan::from_args(&args.source, &args.link, &args.reading);
    check_interval(args.every, &plan)?;
    let endpoint = args.metrics.start().bad_input()?;
    let until = args.duration.map(|d| d.as_secs_f64());
    let run = plan.start(until)?;
    // Opened once the source and the profile are known good, so a bad one leaves no
    // empty file behind.
    let (out, earlier) = open_output(&args.out, args.append, args.force)?;
    let stop = crate::signals::stop_flag().runtime()?;
    if matches!(plan.source, SourcePlan::Demo { fast: true, .. }) && until.is_none() {
        super::say_err!(
            "dbtrail: the simulator runs flat out with no --duration and writes until it is \
             stopped: press Ctrl-C (or send SIGTERM) to end it; every row so far is kept"
        );
    }
    let context = run.context(args.every);
    let opening = match &earlier {
        Some(shape) => resume(shape, &args.out, &run, &context)?,
        None => Opening::Fresh,
    };
    let profile_name = run.profile_name();
    let target = if args.out == "-" {
        "standard output".to_string()
    } else {
        args.out.clone()
    };
    let StartedRun {
        mut source,
        cal,
        uncertainty,
        coupled,
        ..
    } = run;
    let recorder = match coupled {
        Some(run) => Recorder::for_coupler(out, run.cal, &run.coupler.setup, &context, opening),
        None => Recorder::with_uncertainty(out, cal, Some(uncertainty), &context, opening),
    };
    let mut recorder = recorder
        .with_context(|| format!("cannot write to {target}"))
        .runtime()?;
    let metrics = endpoint.map(|endpoint| Published::new(endpoint, &profile_name, &context));
    let pumped = pump(
        &mut source,
        &mut recorder,
        &stop,
        until,
        1.0 / plan.rate_hz,
        args.out == "-" && io::stdout().is_terminal(),
        metrics.as_ref(),
    );
    let link = source.counters.snapshot();
    drop(source);
    // A reader that has read enough (`| head`) ends the run as it wished: quietly.
    if args.out == "-" && super::is_closed_pipe(pumped.as_ref().err().map(|e| e as _)) {
        return Ok(());
    }
    super::say_err!(
        "\ndbtrail: {} rows to {target}; link: {}",
        recorder.rows(),
        link.summary()
    );
    pumped.map_err(|e| pump_failure(e, &target))
}

/// Moves events from the source to the recorder until the source ends, the duration is
/// reached or a signal arrives; then writes the partial interval.
fn pump(
    source: &mut Running,
    recorder: &mut Recorder<Box<dyn Durable>>,
    stop: &AtomicBool,
    until: Option<f64>,
    sample_period: f64,
    rows_on_terminal: bool,
    metrics: Option<&Published>,
) -> io::Result<()> {
    let mut status = Status::new(rows_on_terminal, until);
    let mut keeper = LogKeeper::new();
    let mut last_t: Option<f64> = None;
    let mut take =
        |event: Event, recorder: &mut Recorder<Box<dyn Durable>>, status: &mut Status| {
            take_event(event, until, recorder, status, &mut last_t)
        };
    let end_t = loop {
        let mut took = 0;
        let mut reached = None;
        while let Some(event) = source.next_event() {
            took += 1;
            reached = take(event, recorder, &mut status)?;
            if reached.is_some() || took == BATCH || status.due() || stop.load(Ordering::Acquire) {
                break;
            }
        }
        let live_clock = source.live.then(|| source.now());
        if live_clock.is_some_and(|now| until.is_some_and(|end| now >= end)) {
            reached = until;
        }
        keeper.after_batch(recorder, live_clock)?;
        if let Some(metrics) = metrics {
            metrics.publish(source, recorder);
        }
        status.show(source, recorder.rows());
        if let Some(end) = reached {
            break end;
        }
        if stop.load(Ordering::Acquire) {
            // Samples already received are in the ring: they go in before the end.
            for event in source.drain() {
                if let Some(end) = take(event, recorder, &mut status)? {
                    reached = Some(end);
                    break;
                }
            }
            break reached.unwrap_or_else(|| stopped_at(source, last_t, sample_period));
        }
        if source.exhausted() {
            break if source.live {
                source.now()
            } else {
                last_t.map_or(0.0, |t| t + sample_period)
            };
        }
        if took == 0 {
            // Short enough that a row follows its sample within a fraction of a millisecond.
            std::thread::sleep(Duration::from_micros(200));
        }
    };
    LogKeeper::finish(recorder, end_t)
}

/// Hands one event to the recorder, cut at the end of the duration; the end when the
/// event reached it.
fn take_event(
    mut event: Event,
    until: Option<f64>,
    recorder: &mut Recorder<Box<dyn Durable>>,
    status: &mut Status,
    last_t: &mut Option<f64>,
) -> io::Result<Option<f64>> {
    let reached = until.filter(|end| event.last_t() >= *end);
    if let Some(end) = reached {
        if !cut_at(&mut event, end) {
            return Ok(reached);
        }
    }
    recorder.handle(&event)?;
    status.saw(&event, recorder.calibration());
    *last_t = Some(event.last_t());
    Ok(reached)
}

/// Source time when a signal ended the run: the clock's for a live source; for a file,
/// one sample period past its last sample, but never past the clock when paced (a slow
/// rate must not write rows for time that has not passed).
fn stopped_at(source: &Running, last_t: Option<f64>, sample_period: f64) -> f64 {
    let after_last = last_t.map_or(0.0, |t| t + sample_period);
    if source.live {
        source.now()
    } else if source.paced {
        after_last.min(source.now())
    } else {
        after_last
    }
}

/// The shortest interval a port's rows may have: its samples carry no rate, and shorter
/// rows would be empty gap rows by the thousand each second.
const PORT_EVERY_MIN: Duration = Duration::from_millis(1);

/// Refuses an interval shorter than one sample (or, for a port, than 1 ms): every row
/// would hold at most one sample, which `--every 0` says plainly.
fn check_interval(every: Duration, plan: &RunPlan) -> Result<(), Failure> {
    if every.is_zero() {
        return Ok(());
    }
    let rate = plan.rate_hz;
    let (shortest, why) = if matches!(plan.source, SourcePlan::Port { .. }) {
        (
            PORT_EVERY_MIN,
            "1 ms, the shortest row for a port".to_string(),
        )
    } else {
        let period = Duration::from_secs_f64(1.0 / rate);
        (period, format!("one sample at --rate {rate} samples/s"))
    };
    if every >= shortest {
        return Ok(());
    }
    Err(anyhow!(
        "--every {} is shorter than {why} ({}); give a longer interval, or --every 0 for one row \
         per sample",
        humantime::format_duration(every),
        humantime::format_duration(shortest)
    ))
    .bad_input()
}

/// Keeps only the samples before `end`; false when nothing of the event is left.
fn cut_at(event: &mut Event, end: f64) -> bool {
    match event {
        Event::Samples(chunk) => {
            let keep = (0..chunk.len())
                .take_while(|&i| chunk.time(i) < end)
                .count();
            chunk.samples.counts.truncate(keep * chunk.channels());
            keep > 0
        }
        other => other.t() < end,
    }
}

/// How a failed run is reported: a stream that does not fit the log it is added to is
/// bad input; a log tampered with, or a write that failed, a failure while running.
fn pump_failure(e: io::Error, target: &str) -> Failure {
    let inner = e.get_ref();
    if let Some(channels) = inner.and_then(|i| i.downcast_ref::<CouplerChannels>()) {
        return Failure::BadInput(anyhow!("{channels}; rows written before this are kept"));
    }
    if let Some(board) = inner.and_then(|i| i.downcast_ref::<BoardChannel>()) {
        return Failure::BadInput(anyhow!("{board}; rows written before this are kept"));
    }
    if let Some(mismatch) = inner.and_then(|i| i.downcast_ref::<ChannelMismatch>()) {
        return Failure::BadInput(anyhow!(
            "cannot add to {target}: {mismatch}; record this stream to another --out (the \
             log is unchanged)"
        ));
    }
    if inner.is_some_and(|i| i.is::<LogTampered>()) {
        return Failure::Runtime(anyhow!("{e}; recording stopped"));
    }
    Failure::Runtime(anyhow::Error::new(e).context(format!(
        "cannot write to {target}; rows written before this point are kept"
    )))
}

/// How a run goes on from an earlier log: refused when its rows would not fit; when it
/// was made another way (profile, frequency, interval), its own context lines say so and
/// `report` reports it as a run of its own.
fn resume(
    shape: &LogShape,
    out: &str,
    run: &StartedRun,
    context: &RunContext,
) -> Result<Opening, Failure> {
    let per_sample = context.every.is_zero();
    if let Some(why) = shape.other_kind(run.coupled.is_some(), run.cal.thermal().is_some()) {
        return Err(anyhow!("cannot add to {out}: {why}; choose another --out")).bad_input();
    }
    if shape.per_sample != per_sample {
        let (log, run) = if shape.per_sample {
            ("one row per sample", "rows per interval")
        } else {
            ("rows per interval", "one row per sample (--every 0)")
        };
        return Err(anyhow!(
            "cannot add to {out}: it holds {log} and this run would write {run}; give the \
             log's own --every (see its `# rows:` line), or choose another --out"
        ))
        .bad_input();
    }
    let differ = match &run.coupled {
        Some(c) => {
            shape.differences_from(&coupler_context_lines(&c.cal, &c.coupler.setup, context))
        }
        None => shape.differences(&run.cal, context),
    };
    if !differ.is_empty() {
        super::say_err!(
            "dbtrail: this run's {} differ from the last run in {out}: it is added as a run \
             of its own, which `report` reports separately",
            differ.join(", ")
        );
    }
    Ok(Opening::Resume {
        channels: shape.channels,
        cut: shape.cut,
    })
}

/// Opens the output, refusing to replace a file unless told to, and locked against a
/// second recorder; the shape of the earlier log when adding to one.
fn open_output(
    out: &str,
    append: bool,
    force: bool,
) -> Result<(Box<dyn Durable>, Option<LogShape>), Failure> {
    if out == "-" {
        return Ok((Box::new(io::stdout()), None));
    }
    let path = Path::new(out);
    super::files::refuse_existing(path, append, force)?;
    let if_exists = if append {
        IfExists::Append
    } else {
        IfExists::Replace
    };
    let log = LogFile::open(path, if_exists).map_err(|e| match e {
        LogOpenError::Locked(_) => {
            Failure::BadInput(anyhow!("{e}; stop that one first, or choose another --out"))
        }
        other => Failure::Runtime(other.into()),
    })?;
    let earlier = if append && log.len_at_open() > 0 {
        let reader = io::BufReader::new(log.file());
        let shape = LogShape::scan(reader)
            .map_err(|e| anyhow!("cannot add to {out}: {e}; choose another --out"))
            .bad_input()?;
        Some(shape)
    } else {
        None
    };
    Ok((Box::new(log), earlier))
}

/// The live status on a terminal's stderr: one line redrawn in place, or, when the rows
/// go to the same terminal, a line of its own now and then so that the two never run
/// into each other.
struct Status {
    enabled: bool,
    own_line: bool,
    last_shown: Instant,
    started: Instant,
    last_reading: String,
    samples_then: u64,
    covered_s: f64,
    total_s: Option<f64>,
}

impl Status {
    fn new(rows_on_terminal: bool, total_s: Option<f64>) -> Self {
        Status {
            enabled: io::stderr().is_terminal(),
            own_line: rows_on_terminal,
            last_shown: Instant::now(),
            started: Instant::now(),
            last_reading: "no reading yet".into(),
            samples_then: 0,
            covered_s: 0.0,
            total_s,
        }
    }

    fn due(&self) -> bool {
        let every = if self.own_line {
            Duration::from_secs(5)
        } else {
            Duration::from_millis(250)
        };
        self.enabled && self.last_shown.elapsed() >= every
    }

    fn saw(&mut self, event: &Event, cal: &Calibration) {
        self.covered_s = event.last_t();
        if let (true, Event::Samples(chunk)) = (self.enabled, event) {
            if let Some(&code) = chunk.samples.counts.last() {
                self.last_reading = cal.reading_code(code).to_string();
            }
        }
    }

    fn show(&mut self, source: &Running, rows: u64) {
        if !self.due() {
            return;
        }
        let link = source.counters.snapshot();
        let seconds = self.last_shown.elapsed().as_secs_f64();
        let rate = (link.samples - self.samples_then) as f64 / seconds;
        self.samples_then = link.samples;
        self.last_shown = Instant::now();
        let progress = progress(
            self.covered_s,
            self.total_s,
            self.started.elapsed().as_secs_f64(),
            rows,
        );
        let silent = source.now() - link.last_sample_ns as f64 * 1e-9;
        let state = if !link.connected {
            "DISCONNECTED, retrying".to_string()
        } else if source.live && silent > 0.5 {
            format!("silent for {silent:.1} s")
        } else {
            String::new()
        };
        let (start, end) = if self.own_line {
            ("", "\n")
        } else {
            ("\r\x1b[K", "")
        };
        let rate = format!("{rate:.0}/s");
        let brief = link.brief();
        // A line wider than the terminal wraps, and then the redraw in place cannot clear
        // it: fields are dropped whole instead, the state last of all.
        let width = ratatui::crossterm::terminal::size().map_or(80, |(w, _)| usize::from(w));
        let fields = [
            (9, progress.as_str()),
            (8, state.as_str()),
            (7, self.last_reading.as_str()),
            (5, rate.as_str()),
            (6, brief.as_str()),
        ];
        let line = dbtrail::printable::fit_fields(&fields, " | ", width.saturating_sub(1));
        let _ = write!(io::stderr(), "{start}{line}{end}");
    }
}

/// How far a run has come: `4s of 2h, 4 rows, about 1h 59m 56s left`, the time left
/// judged from the pace so far (wall time for a paced source, far less for `--fast`); or
/// `4s recorded, 4 rows` when no --duration was given.
fn progress(covered_s: f64, total_s: Option<f64>, wall_s: f64, rows: u64) -> String {
    let span = |s: f64| humantime::format_duration(Duration::from_secs(s.max(0.0).round() as u64));
    let Some(total) = total_s else {
        return format!("{} recorded, {rows} rows", span(covered_s));
    };
    let covered = covered_s.clamp(0.0, total);
    let left = if covered > 0.0 {
        format!("about {} left", span(wall_s * (total - covered) / covered))
    } else {
        "time left not known yet".to_string()
    };
    format!("{} of {}, {rows} rows, {left}", span(covered), span(total))
}

#[cfg(test)]
mod tests {
    use super::progress;

    // Source: worked by hand: 4 s of a 2 h run took 4 s of wall time, so the rest at the
    // same pace takes 7196 s = 1h 59m 56s; with --fast, 1 h of source time in 3 s of wall
    // time leaves another 3 s for the second hour.
    #[test]
    fn progress_gives_the_total_and_the_time_left_at_the_pace_so_far() {
        assert_eq!(
            progress(4.0, Some(7200.0), 4.0, 4),
            "4s of 2h, 4 rows, about 1h 59m 56s left"
        );
        assert_eq!(
            progress(3600.0, Some(7200.0), 3.0, 360),
            "1h of 2h, 360 rows, about 3s left"
        );
        assert_eq!(
            progress(0.0, Some(60.0), 0.5, 0),
            "0s of 1m, 0 rows, time left not known yet"
        );
        assert_eq!(progress(90.0, None, 90.0, 9), "1m 30s recorded, 9 rows");
    }
}
