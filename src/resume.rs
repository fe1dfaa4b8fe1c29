//! Appending to an earlier log: the shape of its rows and the context of its last run,
//! read from its `#` lines and column header, so that a run whose rows would not fit is
//! refused before it starts and one made another way is told apart.

use std::io::{self, BufRead};

use thiserror::Error;

use crate::calibration::Calibration;
use crate::record::{
    context_lines, coupler_header, RunContext, BOARD_COLUMNS, PER_INTERVAL_COLUMNS,
    PER_SAMPLE_COLUMNS, UNCOMPENSATED_COLUMN,
};

/// What a log's rows look like, and how its last run was made.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LogShape {
    /// One row per sample (`counts, volts, dbm, flags`), not per interval.
    pub per_sample: bool,
    /// Channels in each row (a coupler run's: its two arms).
    pub channels: usize,
    /// The rows are a coupler run's: both arms and their match.
    pub coupled: bool,
    /// The rows carry the board's temperature (`uncomp_dbm`, `temp_c`, `temp_flags`);
    /// `channels` then counts the temperature channel too, as the stream does.
    pub board: bool,
    /// The last row was cut part-way: the log does not end with a line end.
    pub cut: bool,
    /// The last run's context lines that say how it was made (profile, frequency, rows).
    made: Vec<String>,
}

/// Why rows cannot be added to a file.
#[derive(Debug, Error)]
pub enum ShapeError {
    /// The file does not start as a dbtrail log.
    #[error(
        "it is not a dbtrail log: its first line is `{first}`, where a log starts with `# dbtrail`"
    )]
    Foreign {
        /// The first line, shortened.
        first: String,
    },
    /// Context lines but no column header: no row was ever written.
    #[error("it has no column header (no row was ever written to it)")]
    NoHeader,
    /// A column header of another program or version.
    #[error("its column header `{header}` (line {line}) is not one dbtrail writes")]
    Columns {
        /// The header as found, shortened.
        header: String,
        /// Its line number, from 1.
        line: u64,
    },
    /// A log written before rows said whether their figures are bounds, or before they
    /// carried their uncertainty.
    #[error(
        "its column header (line {line}) lacks the `bound` or `u_db` columns: it was written \
         by an earlier dbtrail, and the new rows would not fit it; record to a new file"
    )]
    EarlierColumns {
        /// Its line number, from 1.
        line: u64,
    },
    /// The file could not be read.
    #[error("cannot read it: {0}")]
    Io(#[from] io::Error),
}

/// The context lines that say how a run was made: a change in any of them makes a new run.
const MADE_BY: [&str; 3] = ["# profile:", "# frequency:", "# rows:"];

/// Columns of each channel that logs had before the `bound` column (the first of today's):
/// the earlier layouts are today's cut short, before `bound` or before `u_db`.
const PER_SAMPLE_BEFORE_BOUNDS: usize = 4;
const PER_INTERVAL_BEFORE_BOUNDS: usize = 6;

impl LogShape {
    /// Reads a log to its end (a line at a time, so a log of any size costs one line of
    /// memory) for its first line, its column header and its last run's context.
    pub fn scan(mut reader: impl BufRead) -> Result<LogShape, ShapeError> {
        let mut line = Vec::new();
        let mut number = 0u64;
        let mut header: Option<Header> = None;
        let mut made = Vec::new();
        let mut cut = false;
        let mut in_context = true;
        while reader.read_until(b'\n', &mut line)? > 0 {
            number += 1;
            cut = line.last() != Some(&b'\n');
            let text = String::from_utf8_lossy(&line);
            let text = text.trim_end_matches(['\r', '\n']);
            if number == 1 && !text.starts_with("# dbtrail") {
                return Err(ShapeError::Foreign {
                    first: shortened(text),
                });
            }
            if text.starts_with("# resumed") {
                in_context = true;
            }
            if let Some(kind) = MADE_BY.iter().find(|k| text.starts_with(**k)) {
                if in_context && made.len() == MADE_BY.len() {
                    made.clear();
                }
                made.retain(|m: &String| !m.starts_with(kind));
                made.push(made_part(text));
            } else if !text.starts_with('#') {
                if header.is_none() {
                    header = Some(columns(text, number)?);
                }
                in_context = false;
            }
            line.clear();
        }
        let header = header.ok_or(ShapeError::NoHeader)?;
        made.sort();
        Ok(LogShape {
            per_sample: header.per_sample,
            channels: header.channels,
            coupled: header.coupled,
            board: header.board,
            cut,
            made,
        })
    }

    /// Why rows of a run of this kind (a coupler's, or one detector's with or without the
    /// board's temperature) would not fit this log: "it holds … and this run would write
    /// …"; None when they would.
    pub fn other_kind(&self, coupled: bool, board: bool) -> Option<String> {
        let kind = |coupled: bool, board: bool| match (coupled, board) {
            (true, _) => "a coupler run's rows (both arms and their match)",
            (false, true) => "one detector's rows with the board's temperature",
            (false, false) => "one detector's rows without a board temperature",
        };
        ((self.coupled, self.board) != (coupled, board)).then(|| {
            format!(
                "it holds {} and this run would write {}",
                kind(self.coupled, self.board),
                kind(coupled, board)
            )
        })
    }

    /// Which of the last run's context lines differ from those a run with this
    /// calibration and context writes: the words before each line's colon.
    pub fn differences(&self, cal: &Calibration, context: &RunContext) -> Vec<String> {
        self.differences_from(&context_lines(cal, context))
    }

    /// Which of the last run's context lines differ from `ours`, the `#` lines a new run
    /// writes.
    pub fn differences_from(&self, ours: &str) -> Vec<String> {
        let mut ours: Vec<String> = ours
            .lines()
            .filter(|l| MADE_BY.iter().any(|k| l.starts_with(k)))
            .map(made_part)
            .collect();
        ours.sort();
        ours.iter()
            .filter(|line| !self.made.contains(line))
            .map(|line| {
                let name = line.split(':').next().unwrap_or(line);
                name.trim_start_matches("# ").to_string()
            })
            .collect()
    }
}

/// The part of a context line that says how the run was made: all of it, except the rows
/// line's legend after its first `;`.
fn made_part(line: &str) -> String {
    if line.starts_with("# rows:") {
        line.split(';').next().unwrap_or(line).to_string()
    } else {
        line.to_string()
    }
}

/// What a column header dbtrail writes says of its rows.
struct Header {
    channels: usize,
    per_sample: bool,
    coupled: bool,
    board: bool,
}

/// Channels and kind of a column header dbtrail writes.
fn columns(header: &str, line: u64) -> Result<Header, ShapeError> {
    let names: Vec<&str> = header.split(',').collect();
    for per_sample in [true, false] {
        if names
            .iter()
            .copied()
            .eq(coupler_header(per_sample).iter().map(String::as_str))
        {
            return Ok(Header {
                channels: 2,
                per_sample,
                coupled: true,
                board: false,
            });
        }
    }
    let plain = |channels, per_sample| {
        Ok(Header {
            channels,
            per_sample,
            coupled: false,
            board: false,
        })
    };
    for (lead, per, per_sample) in [
        (&["time_s"][..], &PER_SAMPLE_COLUMNS[..], true),
        (&["time_s", "utc"][..], &PER_INTERVAL_COLUMNS[..], false),
    ] {
        if let Some(groups) = board_groups(&names, lead, per) {
            return Ok(Header {
                channels: groups + 1,
                per_sample,
                coupled: false,
                board: true,
            });
        }
    }
    let fits = |lead: &[&str], per: &[&str]| -> Option<usize> {
        let rest = names.strip_prefix(lead)?;
        let channels = rest.len() / per.len();
        let expected = (0..channels).flat_map(|ch| {
            let suffix = if ch == 0 {
                String::new()
            } else {
                format!("_ch{}", ch + 1)
            };
            per.iter().map(move |n| format!("{n}{suffix}"))
        });
        (channels > 0 && rest.len() % per.len() == 0 && rest.iter().copied().eq(expected))
            .then_some(channels)
    };
    if let Some(channels) = fits(&["time_s"], &PER_SAMPLE_COLUMNS) {
        return plain(channels, true);
    }
    if let Some(channels) = fits(&["time_s", "utc"], &PER_INTERVAL_COLUMNS) {
        return plain(channels, false);
    }
    let earlier = |lead: &[&str], columns: &[&str], first: usize| {
        (first..columns.len()).any(|n| fits(lead, &columns[..n]).is_some())
    };
    if earlier(&["time_s"], &PER_SAMPLE_COLUMNS, PER_SAMPLE_BEFORE_BOUNDS)
        || earlier(
            &["time_s", "utc"],
            &PER_INTERVAL_COLUMNS,
            PER_INTERVAL_BEFORE_BOUNDS,
        )
    {
        return Err(ShapeError::EarlierColumns { line });
    }
    Err(ShapeError::Columns {
        header: shortened(header),
        line,
    })
}

/// The power column groups of a header with the board's temperature: after `lead`, each
/// group's `per` columns and `uncomp_dbm`, all with the group's own channel suffix, then
/// the board's columns.
fn board_groups(names: &[&str], lead: &[&str], per: &[&str]) -> Option<usize> {
    let rest = names.strip_prefix(lead)?.strip_suffix(&BOARD_COLUMNS[..])?;
    let width = per.len() + 1;
    if rest.is_empty() || rest.len() % width != 0 {
        return None;
    }
    let fits = rest.chunks(width).all(|group| {
        let suffix = group[0].strip_prefix(per[0]).unwrap_or("");
        (suffix.is_empty() || suffix.starts_with("_ch"))
            && per
                .iter()
                .chain([&UNCOMPENSATED_COLUMN])
                .zip(group)
                .all(|(name, got)| *got == format!("{name}{suffix}"))
    });
    fits.then_some(rest.len() / width)
}

fn shortened(text: &str) -> String {
    let mut short: String = text.chars().take(60).collect();
    if short.len() < text.len() {
        short.push('…');
    }
    short.escape_debug().to_string()
}
