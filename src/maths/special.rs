//! Special functions and physical constants the detector models need: the modified Bessel
//! function I0 (plain, exponentially scaled and as a logarithm, so large arguments never
//! overflow) and the thermal voltage kT/q from the exact SI 2019 constants.

/// Boltzmann constant, J/K (exact, SI 2019).
pub const BOLTZMANN: f64 = 1.380649e-23;
/// Elementary charge, C (exact, SI 2019).
pub const ELEMENTARY_CHARGE: f64 = 1.602176634e-19;

/// 1/k² for the terms of the power series (below x = 30 it ends well before k = 128).
const INVERSE_SQUARES: [f64; 128] = {
    let mut table = [0.0; 128];
    let mut k = 1;
    while k < 128 {
        table[k] = 1.0 / (k * k) as f64;
        k += 1;
    }
    table
};

/// Where the power series hands over to the large-argument expansion.
const ASYMPTOTIC_FROM: f64 = 30.0;

/// Thermal voltage kT/q in volts at `kelvin`.
pub fn thermal_voltage(kelvin: f64) -> f64 {
    BOLTZMANN * kelvin / ELEMENTARY_CHARGE
}

/// I0(x) − 1 by its power series Σ_{k≥1} t_k, t_k = (x²/4)^k / (k!)², all terms positive;
/// with Σ k·t_k, from which I1(x) = (2/x)·Σ k·t_k (the series differentiated term by term).
fn i0_minus_one_series(x: f64) -> (f64, f64) {
    let q = 0.25 * x * x;
    let mut term = 1.0;
    let (mut sum, mut weighted) = (0.0, 0.0);
    for k in 1..500 {
        // A multiply by a tabled 1/k² instead of a division: the terms form one chain.
        let inverse_square = match INVERSE_SQUARES.get(k) {
            Some(&tabled) => tabled,
            None => 1.0 / (k * k) as f64,
        };
        term *= q * inverse_square;
        let k = k as f64;
        sum += term;
        weighted += k * term;
        if term <= sum * 1e-17 {
            break;
        }
    }
    (sum, weighted)
}

/// e^-x·I_ν(x)·sqrt(2πx) for large x by the asymptotic expansion (DLMF 10.40.1), for
/// ν = 0 and 1, given as 4ν²: the sum of Π_{j≤k} ((2j−1)² − 4ν²) / (k!·(8x)^k), taken
/// while its terms shrink.
fn scaled_asymptotic_sum(x: f64, four_nu_sq: f64) -> f64 {
    let mut term: f64 = 1.0;
    let mut sum = 1.0;
    for k in 1..200 {
        let odd = f64::from(2 * k - 1);
        let next = term * (odd * odd - four_nu_sq) / (8.0 * x * f64::from(k));
        if next.abs() >= term.abs() {
            break;
        }
        term = next;
        sum += term;
        if term.abs() <= sum.abs() * 1e-17 {
            break;
        }
    }
    sum
}

/// e^-x·I0(x) for large x by the asymptotic expansion (DLMF 10.40.1).
fn i0e_asymptotic(x: f64) -> f64 {
    scaled_asymptotic_sum(x, 0.0) / (2.0 * std::f64::consts::PI * x).sqrt()
}

/// The modified Bessel function of the first kind, order 0. Infinite above about x = 713.7.
pub fn i0(x: f64) -> f64 {
    let x = x.abs();
    if x < ASYMPTOTIC_FROM {
        1.0 + i0_minus_one_series(x).0
    } else {
        // Past about x = 709.8, e^x alone overflows although I0(x) is still finite.
        (x + i0e_asymptotic(x).ln()).exp()
    }
}

/// The exponentially scaled I0: e^-|x|·I0(x), finite for every x.
pub fn i0e(x: f64) -> f64 {
    let x = x.abs();
    if x < ASYMPTOTIC_FROM {
        (1.0 + i0_minus_one_series(x).0) * (-x).exp()
    } else {
        i0e_asymptotic(x)
    }
}

/// ln I0(x), accurate for tiny x (where it is about x²/4) and finite for huge x.
pub fn ln_i0(x: f64) -> f64 {
    let x = x.abs();
    if x < ASYMPTOTIC_FROM {
        i0_minus_one_series(x).0.ln_1p()
    } else {
        x + i0e_asymptotic(x).ln()
    }
}

/// ln I0(x) and its slope d/dx ln I0(x) = I1(x)/I0(x), for x ≥ 0 (for root finding by
/// Newton's method: both come from the same series terms).
pub fn ln_i0_and_slope(x: f64) -> (f64, f64) {
    let x = x.abs();
    if x == 0.0 {
        (0.0, 0.0)
    } else if x < ASYMPTOTIC_FROM {
        let (sum, weighted) = i0_minus_one_series(x);
        (sum.ln_1p(), 2.0 * weighted / x / (1.0 + sum))
    } else {
        let i0_part = scaled_asymptotic_sum(x, 0.0);
        let value = x + (i0_part / (2.0 * std::f64::consts::PI * x).sqrt()).ln();
        // The ratio of the scaled sums: their common factor e^x/√(2πx) cancels.
        (value, scaled_asymptotic_sum(x, 4.0) / i0_part)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, rel: f64) -> bool {
        (a - b).abs() <= rel * b.abs()
    }

    // Source: ../shared/REFERENCES.md, values of scipy.special.i0 and i0e
    // (Abramowitz & Stegun Table 9.8 tabulates e^-x·I0(x)).
    #[test]
    fn i0_matches_published_values() {
        let table = [
            (0.5, 1.063483370741323, 0.6450352704),
            (1.0, 1.266065877752008, 0.4657596076),
            (2.0, 2.279585302336067, 0.3085083226),
            (5.0, 27.23987182360445, 0.1835408126),
            (10.0, 2815.716628466254, 0.1278333372),
            (20.0, 43558282.55955353, 0.08978031188),
        ];
        for (x, want_i0, want_i0e) in table {
            assert!(close(i0(x), want_i0, 1e-14), "I0({x}) = {}", i0(x));
            assert!(close(i0e(x), want_i0e, 1e-9), "i0e({x}) = {}", i0e(x));
        }
    }

    // Source: Abramowitz & Stegun Table 9.8 (e^-x·I1(x) = 0.2079104154, 0.2152692892,
    // 0.1639722669, 0.1212626814 at x = 1, 2, 5, 10; from memory, consistent with the I0
    // values above) for the slope I1/I0 of ln I0 in the series region; DLMF 10.40.1 for
    // I1/I0 ≈ 1 − 1/(2x) − 1/(8x²) in the asymptotic one; and the slope must match a
    // central difference of ln I0 on both sides of the hand-over at x = 30.
    #[test]
    fn the_slope_of_ln_i0_is_i1_over_i0() {
        for (x, i1e, i0e_want) in [
            (1.0, 0.2079104154, 0.4657596076),
            (2.0, 0.2152692892, 0.3085083226),
            (5.0, 0.1639722669, 0.1835408126),
            (10.0, 0.1212626814, 0.1278333372),
        ] {
            let (_, slope) = ln_i0_and_slope(x);
            assert!(close(slope, i1e / i0e_want, 1e-9), "x = {x}: {slope}");
        }
        for x in [200.0, 5000.0] {
            let want = 1.0 - 1.0 / (2.0 * x) - 1.0 / (8.0 * x * x);
            // The next term of the expansion is of order 1/x³.
            assert!(
                close(ln_i0_and_slope(x).1, want, 1.0 / (x * x * x)),
                "x = {x}"
            );
        }
        for x in [0.01, 0.7, 3.0, 29.0, 31.0, 80.0] {
            let h = 1e-5 * x;
            let numeric = (ln_i0(x + h) - ln_i0(x - h)) / (2.0 * h);
            assert!(close(ln_i0_and_slope(x).1, numeric, 1e-7), "x = {x}");
        }
        assert_eq!(ln_i0_and_slope(0.0), (0.0, 0.0));
    }

    // Source: DLMF §10.40.1, I0(x) ~ e^x / sqrt(2πx) for large x.
    #[test]
    fn large_arguments_follow_the_leading_asymptote_without_overflow() {
        let x = 1e6;
        let leading = 1.0 / (2.0 * std::f64::consts::PI * x).sqrt();
        assert!(close(i0e(x), leading, 2e-7));
        assert!(close(ln_i0(x), x + leading.ln(), 1e-12));
        assert!(i0(800.0).is_infinite());
    }

    // Source: common practice (series I0(x) = 1 + x²/4 + x⁴/64 + …).
    #[test]
    fn small_arguments_keep_relative_precision() {
        let x = 1e-6;
        assert!(close(ln_i0(x), x * x / 4.0, 1e-9));
    }

    // Source: ../shared/REFERENCES.md (SI 2019 exact constants): Vt(300 K) = 25.8520 mV,
    // Vt(290 K) = 24.9903 mV.
    #[test]
    fn thermal_voltage_from_exact_constants() {
        assert!((thermal_voltage(300.0) - 25.8520e-3).abs() < 0.5e-7);
        assert!((thermal_voltage(290.0) - 24.9903e-3).abs() < 0.5e-7);
    }
}
