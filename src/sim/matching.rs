//! The matching bench, simulated: an invented home-built 2 m transmitter feeding an
//! antenna through an L-network whose capacitor is turned by hand through the match and
//! back, a directional coupler in the line with a detector on each arm (each with its own
//! profile), both read by one board. The coupler leaks: part of the forward wave reaches
//! the reflected arm (and of the reflected wave the forward arm) at a phase of the bench's
//! own, by its directivity, so the readings carry the error a real coupler makes.

use std::f64::consts::PI;

use super::Simulator;
use crate::coupler::{Coupler, CouplerSetup, ReferencePlane};
use crate::matching::directivity_gamma;

/// The frequency the bench runs at, Hz.
pub const MATCH_HZ: f64 = 146e6;
/// One turn of the capacitor through the match and back, seconds.
const TURN_S: f64 = 30.0;
/// The transmitter's forward power into a matched load, dBm at the load (10 W).
const MATCHED_DBM: f64 = 40.0;
/// The phases at which the coupler's leakage adds, radians: the bench's, fixed.
const LEAK_PHASE_REFLECTED: f64 = 1.1;
const LEAK_PHASE_FORWARD: f64 = 2.3;

/// The load's reflection at the load plane at time `t`: magnitude and phase. The
/// magnitude dips to 0.02 (return loss 34 dB, past what a 26 dB coupler resolves) a
/// little after the middle of each turn and rises to 0.6 at its ends.
pub fn load_reflection(t: f64) -> (f64, f64) {
    let phase = (t / TURN_S).fract();
    let knob = if phase < 0.5 {
        2.0 * phase
    } else {
        2.0 - 2.0 * phase
    };
    let off = knob - 0.55;
    ((0.02 + 2.0 * off * off).min(0.6), 3.0 * PI * off)
}

/// The forward power at the load plane at `t`, dBm: the transmitter gives a little less
/// into a poor match.
pub fn forward_at_load_dbm(t: f64) -> f64 {
    MATCHED_DBM - 0.6 * load_reflection(t).0
}

/// What is true at the set-up's reference plane at a moment.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MatchTruth {
    /// Forward power, dBm.
    pub forward_dbm: f64,
    /// Reflected power, dBm.
    pub reflected_dbm: f64,
    /// |Γ|.
    pub gamma: f64,
}

/// Which arm a simulator reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Side {
    Forward,
    Reflected,
}

/// The power at one arm's port (its profile's reference plane) over time.
#[derive(Debug, Clone)]
pub(super) struct ArmDrive {
    side: Side,
    coupling_db: f64,
    through_loss_db: f64,
    leakage: f64,
}

impl ArmDrive {
    fn new(setup: &CouplerSetup, side: Side) -> Self {
        let coupling = match side {
            Side::Forward => &setup.forward.coupling,
            Side::Reflected => &setup.reflected.coupling,
        };
        ArmDrive {
            side,
            coupling_db: coupling.at(MATCH_HZ).db,
            through_loss_db: setup.through_loss.at(MATCH_HZ).db,
            leakage: directivity_gamma(setup.directivity.at(MATCH_HZ).db),
        }
    }

    pub(super) fn hz(&self) -> f64 {
        MATCH_HZ
    }

    /// The arm's power at `t`, dBm: the wave it samples, and the other wave's leakage
    /// added at the bench's phase.
    pub(super) fn true_dbm(&self, t: f64) -> f64 {
        let (gamma, theta) = load_reflection(t);
        let at_load = forward_at_load_dbm(t);
        let (wave_dbm, sum) = match self.side {
            // The forward arm samples the input port's forward wave, with some of the
            // reflected wave: |1 + Γ·Γd·e^{jφ}|.
            Side::Forward => (
                at_load + self.through_loss_db,
                phasor_sum(1.0, 0.0, gamma * self.leakage, theta + LEAK_PHASE_FORWARD),
            ),
            // The reflected arm samples the output port's reflected wave, with some of
            // the forward wave: |Γ·e^{jθ} + Γd·e^{jφ}| of the forward wave.
            Side::Reflected => (
                at_load,
                phasor_sum(gamma, theta, self.leakage, LEAK_PHASE_REFLECTED),
            ),
        };
        (wave_dbm - self.coupling_db + 20.0 * sum.max(1e-10).log10()).max(-200.0)
    }
}

/// |a·e^{jα} + b·e^{jβ}|.
fn phasor_sum(a: f64, alpha: f64, b: f64, beta: f64) -> f64 {
    let re = a * alpha.cos() + b * beta.cos();
    let im = a * alpha.sin() + b * beta.sin();
    re.hypot(im)
}

/// Both arms' detectors and ADCs, sampled together as the channels of one stream.
#[derive(Debug, Clone)]
pub struct MatchBench {
    forward: Simulator,
    reflected: Simulator,
    channels: (usize, usize),
    plane: ReferencePlane,
    through_loss_db: f64,
}

impl MatchBench {
    /// The bench of `coupler`, sampling at `rate_hz`; each arm's noise has its own seed.
    pub fn new(coupler: &Coupler, rate_hz: f64, seed: u64) -> Self {
        let setup = &coupler.setup;
        let arm = |side, profile, seed| {
            Simulator::of_arm(profile, ArmDrive::new(setup, side), rate_hz, seed)
        };
        MatchBench {
            forward: arm(Side::Forward, &coupler.forward, seed),
            reflected: arm(Side::Reflected, &coupler.reflected, seed.wrapping_add(1)),
            channels: (setup.forward.channel, setup.reflected.channel),
            plane: setup.plane,
            through_loss_db: setup.through_loss.at(MATCH_HZ).db,
        }
    }

    /// Channels per sample: up to the higher of the two arms'; any other is 0.
    pub fn channels(&self) -> usize {
        self.channels.0.max(self.channels.1) + 1
    }

    /// What is true at the reference plane at `t`. At the source the forward power is
    /// the through-loss higher, and the reflected power as much lower.
    pub fn truth(&self, t: f64) -> MatchTruth {
        let (gamma, _) = load_reflection(t);
        let forward = forward_at_load_dbm(t);
        let reflected = forward + 20.0 * gamma.log10();
        let loss = match self.plane {
            ReferencePlane::Load => 0.0,
            ReferencePlane::Source => self.through_loss_db,
        };
        MatchTruth {
            forward_dbm: forward + loss,
            reflected_dbm: reflected - loss,
            gamma: gamma * 10f64.powf(-loss / 10.0),
        }
    }

    /// Appends the next `n` samples to `out`, [`MatchBench::channels`] counts each;
    /// returns the time of the first.
    pub fn fill(&mut self, n: usize, out: &mut Vec<u32>) -> f64 {
        let mut forward = Vec::with_capacity(n);
        let mut reflected = Vec::with_capacity(n);
        let t0 = self.forward.fill(n, &mut forward);
        self.reflected.fill(n, &mut reflected);
        let width = self.channels();
        out.reserve(n * width);
        for (f, r) in forward.into_iter().zip(reflected) {
            let start = out.len();
            out.resize(start + width, 0);
            out[start + self.channels.0] = f;
            out[start + self.channels.1] = r;
        }
        t0
    }

    /// The samples per second.
    pub fn rate_hz(&self) -> f64 {
        self.forward.rate_hz()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::calibration::Calibration;
    use crate::coupler::load_coupler;
    use crate::matching::{gamma, gamma_range};
    use crate::units::dbm_to_watts;

    fn demo() -> Coupler {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/profiles/demo-coupler.toml");
        load_coupler(std::path::Path::new(path)).unwrap()
    }

    /// Means of each arm's readings over `seconds` from `t0`, watts at the plane.
    fn mean_watts(bench: &mut MatchBench, coupler: &Coupler, seconds: f64) -> (f64, f64) {
        let setup = &coupler.setup;
        let forward = Calibration::new(
            &coupler.forward,
            Some(MATCH_HZ),
            setup.forward_offset_db(MATCH_HZ),
        );
        let reflected = Calibration::new(
            &coupler.reflected,
            Some(MATCH_HZ),
            setup.reflected_offset_db(MATCH_HZ),
        );
        let n = (seconds * bench.rate_hz()) as usize;
        let mut counts = Vec::new();
        bench.fill(n, &mut counts);
        let width = bench.channels();
        let (mut f, mut r) = (0.0, 0.0);
        for sample in counts.chunks(width) {
            f += dbm_to_watts(
                forward
                    .reading(f64::from(sample[setup.forward.channel]))
                    .dbm,
            );
            r += dbm_to_watts(
                reflected
                    .reading(f64::from(sample[setup.reflected.channel]))
                    .dbm,
            );
        }
        (f / n as f64, r / n as f64)
    }

    // Source: the directivity relation (a coupler's leakage Γd = 10^(−D/20) adds to the
    // true reflection at an unknown phase, so |Γm| − Γd ≤ |Γ| ≤ |Γm| + Γd, and the
    // forward reading is off by a factor 1 ± |Γ|·Γd in voltage; common practice). Read
    // back through both arm profiles, every measured |Γ| across a turn of the capacitor
    // keeps the true |Γ| within that range, the forward arm's factor taken at |Γm| (first
    // order) and a margin of 0.01 in |Γ| for the ADC's resolution and noise; and the true
    // one dips below Γd, where the coupler cannot resolve it.
    #[test]
    fn each_measured_reflection_holds_the_truth_within_the_directivity_range() {
        let coupler = demo();
        let leakage = directivity_gamma(coupler.setup.directivity.at(MATCH_HZ).db);
        let mut bench = MatchBench::new(&coupler, 2000.0, 5);
        let mut dipped_below = false;
        let mut widest: f64 = 0.0;
        let step = 0.25;
        for i in 0..(TURN_S / step) as usize {
            let t = (i as f64 + 0.5) * step;
            let truth = bench.truth(t).gamma;
            let (f, r) = mean_watts(&mut bench, &coupler, step);
            let measured = gamma(f, r).unwrap();
            let forward_error = measured * leakage;
            let (low, _) = gamma_range(measured * (1.0 - forward_error), leakage);
            let (_, high) = gamma_range(measured * (1.0 + forward_error), leakage);
            assert!(
                truth >= low - 0.01 && truth <= high + 0.01,
                "t = {t}: true |Γ| {truth} outside [{low}, {high}]"
            );
            dipped_below |= truth < leakage;
            widest = widest.max((measured - truth).abs());
        }
        assert!(
            dipped_below,
            "the match is tuned past what the coupler resolves"
        );
        assert!(
            widest > 0.5 * leakage,
            "the leakage shows in the readings: {widest}"
        );
    }

    #[test]
    fn the_two_arms_go_to_their_own_channels_of_one_stream() {
        let coupler = demo();
        let mut bench = MatchBench::new(&coupler, 1000.0, 1);
        assert_eq!(bench.channels(), 2);
        let mut counts = Vec::new();
        bench.fill(10, &mut counts);
        assert_eq!(counts.len(), 20);
        let mut forward_only = Simulator::of_arm(
            &coupler.forward,
            ArmDrive::new(&coupler.setup, Side::Forward),
            1000.0,
            1,
        );
        let mut expected = Vec::new();
        forward_only.fill(10, &mut expected);
        let got: Vec<u32> = counts.chunks(2).map(|s| s[0]).collect();
        assert_eq!(got, expected);
    }

    // Source: return loss improves by twice the line's loss between two planes (the
    // reflected wave crosses it both ways; common practice).
    #[test]
    fn at_the_source_plane_the_return_loss_is_twice_the_through_loss_better() {
        let mut coupler = demo();
        let at_load = MatchBench::new(&coupler, 100.0, 1).truth(3.0);
        coupler.setup.plane = ReferencePlane::Source;
        let at_source = MatchBench::new(&coupler, 100.0, 1).truth(3.0);
        let loss = coupler.setup.through_loss.at(MATCH_HZ).db;
        let rl = |g: f64| -20.0 * g.log10();
        assert!((rl(at_source.gamma) - rl(at_load.gamma) - 2.0 * loss).abs() < 1e-9);
        assert!((at_source.forward_dbm - at_load.forward_dbm - loss).abs() < 1e-9);
    }
}
