//! The log-amp model: the output is a straight line in dB, V = slope·(P_dBm − intercept),
//! with slope and intercept fitted by least squares. Each point's conformance error (how
//! far the real curve bends away from the line) is reported in dB.

use super::{ordered_points, CalPoint, Detector, ModelError, ModelKind};
use crate::numeric::fit_line;

/// A logarithmic-amplifier detector.
#[derive(Debug, Clone, PartialEq)]
pub struct LogAmpDetector {
    slope: f64,
    intercept: f64,
    span: (f64, f64),
}

impl LogAmpDetector {
    /// A detector with known slope (V/dB, either sign, not zero) and intercept (dBm), valid
    /// over `span` dBm.
    pub fn new(slope: f64, intercept: f64, span: (f64, f64)) -> Self {
        LogAmpDetector {
            slope,
            intercept,
            span,
        }
    }

    /// Fits slope and intercept to at least three points by least squares of volts on dBm.
    pub fn fit(points: &[CalPoint]) -> Result<Self, ModelError> {
        let sorted = ordered_points(points, ModelKind::Log)?;
        let dbm: Vec<f64> = sorted.iter().map(|p| p.dbm).collect();
        let volts: Vec<f64> = sorted.iter().map(|p| p.volts).collect();
        let line = fit_line(&dbm, &volts).ok_or_else(|| ModelError::FitFailed {
            model: ModelKind::Log,
            reason: "the applied levels have no spread".into(),
        })?;
        Ok(LogAmpDetector {
            slope: line.slope,
            intercept: -line.intercept / line.slope,
            span: (dbm[0], dbm[dbm.len() - 1]),
        })
    }

    /// Slope in volts per dB.
    pub fn slope(&self) -> f64 {
        self.slope
    }
    /// Intercept in dBm: the level where the fitted line reaches 0 V.
    pub fn intercept(&self) -> f64 {
        self.intercept
    }
}

impl Detector for LogAmpDetector {
    fn kind(&self) -> ModelKind {
        ModelKind::Log
    }
    fn dbm_at(&self, volts: f64) -> f64 {
        volts / self.slope + self.intercept
    }
    fn volts_at(&self, dbm: f64) -> f64 {
        self.slope * (dbm - self.intercept)
    }
    fn span_dbm(&self) -> (f64, f64) {
        self.span
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::detector::residuals_db;

    // Source: worked example — points made exactly on V = 0.025·(P + 84) must return that
    // line with zero conformance error.
    #[test]
    fn exact_fit_on_linear_data() {
        let points: Vec<CalPoint> = (-60..=0)
            .step_by(10)
            .map(|p| CalPoint {
                dbm: f64::from(p),
                volts: 0.025 * (f64::from(p) + 84.0),
            })
            .collect();
        let det = LogAmpDetector::fit(&points).unwrap();
        assert!((det.slope() - 0.025).abs() < 1e-14);
        assert!((det.intercept() + 84.0).abs() < 1e-11);
        assert!(residuals_db(&det, &points).iter().all(|e| e.abs() < 1e-11));
        assert_eq!(det.span_dbm(), (-60.0, 0.0));
    }

    // Source: worked example — a curve that bends by a known amount. With points at −1, 0, +1
    // (in units of 10 dB) on V = P + b·P², least squares gives the line through their mean,
    // so the model reads −2b/3 low at the middle and b/3 high at the ends (in units of 10 dB).
    #[test]
    fn conformance_errors_on_bent_data() {
        let b = 0.3;
        let points: Vec<CalPoint> = [-1.0, 0.0, 1.0]
            .iter()
            .map(|&u: &f64| CalPoint {
                dbm: 10.0 * u - 30.0,
                volts: 1.0 + 0.04 * (u + b * u * u),
            })
            .collect();
        let det = LogAmpDetector::fit(&points).unwrap();
        let errors = residuals_db(&det, &points);
        let want = [10.0 * b / 3.0, -20.0 * b / 3.0, 10.0 * b / 3.0];
        for (got, want) in errors.iter().zip(want) {
            assert!((got - want).abs() < 1e-9, "{got} vs {want}");
        }
    }
}
