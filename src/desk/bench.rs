//! Where a calibration's samples come from, and the worker thread that measures on it: the
//! front ends send it a level to measure and read back [`BenchEvent`]s, progress and then
//! the result, so that a screen keeps drawing and can cancel while a level settles.

use std::collections::VecDeque;
use std::sync::atomic::{AtomicBool, Ordering::Relaxed};
use std::sync::mpsc::{self, Receiver, Sender};
use std::sync::Arc;
use std::time::{Duration, Instant};

use dbtrail::events::Event;
use dbtrail::procedure::{measure_watched, MeasureError, Measured, Progress, SettleRule};
use dbtrail::sim::SignalBench;
use dbtrail::stats::Averaging;

use crate::source::Running;

/// Where the samples come from.
pub enum Bench {
    /// A simulated generator and detector, in simulated time.
    Demo(SignalBench),
    /// A real board; the user sets the generator by hand.
    Port(Running),
}

/// How each level is measured: the settle rule and the averaging.
#[derive(Debug, Clone, Copy)]
pub struct Measuring {
    /// When a level counts as settled.
    pub rule: SettleRule,
    /// How long a settled level is averaged.
    pub averaging: Averaging,
}

/// What the generator is set to (dBm, Hz), or `None` for RF off.
pub type Applied = Option<(f64, f64)>;

impl Bench {
    /// Samples after the generator is set to `applied`, until `limit` of time or until
    /// `cancel` is set.
    fn samples<'a>(
        &'a mut self,
        applied: Applied,
        limit: Duration,
        cancel: &'a AtomicBool,
    ) -> Box<dyn Iterator<Item = (f64, f64)> + 'a> {
        match self {
            Bench::Demo(bench) => {
                bench.apply(applied);
                Box::new(std::iter::repeat_with(move || {
                    let (t, c) = bench.next_sample();
                    (t, f64::from(c))
                }))
            }
            Bench::Port(source) => {
                let deadline = Instant::now() + limit;
                let mut pending = VecDeque::new();
                Box::new(std::iter::from_fn(move || loop {
                    if let Some(sample) = pending.pop_front() {
                        return Some(sample);
                    }
                    if let Some(Event::Samples(chunk)) = source.next_event() {
                        pending.extend(
                            (0..chunk.len())
                                .map(|i| (chunk.time(i), f64::from(chunk.counts(i)[0]))),
                        );
                        continue;
                    }
                    // A silent port must not hold a cancelled measurement until the deadline.
                    if Instant::now() > deadline || source.exhausted() || cancel.load(Relaxed) {
                        return None;
                    }
                    std::thread::sleep(Duration::from_millis(1));
                }))
            }
        }
    }

    /// Drops samples that arrived while the user was typing.
    fn discard_backlog(&mut self) {
        if let Bench::Port(source) = self {
            while source.next_event().is_some() {}
        }
    }

    /// Measures one level under `how`, telling `watch` the progress; stops with
    /// [`MeasureError::Cancelled`] as soon as `cancel` is set.
    fn measure(
        &mut self,
        applied: Applied,
        how: &Measuring,
        cancel: &AtomicBool,
        mut watch: impl FnMut(&Progress),
    ) -> Result<Measured, MeasureError> {
        self.discard_backlog();
        let limit = Duration::from_secs_f64(how.rule.timeout_s + 60.0);
        let result = measure_watched(
            self.samples(applied, limit, cancel),
            &how.rule,
            how.averaging,
            |p| {
                watch(p);
                !cancel.load(Relaxed)
            },
        );
        if cancel.load(Relaxed) {
            return Err(MeasureError::Cancelled);
        }
        result
    }
}

/// What the measuring worker sends back.
#[derive(Debug, Clone, PartialEq)]
pub enum BenchEvent {
    /// How far the measurement has got.
    Progress(Progress),
    /// The measurement's result; the worker waits for the next level.
    Done(Result<Measured, MeasureError>),
}

/// The measuring thread has stopped (it failed), so no more levels can be measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct WorkerGone;

/// The measuring worker: a thread that owns the bench and measures what it is sent.
pub struct Worker {
    jobs: Sender<Applied>,
    /// Progress and results, in the order they happen.
    pub events: Receiver<BenchEvent>,
    cancel: Arc<AtomicBool>,
}

impl Worker {
    /// Starts the thread; it ends when the worker is dropped.
    pub fn start(mut bench: Bench, measuring: Measuring) -> Worker {
        let (jobs, job_rx) = mpsc::channel::<Applied>();
        let (event_tx, events) = mpsc::channel();
        let cancel = Arc::new(AtomicBool::new(false));
        let flag = Arc::clone(&cancel);
        std::thread::spawn(move || {
            for applied in job_rx {
                let mut shown = Instant::now();
                let result = bench.measure(applied, &measuring, &flag, |p| {
                    // A progress event every 50 ms is plenty for the eye.
                    if shown.elapsed() >= Duration::from_millis(50) {
                        shown = Instant::now();
                        let _ = event_tx.send(BenchEvent::Progress(*p));
                    }
                });
                // A closed channel means the front end has gone: stop.
                if event_tx.send(BenchEvent::Done(result)).is_err() {
                    break;
                }
            }
        });
        Worker {
            jobs,
            events,
            cancel,
        }
    }

    /// Starts measuring `applied`; its events follow on [`Worker::events`].
    pub fn begin(&self, applied: Applied) -> Result<(), WorkerGone> {
        self.cancel.store(false, Relaxed);
        self.jobs.send(applied).map_err(|_| WorkerGone)
    }

    /// Asks the running measurement to stop; it ends with [`MeasureError::Cancelled`].
    pub fn cancel(&self) {
        self.cancel.store(true, Relaxed);
    }

    /// Measures `applied` and waits for the result, passing over the progress.
    pub fn measure(&self, applied: Applied) -> Result<Result<Measured, MeasureError>, WorkerGone> {
        self.begin(applied)?;
        loop {
            match self.events.recv() {
                Ok(BenchEvent::Done(result)) => return Ok(result),
                Ok(BenchEvent::Progress(_)) => continue,
                Err(_) => return Err(WorkerGone),
            }
        }
    }
}
