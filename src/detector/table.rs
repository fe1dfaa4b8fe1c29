//! The table model: calibration points interpolated by PCHIP of dBm against an axis of the
//! detector output, either ln(volts) (diode detectors, whose output follows a power law of
//! the input, so the curve is nearly straight there) or volts (log-amp detectors).
//! Beyond the end points the end interval's secant is continued, so the result stays
//! monotone (such readings are flagged outside the span by the calibration chain).

use super::{ordered_points, CalPoint, Detector, ModelError, ModelKind};
use crate::numeric::solve_bracketed;
use crate::pchip::Pchip;

/// The axis the table is interpolated on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Axis {
    /// Natural log of the detector output volts (the default).
    LogVolts,
    /// The detector output volts.
    Volts,
}

impl Axis {
    /// The name used in profiles.
    pub fn name(self) -> &'static str {
        match self {
            Axis::LogVolts => "log-volts",
            Axis::Volts => "volts",
        }
    }

    /// The axis for a name, if it is one.
    pub fn from_name(name: &str) -> Option<Self> {
        [Axis::LogVolts, Axis::Volts]
            .into_iter()
            .find(|axis| axis.name() == name)
    }

    fn of(self, volts: f64) -> f64 {
        match self {
            Axis::LogVolts => volts.ln(),
            Axis::Volts => volts,
        }
    }

    fn volts(self, axis: f64) -> f64 {
        match self {
            Axis::LogVolts => axis.exp(),
            Axis::Volts => axis,
        }
    }
}

/// A calibration table with monotone cubic interpolation.
#[derive(Debug, Clone)]
pub struct TableDetector {
    axis: Axis,
    curve: Pchip,
    span: (f64, f64),
}

impl TableDetector {
    /// Builds the table from at least two points with strictly monotone output.
    pub fn new(points: &[CalPoint], axis: Axis) -> Result<Self, ModelError> {
        if axis == Axis::LogVolts {
            if let Some(index) = points.iter().position(|p| p.volts <= 0.0) {
                return Err(ModelError::NonPositiveOutput {
                    index,
                    volts: points[index].volts,
                    model: ModelKind::Table,
                });
            }
        }
        let mut sorted = ordered_points(points, ModelKind::Table)?;
        let span = (sorted[0].dbm, sorted[sorted.len() - 1].dbm);
        sorted.sort_by(|a, b| a.volts.total_cmp(&b.volts));
        let x = sorted.iter().map(|p| axis.of(p.volts)).collect();
        let y = sorted.iter().map(|p| p.dbm).collect();
        let curve = Pchip::new(x, y).ok_or_else(|| ModelError::FitFailed {
            model: ModelKind::Table,
            reason: "the points do not form a usable curve (non-finite values)".into(),
        })?;
        Ok(TableDetector { axis, curve, span })
    }

    /// The interpolation axis.
    pub fn axis(&self) -> Axis {
        self.axis
    }

    /// The slope of the end interval at knot `end` (0 or the last). PCHIP may give an end
    /// a zero derivative; the secant is never zero for strictly monotone points, so the
    /// continuation stays monotone and invertible.
    fn end_secant(&self, end: usize) -> f64 {
        let (x, y) = (self.curve.x(), self.curve.y());
        let other = if end == 0 { 1 } else { end - 1 };
        (y[end] - y[other]) / (x[end] - x[other])
    }

    /// dBm at an axis value, continuing the end intervals' secants outside the knots.
    fn dbm_on_axis(&self, a: f64) -> f64 {
        let (x, y) = (self.curve.x(), self.curve.y());
        let last = x.len() - 1;
        if a < x[0] {
            y[0] + self.end_secant(0) * (a - x[0])
        } else if a > x[last] {
            y[last] + self.end_secant(last) * (a - x[last])
        } else {
            self.curve.eval(a)
        }
    }

    /// The axis value where the curve reads `dbm` (inverse of `dbm_on_axis`).
    fn axis_at(&self, dbm: f64) -> f64 {
        let (x, y) = (self.curve.x(), self.curve.y());
        let last = x.len() - 1;
        let (lo, hi) = (y[0].min(y[last]), y[0].max(y[last]));
        if dbm < lo || dbm > hi {
            let end = if (dbm < lo) == (y[0] < y[last]) {
                0
            } else {
                last
            };
            return x[end] + (dbm - y[end]) / self.end_secant(end);
        }
        solve_bracketed(|a| self.curve.eval(a) - dbm, x[0], x[last]).unwrap_or(f64::NAN)
    }
}

impl Detector for TableDetector {
    fn kind(&self) -> ModelKind {
        ModelKind::Table
    }

    fn dbm_at(&self, volts: f64) -> f64 {
        if self.axis == Axis::LogVolts && volts <= 0.0 {
            return f64::NEG_INFINITY;
        }
        self.dbm_on_axis(self.axis.of(volts))
    }

    fn volts_at(&self, dbm: f64) -> f64 {
        self.axis.volts(self.axis_at(dbm))
    }

    fn span_dbm(&self) -> (f64, f64) {
        self.span
    }
}

/// For each interior point, the table's error there when that point is left out: an honest
/// estimate of the interpolation error between points, which the full table hides (it
/// passes through every point exactly).
pub fn leave_one_out_db(points: &[CalPoint], axis: Axis) -> Vec<Option<f64>> {
    let Ok(sorted) = ordered_points(points, ModelKind::Table) else {
        return vec![None; points.len()];
    };
    points
        .iter()
        .map(|p| {
            let interior = p.dbm > sorted[0].dbm && p.dbm < sorted[sorted.len() - 1].dbm;
            if !interior || points.len() < 3 {
                return None;
            }
            let rest: Vec<CalPoint> = points.iter().copied().filter(|q| q != p).collect();
            let table = TableDetector::new(&rest, axis).ok()?;
            Some(table.dbm_at(p.volts) - p.dbm)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pts(pairs: &[(f64, f64)]) -> Vec<CalPoint> {
        pairs
            .iter()
            .map(|&(dbm, volts)| CalPoint { dbm, volts })
            .collect()
    }

    #[test]
    fn passes_through_points_and_inverts() {
        let t = TableDetector::new(
            &pts(&[(-20.0, 0.01), (-10.0, 0.05), (0.0, 0.2), (10.0, 0.9)]),
            Axis::LogVolts,
        )
        .unwrap();
        assert!((t.dbm_at(0.05) + 10.0).abs() < 1e-12);
        for dbm in [-25.0, -15.0, -3.3, 4.0, 14.0] {
            assert!((t.dbm_at(t.volts_at(dbm)) - dbm).abs() < 1e-9, "{dbm}");
        }
        assert_eq!(t.dbm_at(0.0), f64::NEG_INFINITY);
    }

    #[test]
    fn falling_output_detectors_are_supported() {
        let t = TableDetector::new(&pts(&[(-40.0, 1.8), (-20.0, 1.3), (0.0, 0.8)]), Axis::Volts)
            .unwrap();
        assert!((t.dbm_at(1.3) + 20.0).abs() < 1e-12);
        assert!(t.dbm_at(1.9) < -40.0 && t.dbm_at(0.7) > 0.0);
        assert!((t.dbm_at(t.volts_at(-45.0)) + 45.0).abs() < 1e-9);
        assert!((t.dbm_at(t.volts_at(5.0)) - 5.0).abs() < 1e-9);
    }
}
