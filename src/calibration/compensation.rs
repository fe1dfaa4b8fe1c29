//! Temperature compensation: the calibration made ready at the board's temperature of the
//! moment, kept while the temperature stays within a small step of it, so that the
//! per-code table is built again only when the board has really moved.

use std::collections::VecDeque;
use std::sync::Arc;

use super::{Calibration, Flags};
use crate::detector::thermal::ThermalModel;

/// How far a reading may move between the temperature a calibration was made ready at and
/// the board's, dB, before the calibration is made ready again. A choice: a tenth of the
/// smallest temperature term a budget states, and far below the figures' last digit.
pub const RETABLE_STEP_DB: f64 = 0.002;

/// The board's move that makes a calibration ready again lies within these, K: never so
/// fine that the window's own noise rebuilds the table at every chunk, never so coarse
/// that a curve far from linear in temperature is stepped over.
pub const RETABLE_STEP_K: (f64, f64) = (0.005, 0.5);

/// Levels across the span, and temperatures across the range, at which the model's
/// movement with temperature is sampled to choose the step.
const SENSITIVITY_GRID: usize = 9;

/// The grid temperatures are rounded to before a calibration is made ready, K: a board
/// that goes back and forth meets the ones it made before.
const GRID_K: f64 = 0.01;

/// Calibrations made ready earlier, kept for a board that returns to them.
const KEPT: usize = 8;

/// The calibration at each temperature of a run.
#[derive(Debug, Clone)]
pub struct Compensation {
    model: Arc<ThermalModel>,
    /// How far the board moves before the calibration is made ready again, K.
    step_k: f64,
    reference: Calibration,
    unknown: Calibration,
    current: Option<(f64, Calibration)>,
    kept: VecDeque<(f64, Calibration)>,
}

impl Compensation {
    /// Compensation of `reference` (the profile's calibration, at the model's reference
    /// temperature) by `model`.
    pub fn new(reference: Calibration, model: Arc<ThermalModel>) -> Self {
        Compensation {
            unknown: reference.with_fixed_flags(Flags::TEMP_UNKNOWN),
            step_k: retable_step_k(&reference, &model),
            model,
            reference,
            current: None,
            kept: VecDeque::new(),
        }
    }

    /// The calibration for a board at `kelvin`; without a temperature, the reference
    /// calibration with every reading flagged `temp-unknown`.
    pub fn at(&mut self, kelvin: Option<f64>) -> &Calibration {
        let Some(kelvin) = kelvin.filter(|k| k.is_finite()) else {
            return &self.unknown;
        };
        let near = self
            .current
            .as_ref()
            .is_some_and(|(at, _)| (kelvin - at).abs() <= self.step_k);
        if !near {
            let grid = (kelvin / GRID_K).round() * GRID_K;
            let made = match self
                .kept
                .iter()
                .position(|(at, _)| (at - grid).abs() < 1e-9)
            {
                Some(i) => self.kept.remove(i).expect("the position was found"),
                None => (
                    grid,
                    self.reference.at_temperature(&self.model.at_kelvin(grid)),
                ),
            };
            if let Some(previous) = self.current.replace(made) {
                self.kept.push_front(previous);
                self.kept.truncate(KEPT);
            }
        }
        &self.current.as_ref().expect("made ready above").1
    }
}

/// The board's move, K, that shifts no reading by more than [`RETABLE_STEP_DB`]: the
/// model's largest movement per kelvin over a grid of levels across the span and
/// temperatures across its range (and a little beyond), within [`RETABLE_STEP_K`].
fn retable_step_k(reference: &Calibration, model: &ThermalModel) -> f64 {
    let (lo, hi) = reference.detector_span_dbm();
    let (cold, warm) = model.range_k();
    let (cold, warm) = (cold - 5.0, warm + 5.0);
    let at = |a: f64, b: f64, i: usize| a + (b - a) * i as f64 / (SENSITIVITY_GRID - 1) as f64;
    let steepest = (0..SENSITIVITY_GRID)
        .flat_map(|i| (0..SENSITIVITY_GRID).map(move |j| (at(lo, hi, i), at(cold, warm, j))))
        .map(|(dbm, kelvin)| model.db_per_kelvin(dbm, kelvin).abs())
        .filter(|s| s.is_finite())
        .fold(0.0, f64::max);
    (RETABLE_STEP_DB / steepest).clamp(RETABLE_STEP_K.0, RETABLE_STEP_K.1)
}
