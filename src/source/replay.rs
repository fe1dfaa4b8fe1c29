//! The replay source: a raw capture (either mode) read from a file, its samples stamped at
//! a stated rate, as fast as possible or paced in real time.

use std::fs::File;
use std::io::Read;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use dbtrail::decode::{Decoder, Format};
use dbtrail::record::Event;

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
    let mut buf = vec![0u8; 256 * 1024];
    let mut frames = Vec::with_capacity(64 * 1024);
    let mut index: u64 = 0;
    sink.counters.set_connected(true);
    loop {
        let n = match file.read(&mut buf) {
            Ok(0) | Err(_) => 0,
            Ok(n) => n,
        };
        let before = decoder.stats();
        if n == 0 {
            decoder.finish(&mut frames);
        } else {
            decoder.feed(&buf[..n], &mut frames);
        }
        sink.counters.add_decoded(&before, &decoder.stats());
        for frame in frames.drain(..) {
            let t = index as f64 / spec.rate_hz;
            index += 1;
            if spec.realtime {
                pace(started, t);
            }
            if !sink.send(Event::Sample { t, frame }) {
                return;
            }
        }
        if n == 0 {
            break;
        }
    }
    let t = index as f64 / spec.rate_hz;
    sink.counters.set_last_sample((t * 1e9) as u64);
    sink.counters.set_connected(false);
}

/// Sleeps until `t` seconds after `started`.
pub fn pace(started: Instant, t: f64) {
    let due = started + Duration::from_secs_f64(t);
    let now = Instant::now();
    if due > now {
        std::thread::sleep(due - now);
    }
}
