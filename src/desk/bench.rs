//! Where a calibration's samples come from, and the worker thread that measures on it: the
//! front ends send it a level to measure and read back [`BenchEvent`]s, progress and then
//! the result, so that a screen keeps drawing and can cancel while a level settles.

use std::collections::VecDeque;
use std::sync::atomic::{AtomicBool, Ordering::Relaxed};
use std::sync::mpsc::{self, Receiver, Sender};
use std::sync::Arc;
use std::time::{Duration, Instant};

use dbtrail::adc::Adc;
use dbtrail::events::Event;
use dbtrail::procedure::{measure_watched, MeasureError, Measured, Progress, SettleRule};
use dbtrail::sim::SignalBench;
use dbtrail::stats::Averaging;
use dbtrail::thermal::TemperatureChannel;

use crate::source::Running;

/// Where the samples come from.
pub enum Bench {
    /// A simulated generator and detector, in simulated time.
    Demo(SignalBench),
    /// A real board; the user sets the generator by hand. With the base profile's
    /// `[temperature]`, the board's sensor is read beside the power channel.
    Port(Running, Option<BoardSensor>),
}

/// The board's temperature sensor as a stream carries it, and what it read for each
/// power sample the measurement took.
pub struct BoardSensor {
    channel: TemperatureChannel,
    adc: Adc,
    /// °C for each sample taken, None where the sensor showed a fault.
    readings: Vec<Option<f64>>,
}

impl BoardSensor {
    /// The sensor on `channel`, whose codes are those of `adc`.
    pub fn new(channel: TemperatureChannel, adc: Adc) -> Self {
        BoardSensor {
            channel,
            adc,
            readings: Vec::new(),
        }
    }

    /// The frame index of the power channel: the first that is not the sensor's.
    fn power_channel(&self) -> usize {
        usize::from(self.channel.channel == 0)
    }

    /// The mean of the good readings over the last `samples` samples taken, °C.
    fn mean_over_last(&self, samples: u64) -> Option<f64> {
        let from = self.readings.len().saturating_sub(samples as usize);
        let good: Vec<f64> = self.readings[from..].iter().flatten().copied().collect();
        (!good.is_empty()).then(|| good.iter().sum::<f64>() / good.len() as f64)
    }
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
            Bench::Port(source, sensor) => {
                let deadline = Instant::now() + limit;
                let mut pending = VecDeque::new();
                let power = sensor.as_ref().map_or(0, BoardSensor::power_channel);
                if let Some(sensor) = sensor.as_mut() {
                    sensor.readings.clear();
                }
                Box::new(std::iter::from_fn(move || loop {
                    if let Some((t, code, celsius)) = pending.pop_front() {
                        // Kept as the sample is taken, so they line up with the average.
                        if let Some(sensor) = sensor.as_mut() {
                            sensor.readings.push(celsius);
                        }
                        return Some((t, code));
                    }
                    if let Some(Event::Samples(chunk)) = source.next_event() {
                        pending.extend((0..chunk.len()).filter_map(|i| {
                            let counts = chunk.counts(i);
                            let code = f64::from(*counts.get(power)?);
                            let celsius = sensor
                                .as_ref()
                                .and_then(|s| s.channel.celsius_in_frame(&s.adc, counts)?.ok());
                            Some((chunk.time(i), code, celsius))
                        }));
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
        if let Bench::Port(source, _) = self {
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
        let board = match self {
            Bench::Port(_, Some(sensor)) => Some(sensor),
            _ => None,
        };
        result.map(|m| Measured {
            temp_c: board.and_then(|s| s.mean_over_last(m.samples)),
            ..m
        })
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

#[cfg(test)]
mod tests {
    use super::*;
    use dbtrail::sim::BenchDetector;

    fn worker(samples: usize) -> Worker {
        let bench = SignalBench::new(BenchDetector::Diode, 1000.0, 1);
        let measuring = Measuring {
            rule: SettleRule::default(),
            averaging: Averaging::Samples(samples),
        };
        Worker::start(Bench::Demo(bench), measuring)
    }

    /// The worker's events until its result, or until a deadline passes.
    fn until_done(worker: &Worker) -> Vec<BenchEvent> {
        let deadline = Instant::now() + Duration::from_secs(60);
        let mut events = Vec::new();
        while let Some(left) = deadline.checked_duration_since(Instant::now()) {
            let Ok(event) = worker.events.recv_timeout(left) else {
                break;
            };
            let done = matches!(event, BenchEvent::Done(_));
            events.push(event);
            if done {
                break;
            }
        }
        events
    }

    // Source: the rule in measure_watched's doc and issue 16's decision: the worker sends
    // progress as the samples are read, then the result as its last event, the mean of
    // the samples asked for (a steady level on the simulated bench at -10 dBm).
    #[test]
    fn the_worker_sends_the_result_after_any_progress() {
        let worker = worker(2000);
        worker.begin(Some((-10.0, 10e6))).unwrap();
        let events = until_done(&worker);
        let Some(BenchEvent::Done(Ok(measured))) = events.last() else {
            panic!("no result: {events:?}");
        };
        assert_eq!(measured.samples, 2000);
        let counts: Vec<u64> = events[..events.len() - 1]
            .iter()
            .map(|e| match e {
                BenchEvent::Progress(p) => p.samples,
                BenchEvent::Done(_) => panic!("a result before the last event: {events:?}"),
            })
            .collect();
        assert!(counts.windows(2).all(|w| w[0] < w[1]), "{counts:?}");
    }

    // Source: issue 16's decision: a cancelled measurement ends with Cancelled and the
    // worker then takes the next level.
    #[test]
    fn a_cancelled_measurement_ends_cancelled_and_the_worker_goes_on() {
        let worker = worker(1_000_000);
        worker.begin(None).unwrap();
        worker.cancel();
        let events = until_done(&worker);
        assert_eq!(
            events.last(),
            Some(&BenchEvent::Done(Err(MeasureError::Cancelled)))
        );
        let next = worker.measure(None).unwrap();
        assert!(next.is_ok(), "{next:?}");
    }

    const DEMO_DIODE: &str = include_str!("../../profiles/demo-diode.toml");

    // Source: the β equation worked by hand for the demo's divider (10 kΩ, β 3950 K NTC to
    // ground under 10 kΩ, 12-bit ratiometric, full scale 4095): code 2047 reads
    // 25.0110 °C and 2048 reads 24.9890 °C, so the two alternating average 25.0000 °C.
    // The power channel is the first that is not the sensor's (docs/calibration.md).
    #[test]
    fn a_port_with_the_board_sensor_tags_the_point_with_its_mean() {
        let profile = dbtrail::profile::parse_profile(DEMO_DIODE, "demo-diode.toml").unwrap();
        let sensor = BoardSensor::new(profile.temperature.unwrap(), profile.adc.clone());
        let frames = move |sender: &mut crate::source::EventSender, _| {
            for i in 0..20_000u32 {
                let t = f64::from(i) / 1000.0;
                if !sender.send(Event::sample(t, &[500, 2047 + i % 2])) {
                    break;
                }
            }
        };
        let source = crate::source::spawn(
            "frames".into(),
            false,
            crate::source::WhenFull::Wait(64),
            frames,
        );
        let measuring = Measuring {
            rule: SettleRule::default(),
            averaging: Averaging::Samples(100),
        };
        let worker = Worker::start(Bench::Port(source, Some(sensor)), measuring);
        let measured = worker.measure(Some((0.0, 10e6))).unwrap().unwrap();
        assert_eq!(measured.counts, 500.0);
        let celsius = measured.temp_c.expect("the sensor was read");
        assert!((celsius - 25.0).abs() < 1e-3, "{celsius}");
    }
}
