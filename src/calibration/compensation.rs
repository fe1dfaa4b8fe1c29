//! Temperature compensation: the calibration made ready at the board's temperature of the
//! moment, kept while the temperature stays within a small step of it, so that the
//! per-code table is built again only when the board has really moved.

use std::collections::VecDeque;
use std::sync::Arc;

use super::{Calibration, Flags};
use crate::detector::thermal::ThermalModel;

/// How far the board may move from the temperature a calibration was made ready at before
/// it is made ready again, K. A choice: even a heavily loaded diode, whose reading moves
/// by about 0.4 dB/K, then errs by less than 0.01 dB, and the window's own noise stays
/// below it, so the table is not rebuilt at every chunk.
pub const RETABLE_STEP_K: f64 = 0.02;

/// The grid temperatures are rounded to before a calibration is made ready, K: a board
/// that goes back and forth meets the ones it made before.
const GRID_K: f64 = 0.01;

/// Calibrations made ready earlier, kept for a board that returns to them.
const KEPT: usize = 8;

/// The calibration at each temperature of a run.
#[derive(Debug, Clone)]
pub struct Compensation {
    model: Arc<ThermalModel>,
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
            .is_some_and(|(at, _)| (kelvin - at).abs() <= RETABLE_STEP_K);
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

    /// The calibration at the model's reference temperature, without compensation.
    pub fn uncompensated(&self) -> &Calibration {
        &self.reference
    }

    /// The model across temperature.
    pub fn model(&self) -> &ThermalModel {
        &self.model
    }

    /// How much a reading at the reference-plane level `dbm` moves per kelvin of error in
    /// the board temperature `kelvin`, dB/K.
    pub fn db_per_kelvin(&self, dbm: f64, kelvin: f64) -> f64 {
        let detector_dbm = dbm - self.reference.correction_db() - self.reference.offset_db();
        self.model.db_per_kelvin(detector_dbm, kelvin)
    }
}
