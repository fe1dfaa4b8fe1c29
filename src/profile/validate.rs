//! The second stage of loading: every value of a raw profile checked, the detector model
//! built, and each problem tied to its field path.

mod across;
mod temperature;

use std::sync::Arc;

use super::locate::{did_you_mean, FieldPath};
use super::raw::{
    FreqValue, RawAdc, RawFreqPoint, RawFreqTable, RawMatch, RawModel, RawOffset, RawProfile,
    RawReturnLossRow, RawSpread, RawSwrRow, RawUncertainty,
};
use super::{
    too_many_points, Limits, Model, Profile, ProfilePoint, UncertaintyInputs, MAX_PROFILE_POINTS,
};
use crate::adc::{Adc, DEFAULT_CLIP_MARGIN};
use crate::correction::{CorrectionKind, FreqTable, FrequencyCorrection, Offset, TableError};
use crate::detector::diode::{SaturationLaw, N_BOUNDS, VL_BOUNDS};
use crate::detector::thermal::{ordered_at, ThermalModel};
use crate::detector::{
    rms, Axis, CalPoint, Detector, DiodeDetector, LogAmpDetector, ModelError, ModelKind, PointU,
    TableDetector, MAX_FIT_RMS_DB,
};
use crate::units::{parse_level, DEFAULT_OHMS};

pub(crate) type Found = Vec<(FieldPath, String)>;

/// Where a profile quantity may lie: wide enough for any bench, narrow enough that no
/// reading computed from it overflows to an infinity.
pub(crate) struct Bounds {
    pub(crate) lo: f64,
    pub(crate) hi: f64,
    /// What the quantity is and its range, for messages.
    pub(crate) what: &'static str,
}

const FREQUENCY: Bounds = Bounds {
    lo: 1.0,
    hi: 1e12,
    what: "a frequency lies from 1 Hz to 1 THz",
};
const OHMS: Bounds = Bounds {
    lo: 1.0,
    hi: 1e4,
    what: "the reference impedance must be greater than 0 ohms, from 1 to 10000 (usually 50)",
};
const VREF: Bounds = Bounds {
    lo: 1e-3,
    hi: 100.0,
    what: "the reference voltage must be above 0 V, from 1 mV to 100 V",
};
const DIVIDER: Bounds = Bounds {
    lo: 1e-3,
    hi: 1e3,
    what: "the divider ratio (detector volts / ADC pin volts) must be above 0, from 0.001 \
           to 1000; 1 when there is none",
};
pub(crate) const LEVEL_DBM: Bounds = Bounds {
    lo: -200.0,
    hi: 100.0,
    what: "a level lies from -200 to +100 dBm",
};
const DB_FIGURE: Bounds = Bounds {
    lo: -200.0,
    hi: 200.0,
    what: "a dB figure lies from -200 to +200 dB",
};
const INTERCEPT_DBM: Bounds = Bounds {
    lo: -500.0,
    hi: 500.0,
    what: "the intercept (where the line reaches 0 V) lies from -500 to +500 dBm",
};
/// The size of a log-amp slope, V/dB, either sign.
const SLOPE_V_PER_DB: Bounds = Bounds {
    lo: 1e-6,
    hi: 10.0,
    what: "the slope in V/dB is not zero: its size lies from 1 µV/dB to 10 V/dB, either sign",
};
const N: Bounds = Bounds {
    lo: N_BOUNDS.0,
    hi: N_BOUNDS.1,
    what: "the ideality factor n lies from 0.5 to 5",
};
const VL: Bounds = Bounds {
    lo: VL_BOUNDS.0,
    hi: VL_BOUNDS.1,
    what: "V_L = Is·RL is a voltage above 0, from 1 µV to 10 kV",
};
const XTI: Bounds = Bounds {
    lo: 0.0,
    hi: 10.0,
    what: "the saturation current's temperature exponent XTI lies from 0 to 10 (2 for a \
           Schottky diode, 3 for a pn junction)",
};
const EG_EV: Bounds = Bounds {
    lo: 0.1,
    hi: 3.0,
    what: "the barrier energy EG is in eV, from 0.1 to 3 (0.69 for a Schottky diode, 1.11 \
           for silicon)",
};

/// Collects problems as they are found, so a profile reports all of them at once.
#[derive(Default)]
pub(crate) struct Checker {
    found: Found,
}

impl Checker {
    /// Everything found, or `value` when nothing was.
    pub(crate) fn outcome<T>(self, value: Option<T>) -> Result<T, Found> {
        match value {
            Some(value) if self.found.is_empty() => Ok(value),
            _ => Err(self.found),
        }
    }

    pub(crate) fn fail(&mut self, path: FieldPath, message: impl Into<String>) {
        self.found.push((path, message.into()));
    }

    /// `value` if it is finite and `ok` holds for it; else a problem saying `want`.
    pub(crate) fn number(
        &mut self,
        path: FieldPath,
        value: f64,
        ok: impl Fn(f64) -> bool,
        want: &str,
    ) -> Option<f64> {
        if value.is_finite() && ok(value) {
            Some(value)
        } else if !value.is_finite() {
            self.fail(path, format!("{value} is not a finite number; {want}"));
            None
        } else {
            self.fail(path, format!("{} is out of range; {want}", shown(value)));
            None
        }
    }

    /// `value` if it is finite and within `bounds`.
    pub(crate) fn within(&mut self, path: FieldPath, value: f64, bounds: &Bounds) -> Option<f64> {
        self.number(
            path,
            value,
            |v| (bounds.lo..=bounds.hi).contains(&v),
            bounds.what,
        )
    }

    /// A frequency as written, in hertz, if it parses and lies within [`FREQUENCY`].
    fn frequency(&mut self, path: FieldPath, value: &FreqValue) -> Option<f64> {
        match value.hz() {
            Ok(hz) if hz.is_finite() && (FREQUENCY.lo..=FREQUENCY.hi).contains(&hz) => Some(hz),
            Ok(_) => {
                self.fail(
                    path,
                    format!("`{value}` is out of range; {}", FREQUENCY.what),
                );
                None
            }
            Err(e) => {
                self.fail(path, e.to_string());
                None
            }
        }
    }
}

/// "did you mean `x`? " when `word` is close to one of `names`, else nothing.
fn suggestion(word: &str, names: &[&str]) -> String {
    did_you_mean(word, names)
        .map(|c| format!("did you mean `{c}`? "))
        .unwrap_or_default()
}

/// A number as a person wrote it when it is of everyday size, else in exponent form
/// (`1e-300`, not three hundred zeros).
fn shown(value: f64) -> String {
    if value == 0.0 || (1e-4..1e9).contains(&value.abs()) {
        value.to_string()
    } else {
        format!("{value:e}")
    }
}

pub(super) fn validate(raw: RawProfile) -> Result<Profile, Found> {
    let mut check = Checker::default();
    if raw.name.trim().is_empty() {
        check.fail(
            FieldPath::key("name"),
            "the name is empty; give the profile a short name",
        );
    }
    let ohms = check.within(
        FieldPath::key("ohms"),
        raw.ohms.unwrap_or(DEFAULT_OHMS),
        &OHMS,
    );
    let reference_hz = check.frequency(
        FieldPath::key("reference_frequency"),
        &raw.reference_frequency,
    );
    let adc = check_adc(&mut check, &raw.adc);
    let frequency_correction = raw
        .frequency_correction
        .as_ref()
        .and_then(|table| check_frequency_correction(&mut check, table));
    let offset = check_offset(&mut check, &raw);
    let limits = check_limits(&mut check, &raw);
    let uncertainty = raw
        .uncertainty
        .as_ref()
        .map(|table| check_uncertainty(&mut check, table))
        .unwrap_or_default();
    let temperature = raw
        .temperature
        .as_ref()
        .and_then(|table| temperature::check_temperature_channel(&mut check, table));
    let model_and_points = match (adc.as_ref(), ohms) {
        (Some(adc), Some(ohms)) => check_model(&mut check, &raw.model, adc, ohms),
        _ => None,
    };
    match (
        ohms,
        reference_hz,
        adc,
        model_and_points,
        offset,
        check.found.is_empty(),
    ) {
        (Some(ohms), Some(reference_hz), Some(adc), Some((model, points)), Some(offset), true) => {
            Ok(Profile {
                name: raw.name.trim().to_string(),
                description: raw.description.clone().unwrap_or_default(),
                ohms,
                reference_hz,
                adc,
                model,
                points,
                frequency_correction,
                offset,
                limits,
                uncertainty,
                temperature,
                raw,
            })
        }
        _ => Err(check.found),
    }
}

fn check_adc(check: &mut Checker, raw: &RawAdc) -> Option<Adc> {
    let at = |field: &str| FieldPath::key("adc").then(field);
    let bits = if (1..=24).contains(&raw.bits) {
        Some(raw.bits as u8)
    } else {
        check.fail(
            at("bits"),
            format!("{} bits is out of range; an ADC has 1 to 24 bits", raw.bits),
        );
        None
    };
    let vref = check.within(at("vref"), raw.vref, &VREF);
    let divider = check.within(at("divider"), raw.divider.unwrap_or(1.0), &DIVIDER);
    let clip_margin = check.number(
        at("clip_margin"),
        raw.clip_margin.unwrap_or(DEFAULT_CLIP_MARGIN),
        |v| (0.0..0.5).contains(&v),
        "the clip margin is a fraction of full scale from 0 to below 0.5 (default 0.005)",
    );
    let bits = bits?;
    let full_scale = f64::from((1u32 << bits) - 1);
    let zero_counts = check.number(
        at("zero_counts"),
        raw.zero_counts.unwrap_or(0.0),
        |v| (0.0..full_scale).contains(&v),
        &format!("the zero offset must be from 0 to below full scale ({full_scale} counts)"),
    );
    Some(Adc::new(bits, vref?, divider?, zero_counts?, clip_margin?))
}

fn freq_table(check: &mut Checker, path: &FieldPath, rows: &[RawFreqPoint]) -> Option<FreqTable> {
    let parsed = rows
        .iter()
        .enumerate()
        .map(|(i, row)| {
            let hz = check.frequency(path.at(i).then("freq"), &row.freq);
            let db = check.within(path.at(i).then("db"), row.db, &DB_FIGURE);
            hz.zip(db)
        })
        .collect();
    table_of(check, path, parsed, "db")
}

/// The table of rows that each parsed (None where a row had a problem, already noted);
/// `value` names the rows' second field in messages.
fn table_of(
    check: &mut Checker,
    path: &FieldPath,
    parsed: Vec<Option<(f64, f64)>>,
    value: &str,
) -> Option<FreqTable> {
    let parsed: Option<Vec<(f64, f64)>> = parsed.into_iter().collect();
    FreqTable::new(parsed?)
        .map_err(|e| {
            let field = match e {
                TableError::Empty => path.clone(),
                TableError::BadDb { index } => path.at(index).then(value),
                TableError::BadFrequency { index, .. }
                | TableError::NotIncreasing { index, .. } => path.at(index).then("freq"),
            };
            check.fail(field, e.to_string());
        })
        .ok()
}

fn check_frequency_correction(
    check: &mut Checker,
    raw: &RawFreqTable,
) -> Option<FrequencyCorrection> {
    let path = FieldPath::key("frequency_correction");
    let kind = match raw.kind.as_deref() {
        None => Some(CorrectionKind::Table),
        Some(name) => CorrectionKind::from_name(name).or_else(|| {
            let names = CorrectionKind::NAMES.map(|(n, _)| n);
            let hint = suggestion(name, &names);
            check.fail(
                path.then("kind"),
                format!(
                    "unknown kind `{name}`; {hint}choose table (the rows, interpolated) or \
                     roll-off (a single pole fitted to the rows)"
                ),
            );
            None
        }),
    };
    let table = freq_table(check, &path.then("points"), &raw.points);
    FrequencyCorrection::new(table?, kind?)
        .map_err(|e| check.fail(path.then("kind"), e.to_string()))
        .ok()
}

/// The largest uncertainty or return loss a profile may give, dB: beyond it the figure
/// describes no bench.
const MATCH_DB_MAX: f64 = 200.0;

fn check_uncertainty(check: &mut Checker, raw: &RawUncertainty) -> UncertaintyInputs {
    let path = FieldPath::key("uncertainty");
    let mut spread = |field: &str, value: &Option<RawSpread>| {
        value
            .as_ref()
            .and_then(|v| standard_uncertainty(check, &path.then(field), v))
    };
    let source_u_db = spread("source", &raw.source);
    let offset_u_db = spread("offset", &raw.offset);
    let mut gamma =
        |part: &str, swr: &Option<RawMatch<RawSwrRow>>, rl: &Option<RawMatch<RawReturnLossRow>>| {
            reflection(check, &path, part, swr.as_ref(), rl.as_ref())
        };
    UncertaintyInputs {
        source_u_db,
        offset_u_db,
        source_gamma: gamma("source", &raw.source_swr, &raw.source_return_loss),
        detector_gamma: gamma("detector", &raw.detector_swr, &raw.detector_return_loss),
        front_gamma: gamma("front", &raw.front_swr, &raw.front_return_loss),
        dut_gamma: gamma("dut", &raw.dut_swr, &raw.dut_return_loss),
        front_is_attenuator: raw.front_is_attenuator.unwrap_or(false),
    }
}

/// An uncertainty written at coverage factor k, brought to k = 1.
fn standard_uncertainty(check: &mut Checker, path: &FieldPath, raw: &RawSpread) -> Option<f64> {
    let db = check.number(
        path.then("db"),
        raw.db,
        |v| (0.0..=MATCH_DB_MAX).contains(&v),
        "an uncertainty is 0 dB or more, up to 200 dB",
    );
    let k = check.number(
        path.then("k"),
        raw.k.unwrap_or(1.0),
        |v| v > 0.0 && v <= 10.0,
        "the coverage factor k is above 0, up to 10 (2 for about 95 %; leave it out for a \
         standard uncertainty)",
    );
    Some(db? / k?)
}

/// |Γ| of one part against frequency, from its SWR or its return loss (not both).
fn reflection(
    check: &mut Checker,
    path: &FieldPath,
    part: &str,
    swr: Option<&RawMatch<RawSwrRow>>,
    return_loss: Option<&RawMatch<RawReturnLossRow>>,
) -> Option<FreqTable> {
    let (swr_key, rl_key) = (format!("{part}_swr"), format!("{part}_return_loss"));
    match (swr, return_loss) {
        (None, None) => None,
        (Some(_), Some(_)) => {
            check.fail(
                path.then(&rl_key),
                format!("give either `{swr_key}` or `{rl_key}`, not both"),
            );
            None
        }
        (Some(swr), None) => gamma_table(
            check,
            &path.then(&swr_key),
            swr,
            "swr",
            |r| (&r.freq, r.swr),
            gamma_of_swr,
        ),
        (None, Some(rl)) => gamma_table(
            check,
            &path.then(&rl_key),
            rl,
            "return_loss",
            |r| (&r.freq, r.return_loss),
            gamma_of_return_loss,
        ),
    }
}

/// A |Γ| table from one figure (the same at every frequency) or from rows, each figure
/// turned into |Γ| by `to_gamma`; `value` names the rows' figure field.
fn gamma_table<Row>(
    check: &mut Checker,
    path: &FieldPath,
    raw: &RawMatch<Row>,
    value: &str,
    fields: impl Fn(&Row) -> (&FreqValue, f64),
    to_gamma: fn(&mut Checker, FieldPath, f64) -> Option<f64>,
) -> Option<FreqTable> {
    match raw {
        RawMatch::Single(figure) => {
            let gamma = to_gamma(check, path.clone(), *figure)?;
            FreqTable::new(vec![(FREQUENCY.lo, gamma), (FREQUENCY.hi, gamma)]).ok()
        }
        RawMatch::Rows(rows) => {
            let parsed = rows
                .iter()
                .enumerate()
                .map(|(i, row)| {
                    let (freq, figure) = fields(row);
                    let hz = check.frequency(path.at(i).then("freq"), freq);
                    let gamma = to_gamma(check, path.at(i).then(value), figure);
                    hz.zip(gamma)
                })
                .collect();
            table_of(check, path, parsed, value)
        }
    }
}

/// |Γ| = (SWR − 1)/(SWR + 1), for an SWR of 1 or more.
fn gamma_of_swr(check: &mut Checker, path: FieldPath, swr: f64) -> Option<f64> {
    check
        .number(
            path,
            swr,
            |v| v >= 1.0,
            "an SWR is 1 (a perfect match) or more, e.g. 1.2",
        )
        .map(|swr| (swr - 1.0) / (swr + 1.0))
}

/// |Γ| = 10^(−RL/20), for a return loss above 0 dB.
fn gamma_of_return_loss(check: &mut Checker, path: FieldPath, rl: f64) -> Option<f64> {
    check
        .number(
            path,
            rl,
            |v| v > 0.0 && v <= MATCH_DB_MAX,
            "a return loss is above 0 dB, up to 200 dB, e.g. 20 (written as a positive number)",
        )
        .map(|rl| 10f64.powf(-rl / 20.0))
}

fn check_offset(check: &mut Checker, raw: &RawProfile) -> Option<Offset> {
    db_figure(
        check,
        FieldPath::key("offset"),
        raw.offset.as_ref(),
        &DB_FIGURE,
    )
}

/// A dB figure given as `db` (the same at every frequency) or `points` (a table against
/// frequency), each value within `bounds`; 0 dB when the table is absent.
pub(crate) fn db_figure(
    check: &mut Checker,
    path: FieldPath,
    raw: Option<&RawOffset>,
    bounds: &Bounds,
) -> Option<Offset> {
    match raw.map(|o| (o.db, o.points.as_deref())) {
        None | Some((None, None)) => Some(Offset::Fixed(0.0)),
        Some((Some(db), None)) => check.within(path.then("db"), db, bounds).map(Offset::Fixed),
        Some((None, Some(rows))) => {
            let table = freq_table(check, &path.then("points"), rows)?;
            let rows_path = path.then("points");
            let mut all_within = true;
            for (i, &(_, db)) in table.rows().iter().enumerate() {
                all_within &= check
                    .within(rows_path.at(i).then("db"), db, bounds)
                    .is_some();
            }
            all_within.then_some(Offset::Table(table))
        }
        Some((Some(_), Some(_))) => {
            check.fail(
                path,
                "give either `db` (the same at every frequency) or `points` (a table), not both",
            );
            None
        }
    }
}

fn check_limits(check: &mut Checker, raw: &RawProfile) -> Limits {
    let Some(limits) = raw.limits.as_ref() else {
        return Limits::default();
    };
    let path = FieldPath::key("limits");
    let mut level = |field: &str, value: Option<f64>| {
        value.and_then(|v| check.within(path.then(field), v, &LEVEL_DBM))
    };
    Limits {
        detector_max_dbm: level("detector_max_dbm", limits.detector_max_dbm),
        reference_max_dbm: level("reference_max_dbm", limits.reference_max_dbm),
    }
}

fn check_model(
    check: &mut Checker,
    raw: &RawModel,
    adc: &Adc,
    ohms: f64,
) -> Option<(Model, Vec<ProfilePoint>)> {
    let path = FieldPath::key("model");
    let Some(kind) = ModelKind::from_name(&raw.kind) else {
        let hint = suggestion(&raw.kind, &["table", "log", "diode"]);
        check.fail(
            path.then("kind"),
            format!(
                "unknown model `{}`; {hint}choose table, log or diode",
                raw.kind
            ),
        );
        return None;
    };
    check_fields_belong(check, raw, kind);
    let points = check_points(check, raw, adc, ohms, kind)?;
    let cal: Vec<CalPoint> = points.iter().map(ProfilePoint::cal_point).collect();
    let diode_k = raw.temperature.unwrap_or(300.0);
    let kelvins = across::point_kelvins(&points, diode_k);
    let model = match kind {
        ModelKind::Table | ModelKind::Log if across::several_sets(&points, &kelvins) => {
            let axis = match kind {
                ModelKind::Table => Some(table_axis(check, raw)?),
                _ => None,
            };
            across::build_curves(check, raw, kind, axis, &cal, &kelvins)
        }
        ModelKind::Table => build_table(check, raw, &cal),
        ModelKind::Log => build_log(check, raw, &cal),
        ModelKind::Diode => build_diode(check, raw, &cal, &kelvins, ohms),
    }
    .map(|model| across::one_set(model, &points, &cal, &kelvins))?;
    check_agreement(check, &model, &points, &kelvins).then_some((model, points))
}

/// A model must read its own calibration points within the fit limit: parameters left
/// from another [adc] or impedance would read every level wrong by as much, and nothing
/// in a reading could show it. False, with the problem noted, when it misses.
fn check_agreement(
    check: &mut Checker,
    model: &Model,
    points: &[ProfilePoint],
    kelvins: &[f64],
) -> bool {
    if model.kind == ModelKind::Table {
        return true;
    }
    let errors: Vec<f64> = points
        .iter()
        .zip(kelvins)
        .map(|(p, &kelvin)| model.reads_at(p.volts, kelvin) - p.dbm)
        .collect();
    let rms_db = rms(&errors);
    if rms_db <= MAX_FIT_RMS_DB {
        return true;
    }
    let worst = (0..errors.len())
        .max_by(|&a, &b| errors[a].abs().total_cmp(&errors[b].abs()))
        .unwrap_or(0);
    let missed = format!(
        "misses its own calibration points by {rms_db:.2} dB RMS (worst model.points[{worst}], \
         {}, by {:+.2} dB); at most {MAX_FIT_RMS_DB} dB is allowed",
        points[worst].applied, errors[worst]
    );
    let model_path = FieldPath::key("model");
    if model.fitted_at_load {
        check.fail(
            model_path.then("points"),
            format!(
                "the best {} model {missed}: these points do not follow it (try kind = \"table\"), \
                 or [adc] is wrong",
                model.kind
            ),
        );
        return false;
    }
    let names: Vec<&str> = model.params.iter().map(|(name, _)| *name).collect();
    let values: Vec<String> = model
        .params
        .iter()
        .map(|(name, value)| format!("{name} = {value}"))
        .collect();
    check.fail(
        model_path.then(names[0]),
        format!(
            "with {} the {} model {missed}. Were they fitted under another [adc] or ohms? \
             Delete {} to fit them again from the points",
            values.join(" and "),
            model.kind,
            names.join(" and ")
        ),
    );
    false
}

/// Fields that only some models take must not appear with the others.
fn check_fields_belong(check: &mut Checker, raw: &RawModel, kind: ModelKind) {
    let owners: [(&str, bool, ModelKind); 8] = [
        ("axis", raw.axis.is_some(), ModelKind::Table),
        ("temperature", raw.temperature.is_some(), ModelKind::Diode),
        ("n", raw.n.is_some(), ModelKind::Diode),
        ("vl", raw.vl.is_some(), ModelKind::Diode),
        ("xti", raw.xti.is_some(), ModelKind::Diode),
        ("eg_ev", raw.eg_ev.is_some(), ModelKind::Diode),
        ("slope", raw.slope.is_some(), ModelKind::Log),
        ("intercept", raw.intercept.is_some(), ModelKind::Log),
    ];
    for (field, present, owner) in owners {
        if present && owner != kind {
            check.fail(
                FieldPath::key("model").then(field),
                format!("`{field}` belongs to the {owner} model, but this profile's kind is {kind}; remove it"),
            );
        }
    }
}

fn check_points(
    check: &mut Checker,
    raw: &RawModel,
    adc: &Adc,
    ohms: f64,
    kind: ModelKind,
) -> Option<Vec<ProfilePoint>> {
    let path = FieldPath::key("model").then("points");
    if raw.points.len() > MAX_PROFILE_POINTS {
        check.fail(path, too_many_points(raw.points.len()));
        return None;
    }
    if raw.points.len() < kind.min_points() {
        check.fail(
            path.clone(),
            format!(
                "the {kind} model needs at least {} calibration points; {} given",
                kind.min_points(),
                raw.points.len()
            ),
        );
        return None;
    }
    let before = check.found.len();
    temperature::check_point_temperatures(check, &path, &raw.points);
    let mut points = Vec::with_capacity(raw.points.len());
    for (i, point) in raw.points.iter().enumerate() {
        let level = parse_level(&point.applied, true)
            .map_err(|e| check.fail(path.at(i).then("applied"), e.to_string()))
            .ok();
        let counts = check.number(
            path.at(i).then("counts"),
            point.counts,
            |c| (0.0..=adc.full_scale()).contains(&c),
            &format!(
                "counts run from 0 to the ADC's full scale, {}",
                adc.full_scale()
            ),
        );
        if counts.is_some_and(|c| adc.is_clipped(c)) {
            check.fail(
                path.at(i).then("counts"),
                format!(
                    "{} counts is at ADC clip (≥ {:.0}): the true level may be higher; \
                     re-measure with more attenuation or drop the point",
                    point.counts,
                    adc.clip_threshold()
                ),
            );
        }
        if let Some(std) = point.std_counts {
            check.number(
                path.at(i).then("std_counts"),
                std,
                |v| (0.0..=adc.full_scale()).contains(&v),
                &format!(
                    "a standard deviation of counts is 0 or more, up to the ADC's full scale, {}",
                    adc.full_scale()
                ),
            );
        }
        if point.samples == Some(0) {
            check.fail(
                path.at(i).then("samples"),
                "a point is the mean of at least one sample; give how many were averaged \
                 (1 or more), or leave `samples` out",
            );
        }
        let dbm = level.map(|level| level.power(ohms).dbm());
        if let Some(dbm) = dbm.filter(|dbm| !(LEVEL_DBM.lo..=LEVEL_DBM.hi).contains(dbm)) {
            check.fail(
                path.at(i).then("applied"),
                format!(
                    "`{}` is {dbm:.1} dBm, out of range; {}",
                    point.applied, LEVEL_DBM.what
                ),
            );
        }
        if let (Some(level), Some(dbm), Some(counts)) = (level, dbm, counts) {
            points.push(ProfilePoint {
                applied: point.applied.clone(),
                level,
                dbm,
                counts,
                temp_c: point.temp_c,
                volts: adc.volts(counts),
                u_volts: PointU::from_counts(
                    point.std_counts,
                    point.samples,
                    adc.volts_per_count(),
                ),
            });
        }
    }
    (check.found.len() == before).then_some(points)
}

/// Ties a model error to the point or field it is about.
fn model_problem(check: &mut Checker, error: ModelError) {
    let points = FieldPath::key("model").then("points");
    let path = match &error {
        ModelError::TooFewPoints { .. } | ModelError::FitFailed { .. } => points,
        ModelError::DuplicateLevel { second, .. } => points.at(*second).then("applied"),
        ModelError::NotMonotone { index, .. } | ModelError::NonPositiveOutput { index, .. } => {
            points.at(*index).then("counts")
        }
    };
    check.fail(path, error.to_string());
}

/// The table's axis, log-volts when not given.
fn table_axis(check: &mut Checker, raw: &RawModel) -> Option<Axis> {
    match raw.axis.as_deref() {
        None => Some(Axis::LogVolts),
        Some(name) => Axis::from_name(name).or_else(|| {
            check.fail(
                FieldPath::key("model").then("axis"),
                format!(
                    "unknown axis `{name}`; choose log-volts (diode detectors) or volts (log-amps)"
                ),
            );
            None
        }),
    }
}

fn build_table(check: &mut Checker, raw: &RawModel, cal: &[CalPoint]) -> Option<Model> {
    let axis = table_axis(check, raw)?;
    let table = TableDetector::new(cal, axis)
        .map_err(|e| model_problem(check, e))
        .ok()?;
    Some(model(
        Arc::new(table),
        Some(axis),
        false,
        Vec::new(),
        Vec::new(),
    ))
}

fn build_log(check: &mut Checker, raw: &RawModel, cal: &[CalPoint]) -> Option<Model> {
    let path = FieldPath::key("model");
    let fitted = LogAmpDetector::fit(cal)
        .map_err(|e| model_problem(check, e))
        .ok()?;
    match (raw.slope, raw.intercept) {
        (None, None) => {
            let fitted_ok = slope_fits(fitted.slope()) && intercept_fits(fitted.intercept());
            if !fitted_ok {
                check.fail(
                    path.then("points"),
                    format!(
                        "the line fitted to these points has slope {} V/dB and intercept {} \
                         dBm; {} and {}: the output hardly changes with level (use kind = \
                         \"table\"), or [adc] is wrong",
                        shown(fitted.slope()),
                        shown(fitted.intercept()),
                        SLOPE_V_PER_DB.what,
                        INTERCEPT_DBM.what
                    ),
                );
                return None;
            }
            let params = vec![("slope", fitted.slope()), ("intercept", fitted.intercept())];
            Some(model(Arc::new(fitted), None, true, Vec::new(), params))
        }
        (Some(slope), Some(intercept)) => {
            let slope = check.number(path.then("slope"), slope, slope_fits, SLOPE_V_PER_DB.what);
            let intercept = check.within(path.then("intercept"), intercept, &INTERCEPT_DBM);
            let (slope, intercept) = (slope?, intercept?);
            let detector =
                LogAmpDetector::new(slope, intercept, fitted.span_dbm()).with_covariance(cal);
            let params = vec![("slope", slope), ("intercept", intercept)];
            Some(model(Arc::new(detector), None, false, Vec::new(), params))
        }
        (Some(_), None) | (None, Some(_)) => {
            check.fail(
                path,
                "give both `slope` and `intercept`, or neither to fit them from the points",
            );
            None
        }
    }
}

fn slope_fits(slope: f64) -> bool {
    (SLOPE_V_PER_DB.lo..=SLOPE_V_PER_DB.hi).contains(&slope.abs())
}

fn intercept_fits(intercept: f64) -> bool {
    (INTERCEPT_DBM.lo..=INTERCEPT_DBM.hi).contains(&intercept)
}

fn build_diode(
    check: &mut Checker,
    raw: &RawModel,
    cal: &[CalPoint],
    kelvins: &[f64],
    ohms: f64,
) -> Option<Model> {
    let built = build_diode_at(check, raw, cal, kelvins, ohms)?;
    let (mut built, diode) = built;
    let plain = ThermalModel::diode(diode.clone(), diode.span_dbm(), kelvins);
    let span = across::diode_span(&plain, diode.span_dbm(), cal, kelvins);
    built.thermal = Some(Arc::new(ThermalModel::diode(diode, span, kelvins)));
    Some(built)
}

/// The diode model (n and V_L at the model's temperature) and the diode itself.
fn build_diode_at(
    check: &mut Checker,
    raw: &RawModel,
    cal: &[CalPoint],
    kelvins: &[f64],
    ohms: f64,
) -> Option<(Model, DiodeDetector)> {
    let path = FieldPath::key("model");
    let kelvin = check_temperature(check, raw.temperature.unwrap_or(300.0))?;
    let law = check_law(check, raw)?;
    if let Some(index) = cal.iter().position(|p| p.volts <= 0.0) {
        model_problem(
            check,
            ModelError::NonPositiveOutput {
                index,
                volts: cal[index].volts,
                model: ModelKind::Diode,
            },
        );
        return None;
    }
    match (raw.n, raw.vl) {
        (None, None) => {
            let fit = DiodeDetector::fit_at(cal, kelvins, kelvin, ohms, law)
                .map_err(|e| model_problem(check, e))
                .ok()?;
            let notes = fit
                .at_bound
                .iter()
                .map(|p| format!("the fitted {p} ended on the edge of its search range"))
                .collect();
            let params = vec![("n", fit.detector.n()), ("vl", fit.detector.vl())];
            let diode = fit.detector;
            Some((
                model(Arc::new(diode.clone()), None, true, notes, params),
                diode,
            ))
        }
        (Some(n), Some(vl)) => {
            let (sorted, sorted_kelvins) = ordered_at(cal, kelvins, ModelKind::Diode)
                .map_err(|e| model_problem(check, e))
                .ok()?;
            let n = check.within(path.then("n"), n, &N);
            let vl = check.within(path.then("vl"), vl, &VL);
            let (n, vl) = (n?, vl?);
            let span = sorted
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| {
                    (lo.min(p.dbm), hi.max(p.dbm))
                });
            let diode = DiodeDetector::new(n, vl, kelvin, ohms, span)
                .with_law(law)
                .with_covariance_at(&sorted, &sorted_kelvins);
            let params = vec![("n", n), ("vl", vl)];
            Some((
                model(Arc::new(diode.clone()), None, false, Vec::new(), params),
                diode,
            ))
        }
        (Some(_), None) | (None, Some(_)) => {
            check.fail(
                path,
                "give both `n` and `vl`, or neither to fit them from the points",
            );
            None
        }
    }
}

/// The diode's saturation law: the profile's XTI and EG, a Schottky's where not given.
fn check_law(check: &mut Checker, raw: &RawModel) -> Option<SaturationLaw> {
    let path = FieldPath::key("model");
    let default = SaturationLaw::default();
    let xti = check.within(path.then("xti"), raw.xti.unwrap_or(default.xti), &XTI);
    let eg_ev = check.within(
        path.then("eg_ev"),
        raw.eg_ev.unwrap_or(default.eg_ev),
        &EG_EV,
    );
    Some(SaturationLaw {
        xti: xti?,
        eg_ev: eg_ev?,
    })
}

fn check_temperature(check: &mut Checker, kelvin: f64) -> Option<f64> {
    let path = FieldPath::key("model").then("temperature");
    if kelvin.is_finite() && (0.0..150.0).contains(&kelvin) {
        check.fail(
            path,
            format!("{kelvin} K is far too cold for a bench detector; the temperature is in kelvin (27 °C = 300.15 K)"),
        );
        return None;
    }
    check.number(
        path,
        kelvin,
        |v| (150.0..=500.0).contains(&v),
        "the junction temperature is in kelvin, 150 to 500 (default 300)",
    )
}

fn model(
    detector: Arc<dyn Detector>,
    axis: Option<Axis>,
    fitted_at_load: bool,
    notes: Vec<String>,
    params: Vec<(&'static str, f64)>,
) -> Model {
    Model {
        kind: detector.kind(),
        detector,
        axis,
        fitted_at_load,
        notes,
        params,
        thermal: None,
    }
}

#[cfg(test)]
mod tests {
    use crate::profile::parse_profile;

    const BASE: &str = "name = \"u\"\nreference_frequency = \"10MHz\"\n[adc]\nbits = 12\n\
                        vref = 3.3\n[model]\nkind = \"table\"\npoints = [\n\
                        { applied = \"-20dBm\", counts = 100 },\n\
                        { applied = \"0dBm\", counts = 1500 },\n]\n";

    fn inputs(table: &str) -> super::UncertaintyInputs {
        let text = format!("{BASE}[uncertainty]\n{table}");
        parse_profile(&text, "u.toml")
            .unwrap_or_else(|e| panic!("{e}"))
            .uncertainty
    }

    fn gamma_at(table: &Option<crate::correction::FreqTable>, hz: f64) -> f64 {
        table.as_ref().expect("a reflection table").at(hz).db
    }

    // Source: ../shared/REFERENCES.md (Pozar, from memory; recomputed here):
    // |Γ| = (SWR − 1)/(SWR + 1) and return loss = −20·log10|Γ|, so SWR 1.5 ↔ |Γ| 0.2 ↔
    // 13.979 dB, SWR 2 ↔ 0.33333 ↔ 9.5424 dB, SWR 1.2 ↔ 0.090909 ↔ 20.828 dB.
    #[test]
    fn swr_and_return_loss_become_the_same_reflection() {
        let from_swr = inputs("source_swr = 1.5\ndetector_swr = 2\ndut_swr = 1.2\n");
        let from_rl = inputs(
            "source_return_loss = 13.979400087\ndetector_return_loss = 9.542425094\n\
             dut_return_loss = 20.827853703\n",
        );
        for (inputs, tolerance) in [(&from_swr, 1e-12), (&from_rl, 1e-9)] {
            for hz in [1e6, 435e6, 10e9] {
                assert!((gamma_at(&inputs.source_gamma, hz) - 0.2).abs() < tolerance);
                assert!((gamma_at(&inputs.detector_gamma, hz) - 1.0 / 3.0).abs() < tolerance);
                assert!((gamma_at(&inputs.dut_gamma, hz) - 1.0 / 11.0).abs() < tolerance);
            }
        }
        assert_eq!(from_swr.front_gamma, None);
        assert!(!from_swr.front_is_attenuator);
    }

    // Source: worked by hand — rows are kept against frequency, each turned into |Γ|:
    // SWR 1.5 at 146 MHz is 0.2 and SWR 2 at 440 MHz is 1/3; a return loss of 20 dB is
    // |Γ| = 10^(−20/20) = 0.1.
    #[test]
    fn rows_against_frequency_keep_their_frequencies() {
        let got = inputs(
            "front_swr = [ { freq = \"146MHz\", swr = 1.5 }, { freq = \"440MHz\", swr = 2 } ]\n\
             detector_return_loss = [ { freq = \"1GHz\", return_loss = 20 } ]\n\
             front_is_attenuator = true\n",
        );
        let front = got.front_gamma.as_ref().unwrap();
        assert_eq!(front.rows().len(), 2);
        assert_eq!(front.rows()[0].0, 146e6);
        assert!((front.at(146e6).db - 0.2).abs() < 1e-12);
        assert!((front.at(440e6).db - 1.0 / 3.0).abs() < 1e-12);
        assert!((gamma_at(&got.detector_gamma, 1e9) - 0.1).abs() < 1e-12);
        assert!(got.front_is_attenuator);
    }

    // Source: GUM (JCGM 100) §2.3.5, from memory — an expanded uncertainty U at coverage factor k is
    // k times the standard uncertainty, so 0.3 dB at k = 2 is 0.15 dB standard; without k
    // the value is taken as standard.
    #[test]
    fn uncertainties_are_stored_at_k_one() {
        let got = inputs("source = { db = 0.3, k = 2 }\noffset = { db = 0.07 }\n");
        assert!((got.source_u_db.unwrap() - 0.15).abs() < 1e-15);
        assert_eq!(got.offset_u_db, Some(0.07));
        assert_eq!(got.source_gamma, None);
    }

    // Source: the rule in docs/profiles.md — `[uncertainty]` is optional; a profile
    // without it has no inputs.
    #[test]
    fn a_profile_without_the_table_has_no_inputs() {
        let profile = parse_profile(BASE, "u.toml").unwrap();
        assert_eq!(profile.uncertainty, super::UncertaintyInputs::default());
    }

    // Source: the rule that `calibrate --base` and `fit` write what `check` reads: the demo
    // profile's [uncertainty] and correction kind survive rendering back to TOML.
    #[test]
    fn uncertainty_and_kind_survive_rendering() {
        let text = include_str!("../../profiles/demo-logamp.toml").replace(
            "[frequency_correction]\n",
            "[frequency_correction]\nkind = \"table\"\n",
        );
        let first = parse_profile(&text, "demo.toml").unwrap();
        let rendered = crate::profile::render_profile(&first.raw, "again").unwrap();
        let again = parse_profile(&rendered, "again.toml").unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(again.uncertainty, first.uncertainty);
        assert!(again.uncertainty.dut_gamma.is_some() && again.uncertainty.offset_u_db.is_some());
        assert_eq!(
            again.raw.frequency_correction,
            first.raw.frequency_correction
        );
    }
}
