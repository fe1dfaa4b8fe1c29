//! The replay source: a raw capture (either mode) read from a file, its samples stamped at
//! a stated rate, as fast as possible or paced in real time.

use std::fs::File;
use std::io::Read;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use dbtrail::decode::{Decoder, FlatCounts, Format};
use dbtrail::record::{Chunk, Event};

use super::{spawn, Running, Sink, WhenFull};

/// A capture to replay.
pub struct ReplaySpec {
    /// The file.
    pub path: PathBuf,
    /// Samples per second used to stamp the samples.
    pub rate_hz: f64,
    /// Pace the samples to the wall clock.
    pub realtime: bool,
    /// Wire format.
    pub format: Format,
}

/// Seconds of samples per chunk when pacing in real time.
const PACED_CHUNK_S: f64 = 0.02;

impl ReplaySpec {
    /// Starts reading the already opened file on its own thread.
    pub fn start(self, file: File) -> Running {
        let description = format!(
            "replay {} at {} samples/s{}",
            self.path.display(),
            self.rate_hz,
            if self.realtime { ", real time" } else { "" }
        );
        spawn(description, false, WhenFull::Wait, move |sink, started| {
            replay(&self, file, sink, started)
        })
    }
}

fn replay(spec: &ReplaySpec, mut file: File, sink: &mut Sink, started: Instant) {
    let mut decoder = Decoder::new(spec.format);
    let mut buf = vec![0u8; 1 << 18];
    let mut index: u64 = 0;
    let dt = 1.0 / spec.rate_hz;
    sink.counters.set_connected(true);
    loop {
        let n = match file.read(&mut buf) {
            Ok(0) | Err(_) => 0,
            Ok(n) => n,
        };
        let before = decoder.stats();
        // A short ASCII line is 3 to 6 bytes: room for the samples of this read at once.
        let mut samples = FlatCounts {
            channels: 0,
            counts: Vec::with_capacity(n / 3 + 16),
        };
        if n == 0 {
            decoder.finish(&mut samples);
        } else {
            decoder.feed(&buf[..n], &mut samples);
        }
        sink.counters.add_decoded(&before, &decoder.stats());
        for chunk in split(samples, spec, index, dt) {
            index += chunk.len() as u64;
            if spec.realtime {
                pace(started, chunk.t0);
            }
            if !sink.send(Event::Samples(chunk)) {
                return;
            }
        }
        if n == 0 {
            break;
        }
    }
    sink.counters
        .set_last_sample((index as f64 * dt * 1e9) as u64);
    sink.counters.set_connected(false);
}

/// The decoded samples as chunks: all in one when running flat out, in short slices when
/// paced so the screen sees them arrive steadily.
fn split(samples: FlatCounts, spec: &ReplaySpec, first: u64, dt: f64) -> Vec<Chunk> {
    if samples.is_empty() {
        return Vec::new();
    }
    if !spec.realtime {
        return vec![Chunk {
            t0: first as f64 * dt,
            dt,
            samples,
        }];
    }
    let per_chunk = (spec.rate_hz * PACED_CHUNK_S).ceil().max(1.0) as usize * samples.channels;
    samples
        .counts
        .chunks(per_chunk)
        .scan(first, |index, counts| {
            let chunk = Chunk {
                t0: *index as f64 * dt,
                dt,
                samples: FlatCounts {
                    channels: samples.channels,
                    counts: counts.to_vec(),
                },
            };
            *index += (counts.len() / samples.channels) as u64;
            Some(chunk)
        })
        .collect()
}

/// Sleeps until `t` seconds after `started`.
pub fn pace(started: Instant, t: f64) {
    let due = started + Duration::from_secs_f64(t);
    let now = Instant::now();
    if due > now {
        std::thread::sleep(due - now);
    }
}
