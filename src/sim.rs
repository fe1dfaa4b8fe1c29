//! The built-in simulator: a physical model from the true power at the device under test to
//! the counts an ADC would read. A scenario sets the true power (and frequency) over time;
//! the attenuator or coupler of the profile takes its offset off; the detector, with its
//! frequency roll-off and (for a diode) its temperature, turns power into volts; the ADC
//! adds noise, quantises and clips. Deterministic for a given seed.

use std::sync::Arc;

use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use rand_pcg::Pcg64;

use crate::adc::Adc;
use crate::correction::{FrequencyCorrection, Offset};
use crate::detector::thermal::ThermalModel;
use crate::detector::{Detector, DiodeDetector, ModelKind};
use crate::profile::Profile;
use crate::thermal::{Sensor, TemperatureChannel};
use crate::units::CELSIUS_ZERO_K;

pub mod matching;

use matching::{ArmDrive, MatchBench};

/// How often the simulated board reads its temperature sensor, seconds: a thermistor
/// moves far slower than the detector, and a board that reads it once a millisecond sends
/// that reading with every frame until the next (at 1000 frames/s or fewer, every frame
/// has its own).
pub const SENSOR_READ_S: f64 = 1e-3;

/// The board's temperature for a profile that says nothing of its own, K.
const DEFAULT_BOARD_K: f64 = 300.0;

/// ADC noise of the simulated board, in counts (standard deviation).
pub const NOISE_COUNTS: f64 = 0.7;

/// What the simulated bench is doing. Every story is invented for the demo.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scenario {
    /// A transmitter's power amplifier warming up into a dummy load.
    Soak,
    /// A trimmer being turned through the peak of a filter's passband, and back.
    Tune,
    /// The frequency stepped across a band at constant power.
    Sweep,
    /// A steady carrier with short bursts that overdrive the detector.
    Overload,
    /// A matching network adjusted by hand, read through a directional coupler.
    Match,
}

/// The frequencies of the sweep scenario, Hz, five seconds each.
const SWEEP_STEPS_HZ: [f64; 8] = [1e6, 10e6, 30e6, 50e6, 100e6, 146e6, 250e6, 440e6];

impl Scenario {
    /// Every scenario.
    pub const ALL: [Scenario; 5] = [
        Scenario::Soak,
        Scenario::Tune,
        Scenario::Sweep,
        Scenario::Overload,
        Scenario::Match,
    ];

    /// Its name on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Scenario::Soak => "soak",
            Scenario::Tune => "tune",
            Scenario::Sweep => "sweep",
            Scenario::Overload => "overload",
            Scenario::Match => "match",
        }
    }

    /// The scenario for a name.
    pub fn from_name(name: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|s| s.name() == name)
    }

    /// The invented bench story behind it.
    pub fn story(self) -> &'static str {
        match self {
            Scenario::Soak => "a 2 m transmitter's 1 W amplifier warming up on a dummy load: power settles over minutes, then drifts slowly down",
            Scenario::Tune => "a trimmer on a home-made 2 m band-pass filter turned through the passband peak and back, every 40 s",
            Scenario::Sweep => "a +20 dBm carrier stepped from 1 MHz to 440 MHz, five seconds a step, showing the detector's roll-off",
            Scenario::Overload => "a steady +25 dBm carrier with a 1.5 s burst to +40 dBm every 20 s that overdrives the detector",
            Scenario::Match => "a 10 W 2 m transmitter feeding an antenna through an L-network whose capacitor is turned by hand through the match and back every 30 s, read through a directional coupler with a detector on each arm",
        }
    }

    /// True when the scenario reads two detectors on a coupler, so it needs a coupler
    /// set-up rather than one detector's profile.
    pub fn needs_coupler(self) -> bool {
        matches!(self, Scenario::Match)
    }

    /// The frequency the scenario runs at for most of its time, Hz.
    pub fn frequency_hz(self) -> f64 {
        match self {
            Scenario::Sweep => SWEEP_STEPS_HZ[0],
            Scenario::Match => matching::MATCH_HZ,
            _ => 146e6,
        }
    }

    /// The frequency at time `t` seconds.
    pub fn frequency_at(self, t: f64) -> f64 {
        match self {
            Scenario::Sweep => SWEEP_STEPS_HZ[((t / 5.0) as usize) % SWEEP_STEPS_HZ.len()],
            _ => self.frequency_hz(),
        }
    }

    /// The true power at the reference plane at time `t` seconds, dBm. For `match`, the
    /// forward power at the load: what one detector in place of the coupler's forward arm
    /// would be calibrated to read.
    pub fn true_dbm(self, t: f64) -> f64 {
        match self {
            Scenario::Soak => 30.0 - 0.8 * (-t / 480.0).exp() - 0.12 * t / 3600.0,
            Scenario::Tune => {
                let phase = (t / 40.0).fract();
                let knob = if phase < 0.5 {
                    2.0 * phase
                } else {
                    2.0 - 2.0 * phase
                };
                27.0 - 30.0 * (knob - 0.62).powi(2)
            }
            Scenario::Sweep => 20.0,
            Scenario::Overload => {
                let in_burst = t >= 10.0 && (t - 10.0) % 20.0 < 1.5;
                if in_burst {
                    40.0
                } else {
                    25.0
                }
            }
            Scenario::Match => matching::forward_at_load_dbm(t),
        }
    }

    /// The detector board's temperature at time `t`, kelvin (it warms with the soak).
    pub fn board_kelvin(self, t: f64, ambient: f64) -> f64 {
        match self {
            Scenario::Soak => ambient + 6.0 * (1.0 - (-t / 900.0).exp()),
            _ => ambient,
        }
    }
}

/// How the profile's detector moves with temperature: its model across temperature, or
/// for a diode without one its saturation law from its calibration temperature.
fn profile_thermal(profile: &Profile) -> Option<Arc<ThermalModel>> {
    if let Some(thermal) = &profile.model.thermal {
        return Some(Arc::clone(thermal));
    }
    let model = &profile.model;
    match (model.kind, model.param("n"), model.param("vl")) {
        (ModelKind::Diode, Some(n), Some(vl)) => {
            let span = model.detector.span_dbm();
            let diode = DiodeDetector::new(
                n,
                vl,
                profile.raw.model.temperature.unwrap_or(300.0),
                profile.ohms,
                span,
            )
            .with_law(profile.diode_law());
            Some(Arc::new(ThermalModel::diode(diode, span, &[])))
        }
        _ => None,
    }
}

/// The simulated board's temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum BoardTemperature {
    /// As the scenario warms it from the calibration temperature.
    Scenario,
    /// Held at this many kelvin.
    Held(f64),
}

/// Where a simulator's true power comes from.
#[derive(Debug, Clone)]
enum Drive {
    /// A scenario's, at the profile's reference plane.
    Story(Scenario),
    /// One arm of the simulated matching bench.
    Arm(ArmDrive),
}

/// A simulated detector and ADC running a scenario.
#[derive(Debug, Clone)]
pub struct Simulator {
    scenario: Scenario,
    drive: Drive,
    rate_hz: f64,
    adc: Adc,
    detector: Arc<dyn Detector>,
    /// How the detector moves with the board's temperature, when the profile says.
    thermal: Option<Arc<ThermalModel>>,
    board: BoardTemperature,
    /// The channel the board's temperature sensor is streamed on, when the profile
    /// reads one.
    sensor: Option<TemperatureChannel>,
    correction: Option<FrequencyCorrection>,
    offset: Offset,
    rng: Pcg64,
    noise: Normal<f64>,
    index: u64,
    knots: (f64, f64, f64, f64),
    /// The detector's counts of a fill, before they are laid out in frames.
    scratch: Vec<u32>,
    /// The board sensor's latest reading, sent again until the next.
    sensor_last: Option<u32>,
}

/// How often the exact forward model is evaluated, seconds of simulated time; between
/// evaluations the ideal count is interpolated linearly, since every scenario changes
/// slowly on that scale (and a burst's edge then rises within 10 ms, as a detector's
/// output filter would).
pub const MODEL_STEP_S: f64 = 0.01;

impl Simulator {
    /// A simulator of the detector described by `profile`, sampling at `rate_hz`.
    pub fn new(profile: &Profile, scenario: Scenario, rate_hz: f64, seed: u64) -> Self {
        Self::driven(profile, Drive::Story(scenario), scenario, rate_hz, seed)
    }

    /// A simulator of one arm of the matching bench, the arm's power from `drive`.
    fn of_arm(profile: &Profile, drive: ArmDrive, rate_hz: f64, seed: u64) -> Self {
        let mut arm = Self::driven(profile, Drive::Arm(drive), Scenario::Match, rate_hz, seed);
        // The bench streams each arm as one channel.
        arm.sensor = None;
        arm
    }

    fn driven(
        profile: &Profile,
        drive: Drive,
        scenario: Scenario,
        rate_hz: f64,
        seed: u64,
    ) -> Self {
        let thermal = profile_thermal(profile);
        Simulator {
            scenario,
            drive,
            rate_hz,
            adc: profile.adc.clone(),
            detector: Arc::clone(&profile.model.detector),
            thermal,
            board: BoardTemperature::Scenario,
            sensor: profile.temperature,
            correction: profile.frequency_correction.clone(),
            offset: profile.offset.clone(),
            rng: Pcg64::seed_from_u64(seed),
            noise: Normal::new(0.0, NOISE_COUNTS).expect("a positive constant deviation"),
            index: 0,
            knots: (f64::NAN, f64::NAN, f64::NAN, f64::NAN),
            scratch: Vec::new(),
            sensor_last: None,
        }
    }

    /// The noise-free count at `t`, from the exact model at the surrounding knots.
    fn ideal_counts(&mut self, t: f64) -> f64 {
        self.cover(t);
        let (ta, ca, tb, cb) = self.knots;
        ca + (cb - ca) * ((t - ta) / (tb - ta)).clamp(0.0, 1.0)
    }

    /// Makes the knots surround `t`, reusing the previous end knot when moving on by one.
    fn cover(&mut self, t: f64) {
        let (ta, _, tb, cb) = self.knots;
        if t >= ta && t < tb {
            return;
        }
        let start = (t / MODEL_STEP_S).floor() * MODEL_STEP_S;
        let end = start + MODEL_STEP_S;
        let exact = |t: f64| self.adc.counts(self.detector_volts(t));
        let at_start = if (start - tb).abs() < 1e-9 {
            cb
        } else {
            exact(start)
        };
        self.knots = (start, at_start, end, exact(end));
    }

    /// Noise, rounding and clip on an ideal count.
    #[inline]
    fn quantise(&mut self, ideal: f64) -> u32 {
        let noisy = ideal + self.noise.sample(&mut self.rng);
        // Adding one half and truncating rounds a non-negative value (and stays inlined).
        (noisy.clamp(0.0, self.adc.full_scale()) + 0.5) as u32
    }

    /// Appends the next `n` frames to `out` ([`Simulator::channels`] counts each);
    /// returns the time of the first. The detector's counts are those `n` calls of
    /// `next_sample` give, made knot interval by knot interval; the board's sensor, when
    /// streamed, reads the board's temperature with the same ADC noise.
    pub fn fill(&mut self, n: usize, out: &mut Vec<u32>) -> f64 {
        let Some(sensor) = self.sensor else {
            return self.fill_detector(n, out);
        };
        let mut power = std::mem::take(&mut self.scratch);
        power.clear();
        let t0 = self.fill_detector(n, &mut power);
        let width = self.channels();
        out.reserve(n * width);
        let dt = 1.0 / self.rate_hz;
        let top = match sensor.sensor {
            Sensor::Degrees { .. } => f64::from(u32::MAX),
            _ => self.adc.full_scale(),
        };
        // The index of the first frame, for the sensor's own rhythm.
        let first = self.index - n as u64;
        let every = self.frames_per_sensor_read();
        // Frames until the sensor is read again (0: this one), counted down rather than
        // taken modulo `every` each frame.
        let mut until_read = (every - first % every) % every;
        let mut temperature = self.sensor_last;
        let mut k = 0;
        while k < n {
            // The board moves slowly: its sensor's ideal count is worked out once a model
            // step (a board that warms 6 K in 15 min moves 0.1 mK in one).
            let t = t0 + k as f64 * dt;
            let step = (t / MODEL_STEP_S).floor();
            let kelvin = self
                .board_kelvin(step * MODEL_STEP_S)
                .unwrap_or(DEFAULT_BOARD_K);
            let ideal = sensor.counts_for(&self.adc, kelvin - CELSIUS_ZERO_K);
            let step_end = ((step + 1.0) * MODEL_STEP_S - t0) / dt;
            let until = (step_end.ceil().max(k as f64 + 1.0) as usize).min(n);
            for &count in &power[k..until] {
                if temperature.is_none() || until_read == 0 {
                    let noisy = ideal + self.noise.sample(&mut self.rng);
                    temperature = Some((noisy.clamp(0.0, top) + 0.5) as u32);
                }
                until_read = if until_read == 0 { every } else { until_read } - 1;
                let temperature = temperature.unwrap_or_default();
                match (width, sensor.channel) {
                    (2, 1) => out.extend_from_slice(&[count, temperature]),
                    (2, 0) => out.extend_from_slice(&[temperature, count]),
                    _ => out.extend((0..width).map(|ch| {
                        if ch == sensor.channel {
                            temperature
                        } else {
                            count
                        }
                    })),
                }
            }
            k = until;
        }
        self.scratch = power;
        self.sensor_last = temperature;
        t0
    }

    /// Frames a reading of the board's sensor lasts: the board reads it once every
    /// [`SENSOR_READ_S`] (every frame when frames come slower).
    fn frames_per_sensor_read(&self) -> u64 {
        ((self.rate_hz * SENSOR_READ_S).round() as u64).max(1)
    }

    /// The detector's next `n` counts.
    fn fill_detector(&mut self, n: usize, out: &mut Vec<u32>) -> f64 {
        let t0 = self.index as f64 / self.rate_hz;
        out.reserve(n);
        let mut left = n as u64;
        while left > 0 {
            let t = self.index as f64 / self.rate_hz;
            self.cover(t);
            let (ta, ca, tb, cb) = self.knots;
            // Samples from here up to the end knot.
            let until = ((tb * self.rate_hz).ceil() as u64).max(self.index + 1);
            let take = (until - self.index).min(left);
            let per_second = (cb - ca) / (tb - ta);
            for k in 0..take {
                let t = (self.index + k) as f64 / self.rate_hz;
                let ideal = ca + per_second * (t - ta).clamp(0.0, tb - ta);
                let count = self.quantise(ideal);
                out.push(count);
            }
            self.index += take;
            left -= take;
        }
        t0
    }

    /// The scenario it runs.
    pub fn scenario(&self) -> Scenario {
        self.scenario
    }

    /// Samples per second of simulated time.
    pub fn rate_hz(&self) -> f64 {
        self.rate_hz
    }

    /// The detector output the scenario gives at time `t`, before the ADC.
    pub fn detector_volts(&self, t: f64) -> f64 {
        let (hz, true_dbm) = match &self.drive {
            Drive::Story(scenario) => (scenario.frequency_at(t), scenario.true_dbm(t)),
            Drive::Arm(arm) => (arm.hz(), arm.true_dbm(t)),
        };
        let at_detector = true_dbm - self.offset.at(hz).db;
        // The correction is true minus indicated, so the detector indicates that much less.
        let indicated = at_detector - self.correction.as_ref().map_or(0.0, |c| c.at(hz).db);
        match (&self.thermal, self.board_kelvin(t)) {
            (Some(thermal), Some(kelvin)) if kelvin != thermal.reference_kelvin() => {
                thermal.at_kelvin(kelvin).detector.volts_at(indicated)
            }
            _ => self.detector.volts_at(indicated),
        }
    }

    /// The board's temperature at `t`, K: held, or as the scenario warms it from the
    /// calibration temperature (an arm of the matching bench stays there). None when
    /// the profile says nothing of temperature.
    pub fn board_kelvin(&self, t: f64) -> Option<f64> {
        let calibrated = self.thermal.as_ref()?.reference_kelvin();
        match (self.board, &self.drive) {
            (BoardTemperature::Held(kelvin), _) => Some(kelvin),
            (BoardTemperature::Scenario, Drive::Story(scenario)) => {
                Some(scenario.board_kelvin(t, calibrated))
            }
            (BoardTemperature::Scenario, Drive::Arm(_)) => Some(calibrated),
        }
    }

    /// The same simulator with its board held at `kelvin`.
    pub fn with_board(mut self, board: BoardTemperature) -> Self {
        self.board = board;
        self.knots = (f64::NAN, f64::NAN, f64::NAN, f64::NAN);
        self
    }

    /// Channels a frame holds: the detector's, and the board's temperature sensor's
    /// when the profile reads one (every channel but the sensor's carries the detector).
    pub fn channels(&self) -> usize {
        match &self.sensor {
            Some(sensor) => (sensor.channel + 1).max(2),
            None => 1,
        }
    }

    /// The next sample: its time in seconds and the count the ADC reads.
    pub fn next_sample(&mut self) -> (f64, u32) {
        let t = self.index as f64 / self.rate_hz;
        self.index += 1;
        let ideal = self.ideal_counts(t);
        (t, self.quantise(ideal))
    }
}

/// A simulated source: one detector running a scenario, or the matching bench's two
/// detectors read as two channels of one stream.
// One bench is made per run and moved once onto its thread, so the larger variant's
// size costs nothing and a box would only add an indirection to every fill.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone)]
pub enum SimBench {
    /// One detector and its ADC.
    One(Simulator),
    /// The `match` scenario's coupler, a detector on each arm.
    Match(MatchBench),
}

impl SimBench {
    /// Appends the next `n` samples to `out`, [`SimBench::channels`] counts each;
    /// returns the time of the first.
    pub fn fill(&mut self, n: usize, out: &mut Vec<u32>) -> f64 {
        match self {
            SimBench::One(sim) => sim.fill(n, out),
            SimBench::Match(bench) => bench.fill(n, out),
        }
    }

    /// Channels per sample.
    pub fn channels(&self) -> usize {
        match self {
            SimBench::One(sim) => sim.channels(),
            SimBench::Match(bench) => bench.channels(),
        }
    }

    /// Samples per second of simulated time.
    pub fn rate_hz(&self) -> f64 {
        match self {
            SimBench::One(sim) => sim.rate_hz(),
            SimBench::Match(bench) => bench.rate_hz(),
        }
    }

    /// The scenario it runs.
    pub fn scenario(&self) -> Scenario {
        match self {
            SimBench::One(sim) => sim.scenario(),
            SimBench::Match(_) => Scenario::Match,
        }
    }
}

impl From<Simulator> for SimBench {
    fn from(sim: Simulator) -> Self {
        SimBench::One(sim)
    }
}

impl From<MatchBench> for SimBench {
    fn from(bench: MatchBench) -> Self {
        SimBench::Match(bench)
    }
}

/// What a simulated bench's detector is, for calibrating it by hand.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BenchDetector {
    /// A Schottky diode peak detector.
    Diode,
    /// A logarithmic-amplifier detector.
    LogAmp,
}

/// The hidden truth of a simulated bench: a signal generator straight into a detector the
/// user has never seen the curve of, read by a 12-bit ADC. Invented for the demo.
#[derive(Debug, Clone)]
pub struct SignalBench {
    detector: Arc<dyn Detector>,
    adc: Adc,
    rate_hz: f64,
    rng: Pcg64,
    noise: Normal<f64>,
    index: u64,
    volts: f64,
    target_volts: f64,
    /// The detector's first-order roll-off corner, Hz (junction capacitance).
    corner_hz: f64,
}

/// The time constant of the detector's output filter, seconds: each new level settles.
const BENCH_TAU_S: f64 = 0.03;

/// What the diode bench's ADC reads with RF off, counts: the input offset a real board
/// has, which calibrate's zero step measures (invented for the demo).
pub const BENCH_ZERO_COUNTS: f64 = 3.0;

impl SignalBench {
    /// A bench with the given detector, sampled at `rate_hz`.
    pub fn new(kind: BenchDetector, rate_hz: f64, seed: u64) -> Self {
        let (detector, adc, corner_hz): (Arc<dyn Detector>, Adc, f64) = match kind {
            BenchDetector::Diode => (
                Arc::new(DiodeDetector::new(1.08, 0.55, 300.0, 50.0, (-30.0, 18.0))),
                Adc::new(
                    12,
                    1.2,
                    2.0,
                    BENCH_ZERO_COUNTS,
                    crate::adc::DEFAULT_CLIP_MARGIN,
                ),
                700e6,
            ),
            BenchDetector::LogAmp => (
                Arc::new(crate::detector::LogAmpDetector::new(
                    0.0242,
                    -86.5,
                    (-70.0, 10.0),
                )),
                Adc::new(12, 3.3, 1.0, 0.0, crate::adc::DEFAULT_CLIP_MARGIN),
                2.5e9,
            ),
        };
        SignalBench {
            detector,
            adc,
            rate_hz,
            rng: Pcg64::seed_from_u64(seed),
            noise: Normal::new(0.0, NOISE_COUNTS).expect("a positive constant deviation"),
            index: 0,
            volts: 0.0,
            target_volts: 0.0,
            corner_hz,
        }
    }

    /// The ADC the bench uses (what a user would read off the board).
    pub fn adc(&self) -> &Adc {
        &self.adc
    }

    /// How much the detector reads low at `hz` (true minus indicated), dB.
    pub fn rolloff_db(&self, hz: f64) -> f64 {
        10.0 * (1.0 + (hz / self.corner_hz).powi(2)).log10()
    }

    /// The detector output, volts, for `dbm` applied at `hz` (None: signal off).
    pub fn volts_for(&self, applied: Option<(f64, f64)>) -> f64 {
        applied.map_or(0.0, |(dbm, hz)| {
            self.detector.volts_at(dbm - self.rolloff_db(hz))
        })
    }

    /// Sets the generator: `dbm` at `hz` into the detector, or off.
    pub fn apply(&mut self, applied: Option<(f64, f64)>) {
        self.target_volts = self.volts_for(applied);
    }

    /// The next sample: seconds of bench time and the ADC count.
    pub fn next_sample(&mut self) -> (f64, u32) {
        let t = self.index as f64 / self.rate_hz;
        self.index += 1;
        let alpha = 1.0 - (-1.0 / (self.rate_hz * BENCH_TAU_S)).exp();
        self.volts += alpha * (self.target_volts - self.volts);
        let noisy = self.adc.counts(self.volts) + self.noise.sample(&mut self.rng);
        (t, noisy.round().clamp(0.0, self.adc.full_scale()) as u32)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::calibration::Calibration;
    use crate::profile::parse_profile;

    fn demo() -> Profile {
        parse_profile(
            include_str!("../profiles/demo-diode.toml"),
            "demo-diode.toml",
        )
        .unwrap()
    }

    /// The demo profile without its board temperature channel.
    fn demo_without_sensor() -> Profile {
        let text = include_str!("../profiles/demo-diode.toml");
        let plain = text.split("\n[temperature]").next().unwrap();
        let p = parse_profile(plain, "demo-diode.toml").unwrap();
        assert!(p.temperature.is_none());
        p
    }

    #[test]
    fn fill_makes_the_samples_next_sample_would() {
        let p = demo_without_sensor();
        for scenario in Scenario::ALL {
            let mut one = Simulator::new(&p, scenario, 10_000.0, 3);
            let mut many = one.clone();
            let singles: Vec<u32> = (0..25_000).map(|_| one.next_sample().1).collect();
            let mut filled = Vec::new();
            many.fill(10_000, &mut filled);
            many.fill(15_000, &mut filled);
            let differ = singles.iter().zip(&filled).filter(|(a, b)| a != b).count();
            assert_eq!(differ, 0, "{scenario:?}");
        }
    }

    // Source: worked example — the board's sensor channel, read back through the
    // profile's own sensor equation and averaged over a second, gives the board
    // temperature the scenario sets (the soak warms the board 6 K with τ = 900 s), within
    // the ADC noise averaged.
    #[test]
    fn the_board_sensor_streams_the_boards_temperature() {
        let p = demo();
        let sensor = p.temperature.unwrap();
        let mut sim = Simulator::new(&p, Scenario::Soak, 1000.0, 4);
        assert_eq!(sim.channels(), 2);
        for second in [0.0, 900.0, 3600.0] {
            sim.index = (second * 1000.0) as u64;
            let mut frames = Vec::new();
            let t0 = sim.fill(1000, &mut frames);
            let mean: f64 = frames
                .chunks(2)
                .map(|f| sensor.celsius(&p.adc, f[sensor.channel]).unwrap())
                .sum::<f64>()
                / 1000.0;
            let board = sim.board_kelvin(t0 + 0.5).unwrap() - CELSIUS_ZERO_K;
            let want = Scenario::Soak.board_kelvin(t0 + 0.5, 300.0) - CELSIUS_ZERO_K;
            assert!((board - want).abs() < 1e-12);
            assert!(
                (mean - want).abs() < 0.01,
                "{second} s: {mean} °C vs {want} °C"
            );
        }
    }

    #[test]
    fn same_seed_same_samples_other_seed_other_noise() {
        let p = demo();
        let run = |seed| {
            let mut sim = Simulator::new(&p, Scenario::Tune, 1000.0, seed);
            (0..500).map(|_| sim.next_sample().1).collect::<Vec<_>>()
        };
        assert_eq!(run(7), run(7));
        assert_ne!(run(7), run(8));
    }

    // Source: worked example — reading the simulator back through the same profile (at
    // the scenario's frequency and at the ambient temperature) must give the scenario's
    // true power to within the ADC's resolution there.
    #[test]
    fn readings_recover_the_true_power() {
        let p = demo();
        let mut sim = Simulator::new(&p, Scenario::Tune, 100.0, 1);
        let cal = Calibration::new(&p, Some(146e6), 0.0);
        for _ in 0..4000 {
            let (t, count) = sim.next_sample();
            let truth = Scenario::Tune.true_dbm(t);
            let r = cal.reading(f64::from(count));
            let tolerance = 4.0 * NOISE_COUNTS * cal.db_per_count(truth) + 0.01;
            assert!(
                (r.dbm - truth).abs() < tolerance,
                "t={t}: {} vs {truth}",
                r.dbm
            );
        }
    }

    #[test]
    fn overload_bursts_clip_the_adc() {
        let p = demo();
        let mut sim = Simulator::new(&p, Scenario::Overload, 100.0, 1);
        let full_scale = p.adc.full_scale() as u32;
        let samples: Vec<(f64, u32)> = (0..1500).map(|_| sim.next_sample()).collect();
        assert!(samples
            .iter()
            .filter(|(t, _)| *t < 10.0)
            .all(|(_, c)| *c < full_scale));
        assert!(samples
            .iter()
            .filter(|(t, _)| (10.1..11.4).contains(t))
            .all(|(_, c)| *c == full_scale));
    }
}
