//! The profile as written in TOML, before any checking: every field a person may write,
//! with serde doing only the types.

use std::fmt;

use serde::de::{self, Visitor};
use serde::{Deserialize, Deserializer, Serialize, Serializer};

use crate::units::{format_frequency, parse_frequency};

/// A whole profile file.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawProfile {
    /// Short name.
    pub name: String,
    /// What the profile is for.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub description: Option<String>,
    /// Reference impedance, ohms (default 50).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ohms: Option<f64>,
    /// The frequency the detector curve was measured at.
    pub reference_frequency: FreqValue,
    /// The ADC front end.
    pub adc: RawAdc,
    /// The detector model and its points.
    pub model: RawModel,
    /// Frequency correction, true minus indicated.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub frequency_correction: Option<RawFreqTable>,
    /// What sits in front of the detector.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub offset: Option<RawOffset>,
    /// Safe levels.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub limits: Option<RawLimits>,
    /// Inputs of the uncertainty budget that cannot be measured here.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub uncertainty: Option<RawUncertainty>,
    /// The stream's board temperature channel.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub temperature: Option<RawTemperature>,
}

/// `[adc]`.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawAdc {
    /// Resolution, 1 to 24.
    pub bits: i64,
    /// Reference voltage at the pin, volts.
    pub vref: f64,
    /// Detector volts / pin volts (default 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub divider: Option<f64>,
    /// Counts with no signal (default 0).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub zero_counts: Option<f64>,
    /// Fraction of full scale taken as clip (default 0.005).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub clip_margin: Option<f64>,
}

/// `[model]`.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawModel {
    /// `table`, `log` or `diode`.
    pub kind: String,
    /// Table axis: `log-volts` (default) or `volts`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub axis: Option<String>,
    /// Diode junction temperature, kelvin (default 300).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub temperature: Option<f64>,
    /// Diode ideality factor (fitted from the points when absent).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub n: Option<f64>,
    /// Diode V_L = Is·RL, volts (fitted from the points when absent).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub vl: Option<f64>,
    /// Diode saturation current's temperature exponent XTI (default 2, a Schottky's).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub xti: Option<f64>,
    /// Diode barrier energy EG, eV (default 0.69, a Schottky's).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub eg_ev: Option<f64>,
    /// Log-amp slope, volts per dB (fitted when absent).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub slope: Option<f64>,
    /// Log-amp intercept, dBm (fitted when absent).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub intercept: Option<f64>,
    /// The calibration points.
    #[serde(default)]
    pub points: Vec<RawPoint>,
}

/// One `[[model.points]]` entry.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawPoint {
    /// The applied level with its unit, e.g. `-10dBm` or `1.25Vdc`.
    pub applied: String,
    /// Mean ADC counts read at that level.
    pub counts: f64,
    /// Standard deviation of the counts, if measured.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub std_counts: Option<f64>,
    /// How many samples were averaged, if known.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub samples: Option<u64>,
    /// The board temperature when the point was taken, °C.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub temp_c: Option<f64>,
}

/// `[temperature]`: the sensor on one channel of the stream. Only `sensor` is required;
/// which other keys apply depends on it.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawTemperature {
    /// 1-based stream channel (default 2).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub channel: Option<i64>,
    /// `ntc-beta`, `ntc-steinhart-hart`, `linear` or `degrees`.
    pub sensor: String,
    /// ntc-beta: resistance at `t0_c`, ohms.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub r0_ohms: Option<f64>,
    /// ntc-beta: the temperature `r0_ohms` is given at, °C (default 25).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub t0_c: Option<f64>,
    /// ntc-beta: β, kelvin.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub beta_k: Option<f64>,
    /// ntc-steinhart-hart: a.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub a: Option<f64>,
    /// ntc-steinhart-hart: b.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub b: Option<f64>,
    /// ntc-steinhart-hart: c.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub c: Option<f64>,
    /// Both NTC kinds: the divider's fixed resistor, ohms.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fixed_ohms: Option<f64>,
    /// Both NTC kinds: `to-ground` (default) or `to-supply`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub placement: Option<String>,
    /// linear: volts per °C.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub volts_per_c: Option<f64>,
    /// linear: output volts at 0 °C.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub volts_at_0c: Option<f64>,
    /// degrees: °C per count (default 0.01).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub c_per_count: Option<f64>,
    /// degrees: °C at count 0 (default −273.15: hundredths of a kelvin).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub c_at_zero: Option<f64>,
    /// The averaging window, seconds (default 5).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub window_s: Option<f64>,
    /// Standard uncertainty of the board temperature, °C (default 0.5).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub u_c: Option<f64>,
}

/// `[frequency_correction]`.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawFreqTable {
    /// `table` (default) or `roll-off`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kind: Option<String>,
    /// Rows in rising frequency.
    pub points: Vec<RawFreqPoint>,
}

/// One (frequency, dB) row.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawFreqPoint {
    /// Frequency.
    pub freq: FreqValue,
    /// dB at that frequency.
    pub db: f64,
}

/// `[offset]`: either `db` or `points`.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawOffset {
    /// A fixed offset, dB.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub db: Option<f64>,
    /// An offset that varies with frequency.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub points: Option<Vec<RawFreqPoint>>,
}

/// `[limits]`.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawLimits {
    /// The detector's safe maximum input, dBm at the detector.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub detector_max_dbm: Option<f64>,
    /// The rated maximum at the reference plane (load or attenuator), dBm.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reference_max_dbm: Option<f64>,
}

/// `[uncertainty]`: every key optional.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq, Default)]
#[serde(deny_unknown_fields)]
pub struct RawUncertainty {
    /// The calibration source's level uncertainty.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source: Option<RawSpread>,
    /// The offset's (attenuator's or coupler's) uncertainty.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub offset: Option<RawSpread>,
    /// The calibration source's output SWR.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source_swr: Option<RawMatch<RawSwrRow>>,
    /// The calibration source's output return loss, dB.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source_return_loss: Option<RawMatch<RawReturnLossRow>>,
    /// The detector input's SWR.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub detector_swr: Option<RawMatch<RawSwrRow>>,
    /// The detector input's return loss, dB.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub detector_return_loss: Option<RawMatch<RawReturnLossRow>>,
    /// The SWR at the input of what sits in front of the detector.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub front_swr: Option<RawMatch<RawSwrRow>>,
    /// The return loss at the input of what sits in front, dB.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub front_return_loss: Option<RawMatch<RawReturnLossRow>>,
    /// True when what sits in front is an attenuator (default false).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub front_is_attenuator: Option<bool>,
    /// The device under test's output SWR.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub dut_swr: Option<RawMatch<RawSwrRow>>,
    /// The device under test's output return loss, dB.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub dut_return_loss: Option<RawMatch<RawReturnLossRow>>,
}

/// An uncertainty as a datasheet or certificate gives it: `{ db = 0.3, k = 2 }` for an
/// expanded value with its coverage factor, `{ db = 0.15 }` for a standard one.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(
    deny_unknown_fields,
    expecting = "an uncertainty as a table: { db = 0.3, k = 2 } for an expanded value with \
                 its coverage factor, or { db = 0.15 } for a standard one"
)]
pub struct RawSpread {
    /// The uncertainty, dB, at coverage factor `k`.
    pub db: f64,
    /// The coverage factor (default 1: a standard uncertainty).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub k: Option<f64>,
}

/// A match figure: one value at every frequency, or rows against frequency.
#[derive(Debug, Clone, PartialEq)]
pub enum RawMatch<Row> {
    /// The same figure at every frequency.
    Single(f64),
    /// Rows in rising frequency.
    Rows(Vec<Row>),
}

/// One `{ freq, swr }` row.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawSwrRow {
    /// Frequency.
    pub freq: FreqValue,
    /// SWR at that frequency, 1 or more.
    pub swr: f64,
}

/// One `{ freq, return_loss }` row.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawReturnLossRow {
    /// Frequency.
    pub freq: FreqValue,
    /// Return loss at that frequency, dB above 0.
    pub return_loss: f64,
}

impl<Row: Serialize> Serialize for RawMatch<Row> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        match self {
            RawMatch::Single(value) => serializer.serialize_f64(*value),
            RawMatch::Rows(rows) => rows.serialize(serializer),
        }
    }
}

impl<'de, Row: Deserialize<'de>> Deserialize<'de> for RawMatch<Row> {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct MatchVisitor<Row>(std::marker::PhantomData<Row>);
        impl<'de, Row: Deserialize<'de>> Visitor<'de> for MatchVisitor<Row> {
            type Value = RawMatch<Row>;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a number, or a list [ … ] of rows with `freq`")
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<Self::Value, E> {
                Ok(RawMatch::Single(v))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Self::Value, E> {
                Ok(RawMatch::Single(v as f64))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Self::Value, E> {
                Ok(RawMatch::Single(v as f64))
            }
            fn visit_seq<A: de::SeqAccess<'de>>(self, seq: A) -> Result<Self::Value, A::Error> {
                Vec::deserialize(de::value::SeqAccessDeserializer::new(seq)).map(RawMatch::Rows)
            }
        }
        deserializer.deserialize_any(MatchVisitor(std::marker::PhantomData))
    }
}

/// A frequency: text with a unit as a person writes it (`"14.2MHz"`), or hertz set by the
/// program itself. A bare number in a file is kept as its text and refused by
/// [`FreqValue::hz`], since its unit would be a guess.
#[derive(Debug, Clone, PartialEq)]
pub enum FreqValue {
    /// Hertz as a number, set by the program (written out with its unit).
    Hz(f64),
    /// Text still to be parsed.
    Text(String),
}

impl FreqValue {
    /// The frequency in hertz, or the reason it is not one.
    pub fn hz(&self) -> Result<f64, crate::units::UnitError> {
        match self {
            FreqValue::Hz(hz) => parse_frequency(&format_frequency(*hz)),
            FreqValue::Text(text) => parse_frequency(text),
        }
    }
}

/// The frequency as written: the text, or the number of hertz.
impl fmt::Display for FreqValue {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FreqValue::Hz(hz) => write!(f, "{hz}"),
            FreqValue::Text(text) => f.write_str(text),
        }
    }
}

impl Serialize for FreqValue {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        match self {
            FreqValue::Hz(hz) => serializer.serialize_str(&format_frequency(*hz)),
            FreqValue::Text(text) => serializer.serialize_str(text),
        }
    }
}

impl<'de> Deserialize<'de> for FreqValue {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct FreqVisitor;
        impl Visitor<'_> for FreqVisitor {
            type Value = FreqValue;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a frequency with its unit, such as \"14.2MHz\"")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<FreqValue, E> {
                Ok(FreqValue::Text(v.to_string()))
            }
            // A bare number is kept as written so that the check names it and asks for
            // its unit, at its line, like any other field.
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<FreqValue, E> {
                Ok(FreqValue::Text(v.to_string()))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<FreqValue, E> {
                Ok(FreqValue::Text(v.to_string()))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<FreqValue, E> {
                Ok(FreqValue::Text(v.to_string()))
            }
        }
        deserializer.deserialize_any(FreqVisitor)
    }
}
