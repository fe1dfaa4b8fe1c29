//! Detector models built from calibration points taken at several board temperatures
//! (their `temp_c`): a table or log-amp curve per temperature, or one diode fit over all
//! of them, each with the model across temperature that compensation reads.

use std::sync::Arc;

use super::{model, model_problem, Checker};
use crate::detector::thermal::{
    ordered_at, temperature_groups, temperature_span, Curve, ThermalModel,
};
use crate::detector::{Axis, CalPoint, Detector, LogAmpDetector, ModelKind, TableDetector};
use crate::profile::locate::FieldPath;
use crate::profile::raw::RawModel;
use crate::profile::{Model, ProfilePoint};
use crate::units::CELSIUS_ZERO_K;

/// Each point's board temperature, K: its `temp_c`, else `untagged_k`.
pub(super) fn point_kelvins(points: &[ProfilePoint], untagged_k: f64) -> Vec<f64> {
    points
        .iter()
        .map(|p| p.temp_c.map_or(untagged_k, |c| c + CELSIUS_ZERO_K))
        .collect()
}

/// True when the points were taken at temperatures they say (their `temp_c`) that make
/// more than one calibration set.
pub(super) fn several_sets(points: &[ProfilePoint], kelvins: &[f64]) -> bool {
    points.iter().any(|p| p.temp_c.is_some()) && temperature_groups(kelvins).len() > 1
}

/// A table or log-amp model from one tagged calibration set, made a model across
/// temperature that holds only over the temperatures its points were taken at (a model
/// already across temperature, a diode's or one of several sets, is left as it is).
pub(super) fn one_set(
    mut built: Model,
    points: &[ProfilePoint],
    cal: &[CalPoint],
    kelvins: &[f64],
) -> Model {
    let untagged = points.iter().all(|p| p.temp_c.is_none());
    if built.thermal.is_some() || untagged {
        return built;
    }
    let mean = kelvins.iter().sum::<f64>() / kelvins.len() as f64;
    let curve = Curve::new(mean, Arc::clone(&built.detector), cal);
    let range = temperature_span(kelvins);
    built.thermal = ThermalModel::curves(vec![curve], mean, range).map(Arc::new);
    built
}

/// A table or log-amp model with one curve per calibration set, read at the first
/// point's set's temperature when none is known.
pub(super) fn build_curves(
    check: &mut Checker,
    raw: &RawModel,
    kind: ModelKind,
    axis: Option<Axis>,
    cal: &[CalPoint],
    kelvins: &[f64],
) -> Option<Model> {
    if kind == ModelKind::Log && (raw.slope.is_some() || raw.intercept.is_some()) {
        let field = if raw.slope.is_some() {
            "slope"
        } else {
            "intercept"
        };
        check.fail(
            FieldPath::key("model").then(field),
            "points at several temperatures give a line at each; remove `slope` and \
             `intercept` to fit them from the points",
        );
        return None;
    }
    ordered_at(cal, kelvins, kind)
        .map_err(|e| model_problem(check, e))
        .ok()?;
    let sets = temperature_groups(kelvins);
    let reference_k = sets
        .iter()
        .find(|(_, members)| members.contains(&0))
        .map(|(kelvin, _)| *kelvin)?;
    let mut curves = Vec::new();
    for (kelvin, members) in sets {
        let set: Vec<CalPoint> = members.iter().map(|&i| cal[i]).collect();
        let built: Result<Arc<dyn Detector>, _> = match kind {
            ModelKind::Log => LogAmpDetector::fit(&set).map(|d| Arc::new(d) as Arc<dyn Detector>),
            _ => TableDetector::new(&set, axis.unwrap_or(Axis::LogVolts))
                .map(|d| Arc::new(d) as Arc<dyn Detector>),
        };
        let detector = built.map_err(|e| model_problem(check, e)).ok()?;
        curves.push(Curve::new(kelvin, detector, &set));
    }
    let thermal = ThermalModel::curves(curves, reference_k, temperature_span(kelvins))?;
    let detector = thermal.at_kelvin(reference_k).detector;
    // A log-amp's lines are fitted here; a table's curves are the points themselves.
    let fitted_at_load = kind == ModelKind::Log;
    let mut built = model(detector, axis, fitted_at_load, Vec::new(), Vec::new());
    built.thermal = Some(Arc::new(thermal));
    Some(built)
}

/// The span a diode's readings are flagged against, detector dBm: the calibrated levels,
/// widened to where the model reads the lowest and highest points at their own
/// temperatures.
pub(super) fn diode_span(
    thermal: &ThermalModel,
    span: (f64, f64),
    cal: &[CalPoint],
    kelvins: &[f64],
) -> (f64, f64) {
    let reads = |i: usize| thermal.at_kelvin(kelvins[i]).detector.dbm_at(cal[i].volts);
    let by_level = |a: &usize, b: &usize| cal[*a].dbm.total_cmp(&cal[*b].dbm);
    let lowest = (0..cal.len()).min_by(by_level).map(reads);
    let highest = (0..cal.len()).max_by(by_level).map(reads);
    let finite = |v: Option<f64>, or: f64| v.filter(|v| v.is_finite()).unwrap_or(or);
    (
        span.0.min(finite(lowest, span.0)),
        span.1.max(finite(highest, span.1)),
    )
}
