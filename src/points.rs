//! The calibration points file: CSV with a header naming `applied` and `counts` (in any
//! order, each once; `std_counts`, `samples` and `temp_c`, the board temperature in °C,
//! may follow), one measured point per row.
//! `applied` is a level with its unit (`-10dBm`, `2.5mW`, `0.5Vpk`, `1.25Vdc`); `counts`
//! the mean ADC reading at it. Lines starting with `#` are comments; those of the form
//! `# key = value` with a key of [`read_settings`] carry the bench settings the points
//! were measured with, which `dbtrail calibrate` writes and `dbtrail fit` takes up.

use thiserror::Error;

use crate::profile::raw::RawPoint;
use crate::units::{parse_frequency, parse_level};

/// A points file that could not be read, with the line and column it went wrong at.
#[derive(Debug, Error, Clone, PartialEq)]
#[error("{origin}:{line}: {field}: {message}")]
pub struct PointsError {
    /// File name.
    pub origin: String,
    /// 1-based line.
    pub line: u64,
    /// Column name, or `(file)` / `(header)`.
    pub field: String,
    /// What is wrong and what to do.
    pub message: String,
}

/// One point and the line it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct PointRow {
    /// The point.
    pub point: RawPoint,
    /// 1-based line in the file.
    pub line: u64,
}

struct Columns {
    applied: usize,
    counts: usize,
    std_counts: Option<usize>,
    samples: Option<usize>,
    temp_c: Option<usize>,
}

/// Reads a points file given as bytes.
pub fn read_points(bytes: &[u8], origin: &str) -> Result<Vec<PointRow>, PointsError> {
    let fail = |line: u64, field: &str, message: String| PointsError {
        origin: origin.to_string(),
        line,
        field: field.to_string(),
        message,
    };
    if let Err(e) = std::str::from_utf8(bytes) {
        let line = bytes[..e.valid_up_to()]
            .iter()
            .filter(|&&b| b == b'\n')
            .count() as u64
            + 1;
        return Err(fail(
            line,
            "(file)",
            "bytes that are not UTF-8 text; save the file as plain text (UTF-8)".into(),
        ));
    }
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .from_reader(bytes);
    let headers = reader
        .headers()
        .map_err(|e| fail(csv_line(&e), "(header)", e.to_string()))?
        .clone();
    if headers.is_empty() {
        return Err(fail(
            1,
            "(file)",
            "the file is empty; the first line must be a header such as `applied,counts`".into(),
        ));
    }
    let columns = find_columns(&headers).map_err(|m| fail(1, "(header)", m))?;
    let mut rows = Vec::new();
    for record in reader.records() {
        let record = record.map_err(|e| fail(csv_line(&e), "(row)", row_error(&e)))?;
        let line = record.position().map_or(0, |p| p.line());
        let cell = |i: usize| record.get(i).unwrap_or("");
        let applied = cell(columns.applied).to_string();
        parse_level(&applied, true).map_err(|e| fail(line, "applied", e.to_string()))?;
        let counts = number(cell(columns.counts)).ok_or_else(|| {
            fail(
                line,
                "counts",
                format!(
                    "`{}` is not a finite number of ADC counts",
                    cell(columns.counts)
                ),
            )
        })?;
        let std_counts = optional(columns.std_counts.map(cell), "std_counts", line, &fail)?;
        let temp_c = optional(columns.temp_c.map(cell), "temp_c", line, &fail)?;
        let samples = match columns.samples.map(cell).filter(|s| !s.is_empty()) {
            None => None,
            Some(s) => Some(s.parse::<u64>().ok().filter(|&n| n >= 1).ok_or_else(|| {
                fail(
                    line,
                    "samples",
                    format!("`{s}` is not a whole number of samples, 1 or more"),
                )
            })?),
        };
        rows.push(PointRow {
            point: RawPoint {
                applied,
                counts,
                std_counts,
                samples,
                temp_c,
            },
            line,
        });
    }
    if rows.is_empty() {
        return Err(fail(
            1,
            "(file)",
            "no points after the header; add one row per measured level".into(),
        ));
    }
    Ok(rows)
}

fn find_columns(headers: &csv::StringRecord) -> Result<Columns, String> {
    let named = |name: &str| {
        headers
            .iter()
            .enumerate()
            .filter(|(_, h)| h.eq_ignore_ascii_case(name))
            .map(|(i, _)| i + 1)
            .collect::<Vec<_>>()
    };
    for name in ["applied", "counts", "std_counts", "samples", "temp_c"] {
        if let [first, second, ..] = named(name)[..] {
            return Err(format!(
                "two `{name}` columns (columns {first} and {second}); keep one, so that it is \
                 clear which values are meant"
            ));
        }
    }
    let find = |name: &str| headers.iter().position(|h| h.eq_ignore_ascii_case(name));
    let missing = |name: &str| {
        format!(
            "no `{name}` column; the first line must be a header such as `applied,counts` (found: {})",
            headers.iter().collect::<Vec<_>>().join(",")
        )
    };
    Ok(Columns {
        applied: find("applied").ok_or_else(|| missing("applied"))?,
        counts: find("counts").ok_or_else(|| missing("counts"))?,
        std_counts: find("std_counts"),
        samples: find("samples"),
        temp_c: find("temp_c"),
    })
}

fn number(text: &str) -> Option<f64> {
    text.parse::<f64>().ok().filter(|v| v.is_finite())
}

fn optional(
    text: Option<&str>,
    field: &str,
    line: u64,
    fail: &impl Fn(u64, &str, String) -> PointsError,
) -> Result<Option<f64>, PointsError> {
    match text.filter(|s| !s.is_empty()) {
        None => Ok(None),
        Some(s) => number(s)
            .map(Some)
            .ok_or_else(|| fail(line, field, format!("`{s}` is not a finite number"))),
    }
}

fn csv_line(e: &csv::Error) -> u64 {
    e.position().map_or(1, |p| p.line())
}

fn row_error(e: &csv::Error) -> String {
    match e.kind() {
        csv::ErrorKind::UnequalLengths { expected_len, len, .. } => format!(
            "this row has {len} fields but the header has {expected_len}; every row needs one value per column"
        ),
        _ => e.to_string(),
    }
}

/// A setting from a points file's `#` lines and the line it is on.
#[derive(Debug, Clone, PartialEq)]
pub struct Setting<T> {
    /// The value.
    pub value: T,
    /// 1-based line in the file.
    pub line: u64,
}

/// The bench settings a points file states, each `None` when the file does not say.
/// The keys are the profile's own field names.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PointsSettings {
    /// `# adc.bits = 12`
    pub bits: Option<Setting<i64>>,
    /// `# adc.vref = 1.2` (volts)
    pub vref: Option<Setting<f64>>,
    /// `# adc.divider = 2`
    pub divider: Option<Setting<f64>>,
    /// `# adc.zero_counts = 3.5`
    pub zero_counts: Option<Setting<f64>>,
    /// `# reference_frequency = 10MHz`, in Hz
    pub reference_hz: Option<Setting<f64>>,
    /// `# model.kind = table` (table, diode or log)
    pub model: Option<Setting<String>>,
    /// `# model.axis = log-volts` (log-volts or volts)
    pub axis: Option<Setting<String>>,
    /// `# model.temperature = 300` (kelvin)
    pub temperature: Option<Setting<f64>>,
    /// `# ohms = 50`
    pub ohms: Option<Setting<f64>>,
}

fn at<T>(line: u64, value: T) -> Option<Setting<T>> {
    Some(Setting { value, line })
}

/// Reads the settings in a points file's `# key = value` lines. Other `#` lines are
/// comments; a known key whose value does not parse is an error naming its line.
pub fn read_settings(bytes: &[u8], origin: &str) -> Result<PointsSettings, PointsError> {
    let mut settings = PointsSettings::default();
    let text = String::from_utf8_lossy(bytes);
    for (index, raw_line) in text.lines().enumerate() {
        let line = index as u64 + 1;
        let Some((key, value)) = raw_line
            .trim()
            .strip_prefix('#')
            .and_then(|rest| rest.split_once('='))
        else {
            continue;
        };
        let (key, value) = (key.trim(), value.trim());
        let fail = |what: &str| PointsError {
            origin: origin.to_string(),
            line,
            field: key.to_string(),
            message: format!("`{value}` is not {what}; correct the line or delete it"),
        };
        let finite = || number(value).ok_or_else(|| fail("a finite number"));
        let one_of = |names: &[&str], what: &str| {
            names
                .contains(&value)
                .then(|| value.to_string())
                .ok_or_else(|| fail(what))
        };
        match key {
            "adc.bits" => {
                settings.bits = at(line, value.parse().map_err(|_| fail("a whole number"))?)
            }
            "adc.vref" => settings.vref = at(line, finite()?),
            "adc.divider" => settings.divider = at(line, finite()?),
            "adc.zero_counts" => settings.zero_counts = at(line, finite()?),
            "ohms" => settings.ohms = at(line, finite()?),
            "model.temperature" => settings.temperature = at(line, finite()?),
            "reference_frequency" => {
                let hz = parse_frequency(value).map_err(|_| fail("a frequency such as 10MHz"))?;
                settings.reference_hz = at(line, hz);
            }
            "model.kind" => {
                settings.model = at(
                    line,
                    one_of(&["table", "diode", "log"], "table, diode or log")?,
                );
            }
            "model.axis" => {
                settings.axis = at(line, one_of(&["log-volts", "volts"], "log-volts or volts")?)
            }
            _ => {}
        }
    }
    Ok(settings)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_columns_in_any_order_with_comments_and_extras() {
        let text = b"# bench run\ncounts,applied,std_counts\n100.5, -10dBm ,0.4\n900,1.25Vdc,\n";
        let rows = read_points(text, "p.csv").unwrap();
        assert_eq!(rows.len(), 2);
        assert_eq!(rows[0].point.applied, "-10dBm");
        assert_eq!(rows[0].point.counts, 100.5);
        assert_eq!(rows[0].point.std_counts, Some(0.4));
        assert_eq!(rows[1].point.std_counts, None);
        assert_eq!(rows[1].line, 4);
    }

    // Source: the rule in this module's doc: `# key = value` lines with the profile's
    // field names carry settings, other `#` lines are comments, a bad value names its line.
    #[test]
    fn settings_lines_are_read_with_their_line_and_plain_comments_are_skipped() {
        let text = b"# a bench note = not a key\n# adc.bits = 12\n# adc.divider = 2\n\
            # reference_frequency = 10MHz\n# model.kind = diode\napplied,counts\n0dBm,100\n";
        let s = read_settings(text, "p.csv").unwrap();
        assert_eq!(s.bits, Some(Setting { value: 12, line: 2 }));
        assert_eq!(
            s.divider,
            Some(Setting {
                value: 2.0,
                line: 3
            })
        );
        assert_eq!(s.reference_hz.map(|f| f.value), Some(10e6));
        assert_eq!(s.model.map(|m| m.value).as_deref(), Some("diode"));
        assert_eq!(s.vref, None);
        assert_eq!(read_points(text, "p.csv").unwrap().len(), 1);
        let bad = read_settings(b"# adc.vref = 3.3V\n", "p.csv").unwrap_err();
        assert_eq!((bad.line, bad.field.as_str()), (1, "adc.vref"));
        assert!(
            bad.message.contains("`3.3V` is not a finite number"),
            "{bad}"
        );
    }
}
