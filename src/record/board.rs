//! The detector board's temperature as rows record it: the temperature channel's samples
//! averaged over the profile's window, the temperature each interval was compensated at,
//! and the sensor faults met on the way.

use crate::adc::Adc;
use crate::calibration::{Flags, ThermalSetup};
use crate::thermal::{BoardReader, SensorFault};
use crate::units::CELSIUS_ZERO_K;

/// The columns a run with a temperature channel adds after each power column group.
pub const UNCOMPENSATED_COLUMN: &str = "uncomp_dbm";
/// The columns a run with a temperature channel adds at the end of each row.
pub const BOARD_COLUMNS: [&str; 2] = ["temp_c", "temp_flags"];

/// Faults in the order their names are written.
const FAULTS: [SensorFault; 4] = SensorFault::ALL;

/// The temperature channel of a run and what it has read.
#[derive(Debug, Clone)]
pub(crate) struct Board {
    reader: BoardReader,
    /// Since the last row: Σ kelvin·samples compensated at a known temperature, and
    /// how many samples that was.
    applied: (f64, u64),
    /// Since the last row: samples read without a known temperature.
    unknown: u64,
    /// Since the last row: which of [`FAULTS`] the sensor showed.
    faults: [bool; FAULTS.len()],
}

impl Board {
    pub(crate) fn new(setup: &ThermalSetup, adc: &Adc) -> Self {
        Board {
            reader: BoardReader::new(setup.channel, adc),
            applied: (0.0, 0),
            unknown: 0,
            faults: [false; FAULTS.len()],
        }
    }

    /// The frame index of the temperature channel.
    pub(crate) fn channel(&self) -> usize {
        self.reader.channel()
    }

    /// Takes the temperature sample of the frame at `t` (noting a fault) and gives the
    /// temperature the frame's power samples are read at (see [`BoardReader::frame`]).
    pub(crate) fn frame(&mut self, t: f64, code: u32) -> Option<f64> {
        let (kelvin, fault) = self.reader.frame(t, code);
        if let Some(i) = fault.and_then(|fault| FAULTS.iter().position(|&f| f == fault)) {
            self.faults[i] = true;
        }
        kelvin
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
            // Said with the readings' own flag name.
            names.extend(Flags::TEMP_UNKNOWN.names());
        }
        let cells = [temp_c, names.join("|")];
        self.applied = (0.0, 0);
        self.unknown = 0;
        self.faults = [false; FAULTS.len()];
        cells
    }
}

/// A stream without the temperature channel the profile names, or with no other.
#[derive(Debug, Clone, Copy, PartialEq, Eq, thiserror::Error)]
#[error(
    "the profile reads the board temperature on channel {channel} but the stream sends \
     {stream} channel(s), and at least one other must carry the detector; send the \
     temperature as channel {channel}, or change `[temperature] channel` in the profile"
)]
pub struct BoardChannel {
    /// The channel the profile names, from 1.
    pub channel: usize,
    /// Channels the stream sends.
    pub stream: usize,
}

/// Refuses a stream without the temperature channel the profile names.
pub(crate) fn check_stream(board: &Board, stream: usize) -> std::io::Result<()> {
    if board.channel() < stream && stream >= 2 {
        return Ok(());
    }
    let refused = BoardChannel {
        channel: board.channel() + 1,
        stream,
    };
    Err(std::io::Error::new(
        std::io::ErrorKind::InvalidInput,
        refused,
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
