//! The simulator as a source: the library's physical model run on its own thread, in real
//! time or as fast as it can.

use dbtrail::decode::Frame;
use dbtrail::record::Event;
use dbtrail::sim::Simulator;

use super::replay::pace;
use super::{spawn, Running, WhenFull};

/// Samples between updates of the shared counters, which other threads read.
const COUNTER_STRIDE: u64 = 64;

/// A simulated bench.
pub struct SimSpec {
    /// The model, ready to run.
    pub simulator: Simulator,
    /// Run as fast as possible instead of in real time.
    pub fast: bool,
    /// Stop after this much simulated time, seconds.
    pub until: Option<f64>,
    /// The seed, for the description.
    pub seed: u64,
}

impl SimSpec {
    /// Starts the simulator on its own thread.
    pub fn start(mut self) -> Running {
        let scenario = self.simulator.scenario();
        let description = format!(
            "demo {} at {} samples/s, seed {}{}: {}",
            scenario.name(),
            self.simulator.rate_hz(),
            self.seed,
            if self.fast { ", fast" } else { "" },
            scenario.story()
        );
        spawn(
            description,
            !self.fast,
            WhenFull::Wait,
            move |sink, started| {
                sink.counters.set_connected(true);
                let mut count: u64 = 0;
                loop {
                    let (t, counts) = self.simulator.next_sample();
                    if self.until.is_some_and(|end| t >= end) {
                        break;
                    }
                    if !self.fast {
                        pace(started, t);
                    }
                    let frame = Frame::new(&[counts]).expect("one channel");
                    if !sink.send(Event::Sample { t, frame }) {
                        break;
                    }
                    count += 1;
                    if count % COUNTER_STRIDE == 0 {
                        sink.counters.add_samples(COUNTER_STRIDE);
                        sink.counters.set_last_sample((t * 1e9) as u64);
                    }
                }
                sink.counters.add_samples(count % COUNTER_STRIDE);
                sink.counters.set_connected(false);
            },
        )
    }
}
