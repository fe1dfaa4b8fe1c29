//! The board's temperature on the live screen: the reader of the temperature channel,
//! the calibration made ready at the board's temperature, and what the screen says of
//! the sensor. A one-detector run whose profile has a `[temperature]` table keeps one.

use std::sync::Arc;

use dbtrail::calibration::{Calibration, Compensation, Reading};
use dbtrail::detector::thermal::ThermalModel;
use dbtrail::thermal::{BoardReader, SensorFault};
use dbtrail::units::CELSIUS_ZERO_K;

/// The board's temperature as the screen reads it.
#[derive(Debug, Clone)]
pub struct Board {
    reader: BoardReader,
    model: Arc<ThermalModel>,
    compensation: Compensation,
    /// The temperature the last frame's power sample was read at, K.
    kelvin: Option<f64>,
    /// The last fault the sensor showed, and when (source seconds).
    fault: Option<(SensorFault, f64)>,
}

impl Board {
    /// The board of a calibration whose profile reads one; None without `[temperature]`.
    pub fn of(cal: &Calibration) -> Option<Self> {
        let setup = cal.thermal()?;
        Some(Board {
            reader: BoardReader::new(setup.channel, cal.adc()),
            model: Arc::clone(&setup.model),
            compensation: Compensation::new(cal.clone(), Arc::clone(&setup.model)),
            kelvin: None,
            fault: None,
        })
    }

    /// The frame index of the power channel: the first that is not the sensor's.
    pub fn power_channel(&self) -> usize {
        usize::from(self.reader.channel() == 0)
    }

    /// Reads a frame at `t`: the sensor's sample into the window, the power sample at
    /// the temperature that gives. None when the frame has no power channel.
    pub fn read(&mut self, t: f64, counts: &[u32]) -> Option<(u32, Reading)> {
        let &code = counts.get(self.power_channel())?;
        match counts.get(self.reader.channel()) {
            Some(&sensor) => {
                let (kelvin, fault) = self.reader.frame(t, sensor);
                self.kelvin = kelvin;
                if let Some(fault) = fault {
                    self.fault = Some((fault, t));
                }
            }
            // A stream without the sensor's channel says nothing of the temperature.
            None => self.kelvin = None,
        }
        Some((code, self.compensation.at(self.kelvin).reading_code(code)))
    }

    /// Fractional counts read at the board's temperature now.
    pub fn reading(&mut self, counts: f64) -> Reading {
        self.compensation.at(self.kelvin).reading(counts)
    }

    /// Starts again from `cal` (a new frequency, offset or zero), keeping what the
    /// sensor has read.
    pub fn recalibrate(&mut self, cal: &Calibration) {
        self.compensation = Compensation::new(cal.clone(), Arc::clone(&self.model));
    }

    /// The temperature readings are now read at, K; None while unknown.
    pub fn kelvin(&self) -> Option<f64> {
        self.kelvin
    }

    /// The calibrated temperatures, °C.
    pub fn range_c(&self) -> (f64, f64) {
        let (lo, hi) = self.model.range_k();
        (lo - CELSIUS_ZERO_K, hi - CELSIUS_ZERO_K)
    }

    /// The temperature readings are read at while the board's is unknown, °C.
    pub fn reference_c(&self) -> f64 {
        self.model.reference_kelvin() - CELSIUS_ZERO_K
    }

    /// True when the board is outside the calibrated temperatures.
    pub fn is_outside(&self) -> bool {
        let (lo, hi) = self.model.range_k();
        self.kelvin.is_some_and(|k| !(lo..=hi).contains(&k))
    }

    /// The sensor's fault, when one came within `hold_s` of `now`.
    pub fn fault(&self, now: f64, hold_s: f64) -> Option<SensorFault> {
        self.fault
            .filter(|(_, t)| now - t < hold_s)
            .map(|(fault, _)| fault)
    }
}

/// What to check for a sensor fault, in brief for one screen line (the fault's own
/// message says it in full).
pub fn fault_check(fault: SensorFault) -> &'static str {
    match fault {
        SensorFault::Open => "check the thermistor, wiring, placement",
        SensorFault::Shorted => "check thermistor and leads for a short",
        SensorFault::AtRail => "check sensor supply, wiring, channel",
        SensorFault::Implausible => "check [temperature] settings, channel",
    }
}
