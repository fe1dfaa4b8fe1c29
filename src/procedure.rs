//! The calibration procedure at the bench that turns applied levels into a profile. It
//! owns the settle test (a moving window whose spread and slope must both be small), the
//! averaging of a settled level, the session of measured points and frequency-correction
//! entries, the fits and warnings shown after each point, and the profile written at the
//! end. No terminal or serial I/O: samples come in, text and profiles go out.

use std::collections::VecDeque;

use thiserror::Error;

use crate::adc::Adc;
use crate::calibration::Calibration;
use crate::detector::thermal::ordered_at;
use crate::detector::{ordered_points, CalPoint, ModelError, ModelKind, PointU};
use crate::maths::numeric::fit_line;
use crate::profile::raw::{
    FreqValue, RawAdc, RawFreqPoint, RawFreqTable, RawModel, RawPoint, RawProfile,
};
use crate::profile::{parse_profile, render_profile, Profile, ProfileError};
use crate::stats::{Averaging, CountMoments};
use crate::units::{format_frequency, parse_level, Level, UnitError, CELSIUS_ZERO_K};

/// When a level counts as settled.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SettleRule {
    /// The moving window, seconds.
    pub window_s: f64,
    /// Largest standard deviation in the window, counts (or 0.1 % of the mean if larger).
    pub max_std_counts: f64,
    /// Largest slope in the window, counts per second (or 0.2 % of the mean per second).
    pub max_slope: f64,
    /// How long to wait before giving up, seconds.
    pub timeout_s: f64,
}

impl Default for SettleRule {
    fn default() -> Self {
        SettleRule {
            window_s: 0.5,
            max_std_counts: 2.0,
            max_slope: 2.0,
            timeout_s: 10.0,
        }
    }
}

/// Why a measurement gave no point.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum MeasureError {
    /// The counts kept moving.
    #[error(
        "the reading did not settle within {timeout_s} s (last window: spread {std:.2} counts, \
         drift {slope:.2} counts/s); check that the generator is on and steady, then enter the \
         level again"
    )]
    NeverSettled {
        /// The timeout.
        timeout_s: f64,
        /// The last window's standard deviation.
        std: f64,
        /// The last window's slope.
        slope: f64,
    },
    /// The source stopped sending.
    #[error("the source stopped sending samples before the level was measured")]
    NoSamples,
    /// The watcher asked to stop before the level was measured.
    #[error("measurement cancelled: nothing was added")]
    Cancelled,
}

/// How far a measurement has got, for showing while it runs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Progress {
    /// Samples read so far, settling and averaging together.
    pub samples: u64,
    /// Source time since the first sample, seconds.
    pub elapsed_s: f64,
    /// True once the level has settled and is being averaged.
    pub settled: bool,
}

/// A settled, averaged level.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Measured {
    /// Mean counts.
    pub counts: f64,
    /// Standard deviation of the counts.
    pub std_counts: f64,
    /// Samples averaged.
    pub samples: u64,
    /// The board's temperature over them, °C: the sensor's mean when the stream carries
    /// it, else one typed for the points, else unknown.
    pub temp_c: Option<f64>,
}

/// Waits for `samples` (time in seconds, counts) to settle under `rule`, then averages
/// them over `averaging`.
pub fn measure(
    samples: impl IntoIterator<Item = (f64, f64)>,
    rule: &SettleRule,
    averaging: Averaging,
) -> Result<Measured, MeasureError> {
    measure_watched(samples, rule, averaging, |_| true)
}

/// [`measure`], telling `watch` the progress after every sample; when `watch` answers
/// false the measurement stops with [`MeasureError::Cancelled`].
pub fn measure_watched(
    samples: impl IntoIterator<Item = (f64, f64)>,
    rule: &SettleRule,
    averaging: Averaging,
    mut watch: impl FnMut(&Progress) -> bool,
) -> Result<Measured, MeasureError> {
    let mut samples = samples.into_iter();
    let mut progress = Progress {
        samples: 0,
        elapsed_s: 0.0,
        settled: false,
    };
    let mut start = None;
    let mut tick = |t: f64, settled: bool| {
        let t0 = *start.get_or_insert(t);
        progress.samples += 1;
        progress.elapsed_s = t - t0;
        progress.settled = settled;
        if watch(&progress) {
            Ok(())
        } else {
            Err(MeasureError::Cancelled)
        }
    };
    settle(&mut samples, rule, &mut tick)?;
    average(samples, averaging, &mut tick)
}

/// Reads `samples` until the moving window passes `rule`.
fn settle(
    samples: &mut impl Iterator<Item = (f64, f64)>,
    rule: &SettleRule,
    tick: &mut impl FnMut(f64, bool) -> Result<(), MeasureError>,
) -> Result<(), MeasureError> {
    let mut window: VecDeque<(f64, f64)> = VecDeque::new();
    let mut start = None;
    let mut last = (f64::NAN, f64::NAN);
    loop {
        let Some((t, c)) = samples.next() else {
            return Err(MeasureError::NoSamples);
        };
        tick(t, false)?;
        let t0 = *start.get_or_insert(t);
        window.push_back((t, c));
        while window
            .front()
            .is_some_and(|(old, _)| t - old > rule.window_s)
        {
            window.pop_front();
        }
        let covered = window
            .front()
            .is_some_and(|(old, _)| t - old >= rule.window_s * 0.98);
        if covered {
            let (std, slope) = spread_and_slope(&window);
            last = (std, slope);
            let mean = window.iter().map(|(_, c)| c).sum::<f64>() / window.len() as f64;
            if std <= rule.max_std_counts.max(1e-3 * mean)
                && slope.abs() <= rule.max_slope.max(2e-3 * mean)
            {
                return Ok(());
            }
        }
        if t - t0 > rule.timeout_s {
            return Err(MeasureError::NeverSettled {
                timeout_s: rule.timeout_s,
                std: last.0,
                slope: last.1,
            });
        }
    }
}

fn spread_and_slope(window: &VecDeque<(f64, f64)>) -> (f64, f64) {
    let (t, c): (Vec<f64>, Vec<f64>) = window.iter().copied().unzip();
    let n = c.len() as f64;
    let mean = c.iter().sum::<f64>() / n;
    let std = (c.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0).max(1.0)).sqrt();
    let slope = fit_line(&t, &c).map_or(0.0, |l| l.slope);
    (std, slope)
}

/// Averages a settled level in counts, through the estimator of a steady level that
/// interval rows use too ([`CountMoments`]: its mean count and spread), so that a point
/// and a recording of the same level agree (docs/calibration.md, "Means near the bottom
/// of the span").
fn average(
    samples: impl Iterator<Item = (f64, f64)>,
    averaging: Averaging,
    tick: &mut impl FnMut(f64, bool) -> Result<(), MeasureError>,
) -> Result<Measured, MeasureError> {
    let mut moments = CountMoments::default();
    let mut first = None;
    for (t, c) in samples {
        tick(t, true)?;
        let t0 = *first.get_or_insert(t);
        moments.add(c);
        let done = match averaging {
            Averaging::Off => true,
            Averaging::Samples(want) => moments.n >= want.max(1) as u64,
            Averaging::Seconds(s) => t - t0 >= s,
        };
        if done {
            return Ok(Measured {
                counts: moments.mean().unwrap_or(c),
                std_counts: moments.variance().unwrap_or(0.0).sqrt(),
                samples: moments.n,
                temp_c: None,
            });
        }
    }
    Err(MeasureError::NoSamples)
}

/// One calibration point of a session.
#[derive(Debug, Clone, PartialEq)]
pub struct SessionPoint {
    /// The level as typed.
    pub applied: String,
    /// It parsed.
    pub level: Level,
    /// What was measured.
    pub measured: Measured,
}

/// One frequency-correction entry.
#[derive(Debug, Clone, PartialEq)]
pub struct FreqEntry {
    /// Frequency, Hz.
    pub hz: f64,
    /// What was measured.
    pub measured: Measured,
}

/// Why a session could not do what was asked.
#[derive(Debug, Error)]
pub enum SessionError {
    /// A level that does not parse.
    #[error("{0}")]
    Level(#[from] UnitError),
    /// No such point.
    #[error("there is no point {0}; the points are numbered from 1 (see the table)")]
    NoPoint(usize),
    /// The frequency stage needs a curve first.
    #[error("fit a curve first: the {model} model needs at least {need} points, {got} measured")]
    NoCurve {
        /// The model.
        model: ModelKind,
        /// Points it needs.
        need: usize,
        /// Points there are.
        got: usize,
    },
    /// The points do not make a profile yet.
    #[error("{0}")]
    Profile(#[from] ProfileError),
    /// Rendering failed.
    #[error("cannot render the profile: {0}")]
    Render(#[from] toml::ser::Error),
}

/// A calibration in progress.
#[derive(Debug, Clone)]
pub struct Session {
    /// The profile fields other than the model: name, ADC, impedance, offset, limits.
    pub base: RawProfile,
    /// The model to save.
    pub model: ModelKind,
    /// The level points.
    pub points: Vec<SessionPoint>,
    /// The level used for the frequency stage, as typed, and in dBm at the detector.
    pub freq_level: Option<(String, f64)>,
    /// The frequency-correction entries.
    pub freq_entries: Vec<FreqEntry>,
}

impl Session {
    /// A session that will write `base` with the points and table it collects.
    pub fn new(base: RawProfile, model: ModelKind) -> Self {
        Session {
            base,
            model,
            points: Vec::new(),
            freq_level: None,
            freq_entries: Vec::new(),
        }
    }

    /// The impedance levels are stated at.
    pub fn ohms(&self) -> f64 {
        self.base.ohms.unwrap_or(crate::units::DEFAULT_OHMS)
    }

    /// The ADC, as the base profile states it.
    pub fn adc(&self) -> Adc {
        let a = &self.base.adc;
        Adc::new(
            a.bits.clamp(1, 24) as u8,
            a.vref,
            a.divider.unwrap_or(1.0),
            a.zero_counts.unwrap_or(0.0),
            a.clip_margin.unwrap_or(crate::adc::DEFAULT_CLIP_MARGIN),
        )
    }

    /// Parses an applied level (any accepted unit, `Vdc` included).
    pub fn parse_level(&self, text: &str) -> Result<(Level, f64), SessionError> {
        let level = parse_level(text, true)?;
        Ok((level, level.power(self.ohms()).dbm()))
    }

    /// Adds a measured point.
    pub fn add(&mut self, applied: &str, measured: Measured) -> Result<(), SessionError> {
        let (level, _) = self.parse_level(applied)?;
        self.points.push(SessionPoint {
            applied: applied.trim().to_string(),
            level,
            measured,
        });
        Ok(())
    }

    /// Replaces point `number` (from 1) with a new measurement of the same level.
    pub fn redo(&mut self, number: usize, measured: Measured) -> Result<(), SessionError> {
        let point = self
            .points
            .get_mut(number.wrapping_sub(1))
            .ok_or(SessionError::NoPoint(number))?;
        point.measured = measured;
        Ok(())
    }

    /// Removes point `number` (from 1).
    pub fn delete(&mut self, number: usize) -> Result<SessionPoint, SessionError> {
        if number == 0 || number > self.points.len() {
            return Err(SessionError::NoPoint(number));
        }
        Ok(self.points.remove(number - 1))
    }

    /// The points as the models take them.
    pub fn cal_points(&self) -> Vec<CalPoint> {
        let adc = self.adc();
        self.points
            .iter()
            .map(|p| CalPoint {
                dbm: p.level.power(self.ohms()).dbm(),
                volts: adc.volts(p.measured.counts),
                u_volts: PointU::from_counts(
                    Some(p.measured.std_counts),
                    Some(p.measured.samples),
                    adc.volts_per_count(),
                ),
            })
            .collect()
    }

    /// The profile that `model` makes from the points (without the frequency table).
    pub fn fitted(&self, model: ModelKind) -> Result<Profile, SessionError> {
        let raw = self.raw_profile(model, false);
        let text = render_profile(&raw, "")?;
        Ok(parse_profile(&text, "(calibration in progress)")?)
    }

    /// The board temperatures of the points, K, when every point has one.
    pub fn kelvins(&self) -> Option<Vec<f64>> {
        self.points
            .iter()
            .map(|p| p.measured.temp_c.map(|c| c + CELSIUS_ZERO_K))
            .collect()
    }

    /// The points taken without a board temperature, numbered from 1.
    pub fn untagged(&self) -> Vec<usize> {
        (1..=self.points.len())
            .filter(|&n| self.points[n - 1].measured.temp_c.is_none())
            .collect()
    }

    /// Checks the points' order within each calibration set (all points one set
    /// without temperatures): a level may repeat in another set.
    fn order_check(&self) -> Result<(), ModelError> {
        let points = self.cal_points();
        match self.kelvins() {
            Some(kelvins) if !points.is_empty() => {
                ordered_at(&points, &kelvins, ModelKind::Table).map(|_| ())
            }
            _ => ordered_points(&points, ModelKind::Table).map(|_| ()),
        }
    }

    /// Warnings about the points: order, clip, coarse resolution.
    pub fn warnings(&self) -> Vec<String> {
        let mut warnings = Vec::new();
        let adc = self.adc();
        if let Err(
            ModelError::NotMonotone { index, .. }
            | ModelError::DuplicateLevel { second: index, .. },
        ) = self.order_check()
        {
            warnings.push(format!(
                "point {} ({}) is not in order with the rest: the counts must rise (or fall) steadily with level; redo or delete it",
                index + 1,
                self.points[index].applied
            ));
        }
        for (i, p) in self.points.iter().enumerate() {
            if adc.is_clipped(p.measured.counts) {
                warnings.push(format!(
                    "point {} ({}) is at ADC clip: add attenuation or delete it",
                    i + 1,
                    p.applied
                ));
            }
        }
        if let Ok(profile) = self.fitted(self.model) {
            let cal = Calibration::new(&profile, None, 0.0);
            for (i, p) in self.points.iter().enumerate() {
                let step = cal.db_per_count(cal.to_reference(p.level.power(self.ohms()).dbm()));
                if step > 0.25 {
                    warnings.push(format!(
                        "point {} ({}) reads only {:.1} counts: {step:.2} dB per count is coarse; average longer or raise the level",
                        i + 1,
                        p.applied,
                        p.measured.counts
                    ));
                }
            }
        }
        warnings
    }

    /// Starts the frequency stage at `level`.
    pub fn start_frequency_stage(&mut self, level_text: &str) -> Result<(), SessionError> {
        let (_, dbm) = self.parse_level(level_text)?;
        self.fitted(self.model).map_err(|_| SessionError::NoCurve {
            model: self.model,
            need: self.model.min_points(),
            got: self.points.len(),
        })?;
        self.freq_level = Some((level_text.trim().to_string(), dbm));
        Ok(())
    }

    /// Adds a frequency entry; returns its correction in dB (applied minus indicated).
    pub fn add_frequency(&mut self, hz: f64, measured: Measured) -> Result<f64, SessionError> {
        self.freq_entries.retain(|e| e.hz != hz);
        self.freq_entries.push(FreqEntry { hz, measured });
        self.freq_entries.sort_by(|a, b| a.hz.total_cmp(&b.hz));
        self.correction_at(hz)
    }

    /// The correction the entry at `hz` gives, dB.
    pub fn correction_at(&self, hz: f64) -> Result<f64, SessionError> {
        let (_, level) = self.freq_level.clone().ok_or(SessionError::NoCurve {
            model: self.model,
            need: 0,
            got: 0,
        })?;
        let entry = self
            .freq_entries
            .iter()
            .find(|e| e.hz == hz)
            .ok_or(SessionError::NoPoint(0))?;
        let profile = self.fitted(self.model)?;
        // The detector-input level the curve alone gives: no correction, no offset.
        let indicated = Calibration::new(&profile, None, 0.0)
            .reading(entry.measured.counts)
            .detector_dbm;
        Ok(level - indicated)
    }

    /// The whole profile as it would be saved.
    pub fn profile_text(&self, header: &str) -> Result<String, SessionError> {
        let raw = self.raw_profile(self.model, true);
        let text = render_profile(&raw, header)?;
        parse_profile(&text, "(calibration to save)")?;
        Ok(text)
    }

    /// The points in the `fit` CSV format, with the settings `fit` needs to repeat the
    /// fit in its `#` lines (see [`crate::points::read_settings`]).
    pub fn points_csv(&self) -> String {
        let adc = &self.base.adc;
        let mut out = String::from("# points measured by dbtrail calibrate\n");
        out.push_str(&format!(
            "# adc.bits = {}\n# adc.vref = {}\n",
            adc.bits, adc.vref
        ));
        out.push_str(&format!("# adc.divider = {}\n", adc.divider.unwrap_or(1.0)));
        out.push_str(&format!(
            "# adc.zero_counts = {}\n",
            adc.zero_counts.unwrap_or(0.0)
        ));
        let reference = self.base.reference_frequency.hz().unwrap_or(0.0);
        out.push_str(&format!(
            "# reference_frequency = {}\n",
            format_frequency(reference)
        ));
        out.push_str(&format!("# model.kind = {}\n", self.model.name()));
        if let (ModelKind::Table, Some(axis)) = (self.model, &self.base.model.axis) {
            out.push_str(&format!("# model.axis = {axis}\n"));
        }
        if let (ModelKind::Diode, Some(kelvin)) = (self.model, self.base.model.temperature) {
            out.push_str(&format!("# model.temperature = {kelvin}\n"));
        }
        out.push_str(&format!("# ohms = {}\n", self.ohms()));
        let tagged = self.points.iter().any(|p| p.measured.temp_c.is_some());
        out.push_str("applied,counts,std_counts,samples");
        out.push_str(if tagged { ",temp_c\n" } else { "\n" });
        for p in &self.points {
            let m = &p.measured;
            out.push_str(&format!(
                "{},{},{},{}",
                p.applied, m.counts, m.std_counts, m.samples
            ));
            match (tagged, m.temp_c) {
                (true, Some(c)) => out.push_str(&format!(",{c}\n")),
                (true, None) => out.push_str(",\n"),
                (false, _) => out.push('\n'),
            }
        }
        out
    }

    fn raw_profile(&self, model: ModelKind, with_table: bool) -> RawProfile {
        let mut raw = self.base.clone();
        let base_model = &self.base.model;
        raw.model = RawModel {
            kind: model.name().into(),
            axis: if model == ModelKind::Table {
                base_model.axis.clone()
            } else {
                None
            },
            temperature: if model == ModelKind::Diode {
                base_model.temperature
            } else {
                None
            },
            n: None,
            vl: None,
            xti: if model == ModelKind::Diode {
                base_model.xti
            } else {
                None
            },
            eg_ev: if model == ModelKind::Diode {
                base_model.eg_ev
            } else {
                None
            },
            slope: None,
            intercept: None,
            points: self
                .points
                .iter()
                .map(|p| RawPoint {
                    applied: p.applied.clone(),
                    counts: p.measured.counts,
                    std_counts: Some(p.measured.std_counts),
                    samples: Some(p.measured.samples),
                    temp_c: p.measured.temp_c,
                })
                .collect(),
        };
        if with_table && !self.freq_entries.is_empty() {
            raw.frequency_correction = Some(RawFreqTable {
                kind: None,
                points: self.frequency_rows(),
            });
        }
        if !with_table {
            return raw;
        }
        if let Ok(profile) = self.fitted(model) {
            raw.model.slope = profile.model.param("slope");
            raw.model.intercept = profile.model.param("intercept");
            raw.model.n = profile.model.param("n");
            raw.model.vl = profile.model.param("vl");
        }
        raw
    }

    /// The correction rows, with 0 dB at the reference frequency when it was not measured
    /// (the curve itself was taken there).
    fn frequency_rows(&self) -> Vec<RawFreqPoint> {
        let reference = self.base.reference_frequency.hz().unwrap_or(0.0);
        let mut rows: Vec<(f64, f64)> = self
            .freq_entries
            .iter()
            .filter_map(|e| {
                self.correction_at(e.hz)
                    .ok()
                    .map(|c| (e.hz, (c * 1000.0).round() / 1000.0))
            })
            .collect();
        if !rows.iter().any(|(hz, _)| *hz == reference) {
            rows.push((reference, 0.0));
        }
        rows.sort_by(|a, b| a.0.total_cmp(&b.0));
        rows.into_iter()
            .map(|(hz, db)| RawFreqPoint {
                freq: FreqValue::Text(format_frequency(hz)),
                db,
            })
            .collect()
    }
}

/// ADC settings with only the resolution and the reference given: no divider, the zero
/// not yet measured, the default clip margin.
pub fn adc_settings(bits: i64, vref: f64) -> RawAdc {
    RawAdc {
        bits,
        vref,
        divider: None,
        zero_counts: None,
        clip_margin: None,
    }
}

/// A base profile from the ADC settings given on the command line.
pub fn base_profile(name: &str, adc: RawAdc, ohms: f64, reference_hz: f64) -> RawProfile {
    RawProfile {
        name: name.to_string(),
        description: None,
        ohms: Some(ohms),
        reference_frequency: FreqValue::Hz(reference_hz),
        adc,
        model: RawModel {
            kind: "table".into(),
            axis: None,
            temperature: None,
            n: None,
            vl: None,
            xti: None,
            eg_ev: None,
            slope: None,
            intercept: None,
            points: Vec::new(),
        },
        frequency_correction: None,
        offset: None,
        limits: None,
        uncertainty: None,
        temperature: None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn steady(level: f64, from: f64, n: usize) -> impl Iterator<Item = (f64, f64)> {
        (0..n).map(move |i| {
            (
                from + i as f64 * 0.001,
                level + if i % 2 == 0 { 0.5 } else { -0.5 },
            )
        })
    }

    #[test]
    fn a_drifting_source_never_settles_and_says_so() {
        let drifting = (0..20_000).map(|i| (f64::from(i) * 0.001, 1000.0 + f64::from(i) * 0.02));
        let err = measure(drifting, &SettleRule::default(), Averaging::Samples(100)).unwrap_err();
        assert!(matches!(err, MeasureError::NeverSettled { .. }));
        let text = err.to_string();
        assert!(
            text.contains("did not settle within 10 s") && text.contains("counts/s"),
            "{text}"
        );
    }

    #[test]
    fn a_step_settles_after_the_step_and_averages_the_new_level() {
        // The step comes before the first window is full, as when the generator is still
        // being set while the measurement starts.
        let before = steady(800.0, 0.0, 300);
        let after = steady(1200.0, 0.3, 5000);
        let m = measure(
            before.chain(after),
            &SettleRule::default(),
            Averaging::Samples(1000),
        )
        .unwrap();
        assert!((m.counts - 1200.0).abs() < 1e-9, "{m:?}");
        assert_eq!(m.samples, 1000);
        assert!((m.std_counts - 0.5).abs() < 0.01);
    }

    #[test]
    fn an_exponential_approach_settles_once_it_is_flat() {
        let approach = (0..5000).map(|i| {
            let t = f64::from(i) * 0.001;
            (t, 1500.0 * (1.0 - (-t / 0.1).exp()))
        });
        let m = measure(approach, &SettleRule::default(), Averaging::Seconds(0.5)).unwrap();
        assert!((m.counts - 1500.0).abs() < 1.0, "{m:?}");
    }

    fn session() -> Session {
        let base = base_profile("t", adc_settings(12, 4.095), 50.0, 10e6);
        Session::new(base, ModelKind::Log)
    }

    fn at(counts: f64) -> Measured {
        Measured {
            counts,
            std_counts: 0.5,
            samples: 100,
            temp_c: None,
        }
    }

    #[test]
    fn a_point_out_of_order_or_at_clip_is_named_in_the_warnings() {
        let mut s = session();
        for (level, counts) in [("-60dBm", 500.0), ("-30dBm", 1250.0), ("0dBm", 2000.0)] {
            s.add(level, at(counts)).unwrap();
        }
        assert!(s.warnings().is_empty(), "{:?}", s.warnings());
        s.add("-45dBm", at(1900.0)).unwrap();
        let warnings = s.warnings();
        assert!(
            warnings
                .iter()
                .any(|w| w.contains("(-45dBm) is not in order")),
            "{warnings:?}"
        );
        s.delete(4).unwrap();
        s.add("10dBm", at(4094.0)).unwrap();
        assert!(s
            .warnings()
            .iter()
            .any(|w| w.contains("(10dBm) is at ADC clip")));
        assert!(matches!(
            s.add("3 parsecs", at(1.0)),
            Err(SessionError::Level(_))
        ));
        assert_eq!(s.points.len(), 4, "a refused entry changes nothing");
    }

    // Source: worked example — a log-amp of 25 mV/dB on 1 mV counts; at 100 MHz the
    // detector gives 1900 counts for an applied −3 dBm, where the curve says −4 dBm, so
    // the correction there is +1 dB.
    #[test]
    fn frequency_entries_give_applied_minus_indicated() {
        let mut s = session();
        for (level, counts) in [("-60dBm", 500.0), ("-30dBm", 1250.0), ("0dBm", 2000.0)] {
            s.add(level, at(counts)).unwrap();
        }
        s.start_frequency_stage("-3dBm").unwrap();
        let correction = s.add_frequency(100e6, at(1900.0)).unwrap();
        assert!((correction - 1.0).abs() < 1e-9, "{correction}");
        let text = s.profile_text("test").unwrap();
        assert!(
            text.contains("freq = \"100MHz\"") && text.contains("freq = \"10MHz\""),
            "{text}"
        );
    }

    #[test]
    fn running_out_of_samples_is_an_error() {
        assert_eq!(
            measure(
                steady(5.0, 0.0, 10),
                &SettleRule::default(),
                Averaging::Samples(5)
            ),
            Err(MeasureError::NoSamples)
        );
    }

    // Source: the rule in measure_watched's doc: a watcher answering false stops the
    // measurement with Cancelled, before another sample is read.
    #[test]
    fn a_watcher_that_says_stop_cancels_the_measurement_at_once() {
        let mut read = 0;
        let counted = steady(1000.0, 0.0, 5000).inspect(|_| read += 1);
        let mut seen = Vec::new();
        let result = measure_watched(
            counted,
            &SettleRule::default(),
            Averaging::Samples(100),
            |p| {
                seen.push(*p);
                p.samples < 50
            },
        );
        assert_eq!(result, Err(MeasureError::Cancelled));
        assert_eq!(read, 50);
        assert_eq!(seen.last().map(|p| p.samples), Some(50));
    }

    // Source: the settle rule's default window of 0.5 s: steady samples at 1 ms settle
    // after the window fills, and the progress then says "settled" up to the last of the
    // 100 averaged samples.
    #[test]
    fn progress_counts_every_sample_and_turns_settled_after_the_window() {
        let mut seen = Vec::new();
        let m = measure_watched(
            steady(1000.0, 0.0, 5000),
            &SettleRule::default(),
            Averaging::Samples(100),
            |p| {
                seen.push(*p);
                true
            },
        )
        .unwrap();
        assert_eq!(m.samples, 100);
        let first_settled = seen.iter().position(|p| p.settled).unwrap();
        assert!(
            (seen[first_settled - 1].elapsed_s - 0.49).abs() < 0.011,
            "{:?}",
            seen[first_settled - 1]
        );
        assert_eq!(seen.len() - first_settled, 100);
        assert!(seen.windows(2).all(|w| w[1].samples == w[0].samples + 1));
    }
}
