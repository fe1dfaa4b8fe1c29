//! The uncertainty budget of a reading or an interval mean, after the GUM: standard
//! uncertainties of independent terms in dB, combined by root sum of squares and expanded
//! with a coverage factor k = 2 (about 95 %).
//!
//! [`UncertaintyInputs`] holds what cannot be measured here (the calibration source's uncertainty,
//! reflection coefficients, the offset's uncertainty), read from the profile's optional
//! `[uncertainty]` table; [`Uncertainty`] is a profile made ready at one frequency, and
//! [`Uncertainty::budget`] gives the terms at one level. A term whose input is missing is
//! left out and named in [`Budget::missing`]: nothing is guessed silently.

use std::sync::Arc;

use crate::calibration::Calibration;
use crate::correction::FreqTable;
use crate::detector::thermal::ThermalModel;
use crate::profile::{Profile, UncertaintyInputs};

/// What no budget includes yet, besides the temperature term (docs/calibration.md, "What
/// is not in the budget yet"): named wherever a budget says what it leaves out.
pub const NOT_MODELLED: &str = "the correction rows' own uncertainty, the ADC's \
                                reference and divider, drift since calibration";

/// The coverage factor of every expanded uncertainty dbtrail prints (about 95 %).
pub const COVERAGE_K: f64 = 2.0;

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
    /// The detector's temperature: how far the board temperature's own uncertainty moves
    /// a compensated reading (missing without a temperature channel).
    Temperature,
}

impl TermKind {
    /// Every term, in the order a budget is read.
    pub const ALL: [TermKind; 9] = [
        TermKind::Quantisation,
        TermKind::Noise,
        TermKind::Model,
        TermKind::Source,
        TermKind::MismatchCalibration,
        TermKind::MismatchUse,
        TermKind::Offset,
        TermKind::FrequencyInterpolation,
        TermKind::Temperature,
    ];

    /// The term's name for people: on the screen, in `check` and in logs.
    pub fn label(self) -> &'static str {
        match self {
            TermKind::Quantisation => "ADC quantisation",
            TermKind::Noise => "noise of the mean",
            TermKind::Model => "detector model",
            TermKind::Source => "calibration source",
            TermKind::MismatchCalibration => "mismatch at calibration",
            TermKind::MismatchUse => "mismatch in use",
            TermKind::Offset => "offset",
            TermKind::FrequencyInterpolation => "frequency interpolation",
            TermKind::Temperature => "temperature",
        }
    }

    /// The term's name in JSON and CSV: the label in snake case.
    pub fn key(self) -> &'static str {
        match self {
            TermKind::Quantisation => "quantisation",
            TermKind::Noise => "noise",
            TermKind::Model => "model",
            TermKind::Source => "source",
            TermKind::MismatchCalibration => "mismatch_calibration",
            TermKind::MismatchUse => "mismatch_use",
            TermKind::Offset => "offset",
            TermKind::FrequencyInterpolation => "frequency_interpolation",
            TermKind::Temperature => "temperature",
        }
    }
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

impl Noise {
    /// The noise of `n` samples whose counts spread by `sigma_counts` and correlate by
    /// `rho` at lag one: N_eff = N(1 − ρ)/(1 + ρ), with ρ held to 0…1 (a negative estimate
    /// would claim more than N independent samples) and N_eff never under one (a mean is
    /// never noisier than one of its samples).
    pub fn correlated(sigma_counts: f64, n: f64, rho: f64) -> Noise {
        let rho = rho.clamp(0.0, 1.0);
        Noise {
            sigma_counts,
            n_eff: (n * (1.0 - rho) / (1.0 + rho)).max(1.0),
        }
    }
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

/// dB per neper-like unit of a small reflection product: 20/ln 10 = 8.686 dB, the slope
/// of 20·log10(1 + x) at x = 0.
const DB_PER_UNIT: f64 = 20.0 / std::f64::consts::LN_10;

/// The limits of the mismatch error between a source and a load of reflections `gamma_s`
/// and `gamma_l`: (20·log10(1 + |Γs||Γl|), 20·log10(1 − |Γs||Γl|)) dB, when the phases
/// line up one way or the other.
pub fn mismatch_limits_db(gamma_s: f64, gamma_l: f64) -> (f64, f64) {
    let product = gamma_s * gamma_l;
    (
        20.0 * (1.0 + product).log10(),
        20.0 * (1.0 - product).log10(),
    )
}

/// The standard uncertainty of a mismatch of unknown phase: the U-shaped (arcsine)
/// distribution of half-width 8.686·|Γs||Γl| dB has standard deviation 8.686·|Γs||Γl|/√2.
pub fn mismatch_u_db(gamma_s: f64, gamma_l: f64) -> f64 {
    DB_PER_UNIT * gamma_s * gamma_l / std::f64::consts::SQRT_2
}

/// A reflection |Γ| seen through a pad of `pad_db` dB: the wave crosses the pad twice, so
/// the return loss improves by 2·`pad_db` and |Γ| falls by 10^(−pad_db/10).
pub fn gamma_through_pad(gamma: f64, pad_db: f64) -> f64 {
    gamma * 10f64.powf(-pad_db.max(0.0) / 10.0)
}

/// A profile's uncertainty made ready at one frequency and offset.
#[derive(Debug, Clone)]
pub struct Uncertainty {
    cal: Calibration,
    /// The terms that do not depend on the level, in [`TermKind`] order.
    fixed: Vec<Term>,
    /// The level-independent terms whose input is missing.
    fixed_missing: Vec<TermKind>,
    /// What the temperature term is made of, when the board's temperature is read.
    temperature: Option<TemperatureInput>,
}

/// The temperature term's inputs: how the model moves with temperature, and how well the
/// board's temperature is known.
#[derive(Debug, Clone)]
struct TemperatureInput {
    model: Arc<ThermalModel>,
    /// The board temperature's standard uncertainty, K.
    u_k: f64,
}

impl Uncertainty {
    /// Prepares the budget of `profile` as calibrated by `cal` (at its frequency and with
    /// its offset in use).
    pub fn new(profile: &Profile, cal: &Calibration) -> Self {
        let inputs = &profile.uncertainty;
        let hz = cal.freq_hz();
        let gamma = |table: &Option<FreqTable>, at: f64| table.as_ref().map(|t| t.at(at).db);
        let offset_in_use = cal.offset_db();
        let calibration_mismatch = gamma(&inputs.source_gamma, profile.reference_hz)
            .zip(gamma(&inputs.detector_gamma, profile.reference_hz))
            .map(|(s, d)| mismatch_u_db(s, d));
        let use_mismatch = gamma(&inputs.dut_gamma, hz)
            .zip(load_gamma(inputs, hz, offset_in_use))
            .map(|(dut, load)| mismatch_u_db(dut, load));
        let offset = match inputs.offset_u_db {
            Some(u) => Known::Value(u),
            None if offset_in_use == 0.0 => Known::NotNeeded,
            None => Known::Missing,
        };
        let interpolation = match &profile.frequency_correction {
            // Beyond the rows the end value stands in (flagged): its error is unknown.
            Some(table) if table.at(hz).outside => None,
            Some(table) => Some(table.interpolation_u_db(hz)),
            None => (hz == profile.reference_hz).then_some(0.0),
        };
        let mut fixed = Vec::new();
        let mut fixed_missing = Vec::new();
        let mut put = |kind: TermKind, known: Known| match known {
            Known::Value(u_db) => fixed.push(Term { kind, u_db }),
            Known::Missing => fixed_missing.push(kind),
            Known::NotNeeded => {}
        };
        put(TermKind::Source, inputs.source_u_db.into());
        put(TermKind::MismatchCalibration, calibration_mismatch.into());
        put(TermKind::MismatchUse, use_mismatch.into());
        put(TermKind::Offset, offset);
        put(TermKind::FrequencyInterpolation, interpolation.into());
        put(TermKind::Temperature, Known::Missing);
        let plain = Uncertainty {
            cal: cal.clone(),
            fixed,
            fixed_missing,
            temperature: None,
        };
        match cal.thermal() {
            Some(setup) => plain.with_temperature(Arc::clone(&setup.model), setup.channel.u_c),
            None => plain,
        }
    }

    /// The same budget for readings through `cal` (the same profile made ready again, as
    /// with a new zero).
    pub fn with_calibration(mut self, cal: &Calibration) -> Self {
        self.cal = cal.clone();
        self
    }

    /// The same budget for readings compensated by `model` with a board temperature known
    /// to `u_k` (standard, K): its temperature term is the reading's movement per kelvin
    /// at the level times `u_k`.
    pub fn with_temperature(mut self, model: Arc<ThermalModel>, u_k: f64) -> Self {
        self.fixed_missing
            .retain(|&kind| kind != TermKind::Temperature);
        self.temperature = Some(TemperatureInput { model, u_k });
        self
    }

    /// The budget of a reading or mean at `dbm` (reference plane), with the samples'
    /// noise when it is known.
    pub fn budget(&self, dbm: f64, noise: Option<Noise>) -> Budget {
        self.budget_at(dbm, noise, None)
    }

    /// [`Uncertainty::budget`] of a reading compensated at the board temperature `kelvin`
    /// (the model's reference temperature when None).
    pub fn budget_at(&self, dbm: f64, noise: Option<Noise>, kelvin: Option<f64>) -> Budget {
        let per_count = self.cal.db_per_count(dbm);
        let mut budget = Budget::default();
        // Noise of half a count or more dithers the steps away in a mean; below that the
        // steps stay.
        if noise.is_none_or(|n| n.sigma_counts < 0.5) {
            budget.terms.push(Term {
                kind: TermKind::Quantisation,
                u_db: per_count / 12f64.sqrt(),
            });
        }
        match noise {
            Some(n) => budget.terms.push(Term {
                kind: TermKind::Noise,
                u_db: per_count * n.sigma_counts / n.n_eff.max(1.0).sqrt(),
            }),
            None => budget.missing.push(TermKind::Noise),
        }
        let detector_dbm = dbm - self.cal.correction_db() - self.cal.offset_db();
        // Compensated, the model is the one at the board's temperature.
        let model_u_db = match (&self.temperature, kelvin) {
            (Some(input), Some(kelvin)) => input
                .model
                .at_kelvin(kelvin)
                .detector
                .model_u_db(detector_dbm),
            _ => self.cal.detector().model_u_db(detector_dbm),
        };
        match model_u_db {
            Some(u_db) => budget.terms.push(Term {
                kind: TermKind::Model,
                u_db,
            }),
            None => budget.missing.push(TermKind::Model),
        }
        budget.terms.extend_from_slice(&self.fixed);
        budget.missing.extend_from_slice(&self.fixed_missing);
        if let Some(input) = &self.temperature {
            let kelvin = kelvin.unwrap_or(input.model.reference_kelvin());
            let u_db = (input.model.db_per_kelvin(detector_dbm, kelvin) * input.u_k).abs();
            if u_db.is_finite() {
                budget.terms.push(Term {
                    kind: TermKind::Temperature,
                    u_db,
                });
            } else {
                budget.missing.push(TermKind::Temperature);
            }
        }
        budget
    }
}

/// What is known of a level-independent term.
enum Known {
    /// Its standard uncertainty, dB.
    Value(f64),
    /// An input it needs is missing.
    Missing,
    /// Nothing it covers is there (no offset in use).
    NotNeeded,
}

impl From<Option<f64>> for Known {
    fn from(value: Option<f64>) -> Self {
        value.map_or(Known::Missing, Known::Value)
    }
}

/// |Γ| of the load the device under test sees at the reference plane, when known:
/// through an attenuator, the detector's reflection reduced by the pad's loss twice plus
/// the pad's own input reflection when given (the two added, as when their phases line
/// up); in front of anything else, that thing's own input reflection; with nothing in
/// front (no offset), the detector's.
fn load_gamma(inputs: &UncertaintyInputs, hz: f64, offset_db: f64) -> Option<f64> {
    let at = |table: &Option<FreqTable>| table.as_ref().map(|t| t.at(hz).db);
    let detector = at(&inputs.detector_gamma);
    let front = at(&inputs.front_gamma);
    if inputs.front_is_attenuator {
        let through = gamma_through_pad(detector?, offset_db);
        return Some((front.unwrap_or(0.0) + through).min(1.0));
    }
    match front {
        Some(front) => Some(front),
        None if offset_db == 0.0 => detector,
        None => None,
    }
}
