//! The simulator as a source: the library's physical model run on its own thread, in real
//! time or as fast as it can, in chunks of samples.

use dbtrail::decode::FlatCounts;
use dbtrail::events::{Chunk, Event};
use dbtrail::sim::SimBench;

use super::replay::pace;
use super::{spawn, Running, WhenFull, WAITING_RING};

/// Samples per chunk when running as fast as possible.
const FAST_CHUNK: usize = 1 << 14;
/// Seconds of samples per chunk in real time.
const PACED_CHUNK_S: f64 = 0.01;

/// A simulated bench.
pub struct SimSpec {
    /// The model, ready to run: one detector, or the match bench's two channels.
    pub simulator: SimBench,
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
        let rate = self.simulator.rate_hz();
        let per_chunk = if self.fast {
            FAST_CHUNK
        } else {
            (rate * PACED_CHUNK_S).ceil().max(1.0) as usize
        };
        let total = self.until.map(|s| (s * rate).ceil() as u64);
        let channels = self.simulator.channels();
        spawn(
            description,
            !self.fast,
            WhenFull::Wait(WAITING_RING),
            move |sender, started| {
                sender.counters.set_connected(true);
                let mut made: u64 = 0;
                while total.is_none_or(|n| made < n) {
                    let n = total.map_or(per_chunk, |total| per_chunk.min((total - made) as usize));
                    let mut samples = FlatCounts {
                        channels,
                        counts: Vec::with_capacity(n * channels),
                    };
                    let t0 = self.simulator.fill(n, &mut samples.counts);
                    let chunk = Chunk {
                        t0,
                        dt: 1.0 / rate,
                        samples,
                    };
                    if !self.fast && !pace(started, chunk.last_t(), || sender.stopped()) {
                        break;
                    }
                    made += n as u64;
                    sender.counters.add_samples(n as u64);
                    sender
                        .counters
                        .set_last_sample((chunk.last_t() * 1e9) as u64);
                    if !sender.send(Event::Samples(chunk)) {
                        break;
                    }
                }
                sender.counters.set_connected(false);
            },
        )
    }
}
