//! How well a load is matched, from the forward and reflected power a directional coupler
//! samples: the reflection coefficient's magnitude |Γ|, SWR, return loss, mismatch loss
//! and the net power to the load, and the range of each that the coupler's finite
//! directivity leaves open. Powers are in watts at the reference plane, each channel
//! already calibrated and averaged on its own: the ratio of the averages, never the
//! average of ratios.
//!
//! The relations are the standard transmission-line ones:
//! |Γ| = √(Pr/Pf), SWR = (1 + |Γ|)/(1 − |Γ|), return loss = −20·log10|Γ| dB,
//! mismatch loss = −10·log10(1 − |Γ|²) dB, net power = Pf − Pr.

/// |Γ| from forward and reflected power, watts. None without forward power (nothing to
/// compare with) or with a power that is not a number; reflected power at or above the
/// forward gives |Γ| ≥ 1, which [`Match::from_gamma`] says is reversed.
pub fn gamma(forward_w: f64, reflected_w: f64) -> Option<f64> {
    let usable = forward_w.is_finite() && forward_w > 0.0 && reflected_w.is_finite();
    usable.then(|| (reflected_w.max(0.0) / forward_w).sqrt())
}

/// SWR for |Γ|; infinite at |Γ| ≥ 1.
pub fn swr(gamma: f64) -> f64 {
    if gamma >= 1.0 {
        f64::INFINITY
    } else {
        (1.0 + gamma) / (1.0 - gamma)
    }
}

/// |Γ| for an SWR (≥ 1).
pub fn gamma_from_swr(swr: f64) -> f64 {
    (swr - 1.0) / (swr + 1.0)
}

/// Return loss in dB for |Γ|: positive for a passive load, infinite for a perfect match.
pub fn return_loss_db(gamma: f64) -> f64 {
    -20.0 * gamma.log10()
}

/// Mismatch loss in dB for |Γ|: the power the reflection keeps from the load, as a loss;
/// infinite at |Γ| ≥ 1.
pub fn mismatch_loss_db(gamma: f64) -> f64 {
    if gamma >= 1.0 {
        f64::INFINITY
    } else {
        -10.0 * (1.0 - gamma * gamma).log10()
    }
}

/// The reflection coefficient the coupler's own leakage adds, for a directivity in dB:
/// Γd = 10^(−D/20).
pub fn directivity_gamma(directivity_db: f64) -> f64 {
    10f64.powf(-directivity_db / 20.0)
}

/// The range the true |Γ| lies in when |Γ| `measured` was read through a coupler whose
/// leakage is Γd: the leakage adds to the reflection at an unknown phase, so anywhere from
/// |Γm| − Γd (never below 0) to |Γm| + Γd. The same range holds the reading of a true |Γ|.
pub fn gamma_range(measured: f64, leakage: f64) -> (f64, f64) {
    ((measured - leakage).max(0.0), measured + leakage)
}

/// The error of the forward reading, dB, that the leakage of the reflected wave into the
/// forward arm can make at |Γ|: from +20·log10(1 + |Γ|·Γd) down to 20·log10(1 − |Γ|·Γd).
pub fn forward_error_db(gamma: f64, leakage: f64) -> (f64, f64) {
    let product = gamma * leakage;
    (
        20.0 * (1.0 + product).log10(),
        20.0 * (1.0 - product).log10(),
    )
}

/// The match a pair of powers describes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Match {
    /// |Γ| as measured.
    pub gamma: f64,
    /// SWR; infinite when reversed.
    pub swr: f64,
    /// Return loss, dB.
    pub return_loss_db: f64,
    /// Mismatch loss, dB.
    pub mismatch_loss_db: f64,
    /// Reflected power at or above the forward: the channels are swapped or one is
    /// miscalibrated, since a passive load reflects less than it is sent.
    pub reversed: bool,
}

impl Match {
    /// Every figure of |Γ|.
    pub fn from_gamma(gamma: f64) -> Self {
        Match {
            gamma,
            swr: swr(gamma),
            return_loss_db: return_loss_db(gamma),
            mismatch_loss_db: mismatch_loss_db(gamma),
            reversed: gamma >= 1.0,
        }
    }

    /// The match of forward and reflected power, watts; None without forward power.
    pub fn from_powers(forward_w: f64, reflected_w: f64) -> Option<Self> {
        gamma(forward_w, reflected_w).map(Match::from_gamma)
    }
}

/// Net power to the load, watts: forward less reflected, both at the reference plane.
pub fn net_power_w(forward_w: f64, reflected_w: f64) -> f64 {
    forward_w - reflected_w
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    // Source: the standard transmission-line relations (Pozar, Microwave Engineering, the
    // chapter on transmission-line theory; chapter from memory): SWR = (1+|Γ|)/(1−|Γ|),
    // RL = −20·log10|Γ|, mismatch loss −10·log10(1−|Γ|²). The values were recomputed from
    // those relations with Python's math module, to the digits given.
    #[test]
    fn swr_return_loss_and_mismatch_loss_agree_with_the_standard_relations() {
        for (s, gamma, rl, ml) in [
            (1.5, 0.2, 13.979, 0.1773),
            (2.0, 1.0 / 3.0, 9.542, 0.5115),
            (3.0, 0.5, 6.021, 1.2494),
        ] {
            assert!(close(gamma_from_swr(s), gamma, 1e-12), "SWR {s}");
            let m = Match::from_gamma(gamma);
            assert!(close(m.swr, s, 1e-12), "SWR {s}: {}", m.swr);
            assert!(
                close(m.return_loss_db, rl, 5e-4),
                "SWR {s}: {}",
                m.return_loss_db
            );
            assert!(
                close(m.mismatch_loss_db, ml, 5e-5),
                "SWR {s}: {}",
                m.mismatch_loss_db
            );
            assert!(!m.reversed);
        }
    }

    // Source: common practice (the rule that 100 W forward and 4 W reflected is SWR 1.5,
    // 96 W to the antenna).
    #[test]
    fn a_hundred_watts_forward_and_four_reflected_is_swr_one_and_a_half() {
        let m = Match::from_powers(100.0, 4.0).unwrap();
        assert!(close(m.gamma, 0.2, 1e-12));
        assert!(close(m.swr, 1.5, 1e-12));
        assert!(close(net_power_w(100.0, 4.0), 96.0, 1e-12));
    }

    // Source: the directivity relation Γm = Γ ± Γd with Γd = 10^(−D/20) (a coupler's
    // leakage adding at unknown phase; common practice). 20 dB true return loss is
    // |Γ| = 0.1; through 40 dB (Γd = 0.01) it reads |Γ| 0.09 to 0.11, 20.92 to 19.17 dB;
    // through 20 dB (Γd = 0.1) anywhere from 0 to 0.2: 13.98 dB to unbounded.
    #[test]
    fn finite_directivity_leaves_a_range_of_return_loss() {
        let truth = 0.1;
        let (low, high) = gamma_range(truth, directivity_gamma(40.0));
        assert!(
            close(return_loss_db(high), 19.17, 5e-3),
            "{}",
            return_loss_db(high)
        );
        assert!(
            close(return_loss_db(low), 20.92, 5e-3),
            "{}",
            return_loss_db(low)
        );
        let (low, high) = gamma_range(truth, directivity_gamma(20.0));
        assert_eq!(low, 0.0);
        assert!(return_loss_db(low).is_infinite());
        assert!(
            close(return_loss_db(high), 13.98, 5e-3),
            "{}",
            return_loss_db(high)
        );
    }

    // Source: computed from 20·log10(1 ± |Γ|·Γd) at SWR 2 (|Γ| = 1/3) and 20 dB
    // directivity (Γd = 0.1): +0.285 and −0.294 dB.
    #[test]
    fn the_forward_error_at_swr_two_through_twenty_db_directivity() {
        let (up, down) = forward_error_db(gamma_from_swr(2.0), directivity_gamma(20.0));
        assert!(close(up, 0.285, 5e-4), "{up}");
        assert!(close(down, -0.294, 5e-4), "{down}");
    }

    #[test]
    fn reflected_at_or_above_forward_is_reversed_and_no_forward_is_no_match() {
        let m = Match::from_powers(1.0, 1.5).unwrap();
        assert!(m.reversed);
        assert!(m.swr.is_infinite() && m.mismatch_loss_db.is_infinite());
        assert!(Match::from_powers(0.0, 1e-3).is_none());
        assert!(Match::from_powers(f64::NAN, 1e-3).is_none());
        let perfect = Match::from_powers(5.0, 0.0).unwrap();
        assert_eq!(perfect.swr, 1.0);
        assert!(perfect.return_loss_db.is_infinite());
    }
}
