//! What a fitted model can say about its own error at a level: the parameters'
//! covariance from a (weighted) least-squares fit, propagated through the model's
//! gradient, and a residual term for what the model's shape misses.
//!
//! The rules (docs/calibration.md, "The model term", gives the reasons):
//! - with a standard uncertainty on every point the covariance is (JᵀWJ)⁻¹ as it stands,
//!   unless χ² of the weighted residuals exceeds its 95th percentile for n − 2 degrees of
//!   freedom: then the stated uncertainties do not explain the scatter, the covariance is
//!   scaled by χ²/(n − 2) and the residual term is added;
//! - with relative uncertainties, or none, the covariance is scaled by the residuals'
//!   own scatter (χ²/(n − 2)) and the residual term is always added, since nothing says
//!   the scatter is noise rather than a curve the model cannot follow.
//!
//! The residual term at a level is the squared dB residuals interpolated linearly in
//! level; for an unweighted fit, whose points count as equally well known in dB, it is at
//! least the residuals' standard deviation √(Σr²/(n − 2)).

use super::Weighting;

/// Standard normal quantile at 0.95, for the chi-square test.
const Z_95: f64 = 1.644_853_626_951_472_2;

/// The covariance of a two-parameter fit and its residuals, ready to give the model's
/// standard uncertainty at any level.
#[derive(Debug, Clone, PartialEq)]
pub struct FitCovariance {
    /// How the points were weighed.
    pub weighting: Weighting,
    /// Covariance of the model's two parameters, after any scaling.
    pub covariance: [[f64; 2]; 2],
    /// χ² of the weighted residuals over n − 2 (for unweighted fits, the residual variance
    /// in the fit's own unit).
    pub reduced_chi2: f64,
    /// Degrees of freedom, n − 2.
    pub dof: usize,
    /// True when the residual term is part of the model's uncertainty.
    pub residual_term: bool,
    /// (level dBm, dB residual) of each point, rising in level.
    residuals_db: Vec<(f64, f64)>,
}

impl FitCovariance {
    /// From the unscaled (JᵀWJ)⁻¹, the sum of squared weighted residuals, and each point's
    /// (applied dBm, dB residual) under the model.
    pub fn new(
        weighting: Weighting,
        unscaled: [[f64; 2]; 2],
        weighted_sse: f64,
        mut residuals_db: Vec<(f64, f64)>,
    ) -> Self {
        residuals_db.sort_by(|a, b| a.0.total_cmp(&b.0));
        let dof = residuals_db.len().saturating_sub(2).max(1);
        let reduced_chi2 = weighted_sse / dof as f64;
        let (scale, residual_term) = match weighting {
            Weighting::Absolute if weighted_sse <= chi_square_95(dof) => (1.0, false),
            _ => (reduced_chi2, true),
        };
        FitCovariance {
            weighting,
            covariance: unscaled.map(|row| row.map(|c| c * scale)),
            reduced_chi2,
            dof,
            residual_term,
            residuals_db,
        }
    }

    /// The residual term at `dbm` (zero when it is not included), dB.
    pub fn residual_u_db(&self, dbm: f64) -> f64 {
        if !self.residual_term {
            return 0.0;
        }
        let local = squared_residual_at(&self.residuals_db, dbm);
        if self.weighting != Weighting::Unweighted {
            // Weighted points differ in how well they are known, so their dB residuals
            // are not of one size: only the local ones speak for a level.
            return local.sqrt();
        }
        let pooled = self.residuals_db.iter().map(|(_, r)| r * r).sum::<f64>() / self.dof as f64;
        pooled.max(local).sqrt()
    }

    /// The standard uncertainty the parameters give at a level where the model's dBm
    /// moves by `gradient` per unit of each parameter: √(gᵀ·C·g).
    pub fn parameter_u_db(&self, gradient: [f64; 2]) -> f64 {
        let c = &self.covariance;
        let g = gradient;
        let variance =
            g[0] * (c[0][0] * g[0] + c[0][1] * g[1]) + g[1] * (c[1][0] * g[0] + c[1][1] * g[1]);
        variance.max(0.0).sqrt()
    }

    /// The model's standard uncertainty at `dbm`: the parameter and residual terms
    /// combined by root sum of squares, dB.
    pub fn u_db(&self, gradient: [f64; 2], dbm: f64) -> f64 {
        self.parameter_u_db(gradient).hypot(self.residual_u_db(dbm))
    }
}

/// r² interpolated linearly in level between the two points around `dbm`, held at the
/// end points' value beyond them.
fn squared_residual_at(residuals: &[(f64, f64)], dbm: f64) -> f64 {
    if !dbm.is_finite() || residuals.is_empty() {
        return f64::NAN;
    }
    let squared = |i: usize| residuals[i].1 * residuals[i].1;
    let last = residuals.len() - 1;
    if dbm <= residuals[0].0 {
        return squared(0);
    }
    if dbm >= residuals[last].0 {
        return squared(last);
    }
    let k = residuals.partition_point(|&(level, _)| level <= dbm) - 1;
    let t = (dbm - residuals[k].0) / (residuals[k + 1].0 - residuals[k].0);
    squared(k) + t * (squared(k + 1) - squared(k))
}

/// The 95th percentile of the chi-square distribution with `dof` degrees of freedom, by
/// the Wilson–Hilferty cube-root approximation: below the exact value by at most 2.5 % at
/// one degree of freedom, 1 % at two and 0.6 % from three on, so the test errs towards
/// failing.
pub fn chi_square_95(dof: usize) -> f64 {
    let k = dof.max(1) as f64;
    let a = 2.0 / (9.0 * k);
    k * (1.0 - a + Z_95 * a.sqrt()).powi(3)
}

/// The gradient of a model's dBm with respect to its two parameters, by central
/// differences of `dbm_with(params)`, with steps scaled to each parameter.
pub fn gradient(dbm_with: impl Fn([f64; 2]) -> f64, params: [f64; 2]) -> [f64; 2] {
    [0, 1].map(|i| {
        let h = 1e-5 * (1.0 + params[i].abs());
        let (mut up, mut down) = (params, params);
        up[i] += h;
        down[i] -= h;
        (dbm_with(up) - dbm_with(down)) / (2.0 * h)
    })
}
