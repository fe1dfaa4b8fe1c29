//! The ADC front end: raw counts to volts at the detector output, and the clip test.
//!
//! Full scale is 2^bits − 1 counts at the reference voltage. A resistive divider between
//! the detector and the ADC pin has ratio K = detector volts / pin volts (K ≥ 1); a
//! buffer with gain gives K < 1. Counts may be fractional, as averages are.

/// Default clip margin: a sample within 0.5 % of full scale counts as ADC clip.
pub const DEFAULT_CLIP_MARGIN: f64 = 0.005;

/// The ADC and the divider in front of it, already validated.
#[derive(Debug, Clone, PartialEq)]
pub struct Adc {
    bits: u8,
    vref: f64,
    divider: f64,
    zero_counts: f64,
    clip_margin: f64,
}

impl Adc {
    /// Builds the front end; the profile loader has checked the ranges.
    pub fn new(bits: u8, vref: f64, divider: f64, zero_counts: f64, clip_margin: f64) -> Self {
        Adc {
            bits,
            vref,
            divider,
            zero_counts,
            clip_margin,
        }
    }

    /// The same front end with `zero_counts` as its zero (one taken with the RF off).
    pub fn with_zero(&self, zero_counts: f64) -> Adc {
        Adc {
            zero_counts,
            ..self.clone()
        }
    }

    /// Resolution in bits.
    pub fn bits(&self) -> u8 {
        self.bits
    }
    /// Reference voltage at the ADC pin for full scale.
    pub fn vref(&self) -> f64 {
        self.vref
    }
    /// Divider ratio K = detector volts / pin volts.
    pub fn divider(&self) -> f64 {
        self.divider
    }
    /// Counts read with no signal.
    pub fn zero_counts(&self) -> f64 {
        self.zero_counts
    }
    /// The fraction of full scale below the top that still counts as clip.
    pub fn clip_margin(&self) -> f64 {
        self.clip_margin
    }

    /// Full scale in counts: 2^bits − 1.
    pub fn full_scale(&self) -> f64 {
        f64::from((1u32 << self.bits) - 1)
    }

    /// Detector volts per ADC count.
    pub fn volts_per_count(&self) -> f64 {
        self.vref * self.divider / self.full_scale()
    }

    /// Detector output volts for a (possibly fractional) count.
    pub fn volts(&self, counts: f64) -> f64 {
        (counts - self.zero_counts) * self.volts_per_count()
    }

    /// The count that detector output `volts` would read (inverse of [`Adc::volts`]).
    pub fn counts(&self, volts: f64) -> f64 {
        volts / self.volts_per_count() + self.zero_counts
    }

    /// The lowest count that is taken as clip.
    pub fn clip_threshold(&self) -> f64 {
        self.full_scale() * (1.0 - self.clip_margin)
    }

    /// True when `counts` sits at or near full scale, so the true level may be higher.
    pub fn is_clipped(&self, counts: f64) -> bool {
        counts >= self.clip_threshold()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Source: common practice (an N-bit converter reads 2^N − 1 at its reference).
    #[test]
    fn twelve_bit_full_scale_reads_the_reference_times_the_divider() {
        let adc = Adc::new(12, 3.3, 2.0, 0.0, DEFAULT_CLIP_MARGIN);
        assert_eq!(adc.full_scale(), 4095.0);
        assert!((adc.volts(4095.0) - 6.6).abs() < 1e-12);
        assert!((adc.volts(2047.5) - 3.3).abs() < 1e-12);
        assert!(adc.is_clipped(4075.0));
        assert!(!adc.is_clipped(4074.0));
    }

    #[test]
    fn zero_offset_is_subtracted_and_inverse_round_trips() {
        let adc = Adc::new(10, 1.1, 1.0, 4.0, DEFAULT_CLIP_MARGIN);
        assert_eq!(adc.volts(4.0), 0.0);
        let c = 517.25;
        assert!((adc.counts(adc.volts(c)) - c).abs() < 1e-9);
    }

    #[test]
    fn twenty_four_bits_do_not_overflow() {
        let adc = Adc::new(24, 2.5, 1.0, 0.0, DEFAULT_CLIP_MARGIN);
        assert_eq!(adc.full_scale(), 16_777_215.0);
    }
}
