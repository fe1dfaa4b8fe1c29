//! The soak's shape: a warm-up-plus-drift model of the interval means, the time the
//! warm-up takes, and the drift with a standard error that holds for the correlated
//! residuals a soak has.

use serde::Serialize;

use crate::maths::numeric::{fit_line, levenberg_marquardt, unscaled_covariance};

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
    /// True for a line chosen because the warm-up fitted, beyond the tolerance, is too
    /// slow for the span (τ over a third of it): the run was not seen to settle.
    pub still_warming: bool,
    /// True when the warm-up model was fitted and its figures tell whether a warm-up
    /// beyond the tolerance is there: chosen, found within the tolerance, or found under
    /// way but too slow. False when it could not be tried or judged (too few rows, no
    /// convergence, parameters not determined, A or τ not clear of none, or a span too
    /// short to tell a warm-up from the drift); `choice` says why.
    pub warmup_tested: bool,
}

impl SoakFit {
    /// The model's level `t` seconds after the span's start, dBm.
    pub fn at(&self, t: f64) -> f64 {
        self.level_dbm + self.slope_db_per_s * t + self.warmup_db(t)
    }

    /// The warm-up term alone `t` seconds after the span's start, dB (0 for a line).
    pub fn warmup_db(&self, t: f64) -> f64 {
        self.warmup
            .map_or(0.0, |w| w.amplitude_db * (-t / w.tau_s).exp())
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

/// Fewest rows for the warm-up model: four parameters and a bend to see.
pub const MIN_WARMUP_ROWS: usize = 12;
/// The warm-up's A and τ each count only when at least this many standard errors (widened
/// for the residuals' correlation) from zero.
pub const MEANINGFUL_RATIO: f64 = 3.0;
/// The span must hold at least this many time constants τ, so that the bend is seen and
/// the drift after it is not taken for part of it.
pub const SPAN_TAUS: f64 = 3.0;
/// Fewest rows a drift is fitted to (after the warm-up, or over the whole span).
pub const MIN_DRIFT_ROWS: usize = 30;
/// The largest lag-1 correlation the standard errors allow for (Andrews & Monahan's
/// bound on a prewhitening filter), so that 1 − ρ never divides by almost nothing.
pub const MAX_RHO: f64 = 0.97;
/// A bandwidth of more than this many lags per row is no bandwidth: it comes only from
/// residuals with a lag-1 coefficient of 1 (rounding alone).
const UNBOUNDED_LAGS_PER_ROW: usize = 1000;
/// Candidate time constants in the starting grid.
const TAU_GRID_POINTS: usize = 48;

/// How the drift's standard error is worked out, as the report says it.
pub const DRIFT_METHOD: &str = "Newey-West (Bartlett kernel) on AR(1)-prewhitened residuals, \
     bandwidth by Andrews' AR(1) plug-in (Andrews 1991; Andrews & Monahan 1992)";

/// Fits the model to interval means `dbm` at `t_s` seconds from the span's start, with
/// the rows' expanded uncertainties when known, and finds the warm-up time for the
/// settle tolerance `tol_db`. The warm-up model is chosen only when its amplitude exceeds
/// the tolerance, τ leaves three time constants of the span, and A and τ both stand three
/// standard errors clear of zero with those errors widened for correlated residuals
/// (docs/report.md, "The model").
pub fn fit(t_s: &[f64], dbm: &[f64], u_db: &[Option<f64>], tol_db: f64) -> SoakFit {
    let rows = Rows::new(t_s, dbm, u_db);
    let (level, slope) = rows.line(dbm);
    let line = |choice: String| SoakFit {
        model: SoakModel::Line,
        choice,
        level_dbm: level,
        slope_db_per_s: slope,
        warmup: None,
        warmup_s: None,
        still_warming: false,
        warmup_tested: false,
    };
    let candidate = match rows.warmup_candidate() {
        Ok(candidate) => candidate,
        Err(why) => return line(why),
    };
    match candidate.judge(rows.span_s(), tol_db, slope) {
        Err(Untold(why)) => line(why),
        Err(Told(why)) => SoakFit {
            still_warming: candidate.warmup.amplitude_db.abs() > tol_db
                && SPAN_TAUS * candidate.warmup.tau_s > rows.span_s(),
            warmup_tested: true,
            ..line(why)
        },
        Ok(words) => SoakFit {
            model: SoakModel::Warmup,
            choice: words,
            level_dbm: candidate.level_dbm,
            slope_db_per_s: candidate.slope_db_per_s,
            warmup: Some(candidate.warmup),
            warmup_s: Some(warmup_time_s(candidate.warmup, tol_db)),
            still_warming: false,
            warmup_tested: true,
        },
    }
}

/// The time after which |A|·e^(−t/τ) stays within `tol_db`: τ·ln(|A|/tol), or 0 for a
/// warm-up already within it.
pub fn warmup_time_s(warmup: Warmup, tol_db: f64) -> f64 {
    (warmup.tau_s * (warmup.amplitude_db.abs() / tol_db).ln()).max(0.0)
}

/// The means with their relative weights, and the weighted straight line that the
/// warm-up model's linear part (P∞ + D·t) is projected on.
struct Rows<'a> {
    t: &'a [f64],
    y: &'a [f64],
    /// Relative weights 1/u² (all 1 when a row has no u_db); only their ratios matter,
    /// since the scale of the errors is taken from the residuals.
    w: Vec<f64>,
    sum_w: f64,
    mean_t: f64,
    sxx: f64,
}

impl<'a> Rows<'a> {
    fn new(t: &'a [f64], y: &'a [f64], u_db: &[Option<f64>]) -> Self {
        let known: Option<Vec<f64>> = u_db
            .iter()
            .map(|u| u.filter(|u| u.is_finite() && *u > 0.0))
            .collect();
        let w = match known {
            Some(u) if u.len() == t.len() => u.iter().map(|u| 1.0 / (u * u)).collect(),
            _ => vec![1.0; t.len()],
        };
        let sum_w: f64 = w.iter().sum();
        let mean_t = t.iter().zip(&w).map(|(t, w)| t * w).sum::<f64>() / sum_w;
        let sxx = t
            .iter()
            .zip(&w)
            .map(|(t, w)| w * (t - mean_t).powi(2))
            .sum();
        Rows {
            t,
            y,
            w,
            sum_w,
            mean_t,
            sxx,
        }
    }

    fn span_s(&self) -> f64 {
        match (self.t.first(), self.t.last()) {
            (Some(a), Some(b)) => b - a,
            _ => 0.0,
        }
    }

    /// The weighted line through `v`: (intercept at t = 0, slope).
    fn line(&self, v: &[f64]) -> (f64, f64) {
        let mean_v = v.iter().zip(&self.w).map(|(v, w)| v * w).sum::<f64>() / self.sum_w;
        if self.sxx.is_nan() || self.sxx <= 0.0 {
            return (v.first().copied().unwrap_or(f64::NAN), 0.0);
        }
        let sxv: f64 = self
            .t
            .iter()
            .zip(v)
            .zip(&self.w)
            .map(|((t, v), w)| w * (t - self.mean_t) * (v - mean_v))
            .sum();
        let slope = sxv / self.sxx;
        (mean_v - slope * self.mean_t, slope)
    }

    /// √w·(v − its weighted line) into `out`.
    fn detrended(&self, v: &[f64], out: &mut [f64]) {
        let (b0, b1) = self.line(v);
        for (i, o) in out.iter_mut().enumerate() {
            *o = self.w[i].sqrt() * (v[i] - b0 - b1 * self.t[i]);
        }
    }

    /// The warm-up model fitted by variable projection: Levenberg–Marquardt over (ln τ, A),
    /// with P∞ and D the weighted line through y − A·e^(−t/τ) at each step, started from
    /// the best τ of a logarithmic grid (A there by linear least squares).
    fn warmup_candidate(&self) -> Result<Candidate, String> {
        let n = self.t.len();
        let span = self.span_s();
        if n < MIN_WARMUP_ROWS || span.is_nan() || span <= 0.0 {
            return Err(format!(
                "{} too few for the warm-up model (it needs {MIN_WARMUP_ROWS})",
                rows_are(n)
            ));
        }
        let tau_lo = span / (n - 1) as f64;
        let tau_hi = span;
        let (tau0, a0) = self.grid_start(tau_lo, tau_hi);
        let range = self
            .y
            .iter()
            .fold(0.0f64, |m, y| m.max((y - self.y[0]).abs()));
        let a_bound = 100.0 * (range + 1.0);
        let residuals = |p: [f64; 2], r: &mut [f64]| self.projected_residuals(p, r);
        let fit = levenberg_marquardt(
            &residuals,
            n,
            [tau0.ln(), a0],
            [(tau_lo.ln(), tau_hi.ln()), (-a_bound, a_bound)],
        );
        if !fit.converged {
            return Err("the warm-up model's fit did not converge".into());
        }
        let [ln_tau, amplitude] = fit.params;
        let tau = ln_tau.exp();
        let mut r = vec![0.0; n];
        self.projected_residuals(fit.params, &mut r);
        let rho = lag1_correlation(&r).clamp(0.0, MAX_RHO);
        let widening = (1.0 + rho) / (1.0 - rho);
        let scale = fit.sse / (n - 4) as f64 * widening;
        let cov = unscaled_covariance(&residuals, n, fit.params)
            .ok_or("the warm-up model's parameters are not determined by the rows")?;
        let decay: Vec<f64> = self.t.iter().map(|t| (-t / tau).exp()).collect();
        let rest: Vec<f64> = self
            .y
            .iter()
            .zip(&decay)
            .map(|(y, e)| y - amplitude * e)
            .collect();
        let (level, slope) = self.line(&rest);
        Ok(Candidate {
            warmup: Warmup {
                amplitude_db: amplitude,
                tau_s: tau,
            },
            level_dbm: level,
            slope_db_per_s: slope,
            tau_stderr_s: tau * (cov[0][0] * scale).sqrt(),
            amplitude_stderr_db: (cov[1][1] * scale).sqrt(),
            rho,
            widening: widening.sqrt(),
        })
    }

    /// √w·(y − A·e^(−t/τ) − line) for p = (ln τ, A).
    fn projected_residuals(&self, p: [f64; 2], r: &mut [f64]) -> bool {
        let tau = p[0].exp();
        let rest: Vec<f64> = self
            .t
            .iter()
            .zip(self.y)
            .map(|(t, y)| y - p[1] * (-t / tau).exp())
            .collect();
        self.detrended(&rest, r);
        r.iter().all(|v| v.is_finite())
    }

    /// The τ of the grid whose linear fit (P∞, D, A) leaves the least weighted squares,
    /// with its A.
    fn grid_start(&self, tau_lo: f64, tau_hi: f64) -> (f64, f64) {
        let n = self.t.len();
        let (mut ry, mut re) = (vec![0.0; n], vec![0.0; n]);
        self.detrended(self.y, &mut ry);
        let mut best = (f64::INFINITY, tau_lo, 0.0);
        for k in 0..TAU_GRID_POINTS {
            let tau = tau_lo * (tau_hi / tau_lo).powf(k as f64 / (TAU_GRID_POINTS - 1) as f64);
            let decay: Vec<f64> = self.t.iter().map(|t| (-t / tau).exp()).collect();
            self.detrended(&decay, &mut re);
            let see: f64 = re.iter().map(|v| v * v).sum();
            if see.is_nan() || see <= 0.0 {
                continue;
            }
            let a = ry.iter().zip(&re).map(|(y, e)| y * e).sum::<f64>() / see;
            let sse = ry.iter().map(|v| v * v).sum::<f64>() - a * a * see;
            if sse < best.0 {
                best = (sse, tau, a);
            }
        }
        (best.1, best.2)
    }
}

/// A fitted warm-up model before the choice.
struct Candidate {
    warmup: Warmup,
    level_dbm: f64,
    slope_db_per_s: f64,
    tau_stderr_s: f64,
    amplitude_stderr_db: f64,
    /// Lag-1 correlation of the residuals (clamped to 0 ..= MAX_RHO).
    rho: f64,
    /// √((1 + ρ)/(1 − ρ)), the factor the standard errors were widened by.
    widening: f64,
}

/// Why the warm-up model was not chosen: its figures tell (no warm-up beyond the
/// tolerance, or one too slow for the span), or they cannot.
enum Rejection {
    Told(String),
    Untold(String),
}
use Rejection::{Told, Untold};

impl Candidate {
    /// The warm-up model's figures in words when it passes every test, else the one
    /// it failed. `line_slope` is the straight line's, dB per second: a warm-up slower
    /// than the span looks like that drift, so a small A at a τ too long to see proves
    /// nothing while the line moves beyond the tolerance over the span.
    fn judge(&self, span_s: f64, tol_db: f64, line_slope: f64) -> Result<String, Rejection> {
        let (a, tau) = (self.warmup.amplitude_db, self.warmup.tau_s);
        let unseen = SPAN_TAUS * tau > span_s;
        let line_moves = (line_slope * span_s).abs();
        if a.abs() <= tol_db && unseen && line_moves > tol_db {
            return Err(Untold(format!(
                "the span is too short to tell a warm-up from the drift: the best warm-up \
                 fitted, τ = {tau:.0} s, is longer than a third of the span, and \
                 the line moves {line_moves:.3} dB over it, beyond the settle tolerance ±{tol_db} dB"
            )));
        }
        if a.abs() <= tol_db {
            return Err(Told(format!(
                "the warm-up term fitted, |A| = {:.3} dB, is within the settle tolerance ±{tol_db} dB",
                a.abs()
            )));
        }
        if unseen {
            return Err(Told(format!(
                "the warm-up fitted, τ = {tau:.0} s, is longer than a third of the span"
            )));
        }
        let clear = |value: f64, se: f64| se.is_finite() && value.abs() >= MEANINGFUL_RATIO * se;
        let errors = format!(
            "A = {a:+.3} ± {:.2e} dB, τ = {tau:.0} ± {:.2e} s (standard errors widened ×{:.1} for residuals correlated {:.3} at lag 1)",
            self.amplitude_stderr_db, self.tau_stderr_s, self.widening, self.rho
        );
        if !clear(a, self.amplitude_stderr_db) || !clear(tau, self.tau_stderr_s) {
            return Err(Untold(format!(
                "the warm-up fitted is not {MEANINGFUL_RATIO} standard errors clear of none: {errors}"
            )));
        }
        Ok(format!(
            "{errors}; |A| beyond the ±{tol_db} dB tolerance and τ within a third of the span"
        ))
    }
}

/// Σ rᵢrᵢ₋₁ / Σ rᵢ², the lag-1 autocorrelation of residuals (0 for fewer than two).
fn lag1_correlation(r: &[f64]) -> f64 {
    let total: f64 = r.iter().map(|v| v * v).sum();
    if r.len() < 2 || total.is_nan() || total <= 0.0 {
        return 0.0;
    }
    r.windows(2).map(|p| p[0] * p[1]).sum::<f64>() / total
}

/// The drift of the means from `from_s` on, with a standard error that holds for
/// autocorrelated residuals (`DRIFT_METHOD`), or why there is none: fewer than
/// `MIN_DRIFT_ROWS` rows from `from_s` on, or a bandwidth that would reach past half
/// of them.
pub fn drift(t_s: &[f64], dbm: &[f64], from_s: f64) -> Result<Drift, String> {
    let (t, m): (Vec<f64>, Vec<f64>) = t_s
        .iter()
        .zip(dbm)
        .filter(|(t, _)| **t >= from_s)
        .map(|(t, m)| (*t / 3600.0, *m))
        .unzip();
    // Times from the span's start would read as times of the run: name the stretch.
    let stretch = if from_s > 0.0 {
        "after the warm-up"
    } else {
        "in the span"
    };
    if t.len() < MIN_DRIFT_ROWS {
        return Err(format!(
            "only {} {stretch}, and a drift needs at least {MIN_DRIFT_ROWS}; record longer or give a longer span",
            count_rows(t.len())
        ));
    }
    let hac = prewhitened_slope(&t, &m)
        .ok_or_else(|| format!("the rows {stretch} have no spread in time"))?;
    // Residuals of rounding alone, each like the last, give an unbounded bandwidth.
    if hac.lags > t.len().saturating_mul(UNBOUNDED_LAGS_PER_ROW) {
        return Err(format!(
            "the residuals {stretch} are all alike (the rows lie on the line to the last \
             digit), so how far they stay correlated cannot be judged"
        ));
    }
    if hac.lags * 2 > t.len() {
        return Err(format!(
            "the residuals {stretch} stay correlated over longer than the stretch itself can show \
             (about {} rows against {}): record longer",
            hac.lags,
            t.len()
        ));
    }
    Ok(Drift {
        db_per_hour: hac.slope,
        stderr_db_per_hour: Some(hac.stderr).filter(|s| s.is_finite()),
        method: DRIFT_METHOD,
        from_s,
        to_s: t.last().map_or(from_s, |t| t * 3600.0),
    })
}

/// `1 row`, `6 rows`.
fn count_rows(n: usize) -> String {
    if n == 1 {
        "1 row".into()
    } else {
        format!("{n} rows")
    }
}

/// `1 row is`, `6 rows are`.
fn rows_are(n: usize) -> String {
    format!("{} {}", count_rows(n), if n == 1 { "is" } else { "are" })
}

/// A least-squares slope with its heteroscedasticity-and-autocorrelation-consistent
/// standard error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HacSlope {
    /// The ordinary least-squares slope.
    pub slope: f64,
    /// Its standard error.
    pub stderr: f64,
    /// The kernel's bandwidth L, lags (weights 1 − j/(L + 1)).
    pub lags: usize,
    /// The prewhitening filter's coefficient (0 for none).
    pub rho: f64,
}

/// The Bartlett-kernel long-run sum Σ_{|j|≤L} (1 − |j|/(L + 1)) Σᵢ gᵢgᵢ₋ⱼ of a moment
/// series, as statsmodels' `S_hac_simple` forms it (without dividing by the count).
pub fn bartlett_sum(g: &[f64], lags: usize) -> f64 {
    let mut total: f64 = g.iter().map(|v| v * v).sum();
    for j in 1..=lags.min(g.len().saturating_sub(1)) {
        let weight = 1.0 - j as f64 / (lags as f64 + 1.0);
        let lagged: f64 = g[j..].iter().zip(g).map(|(a, b)| a * b).sum();
        total += 2.0 * weight * lagged;
    }
    total
}

/// Centred x, the slope, the residuals and Sxx of the least-squares line through (x, y).
fn line_parts(x: &[f64], y: &[f64]) -> Option<(Vec<f64>, f64, Vec<f64>, f64)> {
    let line = fit_line(x, y)?;
    let mean_x = x.iter().sum::<f64>() / x.len() as f64;
    let centred: Vec<f64> = x.iter().map(|v| v - mean_x).collect();
    let sxx: f64 = centred.iter().map(|c| c * c).sum();
    let residuals = x
        .iter()
        .zip(y)
        .map(|(x, y)| y - line.intercept - line.slope * x)
        .collect();
    Some((centred, line.slope, residuals, sxx))
}

/// The least-squares slope of y on x with the Newey–West standard error at a given
/// bandwidth, in statsmodels' convention (`OLS(y, X).fit(cov_type="HAC", cov_kwds=
/// {"maxlags": L})`: Bartlett weights 1 − j/(L + 1), no small-sample correction):
/// √(S/Sxx²) with S the Bartlett sum of (xᵢ − x̄)·uᵢ. None when x has no spread.
pub fn newey_west_slope(x: &[f64], y: &[f64], lags: usize) -> Option<HacSlope> {
    let (centred, slope, u, sxx) = line_parts(x, y)?;
    let g: Vec<f64> = centred.iter().zip(&u).map(|(c, u)| c * u).collect();
    Some(HacSlope {
        slope,
        stderr: (bartlett_sum(&g, lags) / (sxx * sxx)).sqrt(),
        lags,
        rho: 0.0,
    })
}

/// Andrews' (1991) plug-in bandwidth for the Bartlett kernel from an AR(1) fitted to the
/// series, S = 1.1447·(α·n)^(1/3) with α = 4ρ²/((1 − ρ)²(1 + ρ)²), as whole lags ⌊S⌋.
pub fn andrews_bartlett_lags(rho: f64, n: usize) -> usize {
    let alpha = 4.0 * rho * rho / ((1.0 - rho).powi(2) * (1.0 + rho).powi(2));
    (1.1447 * (alpha * n as f64).cbrt()).floor() as usize
}

/// The least-squares slope of y on x with a prewhitened HAC standard error (Andrews &
/// Monahan 1992): the residuals' lag-1 coefficient ρ (less the first-order bias of that
/// estimate around a fitted line, −(2 + 4ρ)/n, and at most `MAX_RHO`) filters the moment
/// series gᵢ = (xᵢ − x̄)·uᵢ to eᵢ = gᵢ − ρ·gᵢ₋₁; the Bartlett sum of e at Andrews' AR(1)
/// plug-in bandwidth (from the filtered residuals) is recoloured by 1/(1 − ρ)², and
/// SE = √(S/Sxx²). None when x has no spread or there are fewer than three rows.
pub fn prewhitened_slope(x: &[f64], y: &[f64]) -> Option<HacSlope> {
    let n = x.len().min(y.len());
    if n < 3 {
        return None;
    }
    let (centred, slope, u, sxx) = line_parts(&x[..n], &y[..n])?;
    let rho = prewhitening_rho(&u);
    let g: Vec<f64> = centred.iter().zip(&u).map(|(c, u)| c * u).collect();
    let filtered = |v: &[f64]| -> Vec<f64> { v.windows(2).map(|p| p[1] - rho * p[0]).collect() };
    let lags = andrews_bartlett_lags(ar1_coefficient(&filtered(&u)), n - 1);
    let s = bartlett_sum(&filtered(&g), lags) / (1.0 - rho).powi(2);
    Some(HacSlope {
        slope,
        stderr: (s / (sxx * sxx)).sqrt(),
        lags,
        rho,
    })
}

/// The prewhitening coefficient from a fitted line's residuals: the least-squares AR(1)
/// coefficient with its first-order bias −(2 + 4ρ)/n taken off, within 0 ..= `MAX_RHO`.
pub fn prewhitening_rho(u: &[f64]) -> f64 {
    let raw = ar1_coefficient(u);
    (raw + (2.0 + 4.0 * raw) / u.len() as f64).clamp(0.0, MAX_RHO)
}

/// Σ uᵢuᵢ₋₁ / Σ uᵢ₋₁², the least-squares AR(1) coefficient (no mean taken off).
pub fn ar1_coefficient(u: &[f64]) -> f64 {
    let below: f64 = u[..u.len().saturating_sub(1)].iter().map(|v| v * v).sum();
    if below.is_nan() || below <= 0.0 {
        return 0.0;
    }
    u.windows(2).map(|p| p[0] * p[1]).sum::<f64>() / below
}

/// Most rows the model and the drifts are fitted to; a longer span is thinned to means of
/// consecutive rows first, so that a day of 1 s rows costs what 4096 rows cost (the
/// kernel sum grows with rows times bandwidth).
pub const MAX_MODEL_ROWS: usize = 4096;

/// Interval means thinned for the model: groups of ⌈n / `MAX_MODEL_ROWS`⌉ consecutive
/// rows become one point at their mean time with their mean level (and mean `u_db`,
/// None when a row of the group has none); a span of at most `MAX_MODEL_ROWS` rows is
/// returned as it is.
pub fn thinned(
    t_s: &[f64],
    dbm: &[f64],
    u_db: &[Option<f64>],
) -> (Vec<f64>, Vec<f64>, Vec<Option<f64>>) {
    let group = t_s.len().div_ceil(MAX_MODEL_ROWS).max(1);
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let u: Vec<Option<f64>> = u_db
        .chunks(group)
        .map(|c| {
            c.iter()
                .copied()
                .collect::<Option<Vec<f64>>>()
                .map(|u| mean(&u))
        })
        .collect();
    (
        t_s.chunks(group).map(mean).collect(),
        dbm.chunks(group).map(mean).collect(),
        u,
    )
}
