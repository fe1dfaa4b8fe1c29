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
use crate::detector::Detector;
use crate::profile::{Limits, Profile};
use crate::units::dbm_to_watts;

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
        /// The source was disconnected or silent for some or all of the interval.
        const GAP = 1 << 8;
        /// The source came back after a gap in this interval.
        const RECONNECT = 1 << 9;
        /// Samples were lost in this interval (dropped frames or ring overruns).
        const LOST = 1 << 10;
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
        const NAMES: [(Flags, &str); 10] = [
            (Flags::ADC_CLIP, "clip"),
            (Flags::BELOW_SPAN, "below"),
            (Flags::ABOVE_SPAN, "above"),
            (Flags::FREQ_OUTSIDE, "freq-outside"),
            (Flags::OVER_DETECTOR_MAX, "over-detector-max"),
            (Flags::OVER_RATED, "over-rated"),
            (Flags::OVER_FULL_SCALE, "over-full-scale"),
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

fn dense_watts(table: &[CodeEntry]) -> Box<[f64; TABLE_MAX_CODES as usize]> {
    let mut watts = vec![0.0; TABLE_MAX_CODES as usize];
    for (slot, entry) in watts.iter_mut().zip(table) {
        *slot = entry.watts;
    }
    watts
        .into_boxed_slice()
        .try_into()
        .expect("a vector of the table's largest length")
}

/// The largest ADC whose every code gets a precomputed reading (16 bits: 65536 entries).
pub const TABLE_MAX_CODES: u32 = 1 << 16;

/// One ADC code's reading, computed once: what the hot path needs per sample, laid out
/// so that a sample adds to a set of statistics without a branch, whether it is a value or
/// a bound (see `stats::Bound`).
#[derive(Debug, Clone, Copy, PartialEq)]
#[repr(align(32))]
pub struct CodeEntry {
    /// Reference-plane dBm, as the reading shows it (the span's low end below the span).
    pub dbm: f64,
    /// The watts interval statistics count: the value's, or its bound's; 0 for a code
    /// never counted.
    pub watts: f64,
    /// The level interval statistics count: `dbm` for a value, the span's top for an
    /// above-span code or a clipped one above it; NaN for a code never counted, which
    /// leaves the lowest and highest level unchanged.
    pub counted_dbm: f64,
    /// Its flags.
    pub flags: Flags,
    /// Its kind as one tally, [`TALLY_VALUE`], [`TALLY_AT_LEAST`], [`TALLY_AT_MOST`] or 0
    /// (never counted): one integer addition per sample counts all three kinds, each in
    /// its own 10-bit lane, for up to 1023 samples (a block of `stats::add_codes`).
    pub tally: u32,
}

/// The tally of a value (see [`CodeEntry::tally`]).
pub const TALLY_VALUE: u32 = 1;
/// The tally of a code counted at a bound the true level is at least (clip, above span).
pub const TALLY_AT_LEAST: u32 = 1 << 10;
/// The tally of a code counted at a bound the true level is at most (below span).
pub const TALLY_AT_MOST: u32 = 1 << 20;

/// (values, at least, at most) of a sum of at most 1023 tallies.
#[inline(always)]
pub fn untally(tally: u32) -> (u64, u64, u64) {
    let lane = |shift: u32| u64::from((tally >> shift) & 0x3FF);
    (lane(0), lane(10), lane(20))
}

impl CodeEntry {
    /// 1 for a value, 0 for a bound or a code never counted.
    pub fn valid(&self) -> u64 {
        untally(self.tally).0
    }
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
    table: Arc<Vec<CodeEntry>>,
    runs: Arc<CodeRuns>,
}

/// The table arranged for whole blocks of codes: when a block's lowest and highest code
/// lie in one run of counted codes with the same flags (so all values, or all bounds of
/// one way) and counted levels that move one way only, its extremes, flags and kinds are
/// those of its end codes, and only its watts need a look-up per code.
#[derive(Debug, Clone)]
pub struct CodeRuns {
    /// Each code's watts, packed densely for the summing loop, in an array as long as
    /// the largest table so that a 16-bit index needs no bounds check (only the codes'
    /// pages are touched).
    pub(crate) watts: Box<[f64; TABLE_MAX_CODES as usize]>,
    /// For each code that is counted, the last code of the run it lies in.
    run_end: Vec<Option<u32>>,
    /// Levels fall as codes rise (a detector whose output falls with power).
    falling: bool,
}

impl CodeRuns {
    fn of(table: &[CodeEntry]) -> CodeRuns {
        let values = || table.iter().filter(|e| e.tally == TALLY_VALUE);
        let falling = match (values().next(), values().next_back()) {
            (Some(first), Some(last)) => last.dbm < first.dbm,
            _ => false,
        };
        let counted = |e: &CodeEntry| !e.counted_dbm.is_nan();
        // Equal flags make equal kinds: values, or bounds of one way.
        let joins = |a: &CodeEntry, b: &CodeEntry| {
            let steady = if falling {
                b.counted_dbm <= a.counted_dbm
            } else {
                b.counted_dbm >= a.counted_dbm
            };
            counted(a) && counted(b) && a.flags == b.flags && steady
        };
        let mut run_end: Vec<Option<u32>> = (0..table.len() as u32)
            .map(|code| counted(&table[code as usize]).then_some(code))
            .collect();
        for code in (1..table.len()).rev() {
            if joins(&table[code - 1], &table[code]) {
                run_end[code - 1] = run_end[code];
            }
        }
        CodeRuns {
            watts: dense_watts(table),
            run_end,
            falling,
        }
    }

    /// The codes whose entries give the lowest and the highest level of every code from
    /// `lo` to `hi`, when those codes lie in one run.
    #[inline]
    pub fn extreme_codes(&self, lo: u32, hi: u32) -> Option<(u32, u32)> {
        let end = (*self.run_end.get(lo as usize)?)?;
        match (hi <= end, self.falling) {
            (false, _) => None,
            (true, false) => Some((lo, hi)),
            (true, true) => Some((hi, lo)),
        }
    }
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
        let span_dbm = model_span_dbm(profile, detector.as_ref());
        let span_volts = (detector.volts_at(span_dbm.0), detector.volts_at(span_dbm.1));
        let mut cal = Calibration {
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
            table: Arc::new(Vec::new()),
            runs: Arc::new(CodeRuns::of(&[])),
        };
        cal.table = Arc::new(cal.build_table());
        cal.runs = Arc::new(CodeRuns::of(&cal.table));
        cal
    }

    /// Every ADC code's reading through the exact model, for ADCs of up to 16 bits.
    fn build_table(&self) -> Vec<CodeEntry> {
        let codes = self.adc.full_scale() as u32 + 1;
        if codes > TABLE_MAX_CODES {
            return Vec::new();
        }
        // Each code is independent and a diode model's inverse takes microseconds: shared
        // out over the cores, a 12-bit table is ready before the first samples arrive. On
        // threads of its own, not the thread pool's: a replay's reader may sit in the pool
        // blocked on a silent FIFO while the table is built, and the table would wait.
        let threads = std::thread::available_parallelism().map_or(1, |n| n.get().min(8)) as u32;
        let per_thread = codes.div_ceil(threads);
        std::thread::scope(|scope| {
            let parts: Vec<_> = (0..threads)
                .map(|t| {
                    let first = t * per_thread;
                    let last = (first + per_thread).min(codes);
                    scope.spawn(move || {
                        (first..last)
                            .map(|code| self.exact_entry(code))
                            .collect::<Vec<_>>()
                    })
                })
                .collect();
            parts
                .into_iter()
                .flat_map(|part| {
                    part.join()
                        .expect("a table part computes without panicking")
                })
                .collect()
        })
    }

    fn exact_entry(&self, code: u32) -> CodeEntry {
        let r = self.reading(f64::from(code));
        let counted = Counted::of(r.flags, r.dbm, self.span_dbm().1);
        let counted_dbm = counted.dbm();
        CodeEntry {
            dbm: r.dbm,
            watts: if counted_dbm.is_nan() {
                0.0
            } else {
                dbm_to_watts(counted_dbm)
            },
            counted_dbm,
            flags: r.flags,
            tally: counted.tally(),
        }
    }

    /// The precomputed entries, one per ADC code from 0 (empty above 16 bits).
    pub fn code_table(&self) -> &[CodeEntry] {
        &self.table
    }

    /// The table arranged by runs of codes, for statistics over blocks of codes.
    pub fn code_runs(&self) -> &CodeRuns {
        &self.runs
    }

    /// The precomputed entry for an ADC code, when the table covers it.
    #[inline]
    pub fn code_entry(&self, code: u32) -> Option<&CodeEntry> {
        self.table.get(code as usize)
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
