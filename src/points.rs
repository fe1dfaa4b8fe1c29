//! The calibration points file: CSV with a header naming `applied` and `counts` (in any
//! order, each once; `std_counts` and `samples` may follow), one measured point per row.
//! `applied` is a level with its unit (`-10dBm`, `2.5mW`, `0.5Vpk`, `1.25Vdc`); `counts`
//! the mean ADC reading at it. Lines starting with `#` are comments.

use thiserror::Error;

use crate::profile::raw::RawPoint;
use crate::units::parse_level;

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
    for name in ["applied", "counts", "std_counts", "samples"] {
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
}
