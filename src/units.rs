//! Quantities with units: RF power and voltage levels, frequencies, durations and dB,
//! parsed from what a person types and formatted for a person to read.
//!
//! Power and voltage are related through a reference impedance R (common practice):
//! P = Vrms²/R = Vpk²/(2R) = Vpp²/(8R); dBm = 10·log10(P / 1 mW); dBW = dBm − 30.

use std::fmt;
use std::time::Duration;

use thiserror::Error;

/// The reference impedance used when none is given, in ohms.
pub const DEFAULT_OHMS: f64 = 50.0;

/// 0 °C in kelvin (the definition of the Celsius scale).
pub const CELSIUS_ZERO_K: f64 = 273.15;

const POWER_UNITS: &str = "dBm, dBW, W, mW, uW (or µW), nW, pW";
const VOLTAGE_UNITS: &str = "Vrms, Vpk, Vpp with an optional m or u (µ) prefix, e.g. 350mVpp";
const DC_UNITS: &str = "Vdc (the DC equal to the RF peak), e.g. 1.25Vdc";
const FREQ_UNITS: &str = "Hz, kHz, MHz, GHz in any letter case (mhz is MHz), or k, M, G alone, \
                          e.g. 14.2MHz, 433 MHz, 10k, 2.4GHz";
const DURATION_UNITS: &str = "ms, s, m (minutes), h, d, combined like 1h30m, or plain seconds";

/// What went wrong reading a quantity.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum UnitError {
    /// Nothing was given.
    #[error("empty value; expected {expected}")]
    Empty {
        /// What would have been accepted.
        expected: &'static str,
    },
    /// The text does not start with a number.
    #[error("`{input}` does not start with a number; expected {expected}")]
    NotANumber {
        /// The text as typed.
        input: String,
        /// What would have been accepted.
        expected: &'static str,
    },
    /// NaN or an infinity.
    #[error("`{input}` is not a finite number; expected {expected}")]
    NotFinite {
        /// The text as typed.
        input: String,
        /// What would have been accepted.
        expected: &'static str,
    },
    /// A number with no unit where one is needed.
    #[error("`{input}` has no unit; accepted: {expected}")]
    NoUnit {
        /// The text as typed.
        input: String,
        /// What would have been accepted.
        expected: String,
    },
    /// A frequency written as a bare number: hertz, kilohertz and megahertz are all
    /// plausible on a bench, so none is assumed.
    #[error("`{input}` has no unit: add MHz or kHz (or Hz, if hertz is meant)")]
    FrequencyWithoutUnit {
        /// The text as typed.
        input: String,
    },
    /// A unit this kind of quantity does not take.
    #[error("unknown unit `{unit}` in `{input}`{hint}; accepted: {expected}")]
    UnknownUnit {
        /// The text as typed.
        input: String,
        /// The unit part.
        unit: String,
        /// A hint for a near miss, starting with "; " or empty.
        hint: String,
        /// What would have been accepted.
        expected: String,
    },
    /// A finite number outside the physical range of its quantity.
    #[error("`{input}` is out of range; {range}")]
    OutOfRange {
        /// The text as typed.
        input: String,
        /// The accepted range, in words.
        range: &'static str,
    },
    /// A quantity that must be positive was zero or negative.
    #[error("`{input}` must be greater than zero{why}; expected {expected}")]
    NotPositive {
        /// The text as typed.
        input: String,
        /// Why, starting with ": " or empty.
        why: &'static str,
        /// What would have been accepted.
        expected: &'static str,
    },
}

/// How an RF voltage is stated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VoltageForm {
    /// Root-mean-square.
    Rms,
    /// Peak (amplitude).
    Peak,
    /// Peak to peak.
    PeakToPeak,
    /// A DC voltage equal to the RF peak, used to calibrate a peak detector by injection.
    DcEquivalent,
}

impl VoltageForm {
    /// The unit suffix after `V`.
    pub fn suffix(self) -> &'static str {
        match self {
            VoltageForm::Rms => "rms",
            VoltageForm::Peak => "pk",
            VoltageForm::PeakToPeak => "pp",
            VoltageForm::DcEquivalent => "dc",
        }
    }

    /// Ratio of this form to the peak voltage of a sine wave.
    fn per_peak(self) -> f64 {
        match self {
            VoltageForm::Rms => std::f64::consts::FRAC_1_SQRT_2,
            VoltageForm::Peak | VoltageForm::DcEquivalent => 1.0,
            VoltageForm::PeakToPeak => 2.0,
        }
    }
}

/// An RF level as a person states it: a power, or a sine-wave voltage at some impedance.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Level {
    /// Power in dBm.
    Dbm(f64),
    /// Power in dBW.
    Dbw(f64),
    /// Power in watts.
    Watts(f64),
    /// A voltage in volts, in the given form.
    Volts {
        /// The voltage, in volts.
        volts: f64,
        /// Rms, peak, peak-to-peak or DC equivalent.
        form: VoltageForm,
    },
}

impl Level {
    /// The power this level stands for at `ohms`.
    pub fn power(self, ohms: f64) -> Power {
        match self {
            Level::Dbm(dbm) => Power::from_dbm(dbm),
            Level::Dbw(dbw) => Power::from_dbm(dbw + 30.0),
            Level::Watts(w) => Power::from_watts(w),
            Level::Volts { volts, form } => Power::from_vpk(volts / form.per_peak(), ohms),
        }
    }
}

/// A power, stored in watts.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct Power {
    watts: f64,
}

impl Power {
    /// From watts.
    pub fn from_watts(watts: f64) -> Self {
        Power { watts }
    }
    /// From dBm.
    pub fn from_dbm(dbm: f64) -> Self {
        Power {
            watts: 1e-3 * 10f64.powf(dbm / 10.0),
        }
    }
    /// From the peak voltage of a sine wave across `ohms`.
    pub fn from_vpk(vpk: f64, ohms: f64) -> Self {
        Power {
            watts: vpk * vpk / (2.0 * ohms),
        }
    }
    /// Watts.
    pub fn watts(self) -> f64 {
        self.watts
    }
    /// dBm.
    pub fn dbm(self) -> f64 {
        watts_to_dbm(self.watts)
    }
    /// dBW.
    pub fn dbw(self) -> f64 {
        self.dbm() - 30.0
    }
    /// The voltage of a sine wave of this power across `ohms`, in the given form.
    pub fn volts(self, ohms: f64, form: VoltageForm) -> f64 {
        (2.0 * self.watts * ohms).sqrt() * form.per_peak()
    }
}

/// dBm for a power in watts.
pub fn watts_to_dbm(watts: f64) -> f64 {
    10.0 * (watts / 1e-3).log10()
}

/// Watts for a power in dBm.
pub fn dbm_to_watts(dbm: f64) -> f64 {
    Power::from_dbm(dbm).watts()
}

/// Splits `text` into its leading number and the unit after it (spaces between allowed).
fn split_number<'a>(text: &'a str, expected: &'static str) -> Result<(f64, &'a str), UnitError> {
    let trimmed = text.trim();
    if trimmed.is_empty() {
        return Err(UnitError::Empty { expected });
    }
    let lower = trimmed.to_ascii_lowercase();
    let unsigned = lower.trim_start_matches(['+', '-']);
    if unsigned.starts_with("nan") || unsigned.starts_with("inf") {
        return Err(UnitError::NotFinite {
            input: trimmed.to_string(),
            expected,
        });
    }
    let end = number_end(trimmed.as_bytes());
    let not_a_number = || UnitError::NotANumber {
        input: trimmed.to_string(),
        expected,
    };
    let value: f64 = trimmed[..end].parse().map_err(|_| not_a_number())?;
    if !value.is_finite() {
        return Err(UnitError::NotFinite {
            input: trimmed.to_string(),
            expected,
        });
    }
    Ok((value, trimmed[end..].trim()))
}

/// Length of the decimal number at the start of `b`: sign, digits, point, exponent.
fn number_end(b: &[u8]) -> usize {
    let digits = |mut i: usize| {
        while i < b.len() && b[i].is_ascii_digit() {
            i += 1;
        }
        i
    };
    let mut i = usize::from(matches!(b.first(), Some(b'+' | b'-')));
    i = digits(i);
    if b.get(i) == Some(&b'.') {
        i = digits(i + 1);
    }
    if matches!(b.get(i), Some(b'e' | b'E')) {
        let mut j = i + 1;
        if matches!(b.get(j), Some(b'+' | b'-')) {
            j += 1;
        }
        if b.get(j).is_some_and(u8::is_ascii_digit) {
            i = digits(j);
        }
    }
    i
}

/// Accepts the Unicode minus sign a copied table may carry.
fn normalise(text: &str) -> String {
    text.replace('\u{2212}', "-")
}

fn unknown(input: &str, unit: &str, hint: &str, expected: String) -> UnitError {
    UnitError::UnknownUnit {
        input: input.trim().to_string(),
        unit: unit.to_string(),
        hint: if hint.is_empty() {
            String::new()
        } else {
            format!("; {hint}")
        },
        expected,
    }
}

/// SI prefix multiplier for the small prefixes a detector level uses: m, u, µ, n, p.
fn small_prefix(prefix: &str) -> Option<f64> {
    match prefix {
        "" => Some(1.0),
        "m" => Some(1e-3),
        "u" | "µ" | "μ" => Some(1e-6),
        "n" => Some(1e-9),
        "p" => Some(1e-12),
        _ => None,
    }
}

/// A hint for a prefix that is a near miss of an accepted one.
fn prefix_hint(prefix: &str, unit: &str) -> String {
    match prefix {
        "M" => format!("`M{unit}` would mean mega; for milli write `m{unit}`"),
        "U" => format!("write `u{unit}` or `µ{unit}` for micro"),
        "N" | "P" => format!(
            "prefixes are case-sensitive; write `{}{unit}`",
            prefix.to_lowercase()
        ),
        "k" | "K" | "G" => {
            format!("`{prefix}{unit}` is outside a detector's range; write it in W or dBm")
        }
        _ => String::new(),
    }
}

/// Parses an RF level such as `-10dBm`, `2.5 mW`, `350mVpp`; `allow_dc` also takes `Vdc`.
pub fn parse_level(text: &str, allow_dc: bool) -> Result<Level, UnitError> {
    let text = normalise(text);
    let expected = if allow_dc {
        "a level in dBm, dBW, W, mW, uW (µW), nW, pW, or Vrms, Vpk, Vpp (m and u/µ prefixes), \
         or Vdc (the DC equal to the RF peak), e.g. -10dBm, 2.5mW, 0.5Vpk, 1.25Vdc"
    } else {
        "a level in dBm, dBW, W, mW, uW (µW), nW, pW, or Vrms, Vpk, Vpp (m and u/µ prefixes), \
         e.g. -10dBm, 2.5mW, 350mVpp"
    };
    let (value, unit) = split_number(&text, expected)?;
    let accepted = || {
        let mut list = format!("{POWER_UNITS}; {VOLTAGE_UNITS}");
        if allow_dc {
            list.push_str("; ");
            list.push_str(DC_UNITS);
        }
        list
    };
    let level = match unit.to_ascii_lowercase().as_str() {
        "dbm" => Level::Dbm(value),
        "dbw" => Level::Dbw(value),
        _ => parse_linear_level(&text, value, unit, allow_dc, accepted)?,
    };
    check_positive(&text, level, expected)?;
    check_level_range(&text, level)?;
    Ok(level)
}

/// The levels any quantity of power is taken from: far below thermal noise in any
/// bandwidth to far above any bench, so that every accepted level converts to finite
/// watts, volts and dB.
pub const LEVEL_RANGE_DBM: (f64, f64) = (-200.0, 200.0);
const LEVEL_RANGE: &str = "a level must lie between -200 dBm and +200 dBm (1e-23 W to 1e17 W), \
     or an RF voltage between 1 pV and 1 GV";

fn check_level_range(text: &str, level: Level) -> Result<(), UnitError> {
    let (low, high) = LEVEL_RANGE_DBM;
    let inside = match level {
        Level::Dbm(dbm) => (low..=high).contains(&dbm),
        Level::Dbw(dbw) => (low..=high).contains(&(dbw + 30.0)),
        Level::Watts(w) => (low..=high).contains(&watts_to_dbm(w)),
        Level::Volts { volts, .. } => (1e-12..=1e9).contains(&volts),
    };
    if inside {
        Ok(())
    } else {
        Err(UnitError::OutOfRange {
            input: text.trim().to_string(),
            range: LEVEL_RANGE,
        })
    }
}

/// Refuses a finite `value` outside `range`, naming the range in words.
fn within(
    text: &str,
    value: f64,
    range: std::ops::RangeInclusive<f64>,
    words: &'static str,
) -> Result<(), UnitError> {
    if range.contains(&value) {
        Ok(())
    } else {
        Err(UnitError::OutOfRange {
            input: text.trim().to_string(),
            range: words,
        })
    }
}

/// The frequencies accepted: 1 Hz to 1 THz, past every detector's reach either way.
pub const FREQUENCY_RANGE_HZ: (f64, f64) = (1.0, 1e12);
/// The longest duration accepted: ten years (3650 days), longer than any soak.
pub const DURATION_MAX_S: f64 = 3650.0 * 86400.0;
/// The largest dB figure accepted, either sign.
pub const DB_MAX: f64 = 200.0;

fn parse_linear_level(
    text: &str,
    value: f64,
    unit: &str,
    allow_dc: bool,
    accepted: impl Fn() -> String,
) -> Result<Level, UnitError> {
    if unit.is_empty() {
        return Err(UnitError::NoUnit {
            input: text.trim().to_string(),
            expected: accepted(),
        });
    }
    if let Some(prefix) = unit.strip_suffix(['W', 'w']) {
        let scale = small_prefix(prefix)
            .ok_or_else(|| unknown(text, unit, &prefix_hint(prefix, "W"), accepted()))?;
        return Ok(Level::Watts(value * scale));
    }
    let (prefix, form_text) =
        split_volt_unit(unit).ok_or_else(|| unknown(text, unit, "", accepted()))?;
    let form = match form_text.to_ascii_lowercase().as_str() {
        "rms" => VoltageForm::Rms,
        "pk" => VoltageForm::Peak,
        "pp" => VoltageForm::PeakToPeak,
        "dc" if allow_dc => VoltageForm::DcEquivalent,
        "dc" => {
            let hint = "Vdc names a calibration point (the DC equal to the RF peak); here write the same number as Vpk";
            return Err(unknown(text, unit, hint, accepted()));
        }
        "" => {
            let hint = "say which voltage: Vrms, Vpk or Vpp";
            return Err(unknown(text, unit, hint, accepted()));
        }
        _ => return Err(unknown(text, unit, "", accepted())),
    };
    let unit_name = format!("V{}", form.suffix());
    let scale = small_prefix(prefix)
        .ok_or_else(|| unknown(text, unit, &prefix_hint(prefix, &unit_name), accepted()))?;
    Ok(Level::Volts {
        volts: value * scale,
        form,
    })
}

/// Splits `mVpp` into (`m`, `pp`): the prefix before the V and the form after it.
fn split_volt_unit(unit: &str) -> Option<(&str, &str)> {
    let at = unit.find(['V', 'v'])?;
    Some((&unit[..at], &unit[at + 1..]))
}

fn check_positive(text: &str, level: Level, expected: &'static str) -> Result<(), UnitError> {
    let (value, why) = match level {
        Level::Dbm(_) | Level::Dbw(_) => return Ok(()),
        Level::Watts(w) => (
            w,
            ": a power in watts is never zero or negative (use dBm for small levels)",
        ),
        Level::Volts { volts, .. } => (volts, ": an RF voltage is a magnitude"),
    };
    if value > 0.0 {
        Ok(())
    } else {
        Err(UnitError::NotPositive {
            input: text.trim().to_string(),
            why,
            expected,
        })
    }
}

/// Parses a frequency such as `14.2MHz`, `433 MHz`, `2.4GHz`, `10k` or `50Hz`; in hertz,
/// within [`FREQUENCY_RANGE_HZ`]. The unit is required: `435` could mean hertz, kilohertz
/// or megahertz, and a wrong guess moves the frequency correction silently.
pub fn parse_frequency(text: &str) -> Result<f64, UnitError> {
    let range = "a frequency lies from 1 Hz to 1 THz";
    let (low, high) = FREQUENCY_RANGE_HZ;
    let normalised = normalise(text);
    if let Ok((_, "")) = split_number(&normalised, "") {
        return Err(UnitError::FrequencyWithoutUnit {
            input: normalised.trim().to_string(),
        });
    }
    match parse_hertz(text) {
        Ok(hz) => within(text, hz, low..=high, range).map(|()| hz),
        Err(UnitError::OutOfRange { input, .. }) => Err(UnitError::OutOfRange { input, range }),
        Err(e) => Err(e),
    }
}

/// Parses a positive number of hertz with a frequency's units, any size, a bare number
/// being hertz (a sample rate's own range and unit are its user's to check).
pub fn parse_hertz(text: &str) -> Result<f64, UnitError> {
    let text = normalise(text);
    let expected = "a frequency such as 14.2MHz, 433 MHz, 10k or 2.4GHz";
    let (value, unit) = split_number(&text, expected)?;
    let scale = match unit {
        "m" => {
            let hint = "write M or MHz for megahertz (a lone m reads like a wavelength band)";
            return Err(unknown(&text, unit, hint, FREQ_UNITS.into()));
        }
        "M" => 1e6,
        _ => match unit.to_ascii_lowercase().as_str() {
            "" | "hz" => 1.0,
            "k" | "khz" => 1e3,
            "mhz" => 1e6,
            "g" | "ghz" => 1e9,
            _ => return Err(unknown(&text, unit, "", FREQ_UNITS.into())),
        },
    };
    let hz = value * scale;
    if hz <= 0.0 {
        return Err(UnitError::NotPositive {
            input: text.trim().to_string(),
            why: "",
            expected,
        });
    }
    within(&text, hz, 0.0..=f64::MAX, "more hertz than a number holds")?;
    Ok(hz)
}

/// Parses a duration such as `90s`, `5m`, `2h`, `1h30m`, `250ms`, or plain seconds.
pub fn parse_duration(text: &str) -> Result<Duration, UnitError> {
    let text = normalise(text);
    let expected = "a duration such as 90s, 5m, 2h or 1h30m";
    let mut rest = text.trim();
    if rest.is_empty() {
        return Err(UnitError::Empty { expected });
    }
    let mut seconds = 0.0;
    while !rest.is_empty() {
        let (value, after) = split_number(rest, expected)?;
        if value < 0.0 {
            return Err(UnitError::NotPositive {
                input: text.trim().to_string(),
                why: ": a duration cannot be negative",
                expected,
            });
        }
        let unit_len = after
            .find(|c: char| c.is_ascii_digit() || c == '.')
            .unwrap_or(after.len());
        let scale = match after[..unit_len].trim() {
            "" if unit_len == after.len() => 1.0,
            "ms" => 1e-3,
            "s" | "sec" => 1.0,
            "m" | "min" => 60.0,
            "h" | "hr" => 3600.0,
            "d" => 86400.0,
            unit => return Err(unknown(&text, unit, "", DURATION_UNITS.into())),
        };
        seconds += value * scale;
        rest = after[unit_len..].trim_start();
    }
    let range = "a duration must be 0, or lie between 1 ns and ten years (3650d)";
    if seconds != 0.0 {
        within(&text, seconds, 1e-9..=DURATION_MAX_S, range)?;
    }
    Ok(Duration::from_secs_f64(seconds))
}

/// Parses a dB figure such as `40dB`, `-0.5 dB` or a plain number.
pub fn parse_db(text: &str) -> Result<f64, UnitError> {
    let text = normalise(text);
    let (value, unit) = split_number(&text, "a figure in dB such as 40dB")?;
    match unit.to_ascii_lowercase().as_str() {
        "" | "db" => {
            within(
                &text,
                value,
                -DB_MAX..=DB_MAX,
                "a figure in dB must lie between -200 dB and +200 dB",
            )?;
            Ok(value)
        }
        _ => Err(unknown(&text, unit, "", "dB, or a plain number".into())),
    }
}

/// A number with an SI prefix chosen so that it reads 1 to 999, to four significant digits.
pub struct Si {
    value: f64,
    unit: &'static str,
}

/// Formats `value` (in base units) with an SI prefix: `Si::new(1e-4, "W")` shows `100.0 µW`.
impl Si {
    /// A value in base units, with its unit symbol.
    pub fn new(value: f64, unit: &'static str) -> Self {
        Si { value, unit }
    }
}

impl fmt::Display for Si {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        const PREFIXES: [(f64, &str); 9] = [
            (1e9, "G"),
            (1e6, "M"),
            (1e3, "k"),
            (1.0, ""),
            (1e-3, "m"),
            (1e-6, "µ"),
            (1e-9, "n"),
            (1e-12, "p"),
            (1e-15, "f"),
        ];
        let magnitude = self.value.abs();
        let (scale, prefix) = PREFIXES
            .iter()
            .copied()
            .find(|(scale, _)| magnitude >= *scale * 0.999_95)
            .unwrap_or(PREFIXES[PREFIXES.len() - 1]);
        let scaled = self.value / scale;
        let decimals = match scaled.abs() {
            m if m >= 99.995 => 1,
            m if m >= 9.9995 => 2,
            _ => 3,
        };
        write!(f, "{scaled:.decimals$} {prefix}{}", self.unit)
    }
}

/// A frequency written compactly and exactly, e.g. `14.2MHz`, for files a person edits.
pub fn format_frequency(hz: f64) -> String {
    let (scale, unit) = if hz >= 1e9 {
        (1e9, "GHz")
    } else if hz >= 1e6 {
        (1e6, "MHz")
    } else if hz >= 1e3 {
        (1e3, "kHz")
    } else {
        (1.0, "Hz")
    };
    let scaled = hz / scale;
    if scaled * scale == hz {
        format!("{scaled}{unit}")
    } else {
        format!("{hz}Hz")
    }
}

/// Seconds as a clock, `mm:ss` or `h:mm:ss`.
pub fn format_clock(seconds: f64) -> String {
    let total = seconds.max(0.0) as u64;
    let (h, m, s) = (total / 3600, total / 60 % 60, total % 60);
    if h > 0 {
        format!("{h}:{m:02}:{s:02}")
    } else {
        format!("{m:02}:{s:02}")
    }
}

/// A signed dB figure with a sign always shown, e.g. `+0.80 dB`.
pub fn format_signed_db(db: f64) -> String {
    format!("{db:+.2} dB")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn number_split_handles_exponents_and_units_starting_with_letters() {
        assert_eq!(split_number("1e-3W", "").unwrap(), (1e-3, "W"));
        assert_eq!(split_number("-10 dBm", "").unwrap(), (-10.0, "dBm"));
        assert_eq!(split_number("5e", "").unwrap(), (5.0, "e"));
    }
}
