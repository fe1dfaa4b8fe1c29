//! Stability against averaging time: the overlapping Allan deviation of the interval
//! means, at octave-spaced averaging times.

use serde::Serialize;

/// The Allan deviation at one averaging time.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AllanPoint {
    /// Averaging time τ = m·τ0, seconds.
    pub tau_s: f64,
    /// Overlapping Allan deviation at τ, dB.
    pub adev_db: f64,
}

/// The overlapping Allan deviation of `values` (equally spaced by `tau0_s`) at
/// τ = τ0, 2τ0, 4τ0 … while enough values remain.
pub fn overlapping_adev(_values: &[f64], _tau0_s: f64) -> Vec<AllanPoint> {
    Vec::new()
}
