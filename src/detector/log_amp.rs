//! The log-amp model: the output is a straight line in dB, V = slope·(P_dBm − intercept),
//! with slope and intercept fitted by least squares, weighted by each point's volts
//! uncertainty when every point has one. Each point's conformance error (how far the real
//! curve bends away from the line) is reported in dB.

use super::covariance::FitCovariance;
use super::{
    ordered_points, point_u_volts, residuals_db, CalPoint, Detector, ModelError, ModelKind,
    Weighting,
};
use crate::maths::numeric::fit_line_weighted;

/// A logarithmic-amplifier detector.
#[derive(Debug, Clone, PartialEq)]
pub struct LogAmpDetector {
    slope: f64,
    intercept: f64,
    span: (f64, f64),
    covariance: Option<FitCovariance>,
}

impl LogAmpDetector {
    /// A detector with known slope (V/dB, either sign, not zero) and intercept (dBm), valid
    /// over `span` dBm.
    pub fn new(slope: f64, intercept: f64, span: (f64, f64)) -> Self {
        LogAmpDetector {
            slope,
            intercept,
            span,
            covariance: None,
        }
    }

    /// Fits slope and intercept to at least three points by least squares of volts on
    /// dBm (weighted when every point has an uncertainty); the fitted detector carries
    /// its covariance.
    pub fn fit(points: &[CalPoint]) -> Result<Self, ModelError> {
        let sorted = ordered_points(points, ModelKind::Log)?;
        let dbm: Vec<f64> = sorted.iter().map(|p| p.dbm).collect();
        let volts: Vec<f64> = sorted.iter().map(|p| p.volts).collect();
        let u = point_u_volts(&sorted, Weighting::of(&sorted));
        let line = fit_line_weighted(&dbm, &volts, &u).ok_or_else(|| ModelError::FitFailed {
            model: ModelKind::Log,
            reason: "the applied levels have no spread".into(),
        })?;
        let span = (dbm[0], dbm[dbm.len() - 1]);
        Ok(
            LogAmpDetector::new(line.slope, -line.intercept / line.slope, span)
                .with_covariance(&sorted),
        )
    }

    /// The same detector, carrying the covariance that `points` give the line's slope and
    /// zero-dBm output (the line's own pair, V = slope·P + b0) and the residuals at the
    /// present slope and intercept: for a fit, the fit's own; for given parameters, what
    /// the points say about a line near them.
    pub fn with_covariance(mut self, points: &[CalPoint]) -> Self {
        let weighting = Weighting::of(points);
        let u = point_u_volts(points, weighting);
        let dbm: Vec<f64> = points.iter().map(|p| p.dbm).collect();
        let volts: Vec<f64> = points.iter().map(|p| p.volts).collect();
        let Some(line) = fit_line_weighted(&dbm, &volts, &u) else {
            return self;
        };
        let weighted_sse = points
            .iter()
            .zip(&u)
            .map(|(p, u)| ((self.volts_at(p.dbm) - p.volts) / u).powi(2))
            .sum();
        let by_level = dbm
            .iter()
            .copied()
            .zip(residuals_db(&self, points))
            .collect();
        self.covariance = Some(FitCovariance::new(
            weighting,
            line.unscaled_covariance,
            weighted_sse,
            by_level,
        ));
        self
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
    /// dBm = (V − b0)/slope with b0 = −slope·intercept, so ∂dBm/∂slope = −(V − b0)/slope²
    /// and ∂dBm/∂b0 = −1/slope, propagated through the covariance, with the residual term.
    fn covariance(&self) -> Option<&FitCovariance> {
        self.covariance.as_ref()
    }

    fn model_u_db(&self, detector_dbm: f64) -> Option<f64> {
        if !detector_dbm.is_finite() {
            return None;
        }
        let covariance = self.covariance.as_ref()?;
        let b0 = -self.slope * self.intercept;
        let volts = self.volts_at(detector_dbm);
        let g = [-(volts - b0) / (self.slope * self.slope), -1.0 / self.slope];
        Some(covariance.u_db(g, detector_dbm)).filter(|u| u.is_finite())
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
            .map(|p| CalPoint::new(f64::from(p), 0.025 * (f64::from(p) + 84.0)))
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
            .map(|&u: &f64| CalPoint::new(10.0 * u - 30.0, 1.0 + 0.04 * (u + b * u * u)))
            .collect();
        let det = LogAmpDetector::fit(&points).unwrap();
        let errors = residuals_db(&det, &points);
        let want = [10.0 * b / 3.0, -20.0 * b / 3.0, 10.0 * b / 3.0];
        for (got, want) in errors.iter().zip(want) {
            assert!((got - want).abs() < 1e-9, "{got} vs {want}");
        }
    }
}
