//! The exponential-diode peak detector with capacitive hold and a DC load RL.
//!
//! The DC current balance Is·(exp(−Vo/(n·Vt))·I0(Vpk/(n·Vt)) − 1) = Vo/RL, divided by Is,
//! depends on Is and RL only through V_L = Is·RL. Taking logs gives a form that never
//! overflows: ln(1 + Vo/V_L) + Vo/(n·Vt) = ln I0(Vpk/(n·Vt)). Both sides rise monotonically,
//! so either direction is a one-dimensional bracketed root.

use super::covariance::{gradient, FitCovariance};
use super::{
    ordered_at, point_u_volts, rms, CalPoint, Detector, ModelError, ModelKind, Weighting,
    MAX_FIT_RMS_DB,
};
use crate::maths::numeric::{
    levenberg_marquardt, solve_bracketed, solve_increasing, solve_newton, unscaled_covariance,
};
use crate::maths::special::{ln_i0, ln_i0_and_slope, thermal_voltage};
use crate::units::{watts_to_dbm, Power};

/// Limits of the diode fit: ideality factor n and V_L in volts (a profile that gives them
/// must keep within them too).
pub const N_BOUNDS: (f64, f64) = (0.5, 5.0);
/// See [`N_BOUNDS`].
pub const VL_BOUNDS: (f64, f64) = (1e-6, 1e4);

/// The saturation current's temperature exponent XTI of a Schottky barrier diode.
// Source: the diode model parameter table of SPICE (Berkeley SPICE2/3 user's guide): XTI
// defaults to 3.0 for a pn junction, 2.0 suggested for a Schottky barrier diode (from memory).
pub const SCHOTTKY_XTI: f64 = 2.0;
/// The barrier energy EG of a Schottky barrier diode, eV.
// Source: the same table: EG 1.11 eV for silicon, 0.69 eV for a Schottky barrier diode,
// 0.67 eV for germanium (from memory).
pub const SCHOTTKY_EG_EV: f64 = 0.69;

/// How the saturation current follows temperature: the exponent XTI and the energy EG.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SaturationLaw {
    /// The exponent XTI.
    pub xti: f64,
    /// The energy EG, eV.
    pub eg_ev: f64,
}

impl Default for SaturationLaw {
    fn default() -> Self {
        SaturationLaw {
            xti: SCHOTTKY_XTI,
            eg_ev: SCHOTTKY_EG_EV,
        }
    }
}

impl SaturationLaw {
    /// Is(T)/Is(T0) for ideality `n`: (T/T0)^(XTI/n)·exp((T/T0 − 1)·EG/(n·Vt)), Vt = kT/q
    /// at T, the law circuit simulators use.
    pub fn ratio(self, kelvin: f64, t0_kelvin: f64, n: f64) -> f64 {
        let r = kelvin / t0_kelvin;
        let exponent = (r - 1.0) * self.eg_ev / (n * thermal_voltage(kelvin));
        r.powf(self.xti / n) * exponent.exp()
    }
}

/// A diode peak detector with ideality `n`, V_L = Is·RL, at temperature `kelvin`; its
/// saturation current follows `law` with temperature, RL staying as it is.
#[derive(Debug, Clone, PartialEq)]
pub struct DiodeDetector {
    n: f64,
    vl: f64,
    kelvin: f64,
    ohms: f64,
    n_vt: f64,
    span: (f64, f64),
    law: SaturationLaw,
    covariance: Option<FitCovariance>,
}

/// A diode fit and how it went.
#[derive(Debug, Clone, PartialEq)]
pub struct DiodeFit {
    /// The fitted detector.
    pub detector: DiodeDetector,
    /// Levenberg–Marquardt iterations used.
    pub iterations: usize,
    /// Parameters that ended on a bound of the search, by name.
    pub at_bound: Vec<&'static str>,
}

impl DiodeDetector {
    /// A detector with known parameters; `vl` may be infinite (open circuit). `ohms` is the
    /// impedance the input power is stated at; `span` the calibrated input span in dBm.
    pub fn new(n: f64, vl: f64, kelvin: f64, ohms: f64, span: (f64, f64)) -> Self {
        DiodeDetector {
            n,
            vl,
            kelvin,
            ohms,
            n_vt: n * thermal_voltage(kelvin),
            span,
            law: SaturationLaw::default(),
            covariance: None,
        }
    }

    /// The same detector with its saturation current following `law`.
    pub fn with_law(mut self, law: SaturationLaw) -> Self {
        self.law = law;
        self
    }

    /// The same diode at another junction temperature: V_L scaled by the saturation law,
    /// Vt = kT/q at the new temperature. The covariance is kept: the parameters are still
    /// the ones the points gave, now carried to that temperature.
    pub fn at_kelvin(&self, kelvin: f64) -> DiodeDetector {
        let vl = self.vl * self.law.ratio(kelvin, self.kelvin, self.n);
        DiodeDetector {
            vl,
            kelvin,
            n_vt: self.n * thermal_voltage(kelvin),
            ..self.clone()
        }
    }

    /// The same detector, carrying the covariance that `points` give its parameters
    /// (n, ln V_L) at their present values, with the weighting the points allow. For a
    /// fit this is the fit's own covariance; for parameters given from elsewhere it is what
    /// the points say about parameters near those, and a misfit enlarges it through the
    /// residuals. Unchanged when V_L is infinite or the curve cannot be evaluated there.
    pub fn with_covariance(self, points: &[CalPoint]) -> Self {
        let kelvins = vec![self.kelvin; points.len()];
        self.with_covariance_at(points, &kelvins)
    }

    /// [`DiodeDetector::with_covariance`] for points taken at junction temperatures
    /// `kelvins`, one per point, each read through the diode carried to its temperature.
    pub fn with_covariance_at(mut self, points: &[CalPoint], kelvins: &[f64]) -> Self {
        let params = [self.n, self.vl.ln()];
        if !params.iter().all(|p| p.is_finite()) {
            return self;
        }
        let weighting = Weighting::of(points);
        let u = point_u_volts(points, weighting);
        let residuals = |p: [f64; 2], out: &mut [f64]| {
            let model = self.with_params(p);
            fit_residuals(&model, points, kelvins, &u, weighting, out)
        };
        let mut r = vec![0.0; points.len()];
        if !residuals(params, &mut r) {
            return self;
        }
        let Some(unscaled) = unscaled_covariance(&residuals, points.len(), params) else {
            return self;
        };
        let weighted_sse = r.iter().map(|v| v * v).sum();
        let by_level = points
            .iter()
            .zip(residuals_db_at(&self, points, kelvins))
            .map(|(p, e)| (p.dbm, e))
            .collect();
        self.covariance = Some(FitCovariance::new(
            weighting,
            unscaled,
            weighted_sse,
            by_level,
        ));
        self
    }

    /// The same diode with parameters (n, ln V_L), without a covariance.
    fn with_params(&self, p: [f64; 2]) -> DiodeDetector {
        DiodeDetector::new(p[0], p[1].exp(), self.kelvin, self.ohms, self.span).with_law(self.law)
    }

    /// The diode at `kelvin`: itself at its own temperature, else carried there.
    fn at_point_kelvin(&self, kelvin: f64) -> std::borrow::Cow<'_, DiodeDetector> {
        if kelvin == self.kelvin {
            std::borrow::Cow::Borrowed(self)
        } else {
            std::borrow::Cow::Owned(self.at_kelvin(kelvin))
        }
    }

    /// Ideality factor n.
    pub fn n(&self) -> f64 {
        self.n
    }
    /// V_L = Is·RL in volts.
    pub fn vl(&self) -> f64 {
        self.vl
    }
    /// Junction temperature in kelvin.
    pub fn kelvin(&self) -> f64 {
        self.kelvin
    }

    /// Output volts for an RF peak voltage at the diode.
    pub fn output_for_peak(&self, vpk: f64) -> f64 {
        let c = ln_i0(vpk / self.n_vt);
        if c <= 0.0 {
            return 0.0;
        }
        let open_circuit = c * self.n_vt;
        if self.vl.is_infinite() {
            return open_circuit;
        }
        let balance = |vo: f64| {
            let value = (vo / self.vl).ln_1p() + vo / self.n_vt - c;
            (value, 1.0 / (self.vl + vo) + 1.0 / self.n_vt)
        };
        // ln(1 + Vo/V_L) ≥ 0, so the open-circuit output bounds the loaded one; the margin
        // keeps the bracket when V_L is so large that the two agree to rounding. The
        // balance is increasing and concave, and ln(1 + x) ≤ x puts the small-signal answer
        // c / (1/V_L + 1/(n·Vt)) at or below the root: Newton from there climbs to it in a
        // few steps where regula falsi needs a dozen (the simulator calls this a hundred
        // times a simulated second).
        let start = open_circuit * self.vl / (self.vl + self.n_vt);
        solve_newton(balance, start, 0.0, open_circuit * (1.0 + 1e-9))
            .or_else(|_| solve_bracketed(|vo| balance(vo).0, 0.0, open_circuit * (1.0 + 1e-9)))
            .unwrap_or(f64::NAN)
    }

    /// RF peak voltage at the diode for an output in volts; 0 for an output at or below 0.
    pub fn peak_for_output(&self, vo: f64) -> f64 {
        if vo <= 0.0 {
            return 0.0;
        }
        let c = (vo / self.vl).ln_1p() + vo / self.n_vt;
        // ln I0(x) ≤ x and ln I0(x) ≤ x²/4, so the root lies at or above c and 2√c; about
        // c + ln(2πc)/2 for large c (I0(x) ≈ e^x/√(2πx)).
        let lo = c.max(2.0 * c.sqrt());
        let hi = c + 2.0 * c.sqrt() + 10.0;
        let start = lo.max(c + 0.5 * (2.0 * std::f64::consts::PI * c).ln());
        let balance = |x: f64| {
            let (value, slope) = ln_i0_and_slope(x);
            (value - c, slope)
        };
        let x = solve_newton(balance, start, lo, hi)
            .or_else(|_| solve_increasing(|x| ln_i0(x) - c, c, hi))
            .unwrap_or(f64::NAN);
        x * self.n_vt
    }

    /// Fits n and ln V_L to at least four points by Levenberg–Marquardt: on the volts
    /// residuals divided by each point's uncertainty when every point has one, else on the
    /// dB residuals with equal weights. The fitted detector carries its covariance.
    pub fn fit(points: &[CalPoint], kelvin: f64, ohms: f64) -> Result<DiodeFit, ModelError> {
        let kelvins = vec![kelvin; points.len()];
        Self::fit_at(points, &kelvins, kelvin, ohms, SaturationLaw::default())
    }

    /// [`DiodeDetector::fit`] to points taken at junction temperatures `kelvins` (one per
    /// point): n and V_L are those at `t0`, and each point is read through the diode
    /// carried to its own temperature by `law`, so that sets taken at several
    /// temperatures make one fit.
    pub fn fit_at(
        points: &[CalPoint],
        kelvins: &[f64],
        t0: f64,
        ohms: f64,
        law: SaturationLaw,
    ) -> Result<DiodeFit, ModelError> {
        let (sorted, sorted_kelvins) = ordered_at(points, kelvins, ModelKind::Diode)?;
        if let Some(index) = points.iter().position(|p| p.volts <= 0.0) {
            return Err(ModelError::NonPositiveOutput {
                index,
                volts: points[index].volts,
                model: ModelKind::Diode,
            });
        }
        let span = level_span(&sorted);
        let weighting = Weighting::of(&sorted);
        let u = point_u_volts(&sorted, weighting);
        let model =
            |p: [f64; 2]| DiodeDetector::new(p[0], p[1].exp(), t0, ohms, span).with_law(law);
        let residuals = |p: [f64; 2], out: &mut [f64]| {
            fit_residuals(&model(p), &sorted, &sorted_kelvins, &u, weighting, out)
        };
        let bounds = [N_BOUNDS, (VL_BOUNDS.0.ln(), VL_BOUNDS.1.ln())];
        // Several valleys can exist; descending from the best few grid points finds the
        // deepest one.
        let fit = best_starts(&residuals, sorted.len())
            .into_iter()
            .map(|start| levenberg_marquardt(&residuals, sorted.len(), start, bounds))
            .min_by(|a, b| a.sse.total_cmp(&b.sse))
            .expect("the grid always yields a start");
        let detector = model(fit.params);
        let rms_db = rms(&residuals_db_at(&detector, &sorted, &sorted_kelvins));
        if !fit.converged || !fit.sse.is_finite() {
            return Err(ModelError::FitFailed {
                model: ModelKind::Diode,
                reason: format!(
                    "no convergence after {} iterations (RMS error {rms_db:.3} dB); check that \
                     all points come from one detector and ADC set-up, or use the table model",
                    fit.iterations,
                ),
            });
        }
        if rms_db > MAX_FIT_RMS_DB {
            return Err(ModelError::FitFailed {
                model: ModelKind::Diode,
                reason: format!(
                    "the best diode curve misses the points by {rms_db:.2} dB RMS; these points do \
                     not look like a diode detector (a log-amp? try --model log or table), or \
                     the ADC zero offset or divider is wrong"
                ),
            });
        }
        let near = |v: f64, bound: f64| (v - bound).abs() <= 1e-6 * (1.0 + bound.abs());
        let mut at_bound = Vec::new();
        if near(fit.params[0], N_BOUNDS.0) || near(fit.params[0], N_BOUNDS.1) {
            at_bound.push("n");
        }
        if near(fit.params[1], bounds[1].0) || near(fit.params[1], bounds[1].1) {
            at_bound.push("vl");
        }
        Ok(DiodeFit {
            detector: detector.with_covariance_at(&sorted, &sorted_kelvins),
            iterations: fit.iterations,
            at_bound,
        })
    }
}

/// The residuals a diode fit minimises: (model volts − measured volts)/u for weighted
/// points, since the noise is in the counts; model dBm − applied dBm for unweighted ones,
/// so that no level dominates by the size of its output. False where the curve cannot
/// be evaluated.
fn fit_residuals(
    model: &DiodeDetector,
    points: &[CalPoint],
    kelvins: &[f64],
    u: &[f64],
    weighting: Weighting,
    out: &mut [f64],
) -> bool {
    for (((slot, point), u), &kelvin) in out.iter_mut().zip(points).zip(u).zip(kelvins) {
        let model = model.at_point_kelvin(kelvin);
        *slot = match weighting {
            Weighting::Unweighted => model.dbm_at(point.volts) - point.dbm,
            Weighting::Relative | Weighting::Absolute => {
                (model.volts_at(point.dbm) - point.volts) / u
            }
        };
    }
    out.iter().all(|r| r.is_finite())
}

/// Each point's error in dB, read through the diode at the point's own temperature.
fn residuals_db_at(model: &DiodeDetector, points: &[CalPoint], kelvins: &[f64]) -> Vec<f64> {
    points
        .iter()
        .zip(kelvins)
        .map(|(p, &kelvin)| model.at_point_kelvin(kelvin).dbm_at(p.volts) - p.dbm)
        .collect()
}

/// The lowest and highest applied level of the points.
fn level_span(points: &[CalPoint]) -> (f64, f64) {
    points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| {
            (lo.min(p.dbm), hi.max(p.dbm))
        })
}

/// The best few points of a coarse grid of starting values, one per ideality factor.
fn best_starts(residuals: &impl Fn([f64; 2], &mut [f64]) -> bool, count: usize) -> Vec<[f64; 2]> {
    let mut scratch = vec![0.0; count];
    let mut per_n: Vec<([f64; 2], f64)> = Vec::new();
    for n in [1.0, 1.1, 1.3, 1.6, 2.0, 3.0] {
        let mut best = ([n, 0.1f64.ln()], f64::INFINITY);
        for decade in -5..=3 {
            let p = [n, (10f64.powi(decade)).ln()];
            if residuals(p, &mut scratch) {
                let sse: f64 = scratch.iter().map(|r| r * r).sum();
                if sse < best.1 {
                    best = (p, sse);
                }
            }
        }
        per_n.push(best);
    }
    per_n.sort_by(|a, b| a.1.total_cmp(&b.1));
    per_n.into_iter().take(4).map(|(p, _)| p).collect()
}

impl Detector for DiodeDetector {
    fn kind(&self) -> ModelKind {
        ModelKind::Diode
    }

    fn dbm_at(&self, volts: f64) -> f64 {
        let vpk = self.peak_for_output(volts);
        if vpk <= 0.0 {
            return f64::NEG_INFINITY;
        }
        watts_to_dbm(Power::from_vpk(vpk, self.ohms).watts())
    }

    fn volts_at(&self, dbm: f64) -> f64 {
        let vpk = Power::from_dbm(dbm).volts(self.ohms, crate::units::VoltageForm::Peak);
        self.output_for_peak(vpk)
    }

    fn span_dbm(&self) -> (f64, f64) {
        self.span
    }

    /// The parameters' covariance propagated to the level (the gradient of the dBm read
    /// at that level's volts with respect to n and ln V_L), with the residual term.
    fn covariance(&self) -> Option<&FitCovariance> {
        self.covariance.as_ref()
    }

    fn model_u_db(&self, detector_dbm: f64) -> Option<f64> {
        if !detector_dbm.is_finite() {
            return None;
        }
        let covariance = self.covariance.as_ref()?;
        let volts = self.volts_at(detector_dbm);
        let dbm_with = |p: [f64; 2]| self.with_params(p).dbm_at(volts);
        let g = gradient(dbm_with, [self.n, self.vl.ln()]);
        Some(covariance.u_db(g, detector_dbm)).filter(|u| u.is_finite())
    }
}
