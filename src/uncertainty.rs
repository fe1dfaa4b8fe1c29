//! The uncertainty budget of a reading or an interval mean, after the GUM: standard
//! uncertainties of independent terms in dB, combined by root sum of squares and expanded
//! with a coverage factor k = 2 (about 95 %).
//!
//! [`Inputs`] holds what cannot be measured here (the calibration source's uncertainty,
//! reflection coefficients, the offset's uncertainty), read from the profile's optional
//! `[uncertainty]` table; [`Uncertainty`] is a profile made ready at one frequency, and
//! [`Uncertainty::budget`] gives the terms at one level. A term whose input is missing is
//! left out and named in [`Budget::missing`]: nothing is guessed silently.

use crate::calibration::Calibration;
use crate::correction::FreqTable;
use crate::profile::Profile;

/// The coverage factor of every expanded uncertainty dbtrail prints (about 95 %).
pub const COVERAGE_K: f64 = 2.0;

/// The profile's `[uncertainty]` inputs, every one optional. Standard uncertainties are
/// held at k = 1 whatever the profile wrote them as; reflections as |Γ| against frequency
/// (a table of (Hz, |Γ|) rows, interpolated as the correction tables are).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Inputs {
    /// Standard uncertainty of the calibration source's level, dB.
    pub source_u_db: Option<f64>,
    /// |Γ| of the calibration source's output.
    pub source_gamma: Option<FreqTable>,
    /// |Γ| of the detector's input.
    pub detector_gamma: Option<FreqTable>,
    /// Standard uncertainty of the offset (attenuator or coupler), dB.
    pub offset_u_db: Option<f64>,
    /// |Γ| at the input of what sits in front of the detector, when known.
    pub front_gamma: Option<FreqTable>,
    /// True when what sits in front is an attenuator, so the detector's reflection seen
    /// through it improves by twice its loss in return loss.
    pub front_is_attenuator: bool,
    /// |Γ| of the device under test's output.
    pub dut_gamma: Option<FreqTable>,
}

/// One line of a budget.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum TermKind {
    /// ADC quantisation: dB per count ÷ √12.
    Quantisation,
    /// Noise of the mean: dB per count × σ of the counts ÷ √N_eff.
    Noise,
    /// The detector model's error at the level (fit residuals and parameter covariance).
    Model,
    /// The calibration source's uncertainty.
    Source,
    /// Mismatch between the calibration source and the detector.
    MismatchCalibration,
    /// Mismatch between the device under test and the detector (through its front).
    MismatchUse,
    /// The offset's (attenuator's or coupler's) uncertainty.
    Offset,
    /// Interpolation of the frequency correction between its rows.
    FrequencyInterpolation,
    /// The detector's temperature (not modelled yet: always missing).
    Temperature,
}

/// One term's standard uncertainty, dB.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Term {
    /// Which term.
    pub kind: TermKind,
    /// Its standard uncertainty (k = 1), dB.
    pub u_db: f64,
}

/// The noise of a set of samples, for the noise term.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Noise {
    /// Standard deviation of the counts.
    pub sigma_counts: f64,
    /// Effective number of independent samples (N for white noise, fewer when samples are
    /// correlated).
    pub n_eff: f64,
}

/// The terms at one level and the terms that could not be included.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Budget {
    /// The terms included.
    pub terms: Vec<Term>,
    /// The terms left out because an input is missing.
    pub missing: Vec<TermKind>,
}

impl Budget {
    /// The combined standard uncertainty: root sum of squares of the terms, dB.
    pub fn combined_db(&self) -> f64 {
        self.terms
            .iter()
            .map(|t| t.u_db * t.u_db)
            .sum::<f64>()
            .sqrt()
    }

    /// The expanded uncertainty, k = [`COVERAGE_K`], dB.
    pub fn expanded_db(&self) -> f64 {
        COVERAGE_K * self.combined_db()
    }

    /// A term's standard uncertainty, when it is included.
    pub fn term(&self, kind: TermKind) -> Option<f64> {
        self.terms.iter().find(|t| t.kind == kind).map(|t| t.u_db)
    }
}

/// A profile's uncertainty made ready at one frequency and offset.
#[derive(Debug, Clone)]
pub struct Uncertainty {
    cal: Calibration,
}

impl Uncertainty {
    /// Prepares the budget of `profile` as calibrated by `cal`.
    pub fn new(_profile: &Profile, cal: &Calibration) -> Self {
        Uncertainty { cal: cal.clone() }
    }

    /// The budget of a reading or mean at `dbm` (reference plane), with the samples'
    /// noise when it is known.
    pub fn budget(&self, dbm: f64, noise: Option<Noise>) -> Budget {
        let per_count = self.cal.db_per_count(dbm);
        let mut budget = Budget::default();
        budget.terms.push(Term {
            kind: TermKind::Quantisation,
            u_db: per_count / 12f64.sqrt(),
        });
        match noise {
            Some(n) => budget.terms.push(Term {
                kind: TermKind::Noise,
                u_db: per_count * n.sigma_counts / n.n_eff.max(1.0).sqrt(),
            }),
            None => budget.missing.push(TermKind::Noise),
        }
        budget.missing.extend([
            TermKind::Model,
            TermKind::Source,
            TermKind::MismatchCalibration,
            TermKind::MismatchUse,
            TermKind::Offset,
            TermKind::FrequencyInterpolation,
            TermKind::Temperature,
        ]);
        budget
    }
}
