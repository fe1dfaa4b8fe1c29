//! Small numerical tools the models share: bracketed root finders, straight-line least
//! squares (plain and weighted) with standard errors, and a two-parameter
//! Levenberg–Marquardt fit with the covariance of its parameters.

use thiserror::Error;

/// A numerical method that could not deliver.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum NumericError {
    /// f(lo) and f(hi) have the same sign, so no root is known to lie between.
    #[error("no sign change between {lo} and {hi}")]
    NoBracket {
        /// Lower end.
        lo: f64,
        /// Upper end.
        hi: f64,
    },
    /// The function gave NaN.
    #[error("the function is not defined at {at}")]
    NotANumber {
        /// Where.
        at: f64,
    },
}

/// Finds x in [lo, hi] with f(x) = 0, given that f changes sign there (Illinois variant of
/// regula falsi, with bisection whenever a step would leave the bracket). Converges to a
/// few ulps of x.
pub fn solve_bracketed(f: impl Fn(f64) -> f64, lo: f64, hi: f64) -> Result<f64, NumericError> {
    let (mut a, mut b) = (lo, hi);
    let (mut fa, mut fb) = (f(a), f(b));
    for (x, fx) in [(a, fa), (b, fb)] {
        if fx.is_nan() {
            return Err(NumericError::NotANumber { at: x });
        }
        if fx == 0.0 {
            return Ok(x);
        }
    }
    if fa.signum() == fb.signum() {
        return Err(NumericError::NoBracket { lo, hi });
    }
    let mut side = 0i8;
    for step in 0..400 {
        let secant = (a * fb - b * fa) / (fb - fa);
        let inside = secant > a.min(b) && secant < a.max(b);
        // Every fourth step bisects, so the bracket shrinks even on awkward shapes.
        let c = if inside && step % 4 != 3 {
            secant
        } else {
            0.5 * (a + b)
        };
        let fc = f(c);
        if fc.is_nan() {
            return Err(NumericError::NotANumber { at: c });
        }
        if fc == 0.0 || (b - a).abs() <= 2.0 * f64::EPSILON * c.abs().max(f64::MIN_POSITIVE) {
            return Ok(c);
        }
        if fc.signum() == fb.signum() {
            b = c;
            fb = fc;
            if side == -1 {
                fa *= 0.5;
            }
            side = -1;
        } else {
            a = c;
            fa = fc;
            if side == 1 {
                fb *= 0.5;
            }
            side = 1;
        }
        if a == b || c == a && c == b {
            return Ok(c);
        }
    }
    Ok(0.5 * (a + b))
}

/// Finds x in [lo, hi] with f(x) = 0 for an increasing f given with its slope, by Newton's
/// method from `start`, kept inside the bracket (a step that would leave it bisects
/// instead). From a close start it needs a handful of steps where regula falsi on a wide
/// bracket needs a dozen. Converges to a few ulps of x.
pub fn solve_newton(
    f: impl Fn(f64) -> (f64, f64),
    start: f64,
    lo: f64,
    hi: f64,
) -> Result<f64, NumericError> {
    let (mut a, mut b) = (lo, hi);
    let at_hi = f(b).0;
    if at_hi.is_nan() {
        return Err(NumericError::NotANumber { at: b });
    }
    if at_hi < 0.0 {
        return Err(NumericError::NoBracket { lo, hi });
    }
    let mut x = start.clamp(a, b);
    for _ in 0..200 {
        let (fx, slope) = f(x);
        if fx.is_nan() {
            return Err(NumericError::NotANumber { at: x });
        }
        if fx == 0.0 {
            return Ok(x);
        }
        if fx < 0.0 {
            a = x;
        } else {
            b = x;
        }
        let step = x - fx / slope;
        let next = if step > a && step < b {
            step
        } else {
            0.5 * (a + b)
        };
        if (next - x).abs() <= 4.0 * f64::EPSILON * next.abs() || next == a || next == b {
            return Ok(next);
        }
        x = next;
    }
    Ok(x)
}

/// Grows `hi` by doubling until f(hi) > 0 for an increasing f, then solves on [lo, hi].
pub fn solve_increasing(f: impl Fn(f64) -> f64, lo: f64, mut hi: f64) -> Result<f64, NumericError> {
    for _ in 0..1100 {
        if f(hi) >= 0.0 {
            return solve_bracketed(&f, lo, hi);
        }
        hi = lo + 2.0 * (hi - lo);
    }
    Err(NumericError::NoBracket { lo, hi })
}

/// A straight line fitted by least squares, with the standard errors of its coefficients.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LineFit {
    /// Slope b1.
    pub slope: f64,
    /// Intercept b0.
    pub intercept: f64,
    /// Standard error of the slope (NaN with fewer than three points).
    pub slope_stderr: f64,
    /// Standard error of the intercept (NaN with fewer than three points).
    pub intercept_stderr: f64,
}

/// Least-squares line through (x, y): b1 = Sxy/Sxx, s = sqrt(SSE/(n − 2)), SE(b1) = s/sqrt(Sxx).
/// None when x has no spread.
pub fn fit_line(x: &[f64], y: &[f64]) -> Option<LineFit> {
    let n = x.len().min(y.len());
    if n < 2 {
        return None;
    }
    let count = n as f64;
    let mean_x = x[..n].iter().sum::<f64>() / count;
    let mean_y = y[..n].iter().sum::<f64>() / count;
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for (xi, yi) in x.iter().zip(y) {
        sxx += (xi - mean_x) * (xi - mean_x);
        sxy += (xi - mean_x) * (yi - mean_y);
    }
    if sxx <= 0.0 {
        return None;
    }
    let slope = sxy / sxx;
    let intercept = mean_y - slope * mean_x;
    let sse: f64 = x
        .iter()
        .zip(y)
        .map(|(xi, yi)| (yi - intercept - slope * xi).powi(2))
        .sum();
    let s = if n > 2 {
        (sse / (count - 2.0)).sqrt()
    } else {
        f64::NAN
    };
    Some(LineFit {
        slope,
        intercept,
        slope_stderr: s / sxx.sqrt(),
        intercept_stderr: s * (1.0 / count + mean_x * mean_x / sxx).sqrt(),
    })
}

/// A straight line y = slope·x + intercept fitted by weighted least squares.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WeightedLine {
    /// Slope.
    pub slope: f64,
    /// Intercept.
    pub intercept: f64,
    /// (JᵀWJ)⁻¹ for (slope, intercept): their covariance when the weights are 1/σ² of
    /// each y, before any scaling by the residuals.
    pub unscaled_covariance: [[f64; 2]; 2],
    /// Σ((y − line)/σ)².
    pub weighted_sse: f64,
}

/// Weighted least-squares line through (x, y) with y's standard uncertainties `sigma`
/// (weights 1/σ²), in centred form so that large x do not cost precision. None when x has
/// no spread or a σ is not positive.
pub fn fit_line_weighted(x: &[f64], y: &[f64], sigma: &[f64]) -> Option<WeightedLine> {
    if x.len() < 2 || x.len() != y.len() || x.len() != sigma.len() {
        return None;
    }
    if !sigma.iter().all(|s| s.is_finite() && *s > 0.0) {
        return None;
    }
    let weights: Vec<f64> = sigma.iter().map(|s| 1.0 / (s * s)).collect();
    let total: f64 = weights.iter().sum();
    let weighted_mean = |v: &[f64]| v.iter().zip(&weights).map(|(a, w)| a * w).sum::<f64>() / total;
    let (mean_x, mean_y) = (weighted_mean(x), weighted_mean(y));
    let (mut sxx, mut sxy) = (0.0, 0.0);
    for ((xi, yi), w) in x.iter().zip(y).zip(&weights) {
        sxx += w * (xi - mean_x) * (xi - mean_x);
        sxy += w * (xi - mean_x) * (yi - mean_y);
    }
    if sxx.is_nan() || sxx <= 0.0 {
        return None;
    }
    let slope = sxy / sxx;
    let intercept = mean_y - slope * mean_x;
    let weighted_sse = x
        .iter()
        .zip(y)
        .zip(&weights)
        .map(|((xi, yi), w)| w * (yi - intercept - slope * xi).powi(2))
        .sum();
    let cross = -mean_x / sxx;
    Some(WeightedLine {
        slope,
        intercept,
        unscaled_covariance: [
            [1.0 / sxx, cross],
            [cross, 1.0 / total + mean_x * mean_x / sxx],
        ],
        weighted_sse,
    })
}

/// The outcome of a least-squares fit of two parameters.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Fit2 {
    /// The fitted parameters.
    pub params: [f64; 2],
    /// Sum of squared residuals at the fit.
    pub sse: f64,
    /// Iterations used.
    pub iterations: usize,
    /// True when the step and the change in SSE both fell below tolerance.
    pub converged: bool,
}

/// Minimises Σ r_i(p)² over two parameters held inside `bounds`, by Levenberg–Marquardt with
/// a central-difference Jacobian. `residuals` writes r(p) into its slice and returns false
/// where the model cannot be evaluated.
pub fn levenberg_marquardt(
    residuals: &impl Fn([f64; 2], &mut [f64]) -> bool,
    count: usize,
    start: [f64; 2],
    bounds: [(f64, f64); 2],
) -> Fit2 {
    let sse_at = |p: [f64; 2], r: &mut [f64]| -> f64 {
        if residuals(p, r) {
            r.iter().map(|v| v * v).sum()
        } else {
            f64::INFINITY
        }
    };
    let clamp = |p: [f64; 2]| [0, 1].map(|i| p[i].clamp(bounds[i].0, bounds[i].1));
    let mut r = vec![0.0; count];
    let mut probe = vec![0.0; count];
    let mut jac = vec![[0.0; 2]; count];
    let mut p = clamp(start);
    let mut sse = sse_at(p, &mut r);
    let mut lambda = 1e-3;
    for iteration in 1..=300 {
        if !jacobian(residuals, p, &mut probe, &mut jac) {
            return Fit2 {
                params: p,
                sse,
                iterations: iteration,
                converged: false,
            };
        }
        let (jtj, jtr) = normal_equations(&jac, &r);
        let mut improved = false;
        while lambda < 1e12 {
            let Some(step) = damped_step(jtj, jtr, lambda) else {
                lambda *= 10.0;
                continue;
            };
            let trial = clamp([p[0] + step[0], p[1] + step[1]]);
            let trial_sse = sse_at(trial, &mut probe);
            if trial_sse < sse {
                let small_step =
                    (0..2).all(|i| (trial[i] - p[i]).abs() <= 1e-12 * (1.0 + p[i].abs()));
                let small_gain = sse - trial_sse <= 1e-14 * sse + 1e-30;
                // How much of the reduction the linear model promised came true: a step
                // that overshoots across a narrow curved valley lowers the SSE a little
                // yet far less than promised, and more damping stops the zig-zag.
                let promised = -2.0 * (step[0] * jtr[0] + step[1] * jtr[1])
                    - (0..2)
                        .map(|a| step[a] * (jtj[a][0] * step[0] + jtj[a][1] * step[1]))
                        .sum::<f64>();
                let gain = (sse - trial_sse) / promised;
                p = trial;
                sse = sse_at(p, &mut r);
                lambda = if gain > 0.75 {
                    (lambda / 3.0).max(1e-12)
                } else if gain < 0.25 {
                    lambda * 2.0
                } else {
                    lambda
                };
                improved = true;
                if small_step || small_gain {
                    return Fit2 {
                        params: p,
                        sse,
                        iterations: iteration,
                        converged: true,
                    };
                }
                break;
            }
            lambda *= 4.0;
        }
        if !improved {
            // No step lowers the SSE: a minimum to working precision (or stuck on a bound).
            return Fit2 {
                params: p,
                sse,
                iterations: iteration,
                converged: true,
            };
        }
    }
    Fit2 {
        params: p,
        sse,
        iterations: 300,
        converged: false,
    }
}

/// (JᵀJ)⁻¹ at `params` for the residuals of a fit, with a central-difference Jacobian:
/// the parameters' covariance when each residual is divided by its standard uncertainty.
/// None where the model cannot be evaluated or JᵀJ is singular.
pub fn unscaled_covariance(
    residuals: &impl Fn([f64; 2], &mut [f64]) -> bool,
    count: usize,
    params: [f64; 2],
) -> Option<[[f64; 2]; 2]> {
    let mut scratch = vec![0.0; count];
    let mut jac = vec![[0.0; 2]; count];
    if !jacobian(residuals, params, &mut scratch, &mut jac) {
        return None;
    }
    let (jtj, _) = normal_equations(&jac, &scratch);
    let det = jtj[0][0] * jtj[1][1] - jtj[0][1] * jtj[1][0];
    if !det.is_normal() || det < 0.0 {
        return None;
    }
    Some([
        [jtj[1][1] / det, -jtj[0][1] / det],
        [-jtj[1][0] / det, jtj[0][0] / det],
    ])
}

fn jacobian(
    residuals: &impl Fn([f64; 2], &mut [f64]) -> bool,
    p: [f64; 2],
    scratch: &mut [f64],
    jac: &mut [[f64; 2]],
) -> bool {
    let mut plus = vec![0.0; scratch.len()];
    for i in 0..2 {
        let h = 1e-6 * (1.0 + p[i].abs());
        let mut hi = p;
        let mut lo = p;
        hi[i] += h;
        lo[i] -= h;
        if !residuals(hi, &mut plus) || !residuals(lo, scratch) {
            return false;
        }
        for (row, (up, down)) in jac.iter_mut().zip(plus.iter().zip(scratch.iter())) {
            row[i] = (up - down) / (2.0 * h);
        }
    }
    true
}

fn normal_equations(jac: &[[f64; 2]], r: &[f64]) -> ([[f64; 2]; 2], [f64; 2]) {
    let mut jtj = [[0.0; 2]; 2];
    let mut jtr = [0.0; 2];
    for (row, ri) in jac.iter().zip(r) {
        for a in 0..2 {
            jtr[a] += row[a] * ri;
            for b in 0..2 {
                jtj[a][b] += row[a] * row[b];
            }
        }
    }
    (jtj, jtr)
}

/// Solves (JᵀJ + λ·diag(JᵀJ))·δ = −Jᵀr for δ.
fn damped_step(jtj: [[f64; 2]; 2], jtr: [f64; 2], lambda: f64) -> Option<[f64; 2]> {
    let a = jtj[0][0] * (1.0 + lambda) + 1e-300;
    let d = jtj[1][1] * (1.0 + lambda) + 1e-300;
    let (b, c) = (jtj[0][1], jtj[1][0]);
    let det = a * d - b * c;
    if !det.is_normal() {
        return None;
    }
    let step = [
        -(d * jtr[0] - b * jtr[1]) / det,
        -(a * jtr[1] - c * jtr[0]) / det,
    ];
    step.iter().all(|s| s.is_finite()).then_some(step)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Source: common practice (√2 = 1.4142135623730951 to double precision).
    #[test]
    fn root_of_a_parabola_to_full_precision() {
        let root = solve_bracketed(|x| x * x - 2.0, 0.0, 2.0).unwrap();
        assert!((root - std::f64::consts::SQRT_2).abs() < 4e-16);
    }

    // Source: common practice (the cube root of 2 is 1.2599210498948732; a step that would
    // leave the bracket, as from x = 0.01 where the slope is tiny, must bisect instead).
    #[test]
    fn newton_in_a_bracket_reaches_full_precision_from_a_poor_start() {
        let cube = |x: f64| (x * x * x - 2.0, 3.0 * x * x);
        for start in [0.01, 1.0, 1.26, 3.9] {
            let root = solve_newton(cube, start, 0.0, 4.0).unwrap();
            assert!((root - 2f64.cbrt()).abs() < 4e-16, "from {start}: {root}");
        }
        assert!(matches!(
            solve_newton(cube, 0.5, 0.0, 1.0),
            Err(NumericError::NoBracket { .. })
        ));
    }

    #[test]
    fn a_missing_sign_change_is_an_error_not_a_guess() {
        assert!(matches!(
            solve_bracketed(|x| x * x + 1.0, -1.0, 1.0),
            Err(NumericError::NoBracket { .. })
        ));
    }

    // Source: NIST StRD "Norris" linear regression dataset, certified values
    // (slope 1.00211681802045, SE 4.29796848199937e-4; intercept −0.262323073774029,
    // SE 0.232818234301152); data file copied from scipy's test suite
    // (scipy/stats/tests/data/nist_linregress/Norris.dat, scipy 1.17.1).
    #[test]
    fn norris_certified_values() {
        let text = include_str!("../../tests/reference/Norris.dat");
        let (mut x, mut y) = (Vec::new(), Vec::new());
        for line in text.lines().skip(60) {
            let cols: Vec<f64> = line
                .split_whitespace()
                .map(|c| c.parse().unwrap())
                .collect();
            if let [yi, xi] = cols[..] {
                y.push(yi);
                x.push(xi);
            }
        }
        assert_eq!(x.len(), 36);
        let fit = fit_line(&x, &y).unwrap();
        let rel = |a: f64, b: f64| ((a - b) / b).abs();
        assert!(rel(fit.slope, 1.00211681802045) < 1e-12, "{}", fit.slope);
        assert!(rel(fit.slope_stderr, 4.29796848199937e-4) < 1e-9);
        assert!(rel(fit.intercept, -0.262323073774029) < 1e-9);
        assert!(rel(fit.intercept_stderr, 0.232818234301152) < 1e-9);
    }

    // Source: worked example (Rosenbrock-like valley with its minimum at (1, 1), a standard
    // test of nonlinear least squares).
    #[test]
    fn levenberg_marquardt_finds_a_known_minimum() {
        let fit = levenberg_marquardt(
            &|p, r| {
                r[0] = 10.0 * (p[1] - p[0] * p[0]);
                r[1] = 1.0 - p[0];
                true
            },
            2,
            [-1.2, 1.0],
            [(-5.0, 5.0), (-5.0, 5.0)],
        );
        assert!(fit.converged);
        assert!((fit.params[0] - 1.0).abs() < 1e-6 && (fit.params[1] - 1.0).abs() < 1e-6);
    }
}
