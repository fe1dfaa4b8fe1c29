//! Detector models: each maps detector output volts to detector-input dBm and back, and
//! knows the span of input levels it was calibrated over.
//!
//! Three models share one trait: a calibration table interpolated by PCHIP ([`table`]), a
//! logarithmic-amplifier line ([`log_amp`]) and the exponential-diode peak detector
//! ([`diode`]). Fits and their residuals live here too, since they belong to the model, and
//! so do the checks of calibration points, within one set or across sets taken at several
//! board temperatures; [`thermal`] holds the models across temperature.

pub mod covariance;
pub mod diode;
pub mod log_amp;
pub mod table;
pub mod thermal;

use std::fmt;

use thiserror::Error;

pub use diode::{DiodeDetector, SaturationLaw};
pub use log_amp::LogAmpDetector;
pub use table::{Axis, TableDetector};

/// A model that misses its own calibration points by more than this, RMS in dB, is no
/// description of the detector: a fit that ends there fails, and parameters given in a
/// profile that miss by more are refused.
pub const MAX_FIT_RMS_DB: f64 = 2.0;

/// Which model a profile uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ModelKind {
    /// Calibration points interpolated by PCHIP.
    Table,
    /// A log-amp detector: volts linear in dBm.
    Log,
    /// An exponential-diode peak detector.
    Diode,
}

impl ModelKind {
    /// The name used in profiles and on the command line.
    pub fn name(self) -> &'static str {
        match self {
            ModelKind::Table => "table",
            ModelKind::Log => "log",
            ModelKind::Diode => "diode",
        }
    }

    /// The model for a name, if it is one.
    pub fn from_name(name: &str) -> Option<Self> {
        [ModelKind::Table, ModelKind::Log, ModelKind::Diode]
            .into_iter()
            .find(|kind| kind.name() == name)
    }

    /// The fewest calibration points the model can be built from.
    pub fn min_points(self) -> usize {
        match self {
            ModelKind::Table => 2,
            ModelKind::Log => 3,
            ModelKind::Diode => 4,
        }
    }
}

impl fmt::Display for ModelKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// One calibration point: the level applied at the detector input and the volts it gave.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CalPoint {
    /// Applied level at the detector input, dBm.
    pub dbm: f64,
    /// Detector output, volts.
    pub volts: f64,
    /// How well `volts` is known.
    pub u_volts: PointU,
}

impl CalPoint {
    /// A point whose volts have no stated uncertainty.
    pub fn new(dbm: f64, volts: f64) -> Self {
        CalPoint {
            dbm,
            volts,
            u_volts: PointU::Unknown,
        }
    }
}

/// The standard uncertainty of a calibration point's volts (the mean of its counts).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum PointU {
    /// Nothing is known: the point is weighted like every other.
    #[default]
    Unknown,
    /// Known up to a factor common to all points (the counts' spread was stored, but not
    /// how many samples went into the mean), volts.
    Relative(f64),
    /// A standard uncertainty, volts.
    Standard(f64),
}

impl PointU {
    /// From a point's stored counts: u = std_counts/√samples, with the quantisation of
    /// one count (1/√12) added in quadrature when the spread is below half a count, where
    /// averaging no longer smooths the steps away. Without `samples` the figure is only
    /// relative (as if from one sample); without `std_counts` nothing is known.
    pub fn from_counts(
        std_counts: Option<f64>,
        samples: Option<u64>,
        volts_per_count: f64,
    ) -> Self {
        let Some(std) = std_counts else {
            return PointU::Unknown;
        };
        let per_sample = samples.map_or(1.0, |n| n.max(1) as f64);
        let quantisation = if std < 0.5 { 1.0 / 12.0 } else { 0.0 };
        let u = (std * std / per_sample + quantisation).sqrt() * volts_per_count;
        match samples {
            Some(_) => PointU::Standard(u),
            None => PointU::Relative(u),
        }
    }

    fn value(self) -> Option<f64> {
        match self {
            PointU::Unknown => None,
            PointU::Relative(u) | PointU::Standard(u) => Some(u),
        }
    }
}

/// How a fit weighs its points, decided over all of them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Weighting {
    /// Some point has no uncertainty: every point weighs the same (in dB for the diode,
    /// in volts for the log-amp line); the scatter of the residuals sets the covariance.
    Unweighted,
    /// Every point has a relative uncertainty: weights 1/u², and the scatter of the
    /// weighted residuals sets the covariance's scale.
    Relative,
    /// Every point has a standard uncertainty: weights 1/u², and the covariance stands as
    /// it is unless the residuals fail the chi-square test.
    Absolute,
}

impl Weighting {
    /// The weighting a set of points allows.
    pub fn of(points: &[CalPoint]) -> Self {
        if points
            .iter()
            .all(|p| matches!(p.u_volts, PointU::Standard(u) if u > 0.0))
        {
            Weighting::Absolute
        } else if points
            .iter()
            .all(|p| p.u_volts.value().is_some_and(|u| u > 0.0))
        {
            Weighting::Relative
        } else {
            Weighting::Unweighted
        }
    }
}

/// Each point's volts uncertainty under `weighting` (1 for every point when unweighted).
pub fn point_u_volts(points: &[CalPoint], weighting: Weighting) -> Vec<f64> {
    points
        .iter()
        .map(|p| match weighting {
            Weighting::Unweighted => 1.0,
            _ => p.u_volts.value().unwrap_or(1.0),
        })
        .collect()
}

/// Why a model could not be built from its points or parameters.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum ModelError {
    /// Not enough points for the model.
    #[error("the {model} model needs at least {need} calibration points; {got} given")]
    TooFewPoints {
        /// The model.
        model: ModelKind,
        /// How many it needs.
        need: usize,
        /// How many there were.
        got: usize,
    },
    /// Two points at the same applied level.
    #[error("this point repeats the applied level of another ({dbm:.3} dBm); keep one of them")]
    DuplicateLevel {
        /// Index of the first.
        first: usize,
        /// Index of the second.
        second: usize,
        /// The level.
        dbm: f64,
    },
    /// The detector output does not move one way only as the applied level rises.
    #[error(
        "at {dbm:.3} dBm the output is {volts:.6} V, which breaks the steady rise (or fall) of \
         the output with level; re-measure this point or delete it"
    )]
    NotMonotone {
        /// Index of the offending point.
        index: usize,
        /// Its level.
        dbm: f64,
        /// Its output.
        volts: f64,
    },
    /// A point with zero or negative output where the model needs it positive.
    #[error(
        "this point reads {volts:.6} V, at or below zero; the {model} model needs a positive \
         detector output (check the ADC zero offset)"
    )]
    NonPositiveOutput {
        /// Index of the point.
        index: usize,
        /// Its output.
        volts: f64,
        /// The model.
        model: ModelKind,
    },
    /// A fit that did not converge or gave unusable parameters.
    #[error("the {model} fit failed: {reason}")]
    FitFailed {
        /// The model.
        model: ModelKind,
        /// What happened and what to try.
        reason: String,
    },
}

/// A detector model: output volts to input dBm and back, over a calibrated span.
pub trait Detector: fmt::Debug + Send + Sync {
    /// Which model this is.
    fn kind(&self) -> ModelKind;
    /// Detector-input dBm for a detector output in volts, continuing the model beyond the
    /// calibrated span; −∞ where the output is below anything the model can produce.
    fn dbm_at(&self, volts: f64) -> f64;
    /// Detector output volts for a detector-input level in dBm.
    fn volts_at(&self, dbm: f64) -> f64;
    /// The calibrated span of input levels, (lowest, highest) dBm.
    fn span_dbm(&self) -> (f64, f64);
    /// The standard uncertainty of the model itself at a detector-input level, dB: how
    /// far the curve may be from the detector's true one there (from the fit's residuals
    /// and its parameters' covariance). None when the model cannot say.
    fn model_u_db(&self, _detector_dbm: f64) -> Option<f64> {
        None
    }
    /// The fitted parameters' covariance and residuals, for models with parameters.
    fn covariance(&self) -> Option<&covariance::FitCovariance> {
        None
    }
}

/// Each point's error in dB: the model's dBm for the point's volts minus the applied dBm.
pub fn residuals_db(detector: &dyn Detector, points: &[CalPoint]) -> Vec<f64> {
    points
        .iter()
        .map(|p| detector.dbm_at(p.volts) - p.dbm)
        .collect()
}

/// Root-mean-square of a set of errors.
pub fn rms(errors: &[f64]) -> f64 {
    if errors.is_empty() {
        return 0.0;
    }
    (errors.iter().map(|e| e * e).sum::<f64>() / errors.len() as f64).sqrt()
}

/// The points ordered by applied level, after checking the count, duplicates and
/// monotone output; indices in errors refer to the order given.
pub fn ordered_points(points: &[CalPoint], model: ModelKind) -> Result<Vec<CalPoint>, ModelError> {
    if points.len() < model.min_points() {
        return Err(ModelError::TooFewPoints {
            model,
            need: model.min_points(),
            got: points.len(),
        });
    }
    let mut order: Vec<usize> = (0..points.len()).collect();
    order.sort_by(|&a, &b| points[a].dbm.total_cmp(&points[b].dbm));
    for pair in order.windows(2) {
        let (a, b) = (pair[0], pair[1]);
        if points[a].dbm == points[b].dbm {
            return Err(ModelError::DuplicateLevel {
                first: a.min(b),
                second: a.max(b),
                dbm: points[a].dbm,
            });
        }
    }
    let rising = points[order[order.len() - 1]].volts > points[order[0]].volts;
    for pair in order.windows(2) {
        let (a, b) = (pair[0], pair[1]);
        let step_ok = if rising {
            points[b].volts > points[a].volts
        } else {
            points[b].volts < points[a].volts
        };
        if !step_ok {
            let index = out_of_order_index(points, &order, a, b);
            return Err(ModelError::NotMonotone {
                index,
                dbm: points[index].dbm,
                volts: points[index].volts,
            });
        }
    }
    Ok(order.iter().map(|&i| points[i]).collect())
}

/// Points whose temperatures lie within this of the next colder point's are one
/// calibration set, K. A choice: a board drifts a few degrees while a set is taken (more
/// on a bench that warms up with it), and a second set worth taking lies ten or more
/// degrees away.
pub const SET_GAP_K: f64 = 5.0;

/// The points' calibration sets, coldest first: each set's mean temperature and the
/// indices of its points (see [`SET_GAP_K`]).
pub fn temperature_groups(kelvins: &[f64]) -> Vec<(f64, Vec<usize>)> {
    let mut order: Vec<usize> = (0..kelvins.len()).collect();
    order.sort_by(|&a, &b| kelvins[a].total_cmp(&kelvins[b]));
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for i in order {
        match groups.last_mut() {
            Some(set) if kelvins[i] - kelvins[set[set.len() - 1]] <= SET_GAP_K => set.push(i),
            _ => groups.push(vec![i]),
        }
    }
    groups
        .into_iter()
        .map(|mut set| {
            let mean = set.iter().map(|&i| kelvins[i]).sum::<f64>() / set.len() as f64;
            set.sort_unstable();
            (mean, set)
        })
        .collect()
}

/// The lowest and highest of the temperatures, K.
pub fn temperature_span(kelvins: &[f64]) -> (f64, f64) {
    kelvins
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &k| {
            (lo.min(k), hi.max(k))
        })
}

/// The points in order (by temperature, then level) with their temperatures, after the
/// checks of [`ordered_points`] within each temperature: a level may repeat across
/// temperatures, never within one. Each temperature needs the points of a table (two),
/// or of a log-amp line (three); all together, the model's own minimum. Indices in errors
/// refer to the order given.
pub fn ordered_at(
    points: &[CalPoint],
    kelvins: &[f64],
    model: ModelKind,
) -> Result<(Vec<CalPoint>, Vec<f64>), ModelError> {
    let groups = temperature_groups(kelvins);
    if points.len() < model.min_points() {
        return Err(ModelError::TooFewPoints {
            model,
            need: model.min_points(),
            got: points.len(),
        });
    }
    let per_set = match model {
        _ if groups.len() <= 1 => model,
        ModelKind::Log => ModelKind::Log,
        ModelKind::Table | ModelKind::Diode => ModelKind::Table,
    };
    let mut sorted = Vec::with_capacity(points.len());
    let mut sorted_kelvins = Vec::with_capacity(points.len());
    for (_, mut members) in groups {
        let set: Vec<CalPoint> = members.iter().map(|&i| points[i]).collect();
        ordered_points(&set, per_set).map_err(|e| to_given(e, &members))?;
        members.sort_by(|&a, &b| points[a].dbm.total_cmp(&points[b].dbm));
        sorted.extend(members.iter().map(|&i| points[i]));
        sorted_kelvins.extend(members.iter().map(|&i| kelvins[i]));
    }
    Ok((sorted, sorted_kelvins))
}

/// An error about a group's points, its indices made those of the points given.
fn to_given(err: ModelError, members: &[usize]) -> ModelError {
    let given = |i: usize| members.get(i).copied().unwrap_or(i);
    match err {
        ModelError::DuplicateLevel { first, second, dbm } => ModelError::DuplicateLevel {
            first: given(first),
            second: given(second),
            dbm,
        },
        ModelError::NotMonotone { index, dbm, volts } => ModelError::NotMonotone {
            index: given(index),
            dbm,
            volts,
        },
        ModelError::NonPositiveOutput {
            index,
            volts,
            model,
        } => ModelError::NonPositiveOutput {
            index: given(index),
            volts,
            model,
        },
        other => other,
    }
}

/// Of two neighbours out of order, the one that disagrees with the overall trend most.
fn out_of_order_index(points: &[CalPoint], order: &[usize], a: usize, b: usize) -> usize {
    let first = points[order[0]].volts;
    let last = points[order[order.len() - 1]].volts;
    let expected = |i: usize| {
        let rank = order.iter().position(|&j| j == i).unwrap_or(0) as f64;
        first + (last - first) * rank / (order.len() - 1) as f64
    };
    let off = |i: usize| (points[i].volts - expected(i)).abs();
    if off(a) > off(b) {
        a
    } else {
        b
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pt(dbm: f64, volts: f64) -> CalPoint {
        CalPoint::new(dbm, volts)
    }

    #[test]
    fn ordering_sorts_by_level_and_accepts_falling_outputs() {
        let got = ordered_points(
            &[pt(0.0, 1.0), pt(-10.0, 1.5), pt(10.0, 0.5)],
            ModelKind::Log,
        )
        .unwrap();
        assert_eq!(
            got.iter().map(|p| p.dbm).collect::<Vec<_>>(),
            [-10.0, 0.0, 10.0]
        );
    }

    #[test]
    fn a_point_against_the_trend_is_named() {
        let points = [
            pt(-20.0, 0.1),
            pt(-10.0, 0.2),
            pt(0.0, 0.15),
            pt(10.0, 0.8),
            pt(20.0, 1.6),
        ];
        let err = ordered_points(&points, ModelKind::Table).unwrap_err();
        assert!(
            matches!(err, ModelError::NotMonotone { index: 2, .. }),
            "{err:?}"
        );
    }

    #[test]
    fn duplicate_levels_are_refused() {
        let err = ordered_points(&[pt(0.0, 1.0), pt(0.0, 1.1)], ModelKind::Table).unwrap_err();
        assert!(matches!(
            err,
            ModelError::DuplicateLevel {
                first: 0,
                second: 1,
                ..
            }
        ));
    }
}
