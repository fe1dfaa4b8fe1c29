//! The table model: calibration points interpolated by PCHIP of dBm against an axis of the
//! detector output, either ln(volts) (diode detectors, whose output follows a power law of
//! the input, so the curve is nearly straight there) or volts (log-amp detectors).
//! Beyond the end points the end interval's secant is continued, so the result stays
//! monotone (such readings are flagged outside the span by the calibration chain).

use super::{ordered_points, CalPoint, Detector, ModelError, ModelKind};
use crate::maths::numeric::solve_bracketed;
use crate::maths::pchip::Pchip;

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
    /// (applied dBm, |leave-one-out error| dB) of each interior point, rising in level.
    left_out_db: Vec<(f64, f64)>,
}

impl TableDetector {
    /// Builds the table from at least two points with strictly monotone output, with
    /// each interior point's leave-one-out error kept for [`Detector::model_u_db`].
    pub fn new(points: &[CalPoint], axis: Axis) -> Result<Self, ModelError> {
        let mut table = Self::build(points, axis)?;
        let mut left_out: Vec<(f64, f64)> = points
            .iter()
            .zip(leave_one_out_db(points, axis))
            .filter_map(|(p, e)| e.map(|e| (p.dbm, e.abs())))
            .collect();
        left_out.sort_by(|a, b| a.0.total_cmp(&b.0));
        table.left_out_db = left_out;
        Ok(table)
    }

    fn build(points: &[CalPoint], axis: Axis) -> Result<Self, ModelError> {
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
        Ok(TableDetector {
            axis,
            curve,
            span,
            left_out_db: Vec::new(),
        })
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

    /// The interior points' leave-one-out errors interpolated linearly in level, held at
    /// the outermost ones' values towards the ends; None with no interior point. A table
    /// with every other point left out has twice the spacing, so this overstates the full
    /// table's error between points: a cautious figure, never a hidden one.
    fn model_u_db(&self, detector_dbm: f64) -> Option<f64> {
        let errors = &self.left_out_db;
        let (first, last) = (errors.first()?, errors.last()?);
        if !detector_dbm.is_finite() {
            return None;
        }
        if detector_dbm <= first.0 {
            return Some(first.1);
        }
        if detector_dbm >= last.0 {
            return Some(last.1);
        }
        let k = errors.partition_point(|&(level, _)| level <= detector_dbm) - 1;
        let ((l0, e0), (l1, e1)) = (errors[k], errors[k + 1]);
        Some(e0 + (e1 - e0) * (detector_dbm - l0) / (l1 - l0))
    }
}

/// For each interior point, the table's error there when that point is left out: an honest
/// estimate of the interpolation error between points, which the full table hides (it
/// passes through every point exactly).
///
/// A PCHIP slope at a knot depends only on the knot's neighbours (or, at an end, on the
/// first or last three knots), so the table without point k reads the same at that point
/// as a table of its two neighbours on each side: each point costs a five-point table,
/// not a rebuild of the whole one, and the errors come out the same to the last bit.
pub fn leave_one_out_db(points: &[CalPoint], axis: Axis) -> Vec<Option<f64>> {
    let mut errors = vec![None; points.len()];
    if points.len() < 3 || ordered_points(points, ModelKind::Table).is_err() {
        return errors;
    }
    let mut order: Vec<usize> = (0..points.len()).collect();
    order.sort_by(|&a, &b| points[a].dbm.total_cmp(&points[b].dbm));
    for k in 1..order.len() - 1 {
        let nearby: Vec<CalPoint> = order[k.saturating_sub(2)..(k + 3).min(order.len())]
            .iter()
            .filter(|&&i| i != order[k])
            .map(|&i| points[i])
            .collect();
        let left_out = points[order[k]];
        errors[order[k]] = TableDetector::build(&nearby, axis)
            .ok()
            .map(|table| table.dbm_at(left_out.volts) - left_out.dbm);
    }
    errors
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pts(pairs: &[(f64, f64)]) -> Vec<CalPoint> {
        pairs
            .iter()
            .map(|&(dbm, volts)| CalPoint::new(dbm, volts))
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

    /// The definition: the whole table rebuilt without the point.
    fn leave_one_out_by_rebuilding(points: &[CalPoint], axis: Axis) -> Vec<Option<f64>> {
        let sorted = ordered_points(points, ModelKind::Table).unwrap();
        let ends = (sorted[0].dbm, sorted[sorted.len() - 1].dbm);
        points
            .iter()
            .map(|p| {
                if p.dbm == ends.0 || p.dbm == ends.1 {
                    return None;
                }
                let rest: Vec<CalPoint> = points.iter().copied().filter(|q| q != p).collect();
                Some(TableDetector::new(&rest, axis).unwrap().dbm_at(p.volts) - p.dbm)
            })
            .collect()
    }

    // Source: the definition of leaving one out (the table rebuilt without the point), on
    // seeded random curves, rising and falling, given in shuffled order, 3 to 12 points.
    #[test]
    fn leaving_one_out_by_neighbours_matches_rebuilding_to_the_bit() {
        use rand::seq::SliceRandom;
        use rand::{Rng, SeedableRng};
        let mut rng = rand_pcg::Pcg64::seed_from_u64(7);
        for case in 0..400 {
            let count = rng.random_range(3..=12);
            let falling = case % 2 == 1;
            let mut volts = 0.002;
            let mut dbm = -40.0;
            let mut points: Vec<CalPoint> = (0..count)
                .map(|_| {
                    volts += rng.random_range(0.001..0.5);
                    dbm += rng.random_range(0.1..6.0);
                    CalPoint::new(if falling { -dbm } else { dbm }, volts)
                })
                .collect();
            points.shuffle(&mut rng);
            for axis in [Axis::LogVolts, Axis::Volts] {
                let fast = leave_one_out_db(&points, axis);
                let slow = leave_one_out_by_rebuilding(&points, axis);
                let bits = |v: &[Option<f64>]| -> Vec<Option<u64>> {
                    v.iter().map(|e| e.map(f64::to_bits)).collect()
                };
                assert_eq!(bits(&fast), bits(&slow), "case {case} {axis:?}: {points:?}");
            }
        }
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
