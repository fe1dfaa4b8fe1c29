//! Monotone piecewise cubic Hermite interpolation (PCHIP, Fritsch–Butland slopes), computed
//! the way `scipy.interpolate.PchipInterpolator` does, so the two agree to rounding.

/// A PCHIP interpolant through strictly increasing knots.
#[derive(Debug, Clone, PartialEq)]
pub struct Pchip {
    x: Vec<f64>,
    y: Vec<f64>,
    slopes: Vec<f64>,
}

impl Pchip {
    /// Builds the interpolant. `x` must be strictly increasing, with at least two knots and
    /// as many `y` values; returns None otherwise.
    pub fn new(x: Vec<f64>, y: Vec<f64>) -> Option<Self> {
        let increasing = x.windows(2).all(|w| w[0] < w[1]);
        let finite = x.iter().chain(&y).all(|v| v.is_finite());
        if x.len() < 2 || x.len() != y.len() || !increasing || !finite {
            return None;
        }
        let slopes = knot_slopes(&x, &y);
        Some(Pchip { x, y, slopes })
    }

    /// The knots.
    pub fn x(&self) -> &[f64] {
        &self.x
    }
    /// The values at the knots.
    pub fn y(&self) -> &[f64] {
        &self.y
    }
    /// The derivative at each knot.
    pub fn slopes(&self) -> &[f64] {
        &self.slopes
    }

    /// The interpolant at `t`; outside the knots the end cubic is continued, as scipy does.
    pub fn eval(&self, t: f64) -> f64 {
        let last = self.x.len() - 2;
        let k = self
            .x
            .partition_point(|&xk| xk <= t)
            .saturating_sub(1)
            .min(last);
        let (x0, x1) = (self.x[k], self.x[k + 1]);
        let (d0, d1) = (self.slopes[k], self.slopes[k + 1]);
        let h = x1 - x0;
        let secant = (self.y[k + 1] - self.y[k]) / h;
        let c1 = (d0 + d1 - 2.0 * secant) / h;
        let c0 = c1 / h;
        let c1 = (secant - d0) / h - c1;
        let s = t - x0;
        ((c0 * s + c1) * s + d0) * s + self.y[k]
    }
}

/// Fritsch–Butland derivatives at the knots, with scipy's end conditions.
fn knot_slopes(x: &[f64], y: &[f64]) -> Vec<f64> {
    let h: Vec<f64> = x.windows(2).map(|w| w[1] - w[0]).collect();
    let m: Vec<f64> = y
        .windows(2)
        .zip(&h)
        .map(|(w, hk)| (w[1] - w[0]) / hk)
        .collect();
    let n = x.len();
    if n == 2 {
        return vec![m[0], m[0]];
    }
    let mut d = vec![0.0; n];
    for k in 1..n - 1 {
        let (m0, m1) = (m[k - 1], m[k]);
        if m0 == 0.0 || m1 == 0.0 || m0.signum() != m1.signum() {
            continue;
        }
        let w1 = 2.0 * h[k] + h[k - 1];
        let w2 = h[k] + 2.0 * h[k - 1];
        // This order of operations matches scipy's to the last bit.
        d[k] = 1.0 / ((w1 / m0 + w2 / m1) / (w1 + w2));
    }
    d[0] = end_slope(h[0], h[1], m[0], m[1]);
    d[n - 1] = end_slope(h[n - 2], h[n - 3], m[n - 2], m[n - 3]);
    d
}

/// The one-sided three-point end slope, kept monotone.
fn end_slope(h0: f64, h1: f64, m0: f64, m1: f64) -> f64 {
    let d = ((2.0 * h0 + h1) * m0 - h0 * m1) / (h0 + h1);
    if d.signum() != m0.signum() {
        0.0
    } else if m0.signum() != m1.signum() && d.abs() > 3.0 * m0.abs() {
        3.0 * m0
    } else {
        d
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Source: ../shared/REFERENCES.md, PCHIP check values from scipy.interpolate.PchipInterpolator.
    #[test]
    fn reference_slopes_and_values() {
        let p = Pchip::new(
            vec![0.01, 0.5, 1.0, 2.0, 4.0, 6.0],
            vec![0.0, 0.1, 0.25, 0.3, 0.9, 0.8],
        )
        .unwrap();
        let want = [
            0.15660688517831378,
            0.24275944745661115,
            0.09310344827586206,
            0.07941176470588233,
            0.0,
            -0.15,
        ];
        for (got, want) in p.slopes().iter().zip(want) {
            assert!((got - want).abs() <= 1e-15, "{got} vs {want}");
        }
        for (t, want) in [
            (0.25, 0.04369395358062336),
            (1.5, 0.27671146044624745),
            (3.0, 0.6198529411764706),
            (5.5, 0.8578125000000001),
        ] {
            assert!((p.eval(t) - want).abs() <= 1e-15, "p({t}) = {}", p.eval(t));
        }
    }

    #[test]
    fn rejects_unsorted_or_short_input() {
        assert!(Pchip::new(vec![0.0, 0.0], vec![1.0, 2.0]).is_none());
        assert!(Pchip::new(vec![1.0], vec![1.0]).is_none());
        assert!(Pchip::new(vec![0.0, 1.0, f64::NAN], vec![1.0, 2.0, 3.0]).is_none());
    }
}
