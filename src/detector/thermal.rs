//! Detector models across temperature: calibration sets taken at several board
//! temperatures, the model at any temperature between them, and whether a temperature
//! lies outside what was calibrated.
//!
//! A diode carries its one set of parameters to any temperature by its saturation law; a
//! table or log-amp model has one curve per calibrated temperature, and between two of
//! them reads the dBm of each and takes the mean weighted linearly in temperature. For
//! the log-amp line that keeps it a line whose intercept and 1/slope move linearly with
//! temperature.

use std::sync::Arc;

use super::diode::DiodeDetector;
use super::{CalPoint, Detector, ModelKind};
use crate::maths::numeric::solve_bracketed;

pub use super::{ordered_at, temperature_groups, temperature_span, SET_GAP_K};

/// How far beyond its calibrated temperatures a diode's saturation law is trusted, K.
/// A choice: over ±10 K the law's XTI and EG move the reading by a few tenths of a dB at
/// most in the square-law region, an error the budget's temperature term can still hold.
pub const DIODE_LAW_REACH_K: f64 = 10.0;

/// One calibrated temperature's curve, and the span its readings are flagged against.
#[derive(Debug, Clone)]
pub struct Curve {
    /// The board temperature the curve was taken at, K.
    pub kelvin: f64,
    /// The curve.
    pub detector: Arc<dyn Detector>,
    /// Detector dBm: the calibrated levels, widened to where the curve reads its own
    /// lowest and highest points (so that no point reads as outside its own span).
    pub span_dbm: (f64, f64),
}

impl Curve {
    /// The curve of `detector`, built from `points` (taken at `kelvin`).
    pub fn new(kelvin: f64, detector: Arc<dyn Detector>, points: &[CalPoint]) -> Self {
        let span_dbm = widened_span(detector.as_ref(), points);
        Curve {
            kelvin,
            detector,
            span_dbm,
        }
    }
}

/// The span of `detector`, widened to where it reads the lowest and highest of `points`.
pub fn widened_span(detector: &dyn Detector, points: &[CalPoint]) -> (f64, f64) {
    let (lo, hi) = detector.span_dbm();
    let by_level = |a: &&CalPoint, b: &&CalPoint| a.dbm.total_cmp(&b.dbm);
    let reads = |p: Option<&CalPoint>| {
        p.map(|p| detector.dbm_at(p.volts))
            .filter(|dbm| dbm.is_finite())
    };
    let lowest = reads(points.iter().min_by(by_level)).unwrap_or(lo);
    let highest = reads(points.iter().max_by(by_level)).unwrap_or(hi);
    (lo.min(lowest), hi.max(highest))
}

/// A detector model across temperature.
#[derive(Debug, Clone)]
pub enum ThermalModel {
    /// A diode, carried from its calibration temperature by its saturation law.
    Diode {
        /// The diode at its reference temperature (its `kelvin`).
        detector: DiodeDetector,
        /// Its span, detector dBm.
        span_dbm: (f64, f64),
        /// The temperatures it is trusted at, K: the calibrated ones widened by
        /// [`DIODE_LAW_REACH_K`].
        range_k: (f64, f64),
    },
    /// Curves taken at one temperature each, coldest first.
    Curves {
        /// The curves.
        curves: Vec<Curve>,
        /// The temperature read when none is known: the first calibration set's, K.
        reference_k: f64,
        /// The temperatures the points were taken at, lowest to highest, K.
        range_k: (f64, f64),
    },
}

/// The model at one temperature.
#[derive(Debug, Clone)]
pub struct AtTemperature {
    /// The curve there.
    pub detector: Arc<dyn Detector>,
    /// Its span, detector dBm.
    pub span_dbm: (f64, f64),
    /// The temperature lay outside the calibrated range: for curves, the nearest end's
    /// curve was used; a diode's law was carried beyond its reach.
    pub outside: bool,
}

impl ThermalModel {
    /// A diode calibrated at the temperatures `kelvins` (those of its points; its own
    /// when none is given).
    pub fn diode(detector: DiodeDetector, span_dbm: (f64, f64), kelvins: &[f64]) -> Self {
        let (lo, hi) = match kelvins.is_empty() {
            true => (detector.kelvin(), detector.kelvin()),
            false => temperature_span(kelvins),
        };
        ThermalModel::Diode {
            detector,
            span_dbm,
            range_k: (lo - DIODE_LAW_REACH_K, hi + DIODE_LAW_REACH_K),
        }
    }

    /// Curves taken at distinct temperatures (sorted here) from points taken over
    /// `range_k`, read at `reference_k` when no temperature is known. None without any
    /// curve.
    pub fn curves(mut curves: Vec<Curve>, reference_k: f64, range_k: (f64, f64)) -> Option<Self> {
        if curves.is_empty() {
            return None;
        }
        curves.sort_by(|a, b| a.kelvin.total_cmp(&b.kelvin));
        Some(ThermalModel::Curves {
            curves,
            reference_k,
            range_k,
        })
    }

    /// The temperatures readings are calibrated for, K.
    pub fn range_k(&self) -> (f64, f64) {
        match self {
            ThermalModel::Diode { range_k, .. } | ThermalModel::Curves { range_k, .. } => *range_k,
        }
    }

    /// The temperature of the model as calibrated, K: what an uncompensated reading
    /// assumes.
    pub fn reference_kelvin(&self) -> f64 {
        match self {
            ThermalModel::Diode { detector, .. } => detector.kelvin(),
            ThermalModel::Curves { reference_k, .. } => *reference_k,
        }
    }

    /// How much a reading at the detector-input level `detector_dbm` moves per kelvin of
    /// error in the board temperature `kelvin`, dB/K: the volts that level gives there,
    /// read through the model half a kelvin either side.
    pub fn db_per_kelvin(&self, detector_dbm: f64, kelvin: f64) -> f64 {
        let volts = self.at_kelvin(kelvin).detector.volts_at(detector_dbm);
        let read = |k: f64| self.at_kelvin(k).detector.dbm_at(volts);
        read(kelvin + 0.5) - read(kelvin - 0.5)
    }

    /// The model at `kelvin`.
    pub fn at_kelvin(&self, kelvin: f64) -> AtTemperature {
        let (lo, hi) = self.range_k();
        let outside = !(lo..=hi).contains(&kelvin);
        match self {
            ThermalModel::Diode {
                detector, span_dbm, ..
            } => AtTemperature {
                detector: Arc::new(detector.at_kelvin(kelvin)),
                span_dbm: *span_dbm,
                outside,
            },
            ThermalModel::Curves { curves, .. } => {
                let mut at = between(curves, kelvin.clamp(lo, hi));
                at.outside = outside;
                at
            }
        }
    }
}

/// The curves blended at `kelvin`, which lies within their temperatures.
fn between(curves: &[Curve], kelvin: f64) -> AtTemperature {
    let warm = curves
        .iter()
        .position(|c| c.kelvin >= kelvin)
        .unwrap_or(curves.len() - 1);
    let on = |c: &Curve| AtTemperature {
        detector: Arc::clone(&c.detector),
        span_dbm: c.span_dbm,
        outside: false,
    };
    if warm == 0 || curves[warm].kelvin == kelvin {
        return on(&curves[warm]);
    }
    let (cold, warm) = (&curves[warm - 1], &curves[warm]);
    let w = (kelvin - cold.kelvin) / (warm.kelvin - cold.kelvin);
    let lerp = |a: f64, b: f64| a + w * (b - a);
    let span_dbm = (
        lerp(cold.span_dbm.0, warm.span_dbm.0),
        lerp(cold.span_dbm.1, warm.span_dbm.1),
    );
    AtTemperature {
        detector: Arc::new(Blend {
            cold: Arc::clone(&cold.detector),
            warm: Arc::clone(&warm.detector),
            w,
            span_dbm,
        }),
        span_dbm,
        outside: false,
    }
}

/// Two curves' readings, weighted `1 − w` and `w`.
#[derive(Debug)]
struct Blend {
    cold: Arc<dyn Detector>,
    warm: Arc<dyn Detector>,
    w: f64,
    span_dbm: (f64, f64),
}

impl Blend {
    fn mix(&self, cold: f64, warm: f64) -> f64 {
        cold + self.w * (warm - cold)
    }
}

impl Detector for Blend {
    fn kind(&self) -> ModelKind {
        self.cold.kind()
    }

    fn dbm_at(&self, volts: f64) -> f64 {
        self.mix(self.cold.dbm_at(volts), self.warm.dbm_at(volts))
    }

    /// Both curves run the same way, so the blend's volts for a level lie between the
    /// volts each curve gives it.
    fn volts_at(&self, dbm: f64) -> f64 {
        let (a, b) = (self.cold.volts_at(dbm), self.warm.volts_at(dbm));
        if a == b || !(a.is_finite() && b.is_finite()) {
            return self.mix(a, b);
        }
        solve_bracketed(|v| self.dbm_at(v) - dbm, a.min(b), a.max(b))
            .unwrap_or_else(|_| self.mix(a, b))
    }

    fn span_dbm(&self) -> (f64, f64) {
        self.span_dbm
    }

    /// Each curve's own uncertainty, mixed as the readings are, with the interpolation's
    /// in quadrature: a rectangular error of half-width 2·w·(1 − w)·|cold − warm| (the
    /// two curves' readings at the level). It vanishes on either curve and is half their
    /// gap midway, where a detector that moves one way with temperature can be at most
    /// that far from the straight line between them (its reading lies between the two).
    /// An estimate of this project: how far the truth bows from that line is not known
    /// from two sets alone, and a diode's bow is large (its Is rises exponentially).
    fn model_u_db(&self, detector_dbm: f64) -> Option<f64> {
        let curves = match (
            self.cold.model_u_db(detector_dbm),
            self.warm.model_u_db(detector_dbm),
        ) {
            (Some(c), Some(w)) => Some(self.mix(c, w)),
            (one, other) => one.or(other),
        }?;
        let volts = self.volts_at(detector_dbm);
        let gap = (self.cold.dbm_at(volts) - self.warm.dbm_at(volts)).abs();
        let between = 2.0 * self.w * (1.0 - self.w) * gap / 3f64.sqrt();
        Some(curves.hypot(between)).filter(|u| u.is_finite())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::detector::ModelError;

    #[test]
    fn sets_are_coldest_first_with_their_members_and_mean_temperature() {
        let groups = temperature_groups(&[310.0, 290.0, 311.0, 300.0, 290.5]);
        assert_eq!(
            groups,
            vec![(290.25, vec![1, 4]), (300.0, vec![3]), (310.5, vec![0, 2])]
        );
        // A board that drifts a little while a set is taken makes one set.
        assert_eq!(temperature_groups(&[298.0, 298.4, 299.1]).len(), 1);
    }

    #[test]
    fn a_level_may_repeat_across_temperatures_but_not_within_one() {
        let p = |dbm, volts| CalPoint::new(dbm, volts);
        let points = [p(-10.0, 0.1), p(0.0, 0.5), p(-10.0, 0.12), p(0.0, 0.55)];
        let (sorted, kelvins) =
            ordered_at(&points, &[290.0, 290.0, 310.0, 310.0], ModelKind::Table).unwrap();
        assert_eq!(kelvins, [290.0, 290.0, 310.0, 310.0]);
        assert_eq!(sorted[2].volts, 0.12);
        let twice = [p(-10.0, 0.1), p(0.0, 0.5), p(-10.0, 0.12), p(-10.0, 0.13)];
        let err = ordered_at(&twice, &[290.0, 290.0, 310.0, 310.0], ModelKind::Table).unwrap_err();
        assert!(
            matches!(
                err,
                ModelError::DuplicateLevel {
                    first: 2,
                    second: 3,
                    ..
                }
            ),
            "{err:?}"
        );
    }
}
