//! The serial source: a reader thread that decodes, stamps each sample with host monotonic
//! time, and on loss reopens the same path with backoff, marking the gap.

use std::io::{ErrorKind, Read};
use std::time::{Duration, Instant};

use anyhow::Context;
use dbtrail::decode::{DecodeStats, Decoder, FlatCounts, Format};
use dbtrail::events::{Chunk, Event};
use serialport::SerialPort;

use super::{spawn, EventSender, Running, WhenFull};

/// A port to read.
pub struct SerialSpec {
    /// Device path.
    pub path: String,
    /// Baud rate.
    pub baud: u32,
    /// Wire format.
    pub format: Format,
}

const READ_TIMEOUT: Duration = Duration::from_millis(50);
const BACKOFF_FIRST: Duration = Duration::from_millis(100);
const BACKOFF_MAX: Duration = Duration::from_secs(2);

/// Opens `path`, with a message that says what to do when it fails.
pub fn open_port(path: &str, baud: u32) -> anyhow::Result<Box<dyn SerialPort>> {
    serialport::new(path, baud)
        .timeout(READ_TIMEOUT)
        .open()
        .with_context(|| format!("cannot open serial port {path} at {baud} baud; `dbtrail ports` lists the ports here"))
}

impl SerialSpec {
    /// Starts reading an already opened port on its own thread.
    pub fn start(self, port: Box<dyn SerialPort>) -> Running {
        let description = format!("serial {} at {} baud", self.path, self.baud);
        spawn(description, true, WhenFull::Drop, move |sender, started| {
            read_forever(&self, port, sender, started)
        })
    }
}

fn read_forever(
    spec: &SerialSpec,
    mut port: Box<dyn SerialPort>,
    sender: &mut EventSender,
    started: Instant,
) {
    let mut decoder = Decoder::new(spec.format);
    // The device was already talking: the first line may be cut.
    decoder.resync();
    let mut buf = vec![0u8; 64 * 1024];
    let mut samples = FlatCounts::default();
    sender.counters.set_connected(true);
    while !sender.stopped() {
        match port.read(&mut buf) {
            Ok(0) => {}
            Ok(n) => {
                let t = started.elapsed().as_secs_f64();
                let before = decoder.stats();
                decoder.feed(&buf[..n], &mut samples);
                hand_over(sender, t, &before, &decoder.stats(), &mut samples);
                continue;
            }
            Err(e) if e.kind() == ErrorKind::TimedOut || e.kind() == ErrorKind::Interrupted => {
                continue
            }
            Err(_) => {}
        }
        // Ok(0) (end of file) and real errors both mean the device went away.
        sender.counters.set_connected(false);
        sender.send(Event::LinkDown {
            t: started.elapsed().as_secs_f64(),
        });
        let Some(reopened) = reopen(spec, sender) else {
            return;
        };
        port = reopened;
        // Perhaps another device, or the same one set up anew: learn its format again.
        decoder.resync();
        sender.counters.add_reconnect();
        sender.counters.set_connected(true);
        sender.send(Event::LinkUp {
            t: started.elapsed().as_secs_f64(),
        });
    }
}

/// Hands the consumer what one read gave: the counters' growth, frames found missing,
/// input refused, and the samples.
fn hand_over(
    sender: &mut EventSender,
    t: f64,
    before: &DecodeStats,
    after: &DecodeStats,
    samples: &mut FlatCounts,
) {
    sender.counters.add_decoded(before, after);
    let dropped = after.dropped_frames - before.dropped_frames;
    if dropped > 0 {
        sender.send(Event::Lost {
            t,
            samples: dropped,
        });
    }
    let rejected = after.rejected() - before.rejected();
    if rejected > 0 {
        sender.send(Event::Rejected { t, count: rejected });
    }
    if !samples.is_empty() {
        sender.counters.set_last_sample((t * 1e9) as u64);
        let chunk = Chunk {
            t0: t,
            dt: 0.0,
            samples: std::mem::take(samples),
        };
        sender.send(Event::Samples(chunk));
    }
}

/// Tries the same path again with growing pauses until it opens or the consumer stops.
fn reopen(spec: &SerialSpec, sender: &EventSender) -> Option<Box<dyn SerialPort>> {
    let mut pause = BACKOFF_FIRST;
    while !sender.stopped() {
        std::thread::sleep(pause);
        if let Ok(port) = open_port(&spec.path, spec.baud) {
            return Some(port);
        }
        pause = (pause * 2).min(BACKOFF_MAX);
    }
    None
}
