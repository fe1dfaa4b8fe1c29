//! Link health: counters a source keeps while it runs (samples, bad lines, CRC errors,
//! dropped frames, ring overruns, reconnects, the time of the last sample), shared between
//! the reader thread that writes them and whatever shows or records them.

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering::Relaxed};

use crate::decode::DecodeStats;

/// Counters shared between a reader thread and its consumers.
#[derive(Debug, Default)]
pub struct LinkCounters {
    samples: AtomicU64,
    bad_lines: AtomicU64,
    crc_errors: AtomicU64,
    dropped_frames: AtomicU64,
    overruns: AtomicU64,
    reconnects: AtomicU64,
    last_sample_ns: AtomicU64,
    connected: AtomicBool,
}

/// A copy of the counters at one moment.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct LinkSnapshot {
    /// Samples decoded.
    pub samples: u64,
    /// Lines or bytes that were not samples: bad lines plus over-long lines.
    pub bad_lines: u64,
    /// Binary frames with a bad CRC.
    pub crc_errors: u64,
    /// Binary frames missing by sequence number.
    pub dropped_frames: u64,
    /// Samples lost because the consumer fell behind.
    pub overruns: u64,
    /// Times the source was reopened after a loss.
    pub reconnects: u64,
    /// Source time of the last sample, ns (0 before the first).
    pub last_sample_ns: u64,
    /// Whether the source is connected now.
    pub connected: bool,
}

impl LinkCounters {
    /// Adds the growth of a decoder's counters since `before`.
    pub fn add_decoded(&self, before: &DecodeStats, now: &DecodeStats) {
        self.samples.fetch_add(now.frames - before.frames, Relaxed);
        let bad = (now.bad_lines + now.long_lines) - (before.bad_lines + before.long_lines);
        self.bad_lines.fetch_add(bad, Relaxed);
        self.crc_errors
            .fetch_add(now.crc_errors - before.crc_errors, Relaxed);
        self.dropped_frames
            .fetch_add(now.dropped_frames - before.dropped_frames, Relaxed);
    }
    /// Counts samples made without a decoder (the simulator).
    pub fn add_samples(&self, n: u64) {
        self.samples.fetch_add(n, Relaxed);
    }
    /// Counts samples lost to a full ring.
    pub fn add_overruns(&self, n: u64) {
        self.overruns.fetch_add(n, Relaxed);
    }
    /// Counts one reconnect.
    pub fn add_reconnect(&self) {
        self.reconnects.fetch_add(1, Relaxed);
    }
    /// Notes when the last sample arrived, in source nanoseconds.
    pub fn set_last_sample(&self, ns: u64) {
        self.last_sample_ns.store(ns, Relaxed);
    }
    /// Notes whether the source is connected.
    pub fn set_connected(&self, connected: bool) {
        self.connected.store(connected, Relaxed);
    }
    /// The counters now.
    pub fn snapshot(&self) -> LinkSnapshot {
        LinkSnapshot {
            samples: self.samples.load(Relaxed),
            bad_lines: self.bad_lines.load(Relaxed),
            crc_errors: self.crc_errors.load(Relaxed),
            dropped_frames: self.dropped_frames.load(Relaxed),
            overruns: self.overruns.load(Relaxed),
            reconnects: self.reconnects.load(Relaxed),
            last_sample_ns: self.last_sample_ns.load(Relaxed),
            connected: self.connected.load(Relaxed),
        }
    }
}

impl LinkSnapshot {
    /// Lines and frames refused so far: bad and over-long lines, frames with a bad CRC
    /// (as [`DecodeStats::rejected`]).
    pub fn rejected(&self) -> u64 {
        self.bad_lines + self.crc_errors
    }

    /// One line for a person: `12034 samples, 0 bad lines, 0 CRC errors, …`.
    pub fn summary(&self) -> String {
        format!(
            "{} samples, {} bad lines, {} CRC errors, {} dropped frames, {} ring overruns, {} reconnects",
            self.samples, self.bad_lines, self.crc_errors, self.dropped_frames, self.overruns, self.reconnects
        )
    }

    /// The counters in the short words every status line uses, the screen's and record's
    /// alike: `bad 0 crc 0 drop 0 behind 0 reopen 0` (lines refused, frames with a bad
    /// CRC, frames missing by sequence, samples lost because the program fell behind, times
    /// the port was reopened). None of the words is one the limits use.
    pub fn brief(&self) -> String {
        format!(
            "bad {} crc {} drop {} behind {} reopen {}",
            self.bad_lines, self.crc_errors, self.dropped_frames, self.overruns, self.reconnects
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Source: the rule in docs/screen.md ("Link health"): one set of short words on every
    // status line, each counter under its own word.
    #[test]
    fn the_brief_line_puts_each_counter_under_its_own_word() {
        let link = LinkSnapshot {
            bad_lines: 1,
            crc_errors: 2,
            dropped_frames: 3,
            overruns: 4,
            reconnects: 5,
            ..LinkSnapshot::default()
        };
        assert_eq!(link.brief(), "bad 1 crc 2 drop 3 behind 4 reopen 5");
    }
}
