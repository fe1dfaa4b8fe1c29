//! The detector board's temperature as rows record it: the temperature channel's samples
//! averaged over the profile's window, the temperature each interval was compensated at,
//! and the sensor faults met on the way.

use crate::adc::Adc;
use crate::calibration::ThermalSetup;
use crate::thermal::{SensorFault, TemperatureChannel, TemperatureWindow};
use crate::units::CELSIUS_ZERO_K;

/// The columns a run with a temperature channel adds after each power column group.
pub const UNCOMPENSATED_COLUMN: &str = "uncomp_dbm";
/// The columns a run with a temperature channel adds at the end of each row.
pub const BOARD_COLUMNS: [&str; 2] = ["temp_c", "temp_flags"];
/// A `temp_flags` name: some samples were read without a known board temperature.
pub const TEMP_UNKNOWN: &str = "temp-unknown";

/// How often the temperature readings are compensated at is taken from the window,
/// seconds of source time. A choice: far faster than any board warms, and fixed in source
/// time so that rows do not depend on how the samples were chunked on their way.
pub const TEMPERATURE_TICK_S: f64 = 0.1;

/// Faults in the order their names are written.
const FAULTS: [SensorFault; 4] = [
    SensorFault::Open,
    SensorFault::Shorted,
    SensorFault::AtRail,
    SensorFault::Implausible,
];

/// The temperature channel of a run and what it has read.
#[derive(Debug, Clone)]
pub(crate) struct Board {
    channel: TemperatureChannel,
    adc: Adc,
    window: TemperatureWindow,
    /// Since the last row: Σ kelvin·samples compensated at a known temperature, and
    /// how many samples that was.
    applied: (f64, u64),
    /// Since the last row: samples read without a known temperature.
    unknown: u64,
    /// Since the last row: which of [`FAULTS`] the sensor showed.
    faults: [bool; FAULTS.len()],
    /// The tick (of [`TEMPERATURE_TICK_S`]) now running, and the temperature its samples
    /// are read at, K.
    tick: Option<(i64, Option<f64>)>,
}

impl Board {
    pub(crate) fn new(setup: &ThermalSetup, adc: &Adc) -> Self {
        Board {
            channel: setup.channel,
            adc: adc.clone(),
            window: setup.channel.window(),
            applied: (0.0, 0),
            unknown: 0,
            faults: [false; FAULTS.len()],
            tick: None,
        }
    }

    /// Takes the temperature sample of the frame at `t` and gives the temperature the
    /// frame's power samples are read at, K: the window's mean as the frame's tick
    /// began (with an empty window, the tick's first reading); None while unknown.
    pub(crate) fn frame(&mut self, t: f64, code: u32) -> Option<f64> {
        let tick = (t / TEMPERATURE_TICK_S).floor() as i64;
        let running = self.tick.filter(|(at, _)| *at == tick);
        let held_before = running.map_or_else(|| self.kelvin(), |(_, held)| held);
        self.take(t, code);
        let held = match running {
            Some((_, held)) => held,
            None => held_before.or_else(|| self.kelvin()),
        };
        self.tick = Some((tick, held));
        held
    }

    /// The frame index of the temperature channel.
    pub(crate) fn channel(&self) -> usize {
        self.channel.channel
    }

    /// Takes the temperature sample of one frame taken at `t`.
    fn take(&mut self, t: f64, code: u32) {
        match self.channel.celsius(&self.adc, code) {
            Ok(celsius) => self.window.push(t, celsius),
            Err(fault) => {
                if let Some(i) = FAULTS.iter().position(|&f| f == fault) {
                    self.faults[i] = true;
                }
            }
        }
    }

    /// The board's temperature now, K: the window's mean; None before a good reading.
    fn kelvin(&self) -> Option<f64> {
        self.window.mean().map(|c| c + CELSIUS_ZERO_K)
    }

    /// Notes that `samples` power samples were read at `kelvin`.
    pub(crate) fn applied(&mut self, kelvin: Option<f64>, samples: usize) {
        match kelvin {
            Some(k) => {
                self.applied.0 += k * samples as f64;
                self.applied.1 += samples as u64;
            }
            None => self.unknown += samples as u64,
        }
    }

    /// The mean temperature the samples since the last row were read at, K.
    pub(crate) fn row_kelvin(&self) -> Option<f64> {
        let (sum, n) = self.applied;
        (n > 0).then(|| sum / n as f64)
    }

    /// The row's `temp_c` and `temp_flags` cells; starts the next row afresh.
    pub(crate) fn take_cells(&mut self) -> [String; 2] {
        let temp_c = self
            .row_kelvin()
            .map_or(String::new(), |k| format!("{:.3}", k - CELSIUS_ZERO_K));
        let mut names: Vec<&str> = FAULTS
            .iter()
            .zip(self.faults)
            .filter(|(_, seen)| *seen)
            .map(|(f, _)| f.short_name())
            .collect();
        if self.unknown > 0 {
            names.push(TEMP_UNKNOWN);
        }
        let cells = [temp_c, names.join("|")];
        self.applied = (0.0, 0);
        self.unknown = 0;
        self.faults = [false; FAULTS.len()];
        cells
    }
}

/// Refuses a stream without the temperature channel the profile names.
pub(crate) fn check_stream(board: &Board, stream: usize) -> std::io::Result<()> {
    if board.channel() < stream && stream >= 2 {
        return Ok(());
    }
    let message = format!(
        "the profile reads the board temperature on channel {} but the stream sends {stream} \
         channel(s), and at least one must be a power channel; send the temperature as \
         channel {} or change `[temperature] channel` in the profile",
        board.channel() + 1,
        board.channel() + 1,
    );
    Err(std::io::Error::new(
        std::io::ErrorKind::InvalidInput,
        message,
    ))
}

/// The `# temperature:` line of a run whose calibration reads the board's temperature
/// (nothing otherwise): the channel and sensor, the window, the calibrated range and what
/// an uncompensated reading assumes.
pub(crate) fn context_line(cal: &crate::calibration::Calibration) -> String {
    let Some(setup) = cal.thermal() else {
        return String::new();
    };
    let (lo, hi) = setup.model.range_k();
    format!(
        "# temperature: channel {}, {} sensor, averaged over {} s (±{} °C); calibrated {:.2} \
         to {:.2} °C; readings compensated, {UNCOMPENSATED_COLUMN} read as calibrated at \
         {:.2} °C\n",
        setup.channel.channel + 1,
        setup.channel.sensor.name(),
        setup.channel.window_s,
        setup.channel.u_c,
        lo - CELSIUS_ZERO_K,
        hi - CELSIUS_ZERO_K,
        setup.model.reference_kelvin() - CELSIUS_ZERO_K,
    )
}
