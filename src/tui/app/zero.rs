//! A zero taken on the live screen with the RF off: the power channel's counts over
//! [`ZERO_TAKE_S`] of source time, whose mean becomes the run's ADC zero unless they show
//! that RF is present.

use dbtrail::calibration::{Flags, Reading};

/// How long a zero collects counts, seconds of source time. A choice: at the demo's
/// rates hundreds of samples, enough that the mean's noise is well under a count.
pub const ZERO_TAKE_S: f64 = 2.0;

/// What the zero key says in a coupler run.
pub const COUPLER_ZERO_REFUSED: &str = "no zero in a coupler run: each arm's zero is its \
     profile's [adc] zero_counts";

/// The counts collected so far.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ZeroTake {
    /// Source time of the first sample taken, seconds.
    first_t: Option<f64>,
    /// Source time of the newest sample taken, seconds.
    last_t: f64,
    sum: f64,
    n: u64,
    /// A sample was at ADC clip or over full scale.
    clipped: bool,
}

/// What became of a zero.
#[derive(Debug, Clone, PartialEq)]
pub enum ZeroOutcome {
    /// Still collecting.
    Collecting,
    /// The counts' mean, to become the zero, and how many samples it holds.
    Taken { zero_counts: f64, samples: u64 },
    /// RF is present: why, for the user.
    Refused(String),
}

impl ZeroTake {
    /// Takes one power sample's `code` and its reading at `t`.
    pub fn push(&mut self, t: f64, code: u32, reading: &Reading) {
        self.first_t.get_or_insert(t);
        self.last_t = self.last_t.max(t);
        self.sum += f64::from(code);
        self.n += 1;
        self.clipped |= reading
            .flags
            .intersects(Flags::ADC_CLIP | Flags::OVER_FULL_SCALE);
    }

    /// Seconds of source time collected.
    pub fn collected_s(&self) -> f64 {
        self.first_t.map_or(0.0, |t0| self.last_t - t0)
    }

    /// Samples collected.
    pub fn samples(&self) -> u64 {
        self.n
    }

    /// The mean of the counts so far.
    pub fn mean(&self) -> Option<f64> {
        (self.n > 0).then(|| self.sum / self.n as f64)
    }

    /// Whether the zero is done, and with what: `read` gives the reading of fractional
    /// counts through the calibration in use. A mean that reads at or above the span's
    /// bottom, or any sample at clip, says RF is present.
    pub fn outcome(&self, read: impl FnOnce(f64) -> Reading) -> ZeroOutcome {
        let Some(mean) = self.mean().filter(|_| self.collected_s() >= ZERO_TAKE_S) else {
            return ZeroOutcome::Collecting;
        };
        if self.clipped {
            return ZeroOutcome::Refused(
                "zero refused, nothing changed: the counts reached ADC clip, RF is on".into(),
            );
        }
        let reading = read(mean);
        if !reading.flags.contains(Flags::BELOW_SPAN) {
            return ZeroOutcome::Refused(format!(
                "zero refused, nothing changed: counts read {:+.2} dBm, in the span: RF is on",
                reading.dbm
            ));
        }
        ZeroOutcome::Taken {
            zero_counts: mean,
            samples: self.n,
        }
    }
}
