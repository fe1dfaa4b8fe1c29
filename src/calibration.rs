//! The calibration chain: one ADC count in, one flagged reading out.
//!
//! counts → detector volts (ADC, divider, zero) → detector-input dBm (detector model)
//! → reference-plane dBm (+ frequency correction + offset). Nothing is extrapolated
//! silently: a reading outside the calibrated span carries a flag, and below the span its
//! value is the span's low end, to be shown as "below X dBm".

use std::fmt;
use std::sync::Arc;

use bitflags::bitflags;

use crate::adc::Adc;
use crate::detector::thermal::{AtTemperature, ThermalModel};
use crate::detector::Detector;
use crate::profile::{Limits, Profile};
use crate::thermal::TemperatureChannel;
use crate::units::dbm_to_watts;

mod compensation;
mod table;

pub use compensation::{Compensation, RETABLE_STEP_DB, RETABLE_STEP_K};

pub use table::{
    untally, CodeEntry, CodeRuns, CodeTable, TableTotals, CODE_BLOCK, TABLE_MAX_CODES,
    TALLY_AT_LEAST, TALLY_AT_MOST, TALLY_VALUE,
};

bitflags! {
    /// What is doubtful or dangerous about a reading.
    #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
    pub struct Flags: u16 {
        /// The ADC was at or near full scale: the true level may be higher.
        const ADC_CLIP = 1 << 0;
        /// Below the calibrated span: the value is an upper bound.
        const BELOW_SPAN = 1 << 1;
        /// Above the calibrated span: the value is extrapolated.
        const ABOVE_SPAN = 1 << 2;
        /// The frequency lies outside the correction or offset table; its end value was used.
        const FREQ_OUTSIDE = 1 << 3;
        /// Over the detector's safe input level.
        const OVER_DETECTOR_MAX = 1 << 4;
        /// Over the rated power at the reference plane (load or attenuator rating).
        const OVER_RATED = 1 << 5;
        /// A count above the ADC's full scale, which the ADC cannot give: a damaged sample
        /// or a profile with the wrong number of bits. Never calibrated.
        const OVER_FULL_SCALE = 1 << 6;
        /// The board was outside the temperatures the model was calibrated at: read with
        /// the nearest calibrated curve (or a diode's law beyond its reach), with no
        /// stated uncertainty.
        const TEMP_OUTSIDE = 1 << 7;
        /// The source was disconnected or silent for some or all of the interval.
        const GAP = 1 << 8;
        /// The source came back after a gap in this interval.
        const RECONNECT = 1 << 9;
        /// Samples were lost in this interval (dropped frames or ring overruns).
        const LOST = 1 << 10;
        /// The board's temperature was not known (no good sensor reading yet, or the
        /// sensor faulty): read uncompensated, at the calibration's own temperature.
        const TEMP_UNKNOWN = 1 << 11;
    }
}

/// Readings with these flags are not values: the screen's holds, trend and average leave
/// them out. Interval statistics count clipped and below-span readings at their bound
/// instead (see [`crate::stats::Bound`]).
pub const NOT_A_VALUE: Flags = Flags::BELOW_SPAN
    .union(Flags::ADC_CLIP)
    .union(Flags::OVER_FULL_SCALE);

impl Flags {
    /// Short names, for logs and status lines.
    pub fn names(self) -> Vec<&'static str> {
        const NAMES: [(Flags, &str); 12] = [
            (Flags::ADC_CLIP, "clip"),
            (Flags::BELOW_SPAN, "below"),
            (Flags::ABOVE_SPAN, "above"),
            (Flags::FREQ_OUTSIDE, "freq-outside"),
            (Flags::OVER_DETECTOR_MAX, "over-detector-max"),
            (Flags::OVER_RATED, "over-rated"),
            (Flags::OVER_FULL_SCALE, "over-full-scale"),
            (Flags::TEMP_OUTSIDE, "temp-outside"),
            (Flags::TEMP_UNKNOWN, "temp-unknown"),
            (Flags::GAP, "gap"),
            (Flags::RECONNECT, "reconnect"),
            (Flags::LOST, "lost"),
        ];
        NAMES
            .iter()
            .filter(|(flag, _)| self.contains(*flag))
            .map(|(_, name)| *name)
            .collect()
    }

    /// The names joined by `|`, as in a CSV cell; empty when no flag is set.
    pub fn joined(self) -> String {
        self.names().join("|")
    }
}

/// How one reading counts in interval statistics.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Counted {
    Value(f64),
    AtLeast(f64),
    AtMost(f64),
    /// No level at all (over the ADC's full scale, NaN): left out.
    Nothing,
}

impl Counted {
    /// A reading's part in the mean: below span at its level (the span's bottom), clipped
    /// or above span at its level but no higher than the span's top `span_top_dbm`.
    pub(crate) fn of(flags: Flags, dbm: f64, span_top_dbm: f64) -> Counted {
        if flags.contains(Flags::OVER_FULL_SCALE) || dbm.is_nan() {
            Counted::Nothing
        } else if flags.contains(Flags::BELOW_SPAN) {
            Counted::AtMost(dbm)
        } else if flags.intersects(Flags::ADC_CLIP | Flags::ABOVE_SPAN) {
            Counted::AtLeast(dbm.min(span_top_dbm))
        } else {
            Counted::Value(dbm)
        }
    }

    /// The level counted; NaN for none, which leaves extremes as they are (see `widen`).
    pub(crate) fn dbm(self) -> f64 {
        match self {
            Counted::Value(dbm) | Counted::AtLeast(dbm) | Counted::AtMost(dbm) => dbm,
            Counted::Nothing => f64::NAN,
        }
    }

    /// Its kind as a table entry's tally (see `CodeEntry::tally`).
    pub(crate) fn tally(self) -> u32 {
        match self {
            Counted::Value(_) => TALLY_VALUE,
            Counted::AtLeast(_) => TALLY_AT_LEAST,
            Counted::AtMost(_) => TALLY_AT_MOST,
            Counted::Nothing => 0,
        }
    }
}

/// One calibrated sample.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Reading {
    /// The raw (or averaged) count.
    pub counts: f64,
    /// Detector output volts.
    pub volts: f64,
    /// Level at the detector input, dBm.
    pub detector_dbm: f64,
    /// Level at the reference plane, dBm (the span's low end when below the span).
    pub dbm: f64,
    /// What is doubtful about it.
    pub flags: Flags,
}

impl Reading {
    /// Power at the reference plane in watts.
    pub fn watts(&self) -> f64 {
        dbm_to_watts(self.dbm)
    }
}

/// The reading as a person should see it: "12.34 dBm", "below −30.00 dBm", "above …".
impl fmt::Display for Reading {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.flags.contains(Flags::BELOW_SPAN) {
            write!(f, "below {:.2} dBm", self.dbm)
        } else if self.flags.contains(Flags::ABOVE_SPAN) {
            write!(f, "above span: ~{:.2} dBm", self.dbm)
        } else {
            write!(f, "{:.2} dBm", self.dbm)
        }
    }
}

/// The span readings are flagged against, detector dBm: the calibrated levels, widened to
/// where the model itself reads the lowest and highest points, so that a calibration point
/// never reads as outside its own span. Being the model's, it holds every unflagged
/// reading, however far the model strays from the points (the loader refuses a model that
/// strays far).
fn model_span_dbm(profile: &Profile, detector: &dyn Detector) -> (f64, f64) {
    let (lo, hi) = detector.span_dbm();
    let by_level = |a: &&crate::profile::ProfilePoint, b: &&crate::profile::ProfilePoint| {
        a.dbm.total_cmp(&b.dbm)
    };
    let reads = |point: Option<&crate::profile::ProfilePoint>| {
        point
            .map(|p| detector.dbm_at(p.volts))
            .filter(|dbm| dbm.is_finite())
    };
    let lowest = reads(profile.points.iter().min_by(by_level)).unwrap_or(lo);
    let highest = reads(profile.points.iter().max_by(by_level)).unwrap_or(hi);
    (lo.min(lowest), hi.max(highest))
}

/// A profile made ready for one frequency and offset.
#[derive(Debug, Clone)]
pub struct Calibration {
    adc: Adc,
    detector: Arc<dyn Detector>,
    freq_hz: f64,
    correction_db: f64,
    offset_db: f64,
    fixed_flags: Flags,
    /// The span at the detector, dBm, as the model reads it.
    span_dbm: (f64, f64),
    /// Detector volts at the low and the high end of the span.
    span_volts: (f64, f64),
    limits: Limits,
    table: Arc<CodeTable>,
    thermal: Option<Arc<ThermalSetup>>,
}

/// What a profile says of the board's temperature: the channel that reads it and the
/// model across it.
#[derive(Debug, Clone)]
pub struct ThermalSetup {
    /// The temperature channel and its sensor.
    pub channel: TemperatureChannel,
    /// The detector model across temperature.
    pub model: Arc<ThermalModel>,
}

impl Calibration {
    /// Prepares `profile` for `freq_hz` (the profile's reference frequency when None) with
    /// `extra_offset_db` added to the profile's offset.
    pub fn new(profile: &Profile, freq_hz: Option<f64>, extra_offset_db: f64) -> Self {
        let freq_hz = freq_hz.unwrap_or(profile.reference_hz);
        let correction = profile
            .frequency_correction
            .as_ref()
            .map(|table| table.at(freq_hz));
        let offset = profile.offset.at(freq_hz);
        let outside = correction.is_some_and(|c| c.outside) || offset.outside;
        let detector = Arc::clone(&profile.model.detector);
        // Points taken at other temperatures would widen the span wrongly: a model across
        // temperature gives its own.
        let span_dbm = match &profile.model.thermal {
            Some(thermal) => thermal.at_kelvin(thermal.reference_kelvin()).span_dbm,
            None => model_span_dbm(profile, detector.as_ref()),
        };
        let span_volts = (detector.volts_at(span_dbm.0), detector.volts_at(span_dbm.1));
        let cal = Calibration {
            adc: profile.adc.clone(),
            detector,
            freq_hz,
            correction_db: correction.map_or(0.0, |c| c.db),
            offset_db: offset.db + extra_offset_db,
            fixed_flags: if outside {
                Flags::FREQ_OUTSIDE
            } else {
                Flags::empty()
            },
            span_dbm,
            span_volts,
            limits: profile.limits,
            table: Arc::new(CodeTable::empty()),
            thermal: profile
                .temperature
                .zip(profile.model.thermal.clone())
                .map(|(channel, model)| Arc::new(ThermalSetup { channel, model })),
        };
        cal.tabled()
    }

    /// The same set-up with the detector model `at` one board temperature: its curve, its
    /// span, and the `temp-outside` flag on every reading when the temperature lay
    /// outside the calibrated ones. The per-code table is built afresh.
    pub fn at_temperature(&self, at: &AtTemperature) -> Calibration {
        let detector = Arc::clone(&at.detector);
        let span_volts = (
            detector.volts_at(at.span_dbm.0),
            detector.volts_at(at.span_dbm.1),
        );
        let mut fixed_flags = self.fixed_flags - Flags::TEMP_OUTSIDE;
        fixed_flags.set(Flags::TEMP_OUTSIDE, at.outside);
        Calibration {
            detector,
            span_dbm: at.span_dbm,
            span_volts,
            fixed_flags,
            table: Arc::new(CodeTable::empty()),
            ..self.clone()
        }
        .tabled()
    }

    /// The same calibration with the ADC zero at `zero_counts` (one taken with the RF off
    /// during a run). The per-code table is built afresh.
    pub fn with_zero(&self, zero_counts: f64) -> Calibration {
        let adc = self.adc.with_zero(zero_counts);
        Calibration {
            adc,
            table: Arc::new(CodeTable::empty()),
            ..self.clone()
        }
        .tabled()
    }

    /// How far a zero moved from `zero_counts` (this calibration's) to `new_zero` shifts
    /// a reading at the bottom of the span, dB: the counts the bottom level gives, moved
    /// by the change, read through the detector model.
    pub fn zero_shift_db_at_span_bottom(&self, new_zero: f64) -> f64 {
        let (bottom, _) = self.span_dbm;
        let counts =
            self.adc.counts(self.detector.volts_at(bottom)) + new_zero - self.adc.zero_counts();
        self.detector.dbm_at(self.adc.volts(counts)) - bottom
    }

    /// The same calibration with `flags` on every reading.
    pub fn with_fixed_flags(&self, flags: Flags) -> Calibration {
        Calibration {
            fixed_flags: self.fixed_flags | flags,
            table: Arc::new(CodeTable::empty()),
            ..self.clone()
        }
        .tabled()
    }

    /// With its per-code table built.
    fn tabled(mut self) -> Self {
        let codes = self.adc.full_scale() as u32 + 1;
        let span_top_dbm = self.span_dbm().1;
        let table = CodeTable::build(codes, |code| {
            CodeEntry::of(&self.reading(f64::from(code)), span_top_dbm)
        });
        self.table = Arc::new(table);
        self
    }

    /// The board's temperature channel and the model across temperature, when the
    /// profile reads one.
    pub fn thermal(&self) -> Option<&ThermalSetup> {
        self.thermal.as_deref()
    }

    /// The precomputed entries, one per ADC code from 0 (empty above 16 bits).
    pub fn code_table(&self) -> &[CodeEntry] {
        self.table.entries()
    }

    /// The table arranged by runs of codes, for statistics over blocks of codes.
    pub fn code_runs(&self) -> &CodeRuns {
        self.table.runs()
    }

    /// Adds up `codes` through the per-code table (see [`CodeTable::accumulate`]): the
    /// interval statistics' inner loop.
    #[inline]
    pub fn accumulate(&self, codes: &[u32], each_block: impl FnMut(&[u32], bool)) -> TableTotals {
        self.table.accumulate(codes, each_block)
    }

    /// The precomputed entry for an ADC code, when the table covers it.
    #[inline]
    pub fn code_entry(&self, code: u32) -> Option<&CodeEntry> {
        self.code_table().get(code as usize)
    }

    /// The reading of a whole ADC code: from the table when it covers the code, else
    /// through the exact model (codes above full scale read as clip).
    pub fn reading_code(&self, code: u32) -> Reading {
        match self.code_entry(code) {
            Some(e) => Reading {
                counts: f64::from(code),
                volts: self.adc.volts(f64::from(code)),
                detector_dbm: e.dbm - self.correction_db - self.offset_db,
                dbm: e.dbm,
                flags: e.flags,
            },
            None => self.reading(f64::from(code)),
        }
    }

    /// The frequency in use, Hz.
    pub fn freq_hz(&self) -> f64 {
        self.freq_hz
    }
    /// Frequency correction in use, dB (true minus indicated).
    pub fn correction_db(&self) -> f64 {
        self.correction_db
    }
    /// Total offset in use, dB.
    pub fn offset_db(&self) -> f64 {
        self.offset_db
    }
    /// The ADC front end.
    pub fn adc(&self) -> &Adc {
        &self.adc
    }
    /// The detector model.
    pub fn detector(&self) -> &dyn Detector {
        self.detector.as_ref()
    }
    /// Flags that hold for every reading at this set-up (frequency outside the table).
    pub fn fixed_flags(&self) -> Flags {
        self.fixed_flags
    }

    /// The true level at the detector input for what the curve indicates: the curve was
    /// taken at the reference frequency, and the frequency correction (true minus
    /// indicated) makes it the level actually there, the one the safe input limits.
    fn detector_input_dbm(&self, indicated_dbm: f64) -> f64 {
        indicated_dbm + self.correction_db
    }

    /// Reference-plane dBm for a detector-input dBm.
    pub fn to_reference(&self, detector_dbm: f64) -> f64 {
        detector_dbm + self.correction_db + self.offset_db
    }

    /// The calibrated span at the reference plane, (lowest, highest) dBm.
    pub fn span_dbm(&self) -> (f64, f64) {
        let (lo, hi) = self.span_dbm;
        (self.to_reference(lo), self.to_reference(hi))
    }

    /// The calibrated span at the detector input, (lowest, highest) dBm: the calibrated
    /// levels, widened to where the model reads the end points.
    pub fn detector_span_dbm(&self) -> (f64, f64) {
        self.span_dbm
    }

    /// The count that a reference-plane level would read (for simulation and resolution).
    pub fn counts_for(&self, reference_dbm: f64) -> f64 {
        let detector_dbm = reference_dbm - self.correction_db - self.offset_db;
        self.adc.counts(self.detector.volts_at(detector_dbm))
    }

    /// Resolution at a reference-plane level: dB per ADC count.
    pub fn db_per_count(&self, reference_dbm: f64) -> f64 {
        let counts = self.counts_for(reference_dbm);
        let step = |c: f64| self.detector.dbm_at(self.adc.volts(c));
        (step(counts + 0.5) - step(counts - 0.5)).abs()
    }

    /// Calibrates one (possibly fractional) count through the exact model.
    pub fn reading(&self, counts: f64) -> Reading {
        let volts = self.adc.volts(counts);
        if counts > self.adc.full_scale() {
            return Reading {
                counts,
                volts,
                detector_dbm: f64::NAN,
                dbm: f64::NAN,
                flags: self.fixed_flags | Flags::OVER_FULL_SCALE,
            };
        }
        let mut flags = self.fixed_flags | self.range_flags(volts);
        if self.adc.is_clipped(counts) {
            flags |= Flags::ADC_CLIP;
        }
        let (span_lo, _) = self.span_dbm;
        let detector_dbm = if flags.contains(Flags::BELOW_SPAN) {
            span_lo
        } else {
            self.detector.dbm_at(volts)
        };
        let dbm = self.to_reference(detector_dbm);
        if self
            .limits
            .detector_max_dbm
            .is_some_and(|max| self.detector_input_dbm(detector_dbm) > max)
        {
            flags |= Flags::OVER_DETECTOR_MAX;
        }
        if self.limits.reference_max_dbm.is_some_and(|max| dbm > max) {
            flags |= Flags::OVER_RATED;
        }
        Reading {
            counts,
            volts,
            detector_dbm,
            dbm,
            flags,
        }
    }

    fn range_flags(&self, volts: f64) -> Flags {
        let (at_lo, at_hi) = self.span_volts;
        // A sliver of tolerance so the span's own end points count as inside.
        let slack = 1e-9 * (at_hi - at_lo).abs();
        let rising = at_hi > at_lo;
        let below = if rising {
            volts < at_lo - slack
        } else {
            volts > at_lo + slack
        };
        let above = if rising {
            volts > at_hi + slack
        } else {
            volts < at_hi - slack
        };
        if below {
            Flags::BELOW_SPAN
        } else if above {
            Flags::ABOVE_SPAN
        } else {
            Flags::empty()
        }
    }
}
