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
}

/// `[frequency_correction]`.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawFreqTable {
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

/// A frequency written as text with a unit (`"14.2MHz"`) or as a number of hertz.
#[derive(Debug, Clone, PartialEq)]
pub enum FreqValue {
    /// Hertz as a number.
    Hz(f64),
    /// Text still to be parsed.
    Text(String),
}

impl FreqValue {
    /// The frequency in hertz, or the reason it is not one.
    pub fn hz(&self) -> Result<f64, crate::units::UnitError> {
        match self {
            FreqValue::Hz(hz) => parse_frequency(&hz.to_string()),
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
                f.write_str("a frequency such as \"14.2MHz\", or a number of hertz")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<FreqValue, E> {
                Ok(FreqValue::Text(v.to_string()))
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<FreqValue, E> {
                Ok(FreqValue::Hz(v))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<FreqValue, E> {
                Ok(FreqValue::Hz(v as f64))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<FreqValue, E> {
                Ok(FreqValue::Hz(v as f64))
            }
        }
        deserializer.deserialize_any(FreqVisitor)
    }
}
