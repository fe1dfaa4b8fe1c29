//! The temperature channel: one channel of the stream reads a temperature sensor on the
//! detector board. This module turns that channel's counts into degrees Celsius (and back,
//! for the simulator), refuses codes at the ADC's rails as sensor faults rather than
//! temperatures, and keeps the trailing mean over the averaging window.
//!
//! How counts become a sensor's quantity (unlike the detector channel, the `[adc]`
//! table's `divider` and `zero_counts` do not apply: they describe the detector's path):
//! - an NTC thermistor sits in a divider whose supply is the ADC reference, so the divider
//!   is ratiometric: ratio = volts at the pin / vref = counts / full scale, and vref
//!   cancels;
//! - a linear sensor (volts against °C) is read as pin volts, counts / full scale · vref;
//! - a digital sensor that sends degrees as a count is scaled directly; the ADC's full
//!   scale does not enter.

use std::collections::VecDeque;

use thiserror::Error;

use crate::adc::Adc;
use crate::units::CELSIUS_ZERO_K;

/// A code within this fraction of full scale of either rail (0 or full scale) is a sensor
/// fault, never a temperature.
pub const RAIL_MARGIN: f64 = 0.005;

/// The temperatures a board sensor may report, °C: the range of the common industrial
/// and automotive parts (common practice). A converted value outside it is
/// [`SensorFault::Implausible`].
pub const PLAUSIBLE_C: (f64, f64) = (-55.0, 150.0);

/// The sensor kinds by their profile names: the two NTC laws, then linear and digital.
pub const SENSOR_NAMES: [&str; 4] = ["ntc-beta", "ntc-steinhart-hart", "linear", "degrees"];

/// The most readings a [`TemperatureWindow`] holds; beyond it the oldest are dropped, so
/// at high sample rates the mean covers the newest readings of the window only.
pub const MAX_WINDOW_READINGS: usize = 65_536;

/// How an NTC thermistor's resistance follows temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum NtcLaw {
    /// R = R0 · exp(β · (1/T − 1/T0)), T in kelvin.
    Beta {
        /// Resistance at `t0_c`, ohms.
        r0_ohms: f64,
        /// The temperature R0 is given at, °C (usually 25).
        t0_c: f64,
        /// β, kelvin.
        beta_k: f64,
    },
    /// 1/T = a + b · ln R + c · (ln R)³, T in kelvin, R in ohms. Needs b > 0 and c ≥ 0 (as
    /// the profile checks), so that resistance falls as temperature rises.
    SteinhartHart {
        /// a, 1/K.
        a: f64,
        /// b, 1/K.
        b: f64,
        /// c, 1/K.
        c: f64,
    },
}

impl NtcLaw {
    /// The thermistor's resistance at `celsius`, ohms.
    pub fn ohms_at(&self, celsius: f64) -> f64 {
        let kelvin = celsius + CELSIUS_ZERO_K;
        match *self {
            NtcLaw::Beta {
                r0_ohms,
                t0_c,
                beta_k,
            } => r0_ohms * (beta_k * (1.0 / kelvin - 1.0 / (t0_c + CELSIUS_ZERO_K))).exp(),
            NtcLaw::SteinhartHart { a, b, c } => ln_ohms_of_steinhart_hart(a, b, c, kelvin).exp(),
        }
    }

    /// The temperature at which the thermistor reads `ohms`, °C.
    pub fn celsius_at(&self, ohms: f64) -> f64 {
        let ln_r = ohms.ln();
        let inverse_kelvin = match *self {
            NtcLaw::Beta {
                r0_ohms,
                t0_c,
                beta_k,
            } => 1.0 / (t0_c + CELSIUS_ZERO_K) + (ln_r - r0_ohms.ln()) / beta_k,
            NtcLaw::SteinhartHart { a, b, c } => a + b * ln_r + c * ln_r.powi(3),
        };
        1.0 / inverse_kelvin - CELSIUS_ZERO_K
    }

    /// The Steinhart–Hart (a, b, c) of a β law: β is Steinhart–Hart with c = 0, so
    /// a = 1/T0 − ln(R0)/β and b = 1/β.
    pub fn steinhart_hart_of_beta(r0_ohms: f64, t0_c: f64, beta_k: f64) -> (f64, f64, f64) {
        let a = 1.0 / (t0_c + CELSIUS_ZERO_K) - r0_ohms.ln() / beta_k;
        (a, 1.0 / beta_k, 0.0)
    }
}

/// ln R where a + b·x + c·x³ = 1/T: the one real root of the cubic (monotone for b > 0,
/// c ≥ 0), by the hyperbolic form of the depressed cubic's root, which stays accurate as
/// c goes to 0 where Cardano's sum of cube roots cancels; one Newton step polishes it.
fn ln_ohms_of_steinhart_hart(a: f64, b: f64, c: f64, kelvin: f64) -> f64 {
    let rest = a - 1.0 / kelvin;
    if c == 0.0 {
        return -rest / b;
    }
    // x³ + p·x + q = 0 with p > 0: x = −2·√(p/3)·sinh(asinh(3q/(2p)·√(3/p)) / 3).
    let (p, q) = (b / c, rest / c);
    let x = -2.0 * (p / 3.0).sqrt() * ((1.5 * q / p * (3.0 / p).sqrt()).asinh() / 3.0).sinh();
    x - (c * x.powi(3) + b * x + rest) / (3.0 * c * x * x + b)
}

/// Which leg of the divider the thermistor is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NtcPlacement {
    /// The NTC between the ADC pin and ground, the fixed resistor to the supply: the code
    /// falls as the board warms; an open NTC reads the high rail, a shorted one the low.
    ToGround,
    /// The NTC between the supply and the ADC pin, the fixed resistor to ground: the code
    /// rises as the board warms; an open NTC reads the low rail, a shorted one the high.
    ToSupply,
}

/// An NTC thermistor in a ratiometric divider with a fixed resistor.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ntc {
    /// How its resistance follows temperature.
    pub law: NtcLaw,
    /// The divider's fixed resistor, ohms.
    pub fixed_ohms: f64,
    /// Which leg the thermistor is.
    pub placement: NtcPlacement,
}

impl Ntc {
    /// The thermistor's resistance for a divider ratio (pin volts / supply volts), 0 < ratio < 1.
    pub fn ohms_at_ratio(&self, ratio: f64) -> f64 {
        match self.placement {
            NtcPlacement::ToGround => self.fixed_ohms * ratio / (1.0 - ratio),
            NtcPlacement::ToSupply => self.fixed_ohms * (1.0 - ratio) / ratio,
        }
    }

    /// The divider ratio (pin volts / supply volts) with the thermistor at `ohms`.
    pub fn ratio_at_ohms(&self, ohms: f64) -> f64 {
        match self.placement {
            NtcPlacement::ToGround => ohms / (ohms + self.fixed_ohms),
            NtcPlacement::ToSupply => self.fixed_ohms / (ohms + self.fixed_ohms),
        }
    }

    /// The fault a code at `rail` means: an open thermistor pulls the pin to the fixed
    /// resistor's end of the divider, a shorted one to its own.
    fn fault_at(&self, rail: Rail) -> SensorFault {
        match (self.placement, rail) {
            (NtcPlacement::ToGround, Rail::High) | (NtcPlacement::ToSupply, Rail::Low) => {
                SensorFault::Open
            }
            (NtcPlacement::ToGround, Rail::Low) | (NtcPlacement::ToSupply, Rail::High) => {
                SensorFault::Shorted
            }
        }
    }
}

/// A board temperature sensor and how its counts become °C.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Sensor {
    /// An NTC thermistor in a ratiometric divider.
    Ntc(Ntc),
    /// An analogue sensor whose output volts rise linearly with temperature.
    Linear {
        /// Volts per °C (either sign).
        volts_per_c: f64,
        /// Output volts at 0 °C.
        volts_at_0c: f64,
    },
    /// A digital sensor that sends degrees as a count: °C = count · c_per_count + c_at_zero.
    Degrees {
        /// °C per count.
        c_per_count: f64,
        /// °C at count 0.
        c_at_zero: f64,
    },
}

/// The rail a code sits at.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Rail {
    Low,
    High,
}

impl Sensor {
    /// The sensor kind's profile name, one of [`SENSOR_NAMES`].
    pub fn name(&self) -> &'static str {
        match self {
            Sensor::Ntc(Ntc {
                law: NtcLaw::Beta { .. },
                ..
            }) => SENSOR_NAMES[0],
            Sensor::Ntc(Ntc {
                law: NtcLaw::SteinhartHart { .. },
                ..
            }) => SENSOR_NAMES[1],
            Sensor::Linear { .. } => SENSOR_NAMES[2],
            Sensor::Degrees { .. } => SENSOR_NAMES[3],
        }
    }

    /// °C for a (possibly fractional) count, or the fault the count shows: a code at a
    /// rail (see [`RAIL_MARGIN`]; for a digital sensor, code 0) or a value outside
    /// [`PLAUSIBLE_C`].
    pub fn celsius(&self, adc: &Adc, counts: f64) -> Result<f64, SensorFault> {
        let full_scale = adc.full_scale();
        let ratio = counts / full_scale;
        let rail = rail_of(counts, full_scale);
        let celsius = match (self, rail) {
            (Sensor::Ntc(ntc), Some(rail)) => return Err(ntc.fault_at(rail)),
            (Sensor::Linear { .. }, Some(_)) => return Err(SensorFault::AtRail),
            (Sensor::Degrees { .. }, _) if counts <= 0.0 => return Err(SensorFault::AtRail),
            (Sensor::Ntc(ntc), None) => ntc.law.celsius_at(ntc.ohms_at_ratio(ratio)),
            (
                Sensor::Linear {
                    volts_per_c,
                    volts_at_0c,
                },
                None,
            ) => (ratio * adc.vref() - volts_at_0c) / volts_per_c,
            (
                Sensor::Degrees {
                    c_per_count,
                    c_at_zero,
                },
                _,
            ) => counts * c_per_count + c_at_zero,
        };
        plausible(celsius)
    }

    /// The fractional count the sensor would send at `celsius` (the inverse of
    /// [`Sensor::celsius`] away from the rails); the simulator feeds it to the stream.
    pub fn counts_for(&self, adc: &Adc, celsius: f64) -> f64 {
        let full_scale = adc.full_scale();
        match *self {
            Sensor::Ntc(ntc) => ntc.ratio_at_ohms(ntc.law.ohms_at(celsius)) * full_scale,
            Sensor::Linear {
                volts_per_c,
                volts_at_0c,
            } => (volts_at_0c + celsius * volts_per_c) / adc.vref() * full_scale,
            Sensor::Degrees {
                c_per_count,
                c_at_zero,
            } => (celsius - c_at_zero) / c_per_count,
        }
    }
}

/// The rail `counts` sits at, if within [`RAIL_MARGIN`] of one.
fn rail_of(counts: f64, full_scale: f64) -> Option<Rail> {
    let margin = RAIL_MARGIN * full_scale;
    if counts <= margin {
        Some(Rail::Low)
    } else if counts >= full_scale - margin {
        Some(Rail::High)
    } else {
        None
    }
}

fn plausible(celsius: f64) -> Result<f64, SensorFault> {
    if (PLAUSIBLE_C.0..=PLAUSIBLE_C.1).contains(&celsius) {
        Ok(celsius)
    } else {
        Err(SensorFault::Implausible)
    }
}

/// Why a temperature channel's code is not a temperature.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Error)]
pub enum SensorFault {
    /// The thermistor reads open: the code sits at the rail an open thermistor gives.
    #[error(
        "the temperature sensor reads open (its code sits at the rail an open thermistor \
         gives): check that the thermistor is fitted and soldered, its wiring to the ADC \
         pin, and `placement` in [temperature]"
    )]
    Open,
    /// The thermistor reads shorted: the code sits at the rail a shorted thermistor gives.
    #[error(
        "the temperature sensor reads shorted (its code sits at the rail a shorted \
         thermistor gives): check the thermistor and its leads for a short or a solder \
         bridge, and `placement` in [temperature]"
    )]
    Shorted,
    /// The code sits at a rail of the ADC (a linear sensor at either rail, a digital one
    /// sending 0).
    #[error(
        "the temperature channel sits at a rail of the ADC: check the sensor's supply and \
         wiring, and that `channel` in [temperature] names the sensor's channel"
    )]
    AtRail,
    /// The code converts to a temperature outside −55 to 150 °C.
    #[error(
        "the temperature channel converts to a value outside -55 to 150 °C: check the \
         sensor's settings in [temperature] (kind, coefficients, fixed resistor) and that \
         `channel` names the sensor's channel"
    )]
    Implausible,
}

impl SensorFault {
    /// Every fault, in the order a log's `temp_flags` cell names them.
    pub const ALL: [SensorFault; 4] = [
        SensorFault::Open,
        SensorFault::Shorted,
        SensorFault::AtRail,
        SensorFault::Implausible,
    ];

    /// A short name for a log cell or a screen.
    pub fn short_name(self) -> &'static str {
        match self {
            SensorFault::Open => "sensor-open",
            SensorFault::Shorted => "sensor-short",
            SensorFault::AtRail => "sensor-rail",
            SensorFault::Implausible => "sensor-implausible",
        }
    }
}

/// The stream's temperature channel, from a profile's `[temperature]` table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TemperatureChannel {
    /// 0-based index of the channel in a frame (the profile writes it 1-based).
    pub channel: usize,
    /// The sensor and how its counts become °C.
    pub sensor: Sensor,
    /// The averaging window, seconds.
    pub window_s: f64,
    /// Standard uncertainty of the board temperature, °C.
    pub u_c: f64,
}

impl TemperatureChannel {
    /// °C for one code of the channel, or the fault it shows.
    pub fn celsius(&self, adc: &Adc, code: u32) -> Result<f64, SensorFault> {
        self.sensor.celsius(adc, f64::from(code))
    }

    /// °C from a frame's counts (one per channel); `None` when the frame has no such
    /// channel.
    pub fn celsius_in_frame(&self, adc: &Adc, counts: &[u32]) -> Option<Result<f64, SensorFault>> {
        counts
            .get(self.channel)
            .map(|&code| self.celsius(adc, code))
    }

    /// The fractional count the channel would read at `celsius`.
    pub fn counts_for(&self, adc: &Adc, celsius: f64) -> f64 {
        self.sensor.counts_for(adc, celsius)
    }

    /// An empty averaging window of this channel's length.
    pub fn window(&self) -> TemperatureWindow {
        TemperatureWindow::new(self.window_s)
    }
}

/// The trailing mean of the temperatures read over the last `window_s` seconds: a reading
/// at time t0 counts while t0 > t − window_s, t the newest reading's time (the newest
/// always counts). Amortised O(1) a reading through a running sum, which is summed afresh
/// after as many evictions as the window holds, so rounding cannot build up; at most
/// [`MAX_WINDOW_READINGS`] readings are held.
#[derive(Debug, Clone)]
pub struct TemperatureWindow {
    window_s: f64,
    readings: VecDeque<(f64, f64)>,
    sum: f64,
    evicted_since_sum: usize,
}

impl TemperatureWindow {
    /// An empty window `window_s` seconds long.
    pub fn new(window_s: f64) -> Self {
        TemperatureWindow {
            window_s,
            readings: VecDeque::new(),
            sum: 0.0,
            evicted_since_sum: 0,
        }
    }

    /// The window's length, seconds.
    pub fn window_s(&self) -> f64 {
        self.window_s
    }

    /// Adds the reading `celsius` taken at `t` seconds and drops those that left the
    /// window. A time before the newest reading's starts the window afresh (the source's
    /// clock restarted); a non-finite time or value is ignored.
    pub fn push(&mut self, t: f64, celsius: f64) {
        if !(t.is_finite() && celsius.is_finite()) {
            return;
        }
        if self.readings.back().is_some_and(|&(newest, _)| t < newest) {
            self.clear();
        }
        self.readings.push_back((t, celsius));
        self.sum += celsius;
        while self.readings.len() > MAX_WINDOW_READINGS || self.oldest_has_left(t) {
            self.evict_oldest();
        }
    }

    /// True when the oldest reading, not the only one, has left the window ending at `t`.
    fn oldest_has_left(&self, t: f64) -> bool {
        self.readings.len() > 1
            && self
                .readings
                .front()
                .is_some_and(|&(t0, _)| t0 <= t - self.window_s)
    }

    fn evict_oldest(&mut self) {
        let Some((_, celsius)) = self.readings.pop_front() else {
            return;
        };
        self.sum -= celsius;
        self.evicted_since_sum += 1;
        if self.evicted_since_sum >= self.readings.len() {
            self.sum = self.readings.iter().map(|&(_, c)| c).sum();
            self.evicted_since_sum = 0;
        }
    }

    /// The mean of the readings in the window, °C; `None` before the first.
    pub fn mean(&self) -> Option<f64> {
        (!self.readings.is_empty()).then(|| self.sum / self.readings.len() as f64)
    }

    /// How many readings the window holds.
    pub fn len(&self) -> usize {
        self.readings.len()
    }

    /// True before the first reading and after [`TemperatureWindow::clear`].
    pub fn is_empty(&self) -> bool {
        self.readings.is_empty()
    }

    /// Forgets every reading.
    pub fn clear(&mut self) {
        self.readings.clear();
        self.sum = 0.0;
        self.evicted_since_sum = 0;
    }
}

/// How often the temperature that readings are compensated at is taken from the
/// window, seconds of source time. A choice: far faster than any board warms, and fixed
/// in source time so that what is read does not depend on how the samples were chunked on
/// their way.
pub const TEMPERATURE_TICK_S: f64 = 0.1;

/// The board's temperature as a stream gives it, frame by frame: each sample of the
/// temperature channel into the mean of its tick of [`TEMPERATURE_TICK_S`], the ticks'
/// means into the window, and for each frame the temperature its power samples are read
/// at: the window's mean as the frame's tick began.
#[derive(Debug, Clone)]
pub struct BoardReader {
    channel: TemperatureChannel,
    adc: Adc,
    /// Each ADC code's temperature or fault, worked out once (empty for a sensor that
    /// sends degrees, whose codes are not the ADC's).
    by_code: Vec<Result<f64, SensorFault>>,
    /// The means of the ticks of the last `window_s` seconds, each at its tick's start.
    window: TemperatureWindow,
    tick: Option<Tick>,
}

/// Ticks a second (the inverse of [`TEMPERATURE_TICK_S`]).
const TICKS_PER_S: f64 = 10.0;

/// The tick of source time now running.
#[derive(Debug, Clone, Copy)]
struct Tick {
    /// Its number: t·[`TICKS_PER_S`] rounded down, held as a whole float so that the test
    /// of a frame against it agrees with the rounding down of the frame's own.
    number: f64,
    /// The temperature its frames are read at, K.
    held: Option<f64>,
    /// The window was empty as it began: its first reading is the one held.
    first_held: bool,
    /// Its good readings' sum, °C, and their number.
    sum: f64,
    readings: u32,
}

impl BoardReader {
    /// A reader of `channel`, whose codes are those of `adc`.
    pub fn new(channel: TemperatureChannel, adc: &Adc) -> Self {
        let by_code = match channel.sensor {
            Sensor::Degrees { .. } => Vec::new(),
            _ => (0..=adc.full_scale() as u32)
                .map(|code| channel.celsius(adc, code))
                .collect(),
        };
        BoardReader {
            window: channel.window(),
            channel,
            adc: adc.clone(),
            by_code,
            tick: None,
        }
    }

    /// The frame index of the temperature channel.
    pub fn channel(&self) -> usize {
        self.channel.channel
    }

    /// Takes the temperature sample `code` of the frame at `t`. Gives the temperature the
    /// frame's power samples are read at, K (the window's mean as the frame's tick began;
    /// with an empty window then, the tick's first reading; None while unknown), and the
    /// sample's fault, if it shows one.
    pub fn frame(&mut self, t: f64, code: u32) -> (Option<f64>, Option<SensorFault>) {
        let read = match self.by_code.get(code as usize) {
            Some(read) => *read,
            None => self.channel.celsius(&self.adc, code),
        };
        let at = t * TICKS_PER_S;
        let tick = match self.tick {
            Some(tick) if at >= tick.number && at < tick.number + 1.0 => self.tick.as_mut(),
            _ => Some(self.begin_tick(at.floor())),
        }
        .expect("a tick runs");
        match read {
            Ok(celsius) => {
                tick.sum += celsius;
                tick.readings += 1;
                if tick.first_held {
                    tick.held = Some(celsius + CELSIUS_ZERO_K);
                    tick.first_held = false;
                }
                (tick.held, None)
            }
            Err(fault) => (tick.held, Some(fault)),
        }
    }

    /// Closes the tick that ran (its mean into the window, at its start) and begins the
    /// tick `number`.
    fn begin_tick(&mut self, number: f64) -> &mut Tick {
        if let Some(done) = self.tick.filter(|done| done.readings > 0) {
            let mean = done.sum / f64::from(done.readings);
            self.window.push(done.number / TICKS_PER_S, mean);
        }
        let held = self.window.mean().map(|c| c + CELSIUS_ZERO_K);
        self.tick.insert(Tick {
            number,
            held,
            first_held: held.is_none(),
            sum: 0.0,
            readings: 0,
        })
    }
}

#[cfg(test)]
mod tests;
