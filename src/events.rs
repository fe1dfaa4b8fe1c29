//! The events a source sends down the ring to whatever consumes them (the recorder, the
//! screen, the calibration procedure): runs of samples in source time, and the link's
//! losses, returns, gaps and refusals.

use crate::decode::{FlatCounts, FrameSink};

/// A run of samples from one source, evenly spaced in time from `t0` (all at `t0` when
/// `dt` is 0, as for one read of a serial port), counts laid end to end by channel.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Chunk {
    /// Time of the first sample, seconds since the run started.
    pub t0: f64,
    /// Time between samples, seconds.
    pub dt: f64,
    /// The samples.
    pub samples: FlatCounts,
}

impl Chunk {
    /// A chunk of one sample.
    pub fn single(t: f64, counts: &[u32]) -> Self {
        let mut samples = FlatCounts::default();
        if let Some(frame) = crate::decode::Frame::new(counts) {
            samples.push_frame(&frame);
        }
        Chunk {
            t0: t,
            dt: 0.0,
            samples,
        }
    }

    /// Samples held.
    pub fn len(&self) -> usize {
        self.samples.len()
    }

    /// True when it holds no sample.
    pub fn is_empty(&self) -> bool {
        self.samples.is_empty()
    }

    /// Channels per sample.
    pub fn channels(&self) -> usize {
        self.samples.channels
    }

    /// The time of sample `i`.
    #[inline]
    pub fn time(&self, i: usize) -> f64 {
        self.t0 + self.dt * i as f64
    }

    /// The counts of sample `i`.
    #[inline]
    pub fn counts(&self, i: usize) -> &[u32] {
        let n = self.samples.channels;
        &self.samples.counts[i * n..(i + 1) * n]
    }

    /// The time of the last sample.
    pub fn last_t(&self) -> f64 {
        self.time(self.len().saturating_sub(1))
    }
}

/// What a source delivers to a consumer, in source time (seconds since the run started).
#[derive(Debug, Clone, PartialEq)]
pub enum Event {
    /// Decoded samples.
    Samples(Chunk),
    /// The source was lost (unplugged, closed, failing).
    LinkDown {
        /// When.
        t: f64,
    },
    /// The source is back.
    LinkUp {
        /// When.
        t: f64,
    },
    /// Samples went missing (ring overrun or dropped frames).
    Lost {
        /// When it was noticed.
        t: f64,
        /// How many.
        samples: u64,
    },
    /// The source refused input: bad or over-long lines, or frames with a bad CRC.
    Rejected {
        /// When it was noticed.
        t: f64,
        /// How many lines or frames.
        count: u64,
    },
}

impl Event {
    /// One sample as an event.
    pub fn sample(t: f64, counts: &[u32]) -> Self {
        Event::Samples(Chunk::single(t, counts))
    }

    /// The event's time (of its first sample).
    pub fn t(&self) -> f64 {
        match self {
            Event::Samples(chunk) => chunk.t0,
            Event::LinkDown { t }
            | Event::LinkUp { t }
            | Event::Lost { t, .. }
            | Event::Rejected { t, .. } => *t,
        }
    }

    /// The time of its last sample (its time, for the others).
    pub fn last_t(&self) -> f64 {
        match self {
            Event::Samples(chunk) => chunk.last_t(),
            other => other.t(),
        }
    }
}
