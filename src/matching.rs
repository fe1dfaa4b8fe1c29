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

use crate::stats::Bound;

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

/// Why an interval's match is not a plain value.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MatchState {
    /// Both powers are values: every figure is one.
    Value,
    /// The true return loss is at least the one given (SWR at most): reflected power
    /// below its detector's span, or forward power clipped.
    ReturnLossAtLeast,
    /// The true return loss is at most the one given (SWR at least): reflected power
    /// clipped or above its span.
    ReturnLossAtMost,
    /// The measured |Γ| is within the coupler's own leakage: the match is better than
    /// the coupler can resolve, and only the return loss's lower end is known.
    Unresolved,
    /// Reflected power at or above the forward: the channels are swapped, or one is
    /// miscalibrated. No SWR.
    Reversed,
    /// Forward power below its detector's span, or no forward figure at all: no ratio.
    NoForward,
    /// Bounds that lean opposite ways: nothing can be said of the ratio.
    Unknown,
}

impl MatchState {
    /// The state's name in a log's flags cell.
    pub const fn flag(self) -> &'static str {
        match self {
            MatchState::Value => "",
            MatchState::ReturnLossAtLeast => "rl-at-least",
            MatchState::ReturnLossAtMost => "rl-at-most",
            MatchState::Unresolved => "below-directivity",
            MatchState::Reversed => "reversed",
            MatchState::NoForward => "no-forward",
            MatchState::Unknown => "match-unknown",
        }
    }

    /// Every state but a value: those a log's flags cell names.
    pub const FLAGGED: [MatchState; 6] = [
        MatchState::ReturnLossAtLeast,
        MatchState::ReturnLossAtMost,
        MatchState::Unresolved,
        MatchState::Reversed,
        MatchState::NoForward,
        MatchState::Unknown,
    ];

    /// The state a log's flag names (none for a plain value's empty cell).
    pub fn from_flag(flag: &str) -> Option<Self> {
        Self::FLAGGED.into_iter().find(|s| s.flag() == flag)
    }

    /// What it means, in plain words.
    pub fn words(self) -> &'static str {
        match self {
            MatchState::Value => "",
            MatchState::ReturnLossAtLeast => {
                "reflected power is below what its detector reads: the return loss is at least this"
            }
            MatchState::ReturnLossAtMost => {
                "reflected power is past what its detector reads: the return loss is at most this"
            }
            MatchState::Unresolved => "better than the coupler can resolve",
            MatchState::Reversed => {
                "reflected power at or above forward: channels swapped, or a calibration error"
            }
            MatchState::NoForward => "forward power below what its detector reads: no ratio",
            MatchState::Unknown => "powers bounded both ways: no ratio",
        }
    }
}

/// One channel's power over an interval as the match needs it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ArmPower {
    /// Mean power, watts at the reference plane; None when there is no figure.
    pub watts: Option<f64>,
    /// Whether it is a value or a bound.
    pub bound: Bound,
    /// Its expanded uncertainty, dB (k = 2), for a value.
    pub u_db: Option<f64>,
}

/// An interval's match: the figures of the ratio of forward and reflected power, what they
/// are (a value, a bound, or none), their uncertainty from both channels' budgets, and
/// the range the coupler's directivity leaves.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MatchInterval {
    /// What the figures are.
    pub state: MatchState,
    /// The figures of the measured |Γ| (a bound as `state` says); None without a ratio.
    pub figures: Option<Match>,
    /// Net power to the load, watts, when both powers are values.
    pub net_w: Option<f64>,
    /// Expanded uncertainty of the return loss, dB (k = 2), from both channels' budgets.
    pub u_return_loss_db: Option<f64>,
    /// The return loss the true |Γ| may have given the directivity, dB: (lowest,
    /// highest), the highest infinite when the leakage could hide the whole reflection.
    /// Both arms leak: the range holds |Γm|·(1 ± |Γm|·Γd) ± Γd.
    pub return_loss_range_db: Option<(f64, f64)>,
}

impl MatchInterval {
    /// The match of an interval's forward and reflected power through a coupler whose
    /// leakage is Γd.
    pub fn new(forward: ArmPower, reflected: ArmPower, leakage: f64) -> Self {
        let none = |state| MatchInterval {
            state,
            figures: None,
            net_w: None,
            u_return_loss_db: None,
            return_loss_range_db: None,
        };
        let (Some(pf), Some(pr)) = (forward.watts, reflected.watts) else {
            return none(if forward.watts.is_none() {
                MatchState::NoForward
            } else {
                MatchState::Unknown
            });
        };
        let state = match (forward.bound, reflected.bound) {
            (Bound::AtMost | Bound::Unknown, _) => return none(MatchState::NoForward),
            (_, Bound::Unknown) => return none(MatchState::Unknown),
            (Bound::Exact, Bound::Exact) => MatchState::Value,
            (Bound::Exact | Bound::AtLeast, Bound::AtMost) | (Bound::AtLeast, Bound::Exact) => {
                MatchState::ReturnLossAtLeast
            }
            (Bound::Exact, Bound::AtLeast) => MatchState::ReturnLossAtMost,
            (Bound::AtLeast, Bound::AtLeast) => return none(MatchState::Unknown),
        };
        let Some(figures) = Match::from_powers(pf, pr) else {
            return none(MatchState::NoForward);
        };
        if figures.reversed {
            return none(MatchState::Reversed);
        }
        // The reflected arm's leakage adds ±Γd; the forward arm's, a factor 1 ± |Γ|·Γd
        // on the forward wave it divides by (taken at the measured |Γ|, first order).
        let forward_error = figures.gamma * leakage;
        let (low, _) = gamma_range(figures.gamma * (1.0 - forward_error), leakage);
        let (_, high) = gamma_range(figures.gamma * (1.0 + forward_error), leakage);
        let state = if state == MatchState::Value && figures.gamma <= leakage {
            MatchState::Unresolved
        } else {
            state
        };
        let values = forward.bound == Bound::Exact && reflected.bound == Bound::Exact;
        MatchInterval {
            state,
            figures: Some(figures),
            net_w: values.then(|| net_power_w(pf, pr)),
            u_return_loss_db: (state == MatchState::Value)
                .then(|| Some(forward.u_db?.hypot(reflected.u_db?)))
                .flatten(),
            return_loss_range_db: Some((return_loss_db(high.min(1.0)), return_loss_db(low))),
        }
    }
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

    fn value(watts: f64, u_db: f64) -> ArmPower {
        ArmPower {
            watts: Some(watts),
            bound: Bound::Exact,
            u_db: Some(u_db),
        }
    }

    fn bounded(watts: f64, bound: Bound) -> ArmPower {
        ArmPower {
            watts: Some(watts),
            bound,
            u_db: None,
        }
    }

    // Source: JCGM 100:2008 (GUM) 5.1.2, the law of propagation for uncorrelated inputs:
    // the return loss 10·log10(Pf/Pr) is the difference of the two levels in dB, each with
    // sensitivity 1, so its uncertainty is the root sum of squares of theirs (both at
    // k = 2, so the expanded figures combine the same way).
    #[test]
    fn a_return_loss_of_two_values_carries_both_channels_uncertainty() {
        let leakage = directivity_gamma(30.0);
        let m = MatchInterval::new(value(100.0, 0.3), value(4.0, 0.4), leakage);
        assert_eq!(m.state, MatchState::Value);
        let figures = m.figures.unwrap();
        assert!(close(figures.swr, 1.5, 1e-12));
        assert!(close(m.net_w.unwrap(), 96.0, 1e-12));
        assert!(close(m.u_return_loss_db.unwrap(), 0.5, 1e-12));
        // |Γ| 0.2 through 30 dB directivity (Γd 0.0316): the reflected arm's leakage moves
        // it ±Γd, the forward arm's by a factor 1 ± 0.2·Γd: true |Γ| 0.167 to 0.233.
        let (low, high) = m.return_loss_range_db.unwrap();
        let widest = 0.2 * (1.0 + 0.2 * leakage) + leakage;
        let narrowest = 0.2 * (1.0 - 0.2 * leakage) - leakage;
        assert!(close(low, -20.0 * widest.log10(), 1e-9), "{low}");
        assert!(close(high, -20.0 * narrowest.log10(), 1e-9), "{high}");
    }

    // The edge cases of a ratio of bounded powers, each its own state: a reflected power
    // below its span makes the return loss a floor, a clipped one a ceiling, a forward
    // below its span leaves no ratio, and bounds leaning opposite ways say nothing.
    #[test]
    fn bounds_on_either_power_make_the_match_a_bound_or_nothing() {
        let leakage = directivity_gamma(30.0);
        let cases = [
            (
                value(100.0, 0.3),
                bounded(0.01, Bound::AtMost),
                MatchState::ReturnLossAtLeast,
            ),
            (
                bounded(100.0, Bound::AtLeast),
                value(4.0, 0.3),
                MatchState::ReturnLossAtLeast,
            ),
            (
                value(100.0, 0.3),
                bounded(4.0, Bound::AtLeast),
                MatchState::ReturnLossAtMost,
            ),
            (
                bounded(1e-3, Bound::AtMost),
                value(1e-4, 0.3),
                MatchState::NoForward,
            ),
            (
                bounded(100.0, Bound::AtLeast),
                bounded(4.0, Bound::AtLeast),
                MatchState::Unknown,
            ),
            (value(1.0, 0.3), value(1.2, 0.3), MatchState::Reversed),
            (value(100.0, 0.3), value(0.01, 0.3), MatchState::Unresolved),
        ];
        for (forward, reflected, state) in cases {
            let m = MatchInterval::new(forward, reflected, leakage);
            assert_eq!(m.state, state, "{forward:?} {reflected:?}");
            let has_figures = !matches!(
                state,
                MatchState::NoForward | MatchState::Unknown | MatchState::Reversed
            );
            assert_eq!(m.figures.is_some(), has_figures, "{state:?}");
            assert_eq!(m.u_return_loss_db.is_some(), state == MatchState::Value);
            assert_eq!(
                m.net_w.is_some(),
                state == MatchState::Unresolved,
                "{state:?}"
            );
        }
        // 100 W forward, 10 mW reflected: |Γ| 0.01 inside Γd 0.0316, so the return loss is
        // known only to be above 20·log10 of 1/(0.01·(1 + 0.01·Γd) + Γd), with no top.
        let m = MatchInterval::new(value(100.0, 0.3), value(0.01, 0.3), leakage);
        let (low, high) = m.return_loss_range_db.unwrap();
        assert!(close(
            low,
            -20.0 * (0.01 * (1.0 + 0.01 * leakage) + leakage).log10(),
            1e-9
        ));
        assert!(high.is_infinite());
    }
}
